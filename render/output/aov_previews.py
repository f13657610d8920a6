"""Files of the inspection images (``lampcast render --aov``): PNG previews and the raw arrays.

The arrays come from :func:`render.rays.aov.render_aovs`; their display colourings
(:func:`~render.rays.aov.depth_to_grey`, :func:`~render.rays.aov.normals_to_rgb`,
:func:`~render.rays.aov.ids_to_rgb`) are array functions in the same module. This module only
writes: PNGs through :func:`render.output.images.write_png` (with the caller's provenance text
on each) and the arrays as a compressed ``.npz``, all atomically.
"""

from __future__ import annotations

import io
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from render.fileio import atomic_write_bytes
from render.output.images import write_png
from render.rays.aov import depth_range_m, depth_to_grey, ids_to_rgb, normals_to_rgb

__all__ = ["write_aov_previews"]


def write_aov_previews(
    aovs: Mapping[str, np.ndarray], out_dir: str | os.PathLike, stem: str, text: Mapping[str, str] | None = None
) -> list[Path]:
    """Write PNG previews and the raw arrays of :func:`render.rays.aov.render_aovs`, atomically.

    Files (in ``out_dir``, created if missing):

    * ``<stem>-depth.png``: grey ramp, white at the nearest hit to dark grey at the farthest,
      black background; the range is stored in the PNG text field ``depth_range_m``
      ("near far") and in the ``.npz``.
    * ``<stem>-normal.png``: world normal (x, y, z) in [-1, 1] as RGB in [0, 255].
    * ``<stem>-material.png``, ``<stem>-object.png``: ids as colours of
      :func:`render.rays.aov.id_palette`.
    * ``<stem>-coverage.png``: hit fraction as grey.
    * ``<stem>-aov.npz``: every array, plus ``depth_range_m``.

    ``text`` (e.g. :func:`render.output.provenance.view_metadata`) goes into every PNG, with
    ``lampcast.mode`` set to ``aov <name>`` per image. Returns the paths written, in the order
    listed above.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    near, far = depth_range_m(aovs["depth_m"])
    coverage = np.round(np.clip(aovs["coverage"], 0.0, 1.0) * 255.0).astype(np.uint8)
    images = {
        "depth": (
            depth_to_grey(aovs["depth_m"], near, far),
            {"depth_range_m": f"{near:.6g} {far:.6g}", "depth_ramp": "white = near, dark grey = far, black = no hit"},
        ),
        "normal": (normals_to_rgb(aovs["normal"]), {}),
        "material": (ids_to_rgb(aovs["material_id"]), {}),
        "object": (ids_to_rgb(aovs["object_id"]), {}),
        "coverage": (coverage, {}),
    }
    written = [
        write_png(out / f"{stem}-{name}.png", pixels, {**(text or {}), "lampcast.mode": f"aov {name}", **extra})
        for name, (pixels, extra) in images.items()
    ]
    buf = io.BytesIO()
    np.savez_compressed(buf, depth_range_m=np.array([near, far]), **{k: np.asarray(v) for k, v in aovs.items()})
    written.append(atomic_write_bytes(out / f"{stem}-aov.npz", buf.getvalue()))
    return written
