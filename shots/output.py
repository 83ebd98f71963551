"""Image files: encode display RGBA and write it atomically (temporary name, then rename).

A run killed at any moment leaves either the previous file or the new one, never half of one.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
from PIL import Image

from shots.colour import quantize, to_display
from shots.errors import RenderError


def _read_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


CURRENT_UMASK = _read_umask()


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        raise RenderError(path.parent, None, f"cannot write here: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, 0o666 & ~CURRENT_UMASK)  # mkstemp makes 0600; give a normal file's mode
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def png_bytes(display: np.ndarray, bits: int = 8) -> bytes:
    """PNG bytes of (h, w, 4) straight-alpha display values in [0, 1] at 8 or 16 bits."""
    import io

    codes = quantize(display, bits)
    buffer = io.BytesIO()
    if bits == 8:
        Image.fromarray(codes, "RGBA").save(buffer, format="PNG", optimize=False)
    else:  # Pillow cannot write 16-bit RGBA; pypng can
        import png

        height, width = codes.shape[:2]
        writer = png.Writer(width, height, greyscale=False, alpha=True, bitdepth=16)
        writer.write(buffer, codes.reshape(height, width * 4))
    return buffer.getvalue()


def write_png(
    path: Path,
    premultiplied: np.ndarray,
    exposure: float = 0.0,
    tone_map: str = "neutral",
    bits: int = 8,
) -> Path:
    """Tone-map, encode and atomically write a premultiplied linear RGBA image as PNG."""
    display = to_display(premultiplied, exposure=exposure, tone_map=tone_map)
    atomic_write_bytes(Path(path), png_bytes(display, bits))
    return Path(path)
