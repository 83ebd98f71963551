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


def _splat(builder, value):
    vec = builder.insert_element(ir.Constant(_F4, ir.Undefined), value, ir.IntType(32)(0))
    return builder.shuffle_vector(vec, vec, ir.Constant(ir.VectorType(ir.IntType(32), 4), [0] * 4))


@intrinsic
def slab4(typingctx, bounds, node, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo, t_hi, robust):
    """Entry distances of a ray into the four child boxes of ``node``; +inf where it misses.

    Parameters
    ----------
    bounds : (m, 6, 4) float32 C-contiguous node bounds.
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
        bounds_val, node_val, nx_val, ny_val, nz_val = args[:5]
        ray = [_splat(builder, a) for a in args[5:]]
        o = ray[0:3]
        inv = ray[3:6]
        t_in, t_out, rob = ray[6], ray[7], ray[8]
        ary = context.make_array(signature.args[0])(context, builder, value=bounds_val)
        i64 = ir.IntType(64)
        base = builder.mul(builder.sext(node_val, i64) if node_val.type.width < 64 else node_val,
                           i64(24))  # fmt: skip
        vec_ptr = _F4.as_pointer()

        def row(r):
            r = builder.sext(r, i64) if r.type.width < 64 else r
            offset = builder.add(base, builder.mul(r, i64(4)))
            ptr = builder.gep(ary.data, [offset])
            return builder.load(builder.bitcast(ptr, vec_ptr), align=4)

        for axis, near in enumerate((nx_val, ny_val, nz_val)):
            far = builder.xor(near, near.type(1))
            lo = builder.fmul(builder.fsub(row(near), o[axis]), inv[axis])
            hi = builder.fmul(builder.fmul(builder.fsub(row(far), o[axis]), inv[axis]), rob)
            t_in = builder.select(builder.fcmp_ordered(">", lo, t_in), lo, t_in)
            t_out = builder.select(builder.fcmp_ordered("<", hi, t_out), hi, t_out)
        inf = ir.Constant(_F4, [float("inf")] * 4)
        entry = builder.select(builder.fcmp_ordered("<=", t_in, t_out), t_in, inf)
        lanes = [builder.extract_element(entry, ir.IntType(32)(j)) for j in range(4)]
        return cgutils.pack_array(builder, lanes)

    return sig, codegen
