"""Reading a model's bytes: GLB or JSON container, buffers, bufferViews and URIs.

Security policy (ours; the glTF 2.0 spec, §URIs, leaves it to the loader): data comes only from
the file itself, its GLB binary chunk, base64 ``data:`` URIs, or regular files whose real path lies
inside the model's folder. Network and ``file:`` URIs, absolute paths and anything escaping the
folder (``..``, symlinks) are refused before a byte is read.
"""

from __future__ import annotations

import base64
import binascii
import dataclasses
import json
import os
import struct
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import unquote, unquote_to_bytes, urlsplit

import pygltflib

from shots.errors import GltfError
from shots.gltf import checks
from shots.gltf.notes import IGNORED, WARNING, Note
from shots.limits import DEFAULT, Limits

GLB_MAGIC = 0x46546C67  # "glTF", Spec §GLB File Format
CHUNK_JSON = 0x4E4F534A
CHUNK_BIN = 0x004E4942
BUFFER_MEDIA_TYPES = ("application/octet-stream", "application/gltf-buffer", "")


@dataclass
class Document:
    """A parsed glTF document with everything needed to reach its binary data.

    ``gltf`` is the pygltflib model; ``bin_chunk`` the GLB binary chunk (or None); ``folder``
    the only directory external files may come from. Warnings collect here for the Scene.
    """

    source: str
    folder: Path
    gltf: pygltflib.GLTF2
    bin_chunk: memoryview | None = None
    warnings: list[Note] = field(default_factory=list)  # warnings and ignored features
    max_file_bytes: int = DEFAULT.file_bytes  # the model file and each file it references
    variant_names: list[str] = field(default_factory=list)  # KHR_materials_variants
    _buffers: dict[int, memoryview] = field(default_factory=dict)
    _views: dict[int, tuple[memoryview, int]] = field(default_factory=dict)

    def error(self, json_path: str | None, message: str) -> GltfError:
        return GltfError(self.source, json_path, message)

    def warn(self, message: str) -> None:
        self.warnings.append(Note(message, WARNING))

    def ignore(self, message: str) -> None:
        """Note something the file asks for that the renderer does not use."""
        self.warnings.append(Note(message, IGNORED))

    def buffer(self, i: int) -> memoryview:
        """The bytes of ``buffers[i]``, exactly ``byteLength`` long."""
        if i not in self._buffers:
            self._buffers[i] = self._load_buffer(i)
        return self._buffers[i]

    def buffer_view(self, i: int, json_path: str) -> tuple[memoryview, int]:
        """``(bytes, byteStride or 0)`` of ``bufferViews[i]``, bounds-checked against its buffer."""
        checks.index(i, self.gltf.bufferViews, self.source, json_path, "bufferViews")
        if i not in self._views:
            self._views[i] = self._load_view(i)
        return self._views[i]

    def _load_buffer(self, i: int) -> memoryview:
        src, where = self.source, f"buffers[{i}]"
        buf = self.gltf.buffers[i]
        length = checks.integer(buf.byteLength, src, where + ".byteLength", low=1)
        if buf.uri is None:
            if i != 0 or self.bin_chunk is None:
                raise self.error(where + ".uri", "missing, and there is no GLB binary chunk")
            data = self.bin_chunk
            # Spec §GLB: the BIN chunk may be up to 3 bytes longer than byteLength (padding).
        else:
            uri = checks.text(buf.uri, src, where + ".uri")
            data = memoryview(self.read_uri(uri, where + ".uri", length, BUFFER_MEDIA_TYPES))
        if len(data) < length:
            raise self.error(
                where + ".byteLength", f"declares {length} bytes but only {len(data)} exist"
            )
        return data[:length]

    def _load_view(self, i: int) -> tuple[memoryview, int]:
        src, where = self.source, f"bufferViews[{i}]"
        view = self.gltf.bufferViews[i]
        b = checks.index(view.buffer, self.gltf.buffers, src, where + ".buffer", "buffers")
        offset = checks.integer(view.byteOffset, src, where + ".byteOffset", default=0)
        length = checks.integer(view.byteLength, src, where + ".byteLength", low=1)
        stride = 0
        if view.byteStride is not None:
            stride = checks.integer(view.byteStride, src, where + ".byteStride", low=4, high=252)
            if stride % 4:
                raise self.error(where + ".byteStride", f"{stride} is not a multiple of 4")
        data = self.buffer(b)
        if offset + length > len(data):
            raise self.error(
                where + ".byteLength",
                f"bytes {offset}..{offset + length} exceed buffers[{b}] ({len(data)} bytes)",
            )
        return data[offset : offset + length], stride

    def read_uri(self, uri: str, json_path: str, min_size: int | None = None,
                 media_types: tuple[str, ...] | None = None) -> bytes:
        """Bytes behind a URI: a ``data:`` URI or a file inside the model's folder."""
        if uri.startswith("data:"):
            return self._decode_data_uri(uri, json_path, media_types)
        parts = urlsplit(uri)
        if parts.scheme or parts.netloc:
            raise self.error(json_path, f"refusing non-local URI {uri!r:.80} (only relative "
                                        "paths and data: URIs are read)")
        relative = unquote(uri)  # Spec §URIs: relative paths are percent-encoded
        if "\x00" in relative:  # checked once decoded: %00 is a NUL too
            raise self.error(json_path, "URI contains a NUL character")
        if relative.startswith(("/", "\\")) or os.path.isabs(relative):
            raise self.error(json_path, f"refusing absolute path {relative!r:.80}")
        folder = os.path.realpath(self.folder)
        target = os.path.realpath(os.path.join(folder, relative))
        if os.path.commonpath([folder, target]) != folder:
            raise self.error(json_path, f"refusing {relative!r:.80}: it leaves the model's folder")
        if not os.path.isfile(target):
            raise self.error(json_path, f"file {relative!r:.80} not found next to the model")
        size = os.path.getsize(target)
        if size > self.max_file_bytes:
            raise self.error(json_path, f"file {relative!r:.80} is too large ({size} bytes; "
                                        f"limit file_mb {self.max_file_bytes >> 20})")
        try:
            with open(target, "rb") as f:
                return f.read() if min_size is None else f.read(min_size)
        except OSError as exc:
            raise self.error(json_path, f"cannot read {relative!r:.80}: {exc}") from None

    def _decode_data_uri(self, uri: str, json_path: str,
                         media_types: tuple[str, ...] | None) -> bytes:
        header, comma, payload = uri[5:].partition(",")
        if not comma:
            raise self.error(json_path, "malformed data: URI (no comma)")
        params = header.split(";")
        media = params[0].strip().lower()
        if media_types is not None and media not in media_types:
            raise self.error(json_path, f"data: URI media type {media!r:.60} is not a buffer type")
        try:
            if "base64" in (p.strip().lower() for p in params[1:]):
                return base64.b64decode(payload, validate=True)
            return unquote_to_bytes(payload)
        except (binascii.Error, ValueError) as exc:
            raise self.error(json_path, f"bad base64 in data: URI ({exc})") from None


def read_document(path: str | os.PathLike, limits: Limits = DEFAULT) -> Document:
    """Open a .gltf or .glb file (GLB detected by its magic number, glTF 2.0 spec §GLB File Format).

    Raises
    ------
    GltfError for an unreadable file, a malformed container, JSON that is not a glTF document,
    or a file over the ``file_mb`` or ``json_values`` budgets (checked before reading or parsing).
    """
    path = Path(path)
    source = str(path)
    try:
        size = path.stat().st_size
        if size > limits.file_bytes:
            raise GltfError(source, None, f"the file has {size} bytes, over the limit file_mb "
                                          f"{limits.file_mb}")
        data = path.read_bytes()
    except (OSError, ValueError) as exc:  # ValueError: a NUL in the path
        reason = getattr(exc, "strerror", None) or exc
        raise GltfError(source, None, f"cannot read file: {reason}") from None
    bin_chunk = None
    if len(data) >= 4 and struct.unpack_from("<I", data)[0] == GLB_MAGIC:
        json_bytes, bin_chunk, notes = _split_glb(memoryview(data), source)
    else:
        json_bytes, notes = data, []
    gltf = _parse_json(json_bytes, source, limits.json_values)
    doc = Document(source=source, folder=path.parent, gltf=gltf, bin_chunk=bin_chunk,
                   max_file_bytes=limits.file_bytes)
    doc.warnings.extend(Note(n) for n in notes)
    return doc


def _split_glb(data: memoryview, source: str) -> tuple[bytes, memoryview | None, list[str]]:
    """The JSON chunk and the optional BIN chunk of a GLB (Spec §GLB File Format)."""
    if len(data) < 20:
        raise GltfError(source, "glb.header", f"file is {len(data)} bytes, too short for a GLB")
    _, version, total = struct.unpack_from("<III", data)
    if version != 2:
        raise GltfError(source, "glb.header.version", f"GLB version {version} (only 2 supported)")
    if total != len(data):
        raise GltfError(source, "glb.header.length",
                        f"header says {total} bytes but the file has {len(data)}")
    json_bytes, bin_chunk, notes = None, None, []
    offset, number = 12, 0
    while offset < total:
        where = f"glb.chunks[{number}]"
        if offset + 8 > total:
            raise GltfError(source, where, "truncated chunk header")
        length, kind = struct.unpack_from("<II", data, offset)
        start, end = offset + 8, offset + 8 + length
        if end > total:
            raise GltfError(source, where + ".chunkLength",
                            f"chunk of {length} bytes runs past the end of the file")
        if length % 4:
            notes.append(f"{where}: chunk length {length} is not 4-byte aligned")
        if number == 0:
            if kind != CHUNK_JSON:
                raise GltfError(source, where + ".chunkType", "first chunk must be JSON")
            json_bytes = bytes(data[start:end])
        elif kind == CHUNK_BIN and bin_chunk is None and number == 1:
            bin_chunk = data[start:end]
        elif kind == CHUNK_JSON:
            raise GltfError(source, where + ".chunkType", "a second JSON chunk")
        # Unknown chunk types are skipped (Spec §GLB File Format).
        offset, number = end, number + 1
    if json_bytes is None:
        raise GltfError(source, "glb.chunks[0]", "no JSON chunk")
    return json_bytes.rstrip(b" \x00"), bin_chunk, notes


def _reject_constant(name: str):
    raise ValueError(f"{name} is not valid JSON")


def json_value_bound(raw: bytes) -> int:
    """An upper bound on the values a JSON text holds, found without parsing it.

    Every value but the first follows a ``,`` or opens after ``[`` or ``:``; counting ``,``,
    ``[`` and ``{`` bounds them (strings may hold these bytes too, so it is an over-count;
    base64 payloads hold none). Parsing 60 MB of tiny values takes gigabytes of objects.
    """
    return raw.count(b",") + raw.count(b"[") + raw.count(b"{") + 1


def _parse_json(raw: bytes, source: str,
                max_values: int = DEFAULT.json_values) -> pygltflib.GLTF2:
    """The pygltflib model of a JSON document; any parse failure becomes a GltfError."""
    values = json_value_bound(raw)
    if values > max_values:
        raise GltfError(source, None, f"the JSON holds up to {values} values, over the limit "
                                      f"json_values {max_values} (large extras?)")
    try:
        text = raw.decode("utf-8-sig")
        tree = json.loads(text, parse_constant=_reject_constant)
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise GltfError(source, None, f"not valid JSON: {str(exc)[:200]}") from None
    if not isinstance(tree, dict):
        raise GltfError(source, None, "the JSON top level is not an object")
    asset = tree.get("asset")
    if not isinstance(asset, dict):
        raise GltfError(source, "asset", "missing: not a glTF 2.0 document")
    version = asset.get("version")
    if not isinstance(version, str) or not version.startswith("2."):
        raise GltfError(source, "asset.version", f"{version!r:.40} is not glTF 2.x")
    return to_model(pygltflib.GLTF2, tree, source, "")


# Which members of each pygltflib class hold nested objects ([cls] = an array of them). Building
# the dataclasses directly is ~50x faster than pygltflib's dataclasses_json path and keeps every
# value exactly as written, so the validators in ``checks`` see (and refuse) wrong types.
_G = pygltflib
_NESTED: dict[type, dict[str, type | list[type]]] = {
    _G.GLTF2: {"accessors": [_G.Accessor], "asset": _G.Asset, "bufferViews": [_G.BufferView],
               "buffers": [_G.Buffer], "cameras": [_G.Camera], "images": [_G.Image],
               "materials": [_G.Material], "meshes": [_G.Mesh], "nodes": [_G.Node],
               "samplers": [_G.Sampler], "scenes": [_G.Scene], "skins": [_G.Skin],
               "textures": [_G.Texture]},
    _G.Accessor: {"sparse": _G.Sparse},
    _G.Sparse: {"indices": _G.AccessorSparseIndices, "values": _G.AccessorSparseValues},
    _G.Camera: {"perspective": _G.Perspective, "orthographic": _G.Orthographic},
    _G.Material: {"pbrMetallicRoughness": _G.PbrMetallicRoughness,
                  "normalTexture": _G.NormalMaterialTexture,
                  "occlusionTexture": _G.OcclusionTextureInfo, "emissiveTexture": _G.TextureInfo},
    _G.PbrMetallicRoughness: {"baseColorTexture": _G.TextureInfo,
                              "metallicRoughnessTexture": _G.TextureInfo},
    _G.Mesh: {"primitives": [_G.Primitive]},
}
_FIELDS: dict[type, frozenset[str]] = {}


def to_model(cls: type, value, source: str, json_path: str):
    """The pygltflib object ``cls`` for a JSON object, nested members converted too."""
    if not isinstance(value, dict):
        raise GltfError(source, json_path or None, "must be a JSON object")
    names = _FIELDS.get(cls)
    if names is None:
        names = _FIELDS[cls] = frozenset(f.name for f in dataclasses.fields(cls))
    nested = _NESTED.get(cls, {})
    kwargs = {}
    for key, item in value.items():
        if key not in names:
            continue
        here = f"{json_path}.{key}" if json_path else key
        kind = nested.get(key)
        if item is None or kind is None:
            kwargs[key] = item
        elif isinstance(kind, list):
            if not isinstance(item, list):
                raise GltfError(source, here, "must be a JSON array")
            kwargs[key] = [to_model(kind[0], x, source, f"{here}[{i}]")
                           for i, x in enumerate(item)]
        else:
            kwargs[key] = to_model(kind, item, source, here)
    return cls(**kwargs)
