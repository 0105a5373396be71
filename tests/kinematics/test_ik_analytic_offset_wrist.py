"""Tests of posebridge.kinematics.ik.analytic.offset_wrist (closed-form IK, joints 2-4 parallel).

Robots: invented arms of the family generated as URDF text with random link
lengths, offsets, joint frames and axis signs (the ``offset_wrist_arm``
fixture of conftest.py). References: pinocchio forward kinematics of the same
URDF text, the numerical solver (posebridge.kinematics.ik.numeric, an
independent method), the generated geometry, scipy (rotations, root finding)
and closed forms written beside the checks.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import brentq
from scipy.spatial.transform import Rotation

from posebridge.kinematics.branches import label_branches
from posebridge.kinematics.fk import fk_flange
from posebridge.kinematics.ik import ik_solver
from posebridge.kinematics.ik.analytic.offset_wrist import (
    METHOD,
    OffsetWristGeometry,
    solve_offset_wrist,
)
from posebridge.kinematics.ik.analytic.ortho_parallel_geometry import OrthoParallelGeometry
from posebridge.kinematics.ik.numeric import DISTINCT_TOLERANCE, solve_ik_numeric
from posebridge.kinematics.ik.solutions import (
    REASON_NO_WITHIN_LIMITS,
    REASON_ORIENTATION,
    REASON_OUT_OF_REACH,
    IkSolutions,
)
from posebridge.kinematics.singularity import classify_singularity
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot

FK_MATCH = 1e-9  # every returned solution reproduces its pose to this (m, rotation entries)
EIGHT_LABELS = {(s, e, w) for s in (1, -1) for e in (1, -1) for w in (1, -1)}


def pin_flange(urdf: str) -> Callable[[np.ndarray], np.ndarray]:
    """Flange poses by pinocchio from URDF text, (N, 6) -> (N, 4, 4)."""
    model = pin.buildModelFromXML(urdf)
    data = model.createData()
    flange = model.getFrameId("flange")

    def fk(q: np.ndarray) -> np.ndarray:
        poses = []
        for row in np.atleast_2d(q):
            pin.framesForwardKinematics(model, data, row)
            poses.append(data.oMf[flange].homogeneous.copy())
        return np.array(poses)

    return fk


def solve(arm, targets: np.ndarray, **kwargs) -> IkSolutions:
    geometry = OffsetWristGeometry.from_robot(arm.robot)
    assert geometry is not None
    return solve_offset_wrist(arm.robot, geometry, targets, T_flange_tool=np.eye(4), **kwargs)


def same_modulo_revolutions(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Largest joint difference modulo 2 pi, shape of the batch."""
    d = a - b
    return np.abs(d - 2.0 * np.pi * np.round(d / (2.0 * np.pi))).max(axis=-1)


def assert_reach_by_pinocchio(arm, result, targets: np.ndarray) -> None:
    rows, slots = np.nonzero(result.valid)
    # reference: pinocchio FK of every returned solution on the same URDF text
    reached = pin_flange(arm.urdf)(result.q[rows, slots])
    assert np.abs(reached - targets[rows]).max() < FK_MATCH


def rotation_taking(vector: np.ndarray, onto: np.ndarray, turn: float) -> np.ndarray:
    """A rotation taking unit ``vector`` onto unit ``onto``, then turned by ``turn`` about ``onto``."""
    align, _ = Rotation.align_vectors([onto], [vector])  # reference: scipy
    return (Rotation.from_rotvec(turn * np.asarray(onto)) * align).as_matrix()


@pytest.fixture(scope="module")
def arms(offset_wrist_arm) -> dict:
    return {
        "plain": offset_wrist_arm(np.random.default_rng(1)),
        "mounted": offset_wrist_arm(np.random.default_rng(2), mounted=True),
        "axis 5 beside axis 4": offset_wrist_arm(np.random.default_rng(3), e=0.04),
        "no lateral offset": offset_wrist_arm(np.random.default_rng(4), lateral=False),
    }


@pytest.fixture(scope="module")
def hand(offset_wrist_arm):
    """Fixed invented numbers for hand-built poses: shoulder 60 mm in front of axis 1,
    links 430 and 390 mm, wrist offset 105 mm along axis 5, wrist point 140 mm aside."""
    return offset_wrist_arm(
        np.random.default_rng(5), a1=0.06, b=0.14, l2=0.43, l3=0.39, d5=0.105, lateral=False
    )


# ---------------------------------------------------------------- extraction


@pytest.mark.parametrize("name", ["plain", "mounted", "axis 5 beside axis 4", "no lateral offset"])
def test_generated_arms_are_of_the_family(arms: dict, name: str) -> None:
    arm = arms[name]
    geometry = OffsetWristGeometry.from_robot(arm.robot)
    assert geometry is not None
    # the generated geometry (conftest.OffsetWristArm): signs depend on the axis directions
    # the description happens to use, lengths do not
    expected = {"a1": arm.a1, "b": arm.b, "l2": arm.l2, "l3": arm.l3, "e": arm.e, "d5": arm.d5}
    for field, value in expected.items():
        assert abs(getattr(geometry, field)) == pytest.approx(abs(value), abs=1e-12), field
    assert ik_solver(arm.robot).family == "offset_wrist"
    assert OrthoParallelGeometry.from_robot(arm.robot) is None


@pytest.mark.parametrize("name", ["plain", "mounted", "axis 5 beside axis 4"])
def test_canonical_fk_matches_pinocchio(arms: dict, name: str) -> None:
    arm = arms[name]
    geometry = OffsetWristGeometry.from_robot(arm.robot)
    q = np.random.default_rng(6).uniform(-np.pi, np.pi, size=(100, 6))
    # reference: pinocchio FK of the URDF text
    np.testing.assert_allclose(
        geometry.fk_flange(arm.robot, q), pin_flange(arm.urdf)(q), atol=1e-12
    )


@pytest.mark.parametrize(
    "name", ["pb-arm6", "pb-arm6-offset", "pb-arm7", "pb-planar3r", "pb-scara4", "pb-gantry3"]
)
def test_bundled_robots_are_not_of_the_family(name: str) -> None:
    # robot files: pb-arm6 has a spherical wrist (axis 4 along the forearm), pb-arm6-offset
    # has joint 4 perpendicular to joint 3 (DH alpha of row 3 is -90 deg); the others
    # are not six-axis revolute arms
    assert OffsetWristGeometry.from_robot(load_robot(name)) is None


def _with_joint(robot: Robot, index: int, **changes: object) -> Robot:
    joints = list(robot.joints)
    joints[index] = dataclasses.replace(joints[index], **changes)
    return dataclasses.replace(robot, joints=tuple(joints))


def test_tilted_axis_falls_through_to_the_numerical_solver(arms: dict) -> None:
    robot = arms["plain"].robot
    joint = robot.joints[3]
    tilted = joint.axis + 1e-4 * np.cross(joint.axis, [0.3, 0.5, 0.8])
    robot = _with_joint(robot, 3, axis=tilted / np.linalg.norm(tilted))
    # axis 4 no longer parallel to axes 2 and 3: no closed form of this family
    assert OffsetWristGeometry.from_robot(robot) is None
    assert ik_solver(robot).family == "numeric"


def test_wrist_axes_that_do_not_meet_fall_through(arms: dict) -> None:
    robot = arms["plain"].robot
    joint = robot.joints[5]
    origin = joint.origin.copy()
    side = np.cross(joint.axis, [0.3, 0.5, 0.8])
    origin[:3, 3] += origin[:3, :3] @ (0.02 * side / np.linalg.norm(side))
    # axis 6 moved 20 mm sideways: it no longer meets axis 5 (no wrist point)
    assert OffsetWristGeometry.from_robot(_with_joint(robot, 5, origin=origin)) is None


# ---------------------------------------------------------------- solutions


@pytest.mark.parametrize("name", ["plain", "mounted", "axis 5 beside axis 4", "no lateral offset"])
def test_every_solution_reproduces_the_pose(arms: dict, name: str) -> None:
    arm = arms[name]
    q = np.random.default_rng(7).uniform(-np.pi, np.pi, size=(300, 6))
    targets = pin_flange(arm.urdf)(q)  # reference: pinocchio FK
    result = solve(arm, targets)
    assert result.method == METHOD
    assert_reach_by_pinocchio(arm, result, targets)
    # closed form: the configuration that produced a pose is one of its solutions
    difference = np.where(result.valid, same_modulo_revolutions(result.q, q[:, None, :]), np.inf)
    assert np.all(difference.min(axis=1) < 1e-8)


@pytest.mark.parametrize("name", ["plain", "mounted", "axis 5 beside axis 4", "no lateral offset"])
def test_labels_equal_label_branches(arms: dict, name: str) -> None:
    arm = arms[name]
    q = np.random.default_rng(8).uniform(-np.pi, np.pi, size=(5000, 6))
    result = solve(arm, fk_flange(arm.robot, q))
    shoulder, elbow, wrist = label_branches(arm.robot, result.q[result.valid])
    # definitions of posebridge.kinematics.branches, from forward kinematics of each solution
    np.testing.assert_array_equal(result.shoulder[result.valid], shoulder)
    np.testing.assert_array_equal(result.elbow[result.valid], elbow)
    np.testing.assert_array_equal(result.wrist[result.valid], wrist)


@pytest.mark.parametrize("name", ["plain", "mounted", "no lateral offset"])
def test_poses_with_eight_solutions_have_all_eight_branches(arms: dict, name: str) -> None:
    arm = arms[name]
    q = np.random.default_rng(9).uniform(-np.pi, np.pi, size=(5000, 6))
    result = solve(arm, fk_flange(arm.robot, q))
    eight = result.valid.sum(axis=1) == 8
    assert eight.any()
    labels = np.stack([result.shoulder, result.elbow, result.wrist], axis=2)[eight]
    # module docstring: with axis 5 meeting axis 4, the words name the three binary
    # choices of the closed form, so eight solutions carry eight different word triples
    for row in labels:
        assert {tuple(triple) for triple in row.tolist()} == EIGHT_LABELS


def test_generic_pose_has_eight_distinct_solutions(hand) -> None:
    # tangent condition: the wrist point at (0.30, b) is reached with joint 1 at 0 (X =
    # 0.30) or with the arm turned round (X = -0.30); 0.1 m above the shoulder it is then
    # 0.26 or 0.37 m from the shoulder (60 mm in front of axis 1). For both wrists the
    # point of axis 4 lies 105 mm from it, so 0.15 to 0.48 m from the shoulder, inside
    # the planar arm's reach |l2 - l3| = 0.04 to l2 + l3 = 0.82 m (law of cosines), away
    # from its edges: eight solutions
    wrist_point = np.array([0.30, hand.b, hand.shoulder_height + 0.1])
    R = Rotation.from_rotvec([0.4, -0.7, 0.3]).as_matrix()  # reference: scipy
    target = hand.flange_pose(wrist_point, R)[None]
    result = solve(hand, target)
    assert result.valid[0].sum() == 8
    assert_reach_by_pinocchio(hand, result, target)
    solutions = result.q[0, result.valid[0]]
    gaps = same_modulo_revolutions(solutions[:, None, :], solutions[None, :, :])
    assert np.all(gaps[~np.eye(8, dtype=bool)] > 1e-3)
    words = {result.branch_label(0, m).split(", j")[0] for m in range(8)}
    assert len(words) == 8


def test_agrees_with_the_numerical_solver(arms: dict) -> None:
    arm = arms["mounted"]
    q = np.random.default_rng(10).uniform(-np.pi, np.pi, size=(30, 6))
    targets = fk_flange(arm.robot, q)
    closed = solve(arm, targets)
    # reference: multi-start Levenberg-Marquardt (Sugihara 2011), 200 random starts
    numeric = solve_ik_numeric(arm.robot, targets, T_flange_tool=np.eye(4))
    np.testing.assert_array_equal(closed.valid.sum(axis=1), numeric.valid.sum(axis=1))
    for i in range(q.shape[0]):
        found = closed.q[i, closed.valid[i]]
        nearest = [
            int(np.argmin(same_modulo_revolutions(found, numeric.q[i, m])))
            for m in numeric.valid_solutions(i)
        ]
        gaps = [
            same_modulo_revolutions(found[k], numeric.q[i, m])
            for k, m in zip(nearest, numeric.valid_solutions(i), strict=True)
        ]
        # one closed-form solution per numerical one, closer than the numerical solver's
        # own distinctness tolerance: its 1e-6 m / 1e-6 rad pose tolerance becomes up to
        # 3e-4 rad in joint space near a straight wrist (pose 13: 0.009 rad from straight)
        assert max(gaps) < DISTINCT_TOLERANCE
        assert len(set(nearest)) == len(nearest)


def test_tool_and_seed(arms: dict) -> None:
    arm = arms["plain"]
    tool = np.eye(4)
    tool[:3, :3] = Rotation.from_euler("xyz", [0.3, -0.2, 1.0]).as_matrix()
    tool[:3, 3] = [0.05, -0.02, 0.2]
    q = np.random.default_rng(11).uniform(-np.pi, np.pi, size=(200, 6))
    targets = pin_flange(arm.urdf)(q) @ tool  # reference: pinocchio FK times the tool
    geometry = OffsetWristGeometry.from_robot(arm.robot)
    result = solve_offset_wrist(arm.robot, geometry, targets, T_flange_tool=tool, seed=q)
    rows, slots = np.nonzero(result.valid)
    reached = pin_flange(arm.urdf)(result.q[rows, slots]) @ tool
    np.testing.assert_allclose(reached, targets[rows], atol=FK_MATCH)
    # ik/finishing.py contract: with itself as the seed the generating configuration comes first
    assert np.all(same_modulo_revolutions(result.q[:, 0], q) < 1e-8)


# ---------------------------------------------------------------- singular poses


def test_wrist_singularity_keeps_the_seed_joint_6(hand) -> None:
    # joint 1 at theta puts the parallel axes along (-sin theta, cos theta, 0); the flange
    # turned so that axis 6 points along them straightens the wrist (axes 4 and 6 parallel)
    theta, X = 0.3, 0.3
    turn = Rotation.from_rotvec([0.0, 0.0, theta]).as_matrix()
    wrist_point = turn @ [X, hand.b, 0.0] + [0.0, 0.0, hand.shoulder_height + 0.1]
    R = rotation_taking(hand.axis6_in_flange, turn @ [0.0, 1.0, 0.0], 0.0)
    R = R @ Rotation.from_rotvec(0.8 * hand.axis6_in_flange).as_matrix()
    target = hand.flange_pose(wrist_point, R)[None]
    seed = np.array([0.2, 0.1, -0.3, 0.4, 0.0, 1.1])
    result = solve(hand, target, seed=seed)
    assert_reach_by_pinocchio(hand, result, target)
    straight = [m for m in result.valid_solutions(0) if result.wrist[0, m] == 0]
    # with the wrist point 0.1 m above and 0.24 m in front of the shoulder every value
    # of joint 6 leaves the point of axis 4 inside the planar reach (it circles the wrist
    # point at 105 mm): joint 6 is the seed's, one solution per elbow
    assert len(straight) == 2
    for m in straight:
        assert same_modulo_revolutions(result.q[0, m, 5:6], seed[5:6]) < 1e-12
        assert "wrist straight" in result.branch_label(0, m)
    # the other root of joint 1 turns the parallel axes away from axis 6: regular wrist
    assert all(result.wrist[0, m] != 0 for m in result.valid_solutions(0) if m not in straight)


def test_wrist_singularity_at_the_edge_of_reach_moves_joint_6(hand) -> None:
    # wrist point exactly l2 + l3 from the shoulder: the point of axis 4 circles it, so
    # about half of the values of joint 6 leave it out of reach (law of cosines); those
    # seeds get the nearest reachable value, one of the two ends of the reachable arc,
    # where the planar arm is stretched (elbow label 0)
    reach = hand.l2 + hand.l3
    X = hand.a1 + reach * np.cos(0.2)
    wrist_point = np.array([X, hand.b, hand.shoulder_height + reach * np.sin(0.2)])
    R = rotation_taking(hand.axis6_in_flange, np.array([0.0, 1.0, 0.0]), 0.5)
    target = hand.flange_pose(wrist_point, R)[None]
    moved = []
    for q6 in np.linspace(-np.pi, np.pi, 12, endpoint=False):
        seed = np.array([0.0, 0.0, 0.0, 0.0, 0.0, q6])
        result = solve(hand, target, seed=seed)
        assert_reach_by_pinocchio(hand, result, target)
        straight = [m for m in result.valid_solutions(0) if result.wrist[0, m] == 0]
        assert straight
        for m in straight:
            if same_modulo_revolutions(result.q[0, m, 5:6], seed[5:6]) > 1e-9:
                assert result.elbow[0, m] == 0
                moved.append(result.q[0, m, 5])
    assert len(moved) >= 3
    ends = np.unique(np.round(np.angle(np.exp(1j * np.array(moved))), 9))
    assert len(ends) <= 2


def test_wrist_point_on_the_tangent_plane_gives_one_shoulder_root(hand) -> None:
    # tangent condition: joint 1 at 0.3 and the wrist point at X = 0 in the turned frame
    # (on the circle of radius b about axis 1): both roots of joint 1 coincide
    turn = Rotation.from_rotvec([0.0, 0.0, 0.3]).as_matrix()
    wrist_point = turn @ [0.0, hand.b, 0.0] + [0.0, 0.0, hand.shoulder_height + 0.3]
    R = Rotation.from_rotvec([1.0, 0.4, -0.6]).as_matrix()
    target = hand.flange_pose(wrist_point, R)[None]
    result = solve(hand, target)
    assert_reach_by_pinocchio(hand, result, target)
    valid = result.valid_solutions(0)
    # the point of axis 4 is 105 mm from (0, 0.3) m, 0.30 +- 0.11 m from the shoulder at
    # (0.06, 0): inside the reach 0.04..0.82 m for both wrists and both elbows
    assert len(valid) == 4
    assert np.all(result.shoulder[0, valid] == 0)
    assert np.all(
        np.abs(np.angle(np.exp(1j * (result.q[0, valid, 0] - result.q[0, valid[0], 0])))) < 1e-6
    )
    # the singularity report measures the same wrist point: on the plane through axis 1
    report = classify_singularity(hand.robot, result.q[0, valid])
    assert np.all(report.shoulder_m < 1e-7)


def test_wrist_point_on_axis_1_takes_joint_1_from_the_seed(offset_wrist_arm) -> None:
    arm = offset_wrist_arm(np.random.default_rng(12), l2=0.45, l3=0.4, lateral=False)
    R = Rotation.from_rotvec([0.5, 0.9, -0.2]).as_matrix()
    target = arm.flange_pose(np.array([0.0, 0.0, arm.shoulder_height + 0.3]), R)[None]
    result = solve(arm, target, seed=np.array([0.4, 0, 0, 0, 0, 0]))
    assert_reach_by_pinocchio(arm, result, target)
    valid = result.valid_solutions(0)
    assert valid
    # no lateral offset and the wrist point on axis 1: joint 1 is free, from the seed or
    # the seed + pi; front and back are undefined there
    offset = result.q[0, valid, 0] - 0.4
    assert np.all(np.abs(offset - np.pi * np.round(offset / np.pi)) < 1e-12)
    assert np.all(result.shoulder[0, valid] == 0)


def test_stretched_elbow_gives_one_elbow_solution(hand) -> None:
    # scipy finds the q3 where the elbow (origin of joint 3) lies on the line from axis 2
    # to axis 4 in the plane across them (pinocchio joint placements and axes); the
    # generated link directions give the bracket: q3 = sign (angle2 - angle3) lines up
    # upper arm and forearm
    model = pin.buildModelFromXML(hand.urdf)
    data = model.createData()

    def configuration(q3: float) -> np.ndarray:
        return np.array([0.1, 0.2, q3, 0.3, 0.9, 0.1])

    def side(q3: float) -> float:
        J = pin.computeJointJacobians(model, data, configuration(q3))
        s, e, w = (data.oMi[j].translation for j in (2, 3, 4))
        axis = J[3:, model.joints[2].idx_v]
        return float(np.cross(e - s, w - s) @ axis)

    guess = hand.axis_signs[2] * (hand.angle2 - hand.angle3)
    q = configuration(brentq(side, guess - 0.5, guess + 0.5))[None]
    target = pin_flange(hand.urdf)(q)
    result = solve(hand, target)
    assert_reach_by_pinocchio(hand, result, target)
    found = np.where(result.valid[0], same_modulo_revolutions(result.q[0], q[0]), np.inf)
    m = int(np.argmin(found))
    assert found[m] < 1e-7
    assert result.elbow[0, m] == 0
    twins = [
        k
        for k in result.valid_solutions(0)
        if k != m
        and result.shoulder[0, k] == result.shoulder[0, m]
        and result.wrist[0, k] == result.wrist[0, m]
    ]
    # the two elbow roots coincide: one solution for that shoulder and wrist
    assert twins == []


# ---------------------------------------------------------------- reasons and limits


def test_far_pose_is_out_of_reach(hand) -> None:
    target = np.eye(4)
    target[:3, 3] = [3.0, 1.0, 0.5]  # 3.2 m away; the arm reaches about 1 m
    result = solve(hand, target[None])
    assert not result.valid.any()
    assert result.reason == (REASON_OUT_OF_REACH,)
    assert np.all(np.isnan(result.q))


def test_orientation_not_reachable(hand) -> None:
    # the wrist point half the flange distance beyond the farthest it can be from the
    # shoulder (l2 + l3 + d5 in the arm plane) with axis 6 pointing back at the shoulder:
    # the flange itself is within that distance, the wrist point is not (for the other
    # root of joint 1 it is farther still, the shoulder being in front of axis 1)
    far = hand.l2 + hand.l3 + hand.d5 + 0.5 * hand.d6
    wrist_point = np.array([hand.a1 + far, hand.b, hand.shoulder_height])
    R = rotation_taking(hand.axis6_in_flange, np.array([-1.0, 0.0, 0.0]), 0.0)
    result = solve(hand, hand.flange_pose(wrist_point, R)[None])
    assert not result.valid.any()
    assert result.reason == (REASON_ORIENTATION,)


def test_within_limits_flags(offset_wrist_arm) -> None:
    arm = offset_wrist_arm(np.random.default_rng(13), limit=2.5)
    q = np.random.default_rng(14).uniform(-2.5, 2.5, size=(2000, 6))
    result = solve(arm, fk_flange(arm.robot, q))
    robot = arm.robot
    inside = np.all((result.q >= robot.lower - 1e-12) & (result.q <= robot.upper + 1e-12), axis=2)
    # reference: the generated limits (+-2.5 rad) compared directly
    np.testing.assert_array_equal(result.within_limits, inside & result.valid)
    rank = np.where(result.within_limits, 0, np.where(result.valid, 1, 2))
    assert np.all(np.diff(rank, axis=1) >= 0)  # ik/finishing.py order: in limits, outside, empty


def test_no_branch_within_limits(offset_wrist_arm) -> None:
    arm = offset_wrist_arm(np.random.default_rng(15), limit=0.6)
    q = np.array([[0.55, -0.5, 0.5, -0.45, 0.5, 0.55]])
    target = fk_flange(arm.robot, q)
    narrow = arm.robot
    for index in range(6):
        narrow = _with_joint(narrow, index, lower=-0.01, upper=0.01)
    geometry = OffsetWristGeometry.from_robot(narrow)
    result = solve_offset_wrist(narrow, geometry, target, T_flange_tool=np.eye(4))
    # q itself is 0.45 rad or more from zero on every joint, and the other branches
    # differ from it by more than the 0.01 rad limits
    assert result.valid.any()
    assert not result.within_limits.any()
    assert result.reason == (REASON_NO_WITHIN_LIMITS,)


def test_revolution_variants(arms: dict) -> None:
    arm = arms["plain"]
    q = np.array([[0.3, 0.2, -0.5, 0.4, 0.8, -0.6]])
    target = fk_flange(arm.robot, q)
    single = solve(arm, target)
    every = solve(arm, target, all_revolutions=True)
    assert_reach_by_pinocchio(arm, every, target)
    robot = arm.robot
    for m in single.valid_solutions(0):
        base = single.q[0, m]
        # closed form: count the whole revolutions k with lower <= q_j + 2 pi k <= upper per joint
        counts = [
            sum(robot.lower[j] <= base[j] + 2 * np.pi * k <= robot.upper[j] for k in range(-3, 4))
            for j in range(6)
        ]
        variants = [
            s
            for s in every.valid_solutions(0)
            if same_modulo_revolutions(every.q[0, s], base) < 1e-9
        ]
        assert len(variants) == int(np.prod(counts))


# ---------------------------------------------------------------- properties


rotations = arrays(np.float64, (4,), elements=st.floats(-1.0, 1.0)).filter(
    lambda v: np.linalg.norm(v) > 0.1
)


@settings(derandomize=True, deadline=None, max_examples=60)
@given(
    rotation=rotations,
    position=arrays(np.float64, (3,), elements=st.floats(-1.2, 1.2)),
)
def test_any_target_is_solved_or_explained(arms: dict, rotation, position) -> None:
    arm = arms["mounted"]
    target = np.eye(4)
    target[:3, :3] = Rotation.from_quat(rotation).as_matrix()  # reference: scipy rotation
    target[:3, 3] = position
    result = solve(arm, target[None])
    if result.valid.any():
        assert_reach_by_pinocchio(arm, result, target[None])
    else:
        assert result.reason[0] in (REASON_OUT_OF_REACH, REASON_ORIENTATION)


@settings(derandomize=True, deadline=None, max_examples=25)
@given(
    robot_seed=st.integers(0, 2**32 - 1),
    fractions=arrays(np.float64, (6,), elements=st.floats(0.0, 1.0)),
    gap=st.sampled_from([0.0, 0.0, 0.03]),
)
def test_random_arms_solve_their_own_poses(offset_wrist_arm, robot_seed, fractions, gap) -> None:
    arm = offset_wrist_arm(np.random.default_rng(robot_seed), e=gap, mounted=robot_seed % 2 == 1)
    assert ik_solver(arm.robot).family == "offset_wrist"
    q = (-np.pi + 2 * np.pi * fractions)[None]
    target = pin_flange(arm.urdf)(q)  # reference: pinocchio FK
    result = solve(arm, target)
    assert_reach_by_pinocchio(arm, result, target)
    # closed form: the generating configuration is among the solutions
    assert same_modulo_revolutions(result.q[0, result.valid[0]], q[0]).min() < 1e-8
