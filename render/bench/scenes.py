"""Synthetic triangle scenes for the ray benchmark and the ray-casting tests.

Plain triangle soups (F, 3, 3) in metres, built from closed forms: an axis-aligned box, a
latitude/longitude sphere whose vertices all lie on the sphere, and a seeded stress scene of
many boxes and spheres on a ground plane. Every triangle winds counter-clockwise seen from
outside (outward normal by the right-hand rule).
"""

from __future__ import annotations

import numpy as np

__all__ = ["box_triangles", "stress_scene", "uv_sphere_triangles"]


def box_triangles(lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """(12, 3, 3) triangles of the axis-aligned box [lo, hi], outward counter-clockwise."""
    x0, y0, z0 = lo
    x1, y1, z1 = hi
    c = np.array(
        [
            [x0, y0, z0],
            [x1, y0, z0],
            [x1, y1, z0],
            [x0, y1, z0],
            [x0, y0, z1],
            [x1, y0, z1],
            [x1, y1, z1],
            [x0, y1, z1],
        ],
        float,
    )
    faces = [
        (0, 2, 1), (0, 3, 2),  # bottom (-z)
        (4, 5, 6), (4, 6, 7),  # top (+z)
        (0, 1, 5), (0, 5, 4),  # -y
        (2, 3, 7), (2, 7, 6),  # +y
        (1, 2, 6), (1, 6, 5),  # +x
        (3, 0, 4), (3, 4, 7),  # -x
    ]  # fmt: skip
    return c[np.array(faces)]


def uv_sphere_triangles(
    centre_m: tuple[float, float, float] | np.ndarray, radius_m: float, n_lat: int, n_lon: int
) -> np.ndarray:
    """(2 n_lon (n_lat - 1), 3, 3) triangles of a latitude/longitude sphere, every vertex on
    the sphere, outward counter-clockwise."""
    theta = np.linspace(0.0, np.pi, n_lat + 1)
    phi = np.linspace(0.0, 2.0 * np.pi, n_lon + 1)
    st, ct = np.sin(theta), np.cos(theta)
    grid = np.stack(
        [st[:, None] * np.cos(phi)[None, :], st[:, None] * np.sin(phi)[None, :], np.repeat(ct[:, None], n_lon + 1, 1)],
        axis=-1,
    )
    tris = []
    for i in range(n_lat):
        for j in range(n_lon):
            a, b, c, d = grid[i, j], grid[i + 1, j], grid[i + 1, j + 1], grid[i, j + 1]
            if i != 0:
                tris.append((a, b, d))
            if i != n_lat - 1:
                tris.append((b, c, d))
    return np.asarray(centre_m, dtype=np.float64) + radius_m * np.asarray(tris)


def stress_scene(seed: int = 0, n_boxes: int = 12000, n_spheres: int = 300, extent_m: float = 200.0) -> np.ndarray:
    """Seeded synthetic scene: boxes (rotated about z) and spheres on a ground plane of
    ``2 extent_m`` square. Returns (F, 3, 3) triangles; F = 2 + 12 n_boxes + 360 n_spheres
    (252 002 by default)."""
    rng = np.random.default_rng(seed)
    half = extent_m / 2.0
    out = [
        np.array(
            [
                [[-2 * half, -2 * half, 0], [2 * half, -2 * half, 0], [2 * half, 2 * half, 0]],
                [[-2 * half, -2 * half, 0], [2 * half, 2 * half, 0], [-2 * half, 2 * half, 0]],
            ],
            float,
        )
    ]
    unit = box_triangles(np.array([-0.5, -0.5, 0.0]), np.array([0.5, 0.5, 1.0]))
    size = rng.uniform([0.3, 0.3, 0.3], [4.0, 4.0, 6.0], (n_boxes, 3))
    heading = rng.uniform(0.0, 2.0 * np.pi, n_boxes)
    pos = np.column_stack([rng.uniform(-half, half, (n_boxes, 2)), np.zeros(n_boxes)])
    c, s = np.cos(heading), np.sin(heading)
    rot = np.zeros((n_boxes, 3, 3))
    rot[:, 0, 0], rot[:, 0, 1], rot[:, 1, 0], rot[:, 1, 1], rot[:, 2, 2] = c, -s, s, c, 1.0
    scaled = unit[None, :, :, :] * size[:, None, None, :]  # (B, 12, 3, 3)
    boxes = np.einsum("bij,btvj->btvi", rot, scaled) + pos[:, None, None, :]
    out.append(boxes.reshape(-1, 3, 3))
    for _ in range(n_spheres):
        r = rng.uniform(0.5, 3.0)
        centre = [rng.uniform(-half, half), rng.uniform(-half, half), r + rng.uniform(0.0, 4.0)]
        out.append(uv_sphere_triangles(centre, r, 10, 20))
    return np.concatenate(out)
