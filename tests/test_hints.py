"""Units and up-axis hints on boxes of known size, scaled and turned like a wrong export would be.

Sizes come from the demo catalog (assets_demo/catalog.json: width along X, depth along Z,
height along Y, metres); glTF 2.0 spec §Coordinate System and Units says metres and +Y up. The
turns are built with trimesh.transformations, an independent library.
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
import trimesh

from shots.gltf import load_scene
from shots.hints import model_hints
from shots.presets import apply_model_fixes, load_preset
from shots.scene import MaterialTable, Scene, default_material_params

DEMO = Path(__file__).resolve().parents[1] / "assets_demo"
CATALOG = json.loads((DEMO / "catalog.json").read_text())["products"]
# +90° about X takes a Y-up model to Z-up: +Y (height) goes to +Z, +Z (depth) to −Y.
Y_UP_TO_Z_UP = trimesh.transformations.rotation_matrix(math.pi / 2, [1.0, 0.0, 0.0])

UNITS_FIX = 'set [model] units = "{}"'
Z_UP_FIX = 'set [model] up_axis = "z"'


def box_scene(width: float, height: float, depth: float, *, on_floor=True, transform=None):
    """A closed box (trimesh.creation.box) as a Scene, on y = 0 or centred at the origin."""
    mesh = trimesh.creation.box(extents=[width, height, depth])
    if on_floor:
        mesh.apply_translation([0.0, height / 2, 0.0])
    if transform is not None:
        mesh.apply_transform(transform)
    vertices = len(mesh.vertices)
    return Scene(
        positions=np.asarray(mesh.vertices, np.float32),
        normals=np.asarray(mesh.vertex_normals, np.float32),
        tangents=np.zeros((vertices, 4), np.float32),
        uv=np.zeros((2, vertices, 2), np.float32),
        colors=np.ones((vertices, 4), np.float32),
        triangles=np.asarray(mesh.faces, np.int32),
        tri_material=np.zeros(len(mesh.faces), np.int32),
        materials=MaterialTable.from_rows([default_material_params()], ["default"]),
        source="box",
    )


def product_box(product: dict, scale: float = 1.0, **kw) -> Scene:
    d = product["dimensions_m"]
    return box_scene(d["width"] * scale, d["height"] * scale, d["depth"] * scale, **kw)


@pytest.mark.parametrize("product", CATALOG, ids=[p["sku"] for p in CATALOG])
def test_catalog_sizes_in_metres_give_no_hint(product):
    assert model_hints(product_box(product)) == []


@pytest.mark.parametrize("product", CATALOG, ids=[p["sku"] for p in CATALOG])
def test_the_demo_models_give_no_hint(product):
    # The committed demo files are in metres, +Y up, standing on y = 0 (assets_demo/README.md).
    assert model_hints(load_scene(DEMO / product["file"])) == []


def test_centimetre_chair():
    # The oak dining chair, 46 × 84 × 50 cm (catalog.json), exported with 1 unit = 1 cm.
    hints = model_hints(box_scene(46.0, 84.0, 50.0))
    assert hints == ['bounds 46 × 84 × 50 units: looks like centimetres (set [model] units = "cm")']


def test_millimetre_chair():
    hints = model_hints(box_scene(460.0, 840.0, 500.0))
    assert len(hints) == 1
    assert "millimetres" in hints[0] and UNITS_FIX.format("mm") in hints[0]


@pytest.mark.parametrize("product", CATALOG, ids=[p["sku"] for p in CATALOG])
@pytest.mark.parametrize("unit, scale", [("cm", 100.0), ("mm", 1000.0)])
def test_every_catalog_product_in_cm_and_mm(product, unit, scale):
    hints = model_hints(product_box(product, scale))
    assert len(hints) == 1 and UNITS_FIX.format(unit) in hints[0]


def test_a_tiny_model_is_noticed():
    # 4 mm across: no piece of furniture is that small in any unit (common practice).
    hints = model_hints(box_scene(0.004, 0.003, 0.002))
    assert len(hints) == 1 and "export scale" in hints[0]


@pytest.mark.parametrize("product", CATALOG, ids=[p["sku"] for p in CATALOG])
def test_z_up_export_standing_on_its_floor(product):
    scene = product_box(product, transform=Y_UP_TO_Z_UP)
    low, high = scene.bounds()
    # The turn really is Z-up: height along +Z from z = 0, depth across y = 0.
    assert np.isclose(low[2], 0.0, atol=1e-6)
    assert np.isclose(high[2], product["dimensions_m"]["height"], atol=1e-6)
    hints = model_hints(scene)
    assert len(hints) == 1 and Z_UP_FIX in hints[0]


def test_z_up_chair_centred_on_the_origin_is_noticed_by_its_shape():
    chair = CATALOG[0]["dimensions_m"]
    scene = box_scene(chair["width"], chair["height"], chair["depth"], on_floor=False,
                      transform=Y_UP_TO_Z_UP)  # fmt: skip
    hints = model_hints(scene)
    assert hints == [
        'tallest along Z with a thin Y extent: looks like a Z-up export (set [model] up_axis = "z")'
    ]


def test_a_long_low_y_up_model_on_its_floor_is_not_called_z_up():
    # A bed, 1.6 wide × 0.5 high × 2.1 long (common practice sizes): longest along Z, thin in Y,
    # but standing on y = 0 as glTF expects.
    assert model_hints(box_scene(1.6, 0.5, 2.1)) == []


def test_centimetres_and_z_up_together():
    hints = model_hints(product_box(CATALOG[0], 100.0, transform=Y_UP_TO_Z_UP))
    assert len(hints) == 2
    assert UNITS_FIX.format("cm") in hints[0] and Z_UP_FIX in hints[1]


@pytest.mark.parametrize("unit, scale", [("cm", 100.0), ("mm", 1000.0), ("m", 1.0)])
def test_following_the_hints_leaves_nothing_to_hint(tmp_path, unit, scale):
    # Round trip through the preset fix the hint names (shots.presets.apply_model_fixes).
    scene = product_box(CATALOG[3], scale, transform=Y_UP_TO_Z_UP)
    preset_file = tmp_path / "fix.toml"
    preset_file.write_text(f'[model]\nunits = "{unit}"\nup_axis = "z"\n')
    fixed = apply_model_fixes(scene, load_preset(preset_file))
    assert model_hints(fixed) == []
    sofa = CATALOG[3]["dimensions_m"]
    expected = [sofa["width"], sofa["height"], sofa["depth"]]
    assert np.allclose(np.ptp(fixed.bounds(), axis=0), expected, atol=1e-5)


def test_an_empty_scene_has_no_hints():
    scene = box_scene(1.0, 1.0, 1.0)
    empty = Scene(**{**scene.__dict__, "triangles": np.zeros((0, 3), np.int32),
                     "tri_material": np.zeros(0, np.int32)})  # fmt: skip
    assert model_hints(empty) == []
