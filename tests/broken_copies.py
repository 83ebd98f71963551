"""Deliberately broken copies of the demo models, written as a faulty export would be.

Each copy edits only the glTF JSON of a demo .glb with pygltflib (the root node's transform, or a
material's texture reference); the buffer bytes stay as they are, so each copy has exactly the
one fault it is named after. Every demo model hangs from one root node without a transform
(assets_demo/make_catalog.py), so the fault is the root node's whole transform.
"""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import pygltflib

DEMO = Path(__file__).resolve().parents[1] / "assets_demo"

# Unit quaternion (x, y, z, w) of +90° about +X (glTF 2.0 spec §Transformations: rotation is a
# unit quaternion, w last). It takes +Y (up) to +Z and +Z (front) to -Y: a Y-up model turned into
# the Z-up convention (up +Z, front -Y), which is what a Z-up export looks like when the exporter
# leaves out its -90° about X correction. (shots.presets.Z_UP_TO_Y_UP is that correction.)
Y_UP_TO_Z_UP = [math.sin(math.pi / 4), 0.0, 0.0, math.cos(math.pi / 4)]


def demo_model(name: str) -> Path:
    """A demo .glb by stem, e.g. ``oak_dining_chair``."""
    return DEMO / f"{name}.glb"


def intact_copy(name: str, folder: Path) -> Path:
    """The demo model copied byte for byte into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    return Path(shutil.copyfile(demo_model(name), folder / f"{name}.glb"))


def _root_node(doc: pygltflib.GLTF2) -> pygltflib.Node:
    nodes = doc.scenes[doc.scene or 0].nodes
    assert len(nodes) == 1, "a demo model hangs from one root node"
    root = doc.nodes[nodes[0]]
    assert root.matrix is None and root.translation is None and root.rotation is None
    assert root.scale is None
    return root


def _edited(name: str, folder: Path, fault: str, edit) -> Path:
    """``folder/<name>-<fault>.glb``: the demo model with ``edit(doc)`` applied."""
    doc = pygltflib.GLTF2.load_binary(str(demo_model(name)))
    edit(doc)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{name}-{fault}.glb"
    doc.save_binary(str(path))
    return path


def scaled_copy(name: str, folder: Path, factor: float = 100.0) -> Path:
    """Exported in centimetres: every length ``factor`` times too large, read as metres."""

    def edit(doc):
        _root_node(doc).scale = [factor] * 3

    return _edited(name, folder, f"x{factor:g}", edit)


def shifted_copy(name: str, folder: Path, offset=(0.3, 0.0, 0.0)) -> Path:
    """An off-centre pivot: the product moved ``offset`` metres off the origin it should stand on."""

    def edit(doc):
        _root_node(doc).translation = [float(v) for v in offset]

    return _edited(name, folder, "off-centre", edit)


def z_up_copy(name: str, folder: Path) -> Path:
    """A Z-up export: the model turned +90° about X (``Y_UP_TO_Z_UP``)."""

    def edit(doc):
        _root_node(doc).rotation = list(Y_UP_TO_Z_UP)

    return _edited(name, folder, "z-up", edit)


def untextured_copy(name: str, folder: Path) -> Path:
    """The base colour texture dropped from every material that has one (the image stays in the
    file, unused), as an export that loses the texture link writes it. glTF 2.0 spec §Materials:
    without a texture the base colour is ``baseColorFactor`` alone (white for the demo's wood)."""

    def edit(doc):
        dropped = 0
        for material in doc.materials:
            pbr = material.pbrMetallicRoughness
            if pbr is not None and pbr.baseColorTexture is not None:
                pbr.baseColorTexture = None
                dropped += 1
        assert dropped, f"{name} has no base colour texture to drop"

    return _edited(name, folder, "no-texture", edit)


def catalog_products() -> list[dict]:
    """The demo catalog's products (assets_demo/catalog.json), so tests name no file."""
    return json.loads((DEMO / "catalog.json").read_text(encoding="utf-8"))["products"]


def product_file(category: str | None = None, *, with_variants: bool = False) -> Path:
    """The .glb of the first demo product of ``category`` (or the first with variants)."""
    for product in catalog_products():
        if (with_variants and product["variants"]) or product["category"] == category:
            return DEMO / product["file"]
    raise LookupError(f"no demo product of category {category!r}")


def moved_part_copy(model: Path, folder: Path, prefix: str = "leg",
                    offset=(-0.05, 0.0, 0.0)) -> Path:
    """A model edit: the first node named ``prefix…`` with a translation moved by ``offset``
    metres (a leg set 5 cm inward), written under the model's own file name in ``folder``."""
    doc = pygltflib.GLTF2.load_binary(str(model))
    part = next(n for n in doc.nodes if (n.name or "").startswith(prefix) and n.translation)
    part.translation = [float(a + b) for a, b in zip(part.translation, offset, strict=True)]
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / model.name
    doc.save_binary(str(path))
    return path
