"""Arbitrary output variables (AOVs): what each pixel sees, before any light is computed.

:func:`render_aovs` casts the primary rays of a camera and keeps, per pixel, the distance to the
first surface, its shading normal, its material and object, and the fraction of samples that
hit anything. The preview colourings below turn them into display arrays;
:func:`render.output.aov_previews.write_aov_previews` writes the files.

Per-pixel rule with several samples: the object seen by most samples wins (background, id -1,
takes part; a tie goes to the object met first in sample order). ``depth_m`` and ``normal``
average the samples of the winning object only, and ``material_id`` is the material most of
those samples saw, so an edge pixel never gets a depth or normal of no real surface.
"""

from __future__ import annotations

import colorsys

import numba
import numpy as np

from render.geometry.mesh import TriangleMesh
from render.rays.bvh import BVH, interpolate_normal, intersect_closest
from render.rays.cameras import Camera, camera_rays, iter_tiles, tile_pixels

# Pixels per tile edge when casting (bounds memory: tile_px^2 * spp rays at a time).
_TILE_PX = 128
# Pixels per block edge inside a tile (consecutive rays close together: see tile_pixels).
_BLOCK_PX = 4
# Seed of the id palette (any fixed value: it only makes the colours repeatable).
_PALETTE_SEED = 20261201
_PALETTE_SIZE = 64


@numba.njit(cache=True, nogil=True)
def _reduce_samples(obj, mat, t, nrm, out_depth, out_normal, out_mat, out_obj, out_cov):
    """Per pixel (row) of (P, spp) sample arrays: majority object, its mean depth and normal,
    its majority material, and the hit fraction."""
    n_pix, spp = obj.shape
    for p in range(n_pix):
        best_obj = obj[p, 0]
        best_n = 0
        hits = 0
        for s in range(spp):
            if obj[p, s] >= 0:
                hits += 1
            c = 0
            for q in range(spp):
                if obj[p, q] == obj[p, s]:
                    c += 1
            if c > best_n:
                best_n = c
                best_obj = obj[p, s]
        out_cov[p] = hits / spp
        out_obj[p] = best_obj
        if best_obj < 0:
            out_depth[p] = np.inf
            out_mat[p] = -1
            for k in range(3):
                out_normal[p, k] = 0.0
            continue
        depth = 0.0
        nx = 0.0
        ny = 0.0
        nz = 0.0
        best_mat = -1
        best_m = 0
        for s in range(spp):
            if obj[p, s] != best_obj:
                continue
            depth += t[p, s]
            nx += nrm[p, s, 0]
            ny += nrm[p, s, 1]
            nz += nrm[p, s, 2]
            c = 0
            for q in range(spp):
                if obj[p, q] == best_obj and mat[p, q] == mat[p, s]:
                    c += 1
            if c > best_m:
                best_m = c
                best_mat = mat[p, s]
        out_depth[p] = depth / best_n
        length = np.sqrt(nx * nx + ny * ny + nz * nz)
        if length > 0.0:
            nx /= length
            ny /= length
            nz /= length
        out_normal[p, 0] = nx
        out_normal[p, 1] = ny
        out_normal[p, 2] = nz
        out_mat[p] = best_mat


def render_aovs(
    mesh: TriangleMesh, bvh: BVH, camera: Camera, samples_per_pixel: int = 1, seed: int = 0
) -> dict[str, np.ndarray]:
    """Primary-ray AOVs of ``mesh`` seen by ``camera``.

    Parameters
    ----------
    mesh
        The triangles (with normals and ids) that ``bvh`` was built from.
    bvh
        :func:`render.rays.bvh.build_bvh` of ``mesh.triangles_m``.
    camera
        The view.
    samples_per_pixel, seed
        Stratified jittered samples per pixel and their seed (see :mod:`render.rays.cameras`).

    Returns
    -------
    dict
        ``depth_m`` (H, W) float64 distance from the eye along the ray to the surface, metres
        (inf where nothing is hit); ``normal`` (H, W, 3) float64 unit world-space shading
        normal as stored in the mesh (not flipped towards the camera; 0 on background);
        ``material_id`` and ``object_id`` (H, W) int32 indices into ``mesh.material_names`` /
        ``mesh.object_names`` (-1 on background); ``coverage`` (H, W) float64 fraction of
        samples that hit a surface. See the module docstring for how samples are combined.
    """
    if bvh.n_triangles != mesh.n_triangles:
        raise ValueError("the BVH was not built from this mesh")
    h, w = camera.shape
    depth = np.full(h * w, np.inf)
    normal = np.zeros((h * w, 3))
    mat = np.full(h * w, -1, np.int32)
    obj = np.full(h * w, -1, np.int32)
    cov = np.zeros(h * w)
    for x0, y0, x1, y1 in iter_tiles(camera, _TILE_PX):
        pix = tile_pixels(camera, x0, y0, x1, y1, block_px=_BLOCK_PX)
        o, d, _ = camera_rays(camera, samples_per_pixel, seed, pix)
        hits = intersect_closest(bvh, o, d)  # unit directions: t is the distance in metres
        spp = o.shape[0] // pix.shape[0]
        hit = hits.hit
        s_obj = np.where(hit, mesh.object_id[np.maximum(hits.triangle, 0)], -1).astype(np.int32)
        s_mat = np.where(hit, mesh.material_id[np.maximum(hits.triangle, 0)], -1).astype(np.int32)
        s_nrm = interpolate_normal(mesh.normals, hits)
        n = pix.shape[0]
        t_depth = np.empty(n)
        t_normal = np.empty((n, 3))
        t_mat = np.empty(n, np.int32)
        t_obj = np.empty(n, np.int32)
        t_cov = np.empty(n)
        _reduce_samples(
            s_obj.reshape(n, spp),
            s_mat.reshape(n, spp),
            hits.t.reshape(n, spp),
            s_nrm.reshape(n, spp, 3),
            t_depth,
            t_normal,
            t_mat,
            t_obj,
            t_cov,
        )
        depth[pix] = t_depth
        normal[pix] = t_normal
        mat[pix] = t_mat
        obj[pix] = t_obj
        cov[pix] = t_cov
    return {
        "depth_m": depth.reshape(h, w),
        "normal": normal.reshape(h, w, 3),
        "material_id": mat.reshape(h, w),
        "object_id": obj.reshape(h, w),
        "coverage": cov.reshape(h, w),
    }


# --------------------------------------------------------------------------------------------
# Previews
# --------------------------------------------------------------------------------------------


def id_palette(n: int = _PALETTE_SIZE, seed: int = _PALETTE_SEED) -> np.ndarray:
    """(n, 3) uint8 distinct colours for ids: hues stepped by the golden angle (so neighbouring
    ids differ strongly), saturation and value jittered from ``default_rng(seed)``; never dark,
    so that they stand apart from the black background."""
    rng = np.random.default_rng(seed)
    golden = (np.sqrt(5.0) - 1.0) / 2.0
    out = np.empty((n, 3), np.uint8)
    hue = rng.uniform()
    for i in range(n):
        hue = (hue + golden) % 1.0
        r, g, b = colorsys.hsv_to_rgb(hue, rng.uniform(0.45, 0.95), rng.uniform(0.65, 1.0))
        out[i] = np.round(np.array([r, g, b]) * 255.0)
    return out


def ids_to_rgb(ids: np.ndarray, palette: np.ndarray | None = None) -> np.ndarray:
    """(H, W) int ids -> (H, W, 3) uint8 colours; id < 0 (background) is black."""
    pal = id_palette() if palette is None else palette
    ids = np.asarray(ids)
    rgb = pal[np.mod(np.maximum(ids, 0), len(pal))]
    rgb[ids < 0] = 0
    return rgb


def depth_range_m(depth_m: np.ndarray) -> tuple[float, float]:
    """(near, far) of the finite depths, metres; (0, 1) when nothing was hit."""
    finite = depth_m[np.isfinite(depth_m)]
    if finite.size == 0:
        return 0.0, 1.0
    near, far = float(finite.min()), float(finite.max())
    return near, (far if far > near else near + 1.0)


def depth_to_grey(depth_m: np.ndarray, near_m: float, far_m: float) -> np.ndarray:
    """(H, W) depth -> (H, W) uint8 grey: 255 at ``near_m`` falling linearly to 40 at ``far_m``
    (clipped), 0 (black) where nothing was hit."""
    d = np.asarray(depth_m, dtype=np.float64)
    frac = np.clip((d - near_m) / (far_m - near_m), 0.0, 1.0)
    grey = np.round(255.0 - frac * (255.0 - 40.0))
    grey[~np.isfinite(d)] = 0.0
    return grey.astype(np.uint8)


def normals_to_rgb(normal: np.ndarray) -> np.ndarray:
    """(H, W, 3) unit normals -> uint8 RGB with (x, y, z) in [-1, 1] mapped to [0, 255];
    background (zero normal) black."""
    n = np.asarray(normal, dtype=np.float64)
    rgb = np.round((np.clip(n, -1.0, 1.0) + 1.0) * 0.5 * 255.0).astype(np.uint8)
    rgb[~np.any(n != 0.0, axis=-1)] = 0
    return rgb
