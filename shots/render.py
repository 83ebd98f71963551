"""Render frames of a scene: prepare it once (BVH, packed arrays), then trace each frame.

    prepared = prepare_scene(scene)                 # once per model
    rgba = render_frame(prepared, camera, look)     # (h, w, 4) float32, premultiplied linear

Everything per pixel happens in one numba kernel (``shots.kernels.shade.render_image``); this
module only packs the look, the camera and the floor into the flat rows that kernel reads.

Image formation: ``look.samples`` camera samples per pixel on a jittered grid (a square count is
stratified exactly), warped to a tent filter of radius 1 pixel (filter importance sampling,
Ernst et al. 2006), equally weighted. One sample goes through the pixel centre. Every random
number is a hash of (look.seed, pixel, sample, dimension): reruns are bit-identical and do not
depend on the number of threads.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from shots.accel import Bvh, build_bvh
from shots.camera import ORTHOGRAPHIC, Camera
from shots.colour import srgb_to_linear
from shots.environment import environment_map
from shots.errors import RenderError
from shots.kernels import ground as gk
from shots.kernels import lights as lk
from shots.kernels import shade
from shots.look import AREA, DIRECTIONAL, POINT, SPOT, Environment, Ground, Light, Look
from shots.scene import ALPHA_OPAQUE, N_TEX_INFO, P_ALPHA_MODE, P_TRANSMISSION, Scene

BACKGROUNDS = {
    "transparent": shade.BG_TRANSPARENT,
    "solid": shade.BG_SOLID,
    "gradient": shade.BG_GRADIENT,
    "environment": shade.BG_ENVIRONMENT,
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
MIN_CONTACT_SAMPLES = 4  # environment rays per shadow-catcher hit (soft contact shadow)


@dataclass(frozen=True)
class PreparedScene:
    """A scene ready to trace: its BVH and kernel-ready arrays, shared by all frames of a model.

    Attributes
    ----------
    scene : the source scene.
    bvh : its BVH (``shots.accel``).
    geometry : (positions, normals, tangents, uvs, colors, triangles, tri_material), kernel dtypes.
    materials : (params, texture, texcoord, uv_transform, texels, tex_info), kernel dtypes.
    see_through : whether any used material lets light through (BLEND, MASK, transmission);
        when not, shadow rays take the cheaper any-hit query.
    bounds : (2, 3) float64 scene bounds.
    """

    scene: Scene
    bvh: Bvh
    geometry: tuple
    materials: tuple
    see_through: bool
    bounds: np.ndarray


def _c(array, dtype) -> np.ndarray:
    return np.ascontiguousarray(array, dtype)


def prepare_scene(scene: Scene) -> PreparedScene:
    """Build the BVH and pack the scene for ``render_frame``.

    Raises
    ------
    RenderError
        When the scene has no triangles.
    """
    if scene.triangle_count == 0:
        raise RenderError(scene.source or "<scene>", None, "the scene has no triangles to render")
    positions = _c(scene.positions, np.float32)
    triangles = _c(scene.triangles, np.int32)
    v = len(positions)
    geometry = (
        positions,
        _c(scene.normals, np.float32).reshape(v, 3),
        _c(scene.tangents, np.float32).reshape(v, 4),
        _c(scene.uv, np.float32).reshape(2, v, 2),
        _c(scene.colors, np.float32).reshape(v, 4),
        triangles,
        _c(scene.tri_material, np.int32),
    )
    table = scene.materials
    materials = (
        _c(table.params, np.float32),
        _c(table.texture, np.int32),
        _c(table.texcoord, np.int32),
        _c(table.uv_transform, np.float32),
        _c(scene.textures.texels, np.float32).reshape(-1, 4),
        _c(scene.textures.info, np.int32).reshape(-1, N_TEX_INFO),
    )
    used = table.params[np.unique(scene.tri_material)]
    see_through = bool(
        np.any(used[:, P_ALPHA_MODE] != ALPHA_OPAQUE) or np.any(used[:, P_TRANSMISSION] > 0)
    )
    return PreparedScene(
        scene=scene,
        bvh=build_bvh(positions, triangles),
        geometry=geometry,
        materials=materials,
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


def pack_camera(camera: Camera) -> np.ndarray:
    """(N_CAMERA,) float64: eye, basis rows u, v, w, tan(yfov/2), aspect, orthographic, ymag."""
    row = np.zeros(shade.N_CAMERA, np.float64)
    row[shade.CAM_EYE : shade.CAM_EYE + 3] = camera.eye
    basis = camera.basis()
    row[shade.CAM_U : shade.CAM_U + 3] = basis[0]
    row[shade.CAM_V : shade.CAM_V + 3] = basis[1]
    row[shade.CAM_W : shade.CAM_W + 3] = basis[2]
    row[shade.CAM_TAN_Y] = math.tan(camera.yfov / 2.0)
    row[shade.CAM_ASPECT] = camera.aspect
    row[shade.CAM_ORTHO] = 1.0 if camera.kind == ORTHOGRAPHIC else 0.0
    row[shade.CAM_YMAG] = camera.ymag
    return row


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


def pack_background(look: Look) -> np.ndarray:
    """(2, 3) float64 linear top and bottom colours (Background colours are display sRGB)."""
    bg = look.background
    if bg.kind not in BACKGROUNDS:
        raise RenderError("<look>", "background.kind", f"unknown {bg.kind!r}")
    top = srgb_to_linear(np.asarray(bg.color, np.float64))
    bottom = srgb_to_linear(np.asarray(bg.color_bottom, np.float64)) if bg.kind == "gradient" else top
    return np.ascontiguousarray(np.stack([top, bottom]), np.float64)


@functools.lru_cache(maxsize=8)
def _environment(env: Environment) -> tuple:
    radiance, coeffs = environment_map(env)
    return radiance, np.ascontiguousarray(coeffs, np.float64), np.array([env.rotation], np.float64)


def pack_settings(camera: Camera, look: Look, see_through: bool) -> np.ndarray:
    """(N_SETTINGS,) int64 image size, sample counts, depth, seed and flags."""
    row = np.zeros(shade.N_SETTINGS, np.int64)
    row[shade.C_WIDTH] = camera.width
    row[shade.C_HEIGHT] = camera.height
    row[shade.C_SAMPLES] = max(int(look.samples), 1)
    row[shade.C_AREA_SAMPLES] = max(int(look.area_light_samples), 1)
    row[shade.C_GLOSSY_SAMPLES] = max(int(look.glossy_samples), 1)
    row[shade.C_MAX_DEPTH] = max(int(look.max_depth), 0)
    row[shade.C_SEED] = int(look.seed) & 0xFFFFFFFF
    row[shade.C_SEE_THROUGH] = 1 if see_through else 0
    row[shade.C_BACKGROUND] = BACKGROUNDS[look.background.kind]
    row[shade.C_CONTACT_SAMPLES] = max(int(look.area_light_samples), MIN_CONTACT_SAMPLES)
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
    if camera.width < 1 or camera.height < 1:
        raise RenderError("<camera>", "size", f"bad image size {camera.width}x{camera.height}")
    out = np.zeros((camera.height, camera.width, 4), np.float32)
    background = pack_background(look)
    shade.render_image(
        out,
        pack_camera(camera),
        pack_settings(camera, look, prepared.see_through),
        background,
        pack_lights(look.lights),
        _environment(look.environment),
        tuple(prepared.bvh),
        prepared.geometry,
        prepared.materials,
        pack_ground(look.ground, prepared.bounds, camera),
    )
    return out
