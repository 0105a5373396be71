"""Rotations and transforms against scipy.spatial.transform.Rotation (run in the tests).

scipy conventions used here: ``Rotation.from_euler("xyz", ...)`` is fixed-axis X-Y-Z
(the URDF rpy convention), quaternions are scalar-last ``[x, y, z, w]`` (posebridge is
scalar-first ``[w, x, y, z]``), rotation vectors are axis * angle in radians.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from posebridge.arrays import FloatArray
from posebridge.transforms import (
    TransformError,
    check_rotation_matrix,
    check_transform,
    invert_transform,
    quaternion_from_rotation_matrix,
    rotation_matrix_about_axis,
    rotation_matrix_about_y,
    rotation_matrix_about_z,
    rotation_matrix_from_quaternion,
    rotation_matrix_from_rotation_vector,
    rotation_matrix_from_rpy,
    rotation_vector_from_rotation_matrix,
    rpy_from_rotation_matrix,
    transform_from_position_rpy,
    transform_from_rotation_translation,
    transform_points,
)

SEED = 1234
RANDOM = Rotation.random(500, random_state=SEED)

angles = st.floats(min_value=-math.pi, max_value=math.pi, allow_nan=False)


def wxyz(xyzw: np.ndarray) -> np.ndarray:
    """scipy's scalar-last quaternion to scalar-first."""
    return np.roll(xyzw, 1, axis=-1)


# ------------------------------------------------------------------------ rpy


def test_rpy_reference_matrix() -> None:
    # URDF specification (origin rpy about fixed X, Y, Z), as scipy from_euler("xyz")
    expected = [
        [0.41198225, -0.83373765, -0.36763046],
        [-0.05872664, -0.42691762, 0.90238159],
        [-0.90929743, -0.35017549, -0.22484510],
    ]
    np.testing.assert_allclose(rotation_matrix_from_rpy([1.0, 2.0, 3.0]), expected, atol=5e-9)


def test_rpy_to_matrix_matches_scipy_batch_and_degrees() -> None:
    rpy = np.random.default_rng(SEED).uniform(-math.pi, math.pi, (4, 25, 3))
    expected = Rotation.from_euler("xyz", rpy.reshape(-1, 3)).as_matrix().reshape(4, 25, 3, 3)
    np.testing.assert_allclose(rotation_matrix_from_rpy(rpy), expected, atol=1e-15)
    np.testing.assert_allclose(
        rotation_matrix_from_rpy(np.degrees(rpy), degrees=True), expected, atol=1e-15
    )


def test_matrix_to_rpy_matches_scipy_and_ranges() -> None:
    R = RANDOM.as_matrix()
    rpy = rpy_from_rotation_matrix(R)
    np.testing.assert_allclose(rotation_matrix_from_rpy(rpy), R, atol=1e-14)
    # scipy as_euler("xyz"): first/third angle in [-pi, pi], second in [-pi/2, pi/2]
    np.testing.assert_allclose(rpy, RANDOM.as_euler("xyz"), atol=1e-12)
    # documented ranges: pitch in [-pi/2, pi/2], roll and yaw in (-pi, pi]
    assert np.all(np.abs(rpy[:, 1]) <= math.pi / 2)
    assert np.all((rpy[:, [0, 2]] > -math.pi) & (rpy[:, [0, 2]] <= math.pi))
    np.testing.assert_allclose(rpy_from_rotation_matrix(R, degrees=True), np.degrees(rpy))


def test_rpy_half_turn_maps_to_plus_pi() -> None:
    # roll = -pi is the same rotation as roll = +pi; the documented range is (-pi, pi]
    rpy = rpy_from_rotation_matrix(
        Rotation.from_euler("xyz", [-math.pi, 0.3, -math.pi]).as_matrix()
    )
    assert rpy[0] == pytest.approx(math.pi)
    assert rpy[2] == pytest.approx(math.pi)


@pytest.mark.parametrize("pitch_deg", [90.0, -90.0])
@pytest.mark.parametrize(
    ("roll_deg", "yaw_deg"), [(0, 0), (30, 0), (0, -45), (120, 75), (-170, 170)]
)
def test_gimbal_lock_compares_matrices_not_angles(
    pitch_deg: float, roll_deg: float, yaw_deg: float
) -> None:
    R = Rotation.from_euler("xyz", [roll_deg, pitch_deg, yaw_deg], degrees=True).as_matrix()
    rpy = rpy_from_rotation_matrix(R)
    # at gimbal lock only roll -+ yaw is defined: the documented choice is roll = 0
    assert rpy[0] == 0.0
    assert rpy[1] == pytest.approx(math.radians(pitch_deg), abs=1e-12)
    np.testing.assert_allclose(rotation_matrix_from_rpy(rpy), R, atol=1e-12)


@pytest.mark.parametrize("offset", [1e-3, 1e-6, 1e-8, 1e-9, 1e-10, 1e-12])
@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_near_gimbal_lock_round_trip(offset: float, sign: float) -> None:
    rpy_in = [0.7, sign * (math.pi / 2 - offset), -1.1]
    R = Rotation.from_euler("xyz", rpy_in).as_matrix()  # scipy as reference for the matrix
    np.testing.assert_allclose(rotation_matrix_from_rpy(rpy_from_rotation_matrix(R)), R, atol=1e-8)


@settings(derandomize=True, max_examples=200, deadline=500)
@given(roll=angles, pitch=st.floats(-math.pi / 2, math.pi / 2), yaw=angles)
def test_rpy_round_trip_property(roll: float, pitch: float, yaw: float) -> None:
    R = Rotation.from_euler("xyz", [roll, pitch, yaw]).as_matrix()
    np.testing.assert_allclose(rotation_matrix_from_rpy(rpy_from_rotation_matrix(R)), R, atol=1e-8)


# ---------------------------------------------------------------- quaternions


def test_quaternion_from_matrix_matches_scipy_scalar_first_canonical() -> None:
    q = quaternion_from_rotation_matrix(RANDOM.as_matrix())
    expected = wxyz(RANDOM.as_quat())
    expected = np.where(expected[:, :1] < 0, -expected, expected)  # canonical w >= 0
    np.testing.assert_allclose(q, expected, atol=1e-14)
    assert np.all(q[:, 0] >= 0.0)
    np.testing.assert_allclose(np.linalg.norm(q, axis=1), 1.0, atol=1e-15)


def test_quaternion_to_matrix_matches_scipy_and_antipodal() -> None:
    q = wxyz(RANDOM.as_quat())
    expected = RANDOM.as_matrix()
    np.testing.assert_allclose(rotation_matrix_from_quaternion(q), expected, atol=1e-15)
    # q and -q are the same rotation
    np.testing.assert_allclose(rotation_matrix_from_quaternion(-q), expected, atol=1e-15)
    # inputs are normalised first
    np.testing.assert_allclose(rotation_matrix_from_quaternion(3.5 * q), expected, atol=1e-15)


@pytest.mark.parametrize("angle", [math.pi, math.pi - 1e-9, math.pi - 1e-4, 1e-9, 0.0])
def test_quaternion_near_half_turn_and_zero(angle: float) -> None:
    axes = Rotation.random(50, random_state=SEED + 1).as_rotvec()
    axes /= np.linalg.norm(axes, axis=1, keepdims=True)
    rotations = Rotation.from_rotvec(axes * angle)
    R = rotations.as_matrix()
    q = quaternion_from_rotation_matrix(R)
    np.testing.assert_allclose(rotation_matrix_from_quaternion(q), R, atol=1e-14)
    expected = wxyz(rotations.as_quat())
    # same rotation: q = +-expected (at w = 0 both signs are canonical)
    sign = np.sign(np.sum(q * expected, axis=1, keepdims=True))
    np.testing.assert_allclose(q, sign * expected, atol=1e-12)


def test_zero_quaternion_is_refused() -> None:
    with pytest.raises(TransformError, match="quaternion: zero length"):
        rotation_matrix_from_quaternion([0.0, 0.0, 0.0, 0.0])


# ------------------------------------------------------------ rotation vectors


def test_rotation_vector_matches_scipy() -> None:
    v = rotation_vector_from_rotation_matrix(RANDOM.as_matrix())
    np.testing.assert_allclose(v, RANDOM.as_rotvec(), atol=1e-13)
    np.testing.assert_allclose(
        rotation_matrix_from_rotation_vector(v), RANDOM.as_matrix(), atol=1e-14
    )
    np.testing.assert_allclose(
        rotation_vector_from_rotation_matrix(RANDOM.as_matrix(), degrees=True), np.degrees(v)
    )
    np.testing.assert_allclose(
        rotation_matrix_from_rotation_vector(np.degrees(v), degrees=True),
        RANDOM.as_matrix(),
        atol=1e-14,
    )
    # angle in [0, pi]
    assert np.all(np.linalg.norm(v, axis=1) <= math.pi + 1e-15)


@pytest.mark.parametrize("angle", [math.pi, math.pi - 1e-9, math.pi - 1e-6, 1e-8, 1e-13, 0.0])
def test_rotation_vector_near_pi_and_zero(angle: float) -> None:
    axes = Rotation.random(50, random_state=SEED + 2).as_rotvec()
    axes /= np.linalg.norm(axes, axis=1, keepdims=True)
    R = Rotation.from_rotvec(axes * angle).as_matrix()
    v = rotation_vector_from_rotation_matrix(R)
    np.testing.assert_allclose(np.linalg.norm(v, axis=1), angle, atol=1e-9)
    # compare matrices (at angle = pi, v and -v are the same rotation)
    np.testing.assert_allclose(Rotation.from_rotvec(v).as_matrix(), R, atol=1e-12)
    np.testing.assert_allclose(rotation_matrix_from_rotation_vector(axes * angle), R, atol=1e-14)


def test_rotation_about_axis_matches_scipy() -> None:
    rng = np.random.default_rng(SEED)
    axes = rng.normal(size=(100, 3))
    axes /= np.linalg.norm(axes, axis=1, keepdims=True)
    angle = rng.uniform(-4, 4, 100)
    expected = Rotation.from_rotvec(axes * angle[:, None]).as_matrix()
    np.testing.assert_allclose(rotation_matrix_about_axis(axes, angle), expected, atol=1e-15)
    # broadcast: one axis, many angles
    np.testing.assert_allclose(
        rotation_matrix_about_axis([0.0, 0.0, 1.0], angle),
        Rotation.from_euler("z", angle[:, None]).as_matrix(),
        atol=1e-15,
    )


@pytest.mark.parametrize(
    ("rotation", "axis", "k"),
    [(rotation_matrix_about_z, "z", 2), (rotation_matrix_about_y, "y", 1)],
)
def test_elementary_rotation_matches_scipy_with_exact_zeros(
    rotation: Callable[[FloatArray], FloatArray], axis: str, k: int
) -> None:
    angle = np.random.default_rng(SEED).uniform(-4, 4, (20, 5))
    R = rotation(angle)
    assert R.shape == (20, 5, 3, 3)
    # scipy Rotation (reference library): elementary rotation about the axis
    expected = Rotation.from_euler(axis, angle.reshape(-1, 1)).as_matrix().reshape(20, 5, 3, 3)
    np.testing.assert_allclose(R, expected, atol=1e-15)
    # the axis's row and column are exactly its unit vector (closed form)
    others = [i for i in range(3) if i != k]
    assert np.all(R[..., k, others] == 0.0)
    assert np.all(R[..., others, k] == 0.0)
    assert np.all(R[..., k, k] == 1.0)


# --------------------------------------------------------------- transforms


def test_transform_building_inverting_and_applying() -> None:
    rng = np.random.default_rng(SEED)
    rpy = rng.uniform(-3, 3, (40, 3))
    p = rng.uniform(-1, 1, (40, 3))
    T = transform_from_position_rpy(p, rpy)
    assert T.shape == (40, 4, 4)
    np.testing.assert_allclose(
        T[:, :3, :3], Rotation.from_euler("xyz", rpy).as_matrix(), atol=1e-15
    )
    np.testing.assert_allclose(T[:, :3, 3], p)
    np.testing.assert_array_equal(T[:, 3], np.tile([0.0, 0.0, 0.0, 1.0], (40, 1)))
    np.testing.assert_allclose(invert_transform(T), np.linalg.inv(T), atol=1e-14)  # numpy inverse
    points = rng.uniform(-1, 1, (40, 3))
    expected = Rotation.from_euler("xyz", rpy).apply(points) + p  # scipy apply: R x, then + p
    np.testing.assert_allclose(transform_points(T, points), expected, atol=1e-15)
    # one transform, many points (broadcast)
    np.testing.assert_allclose(
        transform_points(T[0], points),
        Rotation.from_euler("xyz", rpy[0]).apply(points) + p[0],
        atol=1e-15,
    )
    same = transform_from_rotation_translation(T[:, :3, :3], p)
    np.testing.assert_array_equal(same, T)
    np.testing.assert_array_equal(check_transform(T), T)


def test_check_rotation_matrix_refuses_non_rotations() -> None:
    with pytest.raises(TransformError, match=r"not orthonormal"):
        check_rotation_matrix(np.diag([1.0, 1.0, 1.1]))
    with pytest.raises(TransformError, match=r"determinant is -1"):
        check_rotation_matrix(np.diag([1.0, 1.0, -1.0]))
    bad = np.eye(4)
    bad[3, 0] = 0.5
    with pytest.raises(TransformError, match=r"last row must be \[0, 0, 0, 1\]"):
        check_transform(bad)
    np.testing.assert_array_equal(check_rotation_matrix(RANDOM.as_matrix()), RANDOM.as_matrix())


@pytest.mark.parametrize(
    ("function", "value", "message"),
    [
        (rotation_matrix_from_rpy, np.zeros(2), r"rpy: expected shape \(\.\.\., 3\), got \(2,\)"),
        (
            rpy_from_rotation_matrix,
            np.zeros((3, 4)),
            r"rotation matrix: expected shape \(\.\.\., 3, 3\), got \(3, 4\)",
        ),
        (
            quaternion_from_rotation_matrix,
            np.zeros(9),
            r"rotation matrix: expected shape \(\.\.\., 3, 3\), got \(9,\)",
        ),
        (
            rotation_matrix_from_quaternion,
            np.zeros((5, 3)),
            r"quaternion: expected shape \(\.\.\., 4\), got \(5, 3\)",
        ),
        (
            rotation_matrix_from_rotation_vector,
            np.zeros((2, 2)),
            r"rotation vector: expected shape \(\.\.\., 3\), got \(2, 2\)",
        ),
        (check_transform, np.eye(3), r"transform: expected shape \(\.\.\., 4, 4\), got \(3, 3\)"),
        (rotation_matrix_from_rpy, [0.0, np.nan, 0.0], r"rpy: contains NaN or infinite values"),
        (rpy_from_rotation_matrix, np.full((3, 3), np.inf), r"rotation matrix: contains NaN"),
        (rotation_matrix_from_quaternion, [np.nan, 0, 0, 1], r"quaternion: contains NaN"),
        (rotation_matrix_from_rotation_vector, [0, 0, np.nan], r"rotation vector: contains NaN"),
    ],
)
def test_invalid_inputs_name_expected_and_actual(function, value, message: str) -> None:
    with pytest.raises(TransformError, match=message):
        function(value)
