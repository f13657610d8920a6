"""Study files: which scenes and variants, which setups, what to compute.

A *study file* is TOML of lampcast's own layout (documented in ``scenes/README.md``)::

    [study]
    name = "Linden Row options"
    scenes = ["a.toml", "b.toml"]          # scenes used as they are (optional)
    template = "street.toml"               # a scene swept over [sweep] (optional)
    objective = "annual_kwh"               # the result column options are ranked by
    goal = "min"                           # "min" or "max"

    [sweep]                                # keys of the template, as key paths
    "luminaire_rows[0].spacing_m" = [24.0, 28.0, 32.0]
    "luminaire_rows[0].mounting_height_m" = { from = 5.0, to = 8.0, step = 1.0 }

    [compute]
    setups = ["led-3000k", "led-3000k-half"]   # default: every setup of each scene
    lighting_class = "P4"                      # default: each scene's [calc]
    colours = false                            # colour figures of the tagged objects
    colour_view = "footway"                    # the view they are seen in (default: the first)
    thumbnails = ["footway"]                   # views rendered small, one PNG per row
    thumbnail_width = 240

Every mistake is reported with the study file and the key, as for scene files. Relative paths
resolve against the study file's folder. A sweep's values are the cartesian product of every
key's list, in the order the keys are written; a range ``{from, to, step}`` includes ``to``
when it falls on a step (to a millionth of a step).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from render.errors import ProblemList, input_error
from render.scene.schema import Field, check_table, shown

__all__ = ["MAX_VARIANTS", "ComputeSettings", "StudySpec", "parse_key_path", "read_study"]

#: Most scene variants one study may expand to (scenes + sweep combinations); a larger study
#: is split into several files. Own choice: a study of this size runs for hours on one machine.
MAX_VARIANTS = 10_000
#: Most values one sweep key may take.
MAX_SWEEP_VALUES = 1_000

STUDY_SPEC = {
    "name": Field("str", default="untitled study"),
    "description": Field("str", default=""),
    "scenes": Field("strlist", default=[]),
    "template": Field("str", default=None),
    "objective": Field("str", default="annual_kwh", help="the result column options are ranked by"),
    "goal": Field("str", default="min", choices=("min", "max")),
}

COMPUTE_SPEC = {
    "setups": Field("strlist", default=[]),
    "lighting_class": Field("str", default=None),
    "colours": Field("bool", default=False),
    "colour_view": Field("str", default=None),
    "thumbnails": Field("strlist", default=[]),
    "thumbnail_width": Field("int", default=240, min=16, max=1920),
}

TOP = {
    "study": Field("table", default={}),
    "sweep": Field("table", default={}),
    "compute": Field("table", default={}),
}


@dataclass(frozen=True)
class ComputeSettings:
    """What is computed for every scene variant × setup."""

    setups: tuple[str, ...] = ()  # empty: every setup of the scene
    lighting_class: str | None = None  # None: the scene's own [calc]
    colours: bool = False
    colour_view: str | None = None
    thumbnails: tuple[str, ...] = ()
    thumbnail_width: int = 240

    def to_json(self) -> dict[str, Any]:
        return {
            "setups": list(self.setups),
            "lighting_class": self.lighting_class,
            "colours": self.colours,
            "colour_view": self.colour_view,
            "thumbnails": list(self.thumbnails),
            "thumbnail_width": self.thumbnail_width,
        }


@dataclass(frozen=True)
class StudySpec:
    """A checked study file."""

    path: Path
    name: str
    description: str
    scenes: tuple[Path, ...]
    template: Path | None
    sweep: tuple[tuple[str, tuple[Any, ...]], ...]  # (key path, values) in file order
    objective: str
    goal: str
    compute: ComputeSettings = field(default_factory=ComputeSettings)

    @property
    def variant_count(self) -> int:
        """Scenes plus sweep combinations (1 combination when the template has no sweep)."""
        combos = math.prod(len(v) for _, v in self.sweep) if self.template is not None else 0
        return len(self.scenes) + combos


def parse_key_path(text: str) -> tuple[str | int, ...]:
    """``"luminaire_rows[0].spacing_m"`` → ``("luminaire_rows", 0, "spacing_m")``; a malformed
    path raises ``ValueError``."""
    parts: list[str | int] = []
    for piece in text.split("."):
        if not piece:
            raise ValueError("empty key")
        name, _, rest = piece.partition("[")
        if not name and not parts:
            raise ValueError("a key path starts with a key")
        if name:
            parts.append(name)
        while rest:
            index, close, rest = rest.partition("]")
            if not close or not index.isdigit():
                raise ValueError(f"bad index in {piece!r}: expected [N]")
            parts.append(int(index))
            if rest:
                if not rest.startswith("["):
                    raise ValueError(f"unexpected text after an index in {piece!r}")
                rest = rest[1:]
    if not parts or any(p == "" for p in parts):
        raise ValueError("empty key")
    return tuple(parts)


def _range_values(spec: dict, where: str, problems: ProblemList) -> tuple[float, ...] | None:
    keys = set(spec)
    if keys != {"from", "to", "step"}:
        problems.add(where, "a range is { from = A, to = B, step = S }")
        return None
    a, b, step = (spec[k] for k in ("from", "to", "step"))
    if not all(isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v) for v in (a, b, step)):
        problems.add(where, "from, to and step must be finite numbers")
        return None
    if not step > 0 or b < a:
        problems.add(where, "expected step > 0 and to ≥ from")
        return None
    n = math.floor((b - a) / step + 1e-6) + 1
    if n > MAX_SWEEP_VALUES:
        problems.add(where, f"{n:,} values; a sweep key takes at most {MAX_SWEEP_VALUES:,}")
        return None
    return tuple(float(a + i * step) for i in range(n))


def _sweep(table: dict, problems: ProblemList) -> tuple[tuple[str, tuple[Any, ...]], ...]:
    out = []
    for key, value in table.items():
        where = f"sweep.{shown(key)}"
        try:
            parse_key_path(key)
        except ValueError as err:
            problems.add(where, f"not a key path of the template scene ({err}); e.g. luminaire_rows[0].spacing_m")
            continue
        if isinstance(value, dict):
            values = _range_values(value, where, problems)
        elif isinstance(value, list) and 0 < len(value) <= MAX_SWEEP_VALUES:
            ok = all(isinstance(v, int | float | str | bool) for v in value)
            ok = ok and all(math.isfinite(v) for v in value if isinstance(v, float))
            values = tuple(value) if ok else None
            if not ok:
                problems.add(where, "values must be numbers, strings or booleans (finite)")
        else:
            problems.add(where, f"expected a list of 1 to {MAX_SWEEP_VALUES:,} values or a range {{from, to, step}}")
            values = None
        if values is not None:
            out.append((key, values))
    return tuple(out)


def read_study(path: str | os.PathLike) -> StudySpec:
    """Read and check a study file; an :class:`~render.errors.InputError` lists every problem."""
    from render.fileio import read_user_toml

    path = Path(path)
    doc = read_user_toml(path, "study file", "a UTF-8 TOML study file")
    problems = ProblemList(path)
    top = check_table(doc, TOP, "", problems)
    s = check_table(top["study"] or {}, STUDY_SPEC, "study", problems)
    c = check_table(top["compute"] or {}, COMPUTE_SPEC, "compute", problems)
    sweep = _sweep(top["sweep"] or {}, problems)
    folder = path.parent

    def resolve(ref: str, where: str) -> Path | None:
        target = Path(ref) if Path(ref).is_absolute() else folder / ref
        if not target.is_file():
            problems.add(where, f"scene file {shown(str(target), 200)} does not exist")
            return None
        return target

    scenes = tuple(
        p for i, ref in enumerate(s["scenes"] or []) if (p := resolve(ref, f"study.scenes[{i}]")) is not None
    )
    template = resolve(s["template"], "study.template") if s["template"] is not None else None
    if sweep and s["template"] is None:
        problems.add("sweep", "a sweep changes a template scene: give study.template")
    if not (s["scenes"] or s["template"]):
        problems.add("study", "give study.scenes (a list of scene files) or study.template (a scene to sweep)")
    problems.raise_if_any()
    spec = StudySpec(
        path=path,
        name=s["name"],
        description=s["description"],
        scenes=scenes,
        template=template,
        sweep=sweep,
        objective=s["objective"],
        goal=s["goal"],
        compute=ComputeSettings(
            setups=tuple(c["setups"] or ()),
            lighting_class=c["lighting_class"],
            colours=bool(c["colours"]),
            colour_view=c["colour_view"],
            thumbnails=tuple(c["thumbnails"] or ()),
            thumbnail_width=int(c["thumbnail_width"]),
        ),
    )
    if spec.variant_count > MAX_VARIANTS:
        raise input_error(
            path, "sweep", f"{spec.variant_count:,} scene variants; a study holds at most {MAX_VARIANTS:,}"
        )
    return spec
