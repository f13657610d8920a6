"""Vector code for the 8-wide tree: one ray against the boxes of all children of a node.

numba's own loops over the :data:`~render.rays.bvh.layout.WIDE` children of a node do not
vectorise well: with the trip count known LLVM unrolls the loop into scalar code, and with
it passed at run time it vectorises for more children than a node has and runs the scalar
remainder. :func:`node_entry_mask` is therefore written as LLVM vector instructions (a numba
``intrinsic``): 8 float32 bounds per load, tested in float32 with the slab test's operations
(no fast-math). The traversal is bound by the latency of one node test after another, and
float32 needs no widening of the stored bounds; the decisions are kept conservative (a ray
never misses a box it touches) by the caller's rounding of the ray's origin to the safe side
of each bound and the margins of :mod:`render.rays.bvh.slab`, and the float64 triangle test
decides every hit, so the hits are those of an exact box test. :func:`lowest_bit` is LLVM's
count-trailing-zeros, to visit only the children entered. :func:`leaf_lane_hits` is the
watertight triangle test (:mod:`render.rays.bvh.triangle`) of four of a leaf's triangles at
once in float64 lanes, the same operations in the same order per lane. :func:`data_pointer` hands an
array's data on as a bare pointer, so that a function called once per ray takes one machine
word per array instead of numba's whole array record (see :mod:`render.rays.bvh.single`).

The ray's near and far bound of each axis are chosen once per ray by the sign of its inverse
direction (Williams et al. 2005): for a non-negative inverse the lower bound gives the smaller
slab distance, which is what ``min``/``max`` pick in the scalar test.

References
----------
- Williams, Barrus, Morley & Shirley, "An efficient and robust ray-box intersection
  algorithm", Journal of Graphics Tools 10(1), 2005 (near and far bounds by direction sign).
- Ize, "Robust BVH Ray Traversal", JCGT 2(2), 2013 (conservative far distance).
- Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", JCGT 2(1), 2013 (the leaf
  test's arithmetic, :mod:`render.rays.bvh.triangle`).
- LLVM Language Reference Manual, "'llvm.cttz.*' Intrinsic", "'fcmp' Instruction".
"""

from __future__ import annotations

from llvmlite import ir
from numba.core import types
from numba.extending import intrinsic

from render.rays.bvh.layout import WIDE

__all__ = ["LANES", "data_pointer", "leaf_lane_hits", "lowest_bit", "node_entry_mask"]

# Triangles of a leaf tested at once by leaf_lane_hits (float64 lanes: one 256-bit vector).
LANES = 4

_I32 = ir.IntType(32)
_I64 = ir.IntType(64)
_F64 = ir.DoubleType()
_V8F = ir.VectorType(ir.FloatType(), WIDE)
_V8D = ir.VectorType(_F64, WIDE)
_V4D = ir.VectorType(_F64, LANES)


@intrinsic
def lowest_bit(typingctx, x):
    """Index of the lowest set bit of a non-zero int64 (count trailing zeros)."""
    sig = types.int64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.cttz(args[0], ir.Constant(ir.IntType(1), 1))

    return sig, codegen


@intrinsic
def data_pointer(typingctx, a, dtype):
    """Address of the first element of a C-contiguous array of element type ``dtype`` (a numpy
    scalar type such as ``np.float64``), as a ``voidptr`` for ``numba.carray``. An array of
    another layout or type does not compile. No reference is taken: the caller keeps the array
    alive while the pointer is used."""
    if not (isinstance(a, types.Array) and a.layout == "C"):
        return None
    if not (isinstance(dtype, types.NumberClass) and dtype.instance_type == a.dtype):
        return None
    sig = types.voidptr(a, dtype)

    def codegen(context, builder, signature, args):
        ary = context.make_array(signature.args[0])(context, builder, args[0])
        return builder.bitcast(ary.data, context.get_value_type(types.voidptr))

    return sig, codegen


def _vmax(builder, a, b):
    return builder.select(builder.fcmp_ordered(">", a, b), a, b)


def _vmin(builder, a, b):
    return builder.select(builder.fcmp_ordered("<", a, b), a, b)


def _splat(builder, x):
    v = builder.insert_element(ir.Constant(_V8F, ir.Undefined), x, ir.Constant(_I32, 0))
    return builder.shuffle_vector(
        v, ir.Constant(_V8F, ir.Undefined), ir.Constant(ir.VectorType(_I32, WIDE), [0] * WIDE)
    )


@intrinsic
def node_entry_mask(typingctx, wb, node, cols, origin, far_origin, inverse, far_inverse, t_min, t_max, near_out):
    """Bit mask of the children of node ``node`` of ``wb`` (the wide tree's float32 records)
    that the ray enters, ``t_min <= near <= min(far, t_max)``, in float32: per axis the near
    bound's distance ``(bound - origin) * inverse`` and the far bound's ``(bound - far_origin)
    * far_inverse`` (:mod:`render.rays.bvh.single` rounds the ray's origin to the conservative
    side of each and scales the far inverse up), ``near`` the largest near distance and
    ``t_min``, ``far`` the smallest far distance. With ``near_out`` (float64, C-contiguous) each child's near
    distance is stored in ``near_out[0:WIDE]``, widened; None stores nothing.

    ``cols`` = (near x, near y, near z, far x, far y, far z) columns of the first child's
    bounds for the ray's octant (uint64); ``origin``, ``far_origin``, ``inverse``,
    ``far_inverse`` float32 3-tuples, ``t_min``, ``t_max`` float32."""
    if not (isinstance(wb, types.Array) and wb.ndim == 2 and wb.layout == "C" and wb.dtype == types.float32):
        return None  # rows are read as contiguous float32 runs
    keep_near = not isinstance(near_out, types.NoneType)
    if keep_near and not (
        isinstance(near_out, types.Array) and near_out.layout == "C" and near_out.dtype == types.float64
    ):
        return None
    scalars = (*origin.types, *far_origin.types, *inverse.types, *far_inverse.types, t_min, t_max)
    if not all(t == types.float32 for t in scalars):
        return None
    sig = types.int64(wb, node, cols, origin, far_origin, inverse, far_inverse, t_min, t_max, near_out)

    def codegen(context, builder, signature, args):
        wb_t = signature.args[0]
        out_t = signature.args[9]
        a_wb, a_node, a_cols, a_origin, a_far, a_inverse, a_far_inverse, a_tmin, a_tmax, a_out = args
        ary = context.make_array(wb_t)(context, builder, a_wb)
        row = builder.mul(a_node, builder.extract_value(ary.shape, 1))
        col = [builder.extract_value(a_cols, k) for k in range(6)]
        o = [_splat(builder, builder.extract_value(a_origin, k)) for k in range(3)]
        o += [_splat(builder, builder.extract_value(a_far, k)) for k in range(3)]
        inv = [_splat(builder, builder.extract_value(a_inverse, k)) for k in range(3)]
        inv += [_splat(builder, builder.extract_value(a_far_inverse, k)) for k in range(3)]

        def slab(k):
            ptr = builder.gep(ary.data, [builder.add(row, col[k])])
            bound = builder.load(builder.bitcast(ptr, _V8F.as_pointer()), align=4)
            return builder.fmul(builder.fsub(bound, o[k]), inv[k])

        tn = [slab(k) for k in range(3)]
        tf = [slab(k) for k in range(3, 6)]
        near = _vmax(builder, _vmax(builder, tn[0], tn[1]), _vmax(builder, tn[2], _splat(builder, a_tmin)))
        # Both chains two operations deep after the products (the test waits on the longer).
        far = _vmin(builder, _vmin(builder, tf[0], tf[1]), _vmin(builder, tf[2], _splat(builder, a_tmax)))
        enter = builder.fcmp_ordered("<=", near, far)
        if keep_near:
            out = context.make_array(out_t)(context, builder, a_out)
            builder.store(builder.fpext(near, _V8D), builder.bitcast(out.data, _V8D.as_pointer()), align=8)
        return builder.zext(builder.bitcast(enter, ir.IntType(WIDE)), _I64)

    return sig, codegen


def _splat_d(builder, x):
    v = builder.insert_element(ir.Constant(_V4D, ir.Undefined), x, ir.Constant(_I32, 0))
    return builder.shuffle_vector(
        v, ir.Constant(_V4D, ir.Undefined), ir.Constant(ir.VectorType(_I32, LANES), [0] * LANES)
    )


@intrinsic
def leaf_lane_hits(typingctx, lanes, first, n_valid, rows, p, s, t_min, t_bound, out):
    """Bit mask of the triangles ``first .. first + LANES - 1`` of ``lanes`` (the BVH's
    ``tri_lanes``: (9, M + LANES - 1) float64, row ``3 v + c`` component ``c`` of vertex ``v``)
    among the first ``n_valid`` that the ray hits with ``t_min < t`` and ``t < t_bound`` (no
    ``out``: an occlusion test) or ``t <= t_bound`` (with ``out``: a closest-hit filter whose
    ties the caller resolves), by the watertight test of
    :func:`~render.rays.bvh.triangle.intersect_triangle` with the same float64 operations in
    the same order per lane (no fast-math, no fused multiply-add), so each lane's ``t``, ``u``,
    ``v`` are that function's to the bit. With ``out`` (float64, C-contiguous, at least
    ``3 LANES``) the lanes' ``t``, ``u``, ``v`` are stored at ``out[0:LANES]``,
    ``out[LANES:2 LANES]`` and ``out[2 LANES:3 LANES]``.

    ``rows`` = the nine element offsets ``(3 v + k) * lanes.shape[1]`` of the components the
    test reads as x, y, z of v0, v1, v2 (k = kx, ky, kz of the ray's axis permutation), so the
    permutation is a choice of rows; ``p``, ``s`` the ray's permuted origin and shear."""
    if not (
        isinstance(lanes, types.Array) and lanes.ndim == 2 and lanes.layout == "C" and lanes.dtype == types.float64
    ):
        return None
    keep = not isinstance(out, types.NoneType)
    if keep and not (isinstance(out, types.Array) and out.layout == "C" and out.dtype == types.float64):
        return None
    if not (isinstance(rows, types.UniTuple) and rows.count == 9 and isinstance(rows.dtype, types.Integer)):
        return None
    scalars = (*p.types, *s.types, t_min, t_bound)
    if len(scalars) != 8 or not all(t == types.float64 for t in scalars):
        return None
    sig = types.int64(lanes, first, n_valid, rows, p, s, t_min, t_bound, out)

    def codegen(context, builder, signature, args):
        a_lanes, a_first, a_n, a_rows, a_p, a_s, a_tmin, a_bound, a_out = args
        ary = context.make_array(signature.args[0])(context, builder, a_lanes)
        first_ = builder.sext(a_first, _I64) if a_first.type.width < 64 else a_first
        n_ = builder.sext(a_n, _I64) if a_n.type.width < 64 else a_n

        def load(i):
            off = builder.extract_value(a_rows, i)
            off = builder.sext(off, _I64) if off.type.width < 64 else off
            ptr = builder.gep(ary.data, [builder.add(off, first_)])
            return builder.load(builder.bitcast(ptr, _V4D.as_pointer()), align=8)

        v0x, v0y, v0z, v1x, v1y, v1z, v2x, v2y, v2z = (load(i) for i in range(9))
        px, py, pz = (_splat_d(builder, builder.extract_value(a_p, i)) for i in range(3))
        sx, sy, sz = (_splat_d(builder, builder.extract_value(a_s, i)) for i in range(3))
        sub, mul, add = builder.fsub, builder.fmul, builder.fadd
        az = sub(v0z, pz)
        bz = sub(v1z, pz)
        cz = sub(v2z, pz)
        ax = sub(sub(v0x, px), mul(sx, az))
        ay = sub(sub(v0y, py), mul(sy, az))
        bx = sub(sub(v1x, px), mul(sx, bz))
        by = sub(sub(v1y, py), mul(sy, bz))
        cx = sub(sub(v2x, px), mul(sx, cz))
        cy = sub(sub(v2y, py), mul(sy, cz))
        uu = sub(mul(cx, by), mul(cy, bx))
        vv = sub(mul(ax, cy), mul(ay, cx))
        ww = sub(mul(bx, ay), mul(by, ax))
        det = add(add(uu, vv), ww)
        zero = ir.Constant(_V4D, [0.0] * LANES)
        one = ir.Constant(_V4D, [1.0] * LANES)
        ge = [builder.fcmp_ordered(">=", x, zero) for x in (uu, vv, ww)]
        le = [builder.fcmp_ordered("<=", x, zero) for x in (uu, vv, ww)]
        hit = builder.and_(
            builder.or_(
                builder.and_(builder.and_(ge[0], ge[1]), ge[2]), builder.and_(builder.and_(le[0], le[1]), le[2])
            ),
            builder.fcmp_unordered("!=", det, zero),
        )
        inv = builder.fdiv(one, builder.select(hit, det, one))
        t = mul(add(add(mul(uu, mul(sz, az)), mul(vv, mul(sz, bz))), mul(ww, mul(sz, cz))), inv)
        lane = ir.Constant(ir.VectorType(_I64, LANES), list(range(LANES)))
        n_splat = builder.insert_element(
            ir.Constant(ir.VectorType(_I64, LANES), ir.Undefined), n_, ir.Constant(_I32, 0)
        )
        n_splat = builder.shuffle_vector(
            n_splat,
            ir.Constant(ir.VectorType(_I64, LANES), ir.Undefined),
            ir.Constant(ir.VectorType(_I32, LANES), [0] * LANES),
        )
        ok = builder.and_(hit, builder.icmp_signed("<", lane, n_splat))
        ok = builder.and_(ok, builder.fcmp_ordered(">", t, _splat_d(builder, a_tmin)))
        ok = builder.and_(ok, builder.fcmp_ordered("<=" if keep else "<", t, _splat_d(builder, a_bound)))
        if keep:
            out = context.make_array(signature.args[8])(context, builder, a_out)
            base = builder.bitcast(out.data, _V4D.as_pointer())
            builder.store(t, base, align=8)
            builder.store(mul(vv, inv), builder.gep(base, [ir.Constant(_I32, 1)]), align=8)
            builder.store(mul(ww, inv), builder.gep(base, [ir.Constant(_I32, 2)]), align=8)
        return builder.zext(builder.bitcast(ok, ir.IntType(LANES)), _I64)

    return sig, codegen
