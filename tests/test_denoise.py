"""The edge-aware denoiser (``shots.denoise``) and its guide buffers (``shots.albedo``).

The filter is Dammertz et al. 2010's edge-avoiding à-trous wavelet transform with the
edge-stopping weights of Schied et al. 2017 (normal, depth, luminance). The images below are
drawn in numpy with known right answers: a constant, a noisy constant, steps between two
surfaces, a checkerboard texture.
"""

from __future__ import annotations

import numpy as np
from scenes import (
    diffuse,
    look,
    material,
    ortho_camera,
    quad,
    single_texture,
    sphere,
    textured_table,
)
from typer.testing import CliRunner

from shots.albedo import FirstSurfaces, albedo_image, first_surfaces
from shots.cli import app
from shots.demo import demo_models
from shots.denoise import SPLINE, denoise, filterable
from shots.look import Environment, Light, Look
from shots.planner import plan_frames
from shots.presets import load_preset
from shots.render import prepare_scene, render_frame
from shots.scene import T_BASE_COLOR

SIZE = 40
LIGHT = Light("area", intensity=3.0, position=(1, 2, 2), direction=(-1, -2, -2),
              edge_u=(0.5, 0, 0), edge_v=(0, 0.5, 0))  # fmt: skip


def plane(albedo=0.5, normal=(0.0, 0.0, 1.0), depth=5.0) -> FirstSurfaces:
    """Guides of a flat matte plane facing the camera and filling the frame."""
    shape = (SIZE, SIZE)
    return FirstSurfaces(
        albedo=np.broadcast_to(np.asarray(albedo, np.float64), shape + (3,)).copy(),
        normal=np.broadcast_to(np.asarray(normal, np.float64), shape + (3,)).copy(),
        depth=np.full(shape, depth),
        coverage=np.ones(shape),
        sharp=np.zeros(shape, bool),
    )


def image_of(colour: np.ndarray) -> np.ndarray:
    """(h, w, 4) float32 premultiplied RGBA, opaque, from an (h, w) or (h, w, 3) colour."""
    colour = np.asarray(colour, np.float64)
    if colour.ndim == 2:
        colour = np.repeat(colour[..., None], 3, axis=-1)
    return np.concatenate([colour, np.ones(colour.shape[:2] + (1,))], axis=-1).astype(np.float32)


def variance_of(sigma: float) -> np.ndarray:
    return np.full((SIZE, SIZE, 4), sigma * sigma)


def test_a_constant_image_stays_constant():
    # The à-trous weights are divided by their sum (Dammertz et al. 2010): a constant
    # illumination is a fixed point whatever the weights.
    rgba = image_of(np.full((SIZE, SIZE), 0.3))
    out = denoise(rgba, plane(albedo=0.6), variance_of(0.05))
    assert np.allclose(out, rgba, rtol=1e-6, atol=0)


def test_noise_on_a_flat_plane_drops_by_more_than_one_kernel_pass():
    # One pass of the 5 × 5 cubic B-spline kernel (1/16, 1/4, 3/8, 1/4, 1/16) without edge
    # stopping divides independent noise by 1 / sqrt(sum of squared weights) = 3.657 (the
    # variance of a weighted mean); five passes with the luminance weight of Schied et al. 2017
    # must do better than one plain pass.
    kernel = np.array([1 / 16, 1 / 4, 3 / 8, 1 / 4, 1 / 16])  # Dammertz et al. 2010
    assert np.array_equal(SPLINE, kernel)
    one_pass = 1.0 / np.sqrt(np.sum(np.outer(kernel, kernel) ** 2))
    assert abs(one_pass - 3.657) < 1e-3
    sigma, truth = 0.02, 0.25  # analytic value: illumination 0.5 × albedo 0.5
    noisy = truth + np.random.default_rng(7).normal(0.0, sigma, (SIZE, SIZE, 3))
    surfaces = plane(albedo=0.5)
    out = denoise(image_of(noisy), surfaces, variance_of(sigma))
    inside = filterable(surfaces)
    before = np.sqrt(np.mean((noisy[inside] - truth) ** 2))
    after = np.sqrt(np.mean((out[..., :3][inside] - truth) ** 2))
    assert before / after > one_pass


def step_surfaces(normal_right=(0.0, 0.0, 1.0), depth_right=5.0) -> FirstSurfaces:
    surfaces = plane(albedo=1.0)
    surfaces.normal[:, SIZE // 2 :] = normal_right
    surfaces.depth[:, SIZE // 2 :] = depth_right
    return surfaces


def filtered_step(surfaces: FirstSurfaces) -> np.ndarray:
    """A noiseless step 0.2 | 0.8 filtered as if it were very noisy (the luminance weight then
    stops nothing: only the normal and depth weights can keep the sides apart)."""
    step = np.where(np.arange(SIZE) < SIZE // 2, 0.2, 0.8)[None, :].repeat(SIZE, axis=0)
    return denoise(image_of(step), surfaces, variance_of(10.0))[..., 0]


def test_an_edge_between_two_normals_is_not_blurred_across():
    # Schied et al. 2017: weight max(0, n·n')^128 is 0 between perpendicular surfaces.
    out = filtered_step(step_surfaces(normal_right=(1.0, 0.0, 0.0)))
    rows = slice(1, SIZE - 1)
    assert np.allclose(out[rows, SIZE // 2 - 1], 0.2, atol=1e-4)
    assert np.allclose(out[rows, SIZE // 2], 0.8, atol=1e-4)


def test_an_edge_between_two_depths_is_not_blurred_across():
    # Schied et al. 2017: depth weight exp(-|z - z'| / (σz |∇z · offset|)); each side is flat.
    out = filtered_step(step_surfaces(depth_right=7.0))
    rows = slice(1, SIZE - 1)
    assert np.allclose(out[rows, SIZE // 2 - 1], 0.2, atol=1e-4)
    assert np.allclose(out[rows, SIZE // 2], 0.8, atol=1e-4)


def test_without_a_guide_edge_the_same_step_is_blurred():
    # The control: the same input with one surface on both sides mixes them, so the two tests
    # above could fail.
    out = filtered_step(step_surfaces())
    assert abs(out[SIZE // 2, SIZE // 2 - 1] - 0.2) > 0.05
    assert abs(out[SIZE // 2, SIZE // 2] - 0.8) > 0.05


def checkerboard() -> np.ndarray:
    j, i = np.mgrid[0:SIZE, 0:SIZE]
    return np.where((i // 8 + j // 8) % 2 == 0, 0.1, 0.9)


def test_albedo_texture_edges_survive_demodulation():
    # Schied et al. 2017 (demodulation): the filter sees colour / albedo, so a texture under even
    # light is a constant to it and comes back sharp after the multiplication. The image is
    # filtered as if very noisy, so the luminance weight cannot be what keeps the edges.
    light = 0.6
    albedo = checkerboard()
    truth = albedo * light
    surfaces = plane()
    surfaces.albedo[:] = albedo[..., None]
    out = denoise(image_of(truth), surfaces, variance_of(10.0))[..., 0]
    inside = filterable(surfaces)
    assert np.max(np.abs(out - truth)[inside]) < 1e-5
    # the control: without demodulation (albedo 1) the same filter blurs the texture's edges
    flat = denoise(image_of(truth), plane(albedo=1.0), variance_of(10.0))[..., 0]
    assert np.max(np.abs(flat - truth)[inside]) > 0.1


def glossy_patch() -> tuple[np.ndarray, FirstSurfaces]:
    noisy = 0.3 + np.random.default_rng(5).normal(0.0, 0.05, (SIZE, SIZE, 3))
    rgba = image_of(noisy)
    rgba[..., 3] = np.linspace(0.9, 1.0, SIZE)[None, :]  # alpha is never changed
    surfaces = plane()
    surfaces.sharp[10:20, 12:25] = True
    return rgba, surfaces


def test_glossy_pixels_and_alpha_are_unchanged_bit_for_bit():
    rgba, surfaces = glossy_patch()
    out = denoise(rgba, surfaces, variance_of(0.05))
    assert np.array_equal(out[10:20, 12:25], rgba[10:20, 12:25])
    assert np.array_equal(out[..., 3], rgba[..., 3])
    assert np.array_equal(out[0], rgba[0])  # the frame's edge has no four neighbours
    assert not np.array_equal(out[30:38, 5:35], rgba[30:38, 5:35])  # matte pixels are filtered


def test_same_input_same_output():
    rgba, surfaces = glossy_patch()
    first = denoise(rgba, surfaces, variance_of(0.05))
    assert first.tobytes() == denoise(rgba, surfaces, variance_of(0.05)).tobytes()
    assert first.tobytes() == denoise(rgba.copy(), surfaces, variance_of(0.05).copy()).tobytes()


def test_without_a_variance_the_neighbourhood_estimates_it():
    sigma, truth = 0.02, 0.25
    noisy = truth + np.random.default_rng(11).normal(0.0, sigma, (SIZE, SIZE, 3))
    surfaces = plane(albedo=0.5)
    out = denoise(image_of(noisy), surfaces)
    inside = filterable(surfaces)
    before = np.sqrt(np.mean((noisy[inside] - truth) ** 2))
    after = np.sqrt(np.mean((out[..., :3][inside] - truth) ** 2))
    assert before / after > 3.657  # one plain pass of the kernel, as in the test above


def test_guide_buffers_of_a_plane_facing_the_camera():
    # An orthographic camera 5 units in front of a quad at z = 0: every hit is 5 units away,
    # with the quad's normal +Z; misses are kept sharp with infinite depth.
    scene = quad(size=2.0, rows=[diffuse((0.2, 0.4, 0.6))])
    surfaces = first_surfaces(prepare_scene(scene), ortho_camera(size=16, half_height=1.5))
    hit = surfaces.coverage > 0
    assert hit.sum() > 50 and (~hit).sum() > 50
    assert np.allclose(surfaces.depth[hit], 5.0, atol=1e-5)
    assert np.all(np.isinf(surfaces.depth[~hit]))
    assert np.allclose(surfaces.normal[hit], (0.0, 0.0, 1.0), atol=1e-6)
    assert np.allclose(surfaces.albedo[hit], (0.2, 0.4, 0.6), atol=1e-6)
    assert not surfaces.sharp[hit].any() and surfaces.sharp[~hit].all()


def test_guide_albedo_is_averaged_over_the_pixel_filter():
    # Stripes one pixel wide whose edges pass through the pixel centres: the renderer's pixel
    # filter (a tent, symmetric about the centre) sees half of each stripe, so the albedo the
    # render shows is 0.5 in every pixel; one ray through the centre reads 0 or 1.
    columns = np.arange(32) % 2
    stripes = np.zeros((4, 32, 4))
    stripes[..., :3] = columns[None, :, None]
    stripes[..., 3] = 1.0
    scene = quad(size=4.0, center=(0.0625, 0.0, 0.0), textures=single_texture(stripes),
                 table=textured_table(material(P_METALLIC=0.0, P_ROUGHNESS=1.0),
                                      {T_BASE_COLOR: 0}))  # fmt: skip
    prepared, camera = prepare_scene(scene), ortho_camera(size=16, half_height=1.0)
    albedo = first_surfaces(prepared, camera).albedo[2:-2, 2:-2]
    assert np.allclose(albedo, 0.5, atol=0.01)
    centre = albedo_image(prepared, camera)[2:-2, 2:-2, :3]
    assert np.all(np.isclose(centre, 0.0) | np.isclose(centre, 1.0))


def test_metal_and_smooth_surfaces_are_kept_sharp():
    camera = ortho_camera(size=8, half_height=0.4)
    for values in ({"P_METALLIC": 1.0}, {"P_ROUGHNESS": 0.1}, {"P_TRANSMISSION": 1.0}):
        scene = quad(size=2.0, rows=[diffuse(**values)])
        assert first_surfaces(prepare_scene(scene), camera).sharp.all(), values


def test_denoise_is_off_by_default_and_acts_only_on_matte_inner_pixels():
    assert Look().denoise is False
    assert load_preset("still").image.denoise is False
    prepared = prepare_scene(sphere(rows=[diffuse((0.8, 0.5, 0.3))]))
    camera = ortho_camera(size=32)
    settings = look(LIGHT, env=Environment(), samples=4)
    default = render_frame(prepared, camera, settings)
    off = render_frame(prepared, camera, Look(**{**settings.__dict__, "denoise": False}))
    on = render_frame(prepared, camera, Look(**{**settings.__dict__, "denoise": True}))
    assert default.tobytes() == off.tobytes()
    inside = filterable(first_surfaces(prepared, camera))
    assert np.array_equal(on[~inside], default[~inside])
    assert not np.array_equal(on[inside], default[inside])


def test_the_preset_key_reaches_every_frames_look():
    preset = load_preset("still").with_image(denoise=True).with_image_size(8, 8)
    frames = plan_frames(preset, quad(size=2.0))
    assert frames and all(frame.look.denoise for frame in frames)


def test_render_command_takes_denoise(tmp_path):
    model = min(demo_models(), key=lambda path: path.stat().st_size)
    result = CliRunner().invoke(app, ["render", str(model), "-o", str(tmp_path), "--size",
                                      "24x24", "--denoise"])  # fmt: skip
    assert result.exit_code == 0, result.output
    assert len(list(tmp_path.glob("*.png"))) == 1
