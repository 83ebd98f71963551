"""Write the Sawdust Lane Workshop demo catalog: six invented furniture models as glTF 2.0 files.

Sawdust Lane Workshop is a furniture maker we made up for the demo; any likeness to a real
company is accidental. Products are named for what they are, with an ``SL-`` product code.

Run ``python assets_demo/make_catalog.py [out_dir]`` (default: this folder). The output is
deterministic: no timestamps, fixed noise seeds, sorted vertex welding, so two runs give the same
bytes.

Conventions (glTF 2.0 spec, §Coordinate System and Units): metres, +Y up, the front faces +Z, and
each model's origin is the centre of its floor footprint, so it stands on y = 0. Geometry comes from
trimesh.creation primitives (plus one rounded box built here); the GLB is written with pygltflib's
data classes because trimesh's own exporter drops material extensions.
"""

from __future__ import annotations

import io
import json
import struct
import sys
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pygltflib as gl
import trimesh
from PIL import Image

BRAND = "Sawdust Lane Workshop"
HERE = Path(__file__).resolve().parent
CREASE_DEGREES = 35.0  # faces meeting at a sharper angle get split (hard) normals
DIMENSION_TOLERANCE = 0.002  # metres; the generator refuses models that miss their nominal size

# glTF enums (glTF 2.0 spec §Accessors, §Samplers, §Buffer Views)
FLOAT, UNSIGNED_SHORT, UNSIGNED_INT = 5126, 5123, 5125
ARRAY_BUFFER, ELEMENT_ARRAY_BUFFER = 34962, 34963
REPEAT, LINEAR, LINEAR_MIPMAP_LINEAR = 10497, 9729, 9987


# ----------------------------------------------------------------------------------------------
# Colour
# ----------------------------------------------------------------------------------------------


def srgb_to_linear(hex_colour: str) -> list[float]:
    """An sRGB "#rrggbb" colour as linear RGB (IEC 61966-2-1 decode), the space of glTF factors."""
    c = np.array([int(hex_colour[i : i + 2], 16) for i in (1, 3, 5)], np.float64) / 255.0
    linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return [round(float(v), 4) for v in linear]


# ----------------------------------------------------------------------------------------------
# Procedural textures (periodic, so they tile without seams under REPEAT wrapping)
# ----------------------------------------------------------------------------------------------


def periodic_noise(size: int, cells: tuple[int, int], rng: np.random.Generator) -> np.ndarray:
    """Smooth value noise that wraps at the image border.

    Returns
    -------
    (size, size) float64 in [0, 1]; ``cells`` is the lattice count along (x, y).
    """
    cx, cy = cells
    lattice = rng.random((cy, cx))
    x = np.arange(size) * cx / size
    y = np.arange(size) * cy / size
    x0, y0 = np.floor(x).astype(int), np.floor(y).astype(int)
    fx, fy = x - x0, y - y0
    sx, sy = fx * fx * (3 - 2 * fx), fy * fy * (3 - 2 * fy)  # smoothstep between lattice points
    x1, y1 = (x0 + 1) % cx, (y0 + 1) % cy
    top = lattice[y0][:, x0] * (1 - sx) + lattice[y0][:, x1] * sx
    bottom = lattice[y1][:, x0] * (1 - sx) + lattice[y1][:, x1] * sx
    return top * (1 - sy[:, None]) + bottom * sy[:, None]


def png_bytes(pixels: np.ndarray) -> bytes:
    """Encode (h, w, 3) uint8 pixels as PNG; Pillow writes no timestamp, so bytes are stable."""
    buffer = io.BytesIO()
    Image.fromarray(pixels, "RGB").save(buffer, format="PNG", optimize=False, compress_level=9)
    return buffer.getvalue()


def wood_grain_png(size: int = 256, seed: int = 7) -> bytes:
    """Oiled-oak grain running along the image's x axis (u), as an sRGB PNG.

    Growth rings are thin dark bands across y, bent gently by low-frequency noise; pores are
    noise stretched along the grain. Every band and lattice count is whole, so the image wraps.
    """
    rng = np.random.default_rng(seed)
    bend = periodic_noise(size, (2, 3), rng) * 0.8 + periodic_noise(size, (5, 7), rng) * 0.2
    rows = np.arange(size)[:, None] / size
    rings = rows * 19 + bend
    late_wood = (0.5 - 0.5 * np.cos(2 * np.pi * rings)) ** 4  # dark, narrow late-wood lines
    pores = periodic_noise(size, (3, 128), rng)
    tone = periodic_noise(size, (2, 4), rng)  # board-to-board colour drift
    shade = 0.55 * late_wood + 0.3 * pores + 0.25 * tone
    light = np.array([0.83, 0.67, 0.48])  # sRGB, early wood
    dark = np.array([0.55, 0.39, 0.24])  # sRGB, late wood
    rgb = light + (dark - light) * np.clip(shade, 0, 1)[..., None]
    return png_bytes(np.round(np.clip(rgb, 0, 1) * 255).astype(np.uint8))


def woven_normal_png(size: int = 128, threads: int = 8, seed: int = 11) -> bytes:
    """A plain-weave tangent-space normal map: +X right, +Y up (green up), as a linear PNG.

    A height field of rounded threads, over and under in a checkerboard, is differentiated with
    wrapped central differences. Tangent-space Y points up the image, against the row index, so
    n = normalize(-dh/dx, +dh/drow, 1) (glTF 2.0 spec §Materials, normalTexture).
    """
    rng = np.random.default_rng(seed)
    t = (np.arange(size) + 0.5) * threads / size
    cell, frac = np.floor(t).astype(int), t - np.floor(t)
    across = np.sqrt(np.clip(1 - (2 * frac - 1) ** 2, 0, 1))  # round thread cross-section
    along = 0.55 + 0.45 * np.sin(np.pi * frac)  # a thread dips where it passes under
    warp_on_top = (cell[:, None] + cell[None, :]) % 2 == 0  # [row, column]
    height = np.where(
        warp_on_top,
        across[None, :] * along[:, None],  # warp runs down the columns
        across[:, None] * along[None, :],  # weft runs along the rows
    )
    height = height + 0.08 * periodic_noise(size, (32, 32), rng)
    relief = 0.3 * size / threads  # a thread stands this many texels proud of the one below
    dh_dx = (np.roll(height, -1, axis=1) - np.roll(height, 1, axis=1)) / 2  # per texel
    dh_drow = (np.roll(height, -1, axis=0) - np.roll(height, 1, axis=0)) / 2
    n = np.stack([-relief * dh_dx, relief * dh_drow, np.ones_like(height)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    return png_bytes(np.round((n * 0.5 + 0.5) * 255).astype(np.uint8))


# ----------------------------------------------------------------------------------------------
# Geometry
# ----------------------------------------------------------------------------------------------


@dataclass
class Part:
    """One glTF primitive in its node's local frame.

    Attributes
    ----------
    positions, normals : (v, 3) float32.
    uv : (v, 2) float32 or None (TEXCOORD_0, glTF orientation: v grows down the image).
    tangents : (v, 4) float32 or None; w = ±1 so that cross(normal, tangent) · w points toward
        decreasing v, the image's up (glTF 2.0 spec §Meshes, TANGENT).
    triangles : (n, 3) uint32, counter-clockwise seen from outside.
    material : material name; ``variants`` maps a variant name to another material name.
    """

    positions: np.ndarray
    normals: np.ndarray
    uv: np.ndarray | None
    tangents: np.ndarray | None
    triangles: np.ndarray
    material: str
    variants: dict[str, str] = field(default_factory=dict)


def outward(mesh: trimesh.Trimesh) -> trimesh.Trimesh:
    """The mesh with counter-clockwise outward faces (a closed mesh then has positive volume)."""
    if not mesh.is_watertight:
        raise ValueError("demo parts must be closed meshes")
    if mesh.volume < 0:
        mesh.invert()
    return mesh


def box(size, centre) -> trimesh.Trimesh:
    """An axis-aligned box of ``size`` (x, y, z) metres centred at ``centre``."""
    return trimesh.creation.box(
        extents=size, transform=trimesh.transformations.translation_matrix(centre)
    )


def rod(start, end, radius: float, sections: int = 20) -> trimesh.Trimesh:
    """A cylinder of ``radius`` whose axis runs from ``start`` to ``end``."""
    return outward(trimesh.creation.cylinder(radius, segment=[start, end], sections=sections))


def turned(profile, sections: int = 48) -> trimesh.Trimesh:
    """A solid of revolution about +Y from a closed (radius, height) profile, like a lathe part.

    ``sections`` is a multiple of 4 so vertices lie on ±X and ±Z and the bounds equal the radius.
    """
    z_to_y = trimesh.transformations.rotation_matrix(-np.pi / 2, [1, 0, 0])
    return outward(
        trimesh.creation.revolve(np.asarray(profile, float), sections=sections, transform=z_to_y)
    )


def ring(centre_y: float, major: float, minor: float) -> trimesh.Trimesh:
    """A horizontal torus (a footrest ring) around +Y at height ``centre_y``."""
    place = trimesh.transformations.translation_matrix([0, centre_y, 0]) @ (
        trimesh.transformations.rotation_matrix(-np.pi / 2, [1, 0, 0])
    )
    return outward(trimesh.creation.torus(major, minor, 48, 12, transform=place))


def rounded_box(size, centre, radius: float, steps: int = 4) -> trimesh.Trimesh:
    """A box with every edge rounded to ``radius`` (trimesh.creation has none).

    Built as a cube-sphere of ``radius`` whose six halves are pushed apart to the box's size: each
    cube face is a grid of equal-angle points, with the middle row and column doubled so the
    stretched middle cells become exact flat faces.
    """
    size, centre = np.asarray(size, float), np.asarray(centre, float)
    inner = size / 2 - radius
    if np.any(inner <= 0):
        raise ValueError("rounding radius must be less than half of every side")
    angles = np.concatenate(
        [np.linspace(-np.pi / 4, 0, steps + 1), np.linspace(0, np.pi / 4, steps + 1)]
    )
    coords = np.tan(angles)
    coords[0], coords[-1] = -1.0, 1.0  # exact cube edges so neighbouring faces weld
    sides = np.repeat([-1.0, 1.0], steps + 1)
    n = coords.size
    vertices, faces = [], []
    for axis in range(3):
        b, c = (axis + 1) % 3, (axis + 2) % 3  # e_b × e_c = e_axis
        for sign in (-1.0, 1.0):
            s, t = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
            direction = np.zeros((n, n, 3))
            direction[..., axis] = sign
            direction[..., b], direction[..., c] = coords[s], coords[t]
            side = np.zeros((n, n, 3))
            side[..., axis] = sign
            side[..., b], side[..., c] = sides[s], sides[t]
            unit = direction / np.linalg.norm(direction, axis=-1, keepdims=True)
            points = centre + radius * unit + inner * side
            first = sum(len(v) for v in vertices)
            ids = first + np.arange(n * n).reshape(n, n)
            a00, a10, a11, a01 = ids[:-1, :-1], ids[1:, :-1], ids[1:, 1:], ids[:-1, 1:]
            quads = np.stack([a00, a10, a11, a01], -1).reshape(-1, 4)
            if sign < 0:
                quads = quads[:, ::-1]
            faces.append(quads[:, [0, 1, 2]])
            faces.append(quads[:, [0, 2, 3]])
            vertices.append(points.reshape(-1, 3))
    mesh = trimesh.Trimesh(np.concatenate(vertices), np.concatenate(faces), process=True)
    return outward(mesh)


def faces_around_vertices(faces: np.ndarray, vertex_count: int) -> np.ndarray:
    """(v, k) int64: the faces touching each vertex, padded with -1 (no scipy needed)."""
    corner_vertex = faces.reshape(-1)
    order = np.argsort(corner_vertex, kind="stable")
    counts = np.bincount(corner_vertex, minlength=vertex_count)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    slot = np.arange(len(order)) - np.repeat(starts, counts)
    table = np.full((vertex_count, max(int(counts.max()), 1)), -1, np.int64)
    table[corner_vertex[order], slot] = order // 3
    return table


def crease_normals(mesh: trimesh.Trimesh, crease_degrees: float) -> np.ndarray:
    """Per-corner normals: the angle-weighted mean of the faces around a vertex that meet the
    corner's face within ``crease_degrees`` (Thürmer & Wüthrich 1998 weighting).

    Returns
    -------
    (n, 3, 3) float64 unit normals for each triangle corner.
    """
    faces, face_normals = mesh.faces, mesh.face_normals
    corner_vertex = faces.reshape(-1)
    corner_face = np.repeat(np.arange(len(faces)), 3)
    around = faces_around_vertices(faces, len(mesh.vertices))[corner_vertex]  # (3n, k)
    valid = around >= 0
    safe = np.where(valid, around, 0)
    agree = np.einsum("ij,ikj->ik", face_normals[corner_face], face_normals[safe])
    use = valid & (agree >= np.cos(np.radians(crease_degrees)))
    position_in_face = np.argmax(faces[safe] == corner_vertex[:, None, None], axis=2)
    weight = mesh.face_angles[safe, position_in_face] * use
    summed = np.einsum("ik,ikj->ij", weight, face_normals[safe])
    return (summed / np.linalg.norm(summed, axis=1, keepdims=True)).reshape(-1, 3, 3)


def box_uv(
    corners: np.ndarray, face_normals: np.ndarray, grain_axis: int, tile: float
) -> tuple[np.ndarray, np.ndarray]:
    """Planar UVs per face, projected along the face's dominant axis; u follows ``grain_axis``.

    Returns
    -------
    uv : (n, 3, 2) float64; v is minus the second coordinate so "up" on a vertical face is
        image up.
    chart : (n,) int64, one of six projections (axis and side); corners of different charts
        never share a vertex even where their uv happen to coincide.
    """
    dominant = np.argmax(np.abs(face_normals), axis=1)
    rows = np.arange(len(corners))
    chart = 2 * dominant + (face_normals[rows, dominant] > 0)
    others = np.array([[1, 2], [0, 2], [0, 1]])[dominant]
    along_grain = others == grain_axis
    u_axis = np.where(along_grain.any(axis=1), grain_axis, others[:, 0])
    v_axis = np.where(others[:, 0] == u_axis, others[:, 1], others[:, 0])
    u = corners[rows[:, None], np.arange(3), u_axis[:, None]]
    v = corners[rows[:, None], np.arange(3), v_axis[:, None]]
    return np.stack([u, -v], -1) / tile, chart


def uv_tangents(positions, normals, uv, triangles) -> np.ndarray:
    """Per-vertex tangents from UV gradients (Lengyel 2001), orthogonalised against the normal.

    Returns
    -------
    (v, 4) float32: xyz along +u; w = ±1 so cross(N, T) · w points along -dP/dv (image up).
    """
    p, t = positions[triangles], uv[triangles]
    e1, e2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    d1, d2 = t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]
    det = d1[:, 0] * d2[:, 1] - d2[:, 0] * d1[:, 1]
    inv = np.where(np.abs(det) > 1e-12, 1.0 / np.where(det == 0, 1, det), 0.0)[:, None]
    dp_du = (e1 * d2[:, 1:2] - e2 * d1[:, 1:2]) * inv
    dp_dv = (e2 * d1[:, 0:1] - e1 * d2[:, 0:1]) * inv
    tangent = np.zeros_like(positions)
    bitangent = np.zeros_like(positions)
    for k in range(3):
        np.add.at(tangent, triangles[:, k], dp_du)
        np.add.at(bitangent, triangles[:, k], dp_dv)
    tangent -= normals * np.sum(tangent * normals, axis=1, keepdims=True)
    tangent /= np.linalg.norm(tangent, axis=1, keepdims=True)
    handedness = np.where(np.sum(np.cross(normals, tangent) * -bitangent, axis=1) < 0, -1.0, 1.0)
    return np.concatenate([tangent, handedness[:, None]], axis=1).astype(np.float32)


def part(
    mesh: trimesh.Trimesh,
    material: str,
    *,
    tile: float | None = None,
    grain_axis: int | None = None,
    tangents: bool = False,
    variants=None,
) -> Part:
    """Turn a closed trimesh into a glTF-ready primitive with crease normals.

    ``tile`` (metres per texture repeat) adds box-projected UVs, with u along ``grain_axis``
    (default: the part's longest side); ``tangents`` adds TANGENT for a normal map.
    """
    corners = mesh.vertices[mesh.faces]  # (n, 3, 3)
    normals = crease_normals(mesh, CREASE_DEGREES)
    columns = [mesh.faces.reshape(-1, 1).astype(float), normals.reshape(-1, 3)]
    uv = None
    if tile is not None:
        axis = int(np.argmax(mesh.extents)) if grain_axis is None else grain_axis
        uv, chart = box_uv(corners, mesh.face_normals, axis, tile)
        uv = uv.reshape(-1, 2)
        columns += [np.repeat(chart, 3)[:, None].astype(float), uv]
    # weld corners that agree on vertex, normal and uv chart; np.unique sorts, so the order is fixed
    key = np.round(np.concatenate(columns, axis=1), 6)
    _, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    positions = corners.reshape(-1, 3)[first]
    welded_normals = normals.reshape(-1, 3)[first]
    welded_normals /= np.linalg.norm(welded_normals, axis=1, keepdims=True)
    triangles = inverse.reshape(-1, 3)
    welded_uv = None if uv is None else uv[first]
    tangent = None
    if tangents:
        tangent = uv_tangents(positions, welded_normals, welded_uv, triangles)
    return Part(
        positions=positions.astype(np.float32),
        normals=welded_normals.astype(np.float32),
        uv=None if welded_uv is None else welded_uv.astype(np.float32),
        tangents=tangent,
        triangles=triangles.astype(np.uint32),
        material=material,
        variants=dict(variants or {}),
    )


# ----------------------------------------------------------------------------------------------
# Scene description: meshes, nodes, materials, products
# ----------------------------------------------------------------------------------------------


@dataclass
class Mesh:
    """A named glTF mesh; several nodes may share one (instancing)."""

    name: str
    parts: list[Part]


@dataclass
class Node:
    """A named node with an optional mesh, a translation and a unit quaternion (x, y, z, w)."""

    name: str
    mesh: Mesh | None = None
    translation: tuple[float, float, float] | None = None
    rotation: tuple[float, float, float, float] | None = None
    children: list[Node] = field(default_factory=list)

    def matrix(self) -> np.ndarray:
        """(4, 4) local transform T·R (glTF 2.0 spec §Transformations)."""
        m = np.eye(4)
        if self.rotation is not None:
            x, y, z, w = self.rotation
            m = trimesh.transformations.quaternion_matrix([w, x, y, z])  # trimesh wants w first
        if self.translation is not None:
            m[:3, 3] = self.translation
        return m


@dataclass
class Material:
    """A glTF PBR material (factors linear) with optional textures and KHR extensions."""

    name: str
    base_colour: list[float]
    metallic: float = 0.0
    roughness: float = 0.5
    base_texture: str | None = None
    normal_texture: str | None = None
    normal_scale: float = 1.0
    emissive: list[float] | None = None
    extensions: dict = field(default_factory=dict)


@dataclass
class Product:
    """One catalog item: a node tree plus the catalog facts about it."""

    sku: str
    name: str
    category: str
    file: str
    dimensions: tuple[float, float, float]  # nominal width (x), depth (z), height (y), metres
    root: Node
    materials: list[Material]
    description: str
    variants: list[str] = field(default_factory=list)
    seat_height: float | None = None


TEXTURES = {"oak_grain": wood_grain_png, "plain_weave": woven_normal_png}


# ----------------------------------------------------------------------------------------------
# The six products
# ----------------------------------------------------------------------------------------------

OAK = Material("oiled_oak", srgb_to_linear("#b88a5c"), roughness=0.55)
OAK_GRAIN = Material("oiled_oak_grain", [1.0, 1.0, 1.0], roughness=0.5, base_texture="oak_grain")
SMOKED_OAK = Material("smoked_oak", srgb_to_linear("#5a3f2b"), roughness=0.5)


def oak_dining_chair() -> Product:
    """Dining chair: four legs, a rounded seat, a backrest tilted 6° on the rear posts."""
    leg, post_top, seat_top = 0.035, 0.84, 0.45
    front_leg = Mesh("front_leg", [part(box([leg, 0.42, leg], [0, 0.21, 0]), OAK.name)])
    rear_post = Mesh("rear_post", [part(box([leg, post_top, leg], [0, post_top / 2, 0]), OAK.name)])
    x, z_front, z_back = 0.19, 0.2175, -0.2325
    legs = [
        Node("leg_front_left", front_leg, (x, 0, z_front)),
        Node("leg_front_right", front_leg, (-x, 0, z_front)),
        Node("post_back_left", rear_post, (x, 0, z_back)),
        Node("post_back_right", rear_post, (-x, 0, z_back)),
    ]
    span = 2 * x - leg  # between the inner faces of the legs
    rails = [part(box([0.02, 0.06, 0.415], [s * x, 0.39, -0.0075]), OAK.name) for s in (1, -1)] + [
        part(box([span, 0.06, 0.02], [0, 0.39, z_front]), OAK.name),
        part(box([span, 0.06, 0.02], [0, 0.39, z_back]), OAK.name),
        part(box([0.016, 0.025, 0.415], [x, 0.15, -0.0075]), OAK.name),
        part(box([0.016, 0.025, 0.415], [-x, 0.15, -0.0075]), OAK.name),
    ]
    seat = part(rounded_box([0.46, 0.03, 0.465], [0, seat_top - 0.015, 0.0175], 0.01), OAK.name)
    backrest = part(rounded_box([span, 0.12, 0.02], [0, 0, 0], 0.008), OAK.name)
    tilt = np.radians(-6.0)  # about +X: the top leans toward -Z, away from the sitter
    root = Node(
        "oak_dining_chair",
        children=[
            Node("legs", children=legs),
            Node("rails", Mesh("rails", rails)),
            Node("seat", Mesh("seat", [seat])),
            Node(
                "backrest",
                Mesh("backrest", [backrest]),
                (0, 0.75, z_back),
                (float(np.sin(tilt / 2)), 0.0, 0.0, float(np.cos(tilt / 2))),
            ),
        ],
    )
    return Product(
        "SL-1001",
        "Oak dining chair",
        "chair",
        "oak_dining_chair.glb",
        (0.46, 0.50, 0.84),
        root,
        [OAK],
        "Solid oiled oak dining chair with a softly rounded seat and a gently reclined back rail.",
        seat_height=seat_top,
    )


def oak_dining_table() -> Product:
    """Dining table for six: a 30 mm top on four square legs, grain-textured oak."""
    width, depth, height, top = 1.80, 0.90, 0.75, 0.03
    m = OAK_GRAIN.name
    leg_height = height - top
    leg = Mesh("leg", [part(box([0.06, leg_height, 0.06], [0, leg_height / 2, 0]), m, tile=1.2)])
    lx, lz = width / 2 - 0.08, depth / 2 - 0.08
    legs = [
        Node(f"leg_{i}", leg, (sx * lx, 0, sz * lz))
        for i, (sx, sz) in enumerate([(1, 1), (-1, 1), (-1, -1), (1, -1)])
    ]
    apron_y = leg_height - 0.045
    aprons = [
        part(box([2 * lx - 0.06, 0.08, 0.022], [0, apron_y, s * lz]), m, tile=1.2) for s in (1, -1)
    ] + [
        part(box([0.022, 0.08, 2 * lz - 0.06], [s * lx, apron_y, 0]), m, tile=1.2) for s in (1, -1)
    ]
    top_part = part(
        rounded_box([width, top, depth], [0, height - top / 2, 0], 0.008), m, tile=1.2, grain_axis=0
    )
    root = Node(
        "oak_dining_table",
        children=[
            Node("top", Mesh("top", [top_part])),
            Node("aprons", Mesh("aprons", aprons)),
            Node("legs", children=legs),
        ],
    )
    return Product(
        "SL-2001",
        "Oak dining table",
        "table",
        "oak_dining_table.glb",
        (width, depth, height),
        root,
        [OAK_GRAIN],
        "Six-seat dining table in oiled oak with a straight-grain top.",
    )


def brass_floor_lamp() -> Product:
    """Floor lamp: brass stem on a black base, an opal-glass shade and a warm emissive bulb."""
    brass = Material("polished_brass", srgb_to_linear("#e3c27a"), metallic=1.0, roughness=0.12)
    base_paint = Material(
        "black_lacquer",
        srgb_to_linear("#1c1c1e"),
        roughness=0.35,
        extensions={
            "KHR_materials_clearcoat": {"clearcoatFactor": 0.6, "clearcoatRoughnessFactor": 0.1}
        },
    )
    glass = Material(
        "opal_glass",
        srgb_to_linear("#f4ede2"),
        roughness=0.3,
        extensions={
            "KHR_materials_transmission": {"transmissionFactor": 0.9},
            "KHR_materials_ior": {"ior": 1.5},
            "KHR_materials_volume": {
                "thicknessFactor": 0.003,
                "attenuationDistance": 0.05,
                "attenuationColor": srgb_to_linear("#fbe3c0"),
            },
        },
    )
    bulb = Material(
        "warm_bulb",
        [1.0, 1.0, 1.0],
        roughness=0.2,
        emissive=[1.0, 0.84, 0.62],
        extensions={"KHR_materials_emissive_strength": {"emissiveStrength": 6.0}},
    )
    shade_bottom, shade_top, height, wall = 1.30, 1.55, 1.55, 0.003
    r_bottom, r_top = 0.18, 0.11
    shade = turned(
        [
            (r_bottom, shade_bottom),
            (r_top, shade_top),
            (r_top - wall, shade_top),
            (r_bottom - wall, shade_bottom),
            (r_bottom, shade_bottom),
        ],
        sections=48,
    )
    base = turned([(0, 0), (0.15, 0), (0.15, 0.016), (0.14, 0.024), (0, 0.024)], sections=48)
    socket = rod([0, 1.27, 0], [0, 1.32, 0], 0.025, 24)
    spoke_y = 1.31
    r_inner = (r_bottom - wall) - (r_bottom - r_top) * (spoke_y - shade_bottom) / (
        shade_top - shade_bottom
    )
    spokes = []
    for k in range(3):
        a = 2 * np.pi * k / 3 + np.pi / 6
        d = np.array([np.cos(a), 0, np.sin(a)])
        spokes.append(
            part(
                rod(d * 0.02 + [0, spoke_y, 0], d * (r_inner - 0.001) + [0, spoke_y, 0], 0.003, 8),
                brass.name,
            )
        )
    root = Node(
        "brass_floor_lamp",
        children=[
            Node("base", Mesh("base", [part(base, base_paint.name)])),
            Node(
                "stem",
                Mesh(
                    "stem",
                    [
                        part(rod([0, 0.02, 0], [0, 1.27, 0], 0.011, 24), brass.name),
                        part(socket, brass.name),
                    ]
                    + spokes,
                ),
            ),
            Node(
                "bulb",
                Mesh("bulb", [part(trimesh.creation.icosphere(2, 0.045), bulb.name)]),
                (0, 1.36, 0),
            ),
            Node("shade", Mesh("shade", [part(shade, glass.name)])),
        ],
    )
    return Product(
        "SL-3001",
        "Brass floor lamp",
        "lamp",
        "brass_floor_lamp.glb",
        (2 * r_bottom, 2 * r_bottom, height),
        root,
        [brass, base_paint, glass, bulb],
        "Floor lamp with a polished brass stem, a black lacquered base and a mouth-blown "
        "opal glass shade around a warm bulb.",
    )


FABRICS = {  # variant name: (base colour, sheen tint), sRGB
    "oat": ("#c8b79c", "#efe4d2"),
    "slate": ("#59606a", "#9aa3ae"),
    "moss": ("#5f6b45", "#a3ad86"),
}
# A modest sheen: half the tint, on fibres that keep it to grazing views (KHR_materials_sheen
# roughness 0.4). At full tint and roughness 0.6 the haze covered every face and washed the
# colours out.
SHEEN_STRENGTH, SHEEN_ROUGHNESS = 0.5, 0.4


def wool_sofa() -> Product:
    """Sofa in a woven wool-blend fabric with a normal map; colour options as material variants."""
    fabrics = [
        Material(
            f"fabric_{name}",
            srgb_to_linear(base),
            roughness=0.9,
            normal_texture="plain_weave",
            normal_scale=0.8,
            extensions={
                "KHR_materials_sheen": {
                    "sheenColorFactor": [SHEEN_STRENGTH * c for c in srgb_to_linear(sheen)],
                    "sheenRoughnessFactor": SHEEN_ROUGHNESS,
                }
            },
        )
        for name, (base, sheen) in FABRICS.items()
    ]
    default = fabrics[0].name
    options = {name: f"fabric_{name}" for name in FABRICS}

    def upholstered(size, centre, radius):
        mesh = rounded_box(size, centre, radius, steps=3)  # keeps the file under 300 KB
        return part(mesh, default, tile=0.06, grain_axis=0, tangents=True, variants=options)

    width, depth, height, seat = 2.00, 0.88, 0.80, 0.44
    leg = Mesh(
        "leg", [part(turned([(0, 0), (0.016, 0), (0.022, 0.1), (0, 0.1)], 24), SMOKED_OAK.name)]
    )
    legs = [
        Node(f"leg_{i}", leg, (sx * 0.9, 0, sz * 0.36))
        for i, (sx, sz) in enumerate([(1, 1), (-1, 1), (-1, -1), (1, -1)])
    ]
    arms = [upholstered([0.20, 0.54, depth], [s * 0.90, 0.37, 0], 0.05) for s in (1, -1)]
    frame = upholstered([1.60, 0.20, 0.86], [0, 0.20, 0], 0.03)
    back = upholstered([1.60, 0.50, 0.20], [0, 0.55, -0.34], 0.05)
    cushions = [
        upholstered([0.795, 0.14, 0.64], [s * 0.4, seat - 0.07, 0.11], 0.045) for s in (1, -1)
    ]
    pillows = [upholstered([0.78, 0.36, 0.16], [s * 0.4, 0.62, -0.17], 0.07) for s in (1, -1)]
    root = Node(
        "wool_sofa",
        children=[
            Node("legs", children=legs),
            Node("body", Mesh("body", arms + [frame, back])),
            Node("seat_cushions", Mesh("seat_cushions", cushions)),
            Node("back_cushions", Mesh("back_cushions", pillows)),
        ],
    )
    return Product(
        "SL-4001",
        "Wool sofa",
        "sofa",
        "wool_sofa.glb",
        (width, depth, height),
        root,
        fabrics + [SMOKED_OAK],
        "Deep sofa upholstered in a plain-weave wool blend, on turned smoked oak legs.",
        variants=list(FABRICS),
        seat_height=seat,
    )


def ash_bookcase() -> Product:
    """Open bookcase: two sides, top, plinth, four shelves and a painted back panel."""
    ash = Material("white_oiled_ash", srgb_to_linear("#dccbb0"), roughness=0.5)
    sage = Material("sage_paint", srgb_to_linear("#8c9a84"), roughness=0.7)
    width, depth, height, board = 0.80, 0.32, 1.80, 0.018
    inner = width - 2 * board
    boards = [
        part(box([board, height, depth], [s * (width - board) / 2, height / 2, 0]), ash.name)
        for s in (1, -1)
    ]
    boards.append(part(box([inner, board, depth], [0, height - board / 2, 0]), ash.name))
    shelf_depth = depth - 0.012  # shelves stop at the back panel
    levels = [0.06 + board / 2] + [0.06 + board / 2 + k * 0.415 for k in (1, 2, 3)]
    boards += [part(box([inner, board, shelf_depth], [0, y, 0.006]), ash.name) for y in levels]
    plinth = part(box([inner, 0.06, board], [0, 0.03, depth / 2 - 0.03]), ash.name)
    back = part(
        box(
            [inner, height - board - 0.06, 0.008],
            [0, (height - board + 0.06) / 2, -depth / 2 + 0.008],
        ),
        sage.name,
    )
    root = Node(
        "ash_bookcase",
        children=[
            Node("carcass", Mesh("carcass", boards + [plinth])),
            Node("back_panel", Mesh("back_panel", [back])),
        ],
    )
    return Product(
        "SL-5001",
        "Ash bookcase",
        "storage",
        "ash_bookcase.glb",
        (width, depth, height),
        root,
        [ash, sage],
        "Tall open bookcase in white-oiled ash with a sage painted back.",
    )


def lacquered_counter_stool() -> Product:
    """Counter stool: a lacquered (clearcoat) seat on four splayed chrome tubes with a footrest."""
    lacquer = Material(
        "red_lacquer",
        srgb_to_linear("#8c2a22"),
        roughness=0.45,
        extensions={
            "KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.04}
        },
    )
    # chromium's reflectance at normal incidence, about 0.55 linear (from memory, common practice)
    chrome = Material("chrome", [0.55, 0.556, 0.554], metallic=1.0, roughness=0.06)
    glide = Material("black_glide", srgb_to_linear("#202020"), roughness=0.8)
    height, seat_radius = 0.65, 0.19
    seat = turned(
        [
            (0, height - 0.045),
            (0.175, height - 0.045),
            (seat_radius, height - 0.03),
            (seat_radius, height - 0.012),
            (0.178, height),
            (0, height),
        ],
        sections=48,
    )
    plate = rod([0, height - 0.055, 0], [0, height - 0.045, 0], 0.13, 40)
    foot_r, top_r, foot_y, top_y = 0.165, 0.12, 0.012, height - 0.05
    tubes, glides = [], []
    for k in range(4):
        a = np.pi / 4 + k * np.pi / 2
        d = np.array([np.cos(a), 0, np.sin(a)])
        tubes.append(
            part(
                rod(d * foot_r + [0, foot_y, 0], d * top_r + [0, top_y, 0], 0.011, 16), chrome.name
            )
        )
        glides.append(
            part(rod(d * foot_r, d * foot_r + [0, foot_y + 0.002, 0], 0.013, 16), glide.name)
        )
    ring_y = 0.24
    ring_r = foot_r + (top_r - foot_r) * (ring_y - foot_y) / (top_y - foot_y)
    root = Node(
        "lacquered_counter_stool",
        children=[
            Node("seat", Mesh("seat", [part(seat, lacquer.name)])),
            Node(
                "frame",
                Mesh(
                    "frame",
                    tubes
                    + [part(plate, chrome.name), part(ring(ring_y, ring_r, 0.008), chrome.name)],
                ),
            ),
            Node("glides", Mesh("glides", glides)),
        ],
    )
    return Product(
        "SL-6001",
        "Lacquered counter stool",
        "stool",
        "lacquered_counter_stool.glb",
        (2 * seat_radius, 2 * seat_radius, height),
        root,
        [lacquer, chrome, glide],
        "Counter stool with a high-gloss lacquered seat on a chrome tube frame.",
        seat_height=height,
    )


PRODUCTS = (
    oak_dining_chair,
    oak_dining_table,
    brass_floor_lamp,
    wool_sofa,
    ash_bookcase,
    lacquered_counter_stool,
)


# ----------------------------------------------------------------------------------------------
# GLB writing
# ----------------------------------------------------------------------------------------------


class GlbWriter:
    """Collects one product's buffers, accessors, materials and textures into a glTF document."""

    def __init__(self, product: Product):
        self.product = product
        self.blob = bytearray()
        self.doc = gl.GLTF2(
            asset=gl.Asset(
                version="2.0",
                generator="shots assets_demo/make_catalog.py",
                copyright=f"{BRAND} is an invented demo brand",
            ),
            scene=0,
        )
        self.material_ids = {m.name: i for i, m in enumerate(product.materials)}
        self.texture_ids: dict[str, int] = {}
        self.mesh_ids: dict[int, int] = {}
        self.extensions: set[str] = set()

    def view(self, data: bytes, target: int | None) -> int:
        """Append ``data`` 4-byte aligned to the BIN chunk as one bufferView."""
        self.blob += b"\0" * (-len(self.blob) % 4)
        self.doc.bufferViews.append(
            gl.BufferView(buffer=0, byteOffset=len(self.blob), byteLength=len(data), target=target)
        )
        self.blob += data
        return len(self.doc.bufferViews) - 1

    def accessor(self, array: np.ndarray, kind: str, target: int, bounds: bool = False) -> int:
        """A tightly packed accessor over ``array`` (float32 or unsigned integer)."""
        component = {np.float32: FLOAT, np.uint16: UNSIGNED_SHORT, np.uint32: UNSIGNED_INT}
        array = np.ascontiguousarray(array)
        little_endian = array.astype(array.dtype.newbyteorder("<"), copy=False)
        acc = gl.Accessor(
            bufferView=self.view(little_endian.tobytes(), target),
            componentType=component[array.dtype.type],
            count=len(array),
            type=kind,
        )
        if bounds:  # POSITION requires min and max (glTF 2.0 spec §Accessors)
            acc.min = [float(v) for v in array.min(axis=0)]
            acc.max = [float(v) for v in array.max(axis=0)]
        self.doc.accessors.append(acc)
        return len(self.doc.accessors) - 1

    def texture(self, name: str) -> int:
        """The index of texture ``name``, embedding its PNG on first use."""
        if name not in self.texture_ids:
            if not self.doc.samplers:
                self.doc.samplers.append(
                    gl.Sampler(
                        magFilter=LINEAR, minFilter=LINEAR_MIPMAP_LINEAR, wrapS=REPEAT, wrapT=REPEAT
                    )
                )
            image = gl.Image(
                name=name, mimeType="image/png", bufferView=self.view(TEXTURES[name](), None)
            )
            self.doc.images.append(image)
            self.doc.textures.append(
                gl.Texture(name=name, sampler=0, source=len(self.doc.images) - 1)
            )
            self.texture_ids[name] = len(self.doc.textures) - 1
        return self.texture_ids[name]

    def material(self, m: Material) -> gl.Material:
        pbr = gl.PbrMetallicRoughness(
            baseColorFactor=[*m.base_colour, 1.0],
            metallicFactor=m.metallic,
            roughnessFactor=m.roughness,
        )
        if m.base_texture:
            pbr.baseColorTexture = gl.TextureInfo(index=self.texture(m.base_texture))
        out = gl.Material(
            name=m.name, pbrMetallicRoughness=pbr, emissiveFactor=m.emissive or [0.0, 0.0, 0.0]
        )
        if m.normal_texture:
            out.normalTexture = gl.NormalMaterialTexture(
                index=self.texture(m.normal_texture), scale=m.normal_scale
            )
        if m.extensions:
            out.extensions = dict(m.extensions)
            self.extensions.update(m.extensions)
        return out

    def primitive(self, p: Part) -> gl.Primitive:
        attributes = gl.Attributes(
            POSITION=self.accessor(p.positions, "VEC3", ARRAY_BUFFER, bounds=True),
            NORMAL=self.accessor(p.normals, "VEC3", ARRAY_BUFFER),
        )
        if p.tangents is not None:
            attributes.TANGENT = self.accessor(p.tangents, "VEC4", ARRAY_BUFFER)
        if p.uv is not None:
            attributes.TEXCOORD_0 = self.accessor(p.uv, "VEC2", ARRAY_BUFFER)
        # 16-bit indices only while 65535, the primitive-restart value, cannot occur
        index_type = np.uint16 if len(p.positions) < 65535 else np.uint32
        out = gl.Primitive(
            attributes=attributes,
            material=self.material_ids[p.material],
            indices=self.accessor(
                p.triangles.reshape(-1).astype(index_type), "SCALAR", ELEMENT_ARRAY_BUFFER
            ),
        )
        if p.variants:
            names = self.product.variants
            out.extensions = {
                "KHR_materials_variants": {
                    "mappings": [
                        {"material": self.material_ids[p.variants[v]], "variants": [names.index(v)]}
                        for v in names
                    ]
                }
            }
            self.extensions.add("KHR_materials_variants")
        return out

    def node(self, n: Node) -> int:
        out = gl.Node(name=n.name)
        if n.translation is not None:
            out.translation = [float(v) for v in n.translation]
        if n.rotation is not None:
            out.rotation = [float(v) for v in n.rotation]
        if n.mesh is not None:
            key = id(n.mesh)
            if key not in self.mesh_ids:
                self.doc.meshes.append(
                    gl.Mesh(name=n.mesh.name, primitives=[self.primitive(p) for p in n.mesh.parts])
                )
                self.mesh_ids[key] = len(self.doc.meshes) - 1
            out.mesh = self.mesh_ids[key]
        self.doc.nodes.append(out)
        index = len(self.doc.nodes) - 1
        out.children = [self.node(c) for c in n.children]
        return index

    def glb(self) -> bytes:
        """The finished GLB (glTF 2.0 spec §GLB File Format): header, JSON chunk, BIN chunk."""
        self.doc.materials = [self.material(m) for m in self.product.materials]
        root = self.node(self.product.root)
        self.doc.scenes = [gl.Scene(name=self.product.name, nodes=[root])]
        if self.product.variants:
            self.doc.extensions = {
                "KHR_materials_variants": {"variants": [{"name": v} for v in self.product.variants]}
            }
        self.doc.extensionsUsed = sorted(self.extensions)
        self.blob += b"\0" * (-len(self.blob) % 4)
        self.doc.buffers = [gl.Buffer(byteLength=len(self.blob))]
        text = self.doc.gltf_to_json(separators=(",", ":"), indent=None).encode("utf-8")
        text += b" " * (-len(text) % 4)
        total = 12 + 8 + len(text) + 8 + len(self.blob)
        return b"".join(
            [
                struct.pack("<4sII", b"glTF", 2, total),
                struct.pack("<I4s", len(text), b"JSON"),
                text,
                struct.pack("<I4s", len(self.blob), b"BIN\0"),
                bytes(self.blob),
            ]
        )


# ----------------------------------------------------------------------------------------------
# Catalog
# ----------------------------------------------------------------------------------------------


def world_bounds(node: Node, parent: np.ndarray | None = None) -> np.ndarray:
    """(2, 3) float64 min and max corner of every vertex under ``node``, transforms applied."""
    world = (np.eye(4) if parent is None else parent) @ node.matrix()
    corners = [world_bounds(child, world) for child in node.children]
    if node.mesh is not None:
        for p in node.mesh.parts:
            points = p.positions.astype(np.float64) @ world[:3, :3].T + world[:3, 3]
            corners.append(np.stack([points.min(axis=0), points.max(axis=0)]))
    both = np.concatenate(corners)
    return np.stack([both.min(axis=0), both.max(axis=0)])


def check_footprint(product: Product) -> None:
    """Refuse a model that misses its nominal size, floats above the floor or is off centre."""
    low, high = world_bounds(product.root)
    width, depth, height = product.dimensions
    expected_low = np.array([-width / 2, 0.0, -depth / 2])
    expected_high = np.array([width / 2, height, depth / 2])
    error = max(np.abs(low - expected_low).max(), np.abs(high - expected_high).max())
    if error > DIMENSION_TOLERANCE:
        raise ValueError(
            f"{product.name}: bounds {low} .. {high} miss the nominal "
            f"{product.dimensions} by {error:.4f} m"
        )


def catalog_entry(product: Product) -> dict:
    width, depth, height = product.dimensions
    entry = {
        "sku": product.sku,
        "name": product.name,
        "category": product.category,
        "file": product.file,
        "dimensions_m": {"width": width, "depth": depth, "height": height},
        "materials": [m.name for m in product.materials],
        "variants": product.variants,
        "description": product.description,
    }
    if product.seat_height is not None:
        entry["seat_height_m"] = product.seat_height
    return entry


def write_catalog(out_dir: str | Path) -> list[Path]:
    """Write every product's GLB and ``catalog.json`` into ``out_dir``.

    Parameters
    ----------
    out_dir : folder to write into (created if missing).

    Returns
    -------
    The written paths: one .glb per product in catalog order, then catalog.json.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written, entries = [], []
    for make in PRODUCTS:
        product = make()
        check_footprint(product)
        path = out / product.file
        path.write_bytes(GlbWriter(product).glb())
        written.append(path)
        entries.append(catalog_entry(product))
    catalog = {
        "brand": BRAND,
        "units": "metres",
        "axes": "+Y up, front faces +Z, origin at the centre of the floor footprint",
        "products": entries,
    }
    catalog_path = out / "catalog.json"
    catalog_path.write_text(json.dumps(catalog, indent=2) + "\n", encoding="utf-8")
    written.append(catalog_path)
    return written


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else HERE
    for written_path in write_catalog(target):
        print(f"{written_path}  {written_path.stat().st_size / 1024:.1f} KiB")
