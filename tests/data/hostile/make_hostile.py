"""Generate the hostile/broken glTF corpus in this folder and its index, expected.json.

Run from anywhere: ``python tests/data/hostile/make_hostile.py``. Each entry of expected.json maps
a file to the JSON path (``field``) and a fragment of the message the loader must refuse it with.
The outputs are committed; re-running rewrites them identically.
"""

from __future__ import annotations

import base64
import json
import os
import struct
import sys
import zlib
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))  # tests/, for gltf_builder

from gltf_builder import GltfBuilder  # noqa: E402

TRI = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)
EXPECTED: dict[str, dict[str, str | None]] = {}


def base(indices=None) -> GltfBuilder:
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, indices))])
    return b


def tree_of(b: GltfBuilder) -> dict:
    return json.loads(b.json_bytes())


def write_json(name: str, tree: dict | str, field: str | None, message: str,
               limits: dict | None = None) -> None:
    """Write a case; ``limits`` are budgets (shots.limits) the case is loaded under, so a bomb
    stays small in the repository while showing the check that refuses its full size."""
    text = tree if isinstance(tree, str) else json.dumps(tree)
    (HERE / name).write_text(text)
    EXPECTED[name] = {"field": field, "message": message}
    if limits:
        EXPECTED[name]["limits"] = limits


def write_bytes(name: str, data: bytes, field: str | None, message: str) -> None:
    (HERE / name).write_bytes(data)
    EXPECTED[name] = {"field": field, "message": message}


def with_buffer_uri(uri: str) -> dict:
    tree = tree_of(base())
    tree["buffers"][0]["uri"] = uri
    return tree


def glb_parts(b: GltfBuilder) -> tuple[bytes, bytes]:
    data = b.glb_bytes()
    json_len = struct.unpack_from("<I", data, 12)[0]
    return data[20 : 20 + json_len], data[20 + json_len + 8 :]


def glb(chunks: list[tuple[int, int, bytes]], version: int = 2, total: int | None = None) -> bytes:
    """A GLB from (declared length, type, bytes) chunks; lengths may lie."""
    body = b"".join(struct.pack("<II", n, t) + c for n, t, c in chunks)
    return struct.pack("<III", 0x46546C67, version, total or 12 + len(body)) + body


def png_header(width: int, height: int) -> bytes:
    """A PNG signature and IHDR only (no image data), declaring a size."""
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 6, 0, 0, 0)
    chunk = struct.pack(">I", len(ihdr)) + b"IHDR" + ihdr
    return b"\x89PNG\r\n\x1a\n" + chunk + struct.pack(">I", zlib.crc32(b"IHDR" + ihdr))


def truncated_png() -> bytes:
    """A real 64x64 noise PNG cut off in the middle of its image data."""
    import io

    from PIL import Image

    noise = np.random.default_rng(7).integers(0, 256, (64, 64, 3), dtype=np.uint8)
    out = io.BytesIO()
    Image.fromarray(noise).save(out, format="PNG")
    return out.getvalue()[: len(out.getvalue()) // 2]


def textured(image: dict) -> dict:
    tree = tree_of(base())
    tree["images"] = [image]
    tree["textures"] = [{"source": 0}]
    tree["materials"] = [{"pbrMetallicRoughness": {"baseColorTexture": {"index": 0}}}]
    tree["meshes"][0]["primitives"][0]["material"] = 0
    return tree


def png_bytes(pixels: np.ndarray, mode: str) -> bytes:
    import io

    from PIL import Image

    out = io.BytesIO()
    Image.fromarray(pixels).convert(mode).save(out, format="PNG", optimize=True)
    return out.getvalue()


def data_uri(data: bytes, media: str = "image/png") -> str:
    return f"data:{media};base64," + base64.b64encode(data).decode()


def bombs() -> None:
    """Inputs that cost far more memory or time than their size; each refused by a budget
    before the cost is paid (full-size versions: bench/hostile.py)."""
    # one NUL once percent-decoded (Spec §URIs: URIs are percent-encoded)
    write_json("uri_nul_encoded.gltf", with_buffer_uri("tri.bin%00.png"), "buffers[0].uri",
               "NUL character")
    write_json("uri_symlink_loop.gltf", with_buffer_uri("loop.bin"), "buffers[0].uri",
               "not found")
    os.symlink("loop.bin", HERE / "loop.bin")

    # a strip of 80 M zero indices without a bufferView: counted from accessors[1].count
    # (Spec §Meshes: a strip of n indices draws n - 2 triangles) before one index is made
    tree = tree_of(base(np.array([0, 1, 2], np.uint16)))
    tree["accessors"][1].pop("bufferView")
    tree["accessors"][1]["count"] = 80_000_000
    tree["meshes"][0]["primitives"][0]["mode"] = 5
    write_json("bomb_index_strip.gltf", tree, "accessors[1].count", "over the limit triangles")

    # one 1-bit 4096² PNG (2 KB) used by six texture slots, sRGB and linear: stored once per
    # colour space as 8-bit grey with mip levels (42 MiB), so refused only under a small budget
    big = png_bytes(np.zeros((4096, 4096), np.uint8), "1")
    tree = tree_of(base())
    tree["images"] = [{"uri": data_uri(big)}]
    tree["textures"] = [{"source": 0} for _ in range(6)]
    tree["materials"] = [{
        "pbrMetallicRoughness": {"baseColorTexture": {"index": 0},
                                 "metallicRoughnessTexture": {"index": 1}},
        "normalTexture": {"index": 2}, "occlusionTexture": {"index": 3},
        "emissiveTexture": {"index": 4},
    }]
    tree["meshes"][0]["primitives"][0]["material"] = 0
    write_json("bomb_texture_reuse.gltf", tree, "textures[1]", "over the limit texture_mb",
               {"texture_mb": 32})
    # a 10000² PNG of 12 KB: under the pixel limit, 127 MiB decoded (8-bit grey, mip levels)
    write_json("bomb_png_10000.gltf",
               textured({"uri": data_uri(png_bytes(np.zeros((10000, 10000), np.uint8), "1"))}),
               "textures[0]", "over the limit texture_mb", {"texture_mb": 64})

    # 1,000 nodes instancing one mesh of 1,000 primitives: 1 M primitive instances
    tree = tree_of(base())
    tree["meshes"][0]["primitives"] *= 1000
    tree["nodes"] = [{"mesh": 0} for _ in range(1000)]
    tree["scenes"][0]["nodes"] = list(range(1000))
    write_json("bomb_instancing.gltf", tree, "nodes[200]", "over the limit instances")

    # extras of many small values: parsing them is what costs (here 30,000 of them)
    tree = tree_of(base())
    tree["extras"] = [[0, 0]] * 10_000
    write_json("bomb_extras.gltf", tree, None, "over the limit json_values",
               limits={"json_values": 20_000})

    # a Draco payload declaring 19,602 triangles in its accessors: refused before decoding
    draco = draco_grid(100)
    if draco is not None:
        write_json("bomb_draco.gltf", draco, "accessors[0].count", "over the limit triangles",
                   limits={"triangles": 10_000})
        # the same payload under accessors declaring one triangle: the Draco header's counts
        # (Draco bitstream 2.2 connectivity header) refuse it before decoding
        draco["accessors"][0]["count"], draco["accessors"][1]["count"] = 3, 3
        write_json("bomb_draco_lying_counts.gltf", draco,
                   "meshes[0].primitives[0].extensions.KHR_draco_mesh_compression.bufferView",
                   "the Draco header declares 19602 faces", limits={"triangles": 10_000})


PRESETS = HERE / "presets"


def preset_cases() -> None:
    """Hostile presets in presets/, with their own expected.json (the same format)."""
    PRESETS.mkdir(exist_ok=True)
    for old in PRESETS.iterdir():
        old.unlink()
    cases = {}

    def case(name: str, text: str | bytes, field: str | None, message: str) -> None:
        data = text if isinstance(text, bytes) else text.encode()
        (PRESETS / name).write_bytes(data)
        cases[name] = {"field": field, "message": message}

    # TOML 1.0 §Float: inf and nan are valid TOML; a preset refuses them
    case("inf_intensity.toml", "[environment]\nintensity = inf\n", "environment.intensity",
         "must be a finite number, got inf")
    case("nan_azimuth.toml", "[[lights]]\nazimuth_deg = nan\n", "lights[0].azimuth_deg",
         "must be a finite number, got nan")
    case("nan_in_vector.toml", '[[shots]]\nname = "fly"\nkind = "path"\n'
         "keys = [{eye = [nan, 0, 1]}, {eye = [1, 2, 3]}]\n", "shots[0].keys[0].eye[0]",
         "must be a finite number, got nan")
    case("negative_inf_exposure.toml", "[look]\nexposure = -inf\n", "look.exposure",
         "must be a finite number, got -inf")
    case("deep_nesting.toml", "x = " + "[" * 5000 + "]" * 5000 + "\n", None,
         "nested too deeply")
    case("not_utf8.toml", b'description = "\xff\xfe"\n', None, "not UTF-8 text")
    case("limits_unknown_key.toml", "[limits]\ntriangels = 5\n", "limits.triangels",
         "did you mean 'triangles'?")
    case("limits_inf_seconds.toml", "[limits]\nseconds = inf\n", "limits.seconds",
         "must be a finite number")
    # a chain of 20 presets extending each other: over the merge depth
    for k in range(20):
        parent = f'extends = "deep_{k + 1:02d}.toml"\n' if k < 19 else ""
        (PRESETS / f"deep_{k:02d}.toml").write_text(parent)
    cases["deep_00.toml"] = {"field": "extends", "message": "levels deep",
                             "file": "deep_16.toml"}  # the first file past the depth
    # 18 files in a diamond lattice: 2^9 paths to the bottom, each file read once
    for level in range(9):
        for side in "ab":
            below = (f'extends = ["diamond_{level + 1}a.toml", "diamond_{level + 1}b.toml"]\n'
                     if level < 8 else "")
            (PRESETS / f"diamond_{level}{side}.toml").write_text(
                below + f"[image]\nseed = {level}\n")
    (PRESETS / "expected.json").write_text(json.dumps(cases, indent=1, sort_keys=True) + "\n")


def draco_grid(n: int) -> dict | None:
    """A glTF whose one primitive is an n × n vertex grid compressed with Draco
    (KHR_draco_mesh_compression README: the accessors keep their counts, no bufferView)."""
    try:
        import DracoPy
    except ImportError:
        return None
    u, v = np.meshgrid(np.arange(n), np.arange(n))
    points = np.stack([u.ravel(), v.ravel(), np.zeros(n * n)], 1).astype(np.float32)
    k = (v[:-1, :-1] * n + u[:-1, :-1]).ravel()
    faces = np.concatenate([np.stack([k, k + 1, k + n], 1), np.stack([k + 1, k + n + 1, k + n],
                                                                     1)]).astype(np.uint32)
    payload = DracoPy.encode(points, faces)
    return {
        "asset": {"version": "2.0"},
        "extensionsUsed": ["KHR_draco_mesh_compression"],
        "extensionsRequired": ["KHR_draco_mesh_compression"],
        "buffers": [{"byteLength": len(payload), "uri": data_uri(payload,
                                                                 "application/octet-stream")}],
        "bufferViews": [{"buffer": 0, "byteLength": len(payload)}],
        "accessors": [
            {"componentType": 5125, "count": faces.size, "type": "SCALAR"},
            {"componentType": 5126, "count": n * n, "type": "VEC3",
             "min": [0, 0, 0], "max": [n - 1, n - 1, 0]},
        ],
        "meshes": [{"primitives": [{
            "attributes": {"POSITION": 1}, "indices": 0,
            "extensions": {"KHR_draco_mesh_compression": {"bufferView": 0,
                                                          "attributes": {"POSITION": 0}}},
        }]}],
        "nodes": [{"mesh": 0}],
        "scenes": [{"nodes": [0]}],
        "scene": 0,
    }


def main() -> None:
    for old in HERE.iterdir():
        keep = old.name in ("make_hostile.py", "__pycache__")
        if not keep and (old.is_file() or old.is_symlink()):
            old.unlink()
    J, BIN = 0x4E4F534A, 0x004E4942

    # ---- paths outside the folder, network and file URIs (our policy: shots/gltf/container.py) ---
    write_json("uri_dotdot.gltf", with_buffer_uri("../secret.bin"), "buffers[0].uri",
               "leaves the model's folder")
    write_json("uri_dotdot_encoded.gltf", with_buffer_uri("sub/%2E%2E/%2E%2E/secret.bin"),
               "buffers[0].uri", "leaves the model's folder")
    write_json("uri_absolute.gltf", with_buffer_uri("/etc/passwd"), "buffers[0].uri",
               "absolute path")
    write_json("uri_absolute_encoded.gltf", with_buffer_uri("%2Fetc%2Fpasswd"),
               "buffers[0].uri", "absolute path")
    write_json("uri_file_scheme.gltf", with_buffer_uri("file:///etc/passwd"), "buffers[0].uri",
               "non-local URI")
    write_json("uri_http.gltf", with_buffer_uri("http://example.invalid/model.bin"),
               "buffers[0].uri", "non-local URI")
    write_json("uri_network_path.gltf", with_buffer_uri("//server/share/model.bin"),
               "buffers[0].uri", "non-local URI")
    write_json("uri_symlink_escape.gltf", with_buffer_uri("escape_link.bin"), "buffers[0].uri",
               "leaves the model's folder")
    os.symlink("/etc/hostname", HERE / "escape_link.bin")
    write_json("uri_missing_file.gltf", with_buffer_uri("not_here.bin"), "buffers[0].uri",
               "not found")
    write_json("image_uri_dotdot.gltf", textured({"uri": "../../../etc/passwd"}),
               "images[0].uri", "leaves the model's folder")
    write_json("data_uri_bad_base64.gltf",
               with_buffer_uri("data:application/octet-stream;base64,@@@@"),
               "buffers[0].uri", "bad base64")
    write_json("data_uri_wrong_media.gltf",
               with_buffer_uri("data:text/html;base64," + base64.b64encode(b"x" * 36).decode()),
               "buffers[0].uri", "not a buffer type")

    # ---- GLB container (Spec §GLB File Format) ----
    js, bin_chunk = glb_parts(base())
    write_bytes("glb_version_1.glb", glb([(len(js), J, js), (len(bin_chunk), BIN, bin_chunk)],
                                         version=1), "glb.header.version", "only 2")
    good = glb([(len(js), J, js), (len(bin_chunk), BIN, bin_chunk)])
    write_bytes("glb_length_too_big.glb", good[:8] + struct.pack("<I", len(good) + 100)
                + good[12:], "glb.header.length", "header says")
    write_bytes("glb_truncated.glb", good[: len(good) - 16], "glb.header.length", "header says")
    write_bytes("glb_json_chunk_overrun.glb", glb([(len(js) + 4096, J, js)]),
                "glb.chunks[0].chunkLength", "runs past the end")
    write_bytes("glb_bin_chunk_overrun.glb",
                glb([(len(js), J, js), (len(bin_chunk) * 50, BIN, bin_chunk)]),
                "glb.chunks[1].chunkLength", "runs past the end")
    write_bytes("glb_too_short.glb", b"glTF\x02\x00\x00\x00\x0c\x00\x00\x00", "glb.header",
                "too short")
    write_bytes("glb_first_chunk_bin.glb", glb([(len(bin_chunk), BIN, bin_chunk),
                                                (len(js), J, js)]),
                "glb.chunks[0].chunkType", "first chunk must be JSON")
    write_bytes("glb_no_bin_chunk.glb", glb([(len(js), J, js)]), "buffers[0].uri",
                "no GLB binary chunk")
    short_js = json.loads(js)
    short_js["buffers"][0]["byteLength"] = 10_000
    short_js = json.dumps(short_js).encode()
    short_js += b" " * (-len(short_js) % 4)
    write_bytes("glb_buffer_longer_than_bin.glb",
                glb([(len(short_js), J, short_js), (len(bin_chunk), BIN, bin_chunk)]),
                "buffers[0].byteLength", "only")

    # ---- JSON ----
    write_json("json_truncated.gltf", '{"asset": {"version": "2.0"}, "nodes": [', None,
               "not valid JSON")
    write_json("json_nan_literal.gltf", '{"asset": {"version": "2.0"}, "nodes": '
               '[{"translation": [NaN, 0, 0]}]}', None, "not valid JSON")
    write_json("json_deep_nesting.gltf", '{"asset": {"version": "2.0"}, "extras": '
               + "[" * 100_000 + "]" * 100_000 + "}", None, "not valid JSON")
    write_json("json_top_level_array.gltf", "[1, 2, 3]", None, "top level is not an object")
    write_json("json_gltf1.gltf", {"asset": {"version": "1.0"}}, "asset.version",
               "not glTF 2.x")
    write_bytes("json_not_utf8.gltf", b'{"asset": {"version": "2.0\xff\xfe"}}', None,
                "not valid JSON")
    tree = tree_of(base())
    tree["nodes"] = {"0": {"mesh": 0}}
    write_json("json_nodes_not_array.gltf", tree, "nodes", "must be a JSON array")
    tree = tree_of(base())
    tree["extensionsRequired"] = ["KHR_unknown_future_thing"]
    write_json("extension_required_unknown.gltf", tree, "extensionsRequired[0]",
               "KHR_unknown_future_thing")

    # ---- bufferViews and accessors checked against their buffers ----
    tree = tree_of(base())
    tree["bufferViews"][0]["byteOffset"] = 1 << 40
    write_json("view_outside_buffer.gltf", tree, "bufferViews[0].byteLength", "exceed buffers")
    tree = tree_of(base())
    tree["accessors"][0]["count"] = 1_000_000
    write_json("accessor_past_view.gltf", tree, "accessors[0].count", "bufferViews[0] has")
    tree = tree_of(base())
    tree["accessors"][0]["byteOffset"] = 32
    write_json("accessor_offset_past_view.gltf", tree, "accessors[0].count", "bufferViews[0] has")
    tree = tree_of(base())
    tree["bufferViews"][0]["byteStride"] = 252
    write_json("stride_overrun.gltf", tree, "accessors[0].count", "bufferViews[0] has")
    tree = tree_of(base())
    tree["bufferViews"][0]["byteStride"] = 6
    write_json("stride_not_multiple_of_4.gltf", tree, "bufferViews[0].byteStride",
               "not a multiple of 4")
    tree = tree_of(base())
    tree["accessors"][0]["count"] = -3
    write_json("count_negative.gltf", tree, "accessors[0].count", "out of range")
    tree = tree_of(base())
    tree["accessors"][0]["count"] = "3"
    write_json("count_string.gltf", tree, "accessors[0].count", "must be an integer")
    tree = tree_of(base())
    tree["accessors"][0]["componentType"] = 5130
    write_json("component_type_double.gltf", tree, "accessors[0].componentType",
               "unknown component type")
    tree = tree_of(base())
    tree["accessors"][0]["normalized"] = True
    write_json("normalized_float.gltf", tree, "accessors[0].normalized", "not allowed")
    tree = tree_of(base())
    tree["accessors"][0].pop("bufferView")
    tree["accessors"][0]["count"] = 2_000_000_000
    write_json("zeros_accessor_huge.gltf", tree, "accessors[0].count", "over the limit triangles")
    tree = tree_of(base())
    tree["meshes"][0]["primitives"][0]["attributes"]["POSITION"] = 7
    write_json("attribute_accessor_missing.gltf", tree,
               "meshes[0].primitives[0].attributes.POSITION", "accessors[7] does not exist")
    tree = tree_of(base())
    tree["accessors"][0]["bufferView"] = 9
    write_json("accessor_view_missing.gltf", tree, "accessors[0].bufferView",
               "bufferViews[9] does not exist")

    b = GltfBuilder()
    acc = b.sparse_accessor(TRI, 3, indices=[5], values=np.ones((1, 3), np.float32))
    b.scene([b.node(mesh=b.mesh(acc))])
    write_json("sparse_index_out_of_range.gltf", tree_of(b), "accessors[0].sparse.indices",
               ">= count")
    b = GltfBuilder()
    acc = b.sparse_accessor(TRI, 3, indices=[2, 1], values=np.ones((2, 3), np.float32))
    b.scene([b.node(mesh=b.mesh(acc))])
    write_json("sparse_indices_not_increasing.gltf", tree_of(b), "accessors[0].sparse.indices",
               "strictly increasing")

    # ---- indices ----
    write_json("index_out_of_range.gltf", tree_of(base(np.array([0, 1, 7], np.uint16))),
               "meshes[0].primitives[0].indices", "out of range")
    write_json("index_restart_marker.gltf", tree_of(base(np.array([0, 1, 65535], np.uint16))),
               "meshes[0].primitives[0].indices", "primitive-restart")
    tree = tree_of(base(np.array([0, 1, 2], np.uint16)))
    tree["accessors"][1]["componentType"] = 5126
    write_json("index_float.gltf", tree, "accessors[1]", "unsigned SCALAR")
    tree = tree_of(base())
    tree["meshes"][0]["primitives"][0]["mode"] = 9
    write_json("mode_unknown.gltf", tree, "meshes[0].primitives[0].mode", "out of range")

    # ---- node graph ----
    tree = tree_of(base())
    tree["nodes"] = [{"children": [1], "mesh": 0}, {"children": [0]}]
    write_json("node_cycle.gltf", tree, "nodes[0]", "cycle")
    tree = tree_of(base())
    tree["nodes"] = [{"children": [2]}, {"children": [2]}, {"mesh": 0}]
    tree["scenes"] = [{"nodes": [0, 1]}]
    write_json("node_two_parents.gltf", tree, "nodes[2]", "two parents")
    tree = tree_of(base())
    tree["nodes"] = [{"children": [0], "mesh": 0}]
    write_json("node_own_child.gltf", tree, "nodes[0]", "cycle")
    tree = tree_of(base())
    tree["scenes"][0]["nodes"] = [4]
    write_json("scene_node_missing.gltf", tree, "scenes[0].nodes[0]", "nodes[4] does not exist")
    tree = tree_of(base())
    tree["nodes"][0]["mesh"] = 3
    write_json("node_mesh_missing.gltf", tree, "nodes[0].mesh", "meshes[3] does not exist")
    tree = tree_of(base())
    tree["nodes"][0]["rotation"] = [0, 0, 0, 0]
    write_json("quaternion_zero.gltf", tree, "nodes[0].rotation", "zero-length")
    tree = tree_of(base())
    tree["nodes"][0]["scale"] = [1e400, 1, 1]  # json.dumps writes Infinity; rewritten below
    write_json("scale_overflow.gltf", json.dumps(tree).replace("Infinity", "1e400"),
               "nodes[0].scale[0]", "out of range")
    tree = tree_of(base())
    tree["scene"] = 2
    write_json("default_scene_missing.gltf", tree, "scene", "scenes[2] does not exist")
    tree = tree_of(base())
    tree.pop("scenes")
    tree.pop("scene")
    write_json("no_scenes.gltf", tree, "scenes", "no scene")

    # ---- images and textures ----
    write_json("image_huge_dimensions.gltf", textured({
        "uri": "data:image/png;base64," + base64.b64encode(png_header(60_000, 60_000)).decode()}),
        "images[0]", "image")
    write_json("image_not_an_image.gltf", textured({
        "uri": "data:image/png;base64," + base64.b64encode(b"GIF89a not really").decode()}),
        "images[0]", "neither PNG nor JPEG")
    write_json("image_truncated_png.gltf", textured({
        "uri": "data:image/png;base64," + base64.b64encode(truncated_png()).decode()}),
        "images[0]", "cannot decode image")
    tree = textured({"uri": "x.png"})
    tree["textures"][0]["source"] = 5
    write_json("texture_source_missing.gltf", tree, "textures[0].source",
               "images[5] does not exist")
    tree = tree_of(base())
    tree["materials"] = [{"alphaMode": "GLASS"}]
    write_json("alpha_mode_unknown.gltf", tree, "materials[0].alphaMode", "is not OPAQUE")
    tree = tree_of(base())
    tree["materials"] = [{"pbrMetallicRoughness": {"baseColorFactor": [2, 0, 0]}}]
    write_json("base_color_wrong_length.gltf", tree,
               "materials[0].pbrMetallicRoughness.baseColorFactor", "array of 4 numbers")

    # ---- cameras (Spec §Cameras) ----
    tree = tree_of(base())
    tree["cameras"] = [{"type": "perspective",
                        "perspective": {"yfov": 0.8, "znear": 1.0, "zfar": 0.5}}]
    tree["nodes"].append({"camera": 0})
    tree["scenes"][0]["nodes"].append(1)
    write_json("camera_zfar_before_znear.gltf", tree, "cameras[0].perspective.zfar",
               "out of range")
    tree = tree_of(base())
    tree["cameras"] = [{"type": "orthographic",
                        "orthographic": {"xmag": 0, "ymag": 1, "znear": 0, "zfar": 9}}]
    tree["nodes"].append({"camera": 0})
    tree["scenes"][0]["nodes"].append(1)
    write_json("camera_ortho_zero_xmag.gltf", tree, "cameras[0].orthographic",
               "must not be zero")

    bombs()
    preset_cases()
    (HERE / "expected.json").write_text(json.dumps(EXPECTED, indent=1, sort_keys=True) + "\n")
    print(f"{len(EXPECTED)} hostile files written to {HERE}")


if __name__ == "__main__":
    main()
