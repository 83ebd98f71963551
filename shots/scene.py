"""The scene: everything a render needs from a model, as flat numpy arrays.

The loader (``shots.gltf``) produces one ``Scene``; every later stage reads it and never goes back
to the file. Geometry is in world space (node transforms already applied), indexed: triangle ``k``
uses vertices ``triangles[k]`` with counter-clockwise front faces (glTF 2.0 spec, §Meshes; winding
already flipped for negative-determinant transforms).

Materials are a table of rows, one per glTF material plus the default material appended last; the
kernels index it by ``tri_material``. Column positions are the constants below, so a kernel reads
``params[m, P_ROUGHNESS]`` and never a dict.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

# --- material parameter columns (float32), glTF 2.0 spec §Materials and KHR_materials_* ------
P_BASE_R, P_BASE_G, P_BASE_B, P_BASE_A = 0, 1, 2, 3  # baseColorFactor, linear
P_METALLIC = 4
P_ROUGHNESS = 5
P_EMISSIVE_R, P_EMISSIVE_G, P_EMISSIVE_B = 6, 7, 8  # emissiveFactor × emissive_strength
P_ALPHA_MODE = 9  # ALPHA_OPAQUE / ALPHA_MASK / ALPHA_BLEND
P_ALPHA_CUTOFF = 10
P_DOUBLE_SIDED = 11  # 0 or 1
P_NORMAL_SCALE = 12
P_OCCLUSION_STRENGTH = 13
P_TRANSMISSION = 14  # KHR_materials_transmission
P_IOR = 15  # KHR_materials_ior (default 1.5)
P_THICKNESS = 16  # KHR_materials_volume
P_ATTENUATION_DISTANCE = 17  # +inf when absent
P_ATTENUATION_R, P_ATTENUATION_G, P_ATTENUATION_B = 18, 19, 20
P_CLEARCOAT = 21  # KHR_materials_clearcoat
P_CLEARCOAT_ROUGHNESS = 22
P_SPECULAR = 23  # KHR_materials_specular
P_SPECULAR_R, P_SPECULAR_G, P_SPECULAR_B = 24, 25, 26
P_SHEEN_R, P_SHEEN_G, P_SHEEN_B = 27, 28, 29  # KHR_materials_sheen
P_SHEEN_ROUGHNESS = 30
P_UNLIT = 31  # KHR_materials_unlit
# model fidelity (issue 17): the coat's own normal map
P_CLEARCOAT_NORMAL_SCALE = 32  # KHR_materials_clearcoat clearcoatNormalTexture.scale
N_PARAMS = 33

ALPHA_OPAQUE, ALPHA_MASK, ALPHA_BLEND = 0, 1, 2

# --- texture slots: which texture a material samples for which input -----------------------
T_BASE_COLOR = 0
T_METALLIC_ROUGHNESS = 1
T_NORMAL = 2
T_OCCLUSION = 3
T_EMISSIVE = 4
T_TRANSMISSION = 5
T_THICKNESS = 6
T_CLEARCOAT = 7
T_CLEARCOAT_ROUGHNESS = 8
T_SPECULAR = 9
T_SPECULAR_COLOR = 10
T_SHEEN_COLOR = 11
T_SHEEN_ROUGHNESS = 12
# model fidelity (issue 17)
T_CLEARCOAT_NORMAL = 13  # KHR_materials_clearcoat clearcoatNormalTexture (linear)
N_SLOTS = 14

# --- sampler codes (glTF 2.0 spec §Samplers; the OpenGL enums it borrows) ----------------------
WRAP_REPEAT, WRAP_CLAMP, WRAP_MIRROR = 10497, 33071, 33648
FILTER_NEAREST, FILTER_LINEAR = 9728, 9729
NEAREST_MIPMAP_NEAREST, LINEAR_MIPMAP_NEAREST = 9984, 9985
NEAREST_MIPMAP_LINEAR, LINEAR_MIPMAP_LINEAR = 9986, 9987

# tex_info columns (int32): where a texture's texels sit in the flat byte atlas, how to read them
TI_OFFSET, TI_WIDTH, TI_HEIGHT, TI_WRAP_S, TI_WRAP_T, TI_MAG_FILTER = 0, 1, 2, 3, 4, 5
TI_MIN_FILTER = 6
TI_CHANNELS = 7  # 1 grey, 2 grey + alpha, 3 RGB, 4 RGBA
TI_BYTES = 8  # bytes per channel value: 1 (8-bit) or 2 (16-bit, little-endian)
TI_SRGB = 9  # 1: colour channels are sRGB-encoded (decoded on lookup), alpha is linear
TI_LEVELS = 10  # mip levels stored; level l is max(1, w >> l) × max(1, h >> l)
TI_LEVEL = 11  # byte offset of each level (MAX_LEVELS columns); TI_OFFSET = level 0
MAX_LEVELS = 16
N_TEX_INFO = TI_LEVEL + MAX_LEVELS


def default_material_params() -> np.ndarray:
    """One parameter row holding the spec's defaults (glTF 2.0 spec §Materials, §Default Material).

    Returns
    -------
    (N_PARAMS,) float32. A material with no pbrMetallicRoughness is white, metallic 1, roughness 1.
    """
    row = np.zeros(N_PARAMS, np.float32)
    row[P_BASE_R : P_BASE_A + 1] = 1.0
    row[P_METALLIC] = 1.0
    row[P_ROUGHNESS] = 1.0
    row[P_ALPHA_CUTOFF] = 0.5
    row[P_NORMAL_SCALE] = 1.0
    row[P_CLEARCOAT_NORMAL_SCALE] = 1.0
    row[P_OCCLUSION_STRENGTH] = 1.0
    row[P_IOR] = 1.5
    row[P_ATTENUATION_DISTANCE] = np.inf
    row[P_ATTENUATION_R : P_ATTENUATION_B + 1] = 1.0
    row[P_SPECULAR] = 1.0
    row[P_SPECULAR_R : P_SPECULAR_B + 1] = 1.0
    return row


@dataclass(frozen=True)
class MaterialTable:
    """Flat material rows the shading kernels index by material id.

    Attributes
    ----------
    params : (m, N_PARAMS) float32, columns ``P_*``.
    texture : (m, N_SLOTS) int32, texture index per slot or -1.
    texcoord : (m, N_SLOTS) int32, which TEXCOORD_n set the slot samples.
    uv_transform : (m, N_SLOTS, 2, 3) float32, affine uv' = A @ (u, v, 1) (KHR_texture_transform;
        identity when absent).
    names : material names for reporting (the last row is the default material).
    """

    params: np.ndarray
    texture: np.ndarray
    texcoord: np.ndarray
    uv_transform: np.ndarray
    names: tuple[str, ...]

    @staticmethod
    def from_rows(params: list[np.ndarray], names: list[str]) -> MaterialTable:
        """Build a table with these parameter rows and no textures."""
        m = len(params)
        uv = np.zeros((m, N_SLOTS, 2, 3), np.float32)
        uv[:, :, 0, 0] = 1.0
        uv[:, :, 1, 1] = 1.0
        return MaterialTable(
            params=np.asarray(params, np.float32).reshape(m, N_PARAMS),
            texture=np.full((m, N_SLOTS), -1, np.int32),
            texcoord=np.zeros((m, N_SLOTS), np.int32),
            uv_transform=uv,
            names=tuple(names),
        )


@dataclass(frozen=True)
class Textures:
    """All decoded textures and their mip levels in one flat byte atlas (what the kernels sample).

    Attributes
    ----------
    texels : (k,) uint8, every texture's levels back to back, rows from the image's top, channel
        values of 1 or 2 bytes as stored (``shots.kernels.texture`` decodes them on lookup).
        Textures that use the same image in the same colour space share their bytes.
    info : (t, N_TEX_INFO) int32, columns ``TI_*``: level offsets, size, wraps, filters, format.
    names : one name per texture for reporting.
    """

    texels: np.ndarray = field(default_factory=lambda: np.zeros(0, np.uint8))
    info: np.ndarray = field(default_factory=lambda: np.zeros((0, N_TEX_INFO), np.int32))
    names: tuple[str, ...] = ()

    def with_min_filter(self, code: int) -> Textures:
        """The same textures with every sampler's minFilter set to ``code``; FILTER_LINEAR
        reads only full-size texels, which plain supersampling turns into a reference."""
        info = self.info.copy()
        info[:, TI_MIN_FILTER] = code
        return replace(self, info=info)


@dataclass(frozen=True)
class FileCamera:
    """A camera defined in the model file (glTF 2.0 spec §Cameras), placed in world space."""

    name: str
    kind: str  # "perspective" | "orthographic"
    world: np.ndarray  # (4, 4) float64 node world matrix; the camera looks along its -Z
    yfov: float = 0.0
    aspect_ratio: float | None = None
    xmag: float = 0.0
    ymag: float = 0.0
    znear: float = 0.0
    zfar: float | None = None


@dataclass(frozen=True)
class FileLight:
    """A KHR_lights_punctual light, placed in world space."""

    name: str
    kind: str  # "directional" | "point" | "spot"
    color: tuple[float, float, float]
    intensity: float  # lux for directional, candela for point and spot
    position: tuple[float, float, float]
    direction: tuple[float, float, float]  # unit, the node's -Z in world space
    range: float | None = None
    inner_cone: float = 0.0
    outer_cone: float = np.pi / 4


@dataclass(frozen=True)
class Scene:
    """A loaded model: world-space triangles, per-vertex attributes, materials and textures.

    Attributes
    ----------
    positions : (v, 3) float32 world-space vertex positions.
    normals : (v, 3) float32 unit world-space shading normals.
    tangents : (v, 4) float32 world-space tangents, w = bitangent sign (zeros when not needed).
    uv : (2, v, 2) float32, TEXCOORD_0 and TEXCOORD_1 (zeros when absent).
    colors : (v, 4) float32 linear COLOR_0 (ones when absent).
    triangles : (n, 3) int32 vertex indices, counter-clockwise front faces.
    tri_material : (n,) int32 row of ``materials`` for each triangle.
    materials, textures : the flat material table and texture atlas.
    variants : KHR_materials_variants names, and for each the (n,) int32 material per triangle.
    cameras, lights : the file's own cameras and punctual lights.
    source : the file the scene came from, for messages.
    warnings : the model's notes, each a ``shots.gltf.notes.Note`` (a str with a ``kind``):
        repairs and doubts ("warning"), and what the file asks for that is not rendered
        ("ignored"); plain strings count as warnings.
    """

    positions: np.ndarray
    normals: np.ndarray
    tangents: np.ndarray
    uv: np.ndarray
    colors: np.ndarray
    triangles: np.ndarray
    tri_material: np.ndarray
    materials: MaterialTable
    textures: Textures = field(default_factory=Textures)
    variants: dict[str, np.ndarray] = field(default_factory=dict)
    cameras: tuple[FileCamera, ...] = ()
    lights: tuple[FileLight, ...] = ()
    source: str = ""
    warnings: tuple[str, ...] = ()

    @property
    def triangle_count(self) -> int:
        return int(self.triangles.shape[0])

    def bounds(self) -> np.ndarray:
        """(2, 3) float64 min and max corner of the vertices that triangles use."""
        if self.triangle_count == 0:
            return np.zeros((2, 3))
        used = self.positions[np.unique(self.triangles)].astype(np.float64)
        return np.stack([used.min(axis=0), used.max(axis=0)])

    def with_variant(self, name: str) -> Scene:
        """The same scene with the material mapping of KHR_materials_variants variant ``name``."""
        return replace(self, tri_material=self.variants[name])
