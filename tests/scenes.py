"""Small test scenes built directly as ``shots.scene.Scene`` objects (no loader involved)."""

from __future__ import annotations

import numpy as np
import trimesh

from shots.camera import ORTHOGRAPHIC, Camera
from shots.gltf.textures import textures_from_codes
from shots.look import Environment, Ground, Look
from shots.render import prepare_scene, render_frame
from shots.scene import (
    FILTER_NEAREST,
    WRAP_REPEAT,
    MaterialTable,
    Scene,
    Textures,
    default_material_params,
)


def material(**values) -> np.ndarray:
    """A parameter row: spec defaults with ``P_*``-named overrides, e.g. material(P_METALLIC=0)."""
    import shots.scene as s

    row = default_material_params()
    for name, value in values.items():
        column = getattr(s, name)
        if np.ndim(value):
            row[column : column + len(value)] = value
        else:
            row[column] = value
    return row


def diffuse(color=(1.0, 1.0, 1.0), **values) -> np.ndarray:
    """A dielectric with base colour ``color``, roughness 1 and no other settings."""
    values = {"P_METALLIC": 0.0, "P_ROUGHNESS": 1.0, **values}
    return material(P_BASE_R=list(color), **values)


def mesh_scene(
    vertices, faces, normals=None, rows=None, tri_material=None, uv=None, tangents=None,
    colors=None, textures: Textures | None = None, table: MaterialTable | None = None,
) -> Scene:  # fmt: skip
    """A Scene from raw arrays; smooth normals come from the face winding when not given."""
    vertices = np.asarray(vertices, np.float32)
    faces = np.asarray(faces, np.int32)
    v = len(vertices)
    if normals is None:
        normals = trimesh.Trimesh(vertices, faces, process=False).vertex_normals
    if table is None:
        rows = rows if rows is not None else [diffuse()]
        table = MaterialTable.from_rows(list(rows), [f"m{i}" for i in range(len(rows))])
    uv_sets = np.zeros((2, v, 2), np.float32)
    if tangents is not None:
        tangents = np.asarray(tangents, np.float32)
    if colors is not None:
        colors = np.asarray(colors, np.float32)
    if tri_material is not None:
        tri_material = np.asarray(tri_material, np.int32)
    if uv is not None:
        uv = np.asarray(uv, np.float32)
        uv_sets[:] = uv if uv.ndim == 3 else uv[None]
    return Scene(
        positions=vertices,
        normals=np.asarray(normals, np.float32),
        tangents=np.zeros((v, 4), np.float32) if tangents is None else tangents,
        uv=uv_sets,
        colors=np.ones((v, 4), np.float32) if colors is None else colors,
        triangles=faces,
        tri_material=np.zeros(len(faces), np.int32) if tri_material is None else tri_material,
        materials=table,
        textures=textures or Textures(),
        source="<test>",
    )


def sphere(radius=1.0, center=(0.0, 0.0, 0.0), subdivisions=5, **kwargs) -> Scene:
    """An icosphere with analytic (radial) normals."""
    mesh = trimesh.creation.icosphere(subdivisions=subdivisions, radius=radius)
    normals = mesh.vertices / np.linalg.norm(mesh.vertices, axis=1, keepdims=True)
    return mesh_scene(mesh.vertices + np.asarray(center), mesh.faces, normals=normals, **kwargs)


def quad(center=(0.0, 0.0, 0.0), size=1.0, normal_axis="z", **kwargs) -> Scene:
    """A square facing +Z (counter-clockwise seen from +Z), uv (0,0) at its top-left corner."""
    h = size / 2.0
    c = np.asarray(center, np.float64)
    vertices = np.array([[-h, h, 0], [h, h, 0], [h, -h, 0], [-h, -h, 0]]) + c
    faces = np.array([[3, 2, 1], [3, 1, 0]])
    uv = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], np.float32)
    normals = np.tile([0.0, 0.0, 1.0], (4, 1))
    return mesh_scene(vertices, faces, normals=normals, uv=uv, **kwargs)


DARK = Environment(zenith=(0.0, 0.0, 0.0), horizon=(0.0, 0.0, 0.0), nadir=(0.0, 0.0, 0.0))


def look(*lights, env=DARK, ground="none", **kwargs) -> Look:
    """A look with these lights, a dark environment and no floor unless told otherwise."""
    ground = ground if isinstance(ground, Ground) else Ground(kind=ground)
    kwargs.setdefault("samples", 1)
    return Look(lights=tuple(lights), environment=env, ground=ground, tone_map="none", **kwargs)


def ortho_camera(size=32, half_height=1.2, eye=(0.0, 0.0, 5.0), target=(0.0, 0.0, 0.0),
                 up=(0.0, 1.0, 0.0), width=None) -> Camera:  # fmt: skip
    """An orthographic camera; pixel centres map to world positions linearly."""
    return Camera(eye=eye, target=target, up=up, width=width or size, height=size,
                  kind=ORTHOGRAPHIC, ymag=half_height)  # fmt: skip


def render(scene: Scene, camera: Camera, look_: Look) -> np.ndarray:
    """Prepare and render in one call: (h, w, 4) float32 premultiplied linear RGBA."""
    return render_frame(prepare_scene(scene), camera, look_)


def pixel_centres(camera: Camera) -> tuple[np.ndarray, np.ndarray]:
    """World (x, y) of every pixel centre of an orthographic camera looking down −Z."""
    j, i = np.mgrid[0 : camera.height, 0 : camera.width]
    x = (2.0 * (i + 0.5) / camera.width - 1.0) * camera.ymag * camera.aspect
    y = (1.0 - 2.0 * (j + 0.5) / camera.height) * camera.ymag
    return x, y


def single_texture(rgba: np.ndarray, wrap=WRAP_REPEAT, filter_=FILTER_NEAREST,
                   srgb: bool = False) -> Textures:  # fmt: skip
    """An atlas with one texture from (h, w, 4) values in [0, 1] (stored as 8-bit codes,
    rounded) or uint8 codes; ``filter_`` magnifies and minifies (no mipmap lookups)."""
    rgba = np.asarray(rgba)
    if rgba.dtype != np.uint8:
        rgba = np.rint(np.clip(rgba, 0.0, 1.0) * 255.0).astype(np.uint8)
    return textures_from_codes([(rgba, srgb, (wrap, wrap, filter_, filter_))])


def textured_table(row: np.ndarray, slots: dict[int, int], uv_transform=None) -> MaterialTable:
    """A one-material table whose texture slots (T_* → texture index) are set."""
    table = MaterialTable.from_rows([row], ["m0"])
    for slot, tex in slots.items():
        table.texture[0, slot] = tex
    if uv_transform is not None:
        table.uv_transform[0, :] = uv_transform
    return table


def box(extents=(1.0, 1.0, 1.0), center=(0.0, 0.0, 0.0), rotation_y=0.0, **kwargs) -> Scene:
    """An axis-aligned box (then turned about +Y by ``rotation_y`` radians) with flat normals."""
    mesh = trimesh.creation.box(extents=extents)
    mesh.unmerge_vertices()
    c, s = np.cos(rotation_y), np.sin(rotation_y)
    turn = np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])
    normals = np.repeat(mesh.face_normals, 3, axis=0)[np.argsort(mesh.faces.ravel())]
    vertices = mesh.vertices @ turn.T + np.asarray(center)
    return mesh_scene(vertices, mesh.faces, normals=normals @ turn.T, **kwargs)


def merge(*scenes: Scene) -> Scene:
    """Several single-table test scenes as one, each keeping its own materials."""
    offset, rows, faces, mats, parts = 0, [], [], [], {}
    for k, scene in enumerate(scenes):
        faces.append(scene.triangles + offset)
        mats.append(scene.tri_material + len(rows))
        rows.extend(scene.materials.params)
        offset += len(scene.positions)
        for name in ("positions", "normals", "tangents", "colors"):
            parts.setdefault(name, []).append(getattr(scene, name))
        parts.setdefault("uv", []).append(scene.uv)
        assert scene.textures.info.size == 0 or k == 0, "only the first part may have textures"
    table = MaterialTable.from_rows(rows, [f"m{i}" for i in range(len(rows))])
    return Scene(
        positions=np.concatenate(parts["positions"]),
        normals=np.concatenate(parts["normals"]),
        tangents=np.concatenate(parts["tangents"]),
        uv=np.concatenate(parts["uv"], axis=1),
        colors=np.concatenate(parts["colors"]),
        triangles=np.concatenate(faces).astype(np.int32),
        tri_material=np.concatenate(mats).astype(np.int32),
        materials=table,
        textures=scenes[0].textures,
        source="<test>",
    )
