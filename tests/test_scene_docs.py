"""The object parameter tables of scenes/README.md (tools/scene_docs.py) against their declarations.

Source: the tables are generated from the ``ParamSpec`` declarations in
render/geometry/objects.py, so the reference here is the registry itself and the signatures
Python callers see (common practice for generated documentation, no outside source). The tests
fail when a declaration changes and the README section was not regenerated.
"""

import dataclasses
import importlib.util
import inspect
import json
import sys
from pathlib import Path

import pytest

from render.geometry.objects import OBJECT_BUILDERS

REPO = Path(__file__).resolve().parents[1]
README = REPO / "scenes" / "README.md"


@pytest.fixture(scope="module")
def tool():
    spec = importlib.util.spec_from_file_location("scene_docs", REPO / "tools" / "scene_docs.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    try:
        spec.loader.exec_module(module)
    finally:
        sys.modules.pop(spec.name, None)
    return module


def _section_rows(text: str, tool) -> dict[tuple[str, str], list[str]]:
    """(kind, parameter) -> table cells, read from the README's generated section."""
    inside = text[text.index(tool.BEGIN) : text.index(tool.END)]
    rows: dict[tuple[str, str], list[str]] = {}
    kind = None
    for line in inside.splitlines():
        if line.startswith("#### `"):
            kind = line.split("`")[1]
        elif line.startswith("| `"):
            cells = [c.strip() for c in line.strip("|").split(" | ")]
            rows[(kind, cells[0].strip("`"))] = cells
    return rows


def test_readme_section_is_up_to_date(tool):
    text = README.read_text(encoding="utf-8")
    assert tool.replace_section(text, tool.parameter_section()) == text, (
        "scenes/README.md is out of date: run python tools/scene_docs.py"
    )
    assert tool.main(["--check"]) == 0


def test_every_scene_parameter_listed_with_its_declared_default(tool):
    rows = _section_rows(README.read_text(encoding="utf-8"), tool)
    wanted = {(kind, s.name) for kind, entry in OBJECT_BUILDERS.items() for s in entry.function.specs if s.scene}
    assert set(rows) == wanted  # every settable parameter, and no builder-only detail
    for (kind, name), cells in rows.items():
        _, type_, default, unit, _, meaning = cells
        declared = inspect.signature(OBJECT_BUILDERS[kind].function).parameters[name].default
        assert default == ("derived" if declared is None else f"`{json.dumps(declared)}`"), (kind, name)
        spec = OBJECT_BUILDERS[kind].function.spec(name)
        assert unit == spec.unit and type_ in ("float", "integer", "string", "boolean"), (kind, name)
        assert meaning, f"{kind}.{name} has no meaning: give its ParamSpec a doc"


def test_changed_declaration_fails_the_check_until_regenerated(tool, tmp_path, monkeypatch):
    copy = tmp_path / "README.md"
    copy.write_text(README.read_text(encoding="utf-8"), encoding="utf-8")
    car = OBJECT_BUILDERS["car"].function
    specs = tuple(dataclasses.replace(s, maximum=9.0) if s.name == "length_m" else s for s in car.specs)
    monkeypatch.setattr(car, "specs", specs)
    before = copy.read_bytes()
    assert tool.main(["--check", "--readme", str(copy)]) == 1
    assert copy.read_bytes() == before  # --check never writes
    assert tool.main(["--readme", str(copy)]) == 0
    assert "| `length_m` | float | derived | m | 2 <= value <= 9 |" in copy.read_text(encoding="utf-8")
    assert tool.main(["--check", "--readme", str(copy)]) == 0


def test_replace_section_keeps_the_rest_and_needs_both_markers(tool):
    text = f"intro\n{tool.BEGIN}\nold\n{tool.END}\noutro\n"
    assert (
        tool.replace_section(text, f"{tool.BEGIN}\nnew\n{tool.END}\n")
        == f"intro\n{tool.BEGIN}\nnew\n{tool.END}\noutro\n"
    )
    for broken in (
        "intro\n",
        f"{tool.BEGIN}\n",
        f"{tool.END}\n{tool.BEGIN}\n",
        f"{tool.BEGIN}\n{tool.BEGIN}\n{tool.END}\n",
    ):
        with pytest.raises(ValueError):
            tool.replace_section(broken, "x\n")
