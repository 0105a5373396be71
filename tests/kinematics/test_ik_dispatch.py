"""Tests of posebridge.kinematics.ik (solver choice and the public solve_ik_all).

References: forward kinematics (posebridge.kinematics.fk) of the returned
solutions, the robot files for which family each bundled arm belongs to, and the
serial IK driver for the parallel one.
"""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.kinematics.fk import KinematicsInputError, fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.kinematics.ik.finishing import BLOCK_SIZE, PARALLEL_POSES
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot
from posebridge.transforms import rotation_matrix_from_rpy

FAMILIES = {
    "pb-arm6": "ortho_parallel",  # robot file: ortho-parallel basis, spherical wrist
    "pb-arm6-offset": "numeric",  # robot file: 70 mm wrist offset, no closed form
    "pb-arm7": "numeric",  # seven axes, redundant
    "pb-planar2r": "planar",
    "pb-planar3r": "planar",
    "pb-scara4": "scara",
    "pb-gantry3": "gantry",
}


@pytest.mark.parametrize("name", sorted(FAMILIES))
def test_family_of_each_bundled_robot(name: str) -> None:
    assert ik_solver(load_robot(name)).family == FAMILIES[name]


def test_urdf_arm_uses_the_closed_form() -> None:
    path = data_folder("robots") / "pb-arm6.urdf"
    # the same arm as pb-arm6.toml, so the same family
    assert ik_solver(load_robot(path)).family == "ortho_parallel"


def test_offset_wrist_arm_uses_its_closed_form(offset_wrist_arm) -> None:
    arm = offset_wrist_arm(np.random.default_rng(3), mounted=True)
    # generated geometry (tests/kinematics/conftest.py): joints 2, 3, 4 parallel, axis 6
    # meeting axis 5 away from axis 4
    assert ik_solver(arm.robot).family == "offset_wrist"
    q = np.random.default_rng(4).uniform(-np.pi, np.pi, size=(20, 6))
    targets = fk_tool(arm.robot, q)
    result = solve_ik_all(arm.robot, targets)
    assert result.method.startswith("analytic: offset wrist")
    rows, slots = np.nonzero(result.valid)
    assert set(rows.tolist()) == set(range(20))
    # reference: forward kinematics of the returned solutions
    np.testing.assert_allclose(fk_tool(arm.robot, result.q[rows, slots]), targets[rows], atol=1e-9)


@pytest.mark.parametrize("name", ["pb-arm6", "pb-planar3r", "pb-scara4", "pb-gantry3"])
def test_solutions_reach_the_targets_with_a_tool(name: str) -> None:
    robot = load_robot(name)
    tool = np.eye(4)
    tool[:3, :3] = rotation_matrix_from_rpy([0.0, 0.0, 0.4])
    tool[:3, 3] = [0.03, 0.01, 0.05]
    q = np.random.default_rng(9).uniform(robot.lower, robot.upper, size=(50, robot.dof))
    targets = fk_tool(robot, q, tool)
    result = solve_ik_all(robot, targets, T_flange_tool=tool, seed=q[0])
    rows, slots = np.nonzero(result.valid)
    assert set(rows.tolist()) == set(range(50))
    # reference: forward kinematics with the same tool (targets come from FK, so every
    # component, controlled or not, is reachable)
    np.testing.assert_allclose(
        fk_tool(robot, result.q[rows, slots], tool), targets[rows], atol=1e-8
    )


@pytest.mark.parametrize("name", ["pb-arm6", "offset", "pb-planar3r"])
def test_prepared_solve_matches_solve_ik_all(name: str, offset_wrist_arm) -> None:
    robot = (
        offset_wrist_arm(np.random.default_rng(3), mounted=True).robot
        if name == "offset"
        else load_robot(name)
    )
    tool = np.eye(4)
    tool[:3, 3] = [0.02, -0.01, 0.06]
    solve = ik_solver(robot).prepare(T_flange_tool=tool)
    rng = np.random.default_rng(5)
    for size in (3, 40):  # several batches through one preparation
        q = rng.uniform(robot.lower, robot.upper, size=(size, robot.dof))
        targets = fk_tool(robot, q, tool)
        targets[0, :3, 3] += 10.0  # out of reach: a reason text
        prepared = solve(targets)
        # reference: the unprepared solve_ik_all of the same poses, run here
        plain = solve_ik_all(robot, targets, T_flange_tool=tool)
        np.testing.assert_array_equal(prepared.q, plain.q)
        np.testing.assert_array_equal(prepared.valid, plain.valid)
        np.testing.assert_array_equal(prepared.within_limits, plain.within_limits)
        assert prepared.reason == plain.reason
        assert prepared.reason[0] != ""
        rows, slots = np.nonzero(prepared.valid)
        assert set(rows.tolist()) == set(range(1, size))
        # reference: forward kinematics with the same tool
        np.testing.assert_allclose(
            fk_tool(robot, prepared.q[rows, slots], tool), targets[rows], atol=1e-8
        )


def test_preparation_is_kept_per_tool() -> None:
    robot = load_robot("pb-arm6")
    tool = np.eye(4)
    tool[:3, 3] = [0.02, -0.01, 0.06]
    solve = ik_solver(robot).prepare(T_flange_tool=tool)
    assert ik_solver(robot).prepare(T_flange_tool=tool.copy()) is solve
    assert ik_solver(robot).prepare(T_flange_tool=tool.tolist()) is solve
    other = tool.copy()
    other[2, 3] = 0.1
    moved = ik_solver(robot).prepare(T_flange_tool=other)
    assert moved is not solve
    q = np.random.default_rng(8).uniform(robot.lower, robot.upper, size=(20, robot.dof))
    targets = fk_tool(robot, q, other)
    # reference: the unprepared solve_ik_all with the second tool, run here
    np.testing.assert_array_equal(
        moved(targets).q, solve_ik_all(robot, targets, T_flange_tool=other).q
    )


def test_numeric_fallback_for_the_offset_wrist() -> None:
    robot = load_robot("pb-arm6-offset")
    q = np.array([[0.1, 0.2, -0.3, 0.4, 0.5, 0.6]])
    target = fk_tool(robot, q)
    result = solve_ik_all(robot, target)
    assert result.method.startswith("numerical")
    m = result.valid_solutions(0)[0]
    # reference: forward kinematics of the numerical solution
    np.testing.assert_allclose(fk_tool(robot, result.q[0, m][None])[0], target[0], atol=1e-6)


def test_single_pose_is_the_batch_of_one() -> None:
    robot = load_robot("pb-arm6")
    q = np.random.default_rng(1).uniform(robot.lower, robot.upper, size=(5, 6))
    targets = fk_tool(robot, q)
    batch = solve_ik_all(robot, targets)
    for i in range(5):
        single = solve_ik_all(robot, targets[i : i + 1])
        # the same kernel on one row: identical slots
        np.testing.assert_array_equal(single.q[0], batch.q[i])
        assert single.reason[0] == batch.reason[i]


def test_seed_per_pose() -> None:
    robot = load_robot("pb-arm6")
    q = np.random.default_rng(2).uniform(robot.lower, robot.upper, size=(20, 6))
    result = solve_ik_all(robot, fk_tool(robot, q), seed=q)
    # closed form: each generating configuration is its own nearest solution
    np.testing.assert_allclose(result.q[:, 0], q, atol=1e-9)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"seed": np.zeros(5)}, r"seed: expected shape \(6,\) or \(3, 6\)"),
        ({"seed": np.zeros((2, 6))}, r"seed: expected shape"),
        ({"position_tolerance_m": 0.0}, "position_tolerance_m: expected a positive"),
        ({"orientation_tolerance_rad": float("nan")}, "orientation_tolerance_rad"),
        ({"T_flange_tool": np.zeros((3, 3))}, "T_flange_tool"),
    ],
)
def test_bad_arguments_are_refused(kwargs: dict, message: str) -> None:
    robot = load_robot("pb-arm6")
    targets = fk_tool(robot, np.zeros((3, 6)))
    with pytest.raises(KinematicsInputError, match=message):
        solve_ik_all(robot, targets, **kwargs)


@pytest.mark.parametrize(
    ("targets", "message"),
    [
        (np.zeros((2, 3, 3)), r"target poses: expected shape \(N, 4, 4\)"),
        (np.full((1, 4, 4), np.nan), "NaN or infinite"),
        (np.diag([2.0, 1.0, 1.0, 1.0])[None], "not orthonormal"),
        (np.diag([-1.0, 1.0, 1.0, 1.0])[None], "determinant -1"),
    ],
)
def test_bad_targets_are_refused(targets: np.ndarray, message: str) -> None:
    with pytest.raises(KinematicsInputError, match=message):
        solve_ik_all(load_robot("pb-arm6"), targets)


@pytest.mark.parametrize("name", ["pb-arm6", "pb-scara4"])
def test_parallel_driver_equals_serial_blocks(name: str) -> None:
    robot = load_robot(name)
    q = np.random.default_rng(8).uniform(robot.lower, robot.upper, (3 * BLOCK_SIZE + 5, robot.dof))
    targets = fk_tool(robot, q)
    together = solve_ik_all(robot, targets)  # at least PARALLEL_POSES: the parallel driver
    assert len(targets) >= PARALLEL_POSES
    pieces = [
        solve_ik_all(robot, targets[i : i + BLOCK_SIZE]) for i in range(0, len(q), BLOCK_SIZE)
    ]
    # reference: the same poses one block at a time (the serial driver); each pose is solved
    # alone, so bit for bit the same
    for field in ("q", "valid", "within_limits", "shoulder", "elbow", "wrist", "revolutions"):
        joined = np.concatenate([getattr(p, field) for p in pieces])
        assert np.array_equal(getattr(together, field), joined, equal_nan=field == "q")
    assert together.reason == tuple(r for p in pieces for r in p.reason)
