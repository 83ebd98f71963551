"""The look of a render: lights, environment, ground and background, and image settings.

These are resolved, world-space values that the tracer takes as they are. Presets (``presets.py``)
describe a look in catalog terms (a light rig attached to the camera, a shadow catcher under the
product) and resolve it into these per frame.
"""

from __future__ import annotations

from dataclasses import dataclass, field

DIRECTIONAL, POINT, SPOT, AREA = "directional", "point", "spot", "area"


@dataclass(frozen=True)
class Light:
    """One light in world space (KHR_lights_punctual units: lux for directional, candela else).

    ``direction`` is where the light travels (a spot's axis, a directional light's rays; for an
    area light the way its emitting face points). An area light is a rectangle centred at
    ``position`` with edge vectors ``edge_u`` and ``edge_v`` (metres) emitting ``intensity`` as
    radiance (W·sr⁻¹·m⁻² treated as unitless) from its front face.
    """

    kind: str
    color: tuple[float, float, float] = (1.0, 1.0, 1.0)
    intensity: float = 1.0
    position: tuple[float, float, float] = (0.0, 0.0, 0.0)
    direction: tuple[float, float, float] = (0.0, -1.0, 0.0)
    range: float | None = None
    inner_cone: float = 0.0
    outer_cone: float = 0.7853981633974483  # π/4, KHR_lights_punctual default
    edge_u: tuple[float, float, float] = (1.0, 0.0, 0.0)
    edge_v: tuple[float, float, float] = (0.0, 0.0, 1.0)
    name: str = ""


@dataclass(frozen=True)
class Environment:
    """Light arriving from infinitely far away: a vertical gradient or an equirectangular image.

    ``zenith``/``horizon``/``nadir`` are linear RGB radiances; ``image`` is a path to an
    equirectangular HDR (EXR) image used instead when set, scaled by ``intensity`` and turned by
    ``rotation`` radians about +Y.
    """

    zenith: tuple[float, float, float] = (0.6, 0.6, 0.6)
    horizon: tuple[float, float, float] = (0.6, 0.6, 0.6)
    nadir: tuple[float, float, float] = (0.3, 0.3, 0.3)
    intensity: float = 1.0
    image: str | None = None
    rotation: float = 0.0


@dataclass(frozen=True)
class Ground:
    """What the product stands on.

    ``kind``: "none"; "shadow_catcher" (invisible except for the shadow it receives, written to
    alpha); "plane" (a visible floor of ``color``); "sweep" (a floor curving up into a backdrop
    behind the product, ``sweep_radius`` metres of curve at ``sweep_distance`` behind the target).
    ``height`` is the floor's y in world space; None puts it at the model's lowest point.
    """

    kind: str = "shadow_catcher"
    height: float | None = None
    color: tuple[float, float, float] = (0.8, 0.8, 0.8)
    roughness: float = 0.9
    shadow_strength: float = 1.0
    sweep_radius: float = 1.0
    sweep_distance: float = 2.0


@dataclass(frozen=True)
class Background:
    """What camera rays that miss everything show: "transparent", "solid", "gradient" or
    "environment". Colours are display sRGB triples in [0, 1] (top, bottom for a gradient)."""

    kind: str = "transparent"
    color: tuple[float, float, float] = (1.0, 1.0, 1.0)
    color_bottom: tuple[float, float, float] = (1.0, 1.0, 1.0)


@dataclass(frozen=True)
class Look:
    """Everything about a render except geometry and camera."""

    lights: tuple[Light, ...] = ()
    environment: Environment = field(default_factory=Environment)
    ground: Ground = field(default_factory=Ground)
    background: Background = field(default_factory=Background)
    samples: int = 4  # camera samples per pixel (square = exact strata); 0 = adaptive:
    noise_target: float = 2.0  # adaptive: stop a pixel under this error in 8-bit sRGB codes
    min_samples: int = 8  # adaptive: samples every pixel takes before its error is judged
    max_samples: int = 128  # adaptive: samples a pixel takes at most
    area_light_samples: int = 4  # shadow rays per area light per hit
    glossy_samples: int = 4  # reflection rays for rough surfaces
    max_depth: int = 4  # reflection/refraction recursion limit
    diffuse_bounces: int = 1  # bounces of diffuse light between the model's parts
    exposure: float = 0.0  # stops
    tone_map: str = "neutral"
    seed: int = 0
    denoise: bool = False  # edge-aware filter of the illumination after sampling (shots.denoise)
