"""Tests of posebridge.kinematics.ik.analytic.ortho_parallel (closed-form IK, OPW arms).

References used here: forward kinematics (posebridge.kinematics.fk, and
pinocchio on robots/pb-arm6.urdf), the robot description files (dimensions
read off robots/pb-arm6.toml), closed forms written beside each check, scipy
(random rotations, root finding) and the branch-label definitions of
posebridge.kinematics.branches.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import brentq
from scipy.spatial.transform import Rotation

from posebridge.kinematics.branches import label_branches
from posebridge.kinematics.fk import fk_flange, fk_frames, fk_tool
from posebridge.kinematics.ik import ik_solver
from posebridge.kinematics.ik.analytic.ortho_parallel import atan2_many, solve_ortho_parallel
from posebridge.kinematics.ik.analytic.ortho_parallel_geometry import OrthoParallelGeometry
from posebridge.kinematics.ik.solutions import (
    REASON_NO_WITHIN_LIMITS,
    REASON_ORIENTATION,
    REASON_OUT_OF_REACH,
)
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.robot.urdf_import import load_robot_urdf
from posebridge.transforms import rotation_matrix_about_axis, rotation_matrix_from_rpy

URDF_PATH = data_folder("robots") / "pb-arm6.urdf"
TOLERANCE_M = 1e-6
FK_MATCH = 1e-8  # rounding between the solver and forward kinematics, far below the tolerance


@pytest.fixture(scope="module")
def arm6() -> Robot:
    return load_robot("pb-arm6")


@pytest.fixture(scope="module")
def geometry(arm6: Robot) -> OrthoParallelGeometry:
    extracted = OrthoParallelGeometry.from_robot(arm6)
    assert extracted is not None
    return extracted


def with_joint(robot: Robot, index: int, **changes: object) -> Robot:
    """A copy of ``robot`` with fields of joint ``index`` replaced."""
    joints = list(robot.joints)
    joints[index] = dataclasses.replace(joints[index], **changes)
    return dataclasses.replace(robot, joints=tuple(joints))


def random_configurations(robot: Robot, count: int, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).uniform(robot.lower, robot.upper, size=(count, robot.dof))


def same_modulo_revolutions(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Largest joint difference modulo 2 pi, shape of the batch."""
    d = a - b
    return np.abs(d - 2.0 * np.pi * np.round(d / (2.0 * np.pi))).max(axis=-1)


def assert_solutions_reach(robot: Robot, result, targets: np.ndarray, tool=None) -> None:
    """Every valid slot's FK (posebridge.kinematics.fk) equals its target pose."""
    rows, slots = np.nonzero(result.valid)
    reached = fk_tool(robot, result.q[rows, slots], tool)
    # reference: forward kinematics of the returned joint values
    assert np.abs(reached - targets[rows]).max() < FK_MATCH


# ---------------------------------------------------------------- extraction


def test_extract_pb_arm6_parameters(geometry: OrthoParallelGeometry) -> None:
    # from robots/pb-arm6.toml: shoulder 143 mm forward and 188 + 277 mm up, upper arm
    # 597 mm, forearm 268 + 359 mm with a 97 mm offset that points backwards when the
    # forearm stands vertical, 87 mm from the wrist centre to the flange, no lateral offset
    expected = {
        "a1": 0.143,
        "a2": -0.097,
        "b": 0.0,
        "c1": 0.465,
        "c2": 0.597,
        "c3": 0.627,
        "c4": 0.087,
    }
    for name, value in expected.items():
        assert getattr(geometry, name) == pytest.approx(value, abs=1e-12), name


def test_extract_pb_arm6_offsets_and_signs(geometry: OrthoParallelGeometry) -> None:
    # from robots/pb-arm6.toml: axes along +z, +y, +y, +x, +y, +x; at zero the forearm
    # is horizontal, i.e. 90 degrees from the canonical vertical forearm (joint 3 offset)
    np.testing.assert_array_equal(geometry.signs, np.ones(6))
    np.testing.assert_allclose(geometry.offsets, [0, 0, np.pi / 2, 0, 0, 0], atol=1e-12)


def test_canonical_fk_matches_posebridge_fk(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = random_configurations(arm6, 200, 1)
    # reference: posebridge.kinematics.fk.fk_flange (the product of joint transforms)
    np.testing.assert_allclose(geometry.fk_flange(q), fk_flange(arm6, q), atol=1e-12)


@pytest.mark.parametrize(
    "name", ["pb-arm6-offset", "pb-arm7", "pb-planar2r", "pb-scara4", "pb-gantry3"]
)
def test_extract_rejects_other_arms(name: str) -> None:
    # pb-arm6-offset: 64 mm between the fifth and sixth axes, so the wrist axes do not meet
    # (robot file comment); the others are not six-axis revolute arms
    assert OrthoParallelGeometry.from_robot(load_robot(name)) is None


def test_extract_urdf_matches_toml(geometry: OrthoParallelGeometry) -> None:
    from_urdf = OrthoParallelGeometry.from_robot(load_robot_urdf(URDF_PATH, to_link="flange"))
    assert from_urdf is not None
    # reference: the same invented robot described in TOML (the parameters are geometry,
    # independent of how the file places its joint frames)
    for name in ("a1", "a2", "b", "c1", "c2", "c3", "c4"):
        assert getattr(from_urdf, name) == pytest.approx(getattr(geometry, name), abs=1e-9), name


def _flipped_axis(robot: Robot, index: int) -> Robot:
    return with_joint(robot, index, axis=-robot.joints[index].axis)


def _turned_origin(robot: Robot, index: int, angle: float) -> Robot:
    joint = robot.joints[index]
    origin = joint.origin.copy()
    origin[:3, :3] = origin[:3, :3] @ rotation_matrix_about_axis(joint.axis, angle)
    return with_joint(robot, index, origin=origin)


def _raised_base(robot: Robot) -> Robot:
    origin = robot.joints[0].origin.copy()
    origin[2, 3] += 0.3
    return with_joint(robot, 0, origin=origin)


def _other_flange(robot: Robot) -> Robot:
    # turned about and moved 50 mm along axis 6 (the x axis of pb-arm6's last link frame)
    T = robot.T_link_flange.copy()
    T[:3, :3] = rotation_matrix_about_axis([1.0, 0.0, 0.0], 0.7) @ T[:3, :3]
    T[0, 3] += 0.05
    return dataclasses.replace(robot, T_link_flange=T)


def _lateral_offset(robot: Robot) -> Robot:
    origin = robot.joints[3].origin.copy()
    origin[1, 3] += 0.06
    return with_joint(robot, 3, origin=origin)


def _shoulder_turned(robot: Robot) -> Robot:
    origin = robot.joints[1].origin.copy()
    turn = rotation_matrix_about_axis([0.0, 0.0, 1.0], 0.9)
    origin[:3, :3] = turn @ origin[:3, :3]
    origin[:3, 3] = turn @ origin[:3, 3]
    return with_joint(robot, 1, origin=origin)


VARIANTS = {
    "axis 1 flipped": lambda r: _flipped_axis(r, 0),
    "axis 2 flipped": lambda r: _flipped_axis(r, 1),
    "axis 3 flipped": lambda r: _flipped_axis(r, 2),
    "axis 4 flipped": lambda r: _flipped_axis(r, 3),
    "axis 5 flipped": lambda r: _flipped_axis(r, 4),
    "axis 6 flipped": lambda r: _flipped_axis(r, 5),
    "joint 2 offset": lambda r: _turned_origin(r, 1, 0.4),
    "joint 3 offset": lambda r: _turned_origin(r, 2, -1.1),
    "joint 5 offset": lambda r: _turned_origin(r, 4, 0.5),
    "joint 6 offset": lambda r: _turned_origin(r, 5, 2.0),
    "base raised": _raised_base,
    "flange turned": _other_flange,
    "lateral offset": _lateral_offset,
    "arm turned about axis 1": _shoulder_turned,
}


@pytest.mark.parametrize("variant", sorted(VARIANTS))
def test_variants_are_extracted_and_solved(arm6: Robot, variant: str) -> None:
    robot = VARIANTS[variant](arm6)
    extracted = OrthoParallelGeometry.from_robot(robot)
    assert extracted is not None
    q = random_configurations(robot, 400, 7)
    # reference: posebridge.kinematics.fk.fk_flange of the modified robot
    np.testing.assert_allclose(extracted.fk_flange(q), fk_flange(robot, q), atol=1e-12)
    targets = fk_tool(robot, q)
    result = solve_ortho_parallel(robot, extracted, targets, seed=q)
    assert_solutions_reach(robot, result, targets)
    # closed form: the configuration that produced a pose solves it; with itself as the
    # seed it is the nearest solution, so it comes first
    np.testing.assert_allclose(result.q[:, 0], q, atol=1e-9)


def test_variant_with_wrist_offset_is_rejected(arm6: Robot) -> None:
    # moving axis 6 sideways by 50 mm keeps every axis direction but the wrist axes no
    # longer meet (the ortho-parallel model requires a spherical wrist)
    origin = arm6.joints[5].origin.copy()
    origin[2, 3] += 0.05
    assert OrthoParallelGeometry.from_robot(with_joint(arm6, 5, origin=origin)) is None


# ---------------------------------------------------------------- solutions


def test_generating_configuration_found_with_its_labels(
    arm6: Robot, geometry: OrthoParallelGeometry
) -> None:
    q = random_configurations(arm6, 20_000, 2)
    targets = fk_tool(arm6, q)
    result = solve_ortho_parallel(arm6, geometry, targets)
    difference = same_modulo_revolutions(result.q, q[:, None, :])
    difference = np.where(result.valid, difference, np.inf)
    best = np.argmin(difference, axis=1)
    rows = np.arange(q.shape[0])
    # closed form: the generating configuration solves its own pose (up to whole revolutions)
    assert np.all(difference[rows, best] < 1e-8)
    shoulder, elbow, wrist = label_branches(arm6, q)
    # definitions of posebridge.kinematics.branches applied to the generating configuration
    np.testing.assert_array_equal(result.shoulder[rows, best], shoulder)
    np.testing.assert_array_equal(result.elbow[rows, best], elbow)
    np.testing.assert_array_equal(result.wrist[rows, best], wrist)
    families = {tuple(row) for row in np.stack([shoulder, elbow, wrist], axis=1)}
    # all eight shoulder/elbow/wrist families occur among the random configurations
    assert families >= {(s, e, w) for s in (1, -1) for e in (1, -1) for w in (1, -1)}


def test_labels_equal_label_branches(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = random_configurations(arm6, 20_000, 3)
    result = solve_ortho_parallel(arm6, geometry, fk_tool(arm6, q))
    solutions = result.q[result.valid]
    shoulder, elbow, wrist = label_branches(arm6, solutions)
    # definitions of posebridge.kinematics.branches, from forward kinematics of each solution
    np.testing.assert_array_equal(result.shoulder[result.valid], shoulder)
    np.testing.assert_array_equal(result.elbow[result.valid], elbow)
    np.testing.assert_array_equal(result.wrist[result.valid], wrist)


def test_eight_distinct_solutions_in_the_open_workspace(
    arm6: Robot, geometry: OrthoParallelGeometry
) -> None:
    q = np.array([[0.56, -0.18, -1.58, 2.72, -1.19, 1.55]])
    result = solve_ortho_parallel(arm6, geometry, fk_tool(arm6, q))
    # Brandstötter et al. (2014): up to eight solutions; with the wrist centre 0.23 m in
    # front of axis 1 and 1.6 m up the arm can also reach it leaning back, away from any
    # singularity, so all eight exist and differ
    assert result.valid[0].sum() == 8
    solutions = result.q[0, result.valid[0]]
    gaps = same_modulo_revolutions(solutions[:, None, :], solutions[None, :, :])
    assert np.all(gaps[~np.eye(8, dtype=bool)] > 1e-3)
    labels = {result.branch_label(0, m).split(", j")[0] for m in range(8)}
    assert len(labels) == 8


rotations = arrays(np.float64, (4,), elements=st.floats(-1.0, 1.0)).filter(
    lambda v: np.linalg.norm(v) > 0.1
)


@settings(derandomize=True, deadline=None, max_examples=60)
@given(
    rotation=rotations,
    position=arrays(np.float64, (3,), elements=st.floats(-1.6, 1.6)),
)
def test_fk_of_every_solution_equals_an_arbitrary_target(
    arm6: Robot, geometry: OrthoParallelGeometry, rotation: np.ndarray, position: np.ndarray
) -> None:
    target = np.eye(4)
    target[:3, :3] = Rotation.from_quat(rotation).as_matrix()  # reference: scipy rotation
    target[:3, 3] = position
    result = solve_ortho_parallel(arm6, geometry, target[None])
    rows, slots = np.nonzero(result.valid)
    if rows.size:
        # reference: forward kinematics of the returned joints
        np.testing.assert_allclose(
            fk_tool(arm6, result.q[rows, slots]), target[None].repeat(rows.size, 0), atol=1e-8
        )
    else:
        assert result.reason[0] in (REASON_OUT_OF_REACH, REASON_ORIENTATION)


@settings(derandomize=True, deadline=None, max_examples=25)
@given(fractions=arrays(np.float64, (6,), elements=st.floats(0.0, 1.0)))
def test_solutions_checked_with_pinocchio(
    arm6: Robot, geometry: OrthoParallelGeometry, fractions: np.ndarray
) -> None:
    model = pin.buildModelFromXML(URDF_PATH.read_text(encoding="utf-8"))
    data = model.createData()
    flange = model.getFrameId("flange")

    def pin_flange(q: np.ndarray) -> np.ndarray:
        pin.framesForwardKinematics(model, data, q)
        return data.oMf[flange].homogeneous.copy()

    q = arm6.lower + fractions * (arm6.upper - arm6.lower)
    target = pin_flange(q)  # reference: pinocchio FK
    result = solve_ortho_parallel(arm6, geometry, target[None], T_flange_tool=np.eye(4))
    assert result.valid[0].sum() >= 1
    for m in result.valid_solutions(0):
        # reference: pinocchio FK of each returned solution
        np.testing.assert_allclose(pin_flange(result.q[0, m]), target, atol=1e-8)


def test_tool_is_taken_into_account(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    tool = np.eye(4)
    tool[:3, :3] = rotation_matrix_from_rpy([0.3, -0.2, 1.0])
    tool[:3, 3] = [0.05, -0.02, 0.2]
    q = random_configurations(arm6, 300, 4)
    targets = fk_tool(arm6, q, tool)
    result = solve_ortho_parallel(arm6, geometry, targets, T_flange_tool=tool, seed=q)
    assert_solutions_reach(arm6, result, targets, tool)
    # closed form: the generating configuration comes first with itself as the seed
    np.testing.assert_allclose(result.q[:, 0], q, atol=1e-9)


# ---------------------------------------------------------------- degenerate cases


def test_wrist_singularity_keeps_seed_joint_4(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = np.array([[0.2, 0.3, -0.6, 0.9, 0.0, -0.4]])
    target = fk_tool(arm6, q)
    seed = np.array([0.2, 0.3, -0.6, -0.5, 0.1, 0.0])
    result = solve_ortho_parallel(arm6, geometry, target, seed=seed)
    assert_solutions_reach(arm6, result, target)
    valid = result.valid_solutions(0)
    # with joint 5 at zero the flange depends on q4 + q6 only (axes 4 and 6 coincide):
    # the closed form keeps q4 from the seed and the sum from the pose; one solution per
    # arm branch (the other wrist solution is the same pose), wrist label 0
    straight = [m for m in valid if abs(result.q[0, m, 4]) < 1e-9]
    assert len(straight) == 1
    m = straight[0]
    assert result.q[0, m, 3] == pytest.approx(seed[3], abs=1e-12)
    assert same_modulo_revolutions(result.q[0, m, 3] + result.q[0, m, 5], q[0, 3] + q[0, 5]) < 1e-9
    assert result.wrist[0, m] == 0
    assert "wrist straight" in result.branch_label(0, m)


def test_wrist_singularity_without_seed_uses_zero(
    arm6: Robot, geometry: OrthoParallelGeometry
) -> None:
    q = np.array([[0.2, 0.3, -0.6, 0.9, 0.0, -0.4]])
    result = solve_ortho_parallel(arm6, geometry, fk_tool(arm6, q))
    straight = [m for m in result.valid_solutions(0) if abs(result.q[0, m, 4]) < 1e-9]
    # closed form: joint 4 from the seed or 0, joint 6 carries the whole sum
    assert result.q[0, straight[0], 3] == pytest.approx(0.0, abs=1e-12)
    assert same_modulo_revolutions(result.q[0, straight[0], 5], q[0, 3] + q[0, 5]) < 1e-9


def _wrist_centre_on_axis_1_q3(arm6: Robot) -> float:
    # with q2 = 0 the wrist centre's forward distance from axis 1 is
    # 0.143 + 0.627 cos(q3) + 0.097 sin(q3) (robots/pb-arm6.toml: shoulder 143 mm forward,
    # forearm 268 + 359 mm long and 97 mm above axis 3); scipy finds its root
    return float(
        brentq(lambda t: 0.143 + 0.627 * np.cos(t) + 0.097 * np.sin(t), -np.pi, -np.pi / 2)
    )


def test_shoulder_singularity_takes_joint_1_from_seed(
    arm6: Robot, geometry: OrthoParallelGeometry
) -> None:
    q = np.array([[0.7, 0.0, _wrist_centre_on_axis_1_q3(arm6), 0.3, 0.6, 0.2]])
    target = fk_tool(arm6, q)
    result = solve_ortho_parallel(arm6, geometry, target, seed=np.array([0.4, 0, 0, 0, 0, 0]))
    assert_solutions_reach(arm6, result, target)
    valid = result.valid_solutions(0)
    assert valid
    # wrist centre on axis 1: joint 1 is free, taken from the seed (or the seed + pi);
    # front and back are undefined there (label 0)
    offset = result.q[0, valid, 0] - 0.4
    assert np.all(np.abs(offset - np.pi * np.round(offset / np.pi)) < 1e-9)
    assert np.all(result.shoulder[0, valid] == 0)


@pytest.mark.parametrize("sign_x", [1.0, -1.0])
@pytest.mark.parametrize("sign_y", [1.0, -1.0])
def test_wrist_centre_exactly_on_axis_1_with_signed_zeros(
    arm6: Robot, geometry: OrthoParallelGeometry, sign_x: float, sign_y: float
) -> None:
    # flange z pointing straight down: the wrist centre is the flange position moved
    # 87 mm (c4) back along the flange z axis, so x = y = +-0.0 puts it on axis 1
    target = np.eye(4)
    target[:3, :3] = np.diag([1.0, -1.0, -1.0])
    target[:3, 3] = [sign_x * 0.0, sign_y * 0.0, 1.2]
    result = solve_ortho_parallel(arm6, geometry, target[None], T_flange_tool=np.eye(4))
    rows, slots = np.nonzero(result.valid)
    assert rows.size >= 2
    # reference: forward kinematics of the returned joints (atan2(+-0, +-0) must not leak in)
    np.testing.assert_allclose(
        fk_flange(arm6, result.q[rows, slots]), target[None].repeat(rows.size, 0), atol=1e-9
    )
    # no seed: joint 1 is 0 or pi
    assert np.all(np.abs(np.sin(result.q[rows, slots, 0])) < 1e-12)


@pytest.mark.parametrize("folded", [False, True])
def test_stretched_or_folded_elbow_gives_one_elbow_branch(
    arm6: Robot, geometry: OrthoParallelGeometry, folded: bool
) -> None:
    # closed form: the forearm (627 mm along, 97 mm above axis 3) is in line with the
    # upper arm when 0.627 cos(q3) + 0.097 sin(q3) = 0: q3 = atan2(-0.627, 0.097)
    # (stretched) or that + pi (folded)
    q3 = np.arctan2(-0.627, 0.097) + (np.pi if folded else 0.0)
    q = np.array([[0.2, 0.4, q3, 0.3, 0.6, 0.2]])
    target = fk_tool(arm6, q)
    result = solve_ortho_parallel(arm6, geometry, target)
    assert_solutions_reach(arm6, result, target)
    front = [m for m in result.valid_solutions(0) if result.shoulder[0, m] == 1]
    # one elbow solution per wrist on the front side (the two elbow branches coincide)
    assert len(front) == 2
    assert np.all(result.elbow[0, front] == 0)


def _distance_to_line(point: np.ndarray, origin: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Distance of points (N, 3) from lines through ``origin`` along unit ``axis`` (N, 3)."""
    w = point - origin
    return np.linalg.norm(w - np.einsum("ki,ki->k", w, axis)[:, None] * axis, axis=1)


def test_reach_margins_follow_the_law_of_cosines(arm6: Robot) -> None:
    q = random_configurations(arm6, 40, seed=12)
    frames = fk_frames(arm6, q)
    axes = np.einsum("knij,nj->kni", frames[:, 1:7, :3, :3], arm6.axes)
    origins = frames[:, 1:7, :3, 3]
    # wrist centre: where axes 4 and 5 meet (spherical wrist); the point of axis 5 at the
    # foot of the common perpendicular (closed form of the nearest points of two lines)
    a4, a5, w = axes[:, 3], axes[:, 4], origins[:, 4] - origins[:, 3]
    b45 = np.einsum("ki,ki->k", a4, a5)
    t5 = (b45 * np.einsum("ki,ki->k", a4, w) - np.einsum("ki,ki->k", a5, w)) / (1.0 - b45**2)
    centre = origins[:, 4] + t5[:, None] * a5
    # law of cosines in the arm plane: the wrist centre's distance s from axis 2, the upper
    # arm c2 (axis 2 to the parallel axis 3) and the forearm k (axis 3 to the centre):
    # s^2 = c2^2 + k^2 + 2 c2 k cos(beta)
    s = _distance_to_line(centre, origins[:, 1], axes[:, 1])
    c2 = _distance_to_line(origins[:, 2], origins[:, 1], axes[:, 1])
    k = _distance_to_line(centre, origins[:, 2], axes[:, 2])
    expected = 1.0 - np.abs((s**2 - c2**2 - k**2) / (2.0 * c2 * k))
    margins = ik_solver(arm6).reach_margins()
    assert margins is not None
    got = margins(fk_tool(arm6, q))
    shoulder, _, _ = label_branches(arm6, q)
    column = np.where(shoulder == 1, 0, 1)
    assert np.all(shoulder != 0)
    # reference: forward kinematics (checked against pinocchio in test_fk.py) and the
    # law of cosines above
    np.testing.assert_allclose(got[np.arange(len(q)), column], expected, atol=1e-9)
    assert np.all(got[np.arange(len(q)), column] >= -1e-12)  # every FK pose is reached


@pytest.mark.parametrize("folded", [False, True])
def test_reach_margin_is_zero_at_the_stretched_or_folded_elbow(arm6: Robot, folded: bool) -> None:
    # closed form as in test_stretched_or_folded_elbow_gives_one_elbow_branch
    q3 = np.arctan2(-0.627, 0.097) + (np.pi if folded else 0.0)
    q = np.array([[0.2, 0.4, q3, 0.3, 0.6, 0.2]])
    margins = ik_solver(arm6).reach_margins()
    assert margins is not None
    target = fk_tool(arm6, q)
    shoulder, _, _ = label_branches(arm6, q)
    column = 0 if shoulder[0] == 1 else 1
    assert abs(margins(target)[0, column]) < 1e-9
    # 1 cm further out along the shoulder-to-wrist direction the stretched elbow cannot reach
    # (common practice, no source); folded, 1 cm further in
    frames = fk_frames(arm6, q)
    out = frames[0, 5, :3, 3] - frames[0, 2, :3, 3]
    shifted = target.copy()
    shifted[0, :3, 3] += (-0.01 if folded else 0.01) * out / np.linalg.norm(out)
    assert margins(shifted)[0, column] < 0.0
    result = ik_solver(arm6).solve(shifted)
    assert not np.any(result.valid[0] & (result.shoulder[0] == shoulder[0]))


def test_reach_margins_only_for_ortho_parallel_arms() -> None:
    assert ik_solver(load_robot("pb-planar3r")).reach_margins() is None


# ---------------------------------------------------------------- reasons and limits


def test_far_pose_is_out_of_reach(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    target = np.eye(4)
    target[:3, 3] = [3.0, 1.0, 0.5]  # 3.2 m away; pb-arm6 reaches about 1.46 m (robot file)
    result = solve_ortho_parallel(arm6, geometry, target[None])
    assert not result.valid.any()
    assert result.reason == (REASON_OUT_OF_REACH,)
    assert np.all(np.isnan(result.q))


def test_orientation_not_reachable(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    # flange exactly at full stretch of the wrist centre (c2 + k from the shoulder,
    # k = hypot(a2, c3)) with the flange z axis pointing back to the robot: the wrist
    # centre would be c4 = 87 mm beyond the reach, while the flange point itself is inside
    k = np.hypot(0.097, 0.627)
    target = np.eye(4)
    target[:3, :3] = rotation_matrix_about_axis([0.0, 1.0, 0.0], -np.pi / 2)  # z -> -x
    target[:3, 3] = [0.143 + 0.597 + k, 0.0, 0.465]
    result = solve_ortho_parallel(arm6, geometry, target[None], T_flange_tool=np.eye(4))
    assert not result.valid.any()
    assert result.reason == (REASON_ORIENTATION,)


def test_within_limits_flags(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = random_configurations(arm6, 2000, 5)
    result = solve_ortho_parallel(arm6, geometry, fk_tool(arm6, q))
    inside = np.all((result.q >= arm6.lower - 1e-12) & (result.q <= arm6.upper + 1e-12), axis=2)
    # reference: the joint limits of robots/pb-arm6.toml compared directly
    np.testing.assert_array_equal(result.within_limits, inside & result.valid)
    # order (ik/finishing.py contract): in-limit slots, then valid outside, then empty
    rank = np.where(result.within_limits, 0, np.where(result.valid, 1, 2))
    assert np.all(np.diff(rank, axis=1) >= 0)


def test_no_branch_within_limits(arm6: Robot) -> None:
    narrow = arm6
    for index in range(6):
        narrow = with_joint(narrow, index, lower=-0.01, upper=0.01)
    extracted = OrthoParallelGeometry.from_robot(narrow)
    assert extracted is not None
    q = np.array([[0.3, 0.2, -0.5, 0.4, 0.8, -0.6]])
    result = solve_ortho_parallel(narrow, extracted, fk_tool(narrow, q))
    # every solution has a joint beyond +-0.01 rad (q itself, and the other branches
    # differ from it by more than that)
    assert result.valid.any()
    assert not result.within_limits.any()
    assert result.reason == (REASON_NO_WITHIN_LIMITS,)


def test_revolution_variants_of_wide_joints(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = np.array([[0.3, 0.2, -0.5, 0.4, 0.8, -0.6]])
    target = fk_tool(arm6, q)
    single = solve_ortho_parallel(arm6, geometry, target)
    every = solve_ortho_parallel(arm6, geometry, target, all_revolutions=True)
    assert_solutions_reach(arm6, every, target)
    for m in single.valid_solutions(0):
        base = single.q[0, m]
        # closed form: count the whole revolutions k with lower <= q_j + 2 pi k <= upper per joint
        counts = [
            sum(arm6.lower[j] <= base[j] + 2 * np.pi * k <= arm6.upper[j] for k in range(-3, 4))
            for j in range(6)
        ]
        variants = [
            s
            for s in every.valid_solutions(0)
            if same_modulo_revolutions(every.q[0, s], base) < 1e-9
        ]
        assert len(variants) == int(np.prod(counts))
        for s in variants:
            wrapped = np.angle(np.exp(1j * every.q[0, s]))
            # revolutions = whole revolutions added to the value wrapped to (-pi, pi]
            np.testing.assert_allclose(
                (every.q[0, s] - wrapped) / (2 * np.pi), every.revolutions[0, s], atol=1e-9
            )


def test_seed_orders_by_distance(arm6: Robot, geometry: OrthoParallelGeometry) -> None:
    q = random_configurations(arm6, 500, 6)
    targets = fk_tool(arm6, q)
    seed = random_configurations(arm6, 500, 8)
    result = solve_ortho_parallel(arm6, geometry, targets, seed=seed)
    weights = 1.0 / arm6.velocity_max
    distance = (((result.q - seed[:, None, :]) * weights) ** 2).sum(axis=2)
    distance = np.where(result.within_limits, distance, np.inf)
    # ik/finishing.py contract: in-limit slots sorted by weighted joint distance to the seed
    finite = np.isfinite(distance)
    for row, mask in zip(distance, finite, strict=True):
        assert np.all(np.diff(row[mask]) >= 0)


# ---------------------------------------------------------------- kernel arctangent


def test_vector_arctangent_matches_numpy() -> None:
    rng = np.random.default_rng(12)
    y = rng.normal(size=20_000) * 10.0 ** rng.uniform(-6, 3, size=20_000)
    x = rng.normal(size=20_000) * 10.0 ** rng.uniform(-6, 3, size=20_000)
    special = np.array([0.0, -0.0, 1.0, -1.0, 1e-300, -1e-300, 3.0])
    y = np.concatenate([y, np.repeat(special, special.size)])
    x = np.concatenate([x, np.tile(special, special.size)])
    got = np.empty_like(y)
    atan2_many(y, x, got)
    # reference: numpy.arctan2 (the C library's atan2), signed zeros included
    np.testing.assert_allclose(got, np.arctan2(y, x), rtol=0.0, atol=1e-15)
    np.testing.assert_array_equal(np.signbit(got), np.signbit(np.arctan2(y, x)))
