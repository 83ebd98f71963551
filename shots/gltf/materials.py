"""glTF materials into the flat ``MaterialTable`` (Spec §Materials and the KHR_materials_* specs).

One row per glTF material, then the default material (Spec §Default Material) for primitives
without one. Texture slots point at rows of the texture atlas; colour slots (base colour,
emissive, specular colour, sheen colour) are decoded from sRGB, the rest are linear, as each
texture's description in the spec and the extension READMEs says.
"""

from __future__ import annotations

import math

import numpy as np

from shots.gltf import checks
from shots.gltf.container import Document
from shots.gltf.textures import TextureAtlas
from shots.scene import (
    ALPHA_BLEND,
    ALPHA_MASK,
    ALPHA_OPAQUE,
    N_SLOTS,
    P_ALPHA_CUTOFF,
    P_ALPHA_MODE,
    P_ATTENUATION_B,
    P_ATTENUATION_DISTANCE,
    P_ATTENUATION_R,
    P_BASE_A,
    P_BASE_R,
    P_CLEARCOAT,
    P_CLEARCOAT_NORMAL_SCALE,
    P_CLEARCOAT_ROUGHNESS,
    P_DOUBLE_SIDED,
    P_EMISSIVE_B,
    P_EMISSIVE_R,
    P_IOR,
    P_METALLIC,
    P_NORMAL_SCALE,
    P_OCCLUSION_STRENGTH,
    P_ROUGHNESS,
    P_SHEEN_B,
    P_SHEEN_R,
    P_SHEEN_ROUGHNESS,
    P_SPECULAR,
    P_SPECULAR_B,
    P_SPECULAR_R,
    P_THICKNESS,
    P_TRANSMISSION,
    P_UNLIT,
    T_BASE_COLOR,
    T_CLEARCOAT,
    T_CLEARCOAT_NORMAL,
    T_CLEARCOAT_ROUGHNESS,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    T_OCCLUSION,
    T_SHEEN_COLOR,
    T_SHEEN_ROUGHNESS,
    T_SPECULAR,
    T_SPECULAR_COLOR,
    T_THICKNESS,
    T_TRANSMISSION,
    MaterialTable,
    default_material_params,
)

ALPHA_MODES = {"OPAQUE": ALPHA_OPAQUE, "MASK": ALPHA_MASK, "BLEND": ALPHA_BLEND}
SRGB_SLOTS = (T_BASE_COLOR, T_EMISSIVE, T_SPECULAR_COLOR, T_SHEEN_COLOR)
MATERIAL_EXTENSIONS = (
    "KHR_materials_emissive_strength", "KHR_materials_transmission", "KHR_materials_ior",
    "KHR_materials_volume", "KHR_materials_clearcoat", "KHR_materials_specular",
    "KHR_materials_sheen", "KHR_materials_unlit", "KHR_materials_variants",
    "KHR_texture_transform",
)
# extension -> [(JSON texture field, slot)]
EXTENSION_TEXTURES = {
    "KHR_materials_transmission": [("transmissionTexture", T_TRANSMISSION)],
    "KHR_materials_volume": [("thicknessTexture", T_THICKNESS)],
    "KHR_materials_clearcoat": [("clearcoatTexture", T_CLEARCOAT),
                                ("clearcoatRoughnessTexture", T_CLEARCOAT_ROUGHNESS),
                                ("clearcoatNormalTexture", T_CLEARCOAT_NORMAL)],
    "KHR_materials_specular": [("specularTexture", T_SPECULAR),
                               ("specularColorTexture", T_SPECULAR_COLOR)],
    "KHR_materials_sheen": [("sheenColorTexture", T_SHEEN_COLOR),
                            ("sheenRoughnessTexture", T_SHEEN_ROUGHNESS)],
}
INF = math.inf


def texture_transform(offset, rotation: float, scale) -> np.ndarray:
    """(2, 3) float32 affine of KHR_texture_transform, uv' = offset + R·(scale ⊙ uv).

    R = [[cos, sin], [-sin, cos]] (KHR_texture_transform README: the form that reproduces its worked
    example; its GLSL listing disagrees, glTF issue #1563).
    """
    c, s = math.cos(rotation), math.sin(rotation)
    return np.array([[c * scale[0], s * scale[1], offset[0]],
                     [-s * scale[0], c * scale[1], offset[1]]], np.float32)


class MaterialBuilder:
    """Builds the material table; decodes the textures it references through ``atlas``."""

    def __init__(self, doc: Document, atlas: TextureAtlas):
        self.doc = doc
        self.atlas = atlas
        materials = doc.gltf.materials or []
        self.count = len(materials)
        m = self.count + 1
        self.params = np.tile(default_material_params(), (m, 1))
        self.texture = np.full((m, N_SLOTS), -1, np.int32)
        self.texcoord = np.zeros((m, N_SLOTS), np.int32)
        self.uv_transform = np.zeros((m, N_SLOTS, 2, 3), np.float32)
        self.uv_transform[:, :, 0, 0] = 1.0
        self.uv_transform[:, :, 1, 1] = 1.0
        self.names = [f"materials[{i}]" for i in range(self.count)] + ["(default material)"]
        for i in range(self.count):
            self._fill(i)

    def table(self) -> MaterialTable:
        return MaterialTable(self.params, self.texture, self.texcoord, self.uv_transform,
                             tuple(self.names))

    def normal_map_texcoord(self, m: int) -> int | None:
        """TEXCOORD set the normal map of material row ``m`` reads, or None without one."""
        if self.texture[m, T_NORMAL] < 0:
            return None
        return int(self.texcoord[m, T_NORMAL])

    # ------------------------------------------------------------------------------------
    def _fill(self, i: int) -> None:
        doc, src, where = self.doc, self.doc.source, f"materials[{i}]"
        mat = doc.gltf.materials[i]
        row = self.params[i]
        if isinstance(mat.name, str) and mat.name:
            self.names[i] = mat.name
        pbr = mat.pbrMetallicRoughness
        if pbr is not None:
            here = where + ".pbrMetallicRoughness"
            row[P_BASE_R : P_BASE_A + 1] = checks.numbers(
                pbr.baseColorFactor, 4, src, here + ".baseColorFactor", (1, 1, 1, 1), low=0, high=1
            )
            row[P_METALLIC] = checks.number(pbr.metallicFactor, src, here + ".metallicFactor",
                                            default=1.0, low=0, high=1)
            row[P_ROUGHNESS] = checks.number(pbr.roughnessFactor, src, here + ".roughnessFactor",
                                             default=1.0, low=0, high=1)
            self._slot(i, T_BASE_COLOR, pbr.baseColorTexture, here + ".baseColorTexture")
            self._slot(i, T_METALLIC_ROUGHNESS, pbr.metallicRoughnessTexture,
                       here + ".metallicRoughnessTexture")
        normal = self._slot(i, T_NORMAL, mat.normalTexture, where + ".normalTexture")
        if normal is not None:
            row[P_NORMAL_SCALE] = checks.number(normal.get("scale"), src,
                                                where + ".normalTexture.scale", default=1.0)
        occlusion = self._slot(i, T_OCCLUSION, mat.occlusionTexture, where + ".occlusionTexture")
        if occlusion is not None:
            row[P_OCCLUSION_STRENGTH] = checks.number(
                occlusion.get("strength"), src, where + ".occlusionTexture.strength",
                default=1.0, low=0, high=1)
        emissive = checks.numbers(mat.emissiveFactor, 3, src, where + ".emissiveFactor",
                                  (0, 0, 0), low=0)
        self._slot(i, T_EMISSIVE, mat.emissiveTexture, where + ".emissiveTexture")
        mode = checks.text(mat.alphaMode, src, where + ".alphaMode", "OPAQUE")
        if mode not in ALPHA_MODES:
            raise doc.error(where + ".alphaMode", f"{mode!r:.20} is not OPAQUE, MASK or BLEND")
        row[P_ALPHA_MODE] = ALPHA_MODES[mode]
        row[P_ALPHA_CUTOFF] = checks.number(mat.alphaCutoff, src, where + ".alphaCutoff",
                                            default=0.5, low=0)
        if mat.doubleSided not in (None, True, False):
            raise doc.error(where + ".doubleSided", "must be a boolean")
        row[P_DOUBLE_SIDED] = 1.0 if mat.doubleSided else 0.0
        ext = checks.mapping(mat.extensions, src, where + ".extensions")
        strength = self._ext(ext, "KHR_materials_emissive_strength", where)
        row[P_EMISSIVE_R : P_EMISSIVE_B + 1] = np.array(emissive) * checks.number(
            strength.get("emissiveStrength"), src,
            where + ".extensions.KHR_materials_emissive_strength.emissiveStrength",
            default=1.0, low=0)
        self._extensions(i, ext, where)

    def _extensions(self, i: int, ext: dict, where: str) -> None:
        src, row = self.doc.source, self.params[i]

        def value(name: str, key: str, default: float, low=0.0, high=INF) -> float:
            return checks.number(self._ext(ext, name, where).get(key), src,
                                 f"{where}.extensions.{name}.{key}", default=default, low=low,
                                 high=high)

        def colour(name: str, key: str, default, high=INF) -> list[float]:
            return checks.numbers(self._ext(ext, name, where).get(key), 3, src,
                                  f"{where}.extensions.{name}.{key}", default, low=0, high=high)

        row[P_TRANSMISSION] = value("KHR_materials_transmission", "transmissionFactor", 0, 0, 1)
        ior = value("KHR_materials_ior", "ior", 1.5)
        if 0 < ior < 1:
            raise self.doc.error(f"{where}.extensions.KHR_materials_ior.ior",
                                 f"{ior} is neither 0 nor >= 1 (KHR_materials_ior)")
        row[P_IOR] = ior
        row[P_THICKNESS] = value("KHR_materials_volume", "thicknessFactor", 0)
        volume = self._ext(ext, "KHR_materials_volume", where)
        if volume.get("attenuationDistance") is not None:
            row[P_ATTENUATION_DISTANCE] = value("KHR_materials_volume", "attenuationDistance",
                                                INF, low=1e-30)
        row[P_ATTENUATION_R : P_ATTENUATION_B + 1] = colour(
            "KHR_materials_volume", "attenuationColor", (1, 1, 1), high=1)
        row[P_CLEARCOAT] = value("KHR_materials_clearcoat", "clearcoatFactor", 0, 0, 1)
        row[P_CLEARCOAT_ROUGHNESS] = value("KHR_materials_clearcoat", "clearcoatRoughnessFactor",
                                           0, 0, 1)
        row[P_SPECULAR] = value("KHR_materials_specular", "specularFactor", 1, 0, 1)
        row[P_SPECULAR_R : P_SPECULAR_B + 1] = colour("KHR_materials_specular",
                                                      "specularColorFactor", (1, 1, 1))
        row[P_SHEEN_R : P_SHEEN_B + 1] = colour("KHR_materials_sheen", "sheenColorFactor",
                                                (0, 0, 0), high=1)
        row[P_SHEEN_ROUGHNESS] = value("KHR_materials_sheen", "sheenRoughnessFactor", 0, 0, 1)
        row[P_UNLIT] = 1.0 if "KHR_materials_unlit" in ext else 0.0
        for name, slots in EXTENSION_TEXTURES.items():
            body = self._ext(ext, name, where)
            for key, slot in slots:
                info = self._slot(i, slot, body.get(key), f"{where}.extensions.{name}.{key}")
                if slot == T_CLEARCOAT_NORMAL and info is not None:  # KHR_materials_clearcoat
                    row[P_CLEARCOAT_NORMAL_SCALE] = checks.number(
                        info.get("scale"), src, f"{where}.extensions.{name}.{key}.scale",
                        default=1.0)

    def _ext(self, ext: dict, name: str, where: str) -> dict:
        return checks.mapping(ext.get(name), self.doc.source, f"{where}.extensions.{name}")

    def _slot(self, i: int, slot: int, info, where: str) -> dict | None:
        """Point slot ``slot`` of material ``i`` at a texture; returns the textureInfo as a dict."""
        if info is None:
            return None
        src = self.doc.source
        if not isinstance(info, dict):
            if not hasattr(info, "__dict__"):
                raise self.doc.error(where, "must be a textureInfo object")
            info = vars(info)
        texture = info.get("index")
        self.texture[i, slot] = self.atlas.entry(texture, slot in SRGB_SLOTS, where + ".index")
        texcoord = checks.integer(info.get("texCoord"), src, where + ".texCoord", default=0)
        ext = checks.mapping(info.get("extensions"), src, where + ".extensions")
        transform = ext.get("KHR_texture_transform")
        if transform is not None:
            here = where + ".extensions.KHR_texture_transform"
            transform = checks.mapping(transform, src, here)
            self.uv_transform[i, slot] = texture_transform(
                checks.numbers(transform.get("offset"), 2, src, here + ".offset", (0, 0)),
                checks.number(transform.get("rotation"), src, here + ".rotation", default=0.0),
                checks.numbers(transform.get("scale"), 2, src, here + ".scale", (1, 1)),
            )
            texcoord = checks.integer(transform.get("texCoord"), src, here + ".texCoord",
                                      default=texcoord)
        if texcoord > 1:
            self.doc.warn(f"{where}: TEXCOORD_{texcoord} is not supported; using TEXCOORD_0")
            texcoord = 0
        self.texcoord[i, slot] = texcoord
        return info
