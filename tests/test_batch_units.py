"""Batch infrastructure on its own: path template, hashes, frame counts, chunks, catalog
discovery, manifests, animation encoders and the contact sheet."""

import hashlib
import json
import shutil
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
from PIL import Image

from shots.batch import encode, jobs, manifest
from shots.batch.catalog import find_models
from shots.batch.layout import Layout
from shots.batch.sheet import PAD, THUMB, SheetCell, contact_sheet_bytes
from shots.errors import BatchError
from shots.gltf import load_scene
from shots.planner import plan_frames
from shots.presets import load_preset

SAMPLES = Path(__file__).parent / "data" / "samples"
DEMO = Path(__file__).parent.parent / "assets_demo"

TINY = """
extends = "thumbnail"
[image]
width = 48
height = 48
samples = 1
[[shots]]
name = "hero"
kind = "views"
views = ["front_left", "back"]
[[shots]]
name = "spin"
kind = "turntable"
frames = 4
[[shots]]
name = "arc"
kind = "orbit"
frames = 3
"""


@pytest.fixture
def tiny_preset(tmp_path):
    path = tmp_path / "tiny.toml"
    path.write_text(TINY)
    return load_preset(path)


# --- the path template ---------------------------------------------------------------------


def test_default_template_places_every_field(tmp_path):
    layout = Layout.create(tmp_path)
    assert layout.frame_path("chair", "oak", "spin", 7, "48x48") == "chair/oak/spin/007.png"
    # a shot's animation sits beside the folder of its frames
    assert layout.animation_path("chair", "oak", "spin", "48x48", "gif") == "chair/oak/spin.gif"


def test_template_format_specs_and_size(tmp_path):
    # Python docs, "Format Specification Mini-Language": 04d pads an integer to four digits
    layout = Layout.create(tmp_path, "{size}/{model}_{shot}_{frame:04d}.png")
    assert layout.frame_path("m", "v", "s", 12, "640x480") == "640x480/m_s_0012.png"
    assert layout.animation_path("m", "v", "s", "640x480", "mp4") == "640x480/m_s.mp4"


@pytest.mark.parametrize("template", [
    "{model.__class__}/{frame}.png",    # attribute access (Python docs, Format String Syntax)
    "{model[0]}/{frame}.png",           # index access
    "{0}/{frame}.png", "{}/{frame}.png",  # positional and automatic numbering
    "{model!r}/{frame}.png",            # conversion
    "{model:{shot}}/{frame}.png",       # nested replacement field in the spec
    "{sku}/{frame}.png",                # unknown field
    "../{model}/{frame}.png",           # leaves the output folder
    "{model}/../../{frame}.png",
    "/srv/{model}/{frame}.png",         # absolute
    "{model}/{frame}.jpg",              # frames are PNG
    "{model:04d}/{frame}.png",          # a spec that does not fit a string
    "manifests/{model}/{frame}.png",    # the batch's own folder
    "{model}/{frame}/{frame}.png",      # frame twice
    "{model",                           # unbalanced brace
])
def test_refused_templates(tmp_path, template):
    with pytest.raises(BatchError):
        Layout.create(tmp_path, template)


def test_values_are_sanitised_into_one_component(tmp_path):
    layout = Layout.create(tmp_path)
    path = layout.frame_path("../../etc", "..", "a/b", 1, "48x48")
    assert ".." not in Path(path).parts
    assert len(Path(path).parts) == 4  # the template's four components, no more
    assert (tmp_path / path).resolve().is_relative_to(tmp_path.resolve())


def test_a_reserved_name_is_refused_when_reached(tmp_path):
    layout = Layout.create(tmp_path, "{model}.png")
    with pytest.raises(BatchError):
        layout.frame_path("contact_sheet", "default", "s", 0, "1x1")


# --- hashes ---------------------------------------------------------------------------------


def test_sha256_file_matches_the_fips_example(tmp_path):
    path = tmp_path / "abc.txt"
    path.write_bytes(b"abc")
    # FIPS 180-2, Appendix B.1: SHA-256("abc")
    assert jobs.sha256_file(path) == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")


def test_model_hash_covers_external_files(tmp_path):
    folder = tmp_path / "box"
    shutil.copytree(SAMPLES / "BoxWithSpaces", folder)
    model = folder / "Box With Spaces.gltf"
    file_hash, inputs = jobs.model_hashes(model)
    assert file_hash == hashlib.sha256(model.read_bytes()).hexdigest()
    texture = folder / "glTF Logo With Spaces.png"  # named "glTF%20Logo%20With%20Spaces.png"
    texture.write_bytes(texture.read_bytes() + b"\0")
    file_hash2, inputs2 = jobs.model_hashes(model)
    assert file_hash2 == file_hash and inputs2 != inputs


def test_glb_hash_reads_its_json_chunk(tmp_path):
    model = DEMO / "oak_dining_chair.glb"
    assert jobs._external_uris(model) == set()  # everything is inside the GLB
    file_hash, inputs = jobs.model_hashes(model)
    assert file_hash == hashlib.sha256(model.read_bytes()).hexdigest() != inputs


def test_preset_hash_follows_what_changes_pixels(tmp_path):
    (tmp_path / "a.toml").write_text(TINY)
    (tmp_path / "b.toml").write_text('description = "other words"\n' + TINY)
    (tmp_path / "c.toml").write_text(TINY.replace("samples = 1", "samples = 4"))
    a, b, c = (jobs.preset_sha256(load_preset(tmp_path / f"{n}.toml")) for n in "abc")
    assert a == jobs.preset_sha256(load_preset(tmp_path / "a.toml"))
    assert a == b  # the description changes no pixel
    assert a != c


def test_frame_keys_differ_in_every_input():
    frame = jobs.FrameId("default", "spin", 0)
    base = jobs.frame_key("m", "p", "1", 8, frame)
    others = [
        jobs.frame_key("m2", "p", "1", 8, frame), jobs.frame_key("m", "p2", "1", 8, frame),
        jobs.frame_key("m", "p", "2", 8, frame), jobs.frame_key("m", "p", "1", 16, frame),
        jobs.frame_key("m", "p", "1", 8, jobs.FrameId("oat", "spin", 0)),
        jobs.frame_key("m", "p", "1", 8, jobs.FrameId("default", "hero", 0)),
        jobs.frame_key("m", "p", "1", 8, jobs.FrameId("default", "spin", 1)),
    ]
    assert len({base, *others}) == 8


def test_frame_counts_agree_with_the_planner(tiny_preset):
    scene = load_scene(SAMPLES / "Box.gltf")
    planned = [(f.shot, f.index) for f in plan_frames(tiny_preset, scene)]
    ours = [(f.shot, f.index) for f in jobs.frame_ids(tiny_preset, "default")]
    assert ours == planned
    assert jobs.shot_frame_counts(tiny_preset) == [("hero", 2), ("spin", 4), ("arc", 3)]


@pytest.mark.parametrize("workers", [1, 2, 3])
def test_chunks_cover_every_frame_once(tiny_preset, workers):
    job_list = [
        jobs.ModelVariantJob(f"m{k}", "h", "default", jobs.frame_ids(tiny_preset, "default"))
        for k in range(3)
    ]
    tasks = jobs.chunk_tasks(job_list, workers, tiny_preset, "hash", 8, False)
    covered = sorted((t.model, shot, index) for t in tasks for shot, index in t.frames)
    expected = sorted((j.model, f.shot, f.index) for j in job_list for f in j.pending)
    assert covered == expected
    if workers == 1:
        assert len(tasks) == 3  # one chunk per model: each model loads once
    else:
        assert len(tasks) >= workers


def test_chunks_shrink_toward_the_end_of_the_run(tiny_preset):
    # Guided self-scheduling (Polychronopoulos & Kuck 1987): a chunk takes at most a share of
    # the frames still to hand out, so the last ones are single frames and workers end together.
    frames = [jobs.FrameId("default", "spin", k) for k in range(24)]
    tasks = jobs.chunk_tasks([jobs.ModelVariantJob("m", "h", "default", frames)], 2,
                             tiny_preset, "hash", 8, False)
    sizes = [len(t.frames) for t in tasks]
    assert sum(sizes) == 24 and sizes == sorted(sizes, reverse=True)
    assert sizes[0] == 24 // (jobs.TAIL_SHARE * 2) and sizes[-2:] == [1, 1]
    assert [i for t in tasks for _, i in t.frames] == list(range(24))  # in order, once each
    # many models: every model but the last few stays one chunk (loaded once)
    many = [jobs.ModelVariantJob(f"m{k}", "h", "default", frames) for k in range(20)]
    tasks = jobs.chunk_tasks(many, 2, tiny_preset, "hash", 8, False)
    whole = [t.model for t in tasks if len(t.frames) == 24]
    assert whole == [f"m{k}" for k in range(len(whole))] and len(whole) >= 16


# --- the catalog -----------------------------------------------------------------------------


def test_folder_is_searched_recursively_in_order(tmp_path):
    (tmp_path / "b").mkdir()
    (tmp_path / ".hidden").mkdir()
    for name in ("b/two.glb", "one.gltf", "b/notes.txt", ".hidden/three.glb", "UP.GLB"):
        (tmp_path / name).write_bytes(b"x")
    models = find_models(tmp_path)
    assert [m.listed_as for m in models] == ["UP.GLB", "b/two.glb", "one.gltf"]
    assert [m.name for m in models] == ["UP", "two", "one"]


def test_list_file_paths_are_relative_to_it(tmp_path):
    (tmp_path / "lists").mkdir()
    (tmp_path / "lists" / "catalog.txt").write_text(
        "# the spring range\n\n../models/a.glb\n  ../models/b c.gltf  \n")
    models = find_models(tmp_path / "lists" / "catalog.txt")
    assert [m.path for m in models] == [(tmp_path / "models" / "a.glb").resolve(),
                                        (tmp_path / "models" / "b c.gltf").resolve()]
    assert models[1].name == "b-c"


def test_bad_sources(tmp_path):
    with pytest.raises(BatchError):
        find_models(tmp_path / "nowhere")
    with pytest.raises(BatchError):
        find_models(tmp_path)  # an empty folder
    (tmp_path / "list.txt").write_text("model.obj\n")
    with pytest.raises(BatchError):
        find_models(tmp_path / "list.txt")


# --- manifests ------------------------------------------------------------------------------


def test_manifest_round_trip_and_rejection(tmp_path):
    document = manifest.manifest_document(
        {"model": "m"},
        [{"variant": "v", "shot": "b", "frame": 1}, {"variant": "v", "shot": "a", "frame": 0}],
        [], {"render_s": 1.0})
    path = tmp_path / "m.json"
    assert manifest.write_if_changed(path, manifest.json_bytes(document))
    assert not manifest.write_if_changed(path, manifest.json_bytes(document))
    read = manifest.read_manifest(path)
    assert [f["shot"] for f in read["frames"]] == ["a", "b"]  # canonical order
    path.write_text(json.dumps({"format": "something else", "frames": [], "animations": []}))
    assert manifest.read_manifest(path) is None
    path.write_text("{not json")
    assert manifest.read_manifest(path) is None


def test_index_csv_has_a_row_per_file():
    frames = [{"model": "m", "variant": "v", "shot": "s", "frame": 0, "view": "", "width": 4,
               "height": 4, "key": "k", "path": "m/v/s/000.png", "exr": "m/v/s/000.exr"}]
    animations = [{"model": "m", "variant": "v", "shot": "s", "format": "gif",
                   "path": "m/v/s.gif", "width": 4, "height": 4, "key": "a"}]
    lines = manifest.index_csv_bytes(frames, animations).decode().splitlines()
    assert lines[0].split(",") == list(manifest.CSV_COLUMNS)
    assert [line.split(",")[5] for line in lines[1:]] == ["png", "exr", "gif"]


# --- encoders ---------------------------------------------------------------------------------


def _frames(count=4, height=48, width=48):
    """Distinct frames: a bar that moves, half-transparent background."""
    frames = []
    for k in range(count):
        rgba = np.zeros((height, width, 4), np.uint8)
        rgba[..., 3] = 128
        rgba[:, 8 * k : 8 * k + 8] = (200, 30, 30, 255)
        frames.append(rgba)
    return frames


def test_flatten_is_over_in_linear_light():
    rgba = np.array([[[255, 255, 255, 0], [255, 255, 255, 255], [255, 255, 255, 128]]], np.uint8)
    flat = encode.flatten(rgba, (0.0, 0.0, 0.0))
    assert flat[0, 0].tolist() == [0, 0, 0]
    assert flat[0, 1].tolist() == [255, 255, 255]
    # half-covered white over black: linear 128/255 = 0.502 → sRGB 1.055·0.502^(1/2.4) − 0.055
    # = 0.7363 → code 188 (IEC 61966-2-1 §5.2 encoding)
    assert flat[0, 2].tolist() == [188, 188, 188]


def test_flatten_table_equals_over_pixel_by_pixel():
    # Porter & Duff (1984) "over" in linear light, sRGB decoded and encoded per IEC 61966-2-1
    # §5.2, computed here for each pixel on its own in float64.
    rng = np.random.default_rng(7)
    rgba = rng.integers(0, 256, (40, 40, 4), dtype=np.uint8)
    rgba[:4, :, 3] = 0
    rgba[4:8, :, 3] = 255
    for background in [(1.0, 1.0, 1.0), (0.92, 0.5, 0.13)]:
        flat = encode.flatten(rgba, background)
        for y, x in np.ndindex(rgba.shape[:2]):
            a = rgba[y, x, 3] / 255.0
            for c in range(3):
                colour = _decode(rgba[y, x, c] / 255.0) * a + _decode(background[c]) * (1 - a)
                expected = 255.0 * _encode(colour)
                # the batch mixes in float32: a code may round the other way at a tie
                assert abs(int(flat[y, x, c]) - expected) <= 0.5 + 1e-3, (y, x, c)


def _decode(v: float) -> float:
    return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4


def _encode(v: float) -> float:
    v = min(max(v, 0.0), 1.0)
    return 12.92 * v if v <= 0.0031308 else 1.055 * v ** (1 / 2.4) - 0.055


def test_gif_loops_forever_with_every_frame(tmp_path):
    data = encode.encode_animations(("gif",), _frames(), 12.0, (1.0, 1.0, 1.0))["gif"]
    path = tmp_path / "a.gif"
    path.write_bytes(data)
    frames = iio.imread(path, index=None)
    assert frames.shape[:3] == (4, 48, 48)
    with Image.open(path) as image:
        assert image.info.get("loop") == 0  # NETSCAPE2.0 loop count 0 = forever
        assert image.info.get("duration") == 80  # 12 fps → 8.3 cs → 8 cs (GIF89a delay unit)
    # transparency flattened onto white: the half-transparent black background is grey
    assert np.all(frames[0, 0, 40, :3] > 100)


def test_webp_keeps_alpha_and_loops(tmp_path):
    path = tmp_path / "a.webp"
    path.write_bytes(encode.webp_bytes(_frames(), 12.0))
    with Image.open(path) as image:
        assert image.n_frames == 4 and image.size == (48, 48)
        assert image.info.get("loop") == 0
        image.seek(0)
        rgba = np.asarray(image.convert("RGBA"))
    assert np.array_equal(rgba, _frames()[0])  # lossless


def test_mp4_reads_back_with_every_frame(tmp_path):
    path = tmp_path / "a.mp4"
    path.write_bytes(encode.encode_animations(("mp4",), _frames(), 12.0, (1.0,) * 3)["mp4"])
    frames = iio.imread(path, index=None)
    assert frames.shape == (4, 48, 48, 3)
    # the red bar survives H.264 within a loose tolerance (lossy, 4:2:0 chroma)
    assert frames[0, 24, 4, 0] > 150 and frames[0, 24, 4, 1] < 100
    assert encode.encode_animations(("mp4",), _frames(), 12.0, (1.0,) * 3)["mp4"] == \
        path.read_bytes()  # deterministic: a rerun gives the same bytes


def test_mp4_of_an_odd_size_is_padded_to_even(tmp_path):
    path = tmp_path / "odd.mp4"
    path.write_bytes(encode.encode_animations(("mp4",), _frames(2, 31, 45), 12.0, (1.0,) * 3)["mp4"])
    assert iio.imread(path, index=None).shape == (2, 32, 46, 3)  # yuv420p needs even sizes


def test_16_bit_png_reads_back_as_nearest_8_bit(tmp_path):
    from shots.output import png_bytes

    display = np.zeros((2, 2, 4))
    display[..., 0] = 0.5
    display[..., 3] = 1.0
    path = tmp_path / "a.png"
    path.write_bytes(png_bytes(display, 16))
    codes = encode.read_rgba8(path)
    assert codes[0, 0].tolist() == [128, 0, 0, 255]  # round(0.5 × 255) = 127.5 → 128


# --- contact sheet ----------------------------------------------------------------------------


def test_contact_sheet_grid(tmp_path):
    paths = []
    for k, colour in enumerate([(255, 0, 0, 255), (0, 0, 255, 255), (0, 255, 0, 255)]):
        image = np.zeros((48, 48, 4), np.uint8)
        image[:] = colour
        paths.append(tmp_path / f"{k}.png")
        Image.fromarray(image, "RGBA").save(paths[-1])
    rows = [[SheetCell(paths[0], "chair", "oak / hero"), SheetCell(paths[1], "chair", "b")],
            [SheetCell(paths[2], "a very long model name that cannot fit", "x")]]
    sheet = Image.open(__import__("io").BytesIO(contact_sheet_bytes(rows)))
    width, height = sheet.size
    assert width == 2 * (THUMB + 2 * PAD)
    assert height > 2 * THUMB
    pixels = np.asarray(sheet.convert("RGB"))
    centre = PAD + THUMB // 2
    assert pixels[centre, centre].tolist() == [255, 0, 0]  # first cell: the red image
    assert pixels[centre, centre + THUMB + 2 * PAD].tolist() == [0, 0, 255]
    assert pixels[centre + height // 2, centre].tolist() == [0, 255, 0]
    caption_row = pixels[PAD + THUMB + 2 : PAD + THUMB + 14, PAD : PAD + THUMB]
    assert caption_row.min() < 128  # some ink in the caption


def test_single_shot_sheet_wraps_into_a_grid(tmp_path):
    # Six one-shot rows (a thumbnail catalog) make a 3 × 2 grid, in catalog order.
    paths = []
    for k in range(6):
        image = np.zeros((48, 48, 4), np.uint8)
        image[:] = (40 * k, 0, 255 - 40 * k, 255)
        paths.append(tmp_path / f"{k}.png")
        Image.fromarray(image, "RGBA").save(paths[-1])
    rows = [[SheetCell(p, f"model {k}", "default / thumbnail")] for k, p in enumerate(paths)]
    sheet = Image.open(__import__("io").BytesIO(contact_sheet_bytes(rows)))
    cell_w = THUMB + 2 * PAD
    assert sheet.size[0] == 3 * cell_w
    pixels = np.asarray(sheet.convert("RGB"))
    centre = PAD + THUMB // 2
    cell_h = sheet.size[1] // 2
    assert pixels[centre, centre + 2 * cell_w].tolist() == [80, 0, 175]  # third model, row 0
    assert pixels[centre + cell_h, centre].tolist() == [120, 0, 135]  # fourth model, row 1
