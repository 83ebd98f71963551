"""Cameras: a look-at frame and a lens, and the primary rays through an image's pixels.

Conventions (glTF 2.0 spec §Cameras): the camera looks along its local -Z with +Y up and +X right.
Pixel (i, j) has column i from the left and row j from the top; its centre is (i + 0.5, j + 0.5).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

PERSPECTIVE = "perspective"
ORTHOGRAPHIC = "orthographic"


class CameraFrameError(ValueError):
    """The look-at frame is undefined (eye on the target, or up parallel to the view)."""


def look_at_basis(eye, target, up) -> np.ndarray:
    """The camera's right, up and backward axes as rows (u, v, w) of a (3, 3) float64 matrix.

    w points from the target to the eye, u = up × w, v = w × u, so det[u, v, w] = +1. An up vector
    parallel to the view is refused: the caller decides which substitute is right for its shot.
    """
    eye, target, up = (np.asarray(x, np.float64) for x in (eye, target, up))
    back = eye - target
    distance = np.linalg.norm(back)
    if distance == 0.0:
        raise CameraFrameError("eye and target coincide")
    w = back / distance
    right = np.cross(up, w)
    norm = np.linalg.norm(right)
    if norm < 1e-9 * max(np.linalg.norm(up), 1e-300):
        raise CameraFrameError("up vector is parallel to the view direction")
    u = right / norm
    v = np.cross(w, u)
    return np.stack([u, v, w])


@dataclass(frozen=True)
class Camera:
    """A pinhole (perspective) or orthographic camera with an image size.

    Attributes
    ----------
    eye, target, up : world-space look-at frame (metres).
    width, height : image size in pixels.
    yfov : vertical field of view in radians (perspective).
    ymag : half of the visible height in metres (orthographic, as glTF's ``ymag``).
    znear : near clipping distance along the view axis in metres (0: none); a model's own
        camera brings its ``znear`` (glTF 2.0 spec §3.10 "Cameras").
    """

    eye: tuple[float, float, float]
    target: tuple[float, float, float]
    up: tuple[float, float, float]
    width: int
    height: int
    yfov: float = math.radians(30.0)
    kind: str = PERSPECTIVE
    ymag: float = 1.0
    znear: float = 0.0

    @property
    def aspect(self) -> float:
        return self.width / self.height

    @property
    def xfov(self) -> float:
        """Horizontal field of view: tan(xfov/2) = aspect·tan(yfov/2), not aspect·yfov."""
        return 2.0 * math.atan(self.aspect * math.tan(self.yfov / 2.0))

    def basis(self) -> np.ndarray:
        """(3, 3) float64 rows u (right), v (up), w (backward)."""
        return look_at_basis(self.eye, self.target, self.up)

    def view_matrix(self) -> np.ndarray:
        """(4, 4) float64 world-to-camera matrix."""
        basis = self.basis()
        view = np.eye(4)
        view[:3, :3] = basis
        view[:3, 3] = -basis @ np.asarray(self.eye, np.float64)
        return view

    def screen_coords(self, px: np.ndarray, py: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Normalised screen coordinates in [-1, 1] of image positions (px right, py down)."""
        sx = 2.0 * np.asarray(px, np.float64) / self.width - 1.0
        sy = 1.0 - 2.0 * np.asarray(py, np.float64) / self.height
        return sx, sy

    def rays_at(self, px: np.ndarray, py: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Rays through image positions, in pixel units (pixel centres are at k + 0.5).

        Returns
        -------
        origins, directions : (n, 3) float32, directions unit length.
        """
        u, v, w = self.basis()
        sx, sy = self.screen_coords(np.ravel(px), np.ravel(py))
        eye = np.asarray(self.eye, np.float64)
        if self.kind == ORTHOGRAPHIC:
            xmag = self.ymag * self.aspect
            origins = eye + np.outer(sx * xmag, u) + np.outer(sy * self.ymag, v)
            directions = np.broadcast_to(-w, origins.shape)
        else:
            tan_y = math.tan(self.yfov / 2.0)
            directions = np.outer(sx * tan_y * self.aspect, u) + np.outer(sy * tan_y, v) - w
            directions /= np.linalg.norm(directions, axis=1, keepdims=True)
            origins = np.broadcast_to(eye, directions.shape)
        origins = np.ascontiguousarray(origins, np.float32)
        return origins, np.ascontiguousarray(directions, np.float32)

    def pixel_rays(self, jitter: tuple[float, float] = (0.5, 0.5)) -> tuple[np.ndarray, np.ndarray]:
        """One ray per pixel, row-major from the top-left pixel, at sub-pixel offset ``jitter``.

        Returns
        -------
        origins, directions : (height·width, 3) float32.
        """
        jj, ii = np.mgrid[0 : self.height, 0 : self.width]
        return self.rays_at(ii + jitter[0], jj + jitter[1])

    def project(self, points: np.ndarray) -> np.ndarray:
        """(n, 2) float64 image positions (px right, py down) of world points (rays_at inverted)."""
        cam = (np.asarray(points, np.float64) - np.asarray(self.eye)) @ self.basis().T
        if self.kind == ORTHOGRAPHIC:
            sx = cam[:, 0] / (self.ymag * self.aspect)
            sy = cam[:, 1] / self.ymag
        else:
            tan_y = math.tan(self.yfov / 2.0)
            depth = -cam[:, 2]
            sx = cam[:, 0] / (depth * tan_y * self.aspect)
            sy = cam[:, 1] / (depth * tan_y)
        return np.stack([(sx + 1.0) * self.width / 2.0, (1.0 - sy) * self.height / 2.0], axis=1)


def horizontal_fov(focal_length_mm: float, sensor_width_mm: float = 36.0) -> float:
    """Horizontal field of view in radians of a lens on a sensor whose width spans the image.

    2·atan(w / 2f) (thin-lens pinhole, common photographic practice; 36 mm is the full-frame width).
    """
    return 2.0 * math.atan(sensor_width_mm / (2.0 * focal_length_mm))


def yfov_from_xfov(xfov: float, aspect: float) -> float:
    """Vertical field of view for a horizontal one: tan(yfov/2) = tan(xfov/2) / aspect."""
    return 2.0 * math.atan(math.tan(xfov / 2.0) / aspect)


def upright(eye, target, up=(0.0, 1.0, 0.0)) -> tuple[float, float, float]:
    """``up``, or a substitute when it is parallel to the view.

    Looking straight down, -Z is up, so the model's front (+Z) is at the bottom of the image as in
    a plan drawn above its front elevation; looking straight up, +Z is up.
    """
    view = np.asarray(target, np.float64) - np.asarray(eye, np.float64)
    up = np.asarray(up, np.float64)
    if np.linalg.norm(np.cross(up, view)) > 1e-9 * np.linalg.norm(up) * np.linalg.norm(view):
        return (float(up[0]), float(up[1]), float(up[2]))
    return (0.0, 0.0, -1.0) if view @ up < 0.0 else (0.0, 0.0, 1.0)


def stratified_offsets(samples: int, seed: int = 0) -> np.ndarray:
    """Sub-pixel positions in [0, 1)² for anti-aliasing, stratified in both axes.

    A square count gets jittered grid cells, one sample per cell (Cook 1986, "Stochastic Sampling
    in Computer Graphics"); any other count gets N-rooks positions, one sample in each of
    ``samples`` columns and rows (Shirley 1991, "Discrepancy as a quality measure for sample
    distributions"). Add pixel indices and pass the result to ``Camera.rays_at``.

    Returns
    -------
    (samples, 2) float64, x then y, deterministic for a given ``seed``.
    """
    rng = np.random.default_rng(seed)
    side = math.isqrt(samples)
    if side * side == samples:
        jj, ii = np.divmod(np.arange(samples), side)
        cells = np.stack([ii, jj], axis=1).astype(np.float64)
        return (cells + rng.random((samples, 2))) / side
    columns = np.arange(samples, dtype=np.float64)
    rows = rng.permutation(samples).astype(np.float64)
    return (np.stack([columns, rows], axis=1) + rng.random((samples, 2))) / samples
