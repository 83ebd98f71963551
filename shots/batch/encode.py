"""Animations of a shot's frames: GIF, WebP and MP4 that loop without a jump.

The planner already spaces a turntable so its last frame is one step before the first, so
playing the frames on repeat is seamless. GIF and WebP loop forever (``loop=0``, the GIF
NETSCAPE2.0 extension and the WebP ANIM chunk); an MP4 loops when its player does. GIF has
1-bit transparency and MP4 none, so those two are flattened onto a background colour; WebP
keeps the alpha channel. Frames come from the PNG files already written, so an animation can be
rebuilt after a resumed run without rendering anything.
"""

from __future__ import annotations

import functools
import io
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
from PIL import Image

from shots.colour import linear_to_srgb, srgb_to_linear
from shots.tags import srgb_icc_profile

ANIMATION_FORMATS = ("gif", "webp", "mp4")
MP4_CRF = 18  # x264 constant quality; 18 is commonly called visually lossless (x264 docs)
# x264 speed preset: on the demo turntable 0.18 s of ffmpeg CPU for a 1 % larger file than
# "medium" (0.30 s), measured here; at constant quality the look stays the same
MP4_PRESET = "faster"
WEBP_METHOD = 0  # libwebp's lossless effort, 0 (fastest) to 6 (see ``webp_bytes``)
# RGB → Y'CbCr with the BT.709 matrix at limited ("tv") range, and the stream tagged so
# (ITU-R BT.709-6 items 1.3 primaries, 1.2 transfer, 3.2–3.3 matrix, 4.6 code range). Without
# the tags a player guesses (often BT.601 for small videos), and product colours shift.
MP4_COLOUR = ["-vf", "scale=out_color_matrix=bt709:out_range=tv,setparams=color_primaries=bt709"
              ":color_trc=bt709:colorspace=bt709:range=tv",
              "-colorspace", "bt709", "-color_primaries", "bt709", "-color_trc", "bt709",
              "-color_range", "tv"]


def read_rgba8(path: Path) -> np.ndarray:
    """(h, w, 4) uint8 straight-alpha display RGBA of an 8- or 16-bit RGBA PNG."""
    with open(path, "rb") as handle:
        head = handle.read(26)
    if head[24] == 8:  # IHDR bit depth (PNG spec §11.2.2): Pillow reads 8-bit RGBA exactly
        with Image.open(path) as image:
            return np.asarray(image.convert("RGBA"))
    import png

    width, height, rows, _ = png.Reader(filename=str(path)).asRGBA()
    codes = np.vstack([np.asarray(row, np.uint32) for row in rows]).reshape(height, width, 4)
    return ((codes * 255 + 32767) // 65535).astype(np.uint8)  # nearest 8-bit code


# sRGB code → linear light for every 8-bit code (IEC 61966-2-1), looked up instead of computed
DECODE = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)


def flatten(rgba: np.ndarray, background: tuple[float, float, float]) -> np.ndarray:
    """Composite straight-alpha display RGBA over an opaque display colour → (h, w, 3) uint8.

    The "over" operator (Porter & Duff 1984) is applied in linear light: colour and background
    are sRGB-decoded (IEC 61966-2-1), mixed by alpha, and encoded again. The result depends on
    a channel's code and the alpha code only, so it is looked up in a table made once per
    background with the same arithmetic.
    """
    table = _over_table(tuple(float(c) for c in background))
    alpha = rgba[..., 3].astype(np.intp)
    flat = np.empty(rgba.shape[:-1] + (3,), np.uint8)
    for channel in range(3):
        flat[..., channel] = table[channel].take((rgba[..., channel].astype(np.intp) << 8) | alpha)
    return flat


@functools.lru_cache(maxsize=8)
def _over_table(background: tuple[float, float, float]) -> np.ndarray:
    """(3, 65536) uint8: [channel, colour code × 256 + alpha code] → the flattened code."""
    alpha = (np.arange(256, dtype=np.uint8).astype(np.float32) / 255.0)[None, None, :]
    colour = DECODE[None, :, None]
    under = srgb_to_linear(np.asarray(background, np.float64)).astype(np.float32)[:, None, None]
    mixed = colour * alpha + under * (1.0 - alpha)
    table = np.rint(linear_to_srgb(mixed) * 255.0).astype(np.uint8).reshape(3, 256 * 256)
    table.flags.writeable = False
    return table


def encode_animations(kinds: tuple[str, ...], frames: list[np.ndarray], fps: float,
                      background) -> dict[str, bytes]:
    """Each of ``kinds`` ("gif", "webp", "mp4") of the (h, w, 4) uint8 frames, flattening the
    frames once for the formats without alpha.

    The encoders run side by side in threads (Pillow's encoders and quantizer release the GIL;
    ffmpeg is a process of its own), so a batch's last animation holds up the end of the run
    for its slowest format rather than for all of them.
    """
    unknown = [k for k in kinds if k not in ANIMATION_FORMATS]
    if unknown:
        raise ValueError(f"unknown animation format(s) {unknown} (known: {ANIMATION_FORMATS})")
    flat = [flatten(f, background) for f in frames] if {"gif", "mp4"} & set(kinds) else []
    encoders = {"gif": lambda: gif_bytes(flat, fps), "webp": lambda: webp_bytes(frames, fps),
                "mp4": lambda: mp4_bytes(flat, fps, background)}
    if len(kinds) == 1:
        return {kinds[0]: encoders[kinds[0]]()}
    with ThreadPoolExecutor(max_workers=len(kinds), thread_name_prefix="shots-encode") as pool:
        running = {kind: pool.submit(encoders[kind]) for kind in kinds}
        return {kind: future.result() for kind, future in running.items()}


def gif_bytes(flat: list[np.ndarray], fps: float) -> bytes:
    """An endlessly looping GIF of opaque (h, w, 3) uint8 frames (see ``flatten``).

    GIF delays are in hundredths of a second (GIF89a §23), so the frame time is rounded to
    one. Pillow merges a frame identical to the one before into it (longer delay, same look).
    """
    images = [Image.fromarray(f, "RGB") for f in flat]
    delay_ms = 10 * max(2, round(100.0 / fps))
    buffer = io.BytesIO()
    images[0].save(buffer, format="GIF", save_all=True, append_images=images[1:],
                   duration=delay_ms, loop=0, optimize=False, disposal=1)
    return buffer.getvalue()


def webp_bytes(frames: list[np.ndarray], fps: float) -> bytes:
    """An endlessly looping lossless animated WebP of (h, w, 4) uint8 frames, alpha kept, with
    an sRGB ICC profile.

    Lossless effort ``WEBP_METHOD`` 0, libwebp's fastest. Measured here on the demo turntable (24
    frames of 320 px): 0.22 s for 812 kB, against 0.93 s for 665 kB at method 1 and 9.8 s for
    623 kB at method 4 (quality 100); the MP4 is the compact copy, this one keeps exact alpha.
    """
    images = [Image.fromarray(f, "RGBA") for f in frames]
    buffer = io.BytesIO()
    images[0].save(buffer, format="WEBP", save_all=True, append_images=images[1:],
                   duration=round(1000.0 / fps), loop=0, lossless=True, quality=75,
                   method=WEBP_METHOD, icc_profile=srgb_icc_profile())
    return buffer.getvalue()


def mp4_bytes(flat: list[np.ndarray], fps: float, background) -> bytes:
    """An H.264 MP4 (yuv420p, for browsers) of opaque (h, w, 3) uint8 frames, converted with
    the BT.709 matrix and tagged BT.709 (``MP4_COLOUR``).

    4:2:0 chroma needs even sizes, so an odd width or height gets one more column or row of
    ``background``.
    """
    import imageio.v3 as iio

    even = [_even(f, background) for f in flat]
    return iio.imwrite(
        "<bytes>", np.stack(even), extension=".mp4", fps=fps, codec="libx264", quality=None,
        pixelformat="yuv420p", macro_block_size=1, ffmpeg_log_level="error",
        ffmpeg_params=["-crf", str(MP4_CRF), "-preset", MP4_PRESET, "-threads", "1",
                       "-movflags", "+faststart", *MP4_COLOUR],
    )


def _even(rgb: np.ndarray, background) -> np.ndarray:
    height, width = rgb.shape[:2]
    if height % 2 == 0 and width % 2 == 0:
        return rgb
    fill = np.rint(np.asarray(background, np.float64) * 255.0).astype(np.uint8)
    padded = np.empty((height + height % 2, width + width % 2, 3), np.uint8)
    padded[:] = fill
    padded[:height, :width] = rgb
    return padded
