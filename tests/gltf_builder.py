"""Write small glTF 2.0 files from numpy arrays, for tests (any test module may use this).

Example::

    b = GltfBuilder()
    red = b.material(pbrMetallicRoughness={"baseColorFactor": [1, 0, 0, 1]})
    mesh = b.mesh(positions=P, indices=I, normals=N, material=red)
    b.scene([b.node(mesh=mesh, translation=[1, 0, 0])])
    b.write_glb(tmp_path / "m.glb")      # or b.write_gltf(path) (data: URI) / (path, external=True)

The builder writes exactly what it is told (it does not validate), so tests can also build
broken files. Layout follows glTF 2.0 spec §Accessors, §Buffers and Buffer Views, §GLB File Format.
"""

from __future__ import annotations

import base64
import io
import json
import struct
from pathlib import Path

import numpy as np

COMPONENT_TYPES = {
    np.dtype("int8"): 5120, np.dtype("uint8"): 5121, np.dtype("int16"): 5122,
    np.dtype("uint16"): 5123, np.dtype("uint32"): 5125, np.dtype("float32"): 5126,
}
TYPES = {1: "SCALAR", 2: "VEC2", 3: "VEC3", 4: "VEC4", 16: "MAT4"}


class GltfBuilder:
    """Accumulates a glTF JSON tree and one binary buffer."""

    def __init__(self):
        self.gltf: dict = {"asset": {"version": "2.0", "generator": "shots tests"}}
        self.blob = bytearray()

    # ---- low level ----------------------------------------------------------------------
    def _add(self, key: str, item: dict) -> int:
        self.gltf.setdefault(key, []).append(item)
        return len(self.gltf[key]) - 1

    def view(self, data: bytes, stride: int | None = None, target: int | None = None) -> int:
        """A bufferView over ``data`` appended to the buffer (4-byte aligned)."""
        self.blob.extend(b"\x00" * (-len(self.blob) % 4))
        view = {"buffer": 0, "byteOffset": len(self.blob), "byteLength": len(data)}
        if stride is not None:
            view["byteStride"] = stride
        if target is not None:
            view["target"] = target
        self.blob.extend(data)
        return self._add("bufferViews", view)

    def accessor(self, array, *, normalized: bool = False, view: int | None = None,
                 byte_offset: int = 0, min_max: bool = True, type: str | None = None,
                 count: int | None = None, component_type: int | None = None) -> int:
        """An accessor for ``array`` ((n,) or (n, k)), in its own bufferView unless ``view``."""
        a = np.ascontiguousarray(array)
        if a.dtype == np.float64:
            a = a.astype(np.float32)  # glTF has no doubles
        elif a.dtype == np.int64:
            a = a.astype(np.uint32)
        a2 = a.reshape(a.shape[0], -1)
        if view is None:
            view = self.view(a2.tobytes())
        acc = {
            "bufferView": view,
            "componentType": component_type or COMPONENT_TYPES[a.dtype],
            "count": a2.shape[0] if count is None else count,
            "type": type or TYPES[a2.shape[1]],
        }
        if byte_offset:
            acc["byteOffset"] = byte_offset
        if normalized:
            acc["normalized"] = True
        if min_max and a2.shape[0]:
            acc["min"] = np.nanmin(a2, axis=0).tolist()
            acc["max"] = np.nanmax(a2, axis=0).tolist()
        return self._add("accessors", acc)

    def interleaved(self, arrays: list[np.ndarray], stride: int | None = None) -> list[int]:
        """Accessors sharing one bufferView with byteStride (Spec §Data Alignment)."""
        arrays = [np.ascontiguousarray(a).reshape(a.shape[0], -1) for a in arrays]
        sizes = [a.shape[1] * a.dtype.itemsize for a in arrays]
        offsets = np.cumsum([0] + [s + (-s % 4) for s in sizes[:-1]]).tolist()
        stride = stride or int(offsets[-1] + sizes[-1] + (-sizes[-1] % 4))
        n = arrays[0].shape[0]
        raw = bytearray(stride * n)
        for a, off, size in zip(arrays, offsets, sizes, strict=True):
            rows = a.view(np.uint8).reshape(n, size)
            for i in range(n):
                raw[i * stride + off : i * stride + off + size] = rows[i].tobytes()
        view = self.view(bytes(raw), stride=stride, target=34962)
        return [self.accessor(a, view=view, byte_offset=off)
                for a, off in zip(arrays, offsets, strict=True)]

    def sparse_accessor(self, base: np.ndarray | None, count: int, indices: np.ndarray,
                        values: np.ndarray, *, index_dtype=np.uint16) -> int:
        """A sparse accessor (Spec §Sparse Accessors) over ``base`` (None = zeros)."""
        values = np.ascontiguousarray(values)
        width = values.reshape(values.shape[0], -1).shape[1]
        if base is not None:
            index = self.accessor(base, min_max=False)
        else:
            index = self._add("accessors", {"componentType": COMPONENT_TYPES[values.dtype],
                                            "count": count, "type": TYPES[width]})
        acc = self.gltf["accessors"][index]
        acc["sparse"] = {
            "count": len(indices),
            "indices": {"bufferView": self.view(np.asarray(indices, index_dtype).tobytes()),
                        "componentType": COMPONENT_TYPES[np.dtype(index_dtype)]},
            "values": {"bufferView": self.view(values.tobytes())},
        }
        return index

    # ---- scene content ------------------------------------------------------------------
    def primitive(self, positions, indices=None, *, normals=None, tangents=None, uv0=None,
                  uv1=None, colors=None, material: int | None = None, mode: int | None = None,
                  normalized: dict | None = None, **extra) -> dict:
        """A primitive dict; arrays become accessors (their dtypes pick the component type)."""
        normalized = normalized or {}
        attributes = {}
        for name, data in (("POSITION", positions), ("NORMAL", normals), ("TANGENT", tangents),
                           ("TEXCOORD_0", uv0), ("TEXCOORD_1", uv1), ("COLOR_0", colors)):
            if data is None:
                continue
            attributes[name] = data if isinstance(data, int) else self.accessor(
                data, normalized=normalized.get(name, False), min_max=name == "POSITION")
        prim: dict = {"attributes": attributes}
        if indices is not None:
            prim["indices"] = indices if isinstance(indices, int) else self.accessor(
                np.asarray(indices).reshape(-1), min_max=False)
        if material is not None:
            prim["material"] = material
        if mode is not None:
            prim["mode"] = mode
        prim.update(extra)
        return prim

    def mesh(self, positions=None, indices=None, *, primitives: list[dict] | None = None,
             **kwargs) -> int:
        """A mesh of one primitive (arguments as ``primitive``) or of ``primitives``."""
        if primitives is None:
            primitives = [self.primitive(positions, indices, **kwargs)]
        return self._add("meshes", {"primitives": primitives})

    def material(self, **fields) -> int:
        return self._add("materials", fields)

    def node(self, **fields) -> int:
        return self._add("nodes", fields)

    def scene(self, nodes: list[int], name: str | None = None, default: bool = True) -> int:
        s = {"nodes": nodes}
        if name is not None:
            s["name"] = name
        index = self._add("scenes", s)
        if default and "scene" not in self.gltf:
            self.gltf["scene"] = index
        return index

    def image_png(self, rgba: np.ndarray, *, sampler: dict | None = None) -> int:
        """A texture of the uint8 (h, w, 3|4) image (row 0 = top), stored as PNG in the buffer."""
        from PIL import Image

        out = io.BytesIO()
        Image.fromarray(np.ascontiguousarray(rgba, np.uint8)).save(out, format="PNG")
        image = self._add("images", {"bufferView": self.view(out.getvalue()),
                                     "mimeType": "image/png"})
        texture = {"source": image}
        if sampler is not None:
            texture["sampler"] = self._add("samplers", sampler)
        return self._add("textures", texture)

    def use_extension(self, name: str, required: bool = False) -> None:
        used = self.gltf.setdefault("extensionsUsed", [])
        if name not in used:
            used.append(name)
        if required:
            req = self.gltf.setdefault("extensionsRequired", [])
            if name not in req:
                req.append(name)

    # ---- output -------------------------------------------------------------------------
    def _tree(self, uri: str | None) -> dict:
        tree = json.loads(json.dumps(self.gltf))
        if self.blob:
            buffer = {"byteLength": len(self.blob)}
            if uri is not None:
                buffer["uri"] = uri
            tree["buffers"] = [buffer]
        return tree

    def json_bytes(self, mime: str = "application/octet-stream") -> bytes:
        """The document as .gltf JSON with the buffer in a base64 data: URI."""
        uri = f"data:{mime};base64," + base64.b64encode(bytes(self.blob)).decode()
        return json.dumps(self._tree(uri)).encode()

    def write_gltf(self, path, *, external: bool = False,
                   mime: str = "application/octet-stream") -> Path:
        """Write .gltf; the buffer as a data: URI, or as ``<stem>.bin`` next to it."""
        path = Path(path)
        if external:
            bin_name = path.stem + ".bin"
            (path.parent / bin_name).write_bytes(bytes(self.blob))
            path.write_text(json.dumps(self._tree(bin_name)))
        else:
            path.write_bytes(self.json_bytes(mime))
        return path

    def glb_bytes(self, extra_chunks: list[tuple[int, bytes]] = ()) -> bytes:
        """The document as GLB (Spec §GLB File Format): JSON chunk, BIN chunk, extra chunks."""
        body = json.dumps(self._tree(None)).encode()
        body += b" " * (-len(body) % 4)
        chunks = [(0x4E4F534A, body)]
        if self.blob:
            data = bytes(self.blob) + b"\x00" * (-len(self.blob) % 4)
            chunks.append((0x004E4942, data))
        chunks.extend(extra_chunks)
        payload = b"".join(struct.pack("<II", len(c), t) + c for t, c in chunks)
        return struct.pack("<III", 0x46546C67, 2, 12 + len(payload)) + payload

    def write_glb(self, path, **kwargs) -> Path:
        path = Path(path)
        path.write_bytes(self.glb_bytes(**kwargs))
        return path


def quad(size: float = 1.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A unit quad in the XY plane facing +Z: positions (4, 3), uv (4, 2), indices (6,) u16.

    Vertex order: (0,0) (1,0) (1,1) (0,1); uv has v = 1 - y (uv (0,0) = image top-left,
    Spec §Images), so the quad shows the image upright when seen from +Z.
    """
    p = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], np.float32) * size
    uv = np.array([[0, 1], [1, 1], [1, 0], [0, 0]], np.float32)
    return p, uv, np.array([0, 1, 2, 0, 2, 3], np.uint16)
