"""Hostile presets (tests/data/hostile/presets, from make_hostile.py): non-finite numbers, deep
nesting, bytes that are not UTF-8, extends chains and diamonds, the [limits] table; each refused
with one line naming the file and the key, nothing else escapes."""

import json
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from shots import presets
from shots.cli import app
from shots.errors import PresetError, UsageError
from shots.limits import DEFAULT, with_overrides

PRESETS = Path(__file__).parent / "data" / "hostile" / "presets"
EXPECTED = json.loads((PRESETS / "expected.json").read_text())
SAMPLES = Path(__file__).parent / "data" / "samples"


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_hostile_preset_is_one_line_naming_file_and_key(name):
    with pytest.raises(PresetError) as err:
        presets.load_preset(PRESETS / name)
    assert err.value.field == EXPECTED[name]["field"]
    assert EXPECTED[name]["message"] in err.value.message
    assert err.value.source.endswith(EXPECTED[name].get("file", name))
    assert "\n" not in str(err.value)


def test_extends_diamond_reads_each_file_once(monkeypatch):
    # each level extends both files of the next: from diamond_0a, 2^8 paths reach the bottom
    # through 17 distinct files (0a, then levels 1 to 8), and each is read once
    reads = []
    real = presets._read_toml
    monkeypatch.setattr(presets, "_read_toml", lambda path: reads.append(path) or real(path))
    preset = presets.load_preset(PRESETS / "diamond_0a.toml")
    assert len(reads) == 17 and len(set(reads)) == 17
    assert preset.image.seed == 0  # the file's own key wins over every parent's


def test_limits_table_and_command_line_overrides(tmp_path):
    path = tmp_path / "p.toml"
    path.write_text("[limits]\ntriangles = 1000\nseconds = 2.5\n")
    preset = presets.load_preset(path)
    # parsing only: the [limits] values come back as written (nothing is timed here)
    written = {"triangles": 1000, "seconds": 2.5}
    assert {key: getattr(preset.limits, key) for key in written} == written
    assert preset.limits.texture_mb == DEFAULT.texture_mb
    assert with_overrides(preset.limits, ["triangles=5"]).triangles == 5
    for bad, field in (("triangles=inf", "triangles"), ("seconds=nan", "seconds"),
                       ("trianglez=5", "trianglez=5"), ("triangles=0", "triangles")):
        with pytest.raises(UsageError) as err:
            with_overrides(preset.limits, [bad])
        assert err.value.source == "--limit" and err.value.field == field


def test_limits_do_not_change_frame_keys(tmp_path):
    from shots.batch.jobs import preset_sha256

    path = tmp_path / "p.toml"
    path.write_text('extends = "thumbnail"\n')
    plain = presets.load_preset(path)
    path.write_text('extends = "thumbnail"\n[limits]\nseconds = 9\n')
    assert preset_sha256(presets.load_preset(path)) == preset_sha256(plain)


def test_plan_json_is_strict_json(tmp_path):
    result = CliRunner().invoke(app, ["plan", "thumbnail", str(SAMPLES / "Box.gltf"), "--json",
                                      "-o", str(tmp_path / "plan.png")])
    assert result.exit_code == 0, result.output

    def refuse(name):  # json.loads would otherwise accept NaN and Infinity (not JSON, RFC 8259)
        raise ValueError(name)

    rows = json.loads(result.stdout, parse_constant=refuse)
    assert rows and all(math.isfinite(v) for row in rows for v in row["eye"])


def test_plan_json_turns_non_finite_numbers_into_null():
    from shots.check.report import finite_or_null

    assert finite_or_null({"a": [1.0, math.nan], "b": (math.inf, "x")}) == \
        {"a": [1.0, None], "b": [None, "x"]}
