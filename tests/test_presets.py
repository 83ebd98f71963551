"""Presets: the shipped files, extends/override, and one-line messages for broken files."""

import textwrap
from pathlib import Path

import numpy as np
import pytest
import trimesh

from shots.errors import PresetError
from shots.planner import plan_frames
from shots.presets import builtin_folder, builtin_preset_names, load_preset
from shots.scene import MaterialTable, Scene, default_material_params


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text))
    return path


def unit_box() -> Scene:
    mesh = trimesh.creation.box()
    n = len(mesh.vertices)
    return Scene(
        positions=np.asarray(mesh.vertices, np.float32),
        normals=np.tile(np.float32([0, 1, 0]), (n, 1)),
        tangents=np.zeros((n, 4), np.float32),
        uv=np.zeros((2, n, 2), np.float32),
        colors=np.ones((n, 4), np.float32),
        triangles=np.asarray(mesh.faces, np.int32),
        tri_material=np.zeros(len(mesh.faces), np.int32),
        materials=MaterialTable.from_rows([default_material_params()], ["default"]),
    )


def test_thumbnail_hero_turntable_elevation_still_and_rig_presets_are_shipped():
    names = set(builtin_preset_names())
    assert {"thumbnail", "hero", "turntable-24", "turntable-36", "turntable-72", "elevations",
            "rig-three-point", "rig-soft-overhead", "rig-high-key", "still"} <= names


@pytest.mark.parametrize("name", builtin_preset_names())
def test_every_shipped_preset_validates_and_plans(name):
    preset = load_preset(name)
    assert preset.name == name and Path(preset.source).parent == builtin_folder()
    assert preset.description
    if name.startswith("rig-"):  # light rigs are shared bases without shots
        assert preset.lights and not preset.shots
        return
    frames = plan_frames(preset, unit_box())
    assert frames and all(f.camera.width == preset.image.width for f in frames)


def test_shipped_presets_say_what_they_promise():
    thumbnail = load_preset("thumbnail")
    assert (thumbnail.image.width, thumbnail.image.height) == (512, 512)
    assert thumbnail.background.kind == "transparent"
    assert thumbnail.ground.kind == "shadow_catcher"
    assert thumbnail.image.samples == 0  # adaptive: samples where the noise is
    assert thumbnail.image.max_samples <= 256  # a CPU renderer: a modest ceiling
    for frames in (24, 36, 72):
        [shot] = load_preset(f"turntable-{frames}").shots
        assert shot.kind == "turntable" and shot.frames == frames
    [elevation] = load_preset("elevations").shots
    assert elevation.projection == "orthographic" and elevation.same_scale
    assert elevation.views == ["front", "left", "top"]
    hero = load_preset("hero")
    assert (hero.image.width, hero.image.height) == (1600, 1200) and len(hero.shots[0].views) > 1
    rig = {light.name for light in load_preset("rig-three-point").lights}
    assert rig == {"key", "fill", "rim"}


def test_a_user_preset_extends_a_builtin_and_overrides_keys(tmp_path):
    path = write(tmp_path, "mine.toml", """
        extends = "thumbnail"
        [image]
        width = 300
        [ground]
        shadow_strength = 0.25
    """)
    preset, base = load_preset(path), load_preset("thumbnail")
    assert preset.image.width == 300
    assert preset.image.height == base.image.height  # tables merge key by key
    assert preset.ground.kind == base.ground.kind and preset.ground.shadow_strength == 0.25
    assert preset.lights == base.lights and preset.shots == base.shots
    assert preset.source == str(path) and preset.name == "mine"


def test_shots_and_lights_are_replaced_not_merged(tmp_path):
    path = write(tmp_path, "mine.toml", """
        extends = "hero"
        [[shots]]
        name = "spin"
        kind = "turntable"
        frames = 6
        [[lights]]
        name = "only"
        kind = "point"
    """)
    preset = load_preset(path)
    assert [s.name for s in preset.shots] == ["spin"]
    assert [light.name for light in preset.lights] == ["only"]


def test_extends_a_list_and_relative_paths(tmp_path):
    write(tmp_path, "bases/look.toml", """
        [look]
        exposure = 1.5
    """)
    path = write(tmp_path, "mine.toml", """
        extends = ["hero", "rig-soft-overhead", "bases/look.toml"]
    """)
    preset = load_preset(str(path))
    assert preset.shots == load_preset("hero").shots
    assert preset.lights == load_preset("rig-soft-overhead").lights  # later parents win
    assert preset.look.exposure == 1.5


def test_environment_image_is_relative_to_the_preset_that_names_it(tmp_path):
    (tmp_path / "bases" / "studio.exr").parent.mkdir()
    (tmp_path / "bases" / "studio.exr").write_bytes(b"not really")
    write(tmp_path, "bases/parent.toml", """
        [environment]
        image = "studio.exr"
    """)
    path = write(tmp_path, "child.toml", 'extends = "bases/parent.toml"\n')
    image = load_preset(path).environment.image
    assert Path(image) == (tmp_path / "bases" / "studio.exr").resolve()


def test_with_image_size_keeps_everything_else():
    base = load_preset("still")
    sized = base.with_image_size(160, 120)
    assert (sized.image.width, sized.image.height) == (160, 120)
    assert sized.image.samples == base.image.samples and sized.shots == base.shots
    assert sized.source == base.source
    with pytest.raises(PresetError, match=r"image: must be at least 1, got 0"):
        base.with_image_size(0, 120)


def test_forced_samples_turn_adaptivity_off_and_keep_the_rest():
    base = load_preset("thumbnail")
    forced = base.with_samples(1024)
    assert base.image.samples == 0 and forced.image.samples == 1024
    assert forced.image.model_dump(exclude={"samples"}) == base.image.model_dump(exclude={"samples"})
    with pytest.raises(PresetError, match=r"image: must be at most 4096, got 5000"):
        base.with_samples(5000)


SHOT = 'name = "t"\nkind = "turntable"\n'
BROKEN = {
    "unknown key": (f"[[shots]]\n{SHOT}frame = 10\n",
                    "shots[0].frame: unknown key; did you mean 'frames'? (allowed: "),
    "string for an integer": ("[image]\nwidth = \"512\"\n",
                              "image.width: expected an integer, got the string '512'"),
    "boolean for an integer": (f"[[shots]]\n{SHOT}frames = true\n",
                               "shots[0].frames: expected an integer, got the boolean true"),
    "negative size": ("[image]\nheight = -5\n", "image.height: must be at least 1, got -5"),
    "fill above one": (f"[[shots]]\n{SHOT}fill = 1.5\n",
                       "shots[0].fill: must be at most 1.0, got 1.5"),
    "negative samples": ("[image]\nsamples = -1\n", "image.samples: must be at least 0, got -1"),
    "string for denoise": ('[image]\ndenoise = "yes"\n',
                           "image.denoise: expected true or false, got the string 'yes'"),
    "noise target of zero": ("[image]\nnoise_target = 0.0\n",
                             "image.noise_target: must be at least 0.1, got 0.0"),
    "too few minimum samples": ("[image]\nmin_samples = 4\n",
                                "image.min_samples: must be at least 8, got 4"),
    "minimum above maximum": ("[image]\nmin_samples = 64\nmax_samples = 32\n",
                              "image: min_samples (64) must not exceed max_samples (32)"),
    "unknown shot kind": ('[[shots]]\nname = "t"\nkind = "turntabel"\n',
                          "shots[0].kind: 'turntabel' is not a kind of shot; did you mean "
                          "'turntable'? ('views', 'turntable', 'orbit', 'path', 'file_camera')"),
    "no shot kind": ('[[shots]]\nname = "t"\n', "shots[0].kind: missing; say which kind"),
    "unknown tone map": ('[look]\ntone_map = "nuetral"\n',
                         "look.tone_map: 'nuetral' is not allowed; did you mean 'neutral'? "
                         "('neutral', "),
    "unknown table": ("[imgae]\nwidth = 3\n", "imgae: unknown key; did you mean 'image'?"),
    "unknown view": ('[[shots]]\nname = "v"\nkind = "views"\nviews = ["front", "frnt"]\n',
                     "shots[0].views[1]: 'frnt' is not allowed; did you mean 'front'?"),
    "short colour": ("[background]\ncolor = [1, 1]\n",
                     "background.color: expected 3 numbers, got 2"),
    "colour out of range": ("[background]\ncolor = [1, 2, 1]\n",
                            "background.color[1]: must be at most 1.0, got 2"),
    "fill and margin": (f"[[shots]]\n{SHOT}fill = 0.8\nmargin = 0.1\n",
                        "shots[0]: give fill or margin, not both"),
    "missing name": ('[[shots]]\nkind = "views"\n', "shots[0].name: required key is missing"),
    "bad name": ('[[shots]]\nname = "my shot"\nkind = "views"\n',
                 "shots[0].name: use only letters, digits"),
    "repeated name": (f"[[shots]]\n{SHOT}[[shots]]\n{SHOT}",
                      "shots[1].name: 't' is used by an earlier shot"),
    "two lenses": (f"[[shots]]\n{SHOT}yfov_deg = 30\nfocal_length_mm = 50\n",
                   "shots[0]: give one of yfov_deg, xfov_deg or focal_length_mm"),
    "lens on orthographic": (f'[[shots]]\n{SHOT}projection = "orthographic"\nyfov_deg = 30\n',
                             "shots[0]: lens keys do not apply to an orthographic shot"),
    "same scale on sphere framing": ('[[shots]]\nname = "v"\nkind = "views"\nsame_scale = true\n'
                                     'framing = "sphere"\n', "shots[0]: same_scale applies to "
                                                              "framing = 'tight'"),
    "scale without a scale": (f'[[shots]]\n{SHOT}framing = "scale"\n',
                              "shots[0]: framing = 'scale' needs pixels_per_metre"),
    "one path key": ('[[shots]]\nname = "p"\nkind = "path"\n[[shots.keys]]\neye = [1, 2, 3]\n',
                     "shots[0].keys: needs at least 2 item(s), got 1"),
    "bad camera reference": ('[[shots]]\nname = "f"\nkind = "file_camera"\ncamera = 1.5\n',
                             "shots[0].camera: expected a camera name or index, got the number"),
    "light kind": ('[[lights]]\nkind = "sopt"\n', "lights[0].kind: 'sopt' is not allowed; did "
                                                  "you mean 'spot'?"),
    "spot cones": ('[[lights]]\nkind = "spot"\ncone_deg = 20\ninner_cone_deg = 30\n',
                   "lights[0]: inner_cone_deg must be smaller than cone_deg"),
    "several problems": ("[image]\nwidth = 0\nheight = 0\n",
                         "image.width: must be at least 1, got 0 (and 1 more problem)"),
    "not TOML": ("[image\nwidth = 3\n", "not valid TOML"),
    "unknown builtin parent": ('extends = "thumbnial"\n',
                               "extends: no built-in preset 'thumbnial'; did you mean "
                               "'thumbnail'?"),
    "parent of a wrong type": ("extends = 3\n", "extends: expected a preset name or path"),
    "missing parent file": ('extends = "nowhere/base.toml"\n',
                            "extends: no such preset file 'nowhere/base.toml'"),
    "missing environment image": ('[environment]\nimage = "none.exr"\n',
                                  "environment.image: no such file 'none.exr'"),
}


@pytest.mark.parametrize("case", BROKEN)
def test_broken_presets_give_one_line_naming_file_key_and_choices(tmp_path, case):
    text, expected = BROKEN[case]
    path = write(tmp_path, "broken.toml", text)
    with pytest.raises(PresetError) as caught:
        load_preset(path)
    message = str(caught.value)
    assert "\n" not in message
    assert message.startswith(f"{path}: ")
    assert expected in message


def test_a_problem_in_an_inherited_key_names_the_parent_file(tmp_path):
    parent = write(tmp_path, "parent.toml", '[ground]\nkind = "floor"\n')
    child = write(tmp_path, "child.toml", 'extends = "parent.toml"\n[image]\nwidth = 64\n')
    with pytest.raises(PresetError) as caught:
        load_preset(child)
    assert str(caught.value).startswith(f"{parent}: ground.kind: 'floor' is not allowed")


def test_extends_loops_are_refused(tmp_path):
    write(tmp_path, "a.toml", 'extends = "b.toml"\n')
    write(tmp_path, "b.toml", 'extends = "a.toml"\n')
    with pytest.raises(PresetError, match=r"extends: presets extend each other in a loop: "
                                          r"a.toml → b.toml → a.toml"):
        load_preset(tmp_path / "a.toml")


def test_unknown_builtin_name_suggests_the_closest():
    with pytest.raises(PresetError, match=r"^herro: no built-in preset 'herro'; did you mean "
                                          r"'hero'\? \(built-in: .*elevations"):
        load_preset("herro")
    with pytest.raises(PresetError, match="no such preset file"):
        load_preset("missing/file.toml")
