"""glTF 2.0 loader: a .gltf or .glb file in, one world-space ``shots.scene.Scene`` out.

Modules: ``container`` (GLB/JSON, URIs, security), ``accessors`` (typed, strided, sparse
decoding), ``geometry`` (scene graph, primitives), ``materials``, ``textures``, ``cameras``
(cameras and punctual lights), ``draco`` (optional), ``assemble`` (flat arrays).
"""

from __future__ import annotations

import os

import numpy as np

from shots.errors import GltfError
from shots.gltf import checks, draco, notes
from shots.gltf.accessors import AccessorReader
from shots.gltf.assemble import assemble
from shots.gltf.cameras import file_cameras, file_lights
from shots.gltf.container import Document, read_document
from shots.gltf.geometry import GeometryBuilder, scene_roots
from shots.gltf.materials import MATERIAL_EXTENSIONS, MaterialBuilder
from shots.gltf.textures import TextureAtlas
from shots.limits import DEFAULT, Limits
from shots.scene import Scene

__all__ = ["load_scene", "SUPPORTED_EXTENSIONS", "GltfError"]

SUPPORTED_EXTENSIONS = frozenset(
    MATERIAL_EXTENSIONS
    + ("KHR_mesh_quantization", "KHR_lights_punctual", "EXT_texture_webp")
    + ((draco.EXTENSION,) if draco.AVAILABLE else ())
)


def load_scene(path: str | os.PathLike, scene: int | str | None = None,
               max_triangles: int | None = None, max_texture_pixels: int | None = None,
               limits: Limits = DEFAULT) -> Scene:
    """Load a glTF 2.0 model (.gltf with external files or data: URIs, or .glb).

    Parameters
    ----------
    path : the model file; GLB is recognised by its magic number, not its extension.
    scene : index or name of the scene to render; default the file's ``scene``, else scenes[0].
    max_triangles, max_texture_pixels : shortcuts overriding those two ``limits``.
    limits : the budgets (``shots.limits``), each checked before the memory is taken.

    Returns
    -------
    Scene with world-space float32 geometry, int32 triangles, materials and textures.

    Raises
    ------
    GltfError for any malformed, hostile or unsupported input, naming the JSON field.
    """
    overrides = {"triangles": max_triangles, "texture_pixels": max_texture_pixels}
    limits = limits.model_copy(update={k: v for k, v in overrides.items() if v is not None})
    doc = read_document(path, limits)
    try:
        # NaN/Inf in hostile data are handled explicitly (dropped or replaced), not warned about
        with np.errstate(all="ignore"):
            return _build(doc, scene, limits)
    except GltfError:
        raise
    except MemoryError:
        raise doc.error(None, "not enough memory to load the model") from None
    except RecursionError:
        raise doc.error(None, "structure nested too deeply") from None


def _build(doc: Document, choice, limits: Limits) -> Scene:
    _check_extensions(doc)
    doc.variant_names = _variant_names(doc)
    atlas = TextureAtlas(doc, limits.texture_pixels, limits.texture_bytes)
    materials = MaterialBuilder(doc, atlas)
    reader = AccessorReader(doc, max_elements=4 * limits.triangles + 1024)
    builder = GeometryBuilder(doc, reader, materials.count, materials.normal_map_texcoord,
                              limits.triangles, draco.decode_primitive if draco.AVAILABLE else None,
                              max_instances=limits.instances)
    roots = scene_roots(doc, choice)
    nodes = builder.add_scene(roots)
    builder.warn_dropped()
    notes.unused_features(doc, nodes)
    cameras = file_cameras(doc, nodes)
    notes.camera_notes(doc, cameras)
    mesh = assemble(doc, builder.pieces, len(doc.variant_names))
    if mesh.triangles.shape[0] == 0:
        doc.warn("the scene has no triangles to render")
    return Scene(
        positions=mesh.positions,
        normals=mesh.normals,
        tangents=mesh.tangents,
        uv=mesh.uv,
        colors=mesh.colors,
        triangles=mesh.triangles,
        tri_material=mesh.tri_material,
        materials=materials.table(),
        textures=atlas.result(),
        variants={name: mesh.variants[k] for k, name in enumerate(doc.variant_names)},
        cameras=cameras,
        lights=file_lights(doc, nodes),
        source=doc.source,
        warnings=tuple(doc.warnings),
    )


def _check_extensions(doc: Document) -> None:
    """Refuse required extensions we do not implement, note the ignored ones (glTF 2.0 spec
    §Specifying Extensions)."""
    src, gltf = doc.source, doc.gltf
    required = checks.array(gltf.extensionsRequired, src, "extensionsRequired")
    for k, name in enumerate(required):
        if not isinstance(name, str) or name not in SUPPORTED_EXTENSIONS:
            hint = " (install DracoPy)" if name == draco.EXTENSION else ""
            raise doc.error(f"extensionsRequired[{k}]",
                            f"required extension {name!r:.60} is not supported{hint}")
    used = checks.array(gltf.extensionsUsed, src, "extensionsUsed")
    ignored = sorted(str(n) for n in used if str(n) not in SUPPORTED_EXTENSIONS)
    if ignored:
        doc.ignore(f"extensions ignored: {', '.join(ignored)}")


def _variant_names(doc: Document) -> list[str]:
    """KHR_materials_variants names, in file order (duplicates made unique)."""
    src = doc.source
    root = checks.mapping(doc.gltf.extensions, src, "extensions")
    ext = checks.mapping(root.get("KHR_materials_variants"), src,
                         "extensions.KHR_materials_variants")
    names: list[str] = []
    for k, item in enumerate(checks.array(ext.get("variants"), src,
                                          "extensions.KHR_materials_variants.variants")):
        item = checks.mapping(item, src, f"extensions.KHR_materials_variants.variants[{k}]")
        names.append(str(item.get("name") or f"variant {k}"))
    return unique_names(names)


def unique_names(names: list[str]) -> list[str]:
    """``names`` with repeats made unique by a ``#2``, ``#3``... suffix, in linear time."""
    taken = set(names)
    seen: dict[str, int] = {}
    out = []
    for name in names:
        if name in seen:
            number = seen[name]
            while f"{name} #{number}" in taken:
                number += 1
            seen[name] = number + 1
            name = f"{name} #{number}"
            taken.add(name)
        else:
            seen[name] = 2
        out.append(name)
    return out
