"""High-dynamic-range output: absolute colorimetry in OpenEXR files, and a plain preview.

An EXR written here has four 32-bit float channels, all in absolute units:

* ``X``, ``Y``, ``Z`` -- CIE 1931 tristimulus values, ``Y`` the photopic luminance in cd/m²;
* ``Ys`` -- the scotopic luminance (K'm·Σ L V' Δλ), cd/m².

Header attributes ``lampcast_units`` (``"cd/m^2"``), ``lampcast_channels`` and any metadata passed
in (tool version, scene hash, setup, view ...) say how the file was made. Files are written
atomically: an interrupted write never leaves a file with the final name.

Display images are made from the same colorimetry by the night-vision stage
(:mod:`render.vision`).

References
----------
- OpenEXR file format (Academy Software Foundation), through the ``OpenEXR`` Python bindings:
  32-bit float channels, ZIP compression, string header attributes.
- CIE 015:2018 *Colorimetry*: X, Y, Z with the CIE 1931 2° observer; CIE 1951 V'(λ) for ``Ys``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from render.colour.colorimetry import ViewColorimetry
from render.fileio import atomic_path

__all__ = ["CHANNELS", "read_exr", "write_exr"]

#: Channel names of a lampcast EXR, in order.
CHANNELS = ("X", "Y", "Z", "Ys")


def write_exr(path: str | Path, colorimetry: ViewColorimetry, metadata: dict[str, str] | None = None) -> Path:
    """Write X, Y, Z and scotopic luminance (cd/m²) as a ZIP-compressed float EXR."""
    import OpenEXR

    path = Path(path)
    xyz = colorimetry.xyz_cd_m2.astype(np.float32)
    planes = [xyz[..., 0], xyz[..., 1], xyz[..., 2], colorimetry.scotopic_cd_m2.astype(np.float32)]
    channels = {name: np.ascontiguousarray(plane) for name, plane in zip(CHANNELS, planes)}
    header = {
        "compression": OpenEXR.ZIP_COMPRESSION,
        "type": OpenEXR.scanlineimage,
        "lampcast_units": "cd/m^2",
        "lampcast_channels": "X Y Z: CIE 1931 2 degree, Y photopic luminance; Ys: scotopic luminance",
    }
    for key, value in (metadata or {}).items():
        header[f"lampcast_{key}"] = str(value)
    with atomic_path(path) as tmp:
        with OpenEXR.File(header, channels) as f:
            f.write(str(tmp))
    return path


def read_exr(path: str | Path) -> tuple[ViewColorimetry, dict[str, str]]:
    """Read an EXR written by :func:`write_exr`; returns the colorimetry and the lampcast header
    attributes (without the ``lampcast_`` prefix)."""
    import OpenEXR

    with OpenEXR.File(str(path)) as f:
        ch = f.channels()
        xyz = np.stack([ch[c].pixels for c in CHANNELS[:3]], axis=-1).astype(np.float64)
        ys = ch[CHANNELS[3]].pixels.astype(np.float64)
        meta = {k[len("lampcast_") :]: str(v) for k, v in f.header().items() if k.startswith("lampcast_")}
    return ViewColorimetry(xyz, ys), meta
