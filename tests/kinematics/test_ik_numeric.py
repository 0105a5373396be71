"""Tests of posebridge.kinematics.ik.numeric (multi-start Levenberg-Marquardt IK)."""

from __future__ import annotations

import math

import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.spatial.transform import Rotation

from posebridge.kinematics.fk import KinematicsInputError, fk_tool
from posebridge.kinematics.ik.analytic.ortho_parallel import solve_ortho_parallel
from posebridge.kinematics.ik.analytic.ortho_parallel_geometry import OrthoParallelGeometry
from posebridge.kinematics.ik.numeric import DISTINCT_TOLERANCE, solve_ik_numeric
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS, REASON_OUT_OF_REACH
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml
from posebridge.robot.urdf_import import load_robot_urdf

TOLERANCE_M = 1e-6
TOLERANCE_RAD = 1e-6
SLACK = 1e-12  # rounding between the solver's FK and the checking FK

PLANAR_2R_1M = """
schema_version = 1
[robot]
name = "test-planar-1m"
kind = "planar_2r"
convention = "origin_axis"

[[joint]]
name = "j1"
type = "revolute"
continuous = {continuous}
origin = {{ xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ {j1_limits}velocity_deg_s = 90, acceleration_deg_s2 = 360 }}

[[joint]]
name = "j2"
type = "revolute"
origin = {{ xyz_mm = [1000, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = {j2_min}, max_deg = 150, velocity_deg_s = 90, acceleration_deg_s2 = 360 }}

[flange]
xyz_mm = [1000, 0, 0]
rpy_deg = [0, 0, 0]
"""


def planar_2r(*, continuous_j1: bool = False, j2_min_deg: float = -150.0) -> Robot:
    text = PLANAR_2R_1M.format(
        continuous="true" if continuous_j1 else "false",
        j1_limits="" if continuous_j1 else "min_deg = -180, max_deg = 180, ",
        j2_min=j2_min_deg,
    )
    return parse_robot_toml(text)


def planar_2r_pose(theta1: float, theta2: float) -> np.ndarray:
    """Closed form of the 1 m / 1 m planar 2R: p = l1 (c1, s1) + l2 (c12, s12), R = Rz(theta1 + theta2)."""
    T = np.eye(4)
    T[:3, :3] = Rotation.from_euler("z", theta1 + theta2).as_matrix()
    T[0, 3] = math.cos(theta1) + math.cos(theta1 + theta2)
    T[1, 3] = math.sin(theta1) + math.sin(theta1 + theta2)
    return T[None]


def assert_reaches(T_reached: np.ndarray, T_target: np.ndarray) -> None:
    """Position error (Euclidean) and orientation error (angle of R_target R^T, scipy) within tolerance."""
    position_error = np.linalg.norm(T_reached[:, :3, 3] - T_target[:, :3, 3], axis=1)
    R_error = T_target[:, :3, :3] @ np.swapaxes(T_reached[:, :3, :3], 1, 2)
    angle = Rotation.from_matrix(R_error).magnitude()  # reference: scipy Rotation
    assert np.all(position_error <= TOLERANCE_M + SLACK), position_error.max()
    assert np.all(angle <= TOLERANCE_RAD + SLACK), angle.max()


def in_limit_configurations(robot: Robot, fractions: np.ndarray) -> np.ndarray:
    return robot.lower + fractions * (robot.upper - robot.lower)


ROBOTS = {name: load_robot(name) for name in ("pb-arm6-offset", "pb-arm7")}


@pytest.mark.parametrize("name", sorted(ROBOTS))
@settings(derandomize=True, deadline=None, max_examples=12)
@given(fractions=arrays(np.float64, (6, 7), elements=st.floats(0.0, 1.0)))
def test_reaches_random_reachable_poses(name: str, fractions: np.ndarray) -> None:
    robot = ROBOTS[name]
    q = in_limit_configurations(robot, fractions[:, : robot.dof])
    targets = fk_tool(robot, q)
    result = solve_ik_numeric(robot, targets, max_solutions=1)
    assert result.valid[:, 0].all(), result.reason
    assert result.within_limits[:, 0].all()
    # reference: posebridge forward kinematics of the returned joints, scipy for the angle
    assert_reaches(fk_tool(robot, result.q[:, 0]), targets)


def test_custom_tool_is_reached() -> None:
    robot = ROBOTS["pb-arm7"]
    tool = np.eye(4)
    tool[:3, :3] = Rotation.from_euler("xyz", [0.3, -0.2, 0.5]).as_matrix()
    tool[:3, 3] = [0.05, -0.02, 0.15]
    rng = np.random.default_rng(12)
    q = rng.uniform(robot.lower, robot.upper, size=(5, robot.dof))
    targets = fk_tool(robot, q, tool)
    result = solve_ik_numeric(robot, targets, T_flange_tool=tool, max_solutions=1)
    assert result.valid[:, 0].all(), result.reason
    # reference: posebridge forward kinematics with the same tool, scipy for the angle
    assert_reaches(fk_tool(robot, result.q[:, 0], tool), targets)


URDF_PATH = data_folder("robots") / "pb-arm6-offset.urdf"


@settings(derandomize=True, deadline=None, max_examples=10)
@given(fractions=arrays(np.float64, (4, 6), elements=st.floats(0.0, 1.0)))
def test_solutions_checked_with_pinocchio(fractions: np.ndarray) -> None:
    robot = load_robot_urdf(URDF_PATH, to_link="flange")
    model = pin.buildModelFromXML(URDF_PATH.read_text(encoding="utf-8"))
    data = model.createData()
    flange = model.getFrameId("flange")

    def pin_flange(q: np.ndarray) -> np.ndarray:
        pin.framesForwardKinematics(model, data, q)
        return data.oMf[flange].homogeneous.copy()

    q = in_limit_configurations(robot, fractions)
    targets = np.stack([pin_flange(row) for row in q])  # reference: pinocchio FK
    result = solve_ik_numeric(robot, targets, T_flange_tool=np.eye(4), max_solutions=1)
    assert result.valid[:, 0].all(), result.reason
    # reference: pinocchio forward kinematics of the returned joints
    assert_reaches(np.stack([pin_flange(row) for row in result.q[:, 0]]), targets)


@pytest.mark.parametrize("name", sorted(ROBOTS))
def test_all_solutions_distinct_within_limits_and_reaching(name: str) -> None:
    robot = ROBOTS[name]
    rng = np.random.default_rng(3)
    q = rng.uniform(robot.lower, robot.upper, size=(3, robot.dof))
    targets = fk_tool(robot, q)
    result = solve_ik_numeric(robot, targets, max_solutions=8, restarts=60)
    revolute = ~robot.prismatic
    for i in range(targets.shape[0]):
        slots = result.valid_solutions(i)
        assert slots, result.reason[i]
        solutions = result.q[i, slots]
        # reference: posebridge forward kinematics of every returned solution
        assert_reaches(fk_tool(robot, solutions), np.repeat(targets[i : i + 1], len(slots), 0))
        for a in range(len(slots)):
            for b in range(a):
                d = solutions[a] - solutions[b]
                # closed form: joint difference wrapped to [-pi, pi) for revolute joints
                d = np.where(revolute, (d + math.pi) % (2 * math.pi) - math.pi, d)
                assert np.abs(d).max() > DISTINCT_TOLERANCE
        flagged = result.within_limits[i, slots]
        inside = np.all((solutions >= robot.lower) & (solutions <= robot.upper), axis=1)
        # closed form: lower <= q <= upper for every joint
        np.testing.assert_array_equal(flagged, inside)
        assert flagged.all()


def test_all_solutions_match_the_closed_form_of_the_ortho_parallel_arm() -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(4)
    targets = fk_tool(robot, rng.uniform(robot.lower, robot.upper, size=(8, 6)))
    geometry = OrthoParallelGeometry.from_robot(robot)
    # reference: closed-form IK of ortho-parallel arms with a spherical wrist (Brandstötter,
    # Angerer, Hofbaur 2014), posebridge's analytic solver, a different method and code
    analytic = solve_ortho_parallel(robot, geometry, targets)
    numeric = solve_ik_numeric(robot, targets)

    def same_modulo_revolutions(a: np.ndarray, b: np.ndarray) -> bool:
        d = (a - b + math.pi) % (2 * math.pi) - math.pi
        return bool(np.abs(d).max() < 1e-4)

    for i in range(targets.shape[0]):
        expected = analytic.q[i, analytic.valid[i] & analytic.within_limits[i]]
        found = numeric.q[i, numeric.valid[i]]
        assert len(found) == len(expected)
        for solution in found:
            assert any(same_modulo_revolutions(solution, other) for other in expected)


def test_unreachable_pose_has_no_valid_slot_and_a_reason() -> None:
    robot = ROBOTS["pb-arm6-offset"]
    target = np.eye(4)[None].copy()
    target[0, :3, 3] = [10.0, 0.0, 0.0]
    # closed form (triangle inequality): the TCP is never farther from the base origin than
    # the sum of the lengths of all joint offsets and the tool
    reach_bound = sum(np.linalg.norm(j.origin[:3, 3]) for j in robot.joints) + np.linalg.norm(
        robot.T_link_tool[:3, 3]
    )
    assert reach_bound < 10.0
    result = solve_ik_numeric(robot, target, restarts=5)
    assert not result.valid.any()
    assert np.isnan(result.q).all()
    assert result.reason[0].startswith(REASON_OUT_OF_REACH)


def test_planar_2r_reference_pose() -> None:
    robot = planar_2r()
    # closed form: L1 = L2 = 1, target (0.366, 1.366) = (cos 30 + cos 120, sin 30 + sin 120) -> (30 deg, 90 deg); the
    # orientation Rz(120 deg) excludes the other elbow branch (120 deg, -90 deg), whose
    # flange points along 30 deg
    target = planar_2r_pose(math.radians(30.0), math.radians(90.0))
    np.testing.assert_allclose(target[0, :2, 3], [0.366, 1.366], atol=1e-3)
    result = solve_ik_numeric(robot, target, seed=[0.0, 0.5])
    slots = result.valid_solutions(0)
    assert len(slots) == 1
    np.testing.assert_allclose(result.q[0, slots[0]], np.radians([30.0, 90.0]), atol=1e-5)


def test_limits_enforced_or_flagged() -> None:
    robot = planar_2r(j2_min_deg=0.0)
    # closed form: position and orientation fix the planar 2R solution uniquely; at
    # (30 deg, -90 deg) joint 2 is below its 0 deg limit
    target = planar_2r_pose(math.radians(30.0), math.radians(-90.0))
    enforced = solve_ik_numeric(robot, target, restarts=10)
    assert not enforced.valid.any()
    free = solve_ik_numeric(robot, target, restarts=10, enforce_limits=False)
    slots = free.valid_solutions(0)
    assert len(slots) == 1
    np.testing.assert_allclose(free.q[0, slots[0]], np.radians([30.0, -90.0]), atol=1e-5)
    assert not free.within_limits[0, slots[0]]
    assert free.reason[0] == REASON_NO_WITHIN_LIMITS


def test_continuous_joint_is_not_clamped() -> None:
    robot = planar_2r(continuous_j1=True)
    theta1, theta2 = 3.0, 1.2
    target = planar_2r_pose(theta1, theta2)
    result = solve_ik_numeric(robot, target, seed=[-3.0, 1.0], max_solutions=1)
    assert result.valid[0, 0]
    # closed form (planar 2R, unique by orientation); joint 1 compared modulo 2 pi
    expected = np.array([theta1, theta2])
    d = result.q[0, 0] - expected
    np.testing.assert_allclose((d + math.pi) % (2 * math.pi) - math.pi, 0.0, atol=1e-5)


def test_seed_near_a_solution_returns_that_solution() -> None:
    robot = ROBOTS["pb-arm6-offset"]
    q = np.array([[0.3, 0.4, -0.6, 0.5, 0.8, 0.7]])
    # common practice, no source: Gauss-Newton-type iterations converge to the solution
    # nearest a close enough start (local convergence)
    result = solve_ik_numeric(robot, fk_tool(robot, q), seed=q[0] + 0.02, max_solutions=1)
    np.testing.assert_allclose(result.q[0, 0], q[0], atol=1e-5)


def test_batch_gives_the_same_as_single_poses() -> None:
    robot = ROBOTS["pb-arm7"]
    rng = np.random.default_rng(9)
    targets = fk_tool(robot, rng.uniform(robot.lower, robot.upper, size=(20, robot.dof)))
    batch = solve_ik_numeric(robot, targets, max_solutions=1)
    # common practice, no source: one pose's result does not depend on the rest of the batch
    for i in (0, 7, 19):
        single = solve_ik_numeric(robot, targets[i : i + 1], max_solutions=1)
        np.testing.assert_array_equal(single.q[0], batch.q[i])


def test_rejects_bad_input() -> None:
    robot = ROBOTS["pb-arm6-offset"]
    target = fk_tool(robot, np.zeros((1, 6)))
    with pytest.raises(KinematicsInputError, match=r"target poses: expected shape \(N, 4, 4\)"):
        solve_ik_numeric(robot, target[0])
    with pytest.raises(KinematicsInputError, match=r"max_solutions: expected an integer >= 1"):
        solve_ik_numeric(robot, target, max_solutions=0)
    with pytest.raises(KinematicsInputError, match=r"position_tolerance_m: expected a positive"):
        solve_ik_numeric(robot, target, position_tolerance_m=-1.0)
    with pytest.raises(KinematicsInputError, match=r"seed: expected shape"):
        solve_ik_numeric(robot, target, seed=np.zeros(5))
    with pytest.raises(KinematicsInputError, match=r"T_flange_tool: .*expected shape"):
        solve_ik_numeric(robot, target, T_flange_tool=np.eye(3))
