"""render_frame's contract: buffer layout, background, sampling, determinism, environment maps."""

import math

import numba
import numpy as np
import OpenEXR
import pytest
from scenes import diffuse, look, ortho_camera, quad, render, sphere

from shots.camera import ORTHOGRAPHIC, Camera
from shots.colour import srgb_to_linear
from shots.environment import (
    environment_map,
    gradient_map,
    irradiance,
    irradiance_coefficients,
    load_hdr_image,
)
from shots.errors import RenderError
from shots.kernels.camera_sample import camera_ray
from shots.kernels.texture import equirect_uv, sample_equirect
from shots.look import Background, Environment, Light
from shots.render import pack_frame, prepare_scene, render_frame
from shots.scene import MaterialTable, Scene

LIGHT = Light("area", intensity=3.0, position=(1, 2, 2), direction=(-1, -2, -2),
              edge_u=(0.5, 0, 0), edge_v=(0, 0.5, 0))  # fmt: skip


def test_buffer_is_premultiplied_rgba_with_transparent_background():
    camera = Camera(eye=(0, 0, 4), target=(0, 0, 0), up=(0, 1, 0), width=40, height=30)
    image = render(sphere(), camera, look(LIGHT, env=Environment()))
    assert image.shape == (30, 40, 4) and image.dtype == np.float32
    assert np.all(image[0, 0] == 0)  # corner: background, alpha 0 (transparent)
    assert image[15, 20, 3] == 1 and np.all(image[15, 20, :3] > 0)
    assert np.all(image[..., :3] <= image[..., 3:] * 50)  # colour vanishes with coverage


def test_edge_pixels_have_fractional_coverage():
    # Porter & Duff 1984: accumulate premultiplied; an edge through a pixel's centre covers half of
    # its (symmetric, tent) filter, so alpha ≈ 0.5 with the colour of the surface × alpha (the
    # quad is unlit white, so rgb == alpha)
    row = diffuse(P_UNLIT=1.0)
    camera = ortho_camera(8, 1.0)  # pixel width 0.25; column 4 spans x ∈ [0, 0.25]
    inside = render(quad(size=1.0, center=(0.5, 0, 0), rows=[row]), camera, look(samples=64))
    assert np.all(inside[3:5, 5] == 1.0)  # footprint x ∈ [0, 0.75] lies within the quad
    half = render(quad(size=1.0, center=(0.625, 0, 0), rows=[row]), camera, look(samples=64))
    edge = half[3:5, 4]  # the quad starts at x = 0.125, the centre of column 4
    assert np.allclose(edge[:, 3], 0.5, atol=0.05)
    np.testing.assert_allclose(edge[:, 0], edge[:, 3], rtol=1e-6)


@pytest.mark.parametrize(
    "background, top, bottom",
    [
        (Background("solid", color=(0.5, 0.5, 0.5)), 0.5, 0.5),
        (Background("gradient", color=(1.0, 1.0, 1.0), color_bottom=(0.0, 0.0, 0.0)), 1.0, 0.0),
    ],
)
def test_background_colours_are_decoded_from_srgb(background, top, bottom):
    # Background colours are display sRGB: linear = IEC 61966-2-1 decode
    # (decode(0.5) = 0.21404); a gradient runs from the top row to the bottom row
    camera = ortho_camera(16, 1.0)
    image = render(sphere(0.1, (0, 0, -3)), camera, look(background=background))
    top_row, bottom_row = image[0, 0], image[-1, 0]
    f = 0.5 / 16  # first row's centre
    expect_top = (1 - f) * srgb_to_linear(top) + f * srgb_to_linear(bottom)
    assert top_row[3] == 1 and bottom_row[3] == 1
    assert top_row[0] == pytest.approx(expect_top, abs=1e-6)
    if background.kind == "solid":
        assert top_row[0] == pytest.approx(0.21404, abs=1e-5)
    else:
        assert bottom_row[0] == pytest.approx(f * 1.0, abs=1e-6)


def test_environment_background_shows_the_environment():
    env = Environment(zenith=(0.2, 0.4, 0.8), horizon=(0.2, 0.4, 0.8), nadir=(0.2, 0.4, 0.8))
    image = render(sphere(0.1, (0, 0, -3)), ortho_camera(8), look(env=env,
                   background=Background("environment")))  # fmt: skip
    np.testing.assert_allclose(image[0, 0], [0.2, 0.4, 0.8, 1.0], rtol=1e-6)


def test_kernel_camera_rays_match_camera_module():
    # the kernel rebuilds primary rays itself; they must equal Camera.rays_at (glTF §Cameras)
    for camera in [
        Camera(eye=(3, 2, 4), target=(0, 0.5, 0), up=(0, 1, 0), width=30, height=20, yfov=0.66),
        Camera(eye=(1, 5, 1), target=(0, 0, 0), up=(0, 1, 0), width=16, height=24,
               kind=ORTHOGRAPHIC, ymag=0.7),
    ]:  # fmt: skip
        row = pack_frame(camera, look(), False, np.zeros((9, 3)), np.zeros((2, 3)))
        px = np.array([0.5, 7.25, 15.5, 3.0])
        py = np.array([0.5, 11.0, 19.5, 2.75])
        origins, directions = camera.rays_at(px, py)
        for k in range(len(px)):
            ray = camera_ray(row, px[k], py[k])
            np.testing.assert_allclose(ray[:3], origins[k], atol=1e-5)
            np.testing.assert_allclose(ray[3:], directions[k], atol=1e-6)


def test_reruns_are_bit_identical_and_independent_of_threads():
    # Same input → same bytes; random numbers are hashes of (seed, pixel, sample)
    prepared = prepare_scene(sphere(rows=[diffuse(P_ROUGHNESS=0.3)]))
    camera = Camera(eye=(0, 1, 4), target=(0, 0, 0), up=(0, 1, 0), width=24, height=24)
    settings = look(LIGHT, env=Environment(), ground="shadow_catcher", samples=4, seed=7)
    first = render_frame(prepared, camera, settings)
    assert np.array_equal(first, render_frame(prepared, camera, settings))
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        single = render_frame(prepared, camera, settings)
    finally:
        numba.set_num_threads(threads)
    assert np.array_equal(first, single)
    other_seed = look(LIGHT, env=Environment(), ground="shadow_catcher", samples=4, seed=8)
    assert not np.array_equal(first, render_frame(prepared, camera, other_seed))


def test_empty_scene_is_refused():
    empty = Scene(
        positions=np.zeros((0, 3), np.float32), normals=np.zeros((0, 3), np.float32),
        tangents=np.zeros((0, 4), np.float32), uv=np.zeros((2, 0, 2), np.float32),
        colors=np.zeros((0, 4), np.float32), triangles=np.zeros((0, 3), np.int32),
        tri_material=np.zeros(0, np.int32), materials=MaterialTable.from_rows([], []),
        source="empty.glb",
    )  # fmt: skip
    with pytest.raises(RenderError, match="empty.glb"):
        prepare_scene(empty)


# --- environment -------------------------------------------------------------------------------
def test_sh_irradiance_is_exact_for_a_linear_sky():
    # Ramamoorthi & Hanrahan 2001: radiance L(ω) = a + b·ω_y lies in SH bands 0–1, where the
    # 9-term irradiance is exact: E(n) = π a + (2π/3) b n_y (the clamped-cosine Â0 = π, Â1 = 2π/3)
    a, b = 0.5, 0.3
    env = Environment(zenith=(a + b,) * 3, horizon=(a,) * 3, nadir=(a - b,) * 3)
    radiance, coeffs = environment_map(env)
    normals = np.array([[0, 1, 0], [0, -1, 0], [1, 0, 0], [0.6, 0.8, 0], [0, -0.6, 0.8]], float)
    expected = math.pi * a + 2 * math.pi / 3 * b * normals[:, 1]
    np.testing.assert_allclose(irradiance(coeffs, normals)[:, 0], expected, rtol=2e-4)


def test_sh_irradiance_of_a_uniform_sky_is_pi_l():
    # irradiance from uniform radiance L over the hemisphere is π L (Lambert)
    env = Environment(zenith=(2.0,) * 3, horizon=(2.0,) * 3, nadir=(2.0,) * 3)
    coeffs = irradiance_coefficients(gradient_map(env))
    dirs = np.random.default_rng(0).normal(size=(20, 3))
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    # (quadrature on the 256-row map leaves ~1e-5 in the higher bands)
    np.testing.assert_allclose(irradiance(coeffs, dirs), 2.0 * math.pi, rtol=2e-5)


def test_sh_irradiance_matches_brute_force_for_a_sharp_sky():
    # R&H 2001 report an average error under 3% for 9 terms; a half-bright sky (step at the
    # horizon) integrated by brute force over the hemisphere of each normal
    h, w = 64, 128
    img = np.zeros((h, w, 3), np.float32)
    img[: h // 2] = 1.0
    coeffs = irradiance_coefficients(img)
    theta = (np.arange(h) + 0.5) / h * np.pi
    phi = ((np.arange(w) + 0.5) / w - 0.5) * 2 * np.pi
    t, p = np.meshgrid(theta, phi, indexing="ij")
    dirs = np.stack([np.sin(t) * np.sin(p), np.cos(t), -np.sin(t) * np.cos(p)], -1).reshape(-1, 3)
    d_omega = (np.sin(t) * (np.pi / h) * (2 * np.pi / w)).ravel()
    for n in ([0, 1, 0], [1, 0, 0], [0, -1, 0.0]):
        brute = np.sum(img[..., 0].ravel() * np.maximum(dirs @ n, 0) * d_omega)
        sh = irradiance(coeffs, np.array([n], float))[0, 0]
        assert sh == pytest.approx(brute, abs=0.03 * math.pi)


def test_exr_environment_lights_a_furnace(tmp_path):
    # an OpenEXR map (read through the OpenEXR package) of uniform radiance 1: a white Lambert
    # sphere in it renders 1 (furnace test, as in test_shading)
    path = tmp_path / "white.exr"
    pixels = np.ones((16, 32, 3), np.float32)
    with OpenEXR.File({"type": OpenEXR.scanlineimage}, {"RGB": pixels}) as exr:
        exr.write(str(path))
    np.testing.assert_array_equal(load_hdr_image(str(path)), pixels)
    camera = Camera(eye=(0, 0, 4), target=(0, 0, 0), up=(0, 1, 0), width=16, height=16)
    image = render(sphere(rows=[diffuse(P_SPECULAR=0.0)]), camera,
                   look(env=Environment(image=str(path))))  # fmt: skip
    covered = image[..., 3] == 1
    np.testing.assert_allclose(image[covered, :3], 1.0, atol=0.01)


def test_radiance_hdr_decoding(tmp_path):
    # Ward, "Real Pixels" (Graphics Gems II, 1991): value = mantissa · 2^(exponent − 136);
    # (128, 64, 32, 129) → (1, 0.5, 0.25); one flat scanline and one run-length-encoded scanline
    width = 8
    flat = bytes([128, 64, 32, 129] * width)
    rle = bytes([2, 2, 0, width])
    for value in (128, 64, 32, 130):  # exponent 130: twice as bright
        rle += bytes([128 + width, value])
    data = b"#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n-Y 2 +X 8\n" + flat + rle
    path = tmp_path / "sky.hdr"
    path.write_bytes(data)
    image = load_hdr_image(str(path))
    np.testing.assert_allclose(image[0], np.tile([1.0, 0.5, 0.25], (width, 1)))
    np.testing.assert_allclose(image[1], np.tile([2.0, 1.0, 0.5], (width, 1)))


def test_missing_environment_image_is_a_render_error(tmp_path):
    with pytest.raises(RenderError, match="not found"):
        load_hdr_image(str(tmp_path / "nope.exr"))


def test_equirect_convention_and_rotation():
    # shots.environment's convention: the map's centre column looks along −Z, u grows toward +X,
    # row 0 is the zenith; a rotation by π about +Y swaps the halves
    assert equirect_uv(0.0, 0.0, -1.0, 0.0) == pytest.approx((0.5, 0.5))
    assert equirect_uv(1.0, 0.0, 0.0, 0.0) == pytest.approx((0.75, 0.5))
    assert equirect_uv(0.0, 1.0, 0.0, 0.0)[1] == pytest.approx(0.0)
    img = np.zeros((32, 64, 3), np.float32)
    img[:, :32, 0] = 1.0  # left half red: directions with x < 0
    img[:, 32:, 2] = 1.0  # right half blue
    out = np.zeros(3)
    sample_equirect(img, -1.0, 0.0, 0.0, 0.0, 1.0, out)
    assert tuple(out) == (1.0, 0.0, 0.0)
    sample_equirect(img, -1.0, 0.0, 0.0, math.pi, 1.0, out)
    assert tuple(out) == (0.0, 0.0, 1.0)
