"""A batch prints each model's units and up-axis hints once, as `shots render` does (issue 7)."""

import io
import json

from broken_copies import intact_copy, scaled_copy, z_up_copy
from rich.console import Console

from shots.batch import run_batch

# The built-in thumbnail look at 24 px and one sample: only the hints matter here.
TINY = """
extends = "thumbnail"
[image]
width = 24
height = 24
samples = 1
light_samples = 1
gloss_samples = 1
bounces = 1
"""


def run(catalog, preset, out, log, quiet=False):
    """One batch on a captured 200-column console: (its text, the events of its JSON log)."""
    buffer = io.StringIO()
    console = Console(file=buffer, width=200, force_terminal=False, color_system=None)
    summary = run_batch(catalog, preset, out, workers=1, quiet=quiet, log_json=log, console=console)
    assert summary.exit_code == 0, summary.failures
    events = [json.loads(line) for line in log.read_text().splitlines()]
    return buffer.getvalue(), events


def hint_lines(text: str) -> list[str]:
    return [line for line in text.splitlines() if line.startswith("warning:")]


def test_each_hinted_model_gets_its_lines_once_naming_the_file_and_the_key(tmp_path):
    # The demo chair scaled ×100 (46 × 84 × 50 units: a chair's size in centimetres read as
    # metres, glTF 2.0 spec §Coordinate System and Units) and the demo stool turned Z-up
    # (tests/broken_copies.py), next to an intact lamp that gets no hint.
    catalog = tmp_path / "catalog"
    scaled = scaled_copy("oak_dining_chair", catalog)
    turned = z_up_copy("lacquered_counter_stool", catalog)
    intact_copy("brass_floor_lamp", catalog)
    preset = tmp_path / "tiny.toml"
    preset.write_text(TINY)
    text, events = run(catalog, preset, tmp_path / "out", tmp_path / "log.jsonl")

    lines = hint_lines(text)
    assert len([line for line in lines if scaled.name in line]) == 1, text
    chair = next(line for line in lines if scaled.name in line)
    assert "centimetres" in chair and '[model] units = "cm"' in chair
    stool = [line for line in lines if turned.name in line]
    assert stool and all('[model] up_axis = "z"' in line for line in stool), text
    assert not any("brass_floor_lamp" in line for line in lines), text
    assert len(lines) == 1 + len(stool)

    logged = [e for e in events if e["event"] == "hint"]
    assert sorted(e["model"] for e in logged) == sorted([scaled.stem] + [turned.stem] * len(stool))
    assert all(e["file"] and e["hint"] for e in logged)


def test_quiet_batch_logs_the_hint_and_an_up_to_date_rerun_repeats_it(tmp_path):
    catalog = tmp_path / "catalog"
    scaled = scaled_copy("oak_dining_chair", catalog)
    preset = tmp_path / "tiny.toml"
    preset.write_text(TINY)
    out = tmp_path / "out"
    text, events = run(catalog, preset, out, tmp_path / "quiet.jsonl", quiet=True)
    assert hint_lines(text) == []
    assert [e["model"] for e in events if e["event"] == "hint"] == [scaled.stem]

    # Nothing is rendered again; the hint comes back from the model's manifest.
    text, events = run(catalog, preset, out, tmp_path / "again.jsonl")
    assert not [e for e in events if e["event"] == "frame" and e["status"] == "rendered"]
    lines = hint_lines(text)
    assert len(lines) == 1 and scaled.name in lines[0], text


def test_a_preset_that_fixes_the_units_silences_the_hint(tmp_path):
    # `shots render` hints only when the preset leaves units and up axis to glTF's defaults.
    catalog = tmp_path / "catalog"
    scaled_copy("oak_dining_chair", catalog)
    preset = tmp_path / "cm.toml"
    preset.write_text(TINY + '[model]\nunits = "cm"\n')
    text, events = run(catalog, preset, tmp_path / "out", tmp_path / "log.jsonl")
    assert hint_lines(text) == []
    assert not [e for e in events if e["event"] == "hint"]
