"""What the materials should give: the albedo seen through a frame's camera, and the exposure
reading the check judges (``shots.check.judge``).

    reading = exposure_reading(prepared, camera, rgba, look.exposure)

One ray per pixel centre through the BVH; at the first surface hit, the glTF base colour
(factor × texture × vertex colour, glTF 2.0 spec §Materials) is what a perfectly white-lit
matte surface would show. The rendered luminance over the same pixels divided by the albedo
luminance is then the light the product received, whatever its colour: a light and a dark
fabric under the same lights read alike, a doubled light reads twice as high.

Only matte surfaces count: metals, clear-coated lacquer, glass (transmission) and glowing
surfaces show the room's lights mirrored, through or emitted rather than their albedo lit, so a
high-gloss stool would read several times brighter than an oak chair under the same lights.

``first_surfaces`` gives the same pass as guide buffers for the denoiser (``shots.denoise``):
albedo, shading normal, hit distance and which pixels must stay as rendered.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from shots.accel import intersect_closest
from shots.camera import ORTHOGRAPHIC, Camera
from shots.colour import LUMA_709
from shots.kernels.albedo import (
    A_COVERAGE,
    A_GLOSS,
    A_GLOW,
    A_METALLIC,
    A_NX,
    A_NZ,
    A_ROUGHNESS,
    A_TRANSMISSION,
    N_ALBEDO,
    base_colours,
)
from shots.kernels.sampling import tent_warp

METAL = 0.5  # metallic above this: the colour is a reflectance of the room, not an albedo
WHITE = 0.99  # a base colour with every channel at least this is the untextured default
MIN_PIXELS = 16  # fewer matte pixels than this give no reading
# Roughness below which a surface shows the room mirrored rather than its albedo lit: the
# renderer itself traces dielectric lobes smoother than 0.3 as reflections (``shots.render``).
SMOOTH = 0.3
GRID = 2  # the denoiser's albedo: GRID × GRID rays per pixel


@dataclass(frozen=True)
class FirstSurfaces:
    """What each pixel centre's camera ray hits first (all zero where it misses the model).

    albedo : (h, w, 3) linear base colour over the pixel (``footprint_albedo``).
    normal : (h, w, 3) unit shading normal facing the camera.
    depth : (h, w) hit distance (inf on a miss). coverage : (h, w) opacity.
    sharp : (h, w) bool, surfaces whose light is not their albedo lit: metals, smooth or
    clear-coated lacquer, glass, glowing and see-through surfaces (and misses).
    """

    albedo: np.ndarray
    normal: np.ndarray
    depth: np.ndarray
    coverage: np.ndarray
    sharp: np.ndarray


def albedo_image(prepared, camera: Camera) -> np.ndarray:
    """(h, w, N_ALBEDO) float64: the first surface at each pixel centre, columns ``A_*`` of
    ``shots.kernels.albedo`` (base colour, coverage, metallic, gloss, normal, ...); all zero
    where the ray misses the model (coverage 0). Textures are read at their finest level."""
    return _first_hits(prepared, camera)[0]


def _first_hits(prepared, camera: Camera, jitter=(0.5, 0.5), footprint: float = 0.0):
    """(albedo_image's rows, (h, w) hit distance, inf on a miss) of one ray per pixel at
    ``jitter``, its textures filtered over a cone ``footprint`` pixels wide (0: finest level)."""
    origins, directions = camera.pixel_rays(jitter)
    t, tri, b1, b2 = intersect_closest(prepared.bvh, origins, directions)
    depth = t.astype(np.float64) * np.linalg.norm(directions.astype(np.float64), axis=1)
    cones = np.zeros(len(tri))
    if footprint > 0.0:
        hit = tri >= 0
        if camera.kind == ORTHOGRAPHIC:
            cones[hit] = footprint * 2.0 * camera.ymag / camera.height
        else:  # the pixel spread angle of shots.kernels.camera_sample.pixel_cone
            spread = math.atan(2.0 * math.tan(camera.yfov / 2.0) / camera.height)
            cones[hit] = footprint * spread * depth[hit]
    out = np.zeros((len(tri), N_ALBEDO))
    base_colours(tri, b1, b2, directions, cones, *prepared.packed, out)
    shape = (camera.height, camera.width)
    return out.reshape(shape + (N_ALBEDO,)), depth.reshape(shape)


def footprint_albedo(prepared, camera: Camera) -> np.ndarray:
    """(h, w, 3) base colour averaged over each pixel as a render sees it: ``GRID``² rays on the
    renderer's tent filter (radius 1 pixel, ``shots.render``), each reading the textures over
    its share of the pixel (as the renderer's ray cones do), misses counting as 0."""
    offsets = [tent_warp((k + 0.5) / GRID) for k in range(GRID)]
    total = np.zeros((camera.height, camera.width, 3))
    for dy in offsets:
        for dx in offsets:
            rows = _first_hits(prepared, camera, (0.5 + dx, 0.5 + dy), 1.0 / GRID)[0]
            total += rows[..., :3]
    return total / GRID**2


def first_surfaces(prepared, camera: Camera) -> FirstSurfaces:
    """The denoiser's guide buffers: one ray through each pixel centre (``FirstSurfaces``)."""
    rows, depth = _first_hits(prepared, camera)
    coverage = rows[..., A_COVERAGE]
    sharp = (
        (coverage < 1.0)
        | (rows[..., A_METALLIC] > METAL)
        | (rows[..., A_ROUGHNESS] < SMOOTH)  # A_ROUGHNESS counts a clearcoat's
        | (rows[..., A_TRANSMISSION] > 0.0)
        | (rows[..., A_GLOW] > 0.0)
        | ~np.isfinite(depth)
    )
    return FirstSurfaces(
        albedo=footprint_albedo(prepared, camera),
        normal=rows[..., A_NX : A_NZ + 1].copy(),
        depth=depth,
        coverage=coverage.copy(),
        sharp=sharp,
    )


def inner_pixels(covered: np.ndarray) -> np.ndarray:
    """Covered pixels whose four neighbours are covered too: the product without its
    anti-aliased outline, where a render pixel mixes with the background."""
    inner = covered.copy()
    inner[1:] &= covered[:-1]
    inner[:-1] &= covered[1:]
    inner[:, 1:] &= covered[:, :-1]
    inner[:, :-1] &= covered[:, 1:]
    inner[0], inner[-1], inner[:, 0], inner[:, -1] = False, False, False, False
    return inner


def exposure_reading(prepared, camera: Camera, rgba: np.ndarray, exposure: float) -> dict | None:
    """Rendered and albedo luminance over the product's matte pixels, for the manifest.

    Parameters
    ----------
    prepared : the scene (``shots.render.prepare_scene``). camera : the frame's camera.
    rgba : the frame's premultiplied linear render. exposure : the look's exposure in stops.

    Returns
    -------
    {"rendered": mean linear Y × 2^exposure, "albedo": mean base colour Y, "white": share of
    those pixels whose base colour is pure white, "pixels": how many}, or None when fewer than
    ``MIN_PIXELS`` matte pixels show.
    """
    albedo = albedo_image(prepared, camera)
    matte = (albedo[..., A_METALLIC] <= METAL) & (albedo[..., A_GLOSS] <= 0.0)
    pixels = inner_pixels(albedo[..., A_COVERAGE] >= 0.5) & matte
    count = int(pixels.sum())
    if count < MIN_PIXELS:
        return None
    base = albedo[..., :3][pixels]
    rendered = np.asarray(rgba, np.float64)[..., :3][pixels]
    return {
        "rendered": float(np.mean(rendered @ LUMA_709) * 2.0**exposure),
        "albedo": float(np.mean(base @ LUMA_709)),
        "white": float(np.mean(np.all(base >= WHITE, axis=1))),
        "pixels": count,
    }
