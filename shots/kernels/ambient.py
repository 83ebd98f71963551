"""Environment light that the model can block, and light bounced between the model's parts.

At a hit, the light that the diffuse lobe (and a specular lobe too wide to trace) receives from
the environment and from other surfaces is split as a control variate (Lafortune & Willems 1994,
"The ambient term as a variance reducing technique for Monte Carlo ray tracing"):

    ∫ f L cos  =  ∫ f L_env cos  −  ∫ f L_env (1 − V) cos  +  ∫ f L_hit (1 − V) cos
                  ambient base      what the model blocks      what the blocking surfaces send

with V the visibility of the environment along a direction. The base is the environment's 9-term
SH irradiance, free of noise; only blocked directions add variance, so open surfaces stay clean
and recesses darken softly. The blocked part takes one environment sample (its radiance table,
Pharr, Jakob & Humphreys, PBR "Infinite Area Lights") and one BSDF sample (cosine-weighted for
the diffuse lobe, GGX visible normals for the specular one, Heitz 2018), combined by multiple
importance sampling with the power heuristic (Veach 1995, "Optimally Combining Sampling
Techniques for Monte Carlo Rendering", §9.2.3; β = 2). Each has a shadow ray against the BVH.

The BSDF sample is also the bounce ray (path tracing, Kajiya 1986): it is pushed onto the ray
stack carrying the sky it would have seen (R_SKY, already in the base); when it hits a surface,
that sky is taken back and the surface is shaded, so a coloured panel tints its neighbours. A
path takes at most ``F_DIFFUSE_BOUNCES`` bounces, and dim ones are ended early by Russian
roulette (Arvo & Kirk 1990, "Particle transport and image synthesis"). When no bounce is taken,
a shadow ray along the sample stands in for it (the blocked sky is still taken back).

Approximations: the base is the SH irradiance (exact for the gradient's linear part, within a
few percent for an HDR image), while the blocked part uses the map itself, so a fully enclosed
point keeps that small difference; the specular base is the SH irradiance along the mirror
direction, as before. The sheen layer's ambient share rides on the diffuse lobe.
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.brdf import INV_PI, alpha_of, ggx_d, sample_ggx_vndf, smith_g1, smith_vis
from shots.kernels.envlight import env_pdf, env_radiance, sample_env, sh_irradiance
from shots.kernels.ground import G_KIND, GROUND_CATCHER, GROUND_NONE
from shots.kernels.layout import (
    F_BOX,
    F_DIFFUSE_BOUNCES,
    F_INDIRECT_CLAMP,
    F_PIXEL_SEED,
    F_SEE_THROUGH,
    F_SEED,
    W_ACC,
)
from shots.kernels.raystack import (
    R_AMBIENT,
    R_BOUNCES,
    R_D,
    R_DEPTH,
    R_SIGMA,
    R_SKY,
    push_ray,
    set_start,
)
from shots.kernels.sampling import (
    cosine_hemisphere,
    luminance,
    next_pair,
    orthonormal_basis,
    pixel_key,
    sequence_point,
)
from shots.kernels.surface import (
    S_GX,
    S_GY,
    S_GZ,
    S_NX,
    S_NY,
    S_NZ,
    S_PX,
    S_PY,
    S_PZ,
    S_ROUGHNESS,
)
from shots.kernels.visibility import offset_point, shadow_ray

ROULETTE_WEIGHT = 0.1  # bounce rays whose throughput is below this play Russian roulette
PURPOSE_ENV, PURPOSE_BSDF = 1000, 1001  # pixel_key purposes (2 per depth)


@njit(cache=True, error_model="numpy", _nrt=False)
def power_heuristic(pdf_a, pdf_b):
    """MIS weight of technique a against b, one sample each (Veach 1995, §9.2.3, β = 2)."""
    a2 = pdf_a * pdf_a
    s = a2 + pdf_b * pdf_b
    return a2 / s if s > 0.0 else 0.0


@njit(cache=True, error_model="numpy", _nrt=False)
def hemisphere_clear(frame, ground, px, py, pz, nx, ny, nz, gx, gy, gz):
    """True when no ray leaving point p into the hemisphere around n can meet the model.

    Proof: every triangle lies in the model's box B (frame[F_BOX:+6]); (q − p)·n is linear in q,
    so if it is ≤ 0 at B's eight corners it is ≤ 0 on all of B. A ray starts at the offset
    origin p + ε·g with g·n ≥ 0 and goes along ω with ω·n > 0, so its points have
    (x − p)·n = ε·g·n + t·ω·n > 0 for t > 0: it never enters B. The floor must not block
    either, so only an absent or invisible (shadow-catcher) floor qualifies.
    """
    kind = int(ground[G_KIND])
    if kind != GROUND_NONE and kind != GROUND_CATCHER:
        return False
    if gx * nx + gy * ny + gz * nz < 0.0:
        return False
    for corner in range(8):
        cx = frame[F_BOX + 3 * (corner & 1)]
        cy = frame[F_BOX + 1 + 3 * ((corner >> 1) & 1)]
        cz = frame[F_BOX + 2 + 3 * ((corner >> 2) & 1)]
        if (cx - px) * nx + (cy - py) * ny + (cz - pz) * nz > 0.0:
            return False
    return True


@njit(cache=True, error_model="numpy", _nrt=False)
def box_distance(frame, px, py, pz):
    """Distance from p to the model's box (0 inside). No shadow ray of length r from p can meet
    the model when this exceeds r (every triangle lies in the box); the 0.1 % margin covers
    the ray's offset origin."""
    d2 = 0.0
    for axis, q in ((0, px), (1, py), (2, pz)):
        gap = max(frame[F_BOX + axis] - q, 0.0, q - frame[F_BOX + 3 + axis])
        d2 += gap * gap
    return math.sqrt(d2)


@njit(cache=True, error_model="numpy", _nrt=False)
def lobe_eval(nx, ny, nz, vx, vy, vz, n_dot_v, alpha, p_diffuse, lx, ly, lz):
    """The two lobes toward light direction l, and the pdf of sampling it.

    Returns diffuse f·cos (cos/π), specular f·cos per unit Fresnel weight (D·Vis·cos), and the
    mixture pdf p_diffuse·cos/π + (1 − p_diffuse)·G1(v)·D(h)/(4 N·V) (Heitz 2018, eq. 17 with
    the reflection Jacobian 1/(4 V·H)).
    """
    cos = nx * lx + ny * ly + nz * lz
    if cos <= 0.0:
        return 0.0, 0.0, 0.0
    diffuse = cos * INV_PI
    spec = 0.0
    pdf_spec = 0.0
    if p_diffuse < 1.0:
        hx, hy, hz = vx + lx, vy + ly, vz + lz
        hl = math.sqrt(hx * hx + hy * hy + hz * hz)
        if hl > 0.0:
            d = ggx_d((nx * hx + ny * hy + nz * hz) / hl, alpha)
            spec = d * smith_vis(cos, n_dot_v, alpha) * cos
            pdf_spec = smith_g1(n_dot_v, alpha) * d / (4.0 * n_dot_v)
    return diffuse, spec, p_diffuse * diffuse + (1.0 - p_diffuse) * pdf_spec


@njit(cache=True, error_model="numpy", _nrt=False)
def seen_from(surf, frame, bvh, scene, ground, lx, ly, lz, reach, surf2, work, tstack):
    """Light let through along unit l from the hit within ``reach`` (r, g, b in [0, 1]).

    A direction above the shading normal but below the flat triangle counts as open: the
    triangle stands in for the smooth surface its normals describe, and that surface would not
    block it (so a white tessellated sphere still vanishes in the furnace).
    """
    if lx * surf[S_GX] + ly * surf[S_GY] + lz * surf[S_GZ] <= 0.0:
        return 1.0, 1.0, 1.0
    ox, oy, oz = offset_point(surf, 1.0)
    return shadow_ray(frame, bvh, scene, ground, frame[F_SEE_THROUGH] != 0.0, ox, oy, oz, lx, ly,
                      lz, reach, surf2, work, tstack)  # fmt: skip


@njit(cache=True, error_model="numpy", _nrt=False)
def ambient_light(surf, ray, tr, tg, tb, d0, d1, d2, s0, s1, s2, can_bounce, reach, frame, env,
                  bvh, scene, ground, pixel, sample, stack, sp, surf2, work, tstack):  # fmt: skip
    """Environment and bounced light of the diffuse (d) and wide specular (s) lobes at a hit.

    ``t`` is the ray's throughput (× occlusion), ``d`` and ``s`` the lobes' colour weights
    (``shots.kernels.bsdf.fresnel_split``). Adds nothing itself; returns (stack size, base r, g,
    b, blocked r, g, b): the caller adds base + blocked (the blocked part is ≤ 0). A bounce ray
    is pushed only when ``can_bounce``; shadow rays look for blockers up to ``reach``.
    """
    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    gx, gy, gz = surf[S_GX], surf[S_GY], surf[S_GZ]
    vx, vy, vz = -ray[R_D], -ray[R_D + 1], -ray[R_D + 2]
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    er, eg, eb = sh_irradiance(frame, nx, ny, nz)
    br, bg, bb = d0 * er * INV_PI, d1 * eg * INV_PI, d2 * eb * INV_PI
    if s0 + s1 + s2 > 0.0:
        rx, ry, rz = 2.0 * n_dot_v * nx - vx, 2.0 * n_dot_v * ny - vy, 2.0 * n_dot_v * nz - vz
        qr, qg, qb = sh_irradiance(frame, rx, ry, rz)
        br += s0 * qr * INV_PI
        bg += s1 * qg * INV_PI
        bb += s2 * qb * INV_PI
    br, bg, bb = tr * br, tg * bg, tb * bb
    wd = luminance(d0, d1, d2)
    ws = luminance(s0, s1, s2)
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    if (wd + ws <= 0.0 or hemisphere_clear(frame, ground, px, py, pz, nx, ny, nz, gx, gy, gz)
            or box_distance(frame, px, py, pz) > 1.001 * reach):  # fmt: skip
        return sp, br, bg, bb, 0.0, 0.0, 0.0
    seed = int(frame[F_SEED])
    pixel_seed = int(frame[F_PIXEL_SEED])
    # Russian roulette on the whole correction (Arvo & Kirk 1990): a dim lobe (glass's 4 %
    # reflection, a deep bounce) is corrected only sometimes, with its weight raised to match
    q = min(1.0, max(tr * (d0 + s0), tg * (d1 + s1), tb * (d2 + s2)) / ROULETTE_WEIGHT)
    if q < 1.0:
        u, _ = next_pair(seed, pixel, sample, work)
        if u >= q:
            return sp, br, bg, bb, 0.0, 0.0, 0.0
        tr, tg, tb = tr / q, tg / q, tb / q
    p_diffuse = wd / (wd + ws)
    alpha = alpha_of(surf[S_ROUGHNESS])
    depth = int(ray[R_DEPTH])
    cr, cg, cb = 0.0, 0.0, 0.0

    # technique 1: a direction from the environment's table
    key = pixel_key(pixel_seed, pixel, PURPOSE_ENV + 2 * depth)
    a1, a2 = sequence_point(0, sample, key)
    lx, ly, lz, p_env = sample_env(env, frame, a1, a2)
    if p_env > 0.0:
        fd, fs, p_bsdf = lobe_eval(nx, ny, nz, vx, vy, vz, n_dot_v, alpha, p_diffuse, lx, ly, lz)
        if fd > 0.0:
            k = power_heuristic(p_env, p_bsdf) / p_env
            lr, lg, lb = env_radiance(env, frame, lx, ly, lz, work)
            vr, vg, vb = seen_from(surf, frame, bvh, scene, ground, lx, ly, lz, reach, surf2,
                               work, tstack)  # fmt: skip
            cr -= tr * (d0 * fd + s0 * fs) * lr * k * (1.0 - vr)
            cg -= tg * (d1 * fd + s1 * fs) * lg * k * (1.0 - vg)
            cb -= tb * (d2 * fd + s2 * fs) * lb * k * (1.0 - vb)

    # technique 2: a direction from the lobes, which is also the bounce ray
    key = pixel_key(pixel_seed, pixel, PURPOSE_BSDF + 2 * depth)
    a1, a2 = sequence_point(0, sample, key)
    t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
    if a1 < p_diffuse:
        x, y, z = cosine_hemisphere(a1 / p_diffuse, a2)
    else:
        hx, hy, hz = sample_ggx_vndf(vx * t1x + vy * t1y + vz * t1z, vx * t2x + vy * t2y + vz * t2z,
                                     n_dot_v, alpha, (a1 - p_diffuse) / (1.0 - p_diffuse), a2)  # fmt: skip
        lvx = vx * t1x + vy * t1y + vz * t1z
        lvy = vx * t2x + vy * t2y + vz * t2z
        v_dot_h = lvx * hx + lvy * hy + n_dot_v * hz
        x, y, z = 2.0 * v_dot_h * hx - lvx, 2.0 * v_dot_h * hy - lvy, 2.0 * v_dot_h * hz - n_dot_v
    lx = x * t1x + y * t2x + z * nx
    ly = x * t1y + y * t2y + z * ny
    lz = x * t1z + y * t2z + z * nz
    fd, fs, p_bsdf = lobe_eval(nx, ny, nz, vx, vy, vz, n_dot_v, alpha, p_diffuse, lx, ly, lz)
    if p_bsdf <= 0.0:
        return sp, br, bg, bb, cr, cg, cb
    wr = tr * (d0 * fd + s0 * fs) / p_bsdf
    wg = tg * (d1 * fd + s1 * fs) / p_bsdf
    wb = tb * (d2 * fd + s2 * fs) / p_bsdf
    share = power_heuristic(p_bsdf, env_pdf(env, frame, lx, ly, lz))
    lr, lg, lb = env_radiance(env, frame, lx, ly, lz, work)
    sky_r, sky_g, sky_b = wr * share * lr, wg * share * lg, wb * share * lb
    bounces = ray[R_BOUNCES]
    above = lx * gx + ly * gy + lz * gz > 0.0
    if above and can_bounce and bounces < frame[F_DIFFUSE_BOUNCES]:
        q = min(1.0, max(wr, wg, wb) / ROULETTE_WEIGHT)
        u, _ = next_pair(seed, pixel, sample, work)
        if u < q:
            ox, oy, oz = offset_point(surf, 1.0)
            pushed = push_ray(stack, sp, ox, oy, oz, lx, ly, lz, wr / q, wg / q, wb / q, 0.0,
                              depth + 1, 0.0, ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2],
                              0.0)  # fmt: skip
            if pushed > sp:
                set_start(stack, pushed, surf[S_PX], surf[S_PY], surf[S_PZ])
                row = stack[pushed - 1]
                row[R_BOUNCES] = bounces + 1.0
                row[R_AMBIENT] = 1.0
                row[R_SKY] = sky_r
                row[R_SKY + 1] = sky_g
                row[R_SKY + 2] = sky_b
                return pushed, br, bg, bb, cr, cg, cb
    vr, vg, vb = seen_from(surf, frame, bvh, scene, ground, lx, ly, lz, reach, surf2,
                               work, tstack)  # fmt: skip
    cr -= sky_r * (1.0 - vr)
    cg -= sky_g * (1.0 - vg)
    cb -= sky_b * (1.0 - vb)
    return sp, br, bg, bb, cr, cg, cb


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def take_back_sky(ray, work):
    """A bounce ray met a surface: remove the sky it carried (already in its hit's base)."""
    if ray[R_AMBIENT] != 0.0:
        work[W_ACC + 0] -= ray[R_SKY]
        work[W_ACC + 1] -= ray[R_SKY + 1]
        work[W_ACC + 2] -= ray[R_SKY + 2]


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def limit_indirect(work, frame, r0, g0, b0):
    """Scale what one indirect ray added to the sample (since r0, g0, b0) down to a luminance of
    at most frame[F_INDIRECT_CLAMP] (``shots.render.INDIRECT_CLAMP``): the documented, biased
    treatment of rare bright paths (fireflies)."""
    dr = work[W_ACC + 0] - r0
    dg = work[W_ACC + 1] - g0
    db = work[W_ACC + 2] - b0
    y = luminance(dr, dg, db)
    limit = frame[F_INDIRECT_CLAMP]
    if y > limit:
        k = limit / y
        work[W_ACC + 0] = r0 + dr * k
        work[W_ACC + 1] = g0 + dg * k
        work[W_ACC + 2] = b0 + db * k
