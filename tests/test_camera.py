"""The camera model against the glTF 2.0 spec's matrices, trimesh's rays and lens optics."""

import math

import numpy as np
import pytest
import trimesh

from shots.camera import (
    ORTHOGRAPHIC,
    Camera,
    horizontal_fov,
    look_at_basis,
    stratified_offsets,
    upright,
    yfov_from_xfov,
)

CAMERAS = [
    Camera((0.3, 1.2, 4.0), (0.1, 0.2, -0.3), (0, 1, 0), 16, 12, yfov=math.radians(40)),
    Camera((-3.0, 2.0, -1.0), (0.5, 0.0, 0.2), (0, 1, 0), 9, 14, yfov=math.radians(65)),
    Camera((2.0, -1.0, 3.0), (0.0, 0.0, 0.0), (0.2, 1, 0.1), 20, 10, yfov=math.radians(25)),
]
ORTHO_CAMERAS = [
    Camera((0.0, 0.0, 5.0), (0.0, 0.0, 0.0), (0, 1, 0), 16, 12, kind=ORTHOGRAPHIC, ymag=0.7),
    Camera((3.0, 4.0, -2.0), (0.5, 0.0, 0.2), (0, 1, 0), 10, 15, kind=ORTHOGRAPHIC, ymag=2.5),
]


def spec_view(camera):
    """glTF 2.0 spec §Cameras (View Matrix): the inverse of the camera node's world transform,
    whose −Z looks at the target and whose +Y is up (built here, not with shots.camera)."""
    eye, target, up = (np.asarray(v, float) for v in (camera.eye, camera.target, camera.up))
    z = (eye - target) / np.linalg.norm(eye - target)
    x = np.cross(up, z)
    x /= np.linalg.norm(x)
    world = np.eye(4)
    world[:3, 0], world[:3, 1], world[:3, 2], world[:3, 3] = x, np.cross(z, x), z, eye
    return np.linalg.inv(world)


def spec_perspective(yfov, aspect, znear, zfar=None):
    """glTF 2.0 spec §Projection Matrices: finite perspective, or infinite when zfar is None."""
    t = math.tan(0.5 * yfov)
    matrix = np.zeros((4, 4))
    matrix[0, 0], matrix[1, 1], matrix[3, 2] = 1 / (aspect * t), 1 / t, -1
    if zfar is None:
        matrix[2, 2], matrix[2, 3] = -1, -2 * znear
    else:
        matrix[2, 2] = (zfar + znear) / (znear - zfar)
        matrix[2, 3] = 2 * zfar * znear / (znear - zfar)
    return matrix


def spec_orthographic(xmag, ymag, znear, zfar):
    """glTF 2.0 spec §Projection Matrices: orthographic (r = xmag, t = ymag)."""
    return np.array([
        [1 / xmag, 0, 0, 0],
        [0, 1 / ymag, 0, 0],
        [0, 0, 2 / (znear - zfar), (zfar + znear) / (znear - zfar)],
        [0, 0, 0, 1],
    ])


def ndc_to_pixels(points, matrix, width, height):
    """Clip → NDC → image positions; NDC +y is up and row 0 is the top of the image."""
    clip = np.c_[points, np.ones(len(points))] @ matrix.T
    ndc = clip[:, :3] / clip[:, 3:4]
    return np.c_[(ndc[:, 0] + 1) * width / 2, (1 - ndc[:, 1]) * height / 2]


def every_pixel_centre(camera):
    jj, ii = np.mgrid[0 : camera.height, 0 : camera.width]
    return ii.ravel() + 0.5, jj.ravel() + 0.5


def test_look_at_basis_is_right_handed_with_w_toward_the_eye():
    # glTF 2.0 spec §View Matrix (camera looks down −Z, +Y up), by hand: eye (0,0,5) → u, v, w =
    # +X, +Y, +Z; eye (3,2,4) → u = (0, 1, 0) × (3, 2, 4)/|·| = (0.8, 0, −0.6).
    np.testing.assert_allclose(look_at_basis((0, 0, 5), (0, 0, 0), (0, 1, 0)), np.eye(3))
    basis = look_at_basis((3, 2, 4), (0, 0, 0), (0, 1, 0))
    np.testing.assert_allclose(basis[0], [0.8, 0.0, -0.6], atol=1e-12)
    assert np.linalg.det(basis) == pytest.approx(1.0)


@pytest.mark.parametrize("camera", CAMERAS)
@pytest.mark.parametrize("zfar", [50.0, None])
def test_perspective_rays_reproject_to_their_pixel_centres(camera, zfar):
    # glTF 2.0 spec §Projection Matrices and §View Matrix: march along each pixel-centre ray,
    # apply the spec's projection × view matrix and land on that pixel's centre (i + 0.5, j + 0.5).
    px, py = every_pixel_centre(camera)
    origins, directions = camera.rays_at(px, py)
    points = origins.astype(float) + 3.7 * directions.astype(float)
    matrix = spec_perspective(camera.yfov, camera.aspect, 0.05, zfar) @ spec_view(camera)
    pixels = ndc_to_pixels(points, matrix, camera.width, camera.height)
    np.testing.assert_allclose(pixels, np.c_[px, py], atol=1e-6)


@pytest.mark.parametrize("camera", ORTHO_CAMERAS)
def test_orthographic_rays_reproject_to_their_pixel_centres(camera):
    # glTF 2.0 spec §Projection Matrices (orthographic: xmag, ymag are half-extents).
    px, py = every_pixel_centre(camera)
    origins, directions = camera.rays_at(px, py)
    points = origins.astype(float) + 2.3 * directions.astype(float)
    matrix = spec_orthographic(camera.ymag * camera.aspect, camera.ymag, 0.05, 40.0)
    pixels = ndc_to_pixels(points, matrix @ spec_view(camera), camera.width, camera.height)
    np.testing.assert_allclose(pixels, np.c_[px, py], atol=1e-6)
    assert np.ptp(directions, axis=0).max() == 0.0  # parallel rays


@pytest.mark.parametrize("camera", CAMERAS + ORTHO_CAMERAS)
def test_stratified_sub_pixel_rays_reproject(camera):
    # The same spec oracle at jittered sub-pixel positions instead of centres.
    offsets = stratified_offsets(4, seed=7)
    px = np.repeat(np.arange(camera.width), len(offsets)) + np.tile(offsets[:, 0], camera.width)
    py = np.full_like(px, camera.height // 2) + np.tile(offsets[:, 1], camera.width)
    origins, directions = camera.rays_at(px, py)
    points = origins.astype(float) + 1.9 * directions.astype(float)
    if camera.kind == ORTHOGRAPHIC:
        projection = spec_orthographic(camera.ymag * camera.aspect, camera.ymag, 0.05, 40.0)
    else:
        projection = spec_perspective(camera.yfov, camera.aspect, 0.05)
    pixels = ndc_to_pixels(points, projection @ spec_view(camera), camera.width, camera.height)
    np.testing.assert_allclose(pixels, np.c_[px, py], atol=1e-6)


@pytest.mark.parametrize("camera", CAMERAS + ORTHO_CAMERAS)
def test_image_is_upright_and_not_mirrored(camera):
    # glTF 2.0 spec §View Matrix (+X right, +Y up): row 0 is the top; a point toward +u lands in
    # the right half, toward +v in the top half.
    u, v, w = camera.basis()
    ahead = np.asarray(camera.eye) - 2.0 * w
    right, above = camera.project(np.array([ahead + 0.2 * u, ahead + 0.2 * v]))
    assert right[0] > camera.width / 2 and right[1] == pytest.approx(camera.height / 2)
    assert above[1] < camera.height / 2 and above[0] == pytest.approx(camera.width / 2)


@pytest.mark.parametrize("camera", CAMERAS + ORTHO_CAMERAS)
def test_project_inverts_rays_at(camera):
    px, py = np.array([0.25, 3.5, camera.width - 0.1]), np.array([0.75, 2.0, camera.height - 0.3])
    origins, directions = camera.rays_at(px, py)
    points = origins.astype(float) + 2.0 * directions.astype(float)
    np.testing.assert_allclose(camera.project(points), np.c_[px, py], atol=1e-5)


def test_rays_match_trimesh_camera_to_rays():
    # trimesh 5.2 trimesh.scene.cameras.camera_to_rays: camera-frame directions through pixel
    # centres, fov=(fovx, fovy) in degrees; its pixel y counts from the bottom.
    camera = Camera((0, 0, 0), (0, 0, -1), (0, 1, 0), 12, 8, yfov=math.radians(50))
    reference = trimesh.scene.Camera(
        resolution=(camera.width, camera.height),
        fov=(math.degrees(camera.xfov), math.degrees(camera.yfov)),
    )
    vectors, pixels = trimesh.scene.cameras.camera_to_rays(reference)
    rows_from_top = camera.height - 1 - pixels[:, 1]
    _, ours = camera.rays_at(pixels[:, 0] + 0.5, rows_from_top + 0.5)
    np.testing.assert_allclose(ours, vectors, atol=1e-6)


def test_corner_ray_matches_trimesh_camera_to_rays():
    # trimesh 5.2 camera_to_rays: resolution (4, 2), fov (90°, 53.130°): its pixel (0, 1) has the
    # direction (−0.5883, 0.1961, −0.7845), which is ours at column 0, row 0 (the top).
    camera = Camera((0, 0, 0), (0, 0, -1), (0, 1, 0), 4, 2, yfov=math.radians(53.130102354))
    assert math.degrees(camera.xfov) == pytest.approx(90.0, abs=1e-6)
    _, direction = camera.rays_at(np.array([0.5]), np.array([0.5]))
    np.testing.assert_allclose(direction[0], [-0.5883, 0.1961, -0.7845], atol=1e-4)


def test_world_rays_match_trimesh_scene_camera_rays():
    # trimesh Scene.camera_rays: world origins and unit directions for the scene camera placed
    # by camera_transform (camera-to-world, looking down its −Z).
    camera = CAMERAS[0]
    scene = trimesh.Scene(trimesh.creation.box())
    scene.camera.resolution = (camera.width, camera.height)
    scene.camera.fov = (math.degrees(camera.xfov), math.degrees(camera.yfov))
    scene.camera_transform = np.linalg.inv(spec_view(camera))
    origins, vectors, pixels = scene.camera_rays()
    rows_from_top = camera.height - 1 - pixels[:, 1]
    our_origins, ours = camera.rays_at(pixels[:, 0] + 0.5, rows_from_top + 0.5)
    np.testing.assert_allclose(ours, vectors, atol=1e-6)
    np.testing.assert_allclose(our_origins, origins, atol=1e-6)


def test_fifty_millimetre_lens_on_full_frame():
    # Common photographic practice: horizontal fov = 2·atan(w / 2f); 50 mm on 36 mm → 39.6°.
    assert math.degrees(horizontal_fov(50.0)) == pytest.approx(39.5978, abs=1e-4)
    assert math.degrees(horizontal_fov(50.0, 36.0)) == pytest.approx(39.6, abs=0.01)


def test_vertical_fov_follows_tangent_not_angle():
    # tan(xfov/2) = aspect·tan(yfov/2): yfov 0.660593 rad at aspect 1.5 → xfov 54.432°, not
    # 1.5·yfov (56.77°).
    camera = Camera((0, 0, 1), (0, 0, 0), (0, 1, 0), 300, 200, yfov=0.660593)
    assert math.degrees(camera.xfov) == pytest.approx(54.432, abs=1e-3)
    assert yfov_from_xfov(camera.xfov, 1.5) == pytest.approx(0.660593, abs=1e-12)


@pytest.mark.parametrize("samples", [1, 4, 9, 16, 64])
def test_square_counts_put_one_sample_in_each_grid_cell(samples):
    # Jittered (stratified) sampling, Cook 1986: one sample per cell of a side×side grid.
    side = math.isqrt(samples)
    offsets = stratified_offsets(samples, seed=3)
    assert offsets.shape == (samples, 2) and offsets.min() >= 0.0 and offsets.max() < 1.0
    cells = {(int(x * side), int(y * side)) for x, y in offsets}
    assert len(cells) == samples


@pytest.mark.parametrize("samples", [2, 3, 5, 8, 12])
def test_other_counts_are_n_rooks(samples):
    # N-rooks sampling, Shirley 1991: one sample in each column stratum and each row stratum.
    offsets = stratified_offsets(samples, seed=11)
    assert sorted(int(x * samples) for x in offsets[:, 0]) == list(range(samples))
    assert sorted(int(y * samples) for y in offsets[:, 1]) == list(range(samples))


def test_offsets_are_deterministic_per_seed():
    np.testing.assert_array_equal(stratified_offsets(16, 5), stratified_offsets(16, 5))
    assert not np.array_equal(stratified_offsets(16, 5), stratified_offsets(16, 6))


def test_up_parallel_to_view_is_replaced():
    # Looking straight down with +Y up is undefined (look_at_basis refuses it); the substitute
    # −Z puts the model's front (+Z, glTF 2.0 spec §Coordinate System) at the image bottom.
    with pytest.raises(ValueError, match="parallel"):
        look_at_basis((0, 5, 0), (0, 0, 0), (0, 1, 0))
    up = upright((0, 5, 0), (0, 0, 0), (0, 1, 0))
    assert up == (0.0, 0.0, -1.0)
    top = Camera((0, 5, 0), (0, 0, 0), up, 10, 10)
    front_marker = top.project(np.array([[0.0, 0.0, 0.5]]))[0]
    assert front_marker[1] > 5.0
    assert upright((0, -5, 0), (0, 0, 0), (0, 1, 0)) == (0.0, 0.0, 1.0)
    assert upright((1, 5, 0), (0, 0, 0), (0, 1, 0)) == (0.0, 1.0, 0.0)
