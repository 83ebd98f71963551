"""Images and samplers into the flat texture atlas (Spec §Textures, §Images, §Samplers).

Images are sniffed by magic number (PNG: ISO/IEC 15948 §5.2; JPEG: FF D8 FF), decoded with
Pillow (pypng for 16-bit PNGs, which Pillow reduces to 8 bits) and stored as they are coded:
8-bit (or 16-bit) channel values, 1 to 4 channels, texel row 0 = the image's top row, so uv
(0, 0) is the top-left corner (Spec §Images).
The kernels decode on lookup (colour textures through the sRGB curve, IEC 61966-2-1). Each
(image, colour space) is stored once with its mip pyramid (``shots.mipmap``, filtered in linear
light), however many textures and material slots use it.

Before anything is decoded, the bytes it will take (all mip levels) are added up from the image
headers and checked against a budget, so a small file cannot make the loader allocate gigabytes.
"""

from __future__ import annotations

import io
import warnings

import numpy as np
import png
from PIL import Image

from shots import mipmap
from shots.gltf import checks
from shots.gltf.container import Document
from shots.limits import DEFAULT
from shots.scene import (
    FILTER_LINEAR,
    FILTER_NEAREST,
    LINEAR_MIPMAP_LINEAR,
    LINEAR_MIPMAP_NEAREST,
    N_TEX_INFO,
    NEAREST_MIPMAP_LINEAR,
    NEAREST_MIPMAP_NEAREST,
    TI_BYTES,
    TI_CHANNELS,
    TI_HEIGHT,
    TI_LEVEL,
    TI_LEVELS,
    TI_MAG_FILTER,
    TI_MIN_FILTER,
    TI_OFFSET,
    TI_SRGB,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_CLAMP,
    WRAP_MIRROR,
    WRAP_REPEAT,
    Textures,
)

WRAPS = (WRAP_REPEAT, WRAP_CLAMP, WRAP_MIRROR)
MIN_FILTERS = (FILTER_NEAREST, FILTER_LINEAR, NEAREST_MIPMAP_NEAREST, LINEAR_MIPMAP_NEAREST,
               NEAREST_MIPMAP_LINEAR, LINEAR_MIPMAP_LINEAR)  # fmt: skip
FORMATS = {b"\x89PNG\r\n\x1a\n": "PNG", b"\xff\xd8\xff": "JPEG"}
PILLOW_MODES = {1: "L", 2: "LA", 3: "RGB", 4: "RGBA"}  # what each channel count is decoded to
STRIP_ROWS = 256  # rows copied at a time from Pillow's decoded image


class TextureAtlas:
    """Decodes the textures materials use, once per (image, colour space)."""

    def __init__(self, doc: Document, max_pixels: int, max_bytes: int = DEFAULT.texture_bytes):
        self.doc = doc
        self.max_pixels = max_pixels
        self.max_bytes = min(max_bytes, 2**31 - 1)  # byte offsets are int32
        self.pixels = 0
        self._rows: dict[tuple[int, bool], int] = {}
        self._stores: dict[tuple[int, bool], int] = {}  # (image, sRGB) -> byte offset
        self._bytes = 0
        self._info: list[list[int]] = []
        self._names: list[str] = []
        self._images: dict[int, tuple[Image.Image, bytes]] = {}

    def entry(self, texture: int, srgb: bool, json_path: str) -> int:
        """Atlas row of glTF ``textures[texture]`` decoded as sRGB or linear; -1 if unusable."""
        checks.index(texture, self.doc.gltf.textures, self.doc.source, json_path, "textures")
        key = (texture, srgb)
        if key not in self._rows:
            self._rows[key] = self._add(texture, srgb)
        return self._rows[key]

    def result(self) -> Textures:
        """Decode every referenced image straight into one preallocated byte atlas."""
        if not self._info:
            return Textures()
        texels = np.empty(self._bytes, np.uint8)
        for image_index in sorted({i for i, _ in self._stores}):
            image, data = self._images.pop(image_index)
            channels, depth = self._format(image_index, image, data)
            width, height = image.size
            size = mipmap.pyramid_bytes(width, height, channels, depth)
            top = width * height * channels
            first = None
            for srgb in (False, True):
                if (image_index, srgb) not in self._stores:
                    continue
                start = self._stores[image_index, srgb]
                region = texels[start : start + size].view(np.uint16 if depth == 2 else np.uint8)
                if first is None:
                    self._decode_into(image_index, image, data, region[:top], channels, depth)
                    image = data = None  # release the decoder's copy before filtering
                else:
                    region[:top] = first[:top]  # the same codes in the other colour space
                first = region
                mipmap.write_levels(region, width, height, channels, srgb)
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
        image, data = self._open(image_index)
        width, height = image.size
        channels, depth = self._format(image_index, image, data)
        offset = self._store(image_index, srgb, width, height, channels, depth, where)
        sampler = self._sampler(tex.sampler, where)
        row = info_row(width, height, channels, depth, srgb, sampler, offset)
        self._info.append(row)
        image = doc.gltf.images[image_index]
        uri = image.uri if isinstance(image.uri, str) else ""
        uri = "" if uri.startswith("data:") else uri
        self._names.append(str(image.name or uri or f"images[{image_index}]"))
        return len(self._info) - 1

    def _store(self, i: int, srgb: bool, width: int, height: int, channels: int, depth: int,
               where: str) -> int:  # fmt: skip
        """Byte offset reserved for images[i]'s pyramid in one colour space.

        The budget (``shots.limits``, texture_mb) counts what is stored: every level, each
        (image, colour space) once, from the sizes in the image headers, before any decoding.
        """
        key = (i, srgb)
        if key not in self._stores:
            size = mipmap.pyramid_bytes(width, height, channels, depth)
            if self._bytes + size > self.max_bytes:
                raise self.doc.error(
                    where,
                    f"decoded textures would take {(self._bytes + size) >> 20} MiB with mip "
                    f"levels (images[{i}] is {width}x{height}, {channels} channels, "
                    f"{8 * depth}-bit), over the limit texture_mb {self.max_bytes >> 20}",
                )
            self._stores[key] = self._bytes
            self._bytes += -(-size // 4) * 4  # keep every pyramid 4-byte aligned (16-bit views)
        return self._stores[key]

    def _sampler(self, index, where: str) -> tuple[int, int, int, int]:
        """(wrapS, wrapT, magFilter, minFilter). Undefined values: REPEAT, and the "auto
        filtering" the spec leaves to the renderer (Spec §Samplers): LINEAR magnification and
        trilinear (LINEAR_MIPMAP_LINEAR) minification."""
        if index is None:
            return WRAP_REPEAT, WRAP_REPEAT, FILTER_LINEAR, LINEAR_MIPMAP_LINEAR
        src = self.doc.source
        s = checks.index(index, self.doc.gltf.samplers, src, where + ".sampler", "samplers")
        sampler, here = self.doc.gltf.samplers[s], f"samplers[{s}]"
        values = []
        for name, allowed, default in (("wrapS", WRAPS, WRAP_REPEAT),
                                       ("wrapT", WRAPS, WRAP_REPEAT),
                                       ("magFilter", (FILTER_NEAREST, FILTER_LINEAR),
                                        FILTER_LINEAR),
                                       ("minFilter", MIN_FILTERS, LINEAR_MIPMAP_LINEAR)):
            value = getattr(sampler, name)
            if value is None:
                value = default
            if value not in allowed:
                raise self.doc.error(f"{here}.{name}", f"{value!r:.20} is not a valid value")
            values.append(value)
        return values[0], values[1], values[2], values[3]

    def _format(self, i: int, image: Image.Image, data: bytes) -> tuple[int, int]:
        """(channels, bytes per value) images[i] is stored with, from its header alone."""
        if is_png16(data):
            try:
                reader = png.Reader(bytes=data)
                reader.preamble()
            except Exception as exc:  # pypng raises several types for corrupt headers
                message = f"cannot read PNG header: {str(exc)[:200]}"
                raise self.doc.error(f"images[{i}]", message) from None
            return reader.planes + (1 if reader.trns else 0), 2
        mode = image.mode
        if mode in ("1", "L", "I", "I;16", "I;16B", "I;16L", "F"):
            return 1, 1
        if mode in ("LA", "La"):
            return 2, 1
        if mode in ("RGBA", "RGBa", "PA") or (mode == "P" and "transparency" in image.info):
            return 4, 1
        return 3, 1

    def _decode_into(self, i: int, image: Image.Image, data: bytes, out: np.ndarray,
                     channels: int, depth: int) -> None:  # fmt: skip
        """Write the codes of ``images[i]`` (rows from the top) into the flat ``out``.

        Pillow's decoded image is copied over in strips of rows, so no second full-size copy
        exists at any time.
        """
        width, height = image.size
        row = width * channels
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                if depth == 2:
                    _, _, rows, _ = png.Reader(bytes=data).asDirect()
                    for y, values in enumerate(rows):
                        out[y * row : (y + 1) * row] = values
                    return
                mode = PILLOW_MODES[channels]
                image = image if image.mode == mode else image.convert(mode)
                for y in range(0, height, STRIP_ROWS):
                    y1 = min(y + STRIP_ROWS, height)
                    strip = image.crop((0, y, width, y1)).tobytes()
                    out[y * row : y1 * row] = np.frombuffer(strip, np.uint8)
        except Exception as exc:  # Pillow and pypng raise many types for corrupt data
            raise self.doc.error(f"images[{i}]", f"cannot decode image: {str(exc)[:200]}") from None

    def _open(self, i: int) -> tuple[Image.Image, bytes]:
        """The image opened lazily (header read, nothing decoded) and its file bytes."""
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
        self._images[i] = opened, data
        return opened, data


def info_row(width: int, height: int, channels: int, depth: int, srgb: bool,
             sampler: tuple[int, int, int, int], offset: int) -> list[int]:
    """One ``tex_info`` row (``TI_*``) for a pyramid stored at byte ``offset``.

    ``sampler`` is (wrapS, wrapT, magFilter, minFilter).
    """
    row = [0] * N_TEX_INFO
    row[TI_WIDTH], row[TI_HEIGHT] = width, height
    row[TI_WRAP_S], row[TI_WRAP_T], row[TI_MAG_FILTER], row[TI_MIN_FILTER] = sampler
    row[TI_CHANNELS], row[TI_BYTES], row[TI_SRGB] = channels, depth, int(srgb)
    sizes = mipmap.level_sizes(width, height)
    row[TI_LEVELS] = len(sizes)
    for level, (w, h) in enumerate(sizes):
        row[TI_LEVEL + level] = offset
        offset += w * h * channels * depth
    row[TI_OFFSET] = row[TI_LEVEL]
    return row


def write_pyramid(texels: np.ndarray, offset: int, codes: np.ndarray, srgb: bool) -> None:
    """Write (h, w, c) uint8/uint16 ``codes`` and their mip levels into ``texels`` at ``offset``."""
    height, width, channels = codes.shape
    size = mipmap.pyramid_bytes(width, height, channels, codes.itemsize)
    region = texels[offset : offset + size].view(codes.dtype)
    region[: codes.size] = codes.reshape(-1)
    mipmap.write_levels(region, width, height, channels, srgb)


def textures_from_codes(images: list[tuple[np.ndarray, bool, tuple[int, int, int, int]]]) -> Textures:
    """An atlas of one texture per (codes (h, w, c) uint8/uint16, sRGB, sampler) entry.

    For scenes built in code (tests, tools); the loader reaches the same layout through
    ``TextureAtlas``.
    """
    rows, offset = [], 0
    for codes, srgb, sampler in images:
        h, w, c = codes.shape
        rows.append(info_row(w, h, c, codes.itemsize, srgb, sampler, offset))
        offset += -(-mipmap.pyramid_bytes(w, h, c, codes.itemsize) // 4) * 4
    texels = np.zeros(offset, np.uint8)
    for (codes, srgb, _), row in zip(images, rows, strict=True):
        write_pyramid(texels, row[TI_OFFSET], codes, srgb)
    return Textures(texels=texels, info=np.array(rows, np.int32).reshape(-1, N_TEX_INFO),
                    names=tuple(f"t{i}" for i in range(len(images))))


def is_png16(data: bytes) -> bool:
    """Whether PNG bytes declare 16 bits per channel (IHDR bit depth, PNG spec §11.2.2)."""
    return data.startswith(b"\x89PNG\r\n\x1a\n") and len(data) > 24 and data[24] == 16
