"""Accessor rules of glTF 2.0 spec §3.6.2 "Accessors": declared bounds, alignment, matrices.

Expected values are worked out here from the spec text named beside each check.
"""

from __future__ import annotations

import numpy as np
from gltf_builder import GltfBuilder

from shots.gltf import load_scene
from shots.gltf.accessors import AccessorReader
from shots.gltf.container import read_document

CORNERS = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)])
FACES = np.array([[0, 1, 3], [0, 3, 2], [4, 6, 7], [4, 7, 5], [0, 4, 5], [0, 5, 1],
                  [2, 3, 7], [2, 7, 6], [0, 2, 6], [0, 6, 4], [1, 5, 7], [1, 7, 3]], np.uint16)


def quantized_cube(tmp_path, declared=None, padded: bool = True):
    """A 1 m cube of normalized SHORT positions (KHR_mesh_quantization README), VEC3 padded to
    an 8-byte stride unless ``padded`` is False."""
    q = (CORNERS * 32767).astype(np.int16)
    b = GltfBuilder()
    if padded:
        (position,) = b.interleaved([q], stride=8)
    else:
        position = b.accessor(q)
    acc = b.gltf["accessors"][position]
    acc["normalized"] = True
    if declared is not None:
        acc["min"], acc["max"] = declared
    b.use_extension("KHR_mesh_quantization", required=True)
    b.scene([b.node(mesh=b.mesh(position, FACES))])
    return load_scene(b.write_glb(tmp_path / "q.glb"))


def test_normalized_positions_bounds_are_in_stored_values(tmp_path):
    # glTF 2.0 spec §3.6.2.4: min/max hold the accessor's own values, for normalized
    # integers the stored integers, so [0..32767] is right for this cube and [0..1] is not
    scene = quantized_cube(tmp_path)  # the builder declares the stored integer range
    assert scene.warnings == ()
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [1, 1, 1]])
    wrong = quantized_cube(tmp_path, declared=([0, 0, 0], [1, 1, 1]))
    assert sum("POSITION min/max" in w for w in wrong.warnings) == 1


def test_missing_position_bounds_warn(tmp_path):
    # glTF 2.0 spec §3.6.2.4: POSITION accessors MUST define min and max
    b = GltfBuilder()
    position = b.accessor(CORNERS.astype(np.float32), min_max=False)
    b.scene([b.node(mesh=b.mesh(position, FACES))])
    scene = load_scene(b.write_glb(tmp_path / "m.glb"))
    assert [str(w) for w in scene.warnings] == ["accessors[0]: POSITION has no min/max "
                                                "(required)"]


def test_tightly_packed_short_positions_warn_once(tmp_path):
    # glTF 2.0 spec §3.6.2.2: vertex attribute elements MUST sit on 4-byte boundaries; packed
    # SHORT VEC3 elements are 6 bytes long, so every second one is off the grid
    scene = quantized_cube(tmp_path, padded=False)
    notes = [w for w in scene.warnings if "4-byte aligned" in w]
    assert len(notes) == 1 and "tightly packed 6-byte elements" in notes[0]
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [1, 1, 1]])  # still loads


def test_odd_offset_and_byte_colours_warn(tmp_path):
    # glTF 2.0 spec §3.6.2.2: accessor.byteOffset MUST be a multiple of 4 for vertex attributes;
    # normalized UNSIGNED_BYTE VEC3 colours packed at 3 bytes break the rule too
    b = GltfBuilder()
    p = CORNERS.astype(np.float32)
    view = b.view(b"\x00\x00" + p.astype("<f4").tobytes(), stride=12)
    position = b.accessor(p, view=view, byte_offset=2)
    colours = b.accessor((CORNERS * 255).astype(np.uint8), normalized=True, min_max=False)
    b.scene([b.node(mesh=b.mesh(position, FACES, colors=colours))])
    scene = load_scene(b.write_glb(tmp_path / "m.glb"))
    notes = [w for w in scene.warnings if "4-byte aligned" in w]
    assert len(notes) == 2
    assert any("byteOffset 2" in n for n in notes)
    assert any("COLOR_0" in n and "3-byte elements" in n for n in notes)
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [1, 1, 1]])  # read all the same


def matrix_reader(tmp_path, raw: bytes, kind: str, component: int, count: int):
    b = GltfBuilder()
    view = b.view(raw)
    b._add("accessors", {"bufferView": view, "componentType": component, "count": count,
                         "type": kind})
    b.scene([])
    doc = read_document(b.write_glb(tmp_path / "mat.glb"))
    return AccessorReader(doc, max_elements=1 << 20).raw(0)


def test_matrix_columns_padding_is_skipped(tmp_path):
    # glTF 2.0 spec §3.6.2.2: matrix columns start on 4-byte boundaries. MAT2 of BYTE is stored
    # as c0 c1 pad pad  c2 c3 pad pad; MAT3 of UNSIGNED_SHORT as 3 shorts + 1 pad per column
    mat2 = bytes([1, 2, 0xEE, 0xEE, 3, 4, 0xEE, 0xEE]) * 2
    np.testing.assert_array_equal(matrix_reader(tmp_path, mat2, "MAT2", 5120, 2),
                                  [[1, 2, 3, 4]] * 2)
    columns = np.array([[1, 2, 3, 0xEEEE], [4, 5, 6, 0xEEEE], [7, 8, 9, 0xEEEE]], "<u2")
    np.testing.assert_array_equal(matrix_reader(tmp_path, columns.tobytes(), "MAT3", 5123, 1),
                                  [list(range(1, 10))])
    # MAT2 of SHORT needs no padding: 4-byte columns
    plain = np.arange(1, 5, dtype="<i2").tobytes()
    np.testing.assert_array_equal(matrix_reader(tmp_path, plain, "MAT2", 5122, 1),
                                  [[1, 2, 3, 4]])
