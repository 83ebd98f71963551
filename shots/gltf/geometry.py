"""Scene graph and primitives: world transforms, triangulation, attributes in world space.

Spec §Transformations: local = T·R·S (quaternion x, y, z, w) or the column-major ``matrix``;
world = parent · local. Spec §Meshes: modes, defaults, flat normals when NORMAL is absent.
Spec §Instantiation: a negative determinant flips the winding.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pygltflib

from shots.gltf import checks
from shots.gltf.accessors import AccessorReader
from shots.gltf.container import Document
from shots.gltf.mikktspace import mikktspace_corners, split_vertices

TRIANGLES, TRIANGLE_STRIP, TRIANGLE_FAN = 4, 5, 6
MODE_NAMES = {0: "POINTS", 1: "LINES", 2: "LINE_LOOP", 3: "LINE_STRIP"}
RESTART = {np.dtype("u1"): 0xFF, np.dtype("u2"): 0xFFFF, np.dtype("u4"): 0xFFFFFFFF}


@dataclass
class Piece:
    """One primitive instanced by one node, in world space (arrays of ``v`` vertices)."""

    positions: np.ndarray  # (v, 3) float32
    normals: np.ndarray  # (v, 3) float32, unit
    triangles: np.ndarray  # (k, 3) int32, local vertex numbers, counter-clockwise
    material: int
    tangents: np.ndarray | None = None  # (v, 4) float32
    uv: list[np.ndarray | None] = field(default_factory=lambda: [None, None])  # (v, 2) each
    colors: np.ndarray | None = None  # (v, 4) float32
    variants: dict[int, int] = field(default_factory=dict)  # variant index -> material


# ---------------------------------------------------------------- scene graph --------------

def scene_roots(doc: Document, choice: int | str | None) -> list[int]:
    """Root nodes of the chosen scene: by index or name, else ``scene``, else scenes[0] (glTF 2.0
    spec §Scenes leaves that last choice open)."""
    gltf, src = doc.gltf, doc.source
    scenes = gltf.scenes or []
    if not scenes:
        raise doc.error("scenes", "the file defines no scene to render")
    if isinstance(choice, str):
        names = [s.name for s in scenes]
        if choice not in names:
            raise doc.error("scenes", f"no scene named {choice!r}; have {names}")
        chosen = names.index(choice)
    elif choice is not None:
        chosen = checks.index(choice, scenes, src, "scene (requested)", "scenes")
    elif gltf.scene is not None:
        chosen = checks.index(gltf.scene, scenes, src, "scene", "scenes")
    else:
        chosen = 0  # a note either way: the spec leaves the choice to the client
        doc.warn("no default scene: rendering scenes[0]" if len(scenes) > 1
                 else "no `scene` property: scene 0 used")
    nodes = checks.array(scenes[chosen].nodes, src, f"scenes[{chosen}].nodes")
    return [checks.index(n, gltf.nodes, src, f"scenes[{chosen}].nodes[{k}]", "nodes")
            for k, n in enumerate(nodes)]


def world_transforms(doc: Document, roots: list[int]) -> list[tuple[int, np.ndarray]]:
    """Every node under ``roots`` with its (4, 4) float64 world matrix, parents first.

    Nodes must form disjoint trees (Spec §Nodes and Hierarchy): a node reached twice (a cycle,
    or two parents) is refused, which also bounds the work a hostile file can cause.
    """
    gltf, src = doc.gltf, doc.source
    seen: set[int] = set()
    out: list[tuple[int, np.ndarray]] = []
    stack: list[tuple[int, np.ndarray, str]] = [
        (r, np.eye(4), "scene roots") for r in reversed(roots)
    ]
    while stack:
        i, parent, via = stack.pop()
        if i in seen:
            raise doc.error(f"nodes[{i}]", f"reached twice (from {via}): the node graph has a "
                                           "cycle or a node with two parents")
        seen.add(i)
        world = parent @ local_matrix(doc, i)
        out.append((i, world))
        children = checks.array(gltf.nodes[i].children, src, f"nodes[{i}].children")
        for k in range(len(children) - 1, -1, -1):
            c = checks.index(children[k], gltf.nodes, src, f"nodes[{i}].children[{k}]", "nodes")
            stack.append((c, world, f"nodes[{i}].children[{k}]"))
    return out


def local_matrix(doc: Document, i: int) -> np.ndarray:
    """(4, 4) float64 local transform of node ``i`` (glTF 2.0 spec §Transformations)."""
    node, src, where = doc.gltf.nodes[i], doc.source, f"nodes[{i}]"
    if node.matrix is not None:
        m = checks.numbers(node.matrix, 16, src, where + ".matrix")
        return np.array(m, np.float64).reshape(4, 4).T  # column-major storage
    t = checks.numbers(node.translation, 3, src, where + ".translation", (0.0, 0.0, 0.0))
    q = checks.numbers(node.rotation, 4, src, where + ".rotation", (0.0, 0.0, 0.0, 1.0))
    s = checks.numbers(node.scale, 3, src, where + ".scale", (1.0, 1.0, 1.0))
    out = np.eye(4)
    out[:3, :3] = quaternion_matrix(q, doc, where + ".rotation") * np.array(s)  # R·S
    out[:3, 3] = t
    return out


def quaternion_matrix(q: list[float], doc: Document, where: str) -> np.ndarray:
    """(3, 3) rotation of the unit quaternion ``q`` = (x, y, z, w), w the scalar (glTF 2.0 spec
    §Transformations)."""
    x, y, z, w = q
    norm = np.sqrt(x * x + y * y + z * z + w * w)
    if not norm > 1e-12:
        raise doc.error(where, "zero-length quaternion")
    x, y, z, w = x / norm, y / norm, z / norm, w / norm
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
    ])


# ---------------------------------------------------------------- primitives ---------------

def triangulate(order: np.ndarray, mode: int) -> np.ndarray:
    """(k, 3) int32 triangles from a vertex order and a mode (glTF 2.0 spec §Meshes, ``mode``).

    Vertex order as in the Vulkan specification, "Primitive Topologies": strip triangle
    i = (v_i, v_{i+1+i%2}, v_{i+2-i%2}); fan triangle i = (v_{i+1}, v_{i+2}, v_0).
    ``order`` values must already be checked to lie below 2**31.
    """
    n = order.shape[0]
    if mode == TRIANGLES:
        return order[: n - n % 3].astype(np.int32).reshape(-1, 3)
    order = order.astype(np.int32, copy=False)
    k = max(n - 2, 0)
    i = np.arange(k)
    if mode == TRIANGLE_STRIP:
        odd = i % 2
        return np.stack([order[i], order[i + 1 + odd], order[i + 2 - odd]], axis=1)
    return np.stack([order[i + 1], order[i + 2], np.repeat(order[:1], k)], axis=1)


def triangle_count(n: int, mode: int) -> int:
    return n // 3 if mode == TRIANGLES else max(n - 2, 0)


class GeometryBuilder:
    """Collects every primitive instance of a scene as world-space ``Piece``s.

    ``needs_tangents(material)`` says whether a material samples a normal map and, if so, which
    TEXCOORD set (None when it does not).
    """

    def __init__(self, doc: Document, reader: AccessorReader, material_count: int,
                 needs_tangents: Callable[[int], int | None], max_triangles: int,
                 draco: Callable | None = None, max_instances: int = 1 << 62):
        self.doc = doc
        self.reader = reader
        self.material_count = material_count
        self.needs_tangents = needs_tangents
        self.max_triangles = max_triangles
        self.max_instances = max_instances
        self.draco = draco
        self.pieces: list[Piece] = []
        self.total_triangles = 0
        self.dropped_non_finite = 0
        self.dropped_zero_area = 0
        self.skipped_modes: dict[str, int] = {}
        self._local_triangles: dict[tuple, tuple] = {}
        self._bounds_checked: set[int] = set()
        self._alignment_checked: set[int] = set()
        self._decoded: set[tuple[int, int]] = set()

    def add_scene(self, roots: list[int]) -> list[tuple[int, np.ndarray]]:
        """Add every mesh instance under ``roots``; returns the nodes with world matrices."""
        gltf, src = self.doc.gltf, self.doc.source
        nodes = world_transforms(self.doc, roots)
        self._check_declared_size(nodes)
        for node_index, world in nodes:
            mesh = gltf.nodes[node_index].mesh
            if mesh is None:
                continue
            m = checks.index(mesh, gltf.meshes, src, f"nodes[{node_index}].mesh", "meshes")
            if not np.all(np.isfinite(world)):
                raise self.doc.error(f"nodes[{node_index}]", "world transform is not finite")
            prims = checks.array(gltf.meshes[m].primitives, src, f"meshes[{m}].primitives")
            for p in range(len(prims)):
                self._add_primitive(m, p, world, node_index)
        return nodes

    def _check_declared_size(self, nodes: list[tuple[int, np.ndarray]]) -> None:
        """Refuse a scene over the triangle or instance budget before building any of it.

        Triangles are counted from the declared ``count`` of each primitive's indices (or
        POSITION) accessor and its mode (Spec §Meshes), once per node instance; a malformed
        primitive counts 0 here and is reported by the full pass.
        """
        gltf = self.doc.gltf
        per_mesh: dict[int, tuple[int, int, str]] = {}
        triangles = instances = 0
        for node_index, _ in nodes:
            m = gltf.nodes[node_index].mesh
            if not (isinstance(m, int) and 0 <= m < len(gltf.meshes or ())):
                continue
            if m not in per_mesh:
                per_mesh[m] = _declared_mesh_size(gltf, m)
            drawn, prims, biggest = per_mesh[m]
            triangles += drawn
            instances += prims
            if triangles > self.max_triangles:
                where = biggest if drawn > self.max_triangles else f"nodes[{node_index}]"
                raise self.doc.error(where, f"the scene declares {triangles} triangles or more, "
                                            f"over the limit triangles {self.max_triangles}")
            if instances > self.max_instances:
                raise self.doc.error(f"nodes[{node_index}]", f"the scene draws {instances} mesh "
                                     f"primitives or more, over the limit instances "
                                     f"{self.max_instances}")

    def _add_primitive(self, m: int, p: int, world: np.ndarray, node_index: int) -> None:
        doc, src, where = self.doc, self.doc.source, f"meshes[{m}].primitives[{p}]"
        prim = doc.gltf.meshes[m].primitives[p]
        extensions = checks.mapping(prim.extensions, src, where + ".extensions")
        if "KHR_draco_mesh_compression" in extensions and (m, p) not in self._decoded:
            self._decoded.add((m, p))  # once per primitive, however often it is instanced
            if self.draco is not None:
                self.draco(doc, self.reader, prim, where)
            elif not _has_fallback(doc, prim):
                raise doc.error(where + ".extensions.KHR_draco_mesh_compression",
                                "Draco-compressed geometry needs the DracoPy package")
        mode = checks.integer(prim.mode, src, where + ".mode", high=6, default=TRIANGLES)
        if mode in MODE_NAMES:  # counted, named once per model in warn_dropped
            name = MODE_NAMES[mode]
            self.skipped_modes[name] = self.skipped_modes.get(name, 0) + 1
            return
        attributes = _attributes(prim, doc, where)
        if "POSITION" not in attributes:
            doc.warn(f"{where}: no POSITION attribute, primitive skipped")
            return
        reader = self.reader
        position_index = attributes["POSITION"]
        positions = reader.floats(position_index, where + ".attributes.POSITION", ("VEC3",))
        n_vertices = positions.shape[0]
        if position_index not in self._bounds_checked:
            self._bounds_checked.add(position_index)
            self._check_declared_bounds(position_index)
        self._check_alignment(position_index, where + ".attributes.POSITION")
        local, drawn = self._triangles(prim, mode, positions, position_index, where)
        self.total_triangles += drawn
        if self.total_triangles > self.max_triangles:
            raise doc.error(where, f"the scene exceeds the limit of {self.max_triangles} "
                                   "triangles")
        material = self.material_count
        if prim.material is not None:
            material = checks.index(prim.material, doc.gltf.materials, src,
                                    where + ".material", "materials")

        def attribute(name: str, types: tuple[str, ...]) -> np.ndarray | None:
            if name not in attributes:
                return None
            data = reader.floats(attributes[name], f"{where}.attributes.{name}", types)
            self._check_alignment(attributes[name], f"{where}.attributes.{name}")
            if data.shape[0] != n_vertices:
                raise doc.error(f"{where}.attributes.{name}", f"count {data.shape[0]} differs "
                                                              f"from POSITION count {n_vertices}")
            return data

        linear = world[:3, :3]
        det = float(np.linalg.det(linear))
        if not abs(det) > 1e-300:
            doc.warn(f"nodes[{node_index}]: singular transform, mesh {m} skipped")
            return
        if det < 0:
            local = local[:, [0, 2, 1]]  # Spec §Instantiation: mirrored, so flip the winding
        piece = Piece(
            positions=_transform_points(positions, world),
            normals=np.zeros((0, 3), np.float32),
            triangles=local,
            material=material,
            uv=[attribute("TEXCOORD_0", ("VEC2",)), attribute("TEXCOORD_1", ("VEC2",))],
            colors=_rgba(attribute("COLOR_0", ("VEC3", "VEC4"))),
            variants=self._variant_mapping(extensions, where),
        )
        _add_shading_frame(piece, attribute("NORMAL", ("VEC3",)), attribute, linear, det,
                           self.needs_tangents(material))
        self.pieces.append(piece)

    def _check_alignment(self, i: int, where: str) -> None:
        """Warn once per accessor about a vertex attribute off the 4-byte grid (glTF 2.0 spec
        §3.6.2.2); it still loads (numpy reads unaligned data)."""
        if i in self._alignment_checked:
            return
        self._alignment_checked.add(i)
        reason = self.reader.vertex_misalignment(i)
        if reason is not None:
            self.doc.warn(f"accessors[{i}] ({where}): {reason}; vertex attributes must be "
                          "4-byte aligned")

    def _check_declared_bounds(self, i: int) -> None:
        """Warn when POSITION's min/max are missing or disagree with its data (glTF 2.0 spec
        §3.6.2.4: POSITION MUST declare them, in the accessor's own, unnormalized values)."""
        acc = self.doc.gltf.accessors[i]
        if not acc.min or not acc.max:  # absent (pygltflib gives [] or None)
            self.doc.warn(f"accessors[{i}]: POSITION has no min/max (required)")
            return
        try:
            declared = np.array([acc.min, acc.max], np.float64).reshape(2, 3)
        except (TypeError, ValueError):
            return  # malformed: nothing to compare with
        positions = self.reader.raw(i)  # stored values: normalized ints stay integers
        # column by column: numpy's axis reductions over (v, 3) are slow
        actual = np.array([[positions[:, k].min() for k in range(3)],
                           [positions[:, k].max() for k in range(3)]], np.float64)
        if not np.isfinite(actual).all():
            return  # NaN/Inf vertices are reported when their triangles are dropped
        tolerance = 1e-5 * (1.0 + np.abs(declared))
        if not np.all(np.abs(actual - declared) <= tolerance):
            self.doc.warn(f"accessors[{i}]: POSITION min/max {declared.tolist()} differ from "
                          f"the data {actual.tolist()}")

    def _triangles(self, prim, mode: int, positions: np.ndarray, position_index: int,
                   where: str) -> tuple[np.ndarray, int]:
        """Usable local (k, 3) triangles of a primitive and the count it draws before dropping.

        Cached per (indices, mode, POSITION) so an instanced mesh is checked once.
        """
        if prim.indices is not None:
            checks.index(prim.indices, self.doc.gltf.accessors, self.doc.source,
                         where + ".indices", "accessors")
        key = (prim.indices, mode, position_index)
        if key not in self._local_triangles:
            self._local_triangles[key] = self._new_triangles(prim, mode, positions, where)
        local, drawn, non_finite, zero_area = self._local_triangles[key]
        self.dropped_non_finite += non_finite
        self.dropped_zero_area += zero_area
        return local, drawn

    def warn_dropped(self) -> None:
        if self.skipped_modes:
            counts = ", ".join(f"{n} {mode}" for mode, n in sorted(self.skipped_modes.items()))
            self.doc.ignore(f"primitives without a surface not rendered: {counts}")
        if self.dropped_non_finite:
            self.doc.warn(f"{self.dropped_non_finite} triangles with NaN or infinite vertices "
                          "dropped")
        if self.dropped_zero_area:
            self.doc.warn(f"{self.dropped_zero_area} degenerate (zero-area) triangles dropped")

    def _new_triangles(self, prim, mode: int, positions: np.ndarray, where: str):
        n_vertices = positions.shape[0]
        if prim.indices is None:
            order = np.arange(n_vertices, dtype=np.int32)
        else:
            order = self.reader.indices(prim.indices, where + ".indices")
            if order.size:
                top = int(order.max())
                if top == RESTART.get(order.dtype):
                    raise self.doc.error(where + ".indices", f"contains the primitive-restart "
                                                             f"value {top} (Spec §Meshes)")
                if top >= n_vertices:
                    raise self.doc.error(where + ".indices", f"index {top} is out of range "
                                                             f"({n_vertices} vertices)")
        if mode == TRIANGLES and order.shape[0] % 3:
            self.doc.warn(f"{where}: {order.shape[0]} indices is not a multiple of 3; "
                          "the remainder is ignored")
        local = triangulate(order, mode)
        bad, zero = unusable_triangles(positions, local)
        drop = bad | zero
        if drop.any():
            return local[~drop], local.shape[0], int(bad.sum()), int(zero.sum())
        return local, local.shape[0], 0, 0

    def _variant_mapping(self, extensions: dict, where: str) -> dict[int, int]:
        """KHR_materials_variants: variant index -> material for this primitive."""
        ext = extensions.get("KHR_materials_variants")
        if ext is None:
            return {}
        src, here = self.doc.source, where + ".extensions.KHR_materials_variants"
        count = len(self.doc.variant_names)
        out: dict[int, int] = {}
        mappings = checks.array(checks.mapping(ext, src, here).get("mappings"), src,
                                here + ".mappings")
        for k, mapping in enumerate(mappings):
            mapping = checks.mapping(mapping, src, f"{here}.mappings[{k}]")
            material = checks.index(mapping.get("material"), self.doc.gltf.materials, src,
                                    f"{here}.mappings[{k}].material", "materials")
            variants = checks.array(mapping.get("variants"), src, f"{here}.mappings[{k}].variants")
            for j, v in enumerate(variants):
                if not (isinstance(v, int) and not isinstance(v, bool) and 0 <= v < count):
                    raise self.doc.error(f"{here}.mappings[{k}].variants[{j}]",
                                         f"variant {v!r:.20} does not exist ({count} defined)")
                out[v] = material
        return out


def _declared_mesh_size(gltf, m: int) -> tuple[int, int, str]:
    """(triangles, primitives, the count field of its largest primitive) mesh ``m`` declares,
    from accessor counts alone."""
    prims = gltf.meshes[m].primitives
    if not isinstance(prims, list):
        return 0, 0, ""
    accessors = gltf.accessors or []
    triangles, largest, biggest = 0, -1, ""
    for prim in prims:
        mode = prim.mode if prim.mode is not None else TRIANGLES
        attributes = prim.attributes
        position = (attributes.get("POSITION") if isinstance(attributes, dict)
                    else getattr(attributes, "POSITION", None))
        source = prim.indices if prim.indices is not None else position
        if mode not in (TRIANGLES, TRIANGLE_STRIP, TRIANGLE_FAN) or not (
                isinstance(source, int) and 0 <= source < len(accessors)):
            continue
        count = accessors[source].count
        if isinstance(count, int) and not isinstance(count, bool):
            drawn = triangle_count(max(count, 0), mode)
            triangles += drawn
            if drawn > largest:
                largest, biggest = drawn, f"accessors[{source}].count"
    return triangles, len(prims), biggest


def _add_shading_frame(piece: Piece, normals: np.ndarray | None, attribute: Callable,
                       linear: np.ndarray, det: float, texcoord: int | None) -> None:
    """World normals (inverse-transpose, renormalised) and tangents, given or generated."""
    if normals is None:
        _make_flat(piece)  # Spec §Meshes: flat normals; TANGENT is then ignored
    else:
        piece.normals = _unit(_transform_vectors(normals, np.linalg.inv(linear).T))
        tangents = attribute("TANGENT", ("VEC4",))
        if tangents is not None:
            piece.tangents = _world_tangents(tangents, linear, det)
    if texcoord is not None and piece.tangents is None:  # a normal map needs a tangent frame
        generate_tangents(piece, piece.uv[min(texcoord, 1)])


def _has_fallback(doc: Document, prim) -> bool:
    """Whether a compressed primitive also carries uncompressed POSITION data."""
    position = _attributes(prim, doc, "").get("POSITION")
    return position is not None and doc.gltf.accessors[position].bufferView is not None


def _attributes(prim, doc: Document, where: str) -> dict[str, int]:
    raw = prim.attributes
    if isinstance(raw, pygltflib.Attributes):
        raw = vars(raw)
    if not isinstance(raw, dict):
        raise doc.error(f"{where}.attributes", "must be a JSON object")
    out = {}
    for name, value in raw.items():
        if value is None:
            continue
        out[name] = checks.index(value, doc.gltf.accessors, doc.source,
                                 f"{where}.attributes.{name}", "accessors")
    return out


# ---------------------------------------------------------------- attribute maths ----------

def _transform_points(points: np.ndarray, world: np.ndarray) -> np.ndarray:
    """(v, 3) float32 world positions, a new C-contiguous array.

    float32 arithmetic: the result is float32 anyway, and numpy's float64 path is several
    times slower on (v, 3) arrays.
    """
    linear = world[:3, :3]
    offset = world[:3, 3].astype(np.float32)
    if np.array_equal(linear, np.eye(3)):
        return points + offset
    out = np.einsum("ij,kj->ik", points, linear.astype(np.float32))
    out += offset
    return out


def _transform_vectors(vectors: np.ndarray, matrix: np.ndarray) -> np.ndarray:
    """(v, 3) float32 ``matrix @ vector`` for each row."""
    return np.einsum("ij,kj->ik", vectors, matrix.astype(np.float32))


def _unit(v: np.ndarray) -> np.ndarray:
    """Rows scaled to unit length; zero or non-finite rows become zeros (fixed later)."""
    v = np.asarray(v, np.float32)
    length = np.sqrt(np.einsum("ij,ij->i", v, v))
    bad = ~(length > 0) | ~np.isfinite(length)  # the first catches NaN too
    length[bad] = 1.0
    out = v / length[:, None]
    out[bad] = 0.0
    return out


def _rgba(colors: np.ndarray | None) -> np.ndarray | None:
    """COLOR_0 as (v, 4); VEC3 gets alpha 1 (Spec §Meshes)."""
    if colors is None or colors.shape[1] == 4:
        return colors
    return np.concatenate([colors, np.ones((colors.shape[0], 1), np.float32)], axis=1)


def _world_tangents(tangents: np.ndarray, linear: np.ndarray, det: float) -> np.ndarray:
    """Tangents follow the model matrix; a mirror flips the bitangent sign w."""
    out = np.empty((tangents.shape[0], 4), np.float32)
    out[:, :3] = _unit(_transform_vectors(tangents[:, :3], linear))
    out[:, 3] = np.where(tangents[:, 3] < 0, -1.0, 1.0) * (1.0 if det > 0 else -1.0)
    return out


def unusable_triangles(positions: np.ndarray,
                       triangles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Masks (k,) of triangles touching a NaN/Inf vertex, and of the other zero-area ones.

    Works on one coordinate column at a time: gathering 1-D float32 arrays is several times
    faster than gathering (v, 3) rows.
    """
    a, b, c = triangles[:, 0], triangles[:, 1], triangles[:, 2]
    if np.isfinite(positions).all():
        non_finite = np.zeros(triangles.shape[0], bool)
    else:
        finite = np.isfinite(positions[:, 0]) & np.isfinite(positions[:, 1]) \
            & np.isfinite(positions[:, 2])
        non_finite = ~(finite[a] & finite[b] & finite[c])
    edges = []
    for axis in range(3):
        column = np.ascontiguousarray(positions[:, axis])
        origin = column[a]
        edges.append((column[b] - origin, column[c] - origin))
    (x1, x2), (y1, y2), (z1, z2) = edges
    # the cross product is zero exactly when all three of its components are
    zero = (y1 * z2 == z1 * y2) & (z1 * x2 == x1 * z2) & (x1 * y2 == y1 * x2)
    return non_finite, zero & ~non_finite


def face_normals(positions: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """(k, 3) float32 unit normals of counter-clockwise triangles (zeros when degenerate)."""
    a, b, c = (np.take(positions, triangles[:, k], axis=0).astype(np.float64) for k in range(3))
    return _unit(np.cross(b - a, c - a))


def _make_flat(piece: Piece) -> None:
    """Give every triangle its own three vertices with the face normal (Spec §Meshes)."""
    tris = piece.triangles
    flat = tris.reshape(-1)
    piece.normals = np.repeat(face_normals(piece.positions, tris), 3, axis=0)
    piece.positions = np.take(piece.positions, flat, axis=0)
    piece.uv = [None if uv is None else np.take(uv, flat, axis=0) for uv in piece.uv]
    piece.colors = None if piece.colors is None else np.take(piece.colors, flat, axis=0)
    piece.triangles = np.arange(flat.shape[0], dtype=np.int32).reshape(-1, 3)
    piece.tangents = None


def generate_tangents(piece: Piece, uv: np.ndarray | None) -> None:
    """Give ``piece`` MikkTSpace tangents (``shots.gltf.mikktspace``), splitting the vertices
    whose corners need different tangents (mirrored UV seams). Without UVs any tangent
    perpendicular to the normal will do (w = +1)."""
    if uv is None or piece.triangles.shape[0] == 0:
        piece.tangents = np.ones((piece.positions.shape[0], 4), np.float32)
        piece.tangents[:, :3] = _any_perpendicular(piece.normals)
        return
    corners = mikktspace_corners(piece.positions, piece.normals, piece.triangles, uv)
    source, piece.triangles, piece.tangents = split_vertices(piece.triangles, corners)
    piece.positions = np.take(piece.positions, source, axis=0)
    piece.normals = np.take(piece.normals, source, axis=0)
    piece.uv = [None if t is None else np.take(t, source, axis=0) for t in piece.uv]
    piece.colors = None if piece.colors is None else np.take(piece.colors, source, axis=0)


def _any_perpendicular(normals: np.ndarray) -> np.ndarray:
    """Unit vectors perpendicular to each normal (for tangents without usable UVs)."""
    helper = np.where(np.abs(normals[:, :1]) < 0.9, [[1.0, 0.0, 0.0]], [[0.0, 1.0, 0.0]])
    out = _unit(np.cross(normals, helper).astype(np.float32))
    out[~out.any(axis=1)] = (1.0, 0.0, 0.0)
    return out
