"""The shot planner: a preset's shots and a model's extent → one camera and look per frame.

Directions follow glTF 2.0 (spec §Coordinate System and Units): +Y up, the model's front faces
+Z and its left side +X. Azimuth turns about +Y from the front toward +X; elevation is above the
horizon. Everything here is deterministic: the same preset and model give the same frames.
"""

from __future__ import annotations

import math
import zlib
from dataclasses import dataclass

import numpy as np

from shots.camera import ORTHOGRAPHIC, PERSPECTIVE, Camera, upright
from shots.errors import PresetError, RenderError
from shots.look import Look
from shots.presets import (
    VIEW_ANGLES,
    FileCameraShot,
    FramedShot,
    OrbitShot,
    PathShot,
    Preset,
    TurntableShot,
    ViewsShot,
    _did_you_mean,
    resolve_look,
)
from shots.scene import FileCamera, Scene

WORLD_UP = (0.0, 1.0, 0.0)
CURVE_SAMPLES = 256  # points per path segment for the arc-length table


@dataclass(frozen=True)
class Frame:
    """One image to render: which shot, which frame of it, the camera and the world-space look."""

    shot: str
    index: int
    camera: Camera
    look: Look
    seed: int
    view: str = ""  # the named view of a "views" shot, else ""

    def to_json(self) -> dict:
        """A JSON-ready description of the frame's camera and lights."""
        camera = self.camera
        row = {
            "shot": self.shot,
            "frame": self.index,
            "view": self.view,
            "projection": camera.kind,
            "eye": list(camera.eye),
            "target": list(camera.target),
            "up": list(camera.up),
            "width": camera.width,
            "height": camera.height,
        }
        if camera.kind == ORTHOGRAPHIC:
            row["ymag"] = camera.ymag
        else:
            row["yfov_deg"] = math.degrees(camera.yfov)
            row["xfov_deg"] = math.degrees(camera.xfov)
        row["samples"] = self.look.samples
        row["seed"] = self.seed
        row["lights"] = [
            {"name": light.name, "kind": light.kind, "position": list(light.position),
             "direction": list(light.direction), "intensity": light.intensity}
            for light in self.look.lights
        ]
        return row


@dataclass(frozen=True)
class Extent:
    """What framing needs of a model: its vertices, bounding-box centre and bounding radius.

    points : (n, 3) float64 vertices that triangles use.
    """

    points: np.ndarray
    centre: np.ndarray
    radius: float

    @staticmethod
    def of(scene: Scene) -> Extent:
        if scene.triangle_count == 0:
            raise RenderError(scene.source, None, "the model has no triangles to frame")
        used = np.zeros(len(scene.positions), bool)
        used[scene.triangles.ravel()] = True  # a mask is much faster than np.unique
        points = scene.positions[used].astype(np.float64)
        centre = 0.5 * (points.min(axis=0) + points.max(axis=0))
        radius = float(np.max(np.linalg.norm(points - centre, axis=1)))
        return Extent(points, centre, radius if radius > 0.0 else 1e-3)


def plan_frames(preset: Preset, scene: Scene, shots: list[str] | None = None) -> list[Frame]:
    """Every frame of the preset's shots (or of the named ``shots``), in order.

    ``scene`` should already have the preset's model fixes applied (``apply_model_fixes``).
    """
    if not preset.shots:
        raise PresetError(preset.source, "shots", "the preset has no shots to plan")
    chosen = preset.shots
    if shots is not None:
        names = [shot.name for shot in preset.shots]
        for name in shots:
            if name not in names:
                hint = _did_you_mean(name, names)
                raise PresetError(preset.source, "shots", f"no shot {name!r}{hint} "
                                                          f"(shots: {', '.join(names)})")
        chosen = [shot for shot in preset.shots if shot.name in shots]
    extent = Extent.of(scene)
    frames = []
    for shot in chosen:
        index = preset.shots.index(shot)
        for k, (view, camera) in enumerate(shot_cameras(shot, index, preset, extent, scene)):
            seed = frame_seed(preset.image.seed, shot.name, k)
            look = resolve_look(preset, camera, extent.centre, extent.radius, seed,
                                scene.lights)
            frames.append(Frame(shot.name, k, camera, look, seed, view))
    return frames


def frame_seed(base: int, shot: str, index: int) -> int:
    """A per-frame random seed, stable across runs and machines (CRC-32, not Python's hash)."""
    return zlib.crc32(f"{base}:{shot}:{index}".encode())


def shot_cameras(shot, index: int, preset: Preset, extent: Extent, scene: Scene):
    """[(view name, Camera)] for one shot."""
    size = (preset.image.width, preset.image.height)
    where = (preset.source, f"shots[{index}]")
    if isinstance(shot, ViewsShot):
        if shot.same_scale and shot.framing == "tight":
            return shared_scale_views(shot, size, extent)
        return [(name, view_camera(shot, name, size, extent, where)) for name in shot.views]
    if isinstance(shot, TurntableShot | OrbitShot):
        if isinstance(shot, TurntableShot):
            azimuths = turntable_azimuths(shot.frames, shot.start_azimuth_deg)
            elevations = [shot.elevation_deg] * shot.frames
        else:
            azimuths, elevations = orbit_angles(shot)
        bases = [basis_for(view_direction(a, e)) for a, e in zip(azimuths, elevations, strict=True)]
        return [("", c) for c in ring_cameras(shot, bases, size, extent, where)]
    if isinstance(shot, PathShot):
        return [("", c) for c in path_cameras(shot, size, extent)]
    assert isinstance(shot, FileCameraShot)
    chosen = find_file_camera(scene, shot.camera, preset.source, f"shots[{index}].camera")
    return [(chosen.name, camera_from_file(chosen, size, extent))]


# --- directions ---------------------------------------------------------------------------


def view_direction(azimuth_deg: float, elevation_deg: float) -> np.ndarray:
    """(3,) unit vector from the target toward the eye."""
    azimuth, elevation = math.radians(azimuth_deg), math.radians(elevation_deg)
    return np.array([
        math.sin(azimuth) * math.cos(elevation),
        math.sin(elevation),
        math.cos(azimuth) * math.cos(elevation),
    ])


def basis_for(direction: np.ndarray) -> tuple[np.ndarray, tuple[float, float, float]]:
    """The (3, 3) rows u, v, w of a camera looking along −direction, and the up it used."""
    up = upright(direction, (0.0, 0.0, 0.0), WORLD_UP)
    w = direction / np.linalg.norm(direction)
    u = np.cross(up, w)
    u /= np.linalg.norm(u)
    return np.stack([u, np.cross(w, u), w]), up


def turntable_azimuths(frames: int, start_deg: float = 0.0) -> list[float]:
    """``frames`` equal steps over a full turn; frame ``frames`` would repeat frame 0."""
    return [start_deg + 360.0 * k / frames for k in range(frames)]


EASINGS = {  # progress 0..1 → eased progress 0..1 (common practice: quadratic and smoothstep)
    "linear": lambda p: p,
    "ease_in": lambda p: p * p,
    "ease_out": lambda p: 1.0 - (1.0 - p) ** 2,
    "ease_in_out": lambda p: p * p * (3.0 - 2.0 * p),
}


def orbit_angles(shot: OrbitShot) -> tuple[list[float], list[float]]:
    """Azimuths and elevations of an orbit arc, both ends included."""
    ease = EASINGS[shot.easing]
    to_elevation = shot.elevation_deg if shot.to_elevation_deg is None else shot.to_elevation_deg
    steps = [ease(k / (shot.frames - 1)) if shot.frames > 1 else 0.0 for k in range(shot.frames)]
    azimuths = [shot.from_azimuth_deg + (shot.to_azimuth_deg - shot.from_azimuth_deg) * s
                for s in steps]
    elevations = [shot.elevation_deg + (to_elevation - shot.elevation_deg) * s for s in steps]
    return azimuths, elevations


# --- framing -------------------------------------------------------------------------------


def view_basis(shot: ViewsShot, view: str):
    """(basis, up) of a named view at the shot's elevation (top and bottom have their own)."""
    azimuth, fixed_elevation = VIEW_ANGLES[view]
    elevation = shot.elevation_deg if fixed_elevation is None else fixed_elevation
    return basis_for(view_direction(azimuth, elevation))


def view_camera(shot: ViewsShot, view: str, size, extent: Extent, where) -> Camera:
    """The camera of one named view of a stills shot."""
    basis, up = view_basis(shot, view)
    if shot.framing == "tight":
        return tight_camera(shot, basis, up, size, extent)
    return ring_cameras(shot, [(basis, up)], size, extent, where)[0]


def shared_scale_views(shot: ViewsShot, size, extent: Extent) -> list[tuple[str, Camera]]:
    """Tight views at one scale (as elevation drawings share one): the view that needs the
    most room fills ``fill`` of its frame, the others are centred at the same distance."""
    bases = {view: view_basis(shot, view) for view in shot.views}
    reach = max(tight_reach(shot, basis, size, extent) for basis, _ in bases.values())
    return [(view, tight_camera(shot, basis, up, size, extent, reach))
            for view, (basis, up) in bases.items()]


def ring_cameras(shot: FramedShot, bases, size, extent: Extent, where) -> list[Camera]:
    """Cameras aimed at the model's centre along each basis, all at one distance (or size).

    One distance for every frame keeps a turntable from zooming in and out as the model turns.
    ``bases`` holds (basis, up) pairs from ``basis_for``; ``where`` is (preset file, key path).
    """
    width, height = size
    aspect = width / height
    orthographic = shot.projection == "orthographic"
    yfov = 0.0 if orthographic else shot.yfov(aspect)
    fill = shot.fill_fraction
    if shot.framing == "sphere":
        reach = sphere_fit(extent.radius, yfov, aspect, fill, orthographic)
    elif shot.framing == "scale":
        reach = scale_fit(shot.pixels_per_metre, height, yfov, orthographic)
        if not orthographic:
            check_outside(shot, reach, bases, extent, where)
    else:
        reach = max(centred_fit(extent, b, yfov, aspect, fill, orthographic) for b, _ in bases)
    cameras = []
    for basis, up in bases:
        if orthographic:
            eye = extent.centre + basis[2] * ortho_standoff(extent)
            cameras.append(make_camera(eye, extent.centre, up, size, ORTHOGRAPHIC, ymag=reach))
        else:
            eye = extent.centre + basis[2] * reach
            cameras.append(make_camera(eye, extent.centre, up, size, PERSPECTIVE, yfov=yfov))
    return cameras


def sphere_fit(radius: float, yfov: float, aspect: float, fill: float, orthographic: bool):
    """Distance (or ymag) at which the bounding sphere spans ``fill`` of the narrower side.

    Perspective: d = r / sin(θ/2) with tan(θ/2) = fill·tan(fov_min/2), since a sight line that
    grazes the sphere is at right angles to the radius it touches.
    """
    if orthographic:
        return radius / (fill * min(1.0, aspect))
    tan_min = math.tan(yfov / 2.0) * min(1.0, aspect)
    return radius / math.sin(math.atan(fill * tan_min))


def scale_fit(pixels_per_metre: float, height: int, yfov: float, orthographic: bool) -> float:
    """Distance (or ymag) that shows ``pixels_per_metre`` at the target's depth."""
    half_height_m = height / (2.0 * pixels_per_metre)
    return half_height_m if orthographic else half_height_m / math.tan(yfov / 2.0)


def check_outside(shot: FramedShot, distance: float, bases, extent: Extent, where) -> None:
    """A fixed-scale perspective camera must stay in front of every vertex."""
    for basis, _ in bases:
        deepest = float(np.max((extent.points - extent.centre) @ basis[2]))
        if distance <= deepest:
            raise PresetError(where[0], f"{where[1]}.pixels_per_metre",
                              f"{shot.pixels_per_metre:g} px/m puts the camera inside the model; "
                              "use fewer pixels per metre or an orthographic projection, or, "
                              "for a model exported in cm or mm, set [model] units")


def ortho_standoff(extent: Extent) -> float:
    """How far an orthographic eye stands from the centre: outside the bounding sphere."""
    return 2.0 * extent.radius


def side_planes(basis: np.ndarray, tan_x: float, tan_y: float) -> list[tuple[np.ndarray, float]]:
    """Inward-facing side planes of a frustum as (normal, tan of half-angle) pairs.

    A point p is inside when (p − eye)·normal ≤ 0 for each normal = ±u + tan_x·w, ±v + tan_y·w.
    """
    u, v, w = basis
    return [(u + tan_x * w, tan_x), (-u + tan_x * w, tan_x),
            (v + tan_y * w, tan_y), (-v + tan_y * w, tan_y)]


def centred_fit(extent: Extent, basis, yfov, aspect, fill, orthographic) -> float:
    """Smallest distance (or ymag) on the axis through the centre that keeps every vertex
    within ``fill`` of the frame, for this view direction."""
    offsets = extent.points - extent.centre
    if orthographic:
        along_u, along_v = np.abs(offsets @ basis[0]), np.abs(offsets @ basis[1])
        return max(along_v.max(), along_u.max() / aspect) / fill
    tan_y = fill * math.tan(yfov / 2.0)
    needed = [float(np.max(offsets @ normal)) / t
              for normal, t in side_planes(basis, aspect * tan_y, tan_y)]
    deepest = float(np.max(offsets @ basis[2]))
    return max(max(needed), deepest + 1e-6 * extent.radius)


def tight_reach(shot: ViewsShot, basis, size, extent: Extent) -> float:
    """How far from the centre (or, orthographic, what ymag) a tight still of this view needs."""
    aspect = size[0] / size[1]
    pu, pv, pw = (extent.points @ axis for axis in basis)
    if shot.projection == "orthographic":
        return max(np.ptp(pv), np.ptp(pu) / aspect) / (2.0 * shot.fill_fraction)
    tan_y = shot.fill_fraction * math.tan(shot.yfov(aspect) / 2.0)
    depth = max(fit_axis(pu, pw, aspect * tan_y)[1], fit_axis(pv, pw, tan_y)[1])
    return depth - float(extent.centre @ basis[2])


def tight_camera(shot: ViewsShot, basis, up, size, extent: Extent, reach=None) -> Camera:
    """A still that fills ``fill`` of the frame with the projected vertices, centred.

    The view direction stays as named; the eye slides sideways and back until the vertices'
    projected bounding box is centred and its limiting side spans ``fill`` of the frame. A given
    ``reach`` (distance from the centre, or ymag) keeps several views at one scale instead; each
    is still centred.
    """
    aspect = size[0] / size[1]
    reach = tight_reach(shot, basis, size, extent) if reach is None else reach
    u, v, w = basis
    pu, pv, pw = (extent.points @ axis for axis in basis)
    if shot.projection == "orthographic":
        eu, ev = 0.5 * (pu.max() + pu.min()), 0.5 * (pv.max() + pv.min())
        eye = eu * u + ev * v + (pw.max() + extent.radius) * w
        target = eye - w * (eye @ w - extent.centre @ w)
        return make_camera(eye, target, up, size, ORTHOGRAPHIC, ymag=max(reach, 1e-9))
    yfov = shot.yfov(aspect)
    tan_y = shot.fill_fraction * math.tan(yfov / 2.0)
    tan_x = aspect * tan_y
    eu, depth_x = fit_axis(pu, pw, tan_x)
    ev, depth_y = fit_axis(pv, pw, tan_y)
    depth = float(extent.centre @ w) + reach
    if depth > depth_x:  # this side does not limit: centre it at the chosen depth
        eu = centre_axis(pu, pw, depth, tan_x)
    if depth > depth_y:
        ev = centre_axis(pv, pw, depth, tan_y)
    eye = eu * u + ev * v + depth * w
    target = eye - w * reach
    return make_camera(eye, target, up, size, PERSPECTIVE, yfov=yfov)


def fit_axis(across: np.ndarray, along: np.ndarray, tan_half: float) -> tuple[float, float]:
    """Eye position (across, along) where both side planes of half-angle atan(tan_half) touch.

    With coordinates across the view (``across``) and toward the eye (``along``), a plane pair
    through the eye satisfies eye·(±a + t·w) = max(±across + t·along); solving the two gives the
    eye's across offset and its depth coordinate.
    """
    right = float(np.max(across + tan_half * along))
    left = float(np.max(-across + tan_half * along))
    return 0.5 * (right - left), 0.5 * (right + left) / tan_half


def centre_axis(across: np.ndarray, along: np.ndarray, depth: float, limit: float) -> float:
    """Across offset that centres the projected extent when the eye's depth is fixed.

    Solves g(t) = max(across + t·along) + max(−across + t·along) − 2·t·depth = 0 for the
    projected half-extent t (convex and decreasing in t, so Newton's method from t = 0 climbs
    monotonically to the root), then centres the two touching planes.
    """
    t = 0.0
    for _ in range(64):
        right_values, left_values = across + t * along, -across + t * along
        i, j = int(np.argmax(right_values)), int(np.argmax(left_values))
        g = right_values[i] + left_values[j] - 2.0 * t * depth
        slope = along[i] + along[j] - 2.0 * depth
        if g <= 1e-12 * max(1.0, abs(depth)) or slope >= 0.0:
            break
        t = min(t - g / slope, limit)
    right = float(np.max(across + t * along))
    left = float(np.max(-across + t * along))
    return 0.5 * (right - left)


def make_camera(eye, target, up, size, kind, yfov=0.5, ymag=1.0) -> Camera:
    def triple(x):
        return (float(x[0]), float(x[1]), float(x[2]))

    return Camera(eye=triple(eye), target=triple(target), up=triple(up), width=size[0],
                  height=size[1], yfov=float(yfov), kind=kind, ymag=float(ymag))


# --- keyframed paths ----------------------------------------------------------------------


def catmull_rom(points: np.ndarray, s: np.ndarray, segment: int, alpha: float = 0.5):
    """Centripetal Catmull–Rom curve (Yuksel, Schaefer & Keyser 2011) on one segment.

    Evaluated with the Barry–Goldman pyramid; ends are extended by reflection so the curve runs
    through every key. ``s`` in [0, 1] runs from key ``segment`` to key ``segment + 1``.

    Returns
    -------
    (len(s), 3) float64 positions.
    """
    padded = np.vstack([2 * points[0] - points[1], points, 2 * points[-1] - points[-2]])
    p0, p1, p2, p3 = padded[segment : segment + 4]
    scale = max(float(np.ptp(points, axis=0).max()), 1e-9)
    gaps = [max(float(np.linalg.norm(b - a)), 1e-9 * scale) ** alpha
            for a, b in ((p0, p1), (p1, p2), (p2, p3))]
    t0, t1 = 0.0, gaps[0]
    t2, t3 = t1 + gaps[1], t1 + gaps[1] + gaps[2]
    t = (t1 + np.asarray(s, np.float64) * (t2 - t1))[:, None]

    def lerp(a, b, ta, tb):
        return (tb - t) / (tb - ta) * a + (t - ta) / (tb - ta) * b

    a1, a2, a3 = lerp(p0, p1, t0, t1), lerp(p1, p2, t1, t2), lerp(p2, p3, t2, t3)
    b1, b2 = lerp(a1, a2, t0, t2), lerp(a2, a3, t1, t3)
    return lerp(b1, b2, t1, t2)


def arc_length_table(points: np.ndarray, segment: int) -> tuple[np.ndarray, np.ndarray]:
    """Curve parameters (CURVE_SAMPLES + 1,) and the cumulative chord length at each."""
    s = np.linspace(0.0, 1.0, CURVE_SAMPLES + 1)
    curve = catmull_rom(points, s, segment)
    lengths = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(curve, axis=0), axis=1))])
    return s, lengths


def path_cameras(shot: PathShot, size, extent: Extent) -> list[Camera]:
    """Cameras along a keyframed path, at equal time steps, at constant speed within each
    segment (arc-length reparametrisation of the Catmull–Rom curve)."""
    width, height = size
    aspect = width / height
    origin, unit = (extent.centre, extent.radius) if shot.space == "model" else (np.zeros(3), 1.0)
    eyes = np.array([origin + np.asarray(k.eye) * unit for k in shot.keys])
    targets = np.array([origin + np.asarray(k.target) * unit for k in shot.keys])
    fovs = [key_yfov(k, shot, aspect) for k in shot.keys]
    tables = [arc_length_table(eyes, i) for i in range(len(eyes) - 1)]
    if shot.keys[0].time is None:  # spaced by arc length: one speed along the whole path
        times = np.concatenate([[0.0], np.cumsum([lengths[-1] for _, lengths in tables])])
    else:
        times = np.array([k.time for k in shot.keys])
    if times[-1] <= times[0]:  # every eye in one place: spread the keys evenly
        times = np.arange(len(eyes), dtype=np.float64)
    cameras = []
    for k in range(shot.frames):
        when = times[0] + (times[-1] - times[0]) * (k / (shot.frames - 1) if shot.frames > 1 else 0)
        i = min(int(np.searchsorted(times, when, side="right")) - 1, len(eyes) - 2)
        progress = (when - times[i]) / (times[i + 1] - times[i])
        s, lengths = tables[i]
        curve_s = (np.interp(progress * lengths[-1], lengths, s) if lengths[-1] > 0 else progress)
        eye = catmull_rom(eyes, np.array([curve_s]), i)[0]
        target = catmull_rom(targets, np.array([curve_s]), i)[0]
        yfov = fovs[i] + (fovs[i + 1] - fovs[i]) * progress
        up = upright(eye, target, WORLD_UP)
        cameras.append(make_camera(eye, target, up, size, PERSPECTIVE, yfov=yfov))
    return cameras


def key_yfov(key, shot: PathShot, aspect: float) -> float:
    """A key's vertical field of view in radians, else the shot's lens."""
    if key.yfov_deg is not None:
        return math.radians(key.yfov_deg)
    if key.focal_length_mm is not None:
        lens = shot.model_copy(update={"yfov_deg": None, "xfov_deg": None,
                                       "focal_length_mm": key.focal_length_mm})
        return lens.yfov(aspect)
    return shot.yfov(aspect)


# --- the model's own cameras ---------------------------------------------------------------


def find_file_camera(scene: Scene, reference: str | int, source: str, field: str) -> FileCamera:
    """A camera of the model by name or index, or a PresetError listing what the model has."""
    cameras = scene.cameras
    names = [c.name for c in cameras]
    listed = ", ".join(repr(n) for n in names) or "none"
    if isinstance(reference, int):
        if reference < len(cameras):
            return cameras[reference]
        raise PresetError(source, field, f"camera index {reference} is out of range: "
                                         f"{scene.source or 'the model'} has {len(cameras)} "
                                         f"camera(s) ({listed})")
    if reference in names:
        return cameras[names.index(reference)]
    raise PresetError(source, field, f"{scene.source or 'the model'} has no camera {reference!r}"
                                     f"{_did_you_mean(reference, names)} (cameras: {listed})")


def camera_from_file(file_camera: FileCamera, size, extent: Extent) -> Camera:
    """A Camera equal to a glTF camera node (glTF 2.0 spec §Cameras).

    The view is the node's world transform without its scale: the eye at its translation,
    looking along its −Z with its +Y up. The image keeps the preset's height; its width follows
    the camera's aspect ratio when the file gives one (W = round(H·aspectRatio)).
    """
    world = np.asarray(file_camera.world, np.float64)
    axes = world[:3, :3] / np.linalg.norm(world[:3, :3], axis=0)
    eye, forward, up = world[:3, 3], -axes[:, 2], axes[:, 1]
    width, height = size
    if file_camera.kind == ORTHOGRAPHIC:
        ymag = abs(file_camera.ymag) or 1.0
        if file_camera.xmag and ymag:
            width = max(1, round(height * abs(file_camera.xmag) / ymag))
    elif file_camera.aspect_ratio:
        width = max(1, round(height * file_camera.aspect_ratio))
    reach = float((extent.centre - eye) @ forward)
    target = eye + forward * (reach if reach > 0.0 else extent.radius)
    if file_camera.kind == ORTHOGRAPHIC:
        return make_camera(eye, target, up, (width, height), ORTHOGRAPHIC, ymag=ymag)
    return make_camera(eye, target, up, (width, height), PERSPECTIVE, yfov=file_camera.yfov)
