"""The single-ray traversal's arrays are handed on as data pointers: an array of another
element type or layout must not compile (it would be read as the wrong numbers).

Source: the checks are of the code's own contract (common practice, no source)."""

import numba
import numpy as np
import pytest

from render.rays.bvh import build_bvh
from render.rays.bvh.layout import WIDE
from render.rays.bvh.single import any_one, closest_one


def _scene():
    tris = np.array([[[0.0, -1.0, -1.0], [0.0, 1.0, -1.0], [0.0, 0.0, 1.0]]])
    bvh = build_bvh(tris)
    n = max(bvh.wide_stack, 8)
    return bvh, np.empty(n, np.int64), np.empty(n), np.empty(2 * WIDE)


def test_single_rays_hit_through_the_pointers():
    # A ray along +x from x = -1 meets the triangle in the plane x = 0 at t = 1 (analytic).
    bvh, st_node, st_t, work = _scene()
    o = np.array([-1.0, 0.0, 0.0])
    d = np.array([1.0, 0.0, 0.0])
    wb, wi, tv, ti = bvh.wide_nodes, bvh.wide_nodes_i32, bvh.tri_vertices, bvh.tri_index
    t, j, _, _ = closest_one(wb, wi, tv, ti, o, d, 0.0, np.inf, st_node, st_t, work, WIDE)
    assert (t, j) == (1.0, 0)
    assert any_one(wb, wi, tv, o, d, 0.0, 2.0, st_node, work, WIDE)
    assert not any_one(wb, wi, tv, o, d, 0.0, 0.5, st_node, work, WIDE)


@pytest.mark.parametrize("kind", ["float32 origin", "strided origin", "int32 stack"])
def test_wrong_arrays_do_not_compile(kind):
    bvh, st_node, st_t, work = _scene()
    o = np.array([-1.0, 0.0, 0.0])
    d = np.array([1.0, 0.0, 0.0])
    if kind == "float32 origin":
        o = o.astype(np.float32)
    elif kind == "strided origin":
        o = np.repeat(o, 2)[::2]
    else:
        st_node = st_node.astype(np.int32)
    wb, wi, tv, ti = bvh.wide_nodes, bvh.wide_nodes_i32, bvh.tri_vertices, bvh.tri_index
    with pytest.raises(numba.core.errors.TypingError):
        closest_one(wb, wi, tv, ti, o, d, 0.0, np.inf, st_node, st_t, work, WIDE)
