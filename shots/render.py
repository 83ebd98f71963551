"""Render frames of a scene: prepare it once (BVH, packed arrays), then trace each frame.

    prepared = prepare_scene(scene)                 # once per model
    rgba = render_frame(prepared, camera, look)     # (h, w, 4) float32, premultiplied linear

Everything per pixel happens in one numba kernel (``shots.kernels.image.render_items``), run on
one Python thread per numba thread (``trace_set``); this module only packs the scene, the look,
the camera and the floor into the flat arrays it reads.

Image formation
    Camera samples are points of the pixel's own scrambled Sobol' sequence, warped to a tent
    filter of radius 1 pixel (filter importance sampling, Ernst et al. 2006), equally weighted;
    a single sample goes through the pixel centre. ``look.samples`` = N > 0 gives every pixel
    exactly N samples; 0 renders sets of a few samples until each pixel's estimated error is
    under ``look.noise_target`` display codes, between ``look.min_samples`` and
    ``look.max_samples`` (``shots.sampling_control``); on a shadow catcher those passes count
    on the floor's alpha being smoothed afterwards (``shots.contact_shadow``), so its pixels
    stop early. ``look.denoise`` then filters the matte
    product pixels' illumination (``shots.denoise``), guided by their first surfaces
    (``shots.albedo.first_surfaces``). Every 2-D number of a sample (its place, light,
    environment and lobe directions) continues a per-pixel sequence over all its sets; the rest
    are hashes of (seed, pixel, sample, dimension) with the set number folded into the seed
    (``shots.kernels.sampling``): reruns are bit-identical and do not depend on the number of
    threads.
Sample counts per hit
    ``area_light_samples`` (shadow rays per area light) and ``glossy_samples`` (reflection rays of
    a glossy surface) are counts for one camera sample.
    With several camera samples in a set, each hit casts ceil(count / samples) rays, the next
    points of their sequences, so a pixel still gets at least max(count, samples) well-spread
    rays for the cost of about one per hit.
Environment light and bounces (``shots.kernels.ambient``)
    Diffuse light (and glossy lobes rougher than 0.3 for a dielectric to 0.6 for a metal) is the
    environment's SH irradiance minus what the model blocks, plus ``look.diffuse_bounces``
    bounces of light between its parts: one environment sample and one BSDF sample per hit,
    combined by multiple importance sampling. The shadow catcher's contact shadow uses the same
    estimator. One indirect ray adds at most a luminance of ``INDIRECT_CLAMP``.
Approximations (documented so nobody mistakes them for bugs)
    The ambient base is the 9-term SH irradiance (the blocked part uses the map itself).
    Shadow rays pass transmissive surfaces tinted, without refraction (no caustics). Rays
    leaving glass see the environment, not the background.
"""

from __future__ import annotations

import functools
import math
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numba
import numpy as np

from shots import denoise as denoiser
from shots import sampling_control
from shots.accel import Bvh, build_bvh
from shots.albedo import first_surfaces
from shots.camera import ORTHOGRAPHIC, Camera
from shots.colour import srgb_to_linear
from shots.environment import environment_map, sampling_table
from shots.errors import RenderError
from shots.kernels import ground as gk
from shots.kernels import image, layout
from shots.kernels import lights as lk
from shots.look import AREA, DIRECTIONAL, POINT, SPOT, Environment, Ground, Light, Look
from shots.scene import (
    ALPHA_OPAQUE,
    N_SLOTS,
    N_TEX_INFO,
    P_ALPHA_MODE,
    P_TRANSMISSION,
    Scene,
)

BACKGROUNDS = {
    "transparent": layout.BG_TRANSPARENT,
    "solid": layout.BG_SOLID,
    "gradient": layout.BG_GRADIENT,
    "environment": layout.BG_ENVIRONMENT,
}
GROUNDS = {
    "none": gk.GROUND_NONE,
    "shadow_catcher": gk.GROUND_CATCHER,
    "plane": gk.GROUND_PLANE,
    "sweep": gk.GROUND_SWEEP,
}
LIGHT_KINDS = {
    DIRECTIONAL: lk.KIND_DIRECTIONAL,
    POINT: lk.KIND_POINT,
    SPOT: lk.KIND_SPOT,
    AREA: lk.KIND_AREA,
}
SHADOW_NOISE_FLOOR = 0.05  # shadow-catcher alpha below this is sampling noise (see below)
CONTACT_REACH = 0.25  # contact-shadow rays reach this fraction of the model's box diagonal
# Largest luminance one indirect ray (light that scattered off two or more surfaces: a diffuse
# bounce, a reflection of a reflection) may add to a camera sample, linear before exposure. Rare
# paths that carry more (a bounce that finds a small bright highlight) are fireflies; at the
# default 16 samples one ray then moves a pixel by at most 0.25, and no indirect light in a
# catalog look comes near it. Light seen after one reflection (a sun in chrome) is not clamped.
# Its bias is measured in tests/test_ambient.py.
INDIRECT_CLAMP = 4.0


@dataclass(frozen=True)
class PreparedScene:
    """A scene ready to trace: its BVH and kernel-ready arrays, shared by all frames of a model.

    Attributes
    ----------
    scene : the source scene.
    bvh : its BVH (``shots.accel``).
    packed : (verts, faces, materials, texels, tex_info), the layout of ``shots.kernels.layout``.
    see_through : whether any used material lets light through (BLEND, MASK, transmission);
        when not, shadow rays take the cheaper any-hit query.
    bounds : (2, 3) float64 scene bounds.
    """

    scene: Scene
    bvh: Bvh
    packed: tuple
    see_through: bool
    bounds: np.ndarray


def pack_scene(scene: Scene) -> tuple:
    """The scene's arrays in the tracer's packed layout (``shots.kernels.layout``).

    Returns
    -------
    verts : (v, N_VERT) float32; faces : (n, 4) int32; materials : (m, N_MAT) float32;
    texels : (k,) uint8; tex_info : (t, N_TEX_INFO) int32.
    """
    v = len(scene.positions)
    verts = np.zeros((v, layout.N_VERT), np.float32)
    verts[:, layout.V_P : layout.V_P + 3] = scene.positions
    verts[:, layout.V_N : layout.V_N + 3] = scene.normals
    verts[:, layout.V_T : layout.V_T + 4] = np.asarray(scene.tangents).reshape(v, 4)
    uv = np.asarray(scene.uv, np.float32).reshape(2, v, 2)
    verts[:, layout.V_UV0 : layout.V_UV0 + 2] = uv[0]
    verts[:, layout.V_UV1 : layout.V_UV1 + 2] = uv[1]
    verts[:, layout.V_C : layout.V_C + 4] = np.asarray(scene.colors).reshape(v, 4)
    faces = np.empty((scene.triangle_count, 4), np.int32)
    faces[:, :3] = scene.triangles
    faces[:, 3] = scene.tri_material
    table = scene.materials
    m = len(table.params)
    materials = np.zeros((m, layout.N_MAT), np.float32)
    materials[:, : layout.M_SLOTS] = table.params
    slots = materials[:, layout.M_SLOTS :].reshape(m, N_SLOTS, layout.SLOT_WIDTH)
    slots[:, :, layout.SLOT_TEX] = table.texture
    slots[:, :, layout.SLOT_SET] = table.texcoord
    slots[:, :, layout.SLOT_A :] = np.asarray(table.uv_transform).reshape(m, N_SLOTS, 6)
    texels = np.ascontiguousarray(scene.textures.texels, np.uint8).reshape(-1)
    tex_info = np.ascontiguousarray(scene.textures.info, np.int32).reshape(-1, N_TEX_INFO)
    return verts, faces, materials, texels, tex_info


def prepare_scene(scene: Scene) -> PreparedScene:
    """Build the BVH and pack the scene for ``render_frame``.

    Raises
    ------
    RenderError
        When the scene has no triangles.
    """
    if scene.triangle_count == 0:
        raise RenderError(scene.source or "<scene>", None, "the scene has no triangles to render")
    used = scene.materials.params[np.unique(scene.tri_material)]
    see_through = bool(
        np.any(used[:, P_ALPHA_MODE] != ALPHA_OPAQUE) or np.any(used[:, P_TRANSMISSION] > 0)
    )
    return PreparedScene(
        scene=scene,
        bvh=build_bvh(scene.positions, scene.triangles),
        packed=pack_scene(scene),
        see_through=see_through,
        bounds=scene.bounds(),
    )


def pack_lights(lights: tuple[Light, ...]) -> np.ndarray:
    """(k, N_LIGHT_COLS) float64 light table for the kernels (columns ``shots.kernels.lights``)."""
    table = np.zeros((len(lights), lk.N_LIGHT_COLS), np.float64)
    for row, light in zip(table, lights, strict=True):
        if light.kind not in LIGHT_KINDS:
            raise RenderError("<look>", f"lights[{light.name!r}].kind", f"unknown {light.kind!r}")
        row[lk.L_KIND] = LIGHT_KINDS[light.kind]
        row[lk.L_R : lk.L_B + 1] = np.asarray(light.color, np.float64) * light.intensity
        row[lk.L_PX : lk.L_PZ + 1] = light.position
        direction = np.asarray(light.direction, np.float64)
        norm = np.linalg.norm(direction)
        if norm == 0.0 and light.kind != POINT:
            raise RenderError("<look>", f"lights[{light.name!r}].direction", "zero vector")
        row[lk.L_DX : lk.L_DZ + 1] = direction / norm if norm > 0 else (0.0, -1.0, 0.0)
        row[lk.L_RANGE] = light.range if light.range else 0.0
        # KHR_lights_punctual, "Inner and Outer Cone Angles"
        cos_outer = math.cos(light.outer_cone)
        scale = 1.0 / max(0.001, math.cos(light.inner_cone) - cos_outer)
        row[lk.L_SPOT_SCALE] = scale
        row[lk.L_SPOT_OFFSET] = -cos_outer * scale
        row[lk.L_UX : lk.L_UZ + 1] = light.edge_u
        row[lk.L_VX : lk.L_VZ + 1] = light.edge_v
        row[lk.L_AREA] = np.linalg.norm(np.cross(light.edge_u, light.edge_v))
    return table


def pack_ground(ground: Ground, bounds: np.ndarray, camera: Camera) -> np.ndarray:
    """(N_GROUND,) float64 floor row; the sweep's wall stands behind the target as seen from
    the camera. Ground colours are linear albedo, like a material's base colour factor."""
    if ground.kind not in GROUNDS:
        raise RenderError("<look>", "ground.kind", f"unknown {ground.kind!r}")
    row = np.zeros(gk.N_GROUND, np.float64)
    row[gk.G_KIND] = GROUNDS[ground.kind]
    row[gk.G_HEIGHT] = bounds[0, 1] if ground.height is None else ground.height
    row[gk.G_R : gk.G_B + 1] = ground.color
    row[gk.G_ROUGHNESS] = ground.roughness
    row[gk.G_STRENGTH] = ground.shadow_strength
    forward = np.asarray(camera.target, np.float64) - np.asarray(camera.eye, np.float64)
    forward[1] = 0.0
    norm = np.linalg.norm(forward)
    forward = forward / norm if norm > 1e-12 else np.array([0.0, 0.0, -1.0])
    row[gk.G_FX], row[gk.G_FZ] = forward[0], forward[2]
    row[gk.G_TX], row[gk.G_TZ] = camera.target[0], camera.target[2]
    row[gk.G_RADIUS] = max(ground.sweep_radius, 1e-6)
    row[gk.G_DISTANCE] = ground.sweep_distance
    return row


@functools.lru_cache(maxsize=8)
def _environment(env: Environment) -> tuple[tuple[np.ndarray, ...], np.ndarray]:
    """((radiance, sampling rows, marginal) for the kernels, SH coefficients)."""
    radiance, sh = environment_map(env)
    return (radiance, *sampling_table(radiance)), sh


def background_colours(look: Look) -> np.ndarray:
    """(2, 3) float64 linear top and bottom colours (Background colours are display sRGB)."""
    bg = look.background
    if bg.kind not in BACKGROUNDS:
        raise RenderError("<look>", "background.kind", f"unknown {bg.kind!r}")
    top = srgb_to_linear(np.asarray(bg.color, np.float64))
    bottom = srgb_to_linear(np.asarray(bg.color_bottom, np.float64)) if bg.kind == "gradient" else top
    return np.stack([top, bottom])


def pack_frame(
    camera: Camera, look: Look, see_through: bool, sh: np.ndarray, bounds: np.ndarray
) -> np.ndarray:
    """(N_FRAME,) float64: camera, image and sampling settings, background, SH irradiance and
    the scene's (2, 3) bounds (the box that ``shots.kernels.ambient.hemisphere_clear`` tests)."""
    row = np.zeros(layout.N_FRAME, np.float64)
    row[layout.F_EYE : layout.F_EYE + 3] = camera.eye
    basis = camera.basis()
    row[layout.F_U : layout.F_U + 3] = basis[0]
    row[layout.F_V : layout.F_V + 3] = basis[1]
    row[layout.F_W : layout.F_W + 3] = basis[2]
    row[layout.F_TAN_Y] = math.tan(camera.yfov / 2.0)
    row[layout.F_ASPECT] = camera.aspect
    row[layout.F_ORTHO] = 1.0 if camera.kind == ORTHOGRAPHIC else 0.0
    row[layout.F_YMAG] = camera.ymag
    row[layout.F_ZNEAR] = camera.znear
    row[layout.F_WIDTH] = camera.width
    row[layout.F_HEIGHT] = camera.height
    row[layout.F_SAMPLES] = max(int(look.samples), 1)  # per stratified set; passes reset it
    row[layout.F_AREA_SAMPLES] = max(int(look.area_light_samples), 1)
    row[layout.F_GLOSSY_SAMPLES] = max(int(look.glossy_samples), 1)
    row[layout.F_MAX_DEPTH] = max(int(look.max_depth), 0)
    row[layout.F_SEED] = int(look.seed) & 0xFFFFFFFF
    row[layout.F_PIXEL_SEED] = row[layout.F_SEED]
    row[layout.F_SEE_THROUGH] = 1.0 if see_through else 0.0
    row[layout.F_BACKGROUND] = BACKGROUNDS[look.background.kind]
    colours = background_colours(look)
    row[layout.F_BG_TOP : layout.F_BG_TOP + 3] = colours[0]
    row[layout.F_BG_BOTTOM : layout.F_BG_BOTTOM + 3] = colours[1]
    row[layout.F_SH : layout.F_SH + 27] = np.asarray(sh, np.float64).ravel()
    row[layout.F_ENV_ROTATION] = look.environment.rotation
    # Only nearby blockers darken the floor: an unbounded reach lets distant floor points catch
    # the product with a rare grazing ray, which speckles the whole floor.
    diagonal = float(np.linalg.norm(np.subtract(bounds[1], bounds[0])))
    row[layout.F_CONTACT_REACH] = CONTACT_REACH * diagonal
    row[layout.F_BOX : layout.F_BOX + 6] = np.asarray(bounds, np.float64).ravel()
    row[layout.F_DIFFUSE_BOUNCES] = max(int(look.diffuse_bounces), 0)
    row[layout.F_INDIRECT_CLAMP] = INDIRECT_CLAMP
    return row


def render_frame(prepared: PreparedScene, camera: Camera, look: Look) -> np.ndarray:
    """Render one frame.

    Parameters
    ----------
    prepared : from ``prepare_scene``.
    camera : the frame's camera (its width and height set the image size).
    look : resolved lights, environment, floor, background and sampling settings.

    Returns
    -------
    (height, width, 4) float32 premultiplied linear RGBA. Alpha is 0 where a transparent
    background shows and carries the shadow on a shadow catcher (whose colour is black).
    """
    return render_frame_counted(prepared, camera, look)[0]


def render_frame_counted(
    prepared: PreparedScene, camera: Camera, look: Look
) -> tuple[np.ndarray, np.ndarray]:
    """``render_frame`` and the (height, width) int32 count of camera samples each pixel took,
    as the kernel counted them."""
    if camera.width < 1 or camera.height < 1:
        raise RenderError("<camera>", "size", f"bad image size {camera.width}x{camera.height}")
    env, sh = _environment(look.environment)
    frame = pack_frame(camera, look, prepared.see_through, sh, prepared.bounds)
    arrays = (pack_lights(look.lights), env,
              pack_ground(look.ground, prepared.bounds, camera), tuple(prepared.bvh),
              prepared.packed)  # fmt: skip

    def run_pass(samples, seed, active, out, counts):
        frame[layout.F_SAMPLES] = samples
        frame[layout.F_SEED] = seed
        trace_set(out, frame, arrays, active, counts)

    shape = (camera.height, camera.width)
    seed = int(look.seed) & 0xFFFFFFFF
    surfaces = first_surfaces(prepared, camera) if look.denoise else None
    catcher = look.ground.kind == "shadow_catcher"
    variance = None
    if look.samples > 0:
        out, counts = sampling_control.render_fixed(run_pass, shape, look.samples, seed)
    else:
        if surfaces is not None:
            variance = np.zeros(shape + (4,), np.float64)
        out, counts = sampling_control.render_adaptive(
            run_pass, shape, seed, look.noise_target, look.min_samples, look.max_samples,
            look.exposure, look.tone_map,
            SHADOW_NOISE_FLOOR if catcher else 0.0, variance, smooth_shadow=catcher,
        )  # fmt: skip
    if catcher:
        lift_shadow_noise_floor(out)
    if surfaces is not None:
        out = denoiser.denoise(out, surfaces, variance)
    return out, counts


def trace_set(out, frame, arrays, active, counts) -> None:
    """Trace one stratified set (``shots.kernels.image.render_items``) on as many threads as
    numba is set to use here (``numba.set_num_threads``, ``NUMBA_NUM_THREADS``): thread t takes
    work items t, t + n, …; the kernel releases the GIL, so the threads run at once."""
    threads = max(1, min(numba.get_num_threads(), image.WORK_ITEMS))
    args = (out, frame, *arrays, active, counts)
    if threads == 1:
        image.render_items(0, 1, *args)
        return
    with ThreadPoolExecutor(threads, thread_name_prefix="shots-render") as pool:
        shares = [pool.submit(image.render_items, first, threads, *args)
                  for first in range(threads)]  # fmt: skip
        for share in shares:
            share.result()


def lift_shadow_noise_floor(rgba: np.ndarray, floor: float = SHADOW_NOISE_FLOOR) -> None:
    """Remove faint shadow-catcher speckle in place: pure-shadow pixels (black, partly opaque)
    get alpha (a − floor)/(1 − floor), clamped at 0.

    A soft light far from the product leaves a few percent of occlusion on distant floor that a
    handful of shadow rays per pixel resolves only as scattered dots; a catalog background must
    be clean, and the contact shadow (tens of percent) keeps its shape.
    """
    pure_shadow = rgba[..., :3].max(axis=-1) <= 0.0
    alpha = rgba[..., 3]
    lifted = np.clip((alpha - floor) / (1.0 - floor), 0.0, 1.0)
    alpha[pure_shadow] = lifted[pure_shadow]
