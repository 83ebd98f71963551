"""Accessor decoding (Spec §Accessors): component types, byteStride, normalized ints, sparse.

Dense accessors become zero-copy numpy views onto the buffer (``np.ndarray`` over the bytes with
the view's stride); only normalisation, sparse substitution or a dtype change make a copy.
"""

from __future__ import annotations

import numpy as np

from shots.gltf import checks
from shots.gltf.container import Document

# glTF 2.0 spec §Accessor Data Types; all binary data is little-endian (§Binary Data Storage)
COMPONENT_DTYPES = {
    5120: np.dtype("<i1"),
    5121: np.dtype("<u1"),
    5122: np.dtype("<i2"),
    5123: np.dtype("<u2"),
    5125: np.dtype("<u4"),
    5126: np.dtype("<f4"),
}
COMPONENT_NAMES = {5120: "BYTE", 5121: "UNSIGNED_BYTE", 5122: "SHORT", 5123: "UNSIGNED_SHORT",
                   5125: "UNSIGNED_INT", 5126: "FLOAT"}
TYPE_SIZES = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4, "MAT2": 4, "MAT3": 9, "MAT4": 16}
INDEX_TYPES = (5121, 5123, 5125)
FLOAT = 5126


def padded_column(kind: str, dtype: np.dtype) -> int:
    """Components per stored matrix column when columns are padded, else 0.

    glTF 2.0 spec §3.6.2.2 "Data Alignment": matrix columns start on 4-byte boundaries, so MAT2
    of 1-byte and MAT3 of 1- and 2-byte components carry padding after each column.
    """
    rows = {"MAT2": 2, "MAT3": 3}.get(kind, 0)
    column_bytes = rows * dtype.itemsize
    if not rows or column_bytes % 4 == 0:
        return 0
    return (column_bytes + 3) // 4 * 4 // dtype.itemsize


class AccessorReader:
    """Decodes accessors of one document, each at most once.

    ``max_elements`` bounds the accessors that have no bufferView (all zeros, or sparse, or Draco):
    their ``count`` costs memory without costing file bytes.
    """

    def __init__(self, doc: Document, max_elements: int):
        self.doc = doc
        self.max_elements = max_elements
        self._raw: dict[int, np.ndarray] = {}
        self._float: dict[int, np.ndarray] = {}
        self.overrides: dict[int, np.ndarray] = {}  # accessor -> decoded data (Draco)

    def info(self, i: int, json_path: str):
        """The pygltflib accessor ``i`` after checking the index."""
        checks.index(i, self.doc.gltf.accessors, self.doc.source, json_path, "accessors")
        return self.doc.gltf.accessors[i]

    def raw(self, i: int) -> np.ndarray:
        """Accessor ``i`` as stored: (count, components) array of its component dtype.

        Read-only (often a view onto the file's bytes); sparse substitution already applied.
        """
        if i not in self._raw:
            self._raw[i] = self._decode(i)
        return self._raw[i]

    def floats(self, i: int, json_path: str, types: tuple[str, ...]) -> np.ndarray:
        """Accessor ``i`` as (count, components) float32, normalized ints mapped to [-1, 1]/[0, 1].

        ``types`` lists the accessor types allowed where it is used (e.g. ``("VEC3",)``).
        """
        acc = self.info(i, json_path)
        if acc.type not in types:
            raise self.doc.error(f"accessors[{i}].type",
                                 f"is {acc.type!r:.20}, but {json_path} needs {'/'.join(types)}")
        if i not in self._float:
            self._float[i] = self._to_float(i)
        return self._float[i]

    def indices(self, i: int, json_path: str) -> np.ndarray:
        """Index accessor ``i`` as a 1-D unsigned array (u8/u16/u32, Spec §Meshes)."""
        acc = self.info(i, json_path)
        if acc.type != "SCALAR" or acc.componentType not in INDEX_TYPES or acc.normalized:
            raise self.doc.error(f"accessors[{i}]", "index accessors must be unsigned SCALAR "
                                                    "integers, not normalized")
        return self.raw(i)[:, 0]

    def vertex_misalignment(self, i: int) -> str | None:
        """Why vertex attribute accessor ``i`` breaks the 4-byte rule, or None when it keeps it.

        glTF 2.0 spec §3.6.2.2 "Data Alignment": for vertex attributes, accessor.byteOffset and
        bufferView.byteStride MUST be multiples of 4; tightly packed (no byteStride) elements
        are then aligned only when their own size is a multiple of 4.
        """
        acc = self.doc.gltf.accessors[i]
        if acc.bufferView is None or i in self.overrides:
            return None  # no stored layout (zeros, or decoded from compressed data)
        offset = acc.byteOffset or 0
        stride = self.doc.buffer_view(acc.bufferView, f"accessors[{i}].bufferView")[1]
        element = TYPE_SIZES[acc.type] * COMPONENT_DTYPES[acc.componentType].itemsize
        if offset % 4:
            return f"byteOffset {offset} is not a multiple of 4"
        if not stride and element % 4:
            return f"tightly packed {element}-byte elements without a byteStride"
        return None

    def _to_float(self, i: int) -> np.ndarray:
        acc = self.doc.gltf.accessors[i]
        data = self.raw(i)
        ctype = acc.componentType
        if data.dtype == np.float32:
            return data
        if not acc.normalized:
            return data.astype(np.float32)  # KHR_mesh_quantization allows plain ints
        # glTF 2.0 spec §Animations (normalized integers), KHR_mesh_quantization: max(c/M, -1), c/M
        scale = float(np.iinfo(COMPONENT_DTYPES[ctype]).max)
        out = data.astype(np.float32) / np.float32(scale)
        if ctype in (5120, 5122):
            np.maximum(out, -1.0, out=out)
        return out

    def _decode(self, i: int) -> np.ndarray:
        doc, src, where = self.doc, self.doc.source, f"accessors[{i}]"
        acc = doc.gltf.accessors[i]
        ctype = acc.componentType
        if not isinstance(ctype, int) or ctype not in COMPONENT_DTYPES:
            raise doc.error(where + ".componentType", f"unknown component type {ctype!r:.20}")
        if not isinstance(acc.type, str) or acc.type not in TYPE_SIZES:
            raise doc.error(where + ".type", f"unknown accessor type {acc.type!r:.20}")
        if acc.normalized not in (None, False, True):
            raise doc.error(where + ".normalized", "must be a boolean")
        if acc.normalized and ctype in (5125, 5126):
            raise doc.error(where + ".normalized",
                            f"not allowed for {COMPONENT_NAMES[ctype]} (Spec §Accessors)")
        count = checks.integer(acc.count, src, where + ".count", low=1, high=2**31 - 1)
        width = TYPE_SIZES[acc.type]
        dtype = COMPONENT_DTYPES[ctype]
        if i in self.overrides:
            data = self.overrides[i]
            if data.shape != (count, width):
                raise doc.error(where + ".count", f"decoded compressed data has shape "
                                                  f"{data.shape}, accessor says ({count}, {width})")
            return data
        if acc.bufferView is None:
            if count * width > self.max_elements:
                raise doc.error(where + ".count", f"{count} elements without a bufferView "
                                                  "exceed the loader's limit")
            data = np.zeros((count, width), dtype)
        else:
            offset = checks.integer(acc.byteOffset, src, where + ".byteOffset", default=0)
            column = padded_column(acc.type, dtype)
            if column:  # each matrix column starts on a 4-byte boundary: read, drop the padding
                rows = int(np.sqrt(width))
                padded = self._strided(acc.bufferView, offset, count, rows * column, dtype, where)
                data = padded.reshape(count, rows, column)[:, :, :rows].reshape(count, width)
            else:
                data = self._strided(acc.bufferView, offset, count, width, dtype, where)
        if acc.sparse is not None:
            data = self._apply_sparse(i, data)
        return data

    def _strided(self, view_index, offset: int, count: int, width: int, dtype: np.dtype,
                 where: str) -> np.ndarray:
        """A (count, width) view onto a bufferView, checked to lie inside it (glTF 2.0 spec
        §Data Alignment)."""
        view, stride = self.doc.buffer_view(view_index, where + ".bufferView")
        element = width * dtype.itemsize
        if stride and stride < element:
            raise self.doc.error(f"bufferViews[{view_index}].byteStride",
                                 f"{stride} is smaller than the {element}-byte element of {where}")
        stride = stride or element
        end = offset + (count - 1) * stride + element
        if end > len(view):
            raise self.doc.error(
                where + ".count",
                f"{count} elements from byte {offset} need {end} bytes, "
                f"bufferViews[{view_index}] has {len(view)}",
            )
        return np.ndarray((count, width), dtype, buffer=view, offset=offset,
                          strides=(stride, dtype.itemsize))

    def _apply_sparse(self, i: int, dense: np.ndarray) -> np.ndarray:
        """Overwrite the sparse elements (glTF 2.0 spec §Sparse Accessors)."""
        doc, src, where = self.doc, self.doc.source, f"accessors[{i}].sparse"
        sparse = self.doc.gltf.accessors[i].sparse
        count = dense.shape[0]
        n = checks.integer(sparse.count, src, where + ".count", low=1, high=count)
        ind = sparse.indices
        val = sparse.values
        if ind is None or val is None:
            raise doc.error(where, "needs both indices and values")
        if not isinstance(ind.componentType, int) or ind.componentType not in INDEX_TYPES:
            raise doc.error(where + ".indices.componentType",
                            f"{ind.componentType!r:.20} is not an unsigned integer type")
        positions = self._strided(
            ind.bufferView,
            checks.integer(ind.byteOffset, src, where + ".indices.byteOffset", default=0),
            n, 1, COMPONENT_DTYPES[ind.componentType], where + ".indices",
        )[:, 0].astype(np.int64)
        if positions.max() >= count:
            raise doc.error(where + ".indices", f"index {positions.max()} >= count {count}")
        if n > 1 and np.any(np.diff(positions) <= 0):
            raise doc.error(where + ".indices", "indices must be strictly increasing")
        values = self._strided(
            val.bufferView,
            checks.integer(val.byteOffset, src, where + ".values.byteOffset", default=0),
            n, dense.shape[1], dense.dtype, where + ".values",
        )
        out = np.array(dense)  # the dense data may be a read-only view of the file
        out[positions] = values
        return out
