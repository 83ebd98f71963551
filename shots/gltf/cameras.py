"""The file's own cameras (Spec §Cameras) and KHR_lights_punctual lights, in world space."""

from __future__ import annotations

import math

import numpy as np

from shots.gltf import checks
from shots.gltf.container import Document
from shots.scene import FileCamera, FileLight

LIGHT_KINDS = ("directional", "point", "spot")


def file_cameras(doc: Document, nodes: list[tuple[int, np.ndarray]]) -> tuple[FileCamera, ...]:
    """One FileCamera per node of the scene that carries a camera (glTF 2.0 spec §Cameras)."""
    gltf, src = doc.gltf, doc.source
    out = []
    for node_index, world in nodes:
        ref = gltf.nodes[node_index].camera
        if ref is None:
            continue
        c = checks.index(ref, gltf.cameras, src, f"nodes[{node_index}].camera", "cameras")
        cam, where = gltf.cameras[c], f"cameras[{c}]"
        kind = checks.text(cam.type, src, where + ".type")
        name = str(cam.name or gltf.nodes[node_index].name or where)
        if kind == "perspective" and cam.perspective is not None:
            p, here = cam.perspective, where + ".perspective"
            aspect = None
            if p.aspectRatio is not None:
                aspect = checks.number(p.aspectRatio, src, here + ".aspectRatio", low=1e-9)
            znear = checks.number(p.znear, src, here + ".znear", low=1e-30)
            zfar = None
            if p.zfar is not None:  # absent: infinite projection (Spec §Cameras)
                zfar = checks.number(p.zfar, src, here + ".zfar", low=znear * (1 + 1e-12))
            out.append(FileCamera(
                name=name, kind=kind, world=world.copy(),
                yfov=checks.number(p.yfov, src, here + ".yfov", low=1e-9, high=math.pi - 1e-9),
                aspect_ratio=aspect, znear=znear, zfar=zfar,
            ))
        elif kind == "orthographic" and cam.orthographic is not None:
            o, here = cam.orthographic, where + ".orthographic"
            xmag = checks.number(o.xmag, src, here + ".xmag")
            ymag = checks.number(o.ymag, src, here + ".ymag")
            if xmag == 0 or ymag == 0:
                raise doc.error(here, "xmag and ymag must not be zero (Spec §Cameras)")
            znear = checks.number(o.znear, src, here + ".znear", low=0.0)
            out.append(FileCamera(
                name=name, kind=kind, world=world.copy(), xmag=xmag, ymag=ymag, znear=znear,
                zfar=checks.number(o.zfar, src, here + ".zfar", low=znear * (1 + 1e-12) + 1e-30),
            ))
        else:
            raise doc.error(where + ".type", f"{kind!r:.30} camera without its parameters")
    return tuple(out)


def file_lights(doc: Document, nodes: list[tuple[int, np.ndarray]]) -> tuple[FileLight, ...]:
    """KHR_lights_punctual lights placed by the scene's nodes (KHR_lights_punctual README)."""
    gltf, src = doc.gltf, doc.source
    root = checks.mapping(gltf.extensions, src, "extensions")
    ext = checks.mapping(root.get("KHR_lights_punctual"), src,
                         "extensions.KHR_lights_punctual")
    lights = checks.array(ext.get("lights"), src, "extensions.KHR_lights_punctual.lights")
    out = []
    for node_index, world in nodes:
        node_ext = checks.mapping(gltf.nodes[node_index].extensions, src,
                                  f"nodes[{node_index}].extensions")
        if "KHR_lights_punctual" not in node_ext:
            continue
        here = f"nodes[{node_index}].extensions.KHR_lights_punctual"
        ref = checks.mapping(node_ext["KHR_lights_punctual"], src, here).get("light")
        k = checks.index(ref, lights, src, here + ".light", "lights")
        out.append(_light(doc, lights[k], k, node_index, world))
    return tuple(out)


def _light(doc: Document, light, k: int, node_index: int, world: np.ndarray) -> FileLight:
    src, where = doc.source, f"extensions.KHR_lights_punctual.lights[{k}]"
    light = checks.mapping(light, src, where)
    kind = checks.text(light.get("type"), src, where + ".type")
    if kind not in LIGHT_KINDS:
        raise doc.error(where + ".type", f"{kind!r:.20} is not directional, point or spot")
    direction = -world[:3, 2]  # the node's -Z; scale does not change light properties
    length = float(np.linalg.norm(direction))
    if not length > 0:
        raise doc.error(f"nodes[{node_index}]", "light node has a degenerate transform")
    light_range = light.get("range")
    if light_range is not None:
        light_range = checks.number(light_range, src, where + ".range", low=1e-30)
    inner, outer = 0.0, math.pi / 4
    if kind == "spot":
        spot = checks.mapping(light.get("spot"), src, where + ".spot")
        inner = checks.number(spot.get("innerConeAngle"), src, where + ".spot.innerConeAngle",
                              default=0.0, low=0.0, high=math.pi / 2)
        outer = checks.number(spot.get("outerConeAngle"), src, where + ".spot.outerConeAngle",
                              default=math.pi / 4, low=0.0, high=math.pi / 2)
        if inner >= outer:
            raise doc.error(where + ".spot", "innerConeAngle must be below outerConeAngle")
    r, g, b = checks.numbers(light.get("color"), 3, src, where + ".color", (1, 1, 1), low=0)
    return FileLight(
        name=str(light.get("name") or where),
        kind=kind,
        color=(r, g, b),
        intensity=checks.number(light.get("intensity"), src, where + ".intensity", default=1.0,
                                low=0.0),
        position=tuple(float(x) for x in world[:3, 3]),
        direction=tuple(float(x) for x in direction / length),
        range=light_range,
        inner_cone=inner,
        outer_cone=outer,
    )
