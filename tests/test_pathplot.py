"""The camera-plan picture: its colours and the view volumes that show where each camera looks."""

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest
from coloraide import Color
from PIL import Image

from shots.camera import ORTHOGRAPHIC, Camera
from shots.gltf import load_scene
from shots.pathplot import (
    HEADER,
    PALETTE,
    PANEL,
    VIEW_REACH,
    VIEW_TINT,
    view_volume,
    write_path_picture,
)
from shots.planner import plan_frames
from shots.presets import load_preset

# Khronos glTF sample model (tests/data/samples/NOTICE.md): a unit cube centred on the origin.
BOX = Path(__file__).parent / "data" / "samples" / "Box.gltf"
GOLDEN_ANGLE = 180.0 * (3.0 - math.sqrt(5.0))  # 137.508°, 360° · (1 - 1/φ)
# The first colour of the default cycle of a widely used plotting library, which the picture
# used to be drawn in (from memory).
BORROWED_FIRST = (31, 119, 180)


def wcag_contrast_on_white(rgb) -> float:
    """WCAG 2.x contrast ratio (lighter + 0.05) / (darker + 0.05) against white (1), where the
    relative luminance is 0.2126 R + 0.7152 G + 0.0722 B of the linearised sRGB channels
    (W3C WCAG 2.1, definitions "contrast ratio" and "relative luminance"; IEC 61966-2-1 decode)."""
    c = np.asarray(rgb, np.float64) / 255.0
    linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    luminance = float(linear @ [0.2126, 0.7152, 0.0722])
    return 1.05 / (luminance + 0.05)


def test_palette_is_golden_angle_hues_at_one_oklch_lightness_and_chroma():
    # Derived again with coloraide, an independent colour library: OKLCH (Ottosson 2020) to sRGB.
    for k, rgb in enumerate(PALETTE):
        expected = Color("oklch", [0.58, 0.10, (85.0 + k * GOLDEN_ANGLE) % 360.0])
        assert expected.in_gamut("srgb")
        coords = expected.convert("srgb").coords()
        assert rgb == tuple(round(255 * v) for v in coords), k


def test_every_shot_colour_has_at_least_3_to_1_contrast_on_white():
    # WCAG 2.1 Success Criterion 1.4.11 (Non-text Contrast): graphical objects need 3:1 against
    # adjacent colours; the view labels are text, so the palette is held to 4:1 here.
    for rgb in PALETTE:
        ours = wcag_contrast_on_white(rgb)
        library = Color("srgb", [v / 255 for v in rgb]).contrast(Color("white"), method="wcag21")
        assert ours == pytest.approx(library, rel=1e-3)
        assert ours >= 4.0, rgb


def test_shot_colours_are_told_apart():
    # OKLab distance (Ottosson 2020); 0.02 is about a just-noticeable difference (from memory),
    # so every pair stays well clear of it.
    colours = [Color("srgb", [v / 255 for v in rgb]) for rgb in PALETTE]
    closest = min(a.delta_e(b, method="ok") for i, a in enumerate(colours) for b in colours[:i])
    assert closest > 0.05
    assert colours[0].delta_e(Color("srgb", [v / 255 for v in BORROWED_FIRST]), method="ok") > 0.1


@pytest.mark.parametrize("kind", ["perspective", ORTHOGRAPHIC])
def test_view_volume_far_corners_are_the_image_corners(kind):
    camera = Camera((1.0, 2.0, 4.0), (0.2, 0.3, -0.1), (0.0, 1.0, 0.0), 160, 90,
                    yfov=math.radians(40.0), kind=kind, ymag=0.7)
    corners = view_volume(camera, depth=3.0)
    far = camera.project(corners[4:])
    image = [(0, 90), (160, 90), (160, 0), (0, 0)]  # project() counts y downward
    np.testing.assert_allclose(np.sort(far, axis=0), np.sort(image, axis=0), atol=1e-9)
    forward = np.subtract(camera.target, camera.eye)
    forward /= np.linalg.norm(forward)
    centre = corners[4:].mean(axis=0) - corners[:4].mean(axis=0)
    np.testing.assert_allclose(centre, 3.0 * forward, atol=1e-9)
    if kind == ORTHOGRAPHIC:  # glTF 2.0 spec §Cameras: ymag is half the visible height
        np.testing.assert_allclose(np.linalg.norm(corners[3] - corners[0]), 2 * 0.7, atol=1e-9)
    else:  # the right edge's middle leans xfov/2 off the view: tan(xfov/2) = aspect·tan(yfov/2)
        side = (corners[5] + corners[6]) / 2 - camera.eye
        angle = math.acos(side @ forward / np.linalg.norm(side))
        assert angle == pytest.approx(math.atan(160 / 90 * math.tan(math.radians(20.0))))


def one_camera_picture(tmp_path, eye) -> np.ndarray:
    """The plan picture of the Box sample seen by one camera at ``eye`` aiming at its centre."""
    scene = load_scene(BOX)
    planned = plan_frames(load_preset("still"), scene)[0]
    camera = Camera(tuple(map(float, eye)), (0.0, 0.0, 0.0), (0.0, 1.0, 0.0), 160, 120)
    frame = dataclasses.replace(planned, camera=camera, view="")
    out = write_path_picture([frame], scene, tmp_path / "plan.png")
    return np.asarray(Image.open(out).convert("RGB")).astype(int)


@pytest.mark.parametrize(
    ("eye", "toward_eye"),  # in the top panel x runs right and z runs down the page
    [((0, 0, 5), (0, 1)), ((0, 0, -5), (0, -1)), ((5, 0, 0), (1, 0)), ((-5, 0, 0), (-1, 0))],
)
def test_view_volume_opens_from_the_eye_toward_the_target(tmp_path, eye, toward_eye):
    image = one_camera_picture(tmp_path, eye)[HEADER : HEADER + PANEL, :PANEL]
    colour = np.array(PALETTE[0])
    tint = np.round(255 + VIEW_TINT * (colour - 255))
    ys, xs = np.nonzero(np.all(image == tint, axis=2))
    wedge = np.stack([xs, ys], axis=1).astype(float)
    assert len(wedge) > 20
    ys, xs = np.nonzero(np.all(image == colour, axis=2))
    solid = np.stack([xs, ys], axis=1).astype(float)
    # The only full-colour marks far from the eye's wedge are the cross on the target.
    far = np.linalg.norm(solid - wedge.mean(axis=0), axis=1) > 3 * VIEW_REACH
    target = solid[far].mean(axis=0)
    along = (wedge - target) @ np.array(toward_eye, float)
    across = (wedge - target) @ np.array(toward_eye[::-1], float)
    # The wedge sits on the line from the target to the eye, on the eye's side...
    assert abs(across.mean()) < 1.5
    assert along.min() > 4 * VIEW_REACH
    assert np.ptp(along) <= VIEW_REACH + 2
    # ...and opens toward the target: wider on its half nearer the target.
    near_target = along < np.median(along)
    assert np.ptp(across[near_target]) > np.ptp(across[~near_target])


def test_one_camera_picture_uses_our_first_colour(tmp_path):
    image = one_camera_picture(tmp_path, (3, 1, 4))
    assert np.all(image == PALETTE[0], axis=2).sum() > 50
    assert not np.all(image == BORROWED_FIRST, axis=2).any()
