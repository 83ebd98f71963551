"""Four ray–box slab tests at once, as one LLVM vector expression.

numba compiles scalar code; LLVM does not turn the four child tests of a 4-wide node into vector
instructions by itself, so ``slab4`` spells them out on <4 x float> values (SSE on x86, NEON on
ARM). Each node stores its four child boxes as six rows of four float32 (min x, max x, min y, ...),
so every row is one vector load.
"""

from __future__ import annotations

from llvmlite import ir
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic

_F4 = ir.VectorType(ir.FloatType(), 4)
_D4 = ir.VectorType(ir.DoubleType(), 4)


def _splat(builder, value, vector_type=_F4):
    """``value`` in every lane of a ``vector_type``."""
    vec = builder.insert_element(ir.Constant(vector_type, ir.Undefined), value, ir.IntType(32)(0))
    return builder.shuffle_vector(vec, vec, ir.Constant(ir.VectorType(ir.IntType(32), 4), [0] * 4))


def _i64(builder, value):
    return builder.sext(value, ir.IntType(64)) if value.type.width < 64 else value


@intrinsic
def prefetch_row(typingctx, arr, i):
    """Hint the CPU to fetch the first 128 bytes of row ``i`` of a C-contiguous array."""
    sig = types.void(arr, i)

    def codegen(context, builder, signature, args):
        ary = context.make_array(signature.args[0])(context, builder, value=args[0])
        stride = cgutils.unpack_tuple(builder, ary.strides)[0]
        row = builder.gep(builder.bitcast(ary.data, ir.IntType(8).as_pointer()),
                          [builder.mul(_i64(builder, args[1]), stride)])  # fmt: skip
        i32 = ir.IntType(32)
        fnty = ir.FunctionType(ir.VoidType(), [row.type, i32, i32, i32])
        fn = cgutils.get_or_insert_function(builder.module, fnty, "llvm.prefetch.p0")
        for offset in (0, 64):  # read, keep in all cache levels, data cache
            builder.call(fn, [builder.gep(row, [ir.IntType(64)(offset)]), i32(0), i32(3), i32(1)])
        return context.get_dummy_value()

    return sig, codegen


def _slab_entries(context, builder, signature, args):
    """The <4 x float> entry distances of ``slab4``'s arguments, and the node record's address."""
    bounds_val, node_val, nx_val, ny_val, nz_val = args[:5]
    ray = [_splat(builder, a) for a in args[5:14]]
    o = ray[0:3]
    inv = ray[3:6]
    t_in, t_out, rob = ray[6], ray[7], ray[8]
    ary = context.make_array(signature.args[0])(context, builder, value=bounds_val)
    node_stride, row_stride = cgutils.unpack_tuple(builder, ary.strides)[:2]
    node_ptr = builder.gep(builder.bitcast(ary.data, ir.IntType(8).as_pointer()),
                           [builder.mul(_i64(builder, node_val), node_stride)])  # fmt: skip

    def row(r):
        ptr = builder.gep(node_ptr, [builder.mul(_i64(builder, r), row_stride)])
        return builder.load(builder.bitcast(ptr, _F4.as_pointer()), align=4)  # any float32 array

    for axis, near in enumerate((nx_val, ny_val, nz_val)):
        far = builder.xor(near, near.type(1))
        lo = builder.fmul(builder.fsub(row(near), o[axis]), inv[axis])
        # (far − o)·(inv·robust) rather than ((far − o)·inv)·robust: the same number of roundings,
        # so Ize's factor still covers it, and inv·robust is the same for every node of a ray,
        # which LLVM computes once per ray (bench/raycast.py --quick, one thread: camera
        # 0.79 -> 0.82-0.83 of Embree's rate, incoherent 0.70-0.71 -> 0.71-0.73).
        hi = builder.fmul(builder.fsub(row(far), o[axis]), builder.fmul(inv[axis], rob))
        t_in = builder.select(builder.fcmp_ordered(">", lo, t_in), lo, t_in)
        t_out = builder.select(builder.fcmp_ordered("<", hi, t_out), hi, t_out)
    inf = ir.Constant(_F4, [float("inf")] * 4)
    entry = builder.select(builder.fcmp_ordered("<=", t_in, t_out), t_in, inf)
    return entry, row


@intrinsic
def slab4(typingctx, bounds, node, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo, t_hi, robust):
    """Entry distances of a ray into the four child boxes of ``node``; +inf where it misses.

    Parameters
    ----------
    bounds : (m, rows, 4) float32 node records with the six bound rows first.
    node : int, node index. nx, ny, nz : int, row of each axis's near plane (0|1, 2|3, 4|5).
    ox .. iz : float32 origin and reciprocal direction. t_lo, t_hi : float32 ray interval.
    robust : float32 factor widening each exit distance (Ize 2013).

    A NaN (0·inf) in a slab leaves the interval unchanged: every max/min is an ordered compare
    with the running value kept when the compare fails.
    """
    f32 = types.float32
    sig = types.UniTuple(f32, 4)(bounds, node, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo, t_hi,
                                 robust)  # fmt: skip

    def codegen(context, builder, signature, args):
        entry, _ = _slab_entries(context, builder, signature, args)
        lanes = [builder.extract_element(entry, ir.IntType(32)(j)) for j in range(4)]
        return cgutils.pack_array(builder, lanes)

    return sig, codegen


def _order_bits(builder, bits):
    """float32 bits (as i32 or <n x i32>) -> signed integers in the floats' order: negative
    values mirrored, so that integer compares sort like the floats (and -0.0 < 0.0)."""
    vector = isinstance(bits.type, ir.VectorType)

    def const(value):
        return ir.Constant(bits.type, [value] * bits.type.count if vector else value)

    return builder.xor(bits, builder.and_(builder.ashr(bits, const(31)), const(0x7FFFFFFF)))


@intrinsic
def child_keys(typingctx, bounds, node, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo, t_hi, robust,
               link_row):  # fmt: skip
    """``slab4``, returned as the four children's entry keys (see ``entry_key``), the links read
    from row ``link_row`` of the node record (int32 bits)."""
    sig = types.UniTuple(types.int64, 4)(bounds, node, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo,
                                         t_hi, robust, link_row)  # fmt: skip

    def codegen(context, builder, signature, args):
        entry, row = _slab_entries(context, builder, signature, args[:14])
        i32x4, i64x4 = ir.VectorType(ir.IntType(32), 4), ir.VectorType(ir.IntType(64), 4)
        ordered = builder.sext(_order_bits(builder, builder.bitcast(entry, i32x4)), i64x4)
        links = builder.zext(builder.bitcast(row(args[14]), i32x4), i64x4)
        keys = builder.or_(builder.shl(ordered, ir.Constant(i64x4, [32] * 4)), links)
        lanes = [builder.extract_element(keys, ir.IntType(32)(j)) for j in range(4)]
        return cgutils.pack_array(builder, lanes)

    return sig, codegen


@intrinsic
def entry_key(typingctx, t, link):
    """One int64 that orders (entry distance, link) pairs as the distance does: the float32's
    bits turned into an order-preserving signed integer in the upper half, the link's 32 bits in
    the lower. Integer min/max sort such keys without a branch."""
    sig = types.int64(t, link)

    def codegen(context, builder, signature, args):
        i32, i64 = ir.IntType(32), ir.IntType(64)
        ordered = builder.sext(_order_bits(builder, builder.bitcast(args[0], i32)), i64)
        low = builder.zext(builder.trunc(args[1], i32), i64)
        return builder.or_(builder.shl(ordered, i64(32)), low)

    return sig, codegen


@intrinsic
def triangles4(typingctx, verts, first, count, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min,
               t_max):  # fmt: skip
    """The watertight test of ``shots.kernels.triangle.intersect_triangle`` on four triangles at
    once, as <4 x double> arithmetic: the very same operations in the same order, so every lane
    gives bit for bit what the scalar test gives.

    Parameters
    ----------
    verts : float32 array in leaf blocks (``bvh_build.gather_vertices``): the block of triangle
        ``first`` holds ``count`` (1–4) triangles as nine rows of ``count`` floats (p0x p0y p0z
        p1x ... p2z), starting at float ``9 * first``. Each row is read as four floats; lanes at
        and past ``count`` read the next block (or the array's padding row) and are ignored.
    kx .. sz : int64 axis permutation and float64 ray constants of ``triangle.ray_shear``.
    t_min, t_max : float64 accepted distance interval.

    Returns (t0, t1, t2, t3, u0, .., u3, v0, .., v3) float64: t = inf where a lane misses.
    """
    f64, i64 = types.float64, types.int64
    sig = types.UniTuple(f64, 12)(verts, i64, i64, i64, i64, i64, f64, f64, f64, f64, f64, f64,
                                  f64, f64)  # fmt: skip

    def codegen(context, builder, signature, args):
        ary = context.make_array(signature.args[0])(context, builder, value=args[0])
        first, count, kx, ky, kz = args[1:6]
        okx, oky, okz, sx, sy, sz, t_min, t_max = [_splat(builder, a, _D4) for a in args[6:]]
        block = builder.gep(ary.data, [builder.mul(first, first.type(9))])

        def coord(corner, axis):  # row 3·corner + axis of the block, widened to double
            r = builder.mul(builder.add(axis, axis.type(3 * corner)), count)
            ptr = builder.bitcast(builder.gep(block, [r]), _F4.as_pointer())
            return builder.fpext(builder.load(ptr, align=4), _D4)

        fsub, fmul, fadd = builder.fsub, builder.fmul, builder.fadd
        az = fsub(coord(0, kz), okz)
        bz = fsub(coord(1, kz), okz)
        cz = fsub(coord(2, kz), okz)
        ax = fsub(fsub(coord(0, kx), okx), fmul(sx, az))
        ay = fsub(fsub(coord(0, ky), oky), fmul(sy, az))
        bx = fsub(fsub(coord(1, kx), okx), fmul(sx, bz))
        by = fsub(fsub(coord(1, ky), oky), fmul(sy, bz))
        cx = fsub(fsub(coord(2, kx), okx), fmul(sx, cz))
        cy = fsub(fsub(coord(2, ky), oky), fmul(sy, cz))
        eu = fsub(fmul(cx, by), fmul(cy, bx))
        ev = fsub(fmul(ax, cy), fmul(ay, cx))
        ew = fsub(fmul(bx, ay), fmul(by, ax))
        det = fadd(fadd(eu, ev), ew)
        inv = builder.fdiv(ir.Constant(_D4, [1.0] * 4), det)
        t = fmul(fmul(fadd(fadd(fmul(eu, az), fmul(ev, bz)), fmul(ew, cz)), sz), inv)

        zero = ir.Constant(_D4, [0.0] * 4)

        def any3(op):
            return builder.or_(builder.or_(builder.fcmp_ordered(op, eu, zero),
                                           builder.fcmp_ordered(op, ev, zero)),
                               builder.fcmp_ordered(op, ew, zero))  # fmt: skip

        outside = builder.and_(any3("<"), any3(">"))
        i64x4 = ir.VectorType(ir.IntType(64), 4)
        lanes = ir.Constant(i64x4, [0, 1, 2, 3])
        hit = builder.and_(builder.not_(outside),
                           builder.icmp_signed("<", lanes, _splat(builder, count, i64x4)))  # fmt: skip
        hit = builder.and_(hit, builder.fcmp_unordered("!=", det, zero))
        hit = builder.and_(hit, builder.fcmp_ordered(">=", t, t_min))
        hit = builder.and_(hit, builder.fcmp_ordered("<=", t, t_max))
        t = builder.select(hit, t, ir.Constant(_D4, [float("inf")] * 4))
        u, v = fmul(ev, inv), fmul(ew, inv)
        out = [builder.extract_element(vec, ir.IntType(32)(j)) for vec in (t, u, v)
               for j in range(4)]  # fmt: skip
        return cgutils.pack_array(builder, out)

    return sig, codegen

