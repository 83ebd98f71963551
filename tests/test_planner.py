"""The shot planner: framing, turntables, orbits, keyframed paths, file cameras, light rigs."""

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import trimesh
from PIL import Image

from shots.camera import ORTHOGRAPHIC, Camera
from shots.errors import PresetError, RenderError
from shots.gltf import load_scene
from shots.pathplot import HEADER, PALETTE, PANEL, write_path_picture
from shots.planner import Extent, camera_from_file, plan_frames
from shots.presets import Preset, apply_model_fixes
from shots.scene import FileCamera, FileLight, MaterialTable, Scene, default_material_params

SAMPLES = Path(__file__).parent / "data" / "samples"


def mesh_scene(mesh: trimesh.Trimesh, **extra) -> Scene:
    """A Scene holding one trimesh mesh with the default material."""
    vertices = np.asarray(mesh.vertices, np.float32)
    faces = np.asarray(mesh.faces, np.int32)
    n = len(vertices)
    return Scene(
        positions=vertices,
        normals=np.tile(np.float32([0, 1, 0]), (n, 1)),
        tangents=np.zeros((n, 4), np.float32),
        uv=np.zeros((2, n, 2), np.float32),
        colors=np.ones((n, 4), np.float32),
        triangles=faces,
        tri_material=np.zeros(len(faces), np.int32),
        materials=MaterialTable.from_rows([default_material_params()], ["default"]),
        source="test-mesh",
        **extra,
    )


def box(extents, centre=(0.0, 0.0, 0.0)) -> Scene:
    mesh = trimesh.creation.box(extents=extents)
    mesh.apply_translation(centre)
    return mesh_scene(mesh)


def ellipsoid() -> Scene:
    mesh = trimesh.creation.icosphere(subdivisions=3)
    mesh.apply_scale([0.9, 0.4, 0.6])
    mesh.apply_translation([0.2, 0.8, -0.3])
    return mesh_scene(mesh)


def capsule() -> Scene:
    mesh = trimesh.creation.capsule(height=1.2, radius=0.3)
    mesh.apply_transform(trimesh.transformations.rotation_matrix(0.7, [1, 0.2, 0]))
    return mesh_scene(mesh)


MODELS = {
    "sofa box": lambda: box((2.2, 0.8, 0.9), (0.3, 0.45, -0.2)),
    "ellipsoid": ellipsoid,
    "tilted capsule": capsule,
    # Khronos glTF sample models (tests/data/samples/NOTICE.md), loaded by shots.gltf.
    "Box.gltf": lambda: load_scene(SAMPLES / "Box.gltf"),
    "SimpleMeshes.gltf": lambda: load_scene(SAMPLES / "SimpleMeshes.gltf"),
    "MetalRoughSpheresNoTextures.glb": lambda: load_scene(
        SAMPLES / "MetalRoughSpheresNoTextures.glb"
    ),
    "AlphaBlendModeTest.glb": lambda: load_scene(SAMPLES / "AlphaBlendModeTest.glb"),
}
VIEWS = ["front", "front_left", "left", "back_right", "top", "bottom"]
SIZES = [(160, 120), (90, 160), (128, 128)]


def preset_with(*shots, image=None, lights=None, **tables) -> Preset:
    data = {"image": image or {"width": 160, "height": 120}, "shots": list(shots), **tables}
    if lights is not None:
        data["lights"] = lights
    return Preset.model_validate(data)


def projected_box(camera: Camera, scene: Scene | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Bounding box (low, high) in pixels of the model's vertices through Camera.project."""
    points = Extent.of(scene).points if isinstance(scene, Scene) else scene
    xy = camera.project(points)
    return xy.min(axis=0), xy.max(axis=0)


def assert_fills(camera: Camera, scene, fill: float, tolerance: float = 0.01):
    """The limiting side of the projected box spans ``fill`` of the frame, the other side no
    more, and the box is centred. (The fit is exact, so this checks a hundredth of a pixel.)"""
    low, high = projected_box(camera, scene)
    span, frame = high - low, np.array([camera.width, camera.height], float)
    limiting = int(np.argmax(span / frame))
    assert span[limiting] == pytest.approx(fill * frame[limiting], abs=tolerance)
    assert np.all(span <= fill * frame + tolerance)
    np.testing.assert_allclose(0.5 * (low + high), frame / 2, atol=tolerance)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("projection", ["perspective", "orthographic"])
def test_tight_views_fill_and_centre_the_frame(model, projection):
    scene = MODELS[model]()
    points = Extent.of(scene).points
    lens = {"focal_length_mm": 35} if projection == "perspective" else {}
    big = len(points) > 20_000  # keep the run short: large samples get one size and elevation
    for width, height in SIZES[:1] if big else SIZES:
        for elevation in (25.0,) if big else (0.0, 25.0):
            shot = {"name": "v", "kind": "views", "views": VIEWS, "framing": "tight",
                    "fill": 0.7, "elevation_deg": elevation, "projection": projection, **lens}
            preset = preset_with(shot, image={"width": width, "height": height})
            for frame in plan_frames(preset, scene):
                assert_fills(frame.camera, points, 0.7)


@pytest.mark.parametrize("projection", ["perspective", "orthographic"])
def test_same_scale_views_share_one_distance_and_stay_centred(projection):
    scene = MODELS["sofa box"]()
    extent = Extent.of(scene)
    shot = {"name": "v", "kind": "views", "views": ["front", "left", "top"], "fill": 0.8,
            "same_scale": True, "projection": projection}
    frames = plan_frames(preset_with(shot), scene)
    reaches, fills = [], []
    for frame in frames:
        camera = frame.camera
        w = camera.basis()[2]
        reaches.append(camera.ymag if projection == "orthographic"
                       else float(np.subtract(camera.eye, extent.centre) @ w))
        low, high = projected_box(camera, scene)
        frame_size = np.array([camera.width, camera.height])
        np.testing.assert_allclose(0.5 * (low + high), frame_size / 2, atol=0.01)
        fills.append(float(np.max((high - low) / frame_size)))
    np.testing.assert_allclose(reaches, reaches[0], rtol=1e-12)
    assert max(fills) == pytest.approx(0.8, abs=1e-9) and min(fills) < 0.79
    if projection == "orthographic":  # one scale: the sofa's 2.2 m is as long in front and top
        widths = [np.ptp(projected_box(f.camera, scene), axis=0)[0] for f in frames]
        assert widths[0] == pytest.approx(widths[2], rel=1e-9)


def test_margin_is_the_other_way_to_give_fill():
    scene = MODELS["sofa box"]()
    shot = {"name": "v", "kind": "views", "views": ["front_left"], "margin": 0.1}
    [frame] = plan_frames(preset_with(shot), scene)
    assert_fills(frame.camera, scene, 0.8)  # fill = 1 − 2·margin


def test_tight_view_keeps_the_named_direction():
    scene = MODELS["sofa box"]()
    shot = {"name": "v", "kind": "views", "views": ["front_left"], "elevation_deg": 20}
    [frame] = plan_frames(preset_with(shot), scene)
    view = np.subtract(frame.camera.eye, frame.camera.target)
    az, el = math.radians(45), math.radians(20)
    expected = [math.sin(az) * math.cos(el), math.sin(el), math.cos(az) * math.cos(el)]
    np.testing.assert_allclose(view / np.linalg.norm(view), expected, atol=1e-9)


def test_sphere_framing_distance_is_radius_over_sine_of_half_fov():
    # Right triangle eye–centre–tangent point: distance = r / sin(fov_min / 2); r = 1, 40° → 2.9238.
    scene = mesh_scene(trimesh.creation.icosphere(subdivisions=3))
    shot = {"name": "t", "kind": "turntable", "frames": 8, "framing": "sphere", "fill": 1.0,
            "yfov_deg": 40, "elevation_deg": 10}
    frames = plan_frames(preset_with(shot, image={"width": 64, "height": 64}), scene)
    for frame in frames:
        distance = np.linalg.norm(np.subtract(frame.camera.eye, frame.camera.target))
        assert distance == pytest.approx(2.9238, abs=1e-4)


def test_sphere_framing_uses_the_narrower_field_of_view():
    # Portrait image: the horizontal fov is the smaller one; tan(xfov/2) = aspect·tan(yfov/2).
    scene = mesh_scene(trimesh.creation.icosphere(subdivisions=3))
    shot = {"name": "v", "kind": "views", "framing": "sphere", "fill": 1.0, "yfov_deg": 60}
    [frame] = plan_frames(preset_with(shot, image={"width": 50, "height": 100}), scene)
    xfov = 2 * math.atan(0.5 * math.tan(math.radians(30)))
    distance = np.linalg.norm(np.subtract(frame.camera.eye, frame.camera.target))
    assert distance == pytest.approx(1 / math.sin(xfov / 2), rel=1e-6)  # float32 vertices


@pytest.mark.parametrize("frames", [1, 7, 24, 36])
def test_turntable_steps_evenly_without_repeating_the_first_frame(frames):
    scene = MODELS["sofa box"]()
    shot = {"name": "t", "kind": "turntable", "frames": frames, "elevation_deg": 15,
            "start_azimuth_deg": 10}
    planned = plan_frames(preset_with(shot), scene)
    assert [f.index for f in planned] == list(range(frames))
    pivot = np.asarray(planned[0].camera.target)
    offsets = np.array([np.subtract(f.camera.eye, pivot) for f in planned])
    distances = np.linalg.norm(offsets, axis=1)
    np.testing.assert_allclose(distances, distances[0], rtol=1e-12)  # no zoom pumping
    elevations = np.degrees(np.arcsin(offsets[:, 1] / distances))
    np.testing.assert_allclose(elevations, 15.0, atol=1e-9)
    azimuths = np.degrees(np.arctan2(offsets[:, 0], offsets[:, 2]))
    np.testing.assert_allclose(azimuths[0], 10.0, atol=1e-9)
    steps = np.diff(np.append(azimuths, azimuths[0] + 360.0)) % 360.0
    np.testing.assert_allclose(steps, 360.0 / frames if frames > 1 else 0.0, atol=1e-9)
    # Turning frame N−1 by one more step about +Y gives frame 0 again, so frame N would repeat it.
    angle = math.radians(360.0 / frames)
    turn = np.array([[math.cos(angle), 0, math.sin(angle)], [0, 1, 0],
                     [-math.sin(angle), 0, math.cos(angle)]])
    np.testing.assert_allclose(turn @ offsets[-1], offsets[0], atol=1e-9)
    assert len({tuple(np.round(o, 9)) for o in offsets}) == frames
    assert len({f.camera.yfov for f in planned}) == 1


@pytest.mark.parametrize("projection", ["perspective", "orthographic"])
def test_tight_turntable_keeps_every_frame_inside_fill_and_touches_once(projection):
    scene = MODELS["sofa box"]()
    shot = {"name": "t", "kind": "turntable", "frames": 12, "fill": 0.75, "elevation_deg": 20,
            "projection": projection}
    frames = plan_frames(preset_with(shot), scene)
    widest = 0.0
    for frame in frames:
        low, high = projected_box(frame.camera, scene)
        frame_size = np.array([frame.camera.width, frame.camera.height])
        # Symmetric about the centre of the frame: half-extent from the centre, per side.
        reach = np.maximum(frame_size / 2 - low, high - frame_size / 2) / (frame_size / 2)
        assert np.all(reach <= 0.75 + 1e-9)
        widest = max(widest, float(reach.max()))
    assert widest == pytest.approx(0.75, abs=1e-9)


@pytest.mark.parametrize("projection", ["perspective", "orthographic"])
def test_fixed_scale_gives_equal_pixels_per_metre_across_models(projection):
    stool, sofa = box((0.4, 0.45, 0.4), (1.0, 0.225, 0.0)), box((2.2, 0.8, 0.9), (0, 0.4, 0))
    shot = {"name": "s", "kind": "views", "views": ["front", "front_left"], "framing": "scale",
            "pixels_per_metre": 40, "projection": projection}
    preset = preset_with(shot)
    widths = {}
    for name, scene in (("stool", stool), ("sofa", sofa)):
        for frame in plan_frames(preset, scene):
            camera = frame.camera
            u = camera.basis()[0]
            left, right = camera.project(np.array([camera.target - 0.5 * u,
                                                   camera.target + 0.5 * u]))
            # One metre across the view at the target's depth spans pixels_per_metre pixels.
            assert np.linalg.norm(right - left) == pytest.approx(40.0, rel=1e-9)
            if frame.view == "front" and projection == "orthographic":
                low, high = projected_box(camera, scene)
                widths[name] = high[0] - low[0]
    if projection == "orthographic":  # a stool looks smaller than a sofa, by their true widths
        assert widths["stool"] == pytest.approx(0.4 * 40, abs=1e-4)
        assert widths["sofa"] == pytest.approx(2.2 * 40, abs=1e-4)


def test_fixed_scale_refuses_a_camera_inside_the_model():
    shot = {"name": "s", "kind": "views", "framing": "scale", "pixels_per_metre": 1e5}
    with pytest.raises(PresetError, match=r"shots\[0\]\.pixels_per_metre.*inside the model"):
        plan_frames(preset_with(shot), MODELS["sofa box"]())


def test_named_views_follow_gltf_directions():
    # glTF 2.0 spec §Coordinate System and Units: the front faces +Z and the
    # model's left side +X; in a front view a marker at +X appears in the right half.
    scene = box((1, 1, 1))
    shot = {"name": "v", "kind": "views", "views": ["front", "back", "left", "right", "top"],
            "framing": "sphere"}
    frames = {f.view: f.camera for f in plan_frames(preset_with(shot), scene)}
    directions = {"front": [0, 0, 1], "back": [0, 0, -1], "left": [1, 0, 0], "right": [-1, 0, 0],
                  "top": [0, 1, 0]}
    for view, expected in directions.items():
        offset = np.subtract(frames[view].eye, frames[view].target)
        np.testing.assert_allclose(offset / np.linalg.norm(offset), expected, atol=1e-12)
    marker = np.array([[0.4, 0.0, 0.0]])
    assert frames["front"].project(marker)[0, 0] > 80
    assert frames["back"].project(marker)[0, 0] < 80
    # Top view: up corrected to −Z, so the front (+Z) is toward the bottom of the image.
    assert frames["top"].up == (0.0, 0.0, -1.0)
    assert frames["top"].project(np.array([[0.0, 0.0, 0.4]]))[0, 1] > 60


def test_orbit_arc_includes_both_ends_and_eases():
    scene = MODELS["ellipsoid"]()
    azimuths = {}
    for easing in ("linear", "ease_in_out"):
        shot = {"name": "o", "kind": "orbit", "frames": 9, "from_azimuth_deg": -60,
                "to_azimuth_deg": 60, "elevation_deg": 10, "to_elevation_deg": 40,
                "easing": easing, "framing": "sphere"}
        frames = plan_frames(preset_with(shot), scene)
        offsets = np.array([np.subtract(f.camera.eye, f.camera.target) for f in frames])
        azimuths[easing] = np.degrees(np.arctan2(offsets[:, 0], offsets[:, 2]))
        elevations = np.degrees(np.arcsin(offsets[:, 1] / np.linalg.norm(offsets, axis=1)))
        assert elevations[0] == pytest.approx(10) and elevations[-1] == pytest.approx(40)
    np.testing.assert_allclose(azimuths["linear"], np.linspace(-60, 60, 9), atol=1e-9)
    steps = np.diff(azimuths["ease_in_out"])
    assert azimuths["ease_in_out"][[0, -1]] == pytest.approx([-60, 60])
    assert steps[0] < steps[3] and steps[-1] < steps[4]  # slow at both ends
    assert steps.sum() == pytest.approx(120)


PATH_KEYS = [
    {"eye": [3.0, 0.5, 3.0]},
    {"eye": [0.0, 2.0, 4.0], "yfov_deg": 30},
    {"eye": [-3.0, 1.0, 1.0], "target": [0.2, 0.0, 0.0]},
    {"eye": [-1.0, 0.3, -3.0]},
]


def test_path_without_times_moves_at_constant_speed_through_every_key():
    scene = box((1, 1, 1))
    shot = {"name": "p", "kind": "path", "frames": 61, "space": "world", "keys": PATH_KEYS,
            "yfov_deg": 40}
    frames = plan_frames(preset_with(shot), scene)
    eyes = np.array([f.camera.eye for f in frames])
    steps = np.linalg.norm(np.diff(eyes, axis=0), axis=1)
    # Arc-length reparametrisation: equal chords between frames (to the table's resolution).
    np.testing.assert_allclose(steps, steps.mean(), rtol=2e-3)
    np.testing.assert_allclose(eyes[0], PATH_KEYS[0]["eye"], atol=1e-12)
    np.testing.assert_allclose(eyes[-1], PATH_KEYS[-1]["eye"], atol=1e-12)
    # Catmull–Rom interpolates: the curve passes through the middle keys too.
    for key in PATH_KEYS[1:3]:
        assert np.min(np.linalg.norm(eyes - key["eye"], axis=1)) < steps.mean()


def test_path_with_times_reaches_each_key_at_its_time():
    scene = box((1, 1, 1))
    keys = [dict(k, time=t) for k, t in zip(PATH_KEYS, [0.0, 1.0, 3.0, 4.0], strict=True)]
    shot = {"name": "p", "kind": "path", "frames": 9, "space": "world", "keys": keys,
            "yfov_deg": 40}
    frames = plan_frames(preset_with(shot), scene)  # frames at t = 0, 0.5, ..., 4
    for frame_index, key in zip([0, 2, 6, 8], keys, strict=True):
        np.testing.assert_allclose(frames[frame_index].camera.eye, key["eye"], atol=1e-9)
        np.testing.assert_allclose(frames[frame_index].camera.target, key.get("target", [0] * 3),
                                   atol=1e-9)
    assert math.degrees(frames[2].camera.yfov) == pytest.approx(30)
    assert math.degrees(frames[1].camera.yfov) == pytest.approx(35)  # halfway from 40° to 30°
    # Constant speed within a segment: the two half-steps of segment 0 have equal chords.
    eyes = np.array([f.camera.eye for f in frames[:3]])
    chords = np.linalg.norm(np.diff(eyes, axis=0), axis=1)
    assert chords[0] == pytest.approx(chords[1], rel=0.05)


def test_path_in_model_space_scales_with_the_model():
    keys = [{"eye": [0.0, 0.0, 3.0]}, {"eye": [3.0, 0.0, 0.0]}]
    shot = {"name": "p", "kind": "path", "frames": 2, "keys": keys}
    small = plan_frames(preset_with(shot), box((1, 1, 1), (5, 0, 0)))
    radius = math.sqrt(3) / 2
    np.testing.assert_allclose(small[0].camera.eye, [5, 0, 3 * radius], atol=1e-6)
    np.testing.assert_allclose(small[0].camera.target, [5, 0, 0], atol=1e-6)


def file_camera_scene() -> Scene:
    rotation = trimesh.transformations.rotation_matrix(0.4, [0, 1, 0])
    world = rotation @ np.diag([2.0, 2.0, 2.0, 1.0])  # a scaled camera node: scale is ignored
    world[:3, 3] = [1.5, 0.5, 4.0]
    cameras = (
        FileCamera("Hero", "perspective", world, yfov=0.6, aspect_ratio=1.5, znear=0.1),
        FileCamera("Plan", "orthographic", world, xmag=2.0, ymag=1.0, znear=0.1, zfar=10.0),
    )
    return mesh_scene(trimesh.creation.box(), cameras=cameras)


def test_file_camera_view_is_the_node_transform_without_scale():
    # glTF 2.0 spec §Cameras (View Matrix): view = inverse of the node's world
    # transform with its scale removed; the camera looks down its −Z.
    scene = file_camera_scene()
    world = scene.cameras[0].world.copy()
    world[:3, :3] /= np.linalg.norm(world[:3, :3], axis=0)
    camera = camera_from_file(scene.cameras[0], (100, 80), Extent.of(scene))
    np.testing.assert_allclose(camera.view_matrix(), np.linalg.inv(world), atol=1e-12)
    assert camera.yfov == 0.6
    assert (camera.width, camera.height) == (120, 80)  # Spec §Cameras: aspectRatio = W / H
    plan = camera_from_file(scene.cameras[1], (100, 80), Extent.of(scene))
    assert plan.kind == ORTHOGRAPHIC and plan.ymag == 1.0 and plan.width == 160


def test_file_cameras_by_name_and_index_and_helpful_refusals():
    scene = file_camera_scene()
    by_name = plan_frames(preset_with({"name": "f", "kind": "file_camera", "camera": "Plan"}),
                          scene)
    by_index = plan_frames(preset_with({"name": "f", "kind": "file_camera", "camera": 1}), scene)
    assert by_name[0].camera == by_index[0].camera and by_name[0].camera.kind == ORTHOGRAPHIC
    with pytest.raises(PresetError, match=r"shots\[0\]\.camera: .*no camera 'hero'; did you mean "
                                          r"'Hero'\? \(cameras: 'Hero', 'Plan'\)"):
        plan_frames(preset_with({"name": "f", "kind": "file_camera", "camera": "hero"}), scene)
    with pytest.raises(PresetError, match=r"index 2 is out of range"):
        plan_frames(preset_with({"name": "f", "kind": "file_camera", "camera": 2}), scene)


def test_sample_file_with_cameras():
    # Khronos sample Cameras.gltf: a perspective camera (yfov 0.7, aspectRatio 1.0) and an
    # orthographic one (xmag = ymag = 1), both on a node translated to (0.5, 0.5, 3).
    scene = load_scene(SAMPLES / "Cameras.gltf")
    frames = plan_frames(preset_with({"name": "a", "kind": "file_camera", "camera": 0},
                                     {"name": "b", "kind": "file_camera", "camera": 1}), scene)
    perspective, orthographic = (f.camera for f in frames)
    assert perspective.eye == (0.5, 0.5, 3.0) and perspective.yfov == pytest.approx(0.7)
    np.testing.assert_allclose(perspective.basis(), np.eye(3), atol=1e-12)
    assert (perspective.width, perspective.height) == (120, 120)
    assert orthographic.kind == ORTHOGRAPHIC and orthographic.ymag == 1.0


RIG = [
    {"name": "key", "kind": "area", "azimuth_deg": -35, "elevation_deg": 35, "distance": 4,
     "size": [2, 1], "intensity": 10},
    {"name": "spot", "kind": "spot", "azimuth_deg": 60, "elevation_deg": 20, "distance": 3,
     "intensity": 2, "cone_deg": 25, "inner_cone_deg": 10},
    {"name": "sun", "kind": "directional", "attached_to": "world", "azimuth_deg": 90,
     "elevation_deg": 45, "intensity": 3},
]


def test_rig_lights_travel_with_the_camera_around_a_turntable():
    scene = MODELS["sofa box"]()
    extent = Extent.of(scene)
    shot = {"name": "t", "kind": "turntable", "frames": 8, "elevation_deg": 10}
    frames = plan_frames(preset_with(shot, lights=RIG), scene)
    in_camera_frames = []
    for frame in frames:
        key, spot, sun = frame.look.lights
        u, _, w = frame.camera.basis()
        heading = w - w[1] * np.array([0, 1, 0])
        heading /= np.linalg.norm(heading)
        offset = np.subtract(key.position, extent.centre)
        in_camera_frames.append([offset @ heading, offset[1], offset @ u])
        assert offset @ u < 0  # negative azimuth: on the camera's left
        # Lights aim at the model's centre.
        np.testing.assert_allclose(key.direction, -offset / np.linalg.norm(offset), atol=1e-12)
        # World-attached light stays put.
        assert sun.direction == frames[0].look.lights[2].direction
    np.testing.assert_allclose(in_camera_frames, [in_camera_frames[0]] * len(frames), atol=1e-9)
    c, s = math.cos(math.radians(35)), math.sin(math.radians(35))
    expected = 4 * extent.radius * np.array([c * c, s, -c * s])  # azimuth −35°, elevation 35°
    np.testing.assert_allclose(in_camera_frames[0], expected, atol=1e-9)


def test_rig_light_units():
    scene = MODELS["ellipsoid"]()
    extent = Extent.of(scene)
    shot = {"name": "v", "kind": "views", "views": ["front"]}
    key, spot, sun = plan_frames(preset_with(shot, lights=RIG), scene)[0].look.lights
    # Area light: a rectangle of size × radius facing the centre, cross(edge_u, edge_v) along
    # its direction (shots.look.Light convention).
    edge_u, edge_v = np.array(key.edge_u), np.array(key.edge_v)
    assert np.linalg.norm(edge_u) == pytest.approx(2 * extent.radius)
    assert np.linalg.norm(edge_v) == pytest.approx(1 * extent.radius)
    normal = np.cross(edge_u, edge_v)
    np.testing.assert_allclose(normal / np.linalg.norm(normal), key.direction, atol=1e-12)
    assert abs(edge_u[1]) < 1e-12  # the long edge is horizontal
    # Spot light: illuminance E at the centre → candela I = E·d² (inverse-square law, as in
    # KHR_lights_punctual).
    assert spot.intensity == pytest.approx(2 * (3 * extent.radius) ** 2)
    assert spot.outer_cone == pytest.approx(math.radians(25))
    assert spot.inner_cone == pytest.approx(math.radians(10))
    assert sun.kind == "directional" and sun.intensity == 3
    expected_sun = -np.array([math.cos(math.radians(45)), math.sin(math.radians(45)), 0.0])
    np.testing.assert_allclose(sun.direction, expected_sun, atol=1e-12)


def test_look_carries_the_preset_settings_and_a_stable_seed():
    preset = preset_with({"name": "t", "kind": "turntable", "frames": 3},
                         image={"width": 64, "height": 48, "samples": 9, "bounces": 2, "seed": 5},
                         look={"exposure": 0.5}, ground={"kind": "plane"})
    frames = plan_frames(preset, box((1, 1, 1)))
    again = plan_frames(preset, box((1, 1, 1)))
    assert [f.seed for f in frames] == [f.seed for f in again]
    assert len({f.seed for f in frames}) == 3 and frames[0].look.seed == frames[0].seed
    look = frames[0].look
    assert (look.samples, look.max_depth, look.exposure, look.ground.kind) == (9, 2, 0.5, "plane")


def test_frame_json_is_complete_and_serialisable():
    preset = preset_with({"name": "v", "kind": "views", "views": ["front", "top"]},
                         {"name": "o", "kind": "views", "projection": "orthographic"},
                         lights=RIG[:1])
    rows = [f.to_json() for f in plan_frames(preset, box((1, 1, 1)))]
    json.dumps(rows)
    for row in rows:
        assert {"shot", "frame", "eye", "target", "up", "width", "height"} <= set(row)
        assert ("yfov_deg" in row) != ("ymag" in row)
    assert rows[1]["view"] == "top" and rows[1]["up"] == [0.0, 0.0, -1.0]
    assert rows[2]["projection"] == "orthographic"


def test_an_empty_model_or_preset_is_refused():
    empty = replace(box((1, 1, 1)), triangles=np.zeros((0, 3), np.int32),
                    tri_material=np.zeros(0, np.int32))
    with pytest.raises(RenderError, match="no triangles"):
        plan_frames(preset_with({"name": "v", "kind": "views"}), empty)
    with pytest.raises(PresetError, match="shots: the preset has no shots"):
        plan_frames(Preset.model_validate({}), box((1, 1, 1)))


def test_only_the_named_shots_are_planned():
    preset = preset_with({"name": "a", "kind": "views"}, {"name": "b", "kind": "turntable",
                                                          "frames": 4})
    assert {f.shot for f in plan_frames(preset, box((1, 1, 1)), shots=["b"])} == {"b"}
    with pytest.raises(PresetError, match="no shot 'c'"):
        plan_frames(preset, box((1, 1, 1)), shots=["c"])


def test_model_fixes_rescale_centimetres_and_stand_z_up_models_upright():
    mesh = trimesh.creation.box(extents=(200.0, 80.0, 90.0))  # a sofa exported in centimetres
    scene = mesh_scene(mesh, lights=(FileLight("lamp", "point", (1, 1, 1), 5.0, (0, 0, 100),
                                               (0, 0, -1)),))
    preset = Preset.model_validate({"model": {"units": "cm", "up_axis": "z"}})
    fixed = apply_model_fixes(scene, preset)
    np.testing.assert_allclose(np.ptp(fixed.bounds(), axis=0), [2.0, 0.9, 0.8], rtol=1e-6)
    # Z up → Y up: +Z goes to +Y and −Y (a Z-up model's front) to +Z, a proper rotation.
    tilted = replace(scene, normals=np.tile(np.float32([0, 0.6, 0.8]), (len(scene.positions), 1)))
    np.testing.assert_allclose(apply_model_fixes(tilted, preset).normals, [[0, 0.8, -0.6]] * len(
        scene.positions), atol=1e-6)
    np.testing.assert_allclose(fixed.lights[0].position, [0, 1.0, 0], atol=1e-9)
    np.testing.assert_allclose(fixed.lights[0].direction, [0, -1, 0], atol=1e-12)
    auto = apply_model_fixes(scene, Preset.model_validate({"model": {"units": "auto"}}))
    np.testing.assert_allclose(np.ptp(auto.bounds(), axis=0), [2.0, 0.8, 0.9], rtol=1e-6)
    assert any("centimetres" in w for w in auto.warnings)
    # (model lights in use, so no note about ignoring them either)
    unchanged = apply_model_fixes(scene, Preset.model_validate({"look": {"model_lights": "both"}}))
    assert unchanged is scene


@pytest.mark.parametrize("extent,unit", [(200, "cm"), (2000, "mm"), (45, "cm"), (450, "mm"),
                                         (4.5, "m"), (0.3, "m")])
def test_unit_guess_reads_furniture_sizes(extent, unit):
    from shots.presets import guess_units

    # Common practice: catalog furniture spans about 0.3–3 m.
    assert guess_units(extent) == unit


def test_path_picture_shows_a_turntable_ring_at_one_height(tmp_path):
    scene = MODELS["sofa box"]()
    preset = preset_with({"name": "t", "kind": "turntable", "frames": 24, "elevation_deg": 20},
                         {"name": "v", "kind": "views", "views": ["front", "top"]})
    frames = plan_frames(preset, scene)
    out = write_path_picture(frames, scene, tmp_path / "plan.png")
    image = np.asarray(Image.open(out).convert("RGB"))
    assert image.shape[:2] == (HEADER + PANEL + 18 * 3, 2 * PANEL)
    ring = np.all(image == PALETTE[0], axis=2)
    assert np.all(image == PALETTE[1], axis=2).any()
    rows, cols = np.nonzero(ring[:, :PANEL])
    # Top panel: the ring circles the model, whose centre is in the middle of the panel.
    assert abs(cols.mean() - PANEL / 2) < 0.03 * PANEL
    assert abs(rows.mean() - (HEADER + PANEL / 2)) < 0.03 * PANEL
    # Side panel: constant elevation draws a level line (a thin band of rows).
    rows, _ = np.nonzero(ring[HEADER : HEADER + PANEL, PANEL:])
    assert np.ptp(rows) < 0.05 * PANEL
