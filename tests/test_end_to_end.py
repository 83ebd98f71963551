"""The whole path once: a sample glTF file through the CLI to a PNG, checked numerically."""

from pathlib import Path

import numpy as np
import pytest
from PIL import Image
from typer.testing import CliRunner

from shots.cli import app
from shots.gltf import load_scene
from shots.planner import plan_frames
from shots.presets import load_preset

SAMPLES = Path(__file__).parent / "data" / "samples"
runner = CliRunner()


def spec_view_projection(eye, target, up, yfov, aspect, znear=0.01, zfar=100.0):
    """View × projection built from the glTF 2.0 spec (§Cameras: view matrix is the inverse of
    the camera node's world transform, which looks down -Z; §Projection Matrices: finite
    perspective), independent of shots.camera."""
    eye, target, up = (np.asarray(v, float) for v in (eye, target, up))
    z = (eye - target) / np.linalg.norm(eye - target)
    x = np.cross(up, z)
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    world = np.eye(4)
    world[:3, 0], world[:3, 1], world[:3, 2], world[:3, 3] = x, y, z, eye
    t = np.tan(0.5 * yfov)
    projection = np.array(
        [
            [1 / (aspect * t), 0, 0, 0],
            [0, 1 / t, 0, 0],
            [0, 0, (zfar + znear) / (znear - zfar), 2 * zfar * znear / (znear - zfar)],
            [0, 0, -1, 0],
        ]
    )
    return projection @ np.linalg.inv(world)


def to_pixels(points, matrix, width, height):
    """NDC → pixel positions with row 0 at the top (glTF NDC y is up)."""
    clip = np.c_[points, np.ones(len(points))] @ matrix.T
    ndc = clip[:, :2] / clip[:, 3:4]
    return np.c_[(ndc[:, 0] + 1) * width / 2, (1 - ndc[:, 1]) * height / 2]


def convex_hull(points):
    """Andrew's monotone chain (counter-clockwise hull in a y-up sense)."""
    pts = sorted(map(tuple, points))

    def half(seq):
        chain = []
        for p in seq:
            while len(chain) >= 2:
                (ax, ay), (bx, by) = chain[-2], chain[-1]
                if (bx - ax) * (p[1] - ay) - (by - ay) * (p[0] - ax) <= 0:
                    chain.pop()
                else:
                    break
            chain.append(p)
        return chain[:-1]

    return np.array(half(pts) + half(reversed(pts)))


def polygon_area_centroid(poly):
    """Shoelace formula for a simple polygon's area and centroid."""
    x, y = poly[:, 0], poly[:, 1]
    cross = x * np.roll(y, -1) - np.roll(x, -1) * y
    area = cross.sum() / 2
    cx = ((x + np.roll(x, -1)) * cross).sum() / (6 * area)
    cy = ((y + np.roll(y, -1)) * cross).sum() / (6 * area)
    return abs(area), np.array([cx, cy])


def test_box_silhouette_matches_its_projection(tmp_path):
    model = SAMPLES / "Box.gltf"
    result = runner.invoke(app, ["render", str(model), "-o", str(tmp_path), "--size", "160x120"])
    assert result.exit_code == 0, result.output
    [png] = sorted(tmp_path.glob("*.png"))
    image = np.asarray(Image.open(png))
    assert image.shape == (120, 160, 4)
    alpha = image[..., 3]

    # The camera the planner chose, projected with matrices built here from the spec.
    preset = load_preset("still").with_image_size(160, 120)
    frame = plan_frames(preset, load_scene(model))[0]
    cam = frame.camera
    matrix = spec_view_projection(cam.eye, cam.target, cam.up, cam.yfov, 160 / 120)
    # Box.gltf's accessor min/max are ±0.5 on every axis and its node matrix is a rotation, so
    # the world-space box is the unit cube about the origin.
    corners = np.array([[x, y, z] for x in (-0.5, 0.5) for y in (-0.5, 0.5) for z in (-0.5, 0.5)])
    area, centroid = polygon_area_centroid(convex_hull(to_pixels(corners, matrix, 160, 120)))

    mask = alpha > 127
    rows, cols = np.nonzero(mask)
    measured_centroid = np.array([cols.mean() + 0.5, rows.mean() + 0.5])
    assert abs(mask.sum() - area) <= 0.01 * 160 * 120
    assert np.all(np.abs(measured_centroid - centroid) <= 0.01 * 160)
    # Background pixels (beyond a 2-pixel band around the silhouette) are fully transparent.
    near = np.zeros_like(mask)
    for dy in range(-2, 3):
        for dx in range(-2, 3):
            near |= np.roll(np.roll(mask, dy, axis=0), dx, axis=1)
    assert alpha[~near].max(initial=0) == 0
    assert (alpha == 0).sum() > 0.3 * alpha.size
    # The lit box is not black.
    assert image[mask][:, :3].mean() > 20


@pytest.mark.parametrize("args", [["render", "missing.glb"], ["render", "x.gltf", "--size", "0x5"],
                                  ["render", "x.gltf", "--samples", "0"]])
def test_bad_input_is_one_line_exit_2(tmp_path, args):
    result = runner.invoke(app, args + ["-o", str(tmp_path)])
    assert result.exit_code == 2
    assert "Traceback" not in result.output
    assert list(tmp_path.iterdir()) == []


def test_variants_rendered_into_one_folder_keep_their_own_files(tmp_path):
    # The demo sofa's KHR_materials_variants (its README: one material per named variant): oat
    # is a light fabric (#c8b79c) and slate a dark one (#59606a), per assets_demo/make_catalog.py.
    sofa = Path(__file__).parents[1] / "assets_demo" / "wool_sofa.glb"
    for variant in ("oat", "slate"):
        result = runner.invoke(app, ["render", str(sofa), "--size", "32x24", "--variant", variant,
                                     "-o", str(tmp_path)])
        assert result.exit_code == 0, result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "wool_sofa-oat-still.png", "wool_sofa-slate-still.png"]

    def covered_mean(name):
        rgba = np.asarray(Image.open(tmp_path / name), np.float64)
        covered = rgba[..., 3] == 255
        assert covered.sum() > 50
        return rgba[covered, :3].mean()

    assert covered_mean("wool_sofa-oat-still.png") > covered_mean("wool_sofa-slate-still.png") + 30


def test_samples_option_is_the_preset_key(tmp_path):
    # --samples N and `samples = N` in a preset are the same fixed count (adaptive sampling off)
    model = SAMPLES / "Box.gltf"
    preset = tmp_path / "fixed.toml"
    preset.write_text('extends = "still"\n[image]\nwidth = 40\nheight = 30\nsamples = 2\n')
    outputs = {}
    for name, args in {"option": ["-p", "still", "--size", "40x30", "--samples", "2"],
                       "key": ["-p", str(preset)],
                       "other": ["-p", "still", "--size", "40x30", "--samples", "3"]}.items():
        result = runner.invoke(app, ["render", str(model), "-o", str(tmp_path / name), *args])
        assert result.exit_code == 0, result.output
        [png] = (tmp_path / name).glob("*.png")
        outputs[name] = np.asarray(Image.open(png))
    assert np.array_equal(outputs["option"], outputs["key"])
    assert not np.array_equal(outputs["option"], outputs["other"])
