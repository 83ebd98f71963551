"""KHR_draco_mesh_compression (its README) through PyPI ``DracoPy`` (optional).

The primitive's accessors have no bufferView; the compressed bufferView decodes to positions,
normals, texture coordinates and colours, which we hand to the accessor reader as overrides so
the rest of the loader sees ordinary accessors.
"""

from __future__ import annotations

import numpy as np

from shots.gltf import checks
from shots.gltf.accessors import AccessorReader
from shots.gltf.container import Document

try:
    import DracoPy
except ImportError:  # pragma: no cover - depends on the environment
    DracoPy = None

AVAILABLE = DracoPy is not None
EXTENSION = "KHR_draco_mesh_compression"


def decode_primitive(doc: Document, reader: AccessorReader, prim, where: str) -> None:
    """Decode a Draco-compressed primitive into ``reader.overrides`` for its accessors."""
    src, here = doc.source, f"{where}.extensions.{EXTENSION}"
    ext = checks.mapping(prim.extensions[EXTENSION], src, here)
    view, _ = doc.buffer_view(ext.get("bufferView"), here + ".bufferView")
    declared = declared_size(bytes(view[:64]))
    if declared is not None and 3 * max(declared) > reader.max_elements:
        faces, points = declared
        raise doc.error(here + ".bufferView", f"the Draco header declares {faces} faces and "
                                              f"{points} points, over the loader's limit")
    try:
        mesh = DracoPy.decode(bytes(view))
    except Exception as exc:  # DracoPy raises its own and generic errors on corrupt data
        raise doc.error(here + ".bufferView", f"Draco decoding failed: {str(exc)[:200]}") from None
    attributes = prim.attributes if isinstance(prim.attributes, dict) else {}
    ids = checks.mapping(ext.get("attributes"), src, here + ".attributes")
    for name, unique_id in ids.items():
        target = attributes.get(name)
        if target is None:
            continue
        checks.integer(unique_id, src, f"{here}.attributes.{name}")
        data = _attribute(mesh, unique_id, name)
        if data is None:
            raise doc.error(f"{here}.attributes.{name}", f"Draco id {unique_id} not in the data")
        checks.index(target, doc.gltf.accessors, src, f"{where}.attributes.{name}", "accessors")
        reader.overrides[target] = _as_accessor(data, doc.gltf.accessors[target])
    if prim.indices is not None:
        faces = np.asarray(getattr(mesh, "faces", None))
        if faces.ndim != 2 or faces.shape[1] != 3:
            raise doc.error(here, "Draco data has no triangle faces")
        checks.index(prim.indices, doc.gltf.accessors, src, where + ".indices", "accessors")
        acc = doc.gltf.accessors[prim.indices]
        dtype = {5121: np.uint8, 5123: np.uint16}.get(acc.componentType, np.uint32)
        reader.overrides[prim.indices] = faces.reshape(-1, 1).astype(dtype)


def declared_size(head: bytes) -> tuple[int, int] | None:
    """(faces, points) a Draco 2.2 mesh declares in its header, read before decoding; None when
    the layout is another (point cloud, older version, metadata first).

    Draco bitstream 2.2: "DRACO", major, minor, encoder type (1 = mesh), method (0 =
    sequential, 1 = Edgebreaker), 16-bit flags; then the sequential connectivity header holds
    varint num_faces, num_points, and the Edgebreaker one a traversal-type byte, varint
    num_encoded_vertices, num_faces.
    """
    if len(head) < 11 or head[:5] != b"DRACO" or head[5:7] != b"\x02\x02" or head[7] != 1:
        return None
    method, flags = head[8], int.from_bytes(head[9:11], "little")
    if flags & 0x8000 or method not in (0, 1):  # metadata comes first: not read here
        return None
    position = 11 if method == 0 else 12
    values = []
    for _ in range(2):
        value, shift = 0, 0
        while True:
            if position >= len(head) or shift > 35:
                return None
            byte = head[position]
            position += 1
            value |= (byte & 0x7F) << shift
            shift += 7
            if not byte & 0x80:
                break
        values.append(value)
    return (values[0], values[1]) if method == 0 else (values[1], values[0])


def _attribute(mesh, unique_id: int, name: str) -> np.ndarray | None:
    """The decoded values of one Draco attribute, by unique id, else by the usual name."""
    try:
        found = mesh.get_attribute_by_unique_id(unique_id)
    except Exception:
        found = None
    if found is not None and found.get("data") is not None:
        return np.asarray(found["data"])
    fallback = {"POSITION": "points", "NORMAL": "normals", "TEXCOORD_0": "tex_coord",
                "COLOR_0": "colors"}.get(name)
    value = getattr(mesh, fallback, None) if fallback else None
    return None if value is None else np.asarray(value)


def _as_accessor(data: np.ndarray, acc) -> np.ndarray:
    """Decoded values shaped and typed like the accessor describes them."""
    from shots.gltf.accessors import COMPONENT_DTYPES, TYPE_SIZES

    width = TYPE_SIZES.get(acc.type, 1)
    dtype = COMPONENT_DTYPES.get(acc.componentType, np.dtype("<f4"))
    data = np.asarray(data)
    data = data.reshape(data.shape[0], -1) if data.ndim else data.reshape(-1, 1)
    if data.shape[1] != width:
        return data  # the reader's shape check names the accessor
    if np.issubdtype(data.dtype, np.floating):
        return data.astype(np.float32)  # DracoPy dequantizes; the values are final
    return data.astype(dtype, copy=False)
