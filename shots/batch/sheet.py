"""The catalog's contact sheet: the first frame of every shot, one row per model and variant."""

from __future__ import annotations

import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from shots.batch.encode import flatten, read_rgba8
from shots.tags import tag_png

THUMB = 160  # pixels, the longer side of a thumbnail
PAD = 8
CAPTION_LINES = 2
LINE_HEIGHT = 13
PAPER = (255, 255, 255)
INK = (40, 40, 40)
MAX_COLUMNS = 8  # a wrapped sheet is at most this many thumbnails wide
CELL = (0.92, 0.92, 0.92)  # display grey behind transparent renders, so white products show


@dataclass(frozen=True)
class SheetCell:
    """A thumbnail: the image file and two caption lines; ``picture``, when given, is the
    thumbnail already made from that file's pixels (``thumbnail``), so the file is not read."""

    image: Path
    title: str
    subtitle: str
    picture: Image.Image | None = None


def contact_sheet_bytes(rows: list[list[SheetCell]], background=CELL) -> bytes:
    """PNG bytes of a grid: one row per list in ``rows``, each cell a thumbnail with caption.

    ``background`` is the display colour transparent pixels are flattened onto. Rows of a
    single cell (a preset with one shot) are wrapped into a grid about 3:2 wide instead of a
    tall single column.
    """
    if max(len(row) for row in rows) == 1:
        cells = [row[0] for row in rows]
        width = min(MAX_COLUMNS, math.ceil(math.sqrt(1.5 * len(cells))))
        rows = [cells[i : i + width] for i in range(0, len(cells), width)]
    columns = max(len(row) for row in rows)
    cell_w = THUMB + 2 * PAD
    cell_h = THUMB + PAD + CAPTION_LINES * LINE_HEIGHT + PAD
    sheet = Image.new("RGB", (columns * cell_w, len(rows) * cell_h), PAPER)
    draw = ImageDraw.Draw(sheet)
    font = ImageFont.load_default()
    for r, row in enumerate(rows):
        for c, cell in enumerate(row):
            x, y = c * cell_w + PAD, r * cell_h + PAD
            thumb = cell.picture if cell.picture is not None else _read_thumbnail(cell.image,
                                                                                  background)
            if thumb is not None:  # an unreadable file leaves its cell blank, captioned
                sheet.paste(thumb, (x + (THUMB - thumb.width) // 2,
                                    y + (THUMB - thumb.height) // 2))
            for line, text in enumerate((cell.title, cell.subtitle)):
                draw.text((x, y + THUMB + 2 + line * LINE_HEIGHT), _fit(draw, font, text),
                          fill=INK, font=font)
    buffer = io.BytesIO()
    sheet.save(buffer, format="PNG", optimize=False)
    return tag_png(buffer.getvalue())


def _read_thumbnail(path: Path, background) -> Image.Image | None:
    """The thumbnail of an image file, or None when it is missing, truncated or damaged."""
    try:
        return thumbnail(read_rgba8(path), background)
    except Exception:  # Pillow and pypng raise many types for a damaged file
        return None


def thumbnail(rgba: np.ndarray, background) -> Image.Image:
    """The sheet's thumbnail of (h, w, 4) uint8 RGBA codes, flattened onto ``background``."""
    rgb = flatten(rgba, background)
    image = Image.fromarray(np.ascontiguousarray(rgb), "RGB")
    scale = min(1.0, THUMB / max(image.width, image.height))  # shrink, never enlarge
    size = (max(1, round(image.width * scale)), max(1, round(image.height * scale)))
    return image.resize(size, Image.Resampling.LANCZOS)


def _fit(draw: ImageDraw.ImageDraw, font, text: str) -> str:
    """``text`` shortened with an ellipsis to the thumbnail's width."""
    if draw.textlength(text, font=font) <= THUMB:
        return text
    while text and draw.textlength(text + "...", font=font) > THUMB:
        text = text[:-1]
    return text + "..."
