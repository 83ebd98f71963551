"""Images and samplers into the flat texture atlas (Spec §Textures, §Images, §Samplers).

Images are sniffed by magic number (PNG: ISO/IEC 15948 §5.2; JPEG: FF D8 FF), decoded with Pillow
to RGBA, colour textures sRGB-decoded (IEC 61966-2-1) before anything filters them, and stored with
texel row 0 = the image's top row, so uv (0, 0) is the top-left corner (Spec §Images).
"""

from __future__ import annotations

import io
import warnings

import numpy as np
from PIL import Image

from shots.gltf import checks
from shots.gltf.container import Document
from shots.scene import (
    FILTER_LINEAR,
    FILTER_NEAREST,
    N_TEX_INFO,
    TI_HEIGHT,
    TI_MAG_FILTER,
    TI_OFFSET,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_CLAMP,
    WRAP_MIRROR,
    WRAP_REPEAT,
    Textures,
)

WRAPS = (WRAP_REPEAT, WRAP_CLAMP, WRAP_MIRROR)
MIN_FILTERS = (FILTER_NEAREST, FILTER_LINEAR, 9984, 9985, 9986, 9987)
FORMATS = {b"\x89PNG\r\n\x1a\n": "PNG", b"\xff\xd8\xff": "JPEG"}


def srgb_to_linear(c: np.ndarray) -> np.ndarray:
    """IEC 61966-2-1 decoding: c <= 0.04045 -> c / 12.92, else ((c + 0.055) / 1.055) ** 2.4."""
    c = np.asarray(c, np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


_SRGB_LUT = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
_LINEAR_LUT = (np.arange(256) / 255.0).astype(np.float32)


class TextureAtlas:
    """Decodes the textures materials use, once per (texture, colour space)."""

    def __init__(self, doc: Document, max_pixels: int, max_bytes: int = 1 << 62):
        self.doc = doc
        self.max_pixels = max_pixels
        self.max_bytes = max_bytes  # decoded RGBA8 bytes over every atlas row
        self.pixels = 0
        self._rows: dict[tuple[int, bool], int] = {}
        self._pending: list[tuple[int, bool]] = []  # (image, sRGB) per atlas row, decoded last
        self._texel_count = 0
        self._info: list[list[int]] = []
        self._names: list[str] = []
        self._images: dict[int, Image.Image] = {}

    def entry(self, texture: int, srgb: bool, json_path: str) -> int:
        """Atlas row of glTF ``textures[texture]`` decoded as sRGB or linear; -1 if unusable."""
        checks.index(texture, self.doc.gltf.textures, self.doc.source, json_path, "textures")
        key = (texture, srgb)
        if key not in self._rows:
            self._rows[key] = self._add(texture, srgb)
        return self._rows[key]

    def result(self) -> Textures:
        """Decode every referenced image straight into one preallocated atlas."""
        if not self._info:
            return Textures()
        texels = np.empty((self._texel_count, 4), np.float32)
        for (image_index, srgb), row in zip(self._pending, self._info, strict=True):
            start = row[TI_OFFSET]
            self._decode(image_index, srgb, texels[start : start + row[TI_WIDTH] * row[TI_HEIGHT]])
        self._images.clear()  # release Pillow's decoded copies
        return Textures(
            texels=texels,
            info=np.array(self._info, np.int32).reshape(-1, N_TEX_INFO),
            names=tuple(self._names),
        )

    def _add(self, t: int, srgb: bool) -> int:
        doc, src, where = self.doc, self.doc.source, f"textures[{t}]"
        tex = doc.gltf.textures[t]
        source = tex.source
        if source is None:
            ext = checks.mapping(tex.extensions, src, where + ".extensions")
            webp = checks.mapping(ext.get("EXT_texture_webp"), src, where + ".extensions")
            source = webp.get("source")
            if source is None:
                doc.warn(f"{where}: no image in a supported format; texture ignored")
                return -1
        image_index = checks.index(source, doc.gltf.images, src, where + ".source", "images")
        width, height = self._open(image_index).size
        self._check_budget(width, height, where)
        row = [0] * N_TEX_INFO
        row[TI_OFFSET] = self._texel_count
        row[TI_WIDTH], row[TI_HEIGHT] = width, height
        row[TI_WRAP_S], row[TI_WRAP_T], row[TI_MAG_FILTER] = self._sampler(tex.sampler, where)
        self._texel_count += width * height
        self._pending.append((image_index, srgb))
        self._info.append(row)
        image = doc.gltf.images[image_index]
        uri = image.uri if isinstance(image.uri, str) else ""
        uri = "" if uri.startswith("data:") else uri
        self._names.append(str(image.name or uri or f"images[{image_index}]"))
        return len(self._info) - 1

    def _check_budget(self, width: int, height: int, where: str) -> None:
        """Refuse a texture use before decoding when the decoded texels would pass the budget.

        Counted per atlas row (one image used as six textures is decoded six times), from the
        size in the image header, at 4 bytes a texel (RGBA8).
        """
        wanted = 4 * (self._texel_count + width * height)
        if wanted > self.max_bytes:
            raise self.doc.error(where, f"decoded textures would take {wanted >> 20} MiB, over "
                                        f"the limit texture_mb {self.max_bytes >> 20}")

    def _sampler(self, index, where: str) -> tuple[int, int, int]:
        """(wrapS, wrapT, magFilter); REPEAT and LINEAR without a sampler (Spec §Samplers)."""
        if index is None:
            return WRAP_REPEAT, WRAP_REPEAT, FILTER_LINEAR
        src = self.doc.source
        s = checks.index(index, self.doc.gltf.samplers, src, where + ".sampler", "samplers")
        sampler, here = self.doc.gltf.samplers[s], f"samplers[{s}]"
        values = []
        for name, allowed, default in (("wrapS", WRAPS, WRAP_REPEAT),
                                       ("wrapT", WRAPS, WRAP_REPEAT),
                                       ("magFilter", (FILTER_NEAREST, FILTER_LINEAR),
                                        FILTER_LINEAR),
                                       ("minFilter", MIN_FILTERS, FILTER_LINEAR)):
            value = getattr(sampler, name)
            if value is None:
                value = default
            if value not in allowed:
                raise self.doc.error(f"{here}.{name}", f"{value!r:.20} is not a valid value")
            values.append(value)
        return values[0], values[1], values[2]

    def _decode(self, i: int, srgb: bool, out: np.ndarray) -> None:
        """Write the (w*h, 4) float32 texels of ``images[i]`` into ``out``, rows from the top."""
        image = self._open(i)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                if image.mode in ("I;16", "I;16B", "I;16L", "I"):
                    grey = np.asarray(image, np.float32).reshape(-1) / 65535.0
                    out[:, :3] = (srgb_to_linear(grey) if srgb else grey)[:, None]
                    out[:, 3] = 1.0
                    return
                codes = np.asarray(image.convert("RGBA"), np.uint8).reshape(-1)
        except Exception as exc:  # Pillow raises many types for corrupt data
            raise self.doc.error(f"images[{i}]", f"cannot decode image: {str(exc)[:200]}") from None
        # one flat table lookup (fast), then alpha, which is always linear (Spec §Materials)
        np.take(_SRGB_LUT if srgb else _LINEAR_LUT, codes, out=out.reshape(-1))
        if srgb:
            np.take(_LINEAR_LUT, codes[3::4], out=out[:, 3])

    def _open(self, i: int) -> Image.Image:
        if i in self._images:
            return self._images[i]
        doc, src, where = self.doc, self.doc.source, f"images[{i}]"
        image = doc.gltf.images[i]
        if image.uri is not None:
            data = doc.read_uri(checks.text(image.uri, src, where + ".uri"), where + ".uri")
        elif image.bufferView is not None:
            data = bytes(doc.buffer_view(image.bufferView, where + ".bufferView")[0])
        else:
            raise doc.error(where, "has neither uri nor bufferView")
        kind = next((name for magic, name in FORMATS.items() if data.startswith(magic)), None)
        if kind is None and data[:4] == b"RIFF" and data[8:12] == b"WEBP":
            kind = "WEBP"  # EXT_texture_webp
        if kind is None:
            raise doc.error(where, "image is neither PNG nor JPEG (unknown magic number)")
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                opened = Image.open(io.BytesIO(data), formats=[kind])
                width, height = opened.size
        except Exception as exc:
            raise doc.error(where, f"cannot read {kind} image: {str(exc)[:200]}") from None
        if width < 1 or height < 1:
            raise doc.error(where, f"image has size {width}x{height}")
        self.pixels += width * height
        if self.pixels > self.max_pixels:
            raise doc.error(where, f"textures exceed the limit of {self.max_pixels} pixels "
                                   f"(this image is {width}x{height})")
        self._images[i] = opened
        return opened
