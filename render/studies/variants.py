"""Scene variants of a study: the listed scenes and the template's sweep combinations.

Each variant is a parsed scene document (the TOML tables as Python values) with its place in
the study, the swept values, and a *content key*: the SHA-256 of the document in canonical JSON
together with the bytes of every file it refers to (photometric, lamp, OBJ and r-table files
found next to the scene), the study's compute settings, the setup and lampcast's version
(:func:`row_key`). A row whose key is unchanged is not computed again.

Swept values replace the value at their key path (``luminaire_rows[0].spacing_m``); the
table holding it must exist (a key may be new in it, e.g. ``lumens`` not given in the
template), and a list index must exist.
"""

from __future__ import annotations

import copy
import hashlib
import itertools
import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from render.errors import input_error
from render.fileio import looks_like_path, read_user_toml
from render.limits import FILE_SIZE_LIMITS_BYTES
from render.studies.spec import StudySpec, parse_key_path

__all__ = ["Variant", "apply_value", "expand_variants", "row_key"]


@dataclass(frozen=True)
class Variant:
    """One scene of a study: a listed scene or one sweep combination of the template."""

    index: int
    scene_path: Path  # the file the document came from (references resolve next to it)
    scene_name: str  # that file relative to the study file's folder (as the table shows it)
    label: str
    parameters: tuple[tuple[str, Any], ...]
    document: dict
    content_key: str


def _path_text(parts: tuple[str | int, ...]) -> str:
    text = ""
    for p in parts:
        text += f"[{p}]" if isinstance(p, int) else (f".{p}" if text else p)
    return text


def apply_value(doc: dict, key_path: str, value: Any, source: Path) -> None:
    """Set ``value`` at ``key_path`` in ``doc`` (in place); a missing table or index is an
    :class:`~render.errors.InputError` naming the sweep key."""
    parts = parse_key_path(key_path)
    node: Any = doc
    for i, part in enumerate(parts[:-1]):
        nxt = parts[i + 1]
        try:
            node = node[part]
        except (KeyError, IndexError, TypeError):
            raise input_error(
                source, f"sweep.{key_path}", f"the template has no {_path_text(parts[: i + 1])}"
            ) from None
        if isinstance(nxt, int) and not isinstance(node, list):
            raise input_error(source, f"sweep.{key_path}", f"{part} is not a list")
    last = parts[-1]
    if isinstance(last, int):
        if not isinstance(node, list) or not 0 <= last < len(node):
            raise input_error(source, f"sweep.{key_path}", f"the template has no index [{last}] there")
    elif not isinstance(node, dict):
        raise input_error(source, f"sweep.{key_path}", "the key path does not end in a table key")
    node[last] = value


def _referenced_bytes(doc: Any, folder: Path, out: dict[str, str]) -> None:
    """SHA-256 of every file a string in ``doc`` names (relative to ``folder``), by name."""
    if isinstance(doc, dict):
        for v in doc.values():
            _referenced_bytes(v, folder, out)
    elif isinstance(doc, list):
        for v in doc:
            _referenced_bytes(v, folder, out)
    elif isinstance(doc, str) and looks_like_path(doc) and doc not in out:
        target = Path(doc) if Path(doc).is_absolute() else folder / doc
        try:
            if target.is_file() and target.stat().st_size <= max(FILE_SIZE_LIMITS_BYTES.values()):
                out[doc] = hashlib.sha256(target.read_bytes()).hexdigest()
        except OSError:
            pass


def _canonical(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), default=str)


def _content_key(doc: dict, scene_path: Path) -> str:
    files: dict[str, str] = {}
    _referenced_bytes(doc, scene_path.parent, files)
    return hashlib.sha256(_canonical({"scene": doc, "files": files}).encode()).hexdigest()


def row_key(variant: Variant, setup: str, compute: dict, version: str) -> str:
    """The content hash of one result row (see the module text)."""
    payload = {"variant": variant.content_key, "setup": setup, "compute": compute, "version": version}
    return hashlib.sha256(_canonical(payload).encode()).hexdigest()[:32]


def _number_text(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _relative(path: Path, study_file: Path) -> str:
    try:
        return Path(os.path.relpath(path, study_file.parent)).as_posix()
    except ValueError:  # another drive
        return path.as_posix()


def expand_variants(spec: StudySpec) -> list[Variant]:
    """The listed scenes, then the template's sweep combinations (cartesian product of the
    keys' values in file order), numbered from 0."""
    out: list[Variant] = []
    for path in spec.scenes:
        doc = read_user_toml(path, "scene file", "a UTF-8 TOML scene file")
        name = _relative(path, spec.path)
        out.append(Variant(len(out), path, name, path.stem, (), doc, _content_key(doc, path)))
    if spec.template is not None:
        base = read_user_toml(spec.template, "scene file", "a UTF-8 TOML scene file")
        keys = [k for k, _ in spec.sweep]
        for combo in itertools.product(*(values for _, values in spec.sweep)):
            doc = copy.deepcopy(base)
            for key, value in zip(keys, combo, strict=True):
                apply_value(doc, key, value, spec.path)
            params = tuple(zip(keys, combo, strict=True))
            label = ", ".join(f"{parse_key_path(k)[-1]}={_number_text(v)}" for k, v in params) or spec.template.stem
            name = _relative(spec.template, spec.path)
            out.append(Variant(len(out), spec.template, name, label, params, doc, _content_key(doc, spec.template)))
    return out
