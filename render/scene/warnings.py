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
from render.scene.model import Scene

__all__ = ["NARROW_HFOV_DEG", "narrow_fields_of_view", "scene_warnings"]

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


def scene_warnings(scene: Scene) -> list[Problem]:
    """Every warning about ``scene``, in the order of the list in ``scenes/README.md``."""
    return [*narrow_fields_of_view(scene)]
