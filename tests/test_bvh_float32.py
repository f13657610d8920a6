"""The single-ray traversal's float32 box test: entry distances against the analytic slab
distances, and rays the float32 rounding of their origin could make miss.

Sources: the entry distance of a ray into an axis-aligned box is the largest of its three slab
entry distances (Kay & Kajiya, "Ray tracing complex scenes", SIGGRAPH 1986); a ray meets a
plane at the analytic t of origin + t * direction; the watertight triangle test includes a
triangle's edges (Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", JCGT 2(1),
2013)."""

import numba
import numpy as np
import pytest

from render.rays.bvh import build_bvh, intersect_any, intersect_closest
from render.rays.bvh.layout import WIDE
from render.rays.bvh.simd import node_entry_mask
from render.rays.bvh.single import _cull, _down32, _inverse32, _octant_columns, _up32
from render.rays.bvh.slab import F32_FAR


@numba.njit
def _mask(wb, o, d, t_max, near):
    """The root's entry mask as the traversal computes it (origins rounded per bound side)."""
    inv = (_inverse32(d[0]), _inverse32(d[1]), _inverse32(d[2]))
    near_o = (
        _up32(o[0]) if inv[0] >= 0.0 else _down32(o[0]),
        _up32(o[1]) if inv[1] >= 0.0 else _down32(o[1]),
        _up32(o[2]) if inv[2] >= 0.0 else _down32(o[2]),
    )
    far_o = (
        _down32(o[0]) if inv[0] >= 0.0 else _up32(o[0]),
        _down32(o[1]) if inv[1] >= 0.0 else _up32(o[1]),
        _down32(o[2]) if inv[2] >= 0.0 else _up32(o[2]),
    )
    far_inv = (np.float32(inv[0] * F32_FAR), np.float32(inv[1] * F32_FAR), np.float32(inv[2] * F32_FAR))
    cols = _octant_columns(inv[0], inv[1], inv[2])
    return node_entry_mask(wb, np.uint64(0), cols, near_o, far_o, inv, far_inv, _down32(0.0), _cull(t_max), near)


def _two_planes():
    # Two triangles in the planes x = 0 and x = 3 over y, z in [0, 1], each a leaf of the root.
    tri = np.array([[0.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    return build_bvh(np.stack([tri, tri + [3.0, 0.0, 0.0]]))


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_entry_distances_match_the_slab_distances(sign):
    # A ray from x = -2 along +x (or from x = 5 along -x) enters the two leaf boxes at t = 2
    # and t = 5 (slab entry distances). The float32 test may only report them a little early
    # (never late: a late entry could drop a box before a hit), within a relative 2^-20.
    bvh = _two_planes()
    assert bvh.wide_nodes.shape[0] == 1
    o = np.array([-2.0 if sign > 0 else 5.0, 0.25, 0.25])
    d = np.array([sign, 0.0, 0.0])
    near = np.empty(WIDE)
    m = _mask(bvh.wide_nodes, o, d, np.inf, near)
    entered = sorted(near[[c for c in range(WIDE) if m >> c & 1]])
    assert len(entered) == 2
    for got, exact in zip(entered, [2.0, 5.0]):
        assert exact * (1.0 - 2.0**-20) <= got <= exact
    # Hits looked for before t = 4 only: the far plane's box is not entered.
    m = _mask(bvh.wide_nodes, o, d, 4.0, near)
    assert bin(m).count("1") == 1
    # A ray passing above both boxes enters neither.
    assert _mask(bvh.wide_nodes, o + [0.0, 1.5, 0.0], d, np.inf, near) == 0


def test_ray_in_a_face_plane_with_an_origin_float32_cannot_hold():
    # The triangle (0, 5, 0), (1, 5, 0), (1, 5, 1) has its edge x = 1 on its box's upper x face.
    # Rays from x = 1 - 1e-9 (float32 rounds it to 1, onto the face) with a zero x direction
    # towards y = 5 meet the triangle just inside that edge at t = 1 (the plane y = 5 from
    # y = 0 with direction length 5 along y). Rounded to nearest, the far distance of x
    # would be (1 - 1) * inverse = 0 and the box missed.
    tri = np.array([[[0.0, 5.0, 0.0], [1.0, 5.0, 0.0], [1.0, 5.0, 1.0]]])
    bvh = build_bvh(tri)
    x = 1.0 - 1e-9
    assert np.float32(x) == 1.0
    z = np.array([0.1, 0.5, 0.9])
    o = np.column_stack([np.full_like(z, x), np.zeros_like(z), z])
    d = np.column_stack([np.zeros_like(z), np.full_like(z, 5.0), np.zeros_like(z)])
    hits = intersect_closest(bvh, o, d, packets=False)
    np.testing.assert_array_equal(hits.triangle, [0, 0, 0])
    np.testing.assert_allclose(hits.t, 1.0, rtol=1e-15)
    assert np.all(intersect_any(bvh, o, d, 2.0, packets=False))
    assert not np.any(intersect_any(bvh, o, d, 0.999, packets=False))
