"""A picture of planned cameras: a top and a side view of the eyes around the model's extent.

For checking a preset before a long render: where each frame's eye is, where it looks, how a
turntable circles the model. Drawn with Pillow, no rendering involved.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

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
PALETTE = [(31, 119, 180), (214, 39, 40), (44, 160, 44), (148, 103, 189), (255, 127, 14),
           (23, 190, 207), (140, 86, 75), (227, 119, 194)]
MAX_MODEL_DOTS = 4000

# Each panel maps world (x, y, z) to (right, up) on paper.
VIEWS = {
    "top (from +Y): x right, z down": lambda p: np.stack([p[:, 0], -p[:, 2]], axis=1),
    "side (from -X): z right, y up": lambda p: np.stack([p[:, 2], p[:, 1]], axis=1),
}


def write_path_picture(frames: list[Frame], scene: Scene, path: Path) -> Path:
    """Draw the frames' cameras over the model's extent and write a PNG to ``path``.

    Each shot has its own colour: a line joins an animated shot's eyes in frame order (named
    views are labelled instead), a tick at each eye points toward its target, frame 0 is ringed
    and a cross marks its target. The model shows as its bounding box, bounding circle and a
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


def _draw_shot(draw: ImageDraw.ImageDraw, frames: list[Frame], to_paper, colour) -> None:
    eyes = to_paper(np.array([f.camera.eye for f in frames]))
    targets = to_paper(np.array([f.camera.target for f in frames]))
    stills = any(frame.view for frame in frames)  # named views are separate, not a path
    if len(eyes) > 1 and not stills:
        draw.line([tuple(map(float, p)) for p in eyes], fill=colour, width=1)
    for frame, eye, target in zip(frames, eyes, targets, strict=True):
        toward = target - eye
        length = float(np.linalg.norm(toward))
        if length > 1e-9:
            tip = eye + toward / length * min(16.0, length)
            draw.line([tuple(map(float, eye)), tuple(map(float, tip))], fill=colour, width=2)
        draw.ellipse([*(eye - 3), *(eye + 3)], fill=colour)
        if frame.view:
            draw.text((float(eye[0]) + 6, float(eye[1]) + 2), frame.view, fill=colour)
    first = eyes[0]
    draw.ellipse([*(first - 7), *(first + 7)], outline=colour, width=2)
    x, y = (float(c) for c in targets[0])
    draw.line([(x - 5, y), (x + 5, y)], fill=colour)
    draw.line([(x, y - 5), (x, y + 5)], fill=colour)
