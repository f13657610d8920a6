"""Warnings of a checked scene: likely mistakes that are not errors.

:func:`scene_warnings` looks at a scene that loaded without problems for values that are
allowed but probably not meant (a field of view in radians typed as degrees, ...). Each
warning is a :class:`~render.errors.Problem` naming the file and the key path, like an error;
``lampcast check`` prints them and still exits 0. The warnings are listed in
``scenes/README.md``.
"""

from __future__ import annotations

import math

from render.errors import Problem
from render.fileio import file_stem
from render.scene.model import Scene

__all__ = ["NARROW_HFOV_DEG", "clashing_view_names", "narrow_fields_of_view", "scene_warnings"]

#: A horizontal field of view below this, degrees, is probably radians typed as degrees
#: (common practice, no source: the narrowest street views are telephoto shots near 10°).
NARROW_HFOV_DEG = 5.0


def narrow_fields_of_view(scene: Scene) -> list[Problem]:
    """Views whose ``hfov_deg`` is under :data:`NARROW_HFOV_DEG`."""
    out = []
    for i, view in enumerate(scene.views):
        if view.hfov_deg < NARROW_HFOV_DEG:
            out.append(
                Problem(
                    str(scene.path),
                    f"views[{i}].hfov_deg",
                    f"a field of view of {view.hfov_deg:g}° is very narrow (under {NARROW_HFOV_DEG:g}°): "
                    f"was it given in radians? {view.hfov_deg:g} rad is {math.degrees(view.hfov_deg):.0f}°",
                )
            )
    return out


def clashing_view_names(scene: Scene) -> list[Problem]:
    """Views whose names give the same output file name (:func:`render.fileio.file_stem`, e.g.
    "bins & cars" and "bins / cars"): the outputs are told apart by a number added to the
    later name (compared without regard to case, as case-insensitive file systems do), which the
    warning tells the user. One warning per later view, naming the first."""
    out = []
    first: dict[str, int] = {}
    for i, view in enumerate(scene.views):
        stem = file_stem(view.name)
        if stem.lower() not in first:
            first[stem.lower()] = i
            continue
        j = first[stem.lower()]
        out.append(
            Problem(
                str(scene.path),
                f"views[{i}].name",
                f"the views {scene.views[j].name!r} (views[{j}]) and {view.name!r} both give the output name "
                f"{file_stem(scene.views[j].name)!r}: the later view's files get a number added; give names that differ in letters or digits",
            )
        )
    return out


def scene_warnings(scene: Scene) -> list[Problem]:
    """Every warning about ``scene``, in the order of the list in ``scenes/README.md``."""
    return [*narrow_fields_of_view(scene), *clashing_view_names(scene)]
