"""Presets: TOML files that describe a catalog look and the shots to take, validated and resolved.

A preset has these tables, every key optional (the defaults below apply)::

    description = "..."
    extends = "thumbnail"            # or a path relative to this file, or a list merged in order
    [image]       width height samples noise_target min_samples max_samples light_samples
                  gloss_samples bounces seed denoise
    [look]        exposure (stops) tone_map
    [model]       units ("m", "cm", "mm", "auto") up_axis ("y", "z")
    [background]  kind ("transparent", "solid", "gradient", "environment") color color_bottom
    [environment] zenith horizon nadir intensity image rotation_deg
    [ground]      kind ("none", "shadow_catcher", "plane", "sweep") height color roughness ...
    [[lights]]    a light rig placed relative to the camera (see ``RigLight``)
    [[shots]]     name kind ("views", "turntable", "orbit", "path", "file_camera") and its keys

``extends`` merges tables key by key; arrays (``lights``, ``shots``, colours) are replaced whole.
Every problem (an unknown key, a wrong type, an impossible value) is a one-line ``PresetError``
naming the file that set the key, the key's path (``shots[1].frames``) and what is allowed.
"""

from __future__ import annotations

import copy
import difflib
import importlib.resources
import math
import re
import tomllib
import types
import typing
from dataclasses import replace
from pathlib import Path
from typing import Annotated, Literal

import numpy as np
from annotated_types import Ge, Gt, Le, Lt
from pydantic import (
    BaseModel,
    Field,
    PlainValidator,
    PrivateAttr,
    Strict,
    StringConstraints,
    ValidationError,
    model_validator,
)

from shots.camera import Camera, horizontal_fov, yfov_from_xfov
from shots.colour import TONE_MAPS
from shots.errors import PresetError
from shots.limits import Limits
from shots.look import Background, Environment, Ground, Light, Look
from shots.model_lights import frame_lights, note_ignored_lights
from shots.scene import Scene
from shots.tables import Table

# The built-in presets: presets/*.toml in a source checkout, this package once installed.
BUILTIN_PACKAGE = "shots.preset_files"
SOURCE_TREE_PRESETS = Path(__file__).resolve().parent.parent / "presets"

WORLD_UP = np.array([0.0, 1.0, 0.0])

# Named views: azimuth about +Y from the front (+Z, glTF 2.0 spec §Coordinate System and Units)
# toward the model's left side (+X), and a fixed elevation for the views from above and below.
# "left" shows the model's own left side, which faces +X.
VIEW_ANGLES: dict[str, tuple[float, float | None]] = {
    "front": (0.0, None),
    "front_left": (45.0, None),
    "left": (90.0, None),
    "back_left": (135.0, None),
    "back": (180.0, None),
    "back_right": (-135.0, None),
    "right": (-90.0, None),
    "front_right": (-45.0, None),
    "top": (0.0, 90.0),
    "bottom": (0.0, -90.0),
}

# --- value types: TOML gives ints, floats, strings, booleans, arrays and tables ---------------
Number = Annotated[float, Strict()]  # an integer is accepted where a float is expected
Unit = Annotated[float, Strict(), Ge(0.0), Le(1.0)]
NonNegative = Annotated[float, Strict(), Ge(0.0)]
Positive = Annotated[float, Strict(), Gt(0.0)]
Point = Annotated[tuple[Number, Number, Number], Strict(False)]
DisplayColour = Annotated[tuple[Unit, Unit, Unit], Strict(False)]  # sRGB display values
LinearColour = Annotated[tuple[NonNegative, NonNegative, NonNegative], Strict(False)]
Size = Annotated[tuple[Positive, Positive], Strict(False)]
ShotName = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]+$", max_length=64)]
ViewName = Literal[tuple(VIEW_ANGLES)]
Angle = Annotated[float, Strict(), Gt(0.0), Lt(180.0)]  # degrees


def _camera_reference(value: object) -> str | int:
    """A file camera is chosen by name (a string) or by index (a non-negative integer)."""
    if isinstance(value, str) or (isinstance(value, int) and not isinstance(value, bool)):
        if isinstance(value, int) and value < 0:
            raise ValueError(f"a camera index must be 0 or more, got {value}")
        return value
    raise ValueError(f"expected a camera name or index, got {_describe(value)}")


CameraReference = Annotated[str | int, PlainValidator(_camera_reference)]


class ImageSettings(Table):
    width: int = Field(512, ge=1, le=16384)
    height: int = Field(512, ge=1, le=16384)
    samples: int = Field(0, ge=0, le=4096)
    noise_target: float = Field(2.0, ge=0.1, le=64.0)
    min_samples: int = Field(8, ge=8, le=4096)
    max_samples: int = Field(128, ge=8, le=4096)
    light_samples: int = Field(4, ge=1, le=1024)  # shadow rays per area light per hit
    gloss_samples: int = Field(4, ge=1, le=1024)  # reflection rays for rough surfaces
    bounces: int = Field(4, ge=0, le=64)  # reflection/refraction recursion limit
    seed: int = Field(0, ge=0, le=2**32 - 1)
    denoise: bool = Field(False, description=(
        "Smooth the remaining noise on the product's matte surfaces with an edge-aware filter "
        "guided by their albedo, normals and depth (shots.denoise). Metal, glass, gloss, the "
        "outline and the background keep their rendered pixels."))

    @model_validator(mode="after")
    def _sample_range(self) -> ImageSettings:
        if self.min_samples > self.max_samples:
            raise ValueError(f"min_samples ({self.min_samples}) must not exceed max_samples "
                             f"({self.max_samples})")  # fmt: skip
        return self


class LookSettings(Table):
    exposure: float = Field(0.0, ge=-20.0, le=20.0)  # stops
    tone_map: Literal[TONE_MAPS] = "neutral"
    model_lights: Literal["rig", "model", "both"] = "rig"  # shots.model_lights
    diffuse_bounces: int = Field(1, ge=0, le=8, description=(
        "Bounces of diffuse light between the model's parts (a coloured panel tints its "
        "neighbours); 0 keeps only the environment, blocked by the model, and the lights."))


class ModelSettings(Table):
    units: Literal["m", "cm", "mm", "auto"] = "m"
    up_axis: Literal["y", "z"] = "y"


class BackgroundSettings(Table):
    kind: Literal["transparent", "solid", "gradient", "environment"] = "transparent"
    color: DisplayColour = (1.0, 1.0, 1.0)
    color_bottom: DisplayColour = (1.0, 1.0, 1.0)


class EnvironmentSettings(Table):
    zenith: LinearColour = (0.6, 0.6, 0.6)
    horizon: LinearColour = (0.6, 0.6, 0.6)
    nadir: LinearColour = (0.3, 0.3, 0.3)
    intensity: float = Field(1.0, ge=0.0)
    image: str | None = None  # equirectangular HDR, relative to the preset that names it
    rotation_deg: float = 0.0


class GroundSettings(Table):
    kind: Literal["none", "shadow_catcher", "plane", "sweep"] = "shadow_catcher"
    height: float | None = None  # world y in metres; absent = the model's lowest point
    color: LinearColour = (0.8, 0.8, 0.8)
    roughness: float = Field(0.9, ge=0.0, le=1.0)
    shadow_strength: float = Field(1.0, ge=0.0, le=1.0)
    sweep_radius: float = Field(1.0, gt=0.0)  # metres
    sweep_distance: float = Field(2.0, gt=0.0)  # metres behind the target


class CheckSettings(Table):
    """How far a rendered image may stray before ``shots check`` (and every batch) flags it.

    Fractions of the frame unless said otherwise. ``shots check --tolerance KEY=VALUE`` overrides
    one key for a run.
    """

    fill: float = Field(0.08, ge=0.0, le=1.0, description=(
        "Most difference of the product's fill from the catalog median (compared only when the "
        "catalog's fills agree within `fill_spread`)."))
    fill_spread: float = Field(0.04, ge=0.0, le=1.0, description=(
        "The catalog counts as framed to one fill when the median deviation of its fills is at "
        "most this; only then are fill and the vertical centre compared."))
    centre_offset: float = Field(0.03, ge=0.0, le=1.0, description=(
        "Most offset of the product's box centre from the frame centre."))
    exposure_stops: float = Field(1.0, ge=0.0, description=(
        "Most difference, in stops, of the light on the product (rendered over albedo "
        "luminance) from the catalog median."))
    variant_stops: float = Field(0.5, ge=0.0, description=(
        "Most difference, in stops, of the light on one variant from the median of the same "
        "model's variants and shots of the same name."))
    white_base: float = Field(0.5, ge=0.0, le=1.0, description=(
        "Most share of the visible surface whose base colour is pure white (a texture lost on "
        "export leaves the white factor alone)."))
    clipped: float = Field(0.10, ge=0.0, le=1.0, description=(
        "Most share of product pixels at full white."))
    purity: float = Field(0.99, ge=0.0, le=1.0, description=(
        "Transparent backgrounds: least share of clean background pixels."))
    border_std: float = Field(0.02, ge=0.0, le=1.0, description=(
        "Opaque backgrounds: most spread of the border around its colour."))
    flat_ratio: float = Field(0.25, ge=0.0, le=1.0, description=(
        "Flat colour: texture detail below this share of the catalog median is flagged."))
    flat_floor: float = Field(0.01, ge=0.0, le=1.0, description=(
        "The flat-colour check runs only when the catalog median detail reaches this."))
    shadow_above: float = Field(0.1, ge=0.0, description=(
        "Upside down: the shadow's centre this many box heights above the product's."))
    mass_low: float = Field(0.55, ge=0.0, le=1.0, description=(
        "Upside down: the outline's mass lower than this (0 top, 1 bottom of its box)..."))
    mass_margin: float = Field(0.1, ge=0.0, le=1.0, description=(
        "... and this far below the catalog median."))
    min_catalog: int = Field(3, ge=1, description=(
        "Images with a product needed before anything is compared with the catalog median."))
    alpha_threshold: float = Field(0.5, ge=0.0, le=1.0, description=(
        "Transparent backgrounds: least alpha of a product pixel."))
    shadow_level: float = Field(3 / 255, ge=0.0, le=1.0, description=(
        "A pixel with every channel at most this is shadow, whatever its alpha."))
    background_threshold: float = Field(0.06, ge=0.0, le=1.0, description=(
        "Opaque backgrounds: a product pixel differs from the background by more than this."))
    opaque_shadow_floor: float = Field(0.75, ge=0.0, le=1.0, description=(
        "Opaque backgrounds: a soft shadow keeps at least this share of the background."))
    ssim: float = Field(0.97, ge=0.0, le=1.0, description=(
        "Against approved images: least mean structural similarity (SSIM, Wang et al. 2004)."))
    delta_e: float = Field(5.0, ge=0.0, description=(
        "Against approved images: a pixel has changed when the CIEDE2000 difference of its "
        "neighbourhood's colour exceeds this."))
    changed_share: float = Field(0.002, ge=0.0, le=1.0, description=(
        "Against approved images: most share of changed pixels."))


class RigLight(Table):
    """A studio light placed around the model, relative to the camera unless attached to the world.

    ``azimuth_deg`` turns about +Y from the camera's side of the model (0) toward the camera's
    right (+90); 180 is behind the model. ``elevation_deg`` is above the horizon. ``distance`` and
    ``size`` are in bounding radii of the model, so a rig lights a stool and a sofa alike.
    ``intensity`` is the emitted radiance of an area light, and the illuminance at the model's
    centre for the other kinds (a point or spot light's candela follow from its distance).
    """

    name: str = ""  # key, fill, rim, ...: for people and for reports
    kind: Literal["area", "directional", "point", "spot"] = "area"
    attached_to: Literal["camera", "world"] = "camera"
    azimuth_deg: float = 0.0
    elevation_deg: float = Field(30.0, ge=-90.0, le=90.0)
    distance: float = Field(4.0, gt=0.0)
    intensity: float = Field(1.0, ge=0.0)
    color: LinearColour = (1.0, 1.0, 1.0)
    size: Size = (1.0, 1.0)  # area lights: width and height
    cone_deg: float = Field(30.0, gt=0.0, le=90.0)  # spot lights: outer half-angle
    inner_cone_deg: float = Field(0.0, ge=0.0, lt=90.0)

    @model_validator(mode="after")
    def _cones(self) -> RigLight:
        if self.inner_cone_deg >= self.cone_deg:
            raise ValueError("inner_cone_deg must be smaller than cone_deg")
        return self


class Lens(Table):
    """Perspective lens: one of a vertical or horizontal field of view or a focal length.

    With none given the lens is 50 mm on a 36 mm-wide sensor (39.6° across the image width).
    """

    yfov_deg: Angle | None = None
    xfov_deg: Angle | None = None
    focal_length_mm: Positive | None = None
    sensor_width_mm: Positive = 36.0  # full-frame width, spanning the image width

    def yfov(self, aspect: float) -> float:
        """Vertical field of view in radians for an image of this width/height ``aspect``."""
        if self.yfov_deg is not None:
            return math.radians(self.yfov_deg)
        if self.xfov_deg is not None:
            return yfov_from_xfov(math.radians(self.xfov_deg), aspect)
        focal = self.focal_length_mm if self.focal_length_mm is not None else 50.0
        return yfov_from_xfov(horizontal_fov(focal, self.sensor_width_mm), aspect)

    @model_validator(mode="after")
    def _one_lens(self) -> Lens:
        keys = ("yfov_deg", "xfov_deg", "focal_length_mm")
        given = [k for k in keys if getattr(self, k) is not None]
        if len(given) > 1:
            raise ValueError(f"give one of yfov_deg, xfov_deg or focal_length_mm, not {given}")
        if "sensor_width_mm" in self.model_fields_set and self.focal_length_mm is None:
            raise ValueError("sensor_width_mm only applies with focal_length_mm")
        return self


class FramedShot(Lens):
    """A shot whose camera distance (or orthographic size) comes from the model's extent.

    ``framing``: "sphere" fits the bounding sphere (the same for every direction); "tight" fits
    the projected vertices to ``fill`` of the frame (a still is also centred; an animated shot
    takes the one distance that keeps every frame within ``fill``); "scale" gives a fixed
    ``pixels_per_metre`` at the target, equal across a catalog. ``margin`` is the alternative to
    ``fill``: the free fraction of the frame on each side (fill = 1 − 2·margin).
    """

    name: ShotName
    projection: Literal["perspective", "orthographic"] = "perspective"
    framing: Literal["sphere", "tight", "scale"] = "tight"
    fill: float | None = Field(None, gt=0.0, le=1.0)
    margin: float | None = Field(None, ge=0.0, lt=0.5)
    pixels_per_metre: float | None = Field(None, gt=0.0)
    elevation_deg: float = Field(0.0, ge=-90.0, le=90.0)

    @property
    def fill_fraction(self) -> float:
        if self.fill is not None:
            return self.fill
        return 1.0 - 2.0 * self.margin if self.margin is not None else 0.8

    @model_validator(mode="after")
    def _framing(self) -> FramedShot:
        if self.fill is not None and self.margin is not None:
            raise ValueError("give fill or margin, not both")
        if self.framing == "scale":
            if self.pixels_per_metre is None:
                raise ValueError("framing = 'scale' needs pixels_per_metre")
            if self.fill is not None or self.margin is not None:
                raise ValueError("fill and margin do not apply with framing = 'scale'")
        elif self.pixels_per_metre is not None:
            raise ValueError("pixels_per_metre only applies with framing = 'scale'")
        lens_keys = {"yfov_deg", "xfov_deg", "focal_length_mm", "sensor_width_mm"}
        if self.projection == "orthographic" and lens_keys & self.model_fields_set:
            raise ValueError("lens keys do not apply to an orthographic shot")
        return self


class ViewsShot(FramedShot):
    """Stills from named directions (``VIEW_ANGLES``) at ``elevation_deg``.

    ``same_scale`` with tight framing puts every view at one distance (one ymag), as elevation
    drawings share a scale: the view needing the most room fills ``fill``, all are centred.
    """

    kind: Literal["views"]
    views: list[ViewName] = Field(default_factory=lambda: ["front"], min_length=1)
    same_scale: bool = False

    @model_validator(mode="after")
    def _views(self) -> ViewsShot:
        repeated = sorted({v for v in self.views if self.views.count(v) > 1})
        if repeated:
            raise ValueError(f"views repeats {repeated}")
        if self.same_scale and self.framing != "tight":
            raise ValueError("same_scale applies to framing = 'tight' (the others share a "
                             "scale already)")
        return self


class TurntableShot(FramedShot):
    """``frames`` equal steps over 360° about +Y; the last frame is one step before the first."""

    kind: Literal["turntable"]
    frames: int = Field(24, ge=1, le=3600)
    start_azimuth_deg: float = 0.0


class OrbitShot(FramedShot):
    """An arc from one azimuth (and elevation) to another, both ends included, eased."""

    kind: Literal["orbit"]
    frames: int = Field(12, ge=1, le=3600)
    from_azimuth_deg: float = -45.0
    to_azimuth_deg: float = 45.0
    to_elevation_deg: float | None = Field(None, ge=-90.0, le=90.0)  # absent = elevation_deg
    easing: Literal["linear", "ease_in", "ease_out", "ease_in_out"] = "ease_in_out"


class PathKey(Table):
    """A keyframe: where the camera is and looks at ``time`` (seconds, any unit)."""

    time: float | None = Field(None, ge=0.0)
    eye: Point
    target: Point = (0.0, 0.0, 0.0)
    yfov_deg: Angle | None = None
    focal_length_mm: Positive | None = None

    @model_validator(mode="after")
    def _key(self) -> PathKey:
        if self.yfov_deg is not None and self.focal_length_mm is not None:
            raise ValueError("give yfov_deg or focal_length_mm, not both")
        if self.eye == self.target:
            raise ValueError("eye and target coincide")
        return self


class PathShot(Lens):
    """A keyframed flight: Catmull–Rom through the eyes, constant speed between keys.

    ``space = "model"`` reads eyes and targets as offsets from the model's centre in bounding
    radii (reusable across models); "world" reads them in metres. Keys without times are spaced
    by arc length, so the camera moves at one constant speed along the whole path.
    """

    name: ShotName
    kind: Literal["path"]
    frames: int = Field(48, ge=1, le=3600)
    space: Literal["model", "world"] = "model"
    keys: list[PathKey] = Field(min_length=2)

    @model_validator(mode="after")
    def _times(self) -> PathShot:
        times = [key.time for key in self.keys]
        if any(t is None for t in times) and any(t is not None for t in times):
            raise ValueError("give every key a time or none")
        if times[0] is not None and any(b <= a for a, b in zip(times, times[1:], strict=False)):
            raise ValueError("key times must increase")
        return self


class FileCameraShot(Table):
    """The model's own glTF camera, by name or index (glTF 2.0 spec §Cameras)."""

    name: ShotName
    kind: Literal["file_camera"]
    camera: CameraReference = 0


Shot = Annotated[
    ViewsShot | TurntableShot | OrbitShot | PathShot | FileCameraShot, Field(discriminator="kind")
]
SHOT_KINDS = {"views": ViewsShot, "turntable": TurntableShot, "orbit": OrbitShot,
              "path": PathShot, "file_camera": FileCameraShot}


DERIVATIVE_SUFFIXES = {"jpeg": (".jpg", ".jpeg"), "webp": (".webp",), "png": (".png",),
                       "avif": (".avif",)}
PixelBox = Annotated[tuple[Annotated[int, Ge(1), Le(16384)], Annotated[int, Ge(1), Le(16384)]],
                     Strict(False)]


class Derivative(Table):
    """A published version of every frame (of ``shots``, default all): resized from the master
    in linear light, flattened on ``background`` or kept transparent, and written to ``path``.

    ``path`` is a template relative to the output folder with the fields ``{model}``,
    ``{variant}``, ``{shot}``, ``{frame}``, ``{view}`` (a named view, else the frame number),
    ``{size}`` (this file's pixel size), ``{name}`` (this derivative's), and with a product
    table ``{sku}``, ``{title}`` and its other columns; it ends with the format's file suffix.
    """

    name: ShotName  # names the derivative in manifests and the {name} field; unique
    format: Literal[tuple(DERIVATIVE_SUFFIXES)]  # the file format (AVIF where Pillow has libavif)
    path: str  # file path template, relative to the output folder (fields above)
    longest_side: int | None = Field(None, ge=1, le=16384)  # the longer side in pixels (or give box)
    box: PixelBox | None = None  # exact [width, height]; the frame is fitted and centred
    background: DisplayColour | None = None  # flatten onto this sRGB colour; absent keeps alpha
    quality: int = Field(85, ge=1, le=100)  # JPEG, WebP and AVIF encoder quality
    lossless: bool = False  # lossless WebP (WebP only)
    chroma: Literal["4:2:0", "4:4:4"] = "4:2:0"  # JPEG and AVIF chroma subsampling
    shots: list[ShotName] | None = None  # the shots whose frames are published; absent: all

    @model_validator(mode="after")
    def _derivative(self) -> Derivative:
        if (self.longest_side is None) == (self.box is None):
            raise ValueError("give longest_side or box (one of them)")
        if self.format == "jpeg" and self.background is None:
            raise ValueError("JPEG has no alpha channel: give a background colour to flatten on")
        suffixes = DERIVATIVE_SUFFIXES[self.format]
        if not self.path.lower().endswith(suffixes):
            raise ValueError(f"path must end with {' or '.join(suffixes)} for {self.format}")
        if self.lossless and self.format != "webp":
            raise ValueError("lossless applies to webp only")
        if "chroma" in self.model_fields_set and self.format not in ("jpeg", "avif"):
            raise ValueError("chroma applies to jpeg and avif only")
        if self.format == "avif":
            from PIL import features

            if not features.check("avif"):
                raise ValueError("this installation's Pillow cannot write AVIF (it was built "
                                 "without libavif); use jpeg, webp or png")
        return self


class PublishSettings(Table):
    """Catalog names and rights for the derivatives."""

    products: str | None = None  # product table (CSV), relative to the preset that names it
    copyright: str = Field("", max_length=200)  # written into every derivative's metadata


class Preset(Table):
    """A validated preset. ``source`` is the file it came from; ``name`` its stem."""

    description: str = ""
    image: ImageSettings = ImageSettings()
    look: LookSettings = LookSettings()
    model: ModelSettings = ModelSettings()
    background: BackgroundSettings = BackgroundSettings()
    environment: EnvironmentSettings = EnvironmentSettings()
    ground: GroundSettings = GroundSettings()
    lights: list[RigLight] = Field(default_factory=list, max_length=32)
    shots: list[Shot] = Field(default_factory=list, max_length=256)
    derivatives: list[Derivative] = Field(default_factory=list, max_length=32)
    publish: PublishSettings = PublishSettings()
    check: CheckSettings = CheckSettings()
    limits: Limits = Limits()  # per-model budgets (shots.limits); no effect on pixels
    _source: str = PrivateAttr("")

    @property
    def source(self) -> str:
        return self._source

    @property
    def name(self) -> str:
        return Path(self._source).stem

    @model_validator(mode="after")
    def _unique_shot_names(self) -> Preset:
        names = [shot.name for shot in self.shots]
        for index, name in enumerate(names):
            if name in names[:index]:
                raise ValueError(f"shots[{index}].name: {name!r} is used by an earlier shot")
        return self

    @model_validator(mode="after")
    def _derivatives_fit(self) -> Preset:
        shot_names = [shot.name for shot in self.shots]
        seen: dict[str, str] = {}
        for index, derivative in enumerate(self.derivatives):
            if derivative.name in seen:
                raise ValueError(f"derivatives[{index}].name: {derivative.name!r} is used by "
                                 f"an earlier derivative")
            if derivative.path in seen.values():
                raise ValueError(f"derivatives[{index}].path: {derivative.path!r} is the path "
                                 f"of an earlier derivative; their files would collide")
            seen[derivative.name] = derivative.path
            unknown = [s for s in derivative.shots or () if s not in shot_names]
            if unknown:
                raise ValueError(f"derivatives[{index}].shots: no shot {unknown[0]!r} "
                                 f"(shots: {', '.join(shot_names) or 'none'})")
        return self

    def with_image_size(self, width: int, height: int) -> Preset:
        """The same preset rendering at ``width`` × ``height`` pixels."""
        return self.with_image(width=width, height=height)

    def with_samples(self, samples: int) -> Preset:
        """The same preset with exactly ``samples`` camera samples per pixel (adaptivity off)."""
        return self.with_image(samples=samples)

    def with_image(self, **changes) -> Preset:
        """The same preset with these ``[image]`` keys changed (validated like the file's)."""
        try:
            image = ImageSettings.model_validate({**self.image.model_dump(), **changes})
        except ValidationError as exc:
            raise PresetError(self.source, "image", _first_problem(exc)[1]) from None
        sized = self.model_copy(update={"image": image})
        sized._source = self._source
        return sized


# --- loading -------------------------------------------------------------------------------


def builtin_folder() -> Path:
    """The folder holding the built-in presets (installed package, else the source tree)."""
    try:
        return Path(str(importlib.resources.files(BUILTIN_PACKAGE)))
    except ModuleNotFoundError:
        return SOURCE_TREE_PRESETS


def builtin_preset_names() -> list[str]:
    """Names of the built-in presets, sorted."""
    return sorted(path.stem for path in builtin_folder().glob("*.toml"))


SIDECAR_SUFFIX = ".shots.toml"
# What a sidecar may not change: the batch's files and their names stay the house's.
SIDECAR_FIXED = ("derivatives", "publish", "check", "limits")


def sidecar_for(model: str | Path) -> Path:
    """Where a model's own preset exceptions would be: ``chair.glb`` → ``chair.shots.toml``."""
    model = Path(model)
    return model.with_name(model.stem + SIDECAR_SUFFIX)


def load_preset(name_or_path: str | Path, sidecar: str | Path | None = None) -> Preset:
    """Read, merge (``extends``) and validate a preset, with a model's sidecar merged over it.

    Parameters
    ----------
    name_or_path : a built-in preset name ("thumbnail") or the path of a TOML file.
    sidecar : a model's ``<model>.shots.toml`` (same schema, no ``extends``): its keys are
        merged over the preset's. ``derivatives``, ``publish``, ``check``, ``limits`` and the
        image size stay the batch's, and its ``shots`` (a longer lens, another elevation) keep the batch's
        shot names, kinds and frame counts, so every model's files are the same set.

    Raises
    ------
    PresetError : one line naming the file, the key path and what is allowed.
    """
    path = _locate(name_or_path)
    try:
        data, origins = _read_merged(path, (), {})
    except RecursionError:
        raise PresetError(path, None, "tables nested too deeply") from None
    if sidecar is not None:
        base = load_preset(path)
        _merge_sidecar(Path(sidecar), data, origins)
    _resolve_files(data, origins)
    try:
        preset = Preset.model_validate(data)
    except ValidationError as exc:
        field, message = _first_problem(exc)
        raise PresetError(_origin(origins, exc, path), field, message) from None
    preset._source = str(path)
    if sidecar is not None:
        _same_shots(Path(sidecar), base, preset)
    return preset


def _same_shots(sidecar: Path, base: Preset, merged: Preset) -> None:
    def outline(preset: Preset) -> list[tuple[str, str, int]]:
        return [(shot.name, shot.kind, len(shot.views) if isinstance(shot, ViewsShot)
                 else getattr(shot, "frames", 1)) for shot in preset.shots]

    for index, (ours, theirs) in enumerate(zip(outline(base), outline(merged), strict=False)):
        if ours != theirs:
            raise PresetError(sidecar, f"shots[{index}]", f"must keep the preset's shot "
                                                          f"{ours[0]!r} ({ours[1]}, {ours[2]} "
                                                          f"frame(s)); only its settings change")
    if len(base.shots) != len(merged.shots):
        raise PresetError(sidecar, "shots", f"must keep the preset's {len(base.shots)} shot(s)")


def resolved_toml(preset: Preset, sidecar: Path | None = None) -> str:
    """The preset as one TOML document with ``extends`` (and ``sidecar``) merged in: every key
    some file set, none of the defaults, so loading it gives the same preset."""
    import tomli_w

    data = preset.model_dump(mode="json", exclude_unset=True)
    if "shots" in data:  # a shot's name and kind first, as people write them
        data["shots"] = [{"name": s.pop("name"), "kind": s.pop("kind"), **s}
                         for s in data["shots"]]
    text = tomli_w.dumps(data)
    # tomli-w puts each array item on a line of its own; colours and sizes read better inline
    text = re.sub(r"\[\n((?: {4}[^\[\]{}\n]+,\n)+)\]",
                  lambda m: "[" + " ".join(m.group(1).split()).rstrip(",") + "]", text)
    where = f"{preset.source}" + (f" with the sidecar {sidecar}" if sidecar else "")
    return f"# {where}, extends merged\n{text}"


def json_schema() -> dict:
    """A JSON Schema (draft 2020-12, pydantic's) of the preset format, for editors."""
    schema = Preset.model_json_schema()
    schema["properties"]["extends"] = {
        "description": "Presets to start from: a built-in name or a path relative to this "
                       "file, or an array of them merged in order.",
        "anyOf": [{"type": "string"}, {"type": "array", "items": {"type": "string"}}],
    }
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "shots preset"
    return schema


def _merge_sidecar(sidecar: Path, data: dict, origins: dict) -> None:
    own = _read_toml(sidecar)
    for key in ("extends", *SIDECAR_FIXED):
        if key in own:
            raise PresetError(sidecar, key, "a sidecar cannot set this: it changes the batch's "
                                            "files for every model (set it in the preset)")
    image = own.get("image")
    for key in ("width", "height"):
        if isinstance(image, dict) and key in image:
            raise PresetError(sidecar, f"image.{key}", "a sidecar cannot change the image "
                                                       "size (the catalog's files share it)")
    _merge(data, origins, own, _origins_of(own, str(sidecar), ()), ())


def check_settings(values: dict, source: str = "[check]") -> CheckSettings:
    """Check tolerances from a table of overrides, validated like a preset's ``[check]`` table.

    Raises
    ------
    PresetError : naming ``source`` and the key (``check.fill``) with what is allowed.
    """
    try:
        return Preset.model_validate({"check": dict(values)}).check
    except ValidationError as exc:
        field, message = _first_problem(exc)
        raise PresetError(source, field, message) from None


def _locate(name_or_path: str | Path) -> Path:
    text = str(name_or_path)
    path = Path(text)
    if path.is_file():
        return path
    if isinstance(name_or_path, Path) or text.endswith(".toml") or "/" in text or "\\" in text:
        raise PresetError(text, None, "no such preset file")
    builtin = builtin_folder() / f"{text}.toml"
    if builtin.is_file():
        return builtin
    names = builtin_preset_names()
    raise PresetError(text, None, f"no built-in preset {text!r}{_did_you_mean(text, names)} "
                                  f"(built-in: {', '.join(names)})")


MAX_NESTING = 64  # arrays and inline tables inside each other; a house style needs 3
# string delimiters, escapes (consumed whole, so \" ends no string), comments and brackets
_TOML_TOKENS = re.compile(r'"""|' + r"'''" + r'|\\.|["\'\[\]{}]|#[^\n]*')


def _nesting_depth(text: str) -> int:
    """How deep ``[`` and ``{`` nest in TOML text, outside strings and comments.

    Measured before parsing: the parser recurses once per level, and a RecursionError deep in
    the stack can strike an unrelated finaliser that the garbage collector happens to run there.
    """
    depth = deepest = 0
    quote = ""
    for token in _TOML_TOKENS.finditer(text):
        t = token.group()
        if quote:
            quote = "" if t == quote else quote
        elif t in ('"""', "'''", '"', "'"):
            quote = t
        elif t in ("[", "{"):
            depth += 1
            deepest = max(deepest, depth)
        elif t in ("]", "}"):
            depth = max(depth - 1, 0)
    return deepest


def _read_toml(path: Path) -> dict:
    try:
        with open(path, "rb") as handle:
            text = handle.read().decode("utf-8")
        if _nesting_depth(text) > MAX_NESTING:
            raise PresetError(path, None, f"arrays or tables nested too deeply (more than "
                                          f"{MAX_NESTING} levels)")
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PresetError(path, None, f"not valid TOML: {exc}") from None
    except UnicodeDecodeError as exc:
        raise PresetError(path, None, f"not UTF-8 text (byte {exc.start})") from None
    except RecursionError:
        raise PresetError(path, None, "not valid TOML: arrays or tables nested too deeply") \
            from None
    except OSError as exc:
        raise PresetError(path, None, f"cannot read: {exc.strerror}") from None


MAX_EXTENDS_DEPTH = 16  # presets extending presets; deeper chains are refused


def _read_merged(path: Path, chain: tuple[Path, ...], done: dict) -> tuple[dict, dict]:
    """A file's data merged over its parents', and which file set each table key.

    ``done`` keeps each file's merged result for this load, so a preset reached along many
    ``extends`` paths (a diamond) is read and merged once, not once per path.
    """
    here = path.resolve()
    if here in chain:
        loop = " → ".join(p.name for p in (*chain, here))
        raise PresetError(path, "extends", f"presets extend each other in a loop: {loop}")
    if len(chain) >= MAX_EXTENDS_DEPTH:
        raise PresetError(path, "extends", f"presets extend each other more than "
                                           f"{MAX_EXTENDS_DEPTH} levels deep")
    if here in done:
        data, origins = done[here]
        return copy.deepcopy(data), dict(origins)
    own = _read_toml(path)
    parents = own.pop("extends", [])
    if isinstance(parents, str):
        parents = [parents]
    if not isinstance(parents, list) or not all(isinstance(p, str) for p in parents):
        raise PresetError(path, "extends", f"expected a preset name or path or an array of "
                                           f"them, got {_describe(parents)}")
    data: dict = {}
    origins: dict[tuple, str] = {}
    for reference in parents:
        parent_data, parent_origins = _read_merged(_parent_path(reference, path), (*chain, here),
                                                   done)
        _merge(data, origins, parent_data, parent_origins, ())
    _merge(data, origins, own, _origins_of(own, str(path), ()), ())
    done[here] = (copy.deepcopy(data), dict(origins))
    return data, origins


def _parent_path(reference: str, child: Path) -> Path:
    """``extends`` names a built-in preset, or a file relative to the preset that extends it."""
    if reference.endswith(".toml") or "/" in reference or "\\" in reference:
        path = child.parent / reference
        if not path.is_file():
            raise PresetError(child, "extends", f"no such preset file {reference!r}")
        return path
    path = builtin_folder() / f"{reference}.toml"
    if not path.is_file():
        names = builtin_preset_names()
        raise PresetError(child, "extends", f"no built-in preset {reference!r}"
                                            f"{_did_you_mean(reference, names)} "
                                            f"(built-in: {', '.join(names)})")
    return path


def _origins_of(data: dict, source: str, prefix: tuple) -> dict[tuple, str]:
    origins = {}
    for key, value in data.items():
        origins[(*prefix, key)] = source
        if isinstance(value, dict):
            origins.update(_origins_of(value, source, (*prefix, key)))
    return origins


def _merge(base: dict, origins: dict, over: dict, over_origins: dict, prefix: tuple) -> None:
    """Merge ``over`` into ``base`` in place: tables key by key, anything else replaced whole."""
    for key, value in over.items():
        path = (*prefix, key)
        if isinstance(value, dict) and isinstance(base.get(key), dict):
            origins[path] = over_origins[path]
            _merge(base[key], origins, value, over_origins, path)
            continue
        for stale in [p for p in origins if p[: len(path)] == path]:
            del origins[stale]
        origins.update({p: s for p, s in over_origins.items() if p[: len(path)] == path})
        base[key] = value


def _resolve_files(data: dict, origins: dict) -> None:
    """Make ``environment.image`` and ``publish.products`` absolute, relative to the preset
    file that names them."""
    for table, key in (("environment", "image"), ("publish", "products")):
        section = data.get(table)
        if not isinstance(section, dict) or not isinstance(section.get(key), str):
            continue
        source = Path(origins[(table, key)])
        target = source.parent / section[key]
        if not target.is_file():
            raise PresetError(source, f"{table}.{key}", f"no such file {section[key]!r}")
        section[key] = str(target.resolve())


# --- one-line messages from pydantic's errors -------------------------------------------------


def _origin(origins: dict, exc: ValidationError, fallback: Path) -> str:
    """The file that set the (deepest known part of the) key the first problem is about."""
    path = _walk(exc.errors()[0]["loc"])[1]
    for end in range(len(path), 0, -1):
        if tuple(path[:end]) in origins:
            return origins[tuple(path[:end])]
    return str(fallback)


def _first_problem(exc: ValidationError) -> tuple[str | None, str]:
    errors = exc.errors()
    field, message = _explain(errors[0])
    if len(errors) > 1:
        more = len(errors) - 1
        message += f" (and {more} more problem{'s' if more > 1 else ''})"
    return field, message.replace("\n", " ")


def _unwrap(annotation):
    while typing.get_origin(annotation) is Annotated:
        annotation = typing.get_args(annotation)[0]
    if typing.get_origin(annotation) in (typing.Union, types.UnionType):
        members = [a for a in typing.get_args(annotation) if a is not type(None)]
        if len(members) == 1:
            return _unwrap(members[0])
    return annotation


def _is_model(annotation) -> bool:
    return isinstance(annotation, type) and issubclass(annotation, BaseModel)


def _walk(loc: tuple) -> tuple[str, list, object, object]:
    """Follow a pydantic error location through the schema.

    Returns the key path as written in TOML ("shots[1].frames"), the data path without union
    tags, the model holding the last key, and the annotation found at the end (None if unknown).
    """
    node, parent, shown, data = Preset, None, "", []
    for part in loc:
        node = _unwrap(node)
        if isinstance(part, int):
            shown += f"[{part}]"
            data.append(part)
            args = typing.get_args(node) if node is not None else ()
            node = args[0] if args else None
        elif _is_model(node):
            parent = node
            shown += f".{part}" if shown else str(part)
            data.append(part)
            field = node.model_fields.get(part)
            node = field.annotation if field is not None else None
        elif typing.get_origin(node) in (typing.Union, types.UnionType) and part in SHOT_KINDS:
            node = SHOT_KINDS[part]  # a discriminated union's tag: not part of the key path
        else:
            shown += f".{part}" if shown else str(part)
            data.append(part)
            node = None
    return shown, data, parent, node


def _explain(error: dict) -> tuple[str | None, str]:
    """(key path, message) for one pydantic error, in the preset's own terms."""
    kind, loc, value, ctx = error["type"], error["loc"], error.get("input"), error.get("ctx", {})
    shown, _, parent, node = _walk(loc)
    if kind == "extra_forbidden":
        allowed = list(parent.model_fields) + (["extends"] if parent is Preset else [])
        allowed = sorted(k for k in allowed if not k.startswith("_"))
        key = str(loc[-1])
        return shown, f"unknown key{_did_you_mean(key, allowed)} (allowed: {', '.join(allowed)})"
    if kind in ("union_tag_invalid", "union_tag_not_found"):
        kinds = ", ".join(repr(k) for k in SHOT_KINDS)
        where = f"{shown}.kind" if shown else "kind"
        if kind == "union_tag_not_found":
            return where, f"missing; say which kind of shot this is ({kinds})"
        tag = str(ctx.get("tag"))
        return where, f"{tag!r} is not a kind of shot{_did_you_mean(tag, SHOT_KINDS)} ({kinds})"
    if kind == "literal_error":
        allowed = [str(a) for a in typing.get_args(_unwrap(node))] if node is not None else []
        listed = ", ".join(repr(a) for a in allowed) or ctx.get("expected", "")
        return shown, f"{value!r} is not allowed{_did_you_mean(str(value), allowed)} ({listed})"
    if kind == "missing":
        if loc and isinstance(loc[-1], int):  # a short array: report the array, not the slot
            owner = shown[: shown.rfind("[")]
            return owner, f"expected {_arity(owner, parent)} numbers, got {len(value)}"
        return shown, "required key is missing"
    if kind == "too_long" and isinstance(value, list | tuple) and node is not None:
        if typing.get_origin(_unwrap(node)) is tuple:
            return shown, f"expected {_arity(shown, parent)} numbers, got {len(value)}"
    if kind in TYPE_WORDS:
        return shown, f"expected {TYPE_WORDS[kind]}, got {_describe(value)}"
    if kind in BOUND_WORDS:
        limit = next(iter(ctx.values()))
        return shown, f"must be {BOUND_WORDS[kind]} {limit}, got {_describe(value, bare=True)}"
    if kind == "finite_number":
        return shown, f"must be a finite number, got {_describe(value, bare=True)}"
    if kind == "string_pattern_mismatch":
        return shown, f"use only letters, digits, '-' and '_', got {value!r}"
    if kind == "too_short":
        least, actual = ctx.get("min_length"), ctx.get("actual_length")
        return shown, f"needs at least {least} item(s), got {actual}"
    message = error["msg"]
    if kind == "value_error":
        message = message.removeprefix("Value error, ")
        if ": " in message and message.split(": ", 1)[0].startswith("shots["):
            return tuple(message.split(": ", 1))  # a whole-preset check naming its own key
    return (shown or None), message[0].lower() + message[1:]


TYPE_WORDS = {
    "int_type": "an integer", "float_type": "a number", "string_type": "a string",
    "bool_type": "true or false", "list_type": "an array", "tuple_type": "an array",
    "model_type": "a table", "dict_type": "a table", "model_attributes_type": "a table",
    "int_from_float": "an integer",
}
BOUND_WORDS = {
    "greater_than": "greater than", "greater_than_equal": "at least",
    "less_than": "less than", "less_than_equal": "at most",
}


def _arity(shown: str, parent) -> int:
    key = shown.rsplit(".", 1)[-1]
    field = parent.model_fields.get(key) if parent is not None else None
    return len(typing.get_args(_unwrap(field.annotation))) if field is not None else 3


def _describe(value: object, bare: bool = False) -> str:
    """A TOML-flavoured description of a value for messages."""
    if isinstance(value, bool):
        return str(value).lower() if bare else f"the boolean {str(value).lower()}"
    if isinstance(value, int | float):
        return f"{value}" if bare else f"the number {value}"
    if isinstance(value, str):
        return f"the string {value[:40]!r}"
    if isinstance(value, list | tuple):
        return "an array"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__


def _did_you_mean(word: str, choices) -> str:
    close = difflib.get_close_matches(word, [str(c) for c in choices], n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""


# --- model fixes -------------------------------------------------------------------------------

UNIT_SCALES = {"m": 1.0, "cm": 0.01, "mm": 0.001}
UNIT_NAMES = {"m": "metres", "cm": "centimetres", "mm": "millimetres"}
# Z up → Y up, keeping the handedness: (x, y, z) → (x, z, −y); a Z-up model's front (−Y) → +Z.
Z_UP_TO_Y_UP = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0], [0.0, -1.0, 0.0]])


def guess_units(largest_extent: float) -> str:
    """The unit ("m", "cm" or "mm") that makes a piece of furniture about a metre across.

    Picks the reading whose largest extent is closest to 1 m on a log scale, so 200 units reads
    as 2 m in centimetres, 2000 as 2 m in millimetres, and 4.5 stays 4.5 m (common practice for
    catalog furniture, which spans roughly 0.3–3 m).
    """
    if largest_extent <= 0.0:
        return "m"
    return min(UNIT_SCALES, key=lambda u: abs(math.log(largest_extent * UNIT_SCALES[u])))


def apply_model_fixes(scene: Scene, preset: Preset) -> Scene:
    """Rescale a model exported in centimetres or millimetres, and stand a Z-up model upright.

    Positions, normals, tangents, the file's cameras and lights move together. The scene
    returned is in metres with +Y up (glTF 2.0 spec §Coordinate System and Units).
    """
    settings = preset.model
    notes = []
    units = settings.units
    if units == "auto":
        extent = float(np.max(np.ptp(scene.bounds(), axis=0))) if scene.triangle_count else 0.0
        units = guess_units(extent)
        if units != "m":
            notes.append(f"model units: largest extent {extent:.4g} read as {UNIT_NAMES[units]}")
    scale = UNIT_SCALES[units]
    rotation = Z_UP_TO_Y_UP if settings.up_axis == "z" else np.eye(3)
    scene = note_ignored_lights(scene, preset.look.model_lights)
    if scale == 1.0 and settings.up_axis == "y":
        return scene
    return _transformed(scene, rotation, scale, notes)


def _transformed(scene: Scene, rotation: np.ndarray, scale: float, notes: list[str]) -> Scene:
    linear = rotation * scale
    placement = np.eye(4)
    placement[:3, :3] = linear
    tangents = scene.tangents.copy()
    tangents[:, :3] = tangents[:, :3] @ rotation.T
    cameras = tuple(
        replace(c, world=placement @ c.world, xmag=c.xmag * scale, ymag=c.ymag * scale,
                znear=c.znear * scale, zfar=None if c.zfar is None else c.zfar * scale)
        for c in scene.cameras
    )
    lights = tuple(
        replace(light, position=tuple(linear @ np.asarray(light.position, np.float64)),
                direction=tuple(rotation @ np.asarray(light.direction, np.float64)),
                range=None if light.range is None else light.range * scale)
        for light in scene.lights
    )
    return replace(
        scene,
        positions=(scene.positions.astype(np.float64) @ linear.T).astype(np.float32),
        normals=(scene.normals.astype(np.float64) @ rotation.T).astype(np.float32),
        tangents=tangents.astype(np.float32),
        cameras=cameras,
        lights=lights,
        warnings=scene.warnings + tuple(notes),
    )


# --- resolving a preset's look for one camera -------------------------------------------------


def resolve_look(preset: Preset, camera: Camera, centre, radius: float, seed: int,
                 model_lights=()) -> Look:
    """The world-space ``Look`` of one frame: the rig placed around this camera's view, and
    the model's own lights when ``[look] model_lights`` asks for them.

    Parameters
    ----------
    centre : (3,) the model's centre (the lights aim at it); radius : its bounding radius.
    model_lights : the scene's ``FileLight``s (KHR_lights_punctual).
    """
    centre = np.asarray(centre, np.float64)
    radius = radius if radius > 0.0 else 1.0
    environment = preset.environment
    return Look(
        lights=frame_lights(preset.look.model_lights,
                            tuple(place_light(light, camera, centre, radius)
                                  for light in preset.lights), model_lights),
        environment=Environment(
            zenith=environment.zenith, horizon=environment.horizon, nadir=environment.nadir,
            intensity=environment.intensity, image=environment.image,
            rotation=math.radians(environment.rotation_deg),
        ),
        ground=Ground(**preset.ground.model_dump()),
        background=Background(**preset.background.model_dump()),
        samples=preset.image.samples,
        noise_target=preset.image.noise_target,
        min_samples=preset.image.min_samples,
        max_samples=preset.image.max_samples,
        area_light_samples=preset.image.light_samples,
        glossy_samples=preset.image.gloss_samples,
        max_depth=preset.image.bounces,
        diffuse_bounces=preset.look.diffuse_bounces,
        exposure=preset.look.exposure,
        tone_map=preset.look.tone_map,
        seed=seed,
        denoise=preset.image.denoise,
    )


def rig_frame(camera: Camera) -> tuple[np.ndarray, np.ndarray]:
    """Horizontal unit vectors (toward the camera's side, toward the camera's right).

    Looking straight down or up, the image's downward direction stands in for the camera's side,
    so a top view is lit as if from the front.
    """
    right, up, back = camera.basis()
    heading = back - (back @ WORLD_UP) * WORLD_UP
    if np.linalg.norm(heading) < 1e-6:
        heading = -(up - (up @ WORLD_UP) * WORLD_UP)
    heading /= np.linalg.norm(heading)
    return heading, np.cross(WORLD_UP, heading)


def place_light(light: RigLight, camera: Camera, centre: np.ndarray, radius: float) -> Light:
    """One rig light in world space for this camera (``shots.look.Light`` conventions).

    An area light faces the centre, its edge_u horizontal, with cross(edge_u, edge_v) along
    ``direction`` (the way its emitting face points).
    """
    if light.attached_to == "camera":
        heading, right = rig_frame(camera)
    else:
        heading, right = np.array([0.0, 0.0, 1.0]), np.array([1.0, 0.0, 0.0])
    azimuth, elevation = math.radians(light.azimuth_deg), math.radians(light.elevation_deg)
    outward = math.cos(elevation) * (math.cos(azimuth) * heading + math.sin(azimuth) * right)
    outward = outward + math.sin(elevation) * WORLD_UP
    distance = light.distance * radius
    position = centre + distance * outward
    common = dict(name=light.name, color=light.color, position=_triple(position),
                  direction=_triple(-outward))
    if light.kind == "directional":
        return Light(kind="directional", intensity=light.intensity, **common)
    if light.kind in ("point", "spot"):
        candela = light.intensity * distance * distance  # E = I / d² at the centre
        if light.kind == "point":
            return Light(kind="point", intensity=candela, **common)
        return Light(kind="spot", intensity=candela, inner_cone=math.radians(light.inner_cone_deg),
                     outer_cone=math.radians(light.cone_deg), **common)
    across = np.cross(WORLD_UP, outward)
    across = across / np.linalg.norm(across) if np.linalg.norm(across) > 1e-6 else right
    along = np.cross(-outward, across)
    width, height = light.size
    return Light(kind="area", intensity=light.intensity, edge_u=_triple(across * width * radius),
                 edge_v=_triple(along * height * radius), **common)


def _triple(vector) -> tuple[float, float, float]:
    return (float(vector[0]), float(vector[1]), float(vector[2]))
