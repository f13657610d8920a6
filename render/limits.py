"""Resource limits: how large an input, an image or a run may be, declared in one place.

Every reader and every command-line option that could make lampcast allocate, read or loop
without bound checks against a limit here, and names the key or option and the limit in its
message. The scene schema (:mod:`render.scene.loader`) and the command line
(:mod:`render.cli`) take their bounds from these constants, so a scene key and the option that
overrides it can never disagree.

The limits are generous for real streets (a 2 km street, 8K images, 10 000 luminaires, tens of
millions of triangles) and small enough that a typing slip or a hostile file fails at once with
a message instead of exhausting memory or hanging.

References
----------
- Python documentation, :func:`os.stat` and :mod:`stat` (regular-file test); Linux
  ``/proc/meminfo`` (``MemAvailable``) for the memory a run can have.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

from render.errors import input_error

__all__ = [
    "FILE_SIZE_LIMITS_BYTES",
    "MAX_BOUNCES",
    "MAX_CAMERA_SAMPLES",
    "MAX_COORDINATE_M",
    "MAX_EULUMDAT_ANGLES",
    "MAX_EULUMDAT_LAMP_SETS",
    "MAX_GENERATED_LUMINAIRES",
    "MAX_IMAGE_SIDE_PX",
    "MAX_LM63_ANGLES",
    "MAX_LM63_TILT_ANGLES",
    "MAX_MAP_FEATURES",
    "MAX_MARKING_DASHES",
    "MAX_PLAN_POINTS",
    "MAX_POLYGON_VERTICES",
    "MAX_PROBLEMS_PER_FILE",
    "MAX_SAMPLES_PER_PIXEL",
    "MAX_SPECTRUM_ROWS",
    "MAX_TABLE_WAVELENGTH_NM",
    "MAX_TRIANGLES",
    "MAX_WINDOW_LAMPS",
    "MemoryEstimate",
    "available_memory_bytes",
    "check_count",
    "check_memory",
    "check_render_size",
    "file_size_limit_bytes",
    "render_memory_estimate",
]

MiB = 1024 * 1024

MAX_IMAGE_SIDE_PX = 8192
"""Width or height of a view in pixels (scene ``resolution``, ``--width``)."""

MAX_SAMPLES_PER_PIXEL = 4096
"""Camera samples per pixel (scene ``render.samples_per_pixel``, ``--spp``)."""

MAX_BOUNCES = 64
"""Interreflections a path may have (scene ``render.bounces``)."""

MAX_CAMERA_SAMPLES = 2**31 - 1
"""Camera samples of one view (width × height × samples per pixel): sample indices are int32."""

MAX_GENERATED_LUMINAIRES = 10_000
"""Luminaires in one scene, singles plus every position a luminaire row generates."""

MAX_TRIANGLES = 50_000_000
"""Triangles in one compiled scene (about 4 GB of vertex data in float64 with the BVH, and
3.6 GB more for the BVH's copy of the vertices by component, 72 bytes per triangle)."""

MAX_POLYGON_VERTICES = 1000
"""Vertices of one polygon lampcast triangulates (an OBJ face, a marking polygon, an extrusion
outline): ear clipping takes time growing with the square of this or faster."""

MAX_MARKING_DASHES = 100_000
"""Dashes of all dashed marking lines in one scene (a 2 km street with 1 m dashes has 1000)."""

MAX_PLAN_POINTS = 1_000_000
"""Points of one illuminance plan (:mod:`render.calc.plan`): a 2 km street 60 m wide at the
default 0.5 m spacing has about 480 000."""

MAX_COORDINATE_M = 10_000.0
"""Largest distance of any scene coordinate from the origin along an axis, m (positions,
targets, outlines, sizes, OBJ vertices after scaling): a street is at most 2 km long, and within
10 km single precision still resolves a millimetre."""

MAX_LM63_ANGLES = 100_000
"""Vertical or horizontal angles in an LM-63 file (real files have fewer than 1000)."""

MAX_LM63_TILT_ANGLES = 10_000
"""Angles of an LM-63 tilt table."""

MAX_EULUMDAT_ANGLES = 3601
"""C-planes or γ angles in an EULUMDAT file (the layout foresees at most 721 C-planes and 361 γ
angles, 0.5° steps; 0.1° steps are allowed)."""

MAX_EULUMDAT_LAMP_SETS = 1000
"""Lamp sets in an EULUMDAT file (real files have one to a few)."""

MAX_SPECTRUM_ROWS = 100_000
"""Data rows of a lamp file or a material file (a 0.01 nm table of 380-780 nm has 40 001)."""

MAX_TABLE_WAVELENGTH_NM = 100_000.0
"""Largest wavelength a lamp or material table may hold, nm (100 µm, far beyond any
spectroradiometer); with it the integrals over a table stay finite in double precision."""

MAX_MAP_FEATURES = 100_000
"""Buildings, roads, trees, lamps, hedges and walls ``lampcast import-map`` keeps from one
extract (a dense town centre of 1 km radius has some 10 000)."""

MAX_WINDOW_LAMPS = 8
"""Window lamps of a scene's night light (``[night] window_lamp``, ``shop_window_lamp`` and the
further lamps ``[[night.frontages]]`` name): each is an ambient channel of its own, kept
resolved in every view (28 bytes per pixel, and 4 more for the share of its windows seen),
about 63 MiB per lamp at 1920×1080."""

MAX_PROBLEMS_PER_FILE = 10
"""Problems a line-by-line reader reports for one file before it skips the rest of the file."""

FILE_SIZE_LIMITS_BYTES: dict[str, int] = {
    "scene file": 16 * MiB,
    "photometric file": 16 * MiB,
    "tilt file": 1 * MiB,
    "r-table file": 1 * MiB,
    "lamp file": 16 * MiB,
    "material file": 4 * MiB,
    "OBJ file": 1024 * MiB,
    "mesh file": 1024 * MiB,
    "map extract": 1024 * MiB,
}
"""Largest input file of each kind lampcast reads; the key is the kind named in messages."""

_DEFAULT_FILE_LIMIT_BYTES = 16 * MiB


def file_size_limit_bytes(kind: str) -> int:
    """The size limit for an input file of the given kind (16 MiB for kinds not listed)."""
    return FILE_SIZE_LIMITS_BYTES.get(kind, _DEFAULT_FILE_LIMIT_BYTES)


def check_count(value: float, limit: float, source: str | Path, where: str, what: str, minimum: int = 0) -> int:
    """``value`` as an int when ``minimum <= value <= limit``; else an :class:`InputError`
    naming ``where`` (a key, option or line), what is counted and the limits. Non-finite values
    count as over the limit."""
    try:
        number = float(value)
    except (TypeError, ValueError, OverflowError):
        raise input_error(source, where, f"{what} must be a whole number, got {value!r}") from None
    if not (number == number) or number < minimum or number > limit:  # NaN, too few, too many
        if isinstance(value, int) and not isinstance(value, bool):
            shown = f"{value:,}" if abs(value) < 10**30 else f"about {number:.3g}"
        else:
            shown = f"{number:.4g}"
        raise input_error(source, where, f"{what} is {shown}; lampcast allows {minimum:,} to {limit:,}")
    return int(number)


def available_memory_bytes() -> int | None:
    """Memory a new allocation can have now (``MemAvailable`` of ``/proc/meminfo``), or None
    where the system does not say."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


@dataclass(frozen=True)
class MemoryEstimate:
    """What a run is expected to hold in memory at its peak."""

    bytes: int
    what: str


# Peak bytes per camera sample of a render: ray origin and direction, hit record, light-buffer
# values per channel, colorimetry (measured on the demo: about 240 B per sample at 5 channels).
_BYTES_PER_SAMPLE = 160
_BYTES_PER_SAMPLE_CHANNEL = 16
# Peak bytes per pixel of the vision stage (float64 X, Y, Z, Y' and glare grids).
_BYTES_PER_PIXEL_VISION = 600
# Bytes per pixel and light channel of the stored interreflected transport (81 float16 node
# values, render.light.indirect), and per pixel (its float32 scale and int32 path count).
_BYTES_PER_PIXEL_CHANNEL_INDIRECT = 162
_BYTES_PER_PIXEL_INDIRECT = 8
# The second (white) transport of the pixels that see a specular layer: the same per channel,
# and per such pixel its float32 scale and int32 pixel index.
_BYTES_PER_GLOSS_PIXEL_INDIRECT = 8
# The night light's ambient channels (render.light.indirect.night), kept resolved: per pixel
# and channel 7 float32 responses (X, Y, Z, Y' and L, M, S: render.light.indirect.view.
# ambient_response_weights; the specular layer's reflection included, so nothing per gloss
# pixel), per pixel the float32 share of samples seeing the sky, and per window lamp the
# float32 share seeing its lit windows (two columns at least).
_BYTES_PER_PIXEL_CHANNEL_AMBIENT = 28
_BYTES_PER_PIXEL_AMBIENT = 4
_BYTES_PER_PIXEL_WINDOW_LAMP = 4


def render_memory_estimate(
    width_px: int,
    height_px: int,
    spp: int,
    n_channels: int,
    indirect: bool = False,
    gloss_share: float = 0.0,
    ambient_channels: int = 0,
    window_lamps: int = 0,
) -> MemoryEstimate:
    """An upper estimate of one view's peak memory (camera samples, light buffers, vision, and
    with ``indirect`` the interreflected transport, with the second transport of the share
    ``gloss_share`` (0 … 1) of pixels that see a specular layer). ``ambient_channels``: the
    night light's channels that are on (sky glow, moonlight, one per lit window lamp), kept
    resolved beside the luminaires' transport, with the share of samples seeing the sky and,
    per window lamp of ``window_lamps``, the share seeing its windows."""
    pixels = int(width_px) * int(height_px)
    samples = pixels * int(spp)
    total = samples * (_BYTES_PER_SAMPLE + _BYTES_PER_SAMPLE_CHANNEL * max(1, int(n_channels)))
    total += pixels * _BYTES_PER_PIXEL_VISION
    ambient = max(0, int(ambient_channels))
    if indirect:
        per_pixel = _BYTES_PER_PIXEL_INDIRECT + _BYTES_PER_PIXEL_CHANNEL_INDIRECT * max(1, int(n_channels))
        per_gloss = _BYTES_PER_GLOSS_PIXEL_INDIRECT + _BYTES_PER_PIXEL_CHANNEL_INDIRECT * max(1, int(n_channels))
        if ambient:
            per_pixel += (
                _BYTES_PER_PIXEL_CHANNEL_AMBIENT * ambient
                + _BYTES_PER_PIXEL_AMBIENT
                + _BYTES_PER_PIXEL_WINDOW_LAMP * max(2, int(window_lamps))
            )
        total += pixels * per_pixel
        share = min(max(float(gloss_share), 0.0), 1.0)
        total += math.ceil(share * pixels) * per_gloss
    night = f", {ambient} night-light channels" if indirect and ambient else ""
    return MemoryEstimate(
        total, f"{width_px}×{height_px} pixels at {spp} samples per pixel, {n_channels} light channels{night}"
    )


def check_memory(estimate: MemoryEstimate, source: str | Path, where: str, available: int | None = None) -> None:
    """An :class:`InputError` before a run starts when its estimate exceeds the memory available
    (``available`` defaults to :func:`available_memory_bytes`; unknown means no check)."""
    available = available_memory_bytes() if available is None else available
    if available is not None and estimate.bytes > available:
        raise input_error(
            source,
            where,
            f"{estimate.what} need about {estimate.bytes / 2**30:.1f} GiB, but about "
            f"{available / 2**30:.1f} GiB is available; lower the resolution or the samples per pixel",
        )


def check_render_size(
    width_px: int,
    height_px: int,
    spp: int,
    n_channels: int,
    source: str | Path,
    where: str,
    indirect: bool = False,
    gloss_share: float = 0.0,
    ambient_channels: int = 0,
    window_lamps: int = 0,
) -> None:
    """Refuse, before any allocation, a view larger than the limits or than the memory available:
    an :class:`InputError` naming ``where`` (the view, or the ``--width``/``--spp`` options);
    ``indirect``: the view keeps interreflected light too (``gloss_share``: of which the share
    of pixels that see a specular layer keeps a second transport; ``ambient_channels`` and
    ``window_lamps``: the night light's, as :func:`render_memory_estimate` takes them)."""
    for value, limit, what in (
        (width_px, MAX_IMAGE_SIDE_PX, "the image width in pixels"),
        (height_px, MAX_IMAGE_SIDE_PX, "the image height in pixels"),
        (spp, MAX_SAMPLES_PER_PIXEL, "the samples per pixel"),
    ):
        check_count(value, limit, source, where, what, minimum=1)
    samples = int(width_px) * int(height_px) * int(spp)
    check_count(samples, MAX_CAMERA_SAMPLES, source, where, "the number of camera samples of the view", minimum=1)
    estimate = render_memory_estimate(
        width_px, height_px, spp, n_channels, indirect, gloss_share, ambient_channels, window_lamps
    )
    check_memory(estimate, source, where)
