"""Tests of posebridge.kinematics.metrics (manipulability, conditioning, limit margins)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.kinematics.fk import KinematicsInputError
from posebridge.kinematics.metrics import (
    inverse_condition,
    inverse_condition_number,
    jacobian_rows,
    limit_margins,
    manipulability,
    manipulability_yoshikawa,
)
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml

MIXED_CHAIN = """
schema_version = 1
[robot]
name = "test-mixed"
kind = "test"
convention = "origin_axis"

[[joint]]
name = "turntable"
type = "revolute"
continuous = true
origin = { xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { velocity_deg_s = 90, acceleration_deg_s2 = 360 }

[[joint]]
name = "lift"
type = "prismatic"
origin = { xyz_mm = [0, 0, 100], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_mm = 0, max_mm = 500, velocity_mm_s = 200, acceleration_mm_s2 = 1000 }

[[joint]]
name = "swing"
type = "revolute"
origin = { xyz_mm = [200, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_deg = -90, max_deg = 45, velocity_deg_s = 90, acceleration_deg_s2 = 360 }
"""

ALL_CONTINUOUS = """
schema_version = 1
[robot]
name = "test-spinner"
kind = "test"
convention = "origin_axis"

[[joint]]
name = "spin"
type = "revolute"
continuous = true
origin = { xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { velocity_deg_s = 90, acceleration_deg_s2 = 360 }

[flange]
xyz_mm = [300, 0, 0]
rpy_deg = [0, 0, 0]
"""


def test_manipulability_planar_2r_reference_value(unit_planar_2r: Robot) -> None:
    robot = unit_planar_2r
    q = np.array([[0.4, math.radians(30.0)]])
    w = manipulability(robot, q, part="position")
    # Yoshikawa (1985), Manipulability of robotic mechanisms: planar 2R, l1 = l2 = 1, theta2 = 30 deg -> w = 0.5
    assert w == pytest.approx([0.5], abs=1e-12)


@settings(derandomize=True, deadline=None, max_examples=40)
@given(
    theta1=st.floats(-math.pi, math.pi),
    theta2=st.floats(-math.pi, math.pi),
)
def test_manipulability_planar_2r_closed_form(theta1: float, theta2: float) -> None:
    robot = load_robot("pb-planar2r")
    w = manipulability(robot, [[theta1, theta2]], part="position")
    # closed form (Yoshikawa 1985): w = l1 * l2 * |sin(theta2)|, l1 = 0.4 m, l2 = 0.3 m
    assert w[0] == pytest.approx(0.4 * 0.3 * abs(math.sin(theta2)), abs=1e-12)


@pytest.mark.parametrize("shape", [(6, 6), (6, 7), (3, 7), (3, 2), (6, 2)])
def test_manipulability_equals_product_of_singular_values(shape: tuple[int, int]) -> None:
    rng = np.random.default_rng(7)
    J = rng.normal(size=(25, *shape))
    w = manipulability_yoshikawa(J)
    # reference: numpy SVD, w = prod(sigma_i) over the min(m, n) singular values (Yoshikawa 1985)
    expected = np.prod(np.linalg.svd(J, compute_uv=False), axis=1)
    np.testing.assert_allclose(w, expected, rtol=1e-9)


def test_manipulability_is_zero_at_singular_jacobian() -> None:
    J = np.zeros((1, 6, 6))
    J[0, :, :5] = np.eye(6)[:, :5]
    J[0, :, 5] = J[0, :, 4]  # two equal columns: rank 5
    # closed form: det(J J^T) = 0 for a rank-deficient J
    assert manipulability_yoshikawa(J) == pytest.approx([0.0], abs=1e-12)


@pytest.mark.parametrize("shape", [(6, 6), (6, 7), (3, 2), (6, 2)])
def test_inverse_condition_number_matches_numpy_cond(shape: tuple[int, int]) -> None:
    rng = np.random.default_rng(11)
    J = rng.normal(size=(25, *shape))
    # reference: numpy.linalg.cond (2-norm condition number sigma_max / sigma_min)
    np.testing.assert_allclose(inverse_condition_number(J), 1.0 / np.linalg.cond(J), rtol=1e-9)


def test_inverse_condition_number_of_zero_jacobian_is_zero() -> None:
    # common practice, no source: an all-zero Jacobian is treated as fully singular
    assert inverse_condition_number(np.zeros((1, 6, 3))) == pytest.approx([0.0])


def test_inverse_condition_planar_2r_closed_form(unit_planar_2r: Robot) -> None:
    robot = unit_planar_2r
    theta2 = np.radians([30.0, 90.0, 150.0])
    q = np.stack([np.zeros(3), theta2], axis=1)
    J_xy = jacobian_rows(
        np.stack(
            [
                # closed form (Lynch & Park, Modern Robotics, sec. 5.1.1): planar 2R Jacobian
                # [[-l1 s1 - l2 s12, -l2 s12], [l1 c1 + l2 c12, l2 c12]] at theta1 = 0
                np.array(
                    [
                        [-np.sin(t), -np.sin(t)],
                        [1.0 + np.cos(t), np.cos(t)],
                        [0.0, 0.0],
                        [0.0, 0.0],
                        [0.0, 0.0],
                        [1.0, 1.0],
                    ]
                )
                for t in theta2
            ]
        ),
        "position",
    )
    expected = 1.0 / np.linalg.cond(J_xy)  # reference: numpy.linalg.cond of the closed form
    np.testing.assert_allclose(inverse_condition(robot, q, part="position"), expected, rtol=1e-9)


def test_jacobian_rows_rejects_bad_input() -> None:
    with pytest.raises(KinematicsInputError, match=r"expected 6 rows"):
        jacobian_rows(np.zeros((1, 3, 2)), "full")
    with pytest.raises(KinematicsInputError, match=r"part: expected one of"):
        jacobian_rows(np.zeros((1, 6, 2)), "linear")  # type: ignore[arg-type]
    with pytest.raises(KinematicsInputError, match=r"expected shape \(N, m, n\)"):
        manipulability_yoshikawa(np.zeros((6, 6)))


def test_limit_margins_closed_form() -> None:
    robot = parse_robot_toml(MIXED_CHAIN)
    q = np.array(
        [
            [2.0, 0.1, math.radians(30.0)],
            [-1.0, 0.45, math.radians(-100.0)],
        ]
    )
    margins = limit_margins(robot, q)
    # closed form: to_lower = q - lower, to_upper = upper - q, margin = min of both,
    # fraction = margin / (upper - lower); continuous joints -> inf
    swing_low, swing_high = math.radians(-90.0), math.radians(45.0)
    expected_to_lower = np.array(
        [[np.inf, 0.1, math.radians(120.0)], [np.inf, 0.45, math.radians(-10.0)]]
    )
    expected_to_upper = np.array(
        [[np.inf, 0.4, math.radians(15.0)], [np.inf, 0.05, math.radians(145.0)]]
    )
    np.testing.assert_allclose(margins.to_lower, expected_to_lower, atol=1e-12)
    np.testing.assert_allclose(margins.to_upper, expected_to_upper, atol=1e-12)
    np.testing.assert_allclose(
        margins.margin, np.minimum(expected_to_lower, expected_to_upper), atol=1e-12
    )
    expected_fraction = np.array(
        [
            [np.inf, 0.1 / 0.5, math.radians(15.0) / (swing_high - swing_low)],
            [np.inf, 0.05 / 0.5, math.radians(-10.0) / (swing_high - swing_low)],
        ]
    )
    np.testing.assert_allclose(margins.fraction, expected_fraction, atol=1e-12)
    # row 0: swing 15/135 = 0.111 < lift 0.2; row 1: swing is 10 deg beyond its lower limit
    np.testing.assert_array_equal(margins.min_joint, [2, 2])
    np.testing.assert_allclose(margins.min_margin, [math.radians(15.0), math.radians(-10.0)])
    np.testing.assert_allclose(margins.min_fraction, expected_fraction[:, 2])


def test_limit_margins_all_continuous_joints() -> None:
    robot = parse_robot_toml(ALL_CONTINUOUS)
    margins = limit_margins(robot, [[0.3], [-7.0]])
    # common practice, no source: a joint without limits has an infinite margin
    assert np.all(np.isinf(margins.margin))
    np.testing.assert_array_equal(margins.min_joint, [-1, -1])
    assert np.all(np.isinf(margins.min_fraction))
    assert np.all(np.isinf(margins.min_margin))


def test_limit_margins_at_mid_range_is_half() -> None:
    robot = load_robot("pb-arm6-offset")
    margins = limit_margins(robot, robot.mid_configuration()[None, :])
    # closed form: at (lower + upper) / 2 the nearer limit is half the range away
    np.testing.assert_allclose(margins.fraction, 0.5, atol=1e-12)
    np.testing.assert_allclose(margins.margin[0], 0.5 * (robot.upper - robot.lower), atol=1e-12)


def test_full_measure_falls_at_the_wrist_singularity_the_position_part_does_not() -> None:
    from posebridge.kinematics.jacobian import jacobian_base
    from posebridge.kinematics.metrics import (
        characteristic_length_m,
        manipulability_scaled_full,
    )

    robot = load_robot("pb-arm6")
    # pb-arm6's wrist is straight at j5 = 0 (j4 and j6 both turn about x in robots/pb-arm6.toml)
    q = np.radians([[0.0, 30.0, -20.0, 0.0, 0.0, 0.0], [0.0, 30.0, -20.0, 0.0, 30.0, 0.0]])
    J = jacobian_base(robot, q)
    length = characteristic_length_m(robot)
    full = manipulability_scaled_full(J, length)
    position = manipulability_yoshikawa(J[:, :3, :])
    # closed form: with axes 4 and 6 parallel the Jacobian loses rank (Siciliano et al.,
    # Robotics, sec. 3.3), so det(J J^T) = 0; the translational rows keep full rank
    assert full[0] == pytest.approx(0.0, abs=1e-12)
    assert full[1] > 1e-6
    assert position[0] > 1e-6
    # numpy (reference): the scaled measure is sqrt(det(Js Js^T)) with rows 0..2 divided by L
    scaled = J[1].copy()
    scaled[:3] /= length
    assert full[1] == pytest.approx(math.sqrt(np.linalg.det(scaled @ scaled.T)), rel=1e-9)
    with pytest.raises(KinematicsInputError, match="expected 6 rows"):
        manipulability_scaled_full(J[:, :3, :], length)
