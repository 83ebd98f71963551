"""Hostile and broken files: every refusal is a GltfError naming the field; nothing else escapes.

The corpus in tests/data/hostile/ comes from make_hostile.py there; expected.json holds the JSON
path and a message fragment for each file. Rules: glTF 2.0 spec (§GLB File Format, §Accessors,
§Meshes, §Nodes and Hierarchy, §URIs) and our path policy (shots/gltf/container.py).
"""

from __future__ import annotations

import json
import os
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
from gltf_builder import GltfBuilder, quad
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from shots.errors import GltfError
from shots.gltf import load_scene
from shots.limits import Limits
from shots.scene import Scene

HOSTILE = Path(__file__).parent / "data" / "hostile"
EXPECTED = json.loads((HOSTILE / "expected.json").read_text())
TRI = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)


def test_corpus_is_large_enough():
    assert len(EXPECTED) >= 25
    assert all((HOSTILE / name).exists() or (HOSTILE / name).is_symlink() for name in EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_hostile_file_is_refused_with_its_field(name):
    expected = EXPECTED[name]
    with pytest.raises(GltfError) as err:
        load_scene(HOSTILE / name, limits=Limits(**expected.get("limits", {})))
    assert err.value.field == expected["field"]
    assert expected["message"] in err.value.message
    assert str(HOSTILE / name) in str(err.value)


# ---------------------------------------------------------------- the path policy ----------
# Each file outside the folder holds *valid* data, so only the policy can make the load fail.

def outside_layout(tmp_path) -> tuple[Path, dict]:
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI))])
    (tmp_path / "secret.bin").write_bytes(bytes(b.blob))
    folder = tmp_path / "model"
    folder.mkdir()
    tree = json.loads(b.json_bytes())
    return folder, tree


@pytest.mark.parametrize("uri", ["../secret.bin", "%2E%2E/secret.bin", "ABSOLUTE",
                                 "file://ABSOLUTE"])
def test_valid_data_outside_the_folder_is_never_read(tmp_path, uri):
    folder, tree = outside_layout(tmp_path)
    tree["buffers"][0]["uri"] = uri.replace("ABSOLUTE", str(tmp_path / "secret.bin"))
    (folder / "m.gltf").write_text(json.dumps(tree))
    with pytest.raises(GltfError) as err:
        load_scene(folder / "m.gltf")
    assert err.value.field == "buffers[0].uri"


def test_symlinks_are_judged_by_their_target(tmp_path):
    folder, tree = outside_layout(tmp_path)
    os.symlink(tmp_path / "secret.bin", folder / "escape.bin")
    tree["buffers"][0]["uri"] = "escape.bin"
    (folder / "m.gltf").write_text(json.dumps(tree))
    with pytest.raises(GltfError, match="leaves the model's folder"):
        load_scene(folder / "m.gltf")
    # a link that stays inside the folder is fine
    (folder / "data.bin").write_bytes((tmp_path / "secret.bin").read_bytes())
    os.symlink(folder / "data.bin", folder / "inside.bin")
    tree["buffers"][0]["uri"] = "inside.bin"
    (folder / "m.gltf").write_text(json.dumps(tree))
    assert load_scene(folder / "m.gltf").triangle_count == 1


def test_missing_model_file(tmp_path):
    with pytest.raises(GltfError, match="cannot read file"):
        load_scene(tmp_path / "absent.glb")


# ---------------------------------------------------------------- fuzzing ------------------

def rich_model() -> GltfBuilder:
    """A small model touching most loader paths: textures, sparse, stride, strips, variants."""
    b = GltfBuilder()
    p, uv, idx = quad()
    tex = b.image_png(np.arange(16, dtype=np.uint8).reshape(2, 2, 4) * 16,
                      sampler={"wrapS": 33071, "magFilter": 9728})
    mat = b.material(pbrMetallicRoughness={"baseColorTexture": {"index": tex}},
                     normalTexture={"index": tex}, alphaMode="MASK",
                     extensions={"KHR_materials_transmission": {"transmissionFactor": 0.5}})
    alt = b.material(name="alt")
    pa, ua = b.interleaved([p, uv])
    sparse = b.sparse_accessor(p, 4, indices=[2], values=np.array([[2, 2, 0]], np.float32))
    b.gltf["extensions"] = {
        "KHR_materials_variants": {"variants": [{"name": "a"}]},
        "KHR_lights_punctual": {"lights": [{"type": "point"}]},
    }
    prims = [
        b.primitive(pa, idx, uv0=ua, material=mat, extensions={"KHR_materials_variants": {
            "mappings": [{"material": alt, "variants": [0]}]}}),
        b.primitive(sparse, np.array([0, 1, 3, 2], np.uint8), mode=5),
        b.primitive(p, normals=np.tile([0, 0, 1], (4, 1)).astype(np.float32), mode=6),
    ]
    mesh = b.mesh(primitives=prims)
    b.gltf["cameras"] = [{"type": "perspective", "perspective": {"yfov": 0.5, "znear": 0.1}}]
    child = b.node(mesh=mesh, rotation=[0, 0.70711, 0, 0.70711], scale=[1, -1, 1])
    cam = b.node(camera=0, translation=[0, 0, 4])
    lamp = b.node(extensions={"KHR_lights_punctual": {"light": 0}})
    b.scene([b.node(children=[child, cam], matrix=[1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 1, 2, 3, 1]),
             lamp])
    return b


RICH = rich_model()
RICH_TREE = json.loads(RICH.json_bytes())
RICH_GLB = RICH.glb_bytes()
LIMITS = {"max_triangles": 10_000, "max_texture_pixels": 1 << 16}


def json_paths(tree, prefix=()) -> list[tuple]:
    """Every key/index path in a JSON tree (except the big base64 buffer string)."""
    out = []
    items = tree.items() if isinstance(tree, dict) else enumerate(tree)
    for key, value in items:
        path = (*prefix, key)
        out.append(path)
        if isinstance(value, dict | list):
            out.extend(json_paths(value, path))
    return out


PATHS = json_paths(RICH_TREE)
json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-(2**63), 2**63) | st.sampled_from(
        [0, 1, -1, 2, 3, 4, 5, 6, 255, 65535, 5121, 5123, 5125, 5126, 2**31, 2**32 - 1])
    | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=8)
    | st.sampled_from(["VEC3", "SCALAR", "MAT4", "../x.bin", "data:,", "MASK", "http://x"]),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner,
                                                                  max_size=3),
    max_leaves=6,
)


def load_bounded(path: Path) -> None:
    """Load under small limits; only a Scene or a GltfError may come out, in bounded memory."""
    tracemalloc.start()
    try:
        result = load_scene(path, **LIMITS)
        assert isinstance(result, Scene)
    except GltfError:
        pass
    finally:
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    assert peak < 64 * 2**20, f"peak memory {peak / 2**20:.0f} MiB"


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


def test_rich_model_loads(fuzz_dir):
    path = fuzz_dir / "rich.glb"
    path.write_bytes(RICH_GLB)
    scene = load_scene(path)
    assert scene.triangle_count == 2 + 2 + 2 and set(scene.variants) == {"a"}
    assert len(scene.cameras) == 1 and len(scene.lights) == 1


@settings(max_examples=120, deadline=2000, suppress_health_check=[HealthCheck.too_slow])
@given(edits=st.lists(st.tuples(st.sampled_from(PATHS), json_values | st.just("<delete>")),
                      min_size=1, max_size=3))
def test_mutated_json_raises_only_gltf_error(fuzz_dir, edits):
    target = fuzz_dir / "mutated.gltf"
    target.write_text(json.dumps(edited_tree(edits)))
    load_bounded(target)


def edited_tree(edits) -> dict:
    """A copy of RICH_TREE with (path, value or "<delete>") edits applied."""
    tree = json.loads(json.dumps(RICH_TREE))
    for path, value in edits:
        node = tree
        try:
            for key in path[:-1]:
                node = node[key]
            if value == "<delete>":
                del node[path[-1]]
            else:
                node[path[-1]] = value
        except (KeyError, IndexError, TypeError):
            continue  # an earlier edit removed or replaced this path
    return tree


@settings(max_examples=120, deadline=2000, suppress_health_check=[HealthCheck.too_slow])
@given(flips=st.lists(st.tuples(st.integers(0, len(RICH_GLB) - 1), st.integers(0, 255)),
                      min_size=1, max_size=8),
       cut=st.one_of(st.none(), st.integers(0, len(RICH_GLB))))
def test_mutated_glb_bytes_raise_only_gltf_error(fuzz_dir, flips, cut):
    data = bytearray(RICH_GLB)
    for position, value in flips:
        data[position] = value
    if cut is not None:
        data = data[:cut]
    target = fuzz_dir / "mutated.glb"
    target.write_bytes(bytes(data))
    load_bounded(target)


@settings(max_examples=60, deadline=2000, suppress_health_check=[HealthCheck.too_slow])
@given(flips=st.lists(st.tuples(st.integers(0, 2000), st.sampled_from(b'{}[]",:0129-.e ')),
                      min_size=1, max_size=4))
def test_mutated_json_text_raises_only_gltf_error(fuzz_dir, flips):
    # structural characters sprinkled into the JSON part (before the base64 payloads)
    text = bytearray(RICH.json_bytes())
    for position, value in flips:
        text[min(position, len(text) - 1)] = value
    target = fuzz_dir / "mutated_text.gltf"
    target.write_bytes(bytes(text))
    load_bounded(target)


def test_equal_variant_names_are_made_unique():
    from shots.gltf import unique_names

    names = unique_names(["a"] * 4000)
    assert len(set(names)) == 4000 and names[:3] == ["a", "a #2", "a #3"]
    # a made-up name never takes one a later variant really has
    assert unique_names(["a", "a", "a #2"]) == ["a", "a #3", "a #2"]
