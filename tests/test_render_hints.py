"""`shots render` warns when a model looks like centimetres (units hint, issue 8)."""

import numpy as np
import trimesh
from broken_copies import intact_copy, scaled_copy
from gltf_builder import GltfBuilder
from typer.testing import CliRunner

from shots.cli import app

runner = CliRunner()


def write_box(path, extents):
    box = trimesh.creation.box(extents=extents)
    b = GltfBuilder()
    mesh = b.mesh(positions=np.asarray(box.vertices, np.float32),
                  indices=np.asarray(box.faces, np.uint32).ravel())
    b.scene([b.node(mesh=mesh)])
    return b.write_glb(path)


def test_centimetre_model_is_hinted_and_metre_model_is_not(tmp_path):
    # A 46 × 84 × 50 chair exported in centimetres reads as an 84 m tall object in glTF's
    # metres (glTF 2.0 spec §Coordinate System and Units); a 0.46 × 0.84 × 0.5 one is fine.
    for name, extents, hinted in [("cm", (46, 84, 50), True), ("m", (0.46, 0.84, 0.5), False)]:
        model = write_box(tmp_path / f"{name}.glb", extents)
        result = runner.invoke(
            app, ["render", str(model), "-o", str(tmp_path / name), "--size", "32x24"]
        )
        assert result.exit_code == 0, result.output
        assert ("centimetres" in result.output) is hinted, result.output
        # The fix is shown literally (the console must not read "[model]" as a style tag).
        assert ('[model] units = "cm"' in " ".join(result.output.split())) is hinted


def test_a_demo_model_in_centimetres_gets_one_hint_line_naming_it(tmp_path):
    # The demo chair scaled ×100 by its root node (tests/broken_copies.py): 46 × 84 × 50 units,
    # a chair's size in centimetres read as metres (glTF 2.0 spec §Coordinate System and Units).
    copy = scaled_copy("oak_dining_chair", tmp_path / "models")
    intact = intact_copy("oak_dining_chair", tmp_path / "models")
    result = runner.invoke(app, ["render", str(copy), "-o", str(tmp_path / "a"), "--size", "24x24"])
    assert result.exit_code == 0, result.output
    hints = [line for line in result.output.splitlines() if line.startswith("warning:")]
    # One line, unwrapped at the runner's 80 columns: the file, what it looks like, the key.
    assert len(hints) == 1, result.output
    assert str(copy) in hints[0] and "centimetres" in hints[0]
    assert '[model] units = "cm"' in hints[0]
    result = runner.invoke(app, ["render", str(intact), "-o", str(tmp_path / "b"), "--size", "24x24"])
    assert result.exit_code == 0, result.output
    assert "warning" not in result.output
