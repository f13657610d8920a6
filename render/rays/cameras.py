"""Pinhole perspective camera: primary rays, projection and per-pixel angles.

Image conventions: pixel ``(x, y) = (0, 0)`` is the top-left pixel, ``x`` grows to the right
(columns), ``y`` downwards (rows). Continuous image coordinates run over ``[0, width_px]`` x
``[0, height_px]`` with the centre of pixel ``(i, j)`` at ``(i + 0.5, j + 0.5)``. A flat pixel
index is ``y * width_px + x`` (row-major, like an ``(H, W)`` array).

The camera looks from ``position_m`` towards ``target_m``; the image plane is perpendicular to
that line, its horizontal field of view is ``hfov_deg`` and pixels are square, so the vertical
field of view is ``2 atan(tan(hfov/2) * height_px / width_px)``. ``up`` (default +z) fixes the
roll: image "up" is the component of ``up`` perpendicular to the viewing direction.

Sampling: ``samples_per_pixel`` (spp) jittered samples per pixel, stratified on an ``n x n``
grid with ``n = ceil(sqrt(spp))`` (Cook, "Stochastic sampling in computer graphics", ACM TOG
5(1), 1986). When spp is not a square number, sample ``s`` of a pixel uses stratum
``(s + r) mod n^2`` with a per-pixel random rotation ``r``, so that every sample is still
uniformly distributed over the pixel (no bias) while the samples of one pixel fall in distinct
strata. Random numbers come from a counter-based hash of ``(key, pixel, sample, dimension)``
(the SplitMix64 finaliser: Steele, Lea & Flood, "Fast splittable pseudorandom number
generators", OOPSLA 2014), with ``key`` drawn once from ``numpy.random.default_rng(seed)``:
the rays of a pixel depend only on the seed and the pixel, never on which tile or batch they
are generated in.

**Downward hemisphere camera** (:class:`DownwardHemisphereCamera`): a measuring plane rather
than an eye. Its "pixels" are square cells of a horizontal plane at height ``plane_z_m`` (image
row 0 is the cell row of largest y, column 0 that of smallest x, so the image is a plan with +y
up); every sample starts at a point of its cell and goes down into the lower hemisphere,
cosine-weighted about the downward vertical. The mean luminance L a cell's samples see, times
π, estimates the exitance through the cell from below, M = ∫ L cos θ dω (lm/m² for L in
cd/m²). Directions are stratified on the ``n x n`` grid of the unit square and mapped by
Malley's method (uniform points on the unit disc, r = √u₁, φ = 2π u₂, lifted to the
hemisphere: a cosine-weighted density cos θ / π); the points in the cell are stratified on the
same grid with an independent per-cell rotation of the strata, so that each sample's point and
direction are independent and uniform in the cell and cosine-distributed (no bias), while the
samples of a cell fall in distinct strata of both. Random numbers come from the same
counter-based hash, with their own counters.

References (downward hemisphere camera): Malley's method, e.g. M. Pharr, W. Jakob and
G. Humphreys, *Physically Based Rendering*, 3rd ed. (2016), §13.6.3 (cosine-weighted
hemisphere sampling); exitance as the cosine-weighted integral of luminance: CIE S 017:2020
(ILV) 17-21-080 "luminous exitance" **(from memory)**.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numba
import numpy as np

from render.errors import ProblemList, input_error
from render.limits import MAX_SAMPLES_PER_PIXEL
from render.threads import run_split

# Samples per pixel above this are refused (a user typo such as 40000 would otherwise try to
# allocate gigabytes of rays).


def _vec3(value: Any) -> np.ndarray | None:
    try:
        v = np.asarray(value, dtype=np.float64).reshape(-1)
    except (TypeError, ValueError):
        return None
    if v.shape != (3,) or not np.all(np.isfinite(v)):
        return None
    return v


@dataclass(kw_only=True)
class Camera:
    """Pinhole perspective camera.

    Parameters
    ----------
    position_m
        Eye position (x, y, z), metres.
    target_m
        A point on the optical axis (x, y, z), metres; the image centre looks at it.
    up
        World direction that appears upwards in the image (default +z). Must not be parallel
        to the viewing direction.
    hfov_deg
        Horizontal field of view, degrees, in (0, 180).
    width_px, height_px
        Image size in pixels (>= 1).
    source, where
        Where the camera was specified (file name and key path), for error messages.

    Raises
    ------
    InputError
        Listing every invalid field.
    """

    position_m: tuple[float, float, float]
    target_m: tuple[float, float, float]
    up: tuple[float, float, float] = (0.0, 0.0, 1.0)
    hfov_deg: float
    width_px: int
    height_px: int
    source: str = field(default="camera", compare=False, repr=False)
    where: str = field(default="", compare=False, repr=False)

    def __post_init__(self):
        problems = ProblemList(self.source)

        def key(name: str) -> str:
            return f"{self.where}.{name}" if self.where else name

        pos = _vec3(self.position_m)
        tgt = _vec3(self.target_m)
        up = _vec3(self.up)
        if pos is None:
            problems.add(
                key("position_m"), f"expected three finite numbers (x, y, z) in metres, got {self.position_m!r}"
            )
        if tgt is None:
            problems.add(key("target_m"), f"expected three finite numbers (x, y, z) in metres, got {self.target_m!r}")
        if up is None or not np.any(up):
            problems.add(key("up"), f"expected a non-zero direction (x, y, z), got {self.up!r}")
        if pos is not None and tgt is not None:
            if np.linalg.norm(tgt - pos) <= 1e-9 * max(1.0, float(np.linalg.norm(pos))):
                problems.add(key("target_m"), "must differ from position_m (the camera needs a viewing direction)")
            elif up is not None and np.any(up):
                f = (tgt - pos) / np.linalg.norm(tgt - pos)
                if np.linalg.norm(np.cross(f, up / np.linalg.norm(up))) < 1e-6:
                    problems.add(key("up"), "must not be parallel to the viewing direction (target_m - position_m)")
        try:
            fov = float(self.hfov_deg)
            fov_ok = (
                isinstance(self.hfov_deg, (int, float, np.number))
                and not isinstance(self.hfov_deg, bool)
                and 0.0 < fov < 180.0
            )
        except (TypeError, ValueError):
            fov_ok = False
        if not fov_ok:
            problems.add(
                key("hfov_deg"),
                f"expected a horizontal field of view in degrees, 0 < hfov_deg < 180, got {self.hfov_deg!r}",
            )
        for name in ("width_px", "height_px"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
                problems.add(key(name), f"expected a whole number of pixels >= 1, got {value!r}")
        problems.raise_if_any()
        self.position_m = tuple(float(c) for c in pos)
        self.target_m = tuple(float(c) for c in tgt)
        self.up = tuple(float(c) for c in up)
        self.hfov_deg = float(self.hfov_deg)
        self.width_px = int(self.width_px)
        self.height_px = int(self.height_px)

    @classmethod
    def from_view(cls, view: Any, *, source: str = "scene", where: str = "views[0]") -> Camera:
        """A camera from any object (or mapping) with ``position_m``, ``target_m``,
        ``hfov_deg``, ``width_px``, ``height_px`` and optionally ``up``."""
        get = view.get if isinstance(view, dict) else lambda k, d=None: getattr(view, k, d)
        kwargs = dict(
            position_m=get("position_m"),
            target_m=get("target_m"),
            hfov_deg=get("hfov_deg"),
            width_px=get("width_px"),
            height_px=get("height_px"),
            source=source,
            where=where,
        )
        up = get("up")
        if up is not None:
            kwargs["up"] = up
        return cls(**kwargs)

    @property
    def n_pixels(self) -> int:
        return self.width_px * self.height_px

    @property
    def shape(self) -> tuple[int, int]:
        """(height_px, width_px), the shape of an image array."""
        return (self.height_px, self.width_px)

    @property
    def vfov_deg(self) -> float:
        """Vertical field of view, degrees (square pixels)."""
        return math.degrees(2.0 * math.atan(self.half_extent[1]))

    @property
    def half_extent(self) -> tuple[float, float]:
        """Half width and half height of the image plane at unit distance."""
        a = math.tan(math.radians(self.hfov_deg) / 2.0)
        return a, a * self.height_px / self.width_px

    def basis(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Unit vectors (right, image up, forward), world coordinates; right-handed with
        ``right x image_up = -forward``."""
        pos = np.asarray(self.position_m)
        f = np.asarray(self.target_m) - pos
        f = f / np.linalg.norm(f)
        r = np.cross(f, np.asarray(self.up))
        r = r / np.linalg.norm(r)
        u = np.cross(r, f)
        return r, u, f


# --------------------------------------------------------------------------------------------
# Counter-based random numbers
# --------------------------------------------------------------------------------------------

# Pixels per work item of the ray kernel.
_ITEM = 256
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)


@numba.njit(cache=True, nogil=True)
def _mix64(z):
    """SplitMix64 finaliser (Steele, Lea & Flood 2014) on uint64."""
    z = z + _GOLDEN
    z = (z ^ (z >> np.uint64(30))) * _MIX1
    z = (z ^ (z >> np.uint64(27))) * _MIX2
    return z ^ (z >> np.uint64(31))


@numba.njit(cache=True, nogil=True)
def _uniform(key, pixel, counter):
    """Uniform float64 in [0, 1) from (key, pixel, counter), all uint64."""
    h = _mix64(_mix64(key ^ _mix64(pixel)) ^ counter)
    return np.float64(h >> np.uint64(11)) * (1.0 / 9007199254740992.0)


def seed_key(seed: int) -> np.uint64:
    """The 64-bit hash key for ``seed``, drawn with ``numpy.random.default_rng(seed)``."""
    rng = np.random.default_rng(seed)
    return np.uint64(rng.integers(0, np.iinfo(np.uint64).max, dtype=np.uint64, endpoint=True))


@numba.njit(cache=True, nogil=True)
def _ray_kernel(
    pixels,
    width,
    height,
    spp,
    grid,
    key,
    jitter,
    pos,
    right,
    up,
    fwd,
    half_w,
    half_h,
    out_o,
    out_d,
    out_p,
    first,
    stride,
):
    """The rays of the pixels in items ``first, first + stride, ...`` of :data:`_ITEM` pixels
    (:func:`render.threads.run_split`)."""
    n_cells = grid * grid
    n = pixels.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for k in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            p = pixels[k]
            px = np.float64(p % width)
            py = np.float64(p // width)
            pu = np.uint64(p)
            if spp == n_cells:
                rot = 0
            else:
                rot = np.int64(_mix64(key ^ _mix64(pu ^ _GOLDEN)) % np.uint64(n_cells))
            for s in range(spp):
                cell = (s + rot) % n_cells
                cx = cell % grid
                cy = cell // grid
                if jitter:
                    jx = _uniform(key, pu, np.uint64(2 * s))
                    jy = _uniform(key, pu, np.uint64(2 * s + 1))
                else:
                    jx = 0.5
                    jy = 0.5
                x = px + (cx + jx) / grid
                y = py + (cy + jy) / grid
                a = (2.0 * x / width - 1.0) * half_w
                b = (1.0 - 2.0 * y / height) * half_h
                i = k * spp + s
                dx = fwd[0] + a * right[0] + b * up[0]
                dy = fwd[1] + a * right[1] + b * up[1]
                dz = fwd[2] + a * right[2] + b * up[2]
                inv = 1.0 / math.sqrt(dx * dx + dy * dy + dz * dz)
                out_d[i, 0] = dx * inv
                out_d[i, 1] = dy * inv
                out_d[i, 2] = dz * inv
                out_o[i, 0] = pos[0]
                out_o[i, 1] = pos[1]
                out_o[i, 2] = pos[2]
                out_p[i] = p


# Counter offset of a downward hemisphere camera's cell points (its directions use 2s, 2s + 1).
_POINT_COUNTER = np.uint64(1 << 40)
# Salt of the per-cell rotation of the point strata (independent of the direction strata's).
_POINT_SALT = np.uint64(0xD1B54A32D192ED03)


@numba.njit(cache=True, nogil=True)
def _downward_ray_kernel(
    pixels, width, height, spp, grid, key, jitter, x0, y0, cell, z, out_o, out_d, out_p, first, stride
):
    """The rays of a :class:`DownwardHemisphereCamera`'s cells in items ``first, first +
    stride, ...`` of :data:`_ITEM` cells (module text)."""
    n_cells = grid * grid
    n = pixels.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for k in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            p = pixels[k]
            col = np.float64(p % width)
            row = np.float64(height - 1 - p // width)  # image row 0 is the largest y
            pu = np.uint64(p)
            rot_d = np.int64(_mix64(key ^ _mix64(pu ^ _GOLDEN)) % np.uint64(n_cells))
            rot_p = np.int64(_mix64(key ^ _mix64(pu ^ _POINT_SALT)) % np.uint64(n_cells))
            for s in range(spp):
                cd = (s + rot_d) % n_cells
                cp = (s + rot_p) % n_cells
                if jitter:
                    u1 = _uniform(key, pu, np.uint64(2 * s))
                    u2 = _uniform(key, pu, np.uint64(2 * s + 1))
                    v1 = _uniform(key, pu, _POINT_COUNTER + np.uint64(2 * s))
                    v2 = _uniform(key, pu, _POINT_COUNTER + np.uint64(2 * s + 1))
                else:
                    u1 = u2 = v1 = v2 = 0.5
                a = ((cd % grid) + u1) / grid
                b = ((cd // grid) + u2) / grid
                r = math.sqrt(a)
                phi = 2.0 * math.pi * b
                i = k * spp + s
                out_d[i, 0] = r * math.cos(phi)
                out_d[i, 1] = r * math.sin(phi)
                out_d[i, 2] = -math.sqrt(max(0.0, 1.0 - a))
                out_o[i, 0] = x0 + cell * (col + ((cp % grid) + v1) / grid)
                out_o[i, 1] = y0 + cell * (row + ((cp // grid) + v2) / grid)
                out_o[i, 2] = z
                out_p[i] = p


@dataclass(kw_only=True)
class DownwardHemisphereCamera:
    """A horizontal measuring plane seen as a camera: ``width_px`` x ``height_px`` square cells
    of ``cell_m`` from the corner ``origin_xy_m`` (smallest x and y) at height ``plane_z_m``;
    every sample goes down from a point of its cell, cosine-weighted (module text). π times a
    cell's mean luminance is the exitance through it from below, lm/m².

    It takes the place of a :class:`Camera` wherever camera samples are cast
    (:func:`camera_rays`, :func:`tile_pixels`), so the light buffers of the plane are those of
    a view: per sample and light channel, relit for any lamps, lumens and dimming."""

    origin_xy_m: tuple[float, float]
    plane_z_m: float
    cell_m: float
    width_px: int
    height_px: int

    def __post_init__(self) -> None:
        xy = np.asarray(self.origin_xy_m, dtype=np.float64).reshape(-1)
        if xy.shape != (2,) or not np.all(np.isfinite(xy)):
            raise ValueError(f"origin_xy_m must be two finite numbers, got {self.origin_xy_m!r}")
        if not (math.isfinite(self.plane_z_m) and math.isfinite(self.cell_m) and self.cell_m > 0.0):
            raise ValueError(
                f"need a finite plane height and a positive cell size, got {self.plane_z_m}, {self.cell_m}"
            )
        for name in ("width_px", "height_px"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
                raise ValueError(f"{name} must be a whole number of cells >= 1, got {value!r}")
        self.origin_xy_m = (float(xy[0]), float(xy[1]))
        self.plane_z_m = float(self.plane_z_m)
        self.cell_m = float(self.cell_m)
        self.width_px = int(self.width_px)
        self.height_px = int(self.height_px)

    @property
    def n_pixels(self) -> int:
        return self.width_px * self.height_px

    @property
    def shape(self) -> tuple[int, int]:
        """(height_px, width_px), the shape of the map (row 0: largest y)."""
        return (self.height_px, self.width_px)

    @property
    def cell_area_m2(self) -> float:
        return self.cell_m * self.cell_m

    @property
    def extent_m(self) -> tuple[float, float, float, float]:
        """(x0, x1, y0, y1) of the plane, m."""
        x0, y0 = self.origin_xy_m
        return (x0, x0 + self.width_px * self.cell_m, y0, y0 + self.height_px * self.cell_m)

    def rays(self, samples_per_pixel: int, seed: int, pixels: np.ndarray, *, jitter: bool = True):
        """Origins, directions and cell indices of the samples of ``pixels`` (as
        :func:`camera_rays`)."""
        spp = _check_spp(samples_per_pixel)
        grid = int(math.ceil(math.sqrt(spp)))
        n = pixels.shape[0] * spp
        out_o = np.empty((n, 3))
        out_d = np.empty((n, 3))
        out_p = np.empty(n, np.int64)
        if n:
            run_split(
                _downward_ray_kernel,
                (pixels.shape[0] + _ITEM - 1) // _ITEM,
                pixels,
                self.width_px,
                self.height_px,
                spp,
                grid,
                seed_key(seed),
                bool(jitter),
                self.origin_xy_m[0],
                self.origin_xy_m[1],
                self.cell_m,
                self.plane_z_m,
                out_o,
                out_d,
                out_p,
            )
        return out_o, out_d, out_p


def _check_spp(samples_per_pixel) -> int:
    if (
        isinstance(samples_per_pixel, bool)
        or not isinstance(samples_per_pixel, (int, np.integer))
        or not 1 <= samples_per_pixel <= MAX_SAMPLES_PER_PIXEL
    ):
        raise input_error(
            "render settings",
            "samples_per_pixel",
            f"expected a whole number from 1 to {MAX_SAMPLES_PER_PIXEL}, got {samples_per_pixel!r}",
        )
    return int(samples_per_pixel)


def camera_rays(
    camera: Camera | DownwardHemisphereCamera,
    samples_per_pixel: int = 1,
    seed: int = 0,
    pixels: np.ndarray | None = None,
    *,
    jitter: bool = True,
):
    """Primary rays through the pixels of ``camera``.

    Parameters
    ----------
    camera
        The camera (a :class:`DownwardHemisphereCamera` gives its cells' downward samples).
    samples_per_pixel
        Rays per pixel (stratified, see the module docstring).
    seed
        Integer seed; the same seed gives bit-identical rays.
    pixels
        Optional flat pixel indices (``y * width_px + x``) to generate rays for, e.g. one tile
        from :func:`tile_pixels`; default all pixels in row-major order. The rays of a pixel
        are the same whichever set of pixels they are generated with.
    jitter
        False puts each sample at the centre of its stratum (for spp = 1: the pixel centre).

    Returns
    -------
    origins, directions, pixel_index
        (N, 3) float64 metres, (N, 3) float64 unit directions, (N,) int64 flat pixel index,
        with ``N = len(pixels) * samples_per_pixel``, pixel-major (the samples of a pixel are
        consecutive).
    """
    spp = _check_spp(samples_per_pixel)
    if pixels is None:
        pix = np.arange(camera.n_pixels, dtype=np.int64)
    else:
        pix = np.ascontiguousarray(pixels, dtype=np.int64).reshape(-1)
        if pix.size and (pix.min() < 0 or pix.max() >= camera.n_pixels):
            raise ValueError(f"pixel indices must be in [0, {camera.n_pixels})")
    if isinstance(camera, DownwardHemisphereCamera):
        return camera.rays(spp, seed, pix, jitter=jitter)
    grid = int(math.ceil(math.sqrt(spp)))
    r, u, f = camera.basis()
    half_w, half_h = camera.half_extent
    n = pix.shape[0] * spp
    out_o = np.empty((n, 3))
    out_d = np.empty((n, 3))
    out_p = np.empty(n, np.int64)
    if n:
        run_split(
            _ray_kernel,
            (pix.shape[0] + _ITEM - 1) // _ITEM,
            pix,
            camera.width_px,
            camera.height_px,
            spp,
            grid,
            seed_key(seed),
            bool(jitter),
            np.asarray(camera.position_m),
            r,
            u,
            f,
            half_w,
            half_h,
            out_o,
            out_d,
            out_p,
        )
    return out_o, out_d, out_p


def tile_pixels(
    camera: Camera | DownwardHemisphereCamera, x0: int, y0: int, x1: int, y1: int, block_px: int = 1
) -> np.ndarray:
    """Flat indices of the pixels with ``x0 <= x < x1`` and ``y0 <= y < y1``.

    ``block_px = 1`` lists them row by row. A larger value lists them in square blocks of
    ``block_px x block_px`` pixels (blocks row by row, pixels row by row inside a block), which
    keeps consecutive rays close together: the ray caster traces runs of similar rays together
    (:func:`render.rays.bvh.intersect_closest`), so 4 x 4 blocks are faster than long rows.
    """
    x0, x1 = max(0, int(x0)), min(camera.width_px, int(x1))
    y0, y1 = max(0, int(y0)), min(camera.height_px, int(y1))
    if x1 <= x0 or y1 <= y0:
        return np.zeros(0, np.int64)
    ys, xs = np.mgrid[y0:y1, x0:x1]
    flat = (ys * camera.width_px + xs).reshape(-1).astype(np.int64)
    if block_px > 1:
        by, bx = (ys - y0) // block_px, (xs - x0) // block_px
        n_bx = (x1 - x0 + block_px - 1) // block_px
        key = (by * n_bx + bx).reshape(-1)
        flat = flat[np.argsort(key, kind="stable")]
    return flat


def iter_tiles(camera: Camera, tile_px: int = 64) -> Iterator[tuple[int, int, int, int]]:
    """Tiles ``(x0, y0, x1, y1)`` covering the image, row by row from the top-left."""
    if tile_px < 1:
        raise ValueError("tile_px must be >= 1")
    for y0 in range(0, camera.height_px, tile_px):
        for x0 in range(0, camera.width_px, tile_px):
            yield x0, y0, min(x0 + tile_px, camera.width_px), min(y0 + tile_px, camera.height_px)


# --------------------------------------------------------------------------------------------
# Projection and angles
# --------------------------------------------------------------------------------------------


def image_plane_coordinates(camera: Camera, x_px, y_px) -> tuple[np.ndarray, np.ndarray]:
    """Continuous pixel coordinates -> image-plane coordinates (a right, b up) at unit distance."""
    half_w, half_h = camera.half_extent
    a = (2.0 * np.asarray(x_px, dtype=np.float64) / camera.width_px - 1.0) * half_w
    b = (1.0 - 2.0 * np.asarray(y_px, dtype=np.float64) / camera.height_px) * half_h
    return a, b


def directions_at(camera: Camera, x_px, y_px) -> np.ndarray:
    """Unit world directions (..., 3) through continuous pixel coordinates."""
    r, u, f = camera.basis()
    a, b = image_plane_coordinates(camera, x_px, y_px)
    d = f + a[..., None] * r + b[..., None] * u
    return d / np.linalg.norm(d, axis=-1, keepdims=True)


def pixel_directions(camera: Camera) -> np.ndarray:
    """(H, W, 3) unit directions through the pixel centres."""
    ys, xs = np.mgrid[0 : camera.height_px, 0 : camera.width_px]
    return directions_at(camera, xs + 0.5, ys + 0.5)


def project(camera: Camera, points_m: np.ndarray) -> np.ndarray:
    """Continuous pixel coordinates (N, 2) = (x, y) of world points (N, 3).

    Points on or behind the camera plane get NaN. Points outside the field of view get
    coordinates outside ``[0, W] x [0, H]``.
    """
    p = np.asarray(points_m, dtype=np.float64).reshape(-1, 3) - np.asarray(camera.position_m)
    r, u, f = camera.basis()
    half_w, half_h = camera.half_extent
    depth = p @ f
    front = depth > 0.0
    safe = np.where(front, depth, 1.0)
    a = (p @ r) / safe
    b = (p @ u) / safe
    x = (a / half_w + 1.0) * 0.5 * camera.width_px
    y = (1.0 - b / half_h) * 0.5 * camera.height_px
    out = np.stack([x, y], axis=-1)
    out[~front] = np.nan
    return out


def _rectangle_solid_angle(a0, a1, b0, b1):
    """Solid angle (sr) of the rectangle [a0, a1] x [b0, b1] on the plane at unit distance.

    Sum of corner terms atan(a b / sqrt(1 + a^2 + b^2)): the closed form for a rectangle with
    one corner at the foot of the perpendicular, combined by inclusion-exclusion.
    """

    def g(a, b):
        return np.arctan(a * b / np.sqrt(1.0 + a * a + b * b))

    return g(a1, b1) - g(a0, b1) - g(a1, b0) + g(a0, b0)


def pixel_solid_angle_sr(camera: Camera) -> np.ndarray:
    """(H, W) exact solid angle (steradians) subtended by each pixel at the eye."""
    xs = np.arange(camera.width_px + 1, dtype=np.float64)
    ys = np.arange(camera.height_px + 1, dtype=np.float64)
    a, _ = image_plane_coordinates(camera, xs, np.zeros_like(xs))
    _, b = image_plane_coordinates(camera, np.zeros_like(ys), ys)
    # b decreases with y: row j spans [b[j+1], b[j]].
    return _rectangle_solid_angle(a[None, :-1], a[None, 1:], b[1:, None], b[:-1, None])


def pixel_angular_size_deg(camera: Camera) -> np.ndarray:
    """(H, W) angular size of each pixel, degrees: the square root of its solid angle.

    At the image centre this is close to ``hfov_deg / width_px`` for narrow fields of view.
    """
    return np.degrees(np.sqrt(pixel_solid_angle_sr(camera)))


def angle_to_deg(camera: Camera, direction: np.ndarray) -> np.ndarray:
    """(H, W) angle, degrees, between each pixel-centre ray and a world ``direction`` (3,).

    Use it for the angle between the line of sight through each pixel and a glare source
    (``direction = source_m - camera.position_m``).
    """
    d = np.asarray(direction, dtype=np.float64).reshape(3)
    d = d / np.linalg.norm(d)
    c = np.clip(pixel_directions(camera) @ d, -1.0, 1.0)
    return np.degrees(np.arccos(c))
