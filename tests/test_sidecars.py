"""Per-model exceptions (``<model>.shots.toml`` sidecars), and the preset commands that show
what a batch would use: ``shots preset show`` and ``shots preset schema``."""

import json
import shutil
import tomllib
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from shots.batch import run_batch
from shots.cli import app
from shots.errors import PresetError
from shots.presets import builtin_folder, builtin_preset_names, load_preset, sidecar_for

HERE = Path(__file__).parent
SAMPLES = HERE / "data" / "samples"
DEMO = HERE.parent / "assets_demo"

PRESET = """
extends = "thumbnail"
[image]
width = 40
height = 40
samples = 1
light_samples = 1
gloss_samples = 1
bounces = 1
[[shots]]
name = "hero"
kind = "views"
views = ["front_left"]
focal_length_mm = 50
"""
LONG_LENS = """
[look]
exposure = 0.5
[[shots]]
name = "hero"
kind = "views"
views = ["front_left"]
focal_length_mm = 135
elevation_deg = 25
"""


def catalog_with_sidecar(root: Path, sidecar: str = LONG_LENS) -> tuple[Path, Path]:
    catalog = root / "catalog"
    catalog.mkdir(parents=True)
    shutil.copy(SAMPLES / "Box.gltf", catalog)
    shutil.copy(DEMO / "oak_dining_chair.glb", catalog)
    (catalog / "oak_dining_chair.shots.toml").write_text(sidecar, encoding="utf-8")
    preset = root / "house.toml"
    preset.write_text(PRESET, encoding="utf-8")
    return catalog, preset


def rendered(log: Path) -> list[str]:
    events = [json.loads(line) for line in log.read_text().splitlines()]
    return sorted(e["model"] for e in events if e.get("status") == "rendered")


def batch(catalog, preset, out, log):
    return run_batch(catalog, preset, out, quiet=True, workers=1, animations=(), log_json=log)


def test_sidecar_is_merged_recorded_and_rerenders_only_its_model(tmp_path):
    catalog, preset = catalog_with_sidecar(tmp_path)
    out = tmp_path / "out"
    batch(catalog, preset, out, tmp_path / "1.jsonl")
    chair = json.loads((out / "manifests/oak_dining_chair.json").read_text())
    box = json.loads((out / "manifests/Box.json").read_text())
    assert chair["sidecar"]["file"] == "oak_dining_chair.shots.toml"
    assert box["sidecar"] is None
    # the merged lens: 135 mm on a 36 mm sensor is 2·atan(18/135) = 15.19° across (thin lens)
    import math

    camera = chair["frames"][0]["camera"]
    assert camera["yfov_deg"] == pytest.approx(math.degrees(2 * math.atan(18 / 135)), abs=0.01)
    assert chair["preset_sha256"] != box["preset_sha256"]

    sidecar = catalog / "oak_dining_chair.shots.toml"
    sidecar.write_text(LONG_LENS.replace("exposure = 0.5", "exposure = 0.25"), encoding="utf-8")
    batch(catalog, preset, out, tmp_path / "2.jsonl")
    assert rendered(tmp_path / "2.jsonl") == ["oak_dining_chair"]
    sidecar.unlink()
    batch(catalog, preset, out, tmp_path / "3.jsonl")
    assert rendered(tmp_path / "3.jsonl") == ["oak_dining_chair"]
    assert json.loads((out / "manifests/oak_dining_chair.json").read_text())["sidecar"] is None


@pytest.mark.parametrize(("text", "field", "words"), [
    ("[look]\nexposur = 1\n", "look.exposur", "did you mean 'exposure'"),
    ('[look]\ntone_map = "filmic"\n', "look.tone_map", "is not allowed"),
    ("[image]\nwidth = 800\n", "image.width", "cannot change the image size"),
    ('extends = "hero"\n', "extends", "a sidecar cannot set this"),
    ('[publish]\ncopyright = "x"\n', "publish", "a sidecar cannot set this"),
    ("[check]\nfill = 0.5\n", "check", "a sidecar cannot set this"),
    ("[limits]\ntriangles = 5\n", "limits", "a sidecar cannot set this"),
    ('[[shots]]\nname = "spin"\nkind = "turntable"\n', "shots[0]", "must keep the preset's shot"),
])
def test_broken_sidecars_stop_the_batch_naming_the_sidecar(tmp_path, text, field, words):
    catalog, preset = catalog_with_sidecar(tmp_path, text)
    sidecar = catalog / "oak_dining_chair.shots.toml"
    with pytest.raises(PresetError) as caught:
        run_batch(catalog, preset, tmp_path / "out", quiet=True, workers=1)
    message = str(caught.value)
    assert message.startswith(f"{sidecar}: {field}: ") and words in message, message
    assert not (tmp_path / "out").exists()


def test_sidecar_path_sits_beside_the_model():
    assert sidecar_for("/c/chairs/oak_dining_chair.glb") == Path("/c/chairs/oak_dining_chair.shots.toml")
    assert sidecar_for("box.gltf") == Path("box.shots.toml")


# --- shots preset show / schema -------------------------------------------------------------

runner = CliRunner()


@pytest.mark.parametrize("name", builtin_preset_names())
def test_shown_preset_loads_back_to_the_same_preset(tmp_path, name):
    result = runner.invoke(app, ["preset", "show", name])
    assert result.exit_code == 0, result.output
    shown = tmp_path / f"{name}.toml"
    shown.write_text(result.stdout, encoding="utf-8")
    assert "extends" not in tomllib.loads(result.stdout)
    assert load_preset(shown).model_dump() == load_preset(name).model_dump()


def test_show_merges_a_models_sidecar(tmp_path):
    catalog, preset = catalog_with_sidecar(tmp_path)
    result = runner.invoke(app, ["preset", "show", str(preset), "--model",
                                 str(catalog / "oak_dining_chair.glb")])
    assert result.exit_code == 0, result.output
    data = tomllib.loads(result.stdout)
    assert data["shots"][0]["focal_length_mm"] == 135 and data["look"]["exposure"] == 0.5
    assert data["image"]["width"] == 40  # from the house preset
    assert "oak_dining_chair.shots.toml" in result.stdout.splitlines()[0]


def test_show_refuses_a_broken_preset_on_one_line(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[image]\nwidth = 0\n", encoding="utf-8")
    result = runner.invoke(app, ["preset", "show", str(bad)])
    assert result.exit_code == 2
    assert result.output.strip().splitlines() == [
        f"error: {bad}: image.width: must be at least 1, got 0"]


def test_schema_accepts_every_builtin_and_refuses_bad_keys(tmp_path):
    # jsonschema (an independent validator of JSON Schema draft 2020-12) reads the schema
    target = tmp_path / "preset.schema.json"
    result = runner.invoke(app, ["preset", "schema", "-o", str(target)])
    assert result.exit_code == 0, result.output
    schema = json.loads(target.read_text())
    validator = jsonschema.Draft202012Validator(schema)
    for path in sorted(builtin_folder().glob("*.toml")):
        errors = list(validator.iter_errors(tomllib.loads(path.read_text())))
        assert not errors, (path.name, errors[0].message)
    assert list(validator.iter_errors({"image": {"widht": 10}}))
    assert list(validator.iter_errors({"derivatives": [{"name": "a", "format": "tiff",
                                                        "path": "a.tiff", "longest_side": 5}]}))
