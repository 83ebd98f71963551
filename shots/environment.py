"""Environment light: the studio gradient or an equirectangular HDR image, and its SH irradiance.

Either source becomes one equirectangular radiance map (the kernels look up only that), scaled by
``Environment.intensity``. Diffuse light from it is the irradiance of its first nine spherical
harmonics (Ramamoorthi & Hanrahan 2001, "An Efficient Representation for Irradiance Environment
Maps", SIGGRAPH); specular light comes from reflection rays that look the map up directly.

For occluded environment light (``shots.kernels.ambient``) the kernels also draw directions in
proportion to the map's radiance: ``sampling_table`` builds the piecewise-constant 2D distribution
of Pharr, Jakob & Humphreys, "Physically Based Rendering" (3rd ed.), §14.2.4 "Infinite Area
Lights" (the same table for the gradient, built from its image).

Map convention (``shots.kernels.texture.equirect_uv``): +Y up, row 0 at the zenith, the map's
horizontal centre along −Z, u growing toward +X; ``rotation`` turns it about +Y.
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np

from shots.errors import RenderError
from shots.look import Environment

GRADIENT_SIZE = (256, 8)  # rows (elevation) × columns: the gradient does not vary with azimuth

# Ramamoorthi & Hanrahan 2001, eq. 3 (real SH constants) and eq. 8 (Â_l of the clamped cosine).
_Y0 = 0.5 * np.sqrt(1.0 / np.pi)  # 0.282095
_Y1 = np.sqrt(3.0 / (4.0 * np.pi))  # 0.488603
_Y2 = np.sqrt(15.0 / (4.0 * np.pi))  # 1.092548
_Y20 = np.sqrt(5.0 / (16.0 * np.pi))  # 0.315392
_Y22 = np.sqrt(15.0 / (16.0 * np.pi))  # 0.546274
SH_CONSTANTS = np.array([_Y0, _Y1, _Y1, _Y1, _Y2, _Y2, _Y20, _Y2, _Y22])
COSINE_LOBE = np.array([np.pi] + [2.0 * np.pi / 3.0] * 3 + [np.pi / 4.0] * 5)


def sh_basis(directions: np.ndarray) -> np.ndarray:
    """The nine real SH basis functions at unit directions.

    Parameters
    ----------
    directions : (n, 3) float64 unit vectors (x, y, z).

    Returns
    -------
    (n, 9) float64 in the order (0,0), (1,−1), (1,0), (1,1), (2,−2), (2,−1), (2,0), (2,1), (2,2).
    """
    x, y, z = directions[:, 0], directions[:, 1], directions[:, 2]
    polys = np.stack(
        [np.ones_like(x), y, z, x, x * y, y * z, 3.0 * z * z - 1.0, x * z, x * x - y * y], axis=1
    )
    return polys * SH_CONSTANTS


def equirect_directions(height: int, width: int, rotation: float = 0.0) -> np.ndarray:
    """(height, width, 3) float64 unit directions through the centres of an equirect map's pixels."""
    theta = (np.arange(height) + 0.5) / height * np.pi
    phi = ((np.arange(width) + 0.5) / width - 0.5) * 2.0 * np.pi + rotation
    st = np.sin(theta)[:, None]
    return np.stack(
        [
            st * np.sin(phi)[None, :],
            np.broadcast_to(np.cos(theta)[:, None], (height, width)),
            -st * np.cos(phi)[None, :],
        ],
        axis=-1,
    )


def irradiance_coefficients(radiance: np.ndarray, rotation: float = 0.0) -> np.ndarray:
    """SH coefficients Â_l·L_lm of an equirectangular radiance map.

    Parameters
    ----------
    radiance : (h, w, 3) float linear radiance.
    rotation : the map's turn about +Y (radians), as used when looking it up.

    Returns
    -------
    (9, 3) float64; irradiance E(n) = Σ_i coeffs[i] · Y_i(n) (R&H 2001, eq. 7 and 8).
    """
    h, w, _ = radiance.shape
    dirs = equirect_directions(h, w, rotation).reshape(-1, 3)
    theta = (np.arange(h) + 0.5) / h * np.pi
    solid_angle = np.repeat(np.sin(theta), w)
    solid_angle *= 4.0 * np.pi / solid_angle.sum()  # quadrature exact for a constant map
    basis = sh_basis(dirs) * solid_angle[:, None]
    coeffs = basis.T @ radiance.reshape(-1, 3).astype(np.float64)
    return coeffs * COSINE_LOBE[:, None]


def irradiance(coeffs: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """(n, 3) irradiance at unit normals (n, 3) from coefficients (9, 3)."""
    return sh_basis(np.asarray(normals, np.float64)) @ coeffs


def gradient_map(env: Environment) -> np.ndarray:
    """The studio gradient as an equirect map (h, w, 3) float32.

    Radiance varies linearly with the height y = cos θ of the direction: horizon at y = 0, zenith
    at y = 1, nadir at y = −1.
    """
    h, w = GRADIENT_SIZE
    y = np.cos((np.arange(h) + 0.5) / h * np.pi)[:, None]
    zenith, horizon, nadir = (np.asarray(c, np.float64) for c in (env.zenith, env.horizon, env.nadir))
    rows = np.where(y >= 0.0, horizon + (zenith - horizon) * y, horizon + (nadir - horizon) * -y)
    return np.ascontiguousarray(np.broadcast_to(rows[:, None, :], (h, w, 3)), np.float32)


@functools.lru_cache(maxsize=4)
def load_hdr_image(path: str) -> np.ndarray:
    """Read an equirectangular HDR image (OpenEXR .exr or Radiance .hdr) as (h, w, 3) float32."""
    file = Path(path)
    if not file.is_file():
        raise RenderError(path, None, "environment image not found")
    suffix = file.suffix.lower()
    try:
        if suffix == ".exr":
            image = _read_exr(file)
        elif suffix in (".hdr", ".pic"):
            image = _read_radiance(file.read_bytes())
        else:
            raise RenderError(path, None, "environment image must be .exr or .hdr")
    except RenderError:
        raise
    except Exception as exc:  # a decoder's own error, reported against the file
        raise RenderError(path, None, f"cannot read environment image: {exc}") from exc
    if not np.all(np.isfinite(image)):
        image = np.nan_to_num(image, nan=0.0, posinf=0.0, neginf=0.0)
    image.setflags(write=False)
    return image


def _read_exr(file: Path) -> np.ndarray:
    import OpenEXR  # a dependency of shots; imported here only when an image environment is used

    with OpenEXR.File(str(file), separate_channels=True) as exr:
        channels = exr.channels()
        if "R" in channels:
            names = ("R", "G", "B") if "B" in channels else ("R", "R", "R")
        elif "Y" in channels:
            names = ("Y", "Y", "Y")
        else:
            raise RenderError(file, None, f"no R/G/B or Y channels in {sorted(channels)}")
        return np.ascontiguousarray(
            np.stack([channels[n].pixels for n in names], axis=-1), np.float32
        )


def _read_radiance(data: bytes) -> np.ndarray:
    """Decode a Radiance RGBE picture (Ward 1991, "Real Pixels", Graphics Gems II), flat or RLE."""
    pos = 0
    header_end = data.find(b"\n\n")
    if not data.startswith(b"#?") or header_end < 0:
        raise ValueError("not a Radiance picture")
    pos = header_end + 2
    line_end = data.index(b"\n", pos)
    parts = data[pos:line_end].split()
    pos = line_end + 1
    if len(parts) != 4 or parts[0] != b"-Y" or parts[2] != b"+X":
        raise ValueError("only the standard -Y H +X W orientation is supported")
    height, width = int(parts[1]), int(parts[3])
    buf = np.frombuffer(data, np.uint8, offset=pos)
    rgbe = np.empty((height, width, 4), np.uint8)
    at = 0
    for row in range(height):
        head = buf[at : at + 4]
        if 8 <= width < 32768 and head[0] == 2 and head[1] == 2 and (head[2] << 8 | head[3]) == width:
            at += 4
            for c in range(4):
                x = 0
                while x < width:
                    count = int(buf[at])
                    at += 1
                    if count > 128:
                        count -= 128
                        rgbe[row, x : x + count, c] = buf[at]
                        at += 1
                    else:
                        rgbe[row, x : x + count, c] = buf[at : at + count]
                        at += count
                    x += count
        else:
            rgbe[row] = buf[at : at + 4 * width].reshape(width, 4)
            at += 4 * width
    exponent = rgbe[..., 3].astype(np.int32)
    scale = np.where(exponent > 0, np.ldexp(1.0, exponent - 136), 0.0)
    return (rgbe[..., :3] * scale[..., None]).astype(np.float32)


def environment_map(env: Environment) -> tuple[np.ndarray, np.ndarray]:
    """The look's environment as the kernels consume it.

    Returns
    -------
    radiance : (h, w, 3) float32 equirect map, already × intensity.
    coeffs : (9, 3) float64 SH irradiance coefficients of that map (with its rotation).
    """
    base = load_hdr_image(str(env.image)) if env.image else gradient_map(env)
    radiance = np.ascontiguousarray(base * np.float32(env.intensity), np.float32)
    return radiance, irradiance_coefficients(radiance, env.rotation)


def sampling_table(radiance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Piecewise-constant 2D distribution over an equirect map, ∝ brightest channel × sin θ.

    Pharr, Jakob & Humphreys, PBR 3rd ed., §13.6.7 "Piecewise-Constant 2D Distributions" and
    §14.2.4 "Infinite Area Lights": the sin θ weight makes the density uniform in solid angle
    where the map is, so the poles' squeezed pixels are not over-sampled. The brightest channel
    (not luminance) keeps the density above zero wherever any channel is lit.

    Returns
    -------
    rows : (h, w) float64, each row's cumulative distribution over its pixels (last column 1).
    marginal : (h,) float64, the cumulative distribution over rows (last entry 1).
    A black map gets the uniform density.
    """
    h, w, _ = radiance.shape
    sin_theta = np.sin((np.arange(h) + 0.5) / h * np.pi)
    weight = radiance.max(axis=-1).astype(np.float64) * sin_theta[:, None]
    weight = np.maximum(weight, 0.0)
    if not weight.sum() > 0.0:
        weight = np.broadcast_to(sin_theta[:, None], (h, w)).copy()
    row_sums = weight.sum(axis=1)
    rows = np.cumsum(weight, axis=1)
    safe = np.where(row_sums > 0.0, row_sums, 1.0)
    rows = np.where(row_sums[:, None] > 0.0, rows / safe[:, None], (np.arange(w) + 1.0) / w)
    rows[:, -1] = 1.0
    marginal = np.cumsum(row_sums) / row_sums.sum()
    marginal[-1] = 1.0
    return np.ascontiguousarray(rows), np.ascontiguousarray(marginal)
