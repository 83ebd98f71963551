"""Property-based fuzzing of the loaders, run by test_fuzz_bounded.py in a child process whose
address space is capped (RLIMIT_AS): any input may only give a result or a ShotsError.

    python tests/fuzz_child.py EXAMPLES WORKDIR

Three properties: mutated GLB bytes, mutated glTF JSON trees, and generated or mutated preset
TOML. A budget that fails to hold shows up as a MemoryError or a "not enough memory" GltfError,
both counted as failures. Exit code 0 when every example passed.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))

from test_gltf_hostile import PATHS, RICH_GLB, edited_tree, json_values  # noqa: E402

from shots.errors import GltfError, PresetError, ShotsError  # noqa: E402
from shots.gltf import load_scene  # noqa: E402
from shots.limits import Limits  # noqa: E402
from shots.presets import Preset, load_preset  # noqa: E402

LIMITS = Limits(triangles=10_000, instances=1_000, texture_pixels=1 << 16, texture_mb=4,
                json_values=50_000)
WORK = Path(sys.argv[2]) if len(sys.argv) > 2 else Path(".")


def settings_for(examples: int):
    return settings(max_examples=examples, deadline=None, database=None,
                    suppress_health_check=list(HealthCheck))


def load_model(path: Path) -> None:
    try:
        load_scene(path, limits=LIMITS)
    except GltfError as exc:
        assert "not enough memory" not in exc.message, f"a budget did not hold: {exc}"


# --- preset TOML ------------------------------------------------------------------------------

# the preset's tables (its keys whose value is one pydantic model; lists and scalars are not)
TABLES = [name for name, field in Preset.model_fields.items()
          if isinstance(field.annotation, type) and hasattr(field.annotation, "model_fields")]
KEYS = sorted({key for name in TABLES
               for key in Preset.model_fields[name].annotation.model_fields}
              | {"name", "kind", "frames", "views", "eye", "keys", "extends", "x"})
toml_scalars = (st.integers(-(2**63), 2**63 - 1) | st.floats() | st.booleans()
                | st.text(max_size=12) | st.sampled_from(["thumbnail", "../x.toml", "turntable",
                                                           "views", "path", "front"]))
toml_values = st.recursive(toml_scalars, lambda inner: st.lists(inner, max_size=4)
                           | st.dictionaries(st.sampled_from(KEYS), inner, max_size=3),
                           max_leaves=8)


def toml_text(value) -> str:
    """A TOML inline value (TOML 1.0: inf, -inf and nan are floats; strings JSON-escaped)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return ("nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")) \
            if not math.isfinite(value) else repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_text(v) for v in value) + "]"
    return "{" + ", ".join(f"{k} = {toml_text(v)}" for k, v in value.items()) + "}"


preset_documents = st.dictionaries(
    st.sampled_from(TABLES + ["lights", "shots", "description", "extends"]),
    st.dictionaries(st.sampled_from(KEYS), toml_values, max_size=4) | toml_values, max_size=4)


def document_text(document: dict) -> str:
    lines = [f"{key} = {toml_text(value)}" for key, value in document.items()]
    return "\n".join(lines) + "\n"


def load_preset_text(data: bytes) -> None:
    path = WORK / "fuzzed.toml"
    path.write_bytes(data)
    try:
        load_preset(path)
    except PresetError:
        pass


BASE_PRESET = (Path(__file__).parent.parent / "presets" / "thumbnail.toml").read_bytes()


def main(examples: int) -> int:
    @settings_for(examples)
    @given(flips=st.lists(st.tuples(st.integers(0, len(RICH_GLB) - 1), st.integers(0, 255)),
                          min_size=1, max_size=8),
           cut=st.none() | st.integers(0, len(RICH_GLB)))
    def glb_bytes(flips, cut):
        data = bytearray(RICH_GLB)
        for position, value in flips:
            data[position] = value
        (WORK / "fuzzed.glb").write_bytes(bytes(data if cut is None else data[:cut]))
        load_model(WORK / "fuzzed.glb")

    @settings_for(examples)
    @given(edits=st.lists(st.tuples(st.sampled_from(PATHS), json_values | st.just("<delete>")),
                          min_size=1, max_size=4))
    def gltf_json(edits):
        (WORK / "fuzzed.gltf").write_text(json.dumps(edited_tree(edits)))
        load_model(WORK / "fuzzed.gltf")

    @settings_for(examples)
    @given(document=preset_documents)
    def preset_toml(document):
        load_preset_text(document_text(document).encode())

    @settings_for(examples)
    @given(flips=st.lists(st.tuples(st.integers(0, len(BASE_PRESET) - 1),
                                    st.sampled_from(b'[]{}="\\,.0e\n\xff\x00 inf')),
                          min_size=1, max_size=6))
    def preset_bytes(flips):
        data = bytearray(BASE_PRESET)
        for position, value in flips:
            data[position] = value
        load_preset_text(bytes(data))

    failures = 0
    for prop in (glb_bytes, gltf_json, preset_toml, preset_bytes):
        try:
            prop()
        except (AssertionError, Exception) as exc:  # anything but a ShotsError escaped
            if isinstance(exc, ShotsError):
                raise AssertionError("a ShotsError passed the catch") from exc
            failures += 1
            print(f"{prop.__name__}: {type(exc).__name__}: {exc}", file=sys.stderr)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main(int(sys.argv[1])))
