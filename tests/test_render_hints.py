"""`shots render` warns when a model looks like centimetres (units hint, issue 8)."""

import numpy as np
import trimesh
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
