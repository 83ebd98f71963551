"""A picture of planned cameras: a top and a side view of the eyes around the model's extent.

For checking a preset before a long render: where each frame's eye is, where it looks, how a
turntable circles the model. Drawn with Pillow, no rendering involved.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from shots.camera import ORTHOGRAPHIC, Camera
from shots.output import atomic_write_bytes
from shots.planner import Extent, Frame
from shots.scene import Scene
from shots.tags import tag_png

PANEL = 560  # pixels per view panel (square)
HEADER = 28
LEGEND_LINE = 18
BACKGROUND = (255, 255, 255)
MODEL = (200, 200, 204)
MODEL_EDGE = (150, 150, 156)
INK = (60, 60, 64)
# One colour per shot: OKLCH lightness 0.58 and chroma 0.10 (Ottosson 2020, "A perceptual color
# space for image processing"), hue 85° + k · 137.508° (the golden angle, so each next hue falls
# in the widest gap left), converted to sRGB. Equal lightness keeps every shot equally legible:
# each has a contrast of at least 4:1 on white (WCAG 2.x contrast ratio). tests/test_pathplot.py
# derives them again.
PALETTE = [(149, 117, 42), (29, 135, 165), (170, 96, 120), (93, 136, 76), (105, 117, 181),
           (168, 104, 63), (1, 141, 135), (154, 100, 153)]
VIEW_TINT = 0.25  # a view volume is filled with its shot's colour at this strength over white
SIGHT_TINT = 0.5  # the first frame's full view volume is outlined at this strength
VIEW_REACH = 22.0  # pixels: the longest reach of a drawn view volume from its eye
MAX_MODEL_DOTS = 4000

# Each panel maps world (x, y, z) to (right, up) on paper.
VIEWS = {
    "top (from +Y): x right, z down": lambda p: np.stack([p[:, 0], -p[:, 2]], axis=1),
    "side (from -X): z right, y up": lambda p: np.stack([p[:, 2], p[:, 1]], axis=1),
}


def write_path_picture(frames: list[Frame], scene: Scene, path: Path) -> Path:
    """Draw the frames' cameras over the model's extent and write a PNG to ``path``.

    Each shot has its own colour: a line joins an animated shot's eyes in frame order (named
    views are labelled instead), a small view volume at each eye (the camera's frustum, or its
    box for an orthographic camera) opens toward what it sees, frame 0 is ringed and a cross
    marks its target. The model shows as its bounding box, bounding circle and a
    sample of its vertices.
    """
    extent = Extent.of(scene)
    shots = list(dict.fromkeys(frame.shot for frame in frames))
    legend_height = LEGEND_LINE * (len(shots) + 1)
    picture = Image.new("RGB", (PANEL * len(VIEWS), HEADER + PANEL + legend_height), BACKGROUND)
    draw = ImageDraw.Draw(picture)
    font = ImageFont.load_default()
    for column, (title, flatten) in enumerate(VIEWS.items()):
        left = column * PANEL
        draw.text((left + 10, 8), title, fill=INK, font=font)
        to_paper = _fit(frames, extent, flatten, left)
        _draw_model(draw, extent, to_paper)
        for colour, shot in zip(_colours(len(shots)), shots, strict=True):
            _draw_shot(draw, [f for f in frames if f.shot == shot], to_paper, colour)
    for row, (colour, shot) in enumerate(zip(_colours(len(shots)), shots, strict=True)):
        count = sum(frame.shot == shot for frame in frames)
        y = HEADER + PANEL + LEGEND_LINE // 2 + row * LEGEND_LINE
        draw.rectangle([10, y + 3, 22, y + 13], fill=colour)
        draw.text((30, y + 2), f"{shot}: {count} frame(s)", fill=INK, font=font)
    buffer = io.BytesIO()
    picture.save(buffer, format="PNG")
    atomic_write_bytes(Path(path), tag_png(buffer.getvalue()))
    return Path(path)


def _colours(count: int) -> list[tuple[int, int, int]]:
    return [PALETTE[k % len(PALETTE)] for k in range(count)]


def _fit(frames, extent: Extent, flatten, left: int):
    """A function mapping world points (n, 3) to paper pixels (n, 2) in this panel."""
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)], float)
    low, high = extent.points.min(axis=0), extent.points.max(axis=0)
    reach = [low + corners * (high - low), extent.centre + extent.radius * np.eye(3),
             extent.centre - extent.radius * np.eye(3)]
    reach += [np.array([f.camera.eye, f.camera.target]) for f in frames]
    flat = flatten(np.vstack(reach))
    lo, hi = flat.min(axis=0), flat.max(axis=0)
    span = max(float(np.max(hi - lo)), 1e-9)
    scale = 0.86 * PANEL / span
    middle = 0.5 * (lo + hi)

    def to_paper(points):
        xy = (flatten(np.atleast_2d(points)) - middle) * scale
        return np.stack([left + PANEL / 2 + xy[:, 0], HEADER + PANEL / 2 - xy[:, 1]], axis=1)

    return to_paper


def _draw_model(draw: ImageDraw.ImageDraw, extent: Extent, to_paper) -> None:
    """The bounding circle, the box's outline and a sprinkle of the model's vertices."""
    centre = to_paper(extent.centre)[0]
    # A sphere projects to a circle of its radius; some world axis lies in the paper's plane.
    radius = float(np.max(np.abs(to_paper(extent.centre + np.eye(3) * extent.radius) - centre)))
    draw.ellipse([*(centre - radius), *(centre + radius)], outline=MODEL_EDGE)
    low, high = extent.points.min(axis=0), extent.points.max(axis=0)
    box = to_paper(np.array([low, high]))
    draw.rectangle([*box.min(axis=0), *box.max(axis=0)], outline=MODEL_EDGE)
    step = max(1, len(extent.points) // MAX_MODEL_DOTS)
    for x, y in to_paper(extent.points[::step]):
        draw.point((float(x), float(y)), fill=MODEL)


def view_volume(camera: Camera, depth: float = 1.0) -> np.ndarray:
    """(8, 3) float64 world corners of a camera's view volume, ``depth`` deep along the view.

    Rows 0-3 are the near corners, rows 4-7 the far ones, in the same order around. A perspective
    camera's near corners are all its eye (a pyramid opening by its fields of view); an
    orthographic one's are the eye's plane at its half-width and half-height (a box).
    """
    right, up, back = camera.basis()
    signs = np.array([[-1, -1], [1, -1], [1, 1], [-1, 1]], float)
    if camera.kind == ORTHOGRAPHIC:
        half = np.array([camera.ymag * camera.aspect, camera.ymag])
        near = (signs * half) @ np.stack([right, up])
        far = near - depth * back
    else:
        slopes = np.array([np.tan(camera.xfov / 2), np.tan(camera.yfov / 2)])
        near = np.zeros((4, 3))
        far = depth * ((signs * slopes) @ np.stack([right, up]) - back)
    return np.asarray(camera.eye, np.float64) + np.vstack([near, far])


# The six faces and twelve edges of a view volume, as indices into ``view_volume`` corners.
VOLUME_FACES = ((0, 1, 2, 3), (4, 5, 6, 7), (0, 1, 5, 4), (1, 2, 6, 5), (2, 3, 7, 6), (3, 0, 4, 7))
VOLUME_EDGES = tuple((k, (k + 1) % 4) for k in range(4)) + tuple(
    (k + 4, (k + 1) % 4 + 4) for k in range(4)) + tuple((k, k + 4) for k in range(4))


def _tint(colour, strength: float) -> tuple[int, int, int]:
    """``colour`` laid over white at ``strength`` (0: white, 1: the colour itself)."""
    return tuple(round(255 + strength * (c - 255)) for c in colour)


def _small_volume(camera: Camera, to_paper) -> np.ndarray:
    """The view volume's corners on paper, scaled about the eye to reach ``VIEW_REACH`` pixels."""
    eye = to_paper(np.asarray(camera.eye, np.float64))[0]
    depth = 1.0
    if camera.kind == ORTHOGRAPHIC:  # a box longer than it is wide, so that it points
        depth = 5.0 * camera.ymag * max(camera.aspect, 1.0)
    corners = to_paper(view_volume(camera, depth)) - eye
    reach = float(np.max(np.linalg.norm(corners, axis=1)))
    return eye + corners * (VIEW_REACH / max(reach, 1e-9))


def _outline(draw: ImageDraw.ImageDraw, corners: np.ndarray, colour) -> None:
    for a, b in VOLUME_EDGES:
        draw.line([tuple(map(float, corners[a])), tuple(map(float, corners[b]))], fill=colour)


def _draw_view_volumes(draw: ImageDraw.ImageDraw, frames: list[Frame], to_paper, colour) -> None:
    """A small tinted view volume at every eye, and the first frame's reaching to its target.

    The small ones say at a glance which way each camera looks; the full one shows what the
    first frame takes in. Faces go first, then every outline on top of them.
    """
    first = frames[0].camera
    distance = float(np.linalg.norm(np.subtract(first.target, first.eye)))
    _outline(draw, to_paper(view_volume(first, distance)), _tint(colour, SIGHT_TINT))
    volumes = [_small_volume(frame.camera, to_paper) for frame in frames]
    for corners in volumes:
        for face in VOLUME_FACES:
            draw.polygon([tuple(map(float, corners[k])) for k in face], fill=_tint(colour, VIEW_TINT))
    for corners in volumes:
        _outline(draw, corners, colour)


def _draw_shot(draw: ImageDraw.ImageDraw, frames: list[Frame], to_paper, colour) -> None:
    eyes = to_paper(np.array([f.camera.eye for f in frames]))
    targets = to_paper(np.array([f.camera.target for f in frames]))
    stills = any(frame.view for frame in frames)  # named views are separate, not a path
    _draw_view_volumes(draw, frames, to_paper, colour)
    if len(eyes) > 1 and not stills:
        draw.line([tuple(map(float, p)) for p in eyes], fill=colour, width=1)
    for frame, eye in zip(frames, eyes, strict=True):
        draw.ellipse([*(eye - 3), *(eye + 3)], fill=colour)
        if frame.view:
            _label(draw, eye, frame.view, colour)
    first = eyes[0]
    draw.ellipse([*(first - 7), *(first + 7)], outline=colour, width=2)
    x, y = (float(c) for c in targets[0])
    draw.line([(x - 5, y), (x + 5, y)], fill=colour)
    draw.line([(x, y - 5), (x, y + 5)], fill=colour)


def _label(draw: ImageDraw.ImageDraw, eye: np.ndarray, text: str, colour) -> None:
    """``text`` to the right of the eye, or to its left where it would leave its panel."""
    x, y = float(eye[0]) + 6, float(eye[1]) + 2
    width = draw.textlength(text)
    if (x - 6) % PANEL + 6 + width > PANEL - 4:
        x -= 12 + width
    draw.text((x, y), text, fill=colour)
