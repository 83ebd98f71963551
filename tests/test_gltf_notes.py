"""What a file asks for and the renderer does not use is named once per model, as a Note.

Each check names the glTF 2.0 spec section or extension README that defines the feature.
"""

from __future__ import annotations

import pickle

import numpy as np
from gltf_builder import GltfBuilder

from shots.gltf import load_scene
from shots.gltf.notes import IGNORED, WARNING, Note

TRI = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)
UP = np.array([[0, 0, 1]] * 3, np.float32)


def ignored(scene) -> list[str]:
    return [str(n) for n in scene.warnings if getattr(n, "kind", WARNING) == IGNORED]


def test_plain_triangle_has_no_notes(tmp_path):
    # glTF 2.0 spec §Scenes: with a `scene` property nothing is chosen for the user
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    assert load_scene(b.write_glb(tmp_path / "m.glb")).warnings == ()


def test_single_scene_without_scene_property_is_noted(tmp_path):
    # glTF 2.0 spec §Scenes: without `scene` the client chooses; say that scene 0 was used
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))], default=False)
    notes = load_scene(b.write_glb(tmp_path / "m.glb")).warnings
    assert [str(n) for n in notes] == ["no `scene` property: scene 0 used"]


def test_skins_morph_targets_animations_named_once(tmp_path):
    # glTF 2.0 spec §Skins, §Morph Targets, §Animations: not applied, so the rest pose is drawn
    b = GltfBuilder()
    target = {"POSITION": b.accessor(np.zeros((3, 3), np.float32), min_max=True)}
    prim = b.primitive(TRI, normals=UP, targets=[target])
    mesh = b.mesh(primitives=[prim])
    joint = b.node()
    b.gltf["skins"] = [{"joints": [joint]}]
    nodes = [b.node(mesh=mesh, skin=0), b.node(mesh=mesh, translation=[2, 0, 0])]
    b.scene(nodes + [joint])
    times = b.accessor(np.array([0.0, 1.0], np.float32))
    moves = b.accessor(np.zeros((2, 3), np.float32), min_max=False)
    b.gltf["animations"] = [{"samplers": [{"input": times, "output": moves}],
                             "channels": [{"sampler": 0, "target": {"node": 0,
                                                                    "path": "translation"}}]}]
    notes = ignored(load_scene(b.write_glb(tmp_path / "m.glb")))
    assert sum("skins" in n for n in notes) == 1
    assert sum("morph targets in 1 mesh" in n for n in notes) == 1  # one mesh, used twice
    assert sum("1 animation(s)" in n for n in notes) == 1


def test_points_and_lines_counted_in_one_note(tmp_path):
    # glTF 2.0 spec §Meshes, mode 0..3: no surface; one note per model, not per primitive
    b = GltfBuilder()
    prims = [b.primitive(TRI, mode=0), b.primitive(TRI, mode=0), b.primitive(TRI, mode=1),
             b.primitive(TRI, normals=UP)]
    b.scene([b.node(mesh=b.mesh(primitives=prims))])
    notes = ignored(load_scene(b.write_glb(tmp_path / "m.glb")))
    assert notes == ["primitives without a surface not rendered: 1 LINES, 2 POINTS"]


def test_unsupported_extension_is_named_and_used_fields_are_not(tmp_path):
    # glTF 2.0 spec §Specifying Extensions (optional ones may be ignored), §Samplers (minFilter);
    # KHR_materials_clearcoat README: clearcoatNormalTexture is used, so it is not named
    b = GltfBuilder()
    tex = b.image_png(np.full((2, 2, 4), 128, np.uint8), sampler={"minFilter": 9987})
    mat = b.material(pbrMetallicRoughness={"baseColorTexture": {"index": tex}},
                     extensions={"KHR_materials_clearcoat": {
                         "clearcoatFactor": 1.0, "clearcoatNormalTexture": {"index": tex}},
                         "VENDOR_made_up": {}})
    b.use_extension("KHR_materials_clearcoat")
    b.use_extension("VENDOR_made_up")
    uv = np.zeros((3, 2), np.float32)
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP, uv0=uv, material=mat))])
    notes = ignored(load_scene(b.write_glb(tmp_path / "m.glb")))
    assert "extensions ignored: VENDOR_made_up" in notes
    assert not any("minFilter" in n for n in notes)  # mipmaps are sampled (§Samplers)
    assert not any("clearcoatNormalTexture" in n for n in notes)


def test_file_text_is_shown_literally(tmp_path):
    # an extension name is file text: control characters must not reach a terminal
    b = GltfBuilder()
    b.use_extension("EVIL_\x1b[2Jclear")
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    notes = ignored(load_scene(b.write_glb(tmp_path / "m.glb")))
    assert notes == ["extensions ignored: EVIL_\\x1b[2Jclear"]


def test_note_keeps_its_kind_across_processes():
    # batch workers send notes through pickle
    note = pickle.loads(pickle.dumps(Note("x", IGNORED)))
    assert note == "x" and note.kind == IGNORED


def test_batch_summary_names_each_models_notes(tmp_path):
    # the batch summary lists every model's notes, file text shown literally (no markup)
    from rich.console import Console

    from shots.batch.progress import print_summary
    from shots.batch.run import BatchSummary, ModelOutcome

    model = ModelOutcome(model="lamp", listed_as="lamp.glb", variants=[], rendered=1, skipped=0,
                         failed=0, error=None, notes=["1 animation(s) not played [red]x[/]\x07"])
    summary = BatchSummary(out_dir=tmp_path, models=[model], animations_written=0, seconds=1.0,
                           index=None, contact_sheet=None)
    console = Console(record=True, width=200)
    print_summary(summary, console)
    text = console.export_text()
    assert "note: lamp.glb: 1 animation(s) not played [red]x[/]\\x07" in text
