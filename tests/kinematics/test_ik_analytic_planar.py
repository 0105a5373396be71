"""Tests of posebridge.kinematics.ik.analytic.planar and .scara (planar 2R/3R, SCARA).

References: the closed forms of the planar 2R arm, the law of
cosines written beside the checks, forward kinematics
(posebridge.kinematics.fk) and the robot description files.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik.analytic.planar import PlanarGeometry, solve_planar
from posebridge.kinematics.ik.analytic.scara import ScaraGeometry
from posebridge.kinematics.ik.solutions import REASON_ORIENTATION, REASON_OUT_OF_REACH
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml
from posebridge.transforms import rotation_matrix_from_rpy, rpy_from_rotation_matrix

PLANAR_2R = """
schema_version = 1
[robot]
name = "test-2r"
kind = "planar_2r"
convention = "origin_axis"

[[joint]]
name = "j1"
type = "revolute"
origin = {{ xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = -180, max_deg = 180, velocity_deg_s = 90, acceleration_deg_s2 = 360 }}

[[joint]]
name = "j2"
type = "revolute"
origin = {{ xyz_mm = [{l1}, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = -180, max_deg = 180, velocity_deg_s = 90, acceleration_deg_s2 = 360 }}

[flange]
xyz_mm = [{l2}, 0, 0]
rpy_deg = [0, 0, 0]
"""


def planar_2r(l1_mm: float, l2_mm: float) -> Robot:
    return parse_robot_toml(PLANAR_2R.format(l1=l1_mm, l2=l2_mm))


def target_at(x: float, y: float, z: float = 0.0) -> np.ndarray:
    T = np.eye(4)
    T[:3, 3] = [x, y, z]
    return T[None]


def solve(robot: Robot, targets: np.ndarray, **kwargs: object):
    geometry = PlanarGeometry.from_robot(robot) or ScaraGeometry.from_robot(robot)
    assert geometry is not None
    return solve_planar(robot, geometry, targets, **kwargs)


# ---------------------------------------------------------------- planar 2R closed forms


def test_two_link_reference_example() -> None:
    robot = planar_2r(1000, 1000)
    result = solve(robot, target_at(0.366, 1.366))
    solutions = np.degrees(result.q[0, result.valid[0]])
    # closed form: L1 = L2 = 1, target (0.366, 1.366) = (cos 30 + cos 120, sin 30 + sin 120) -> (30, 90) deg on one
    # branch; the other branch mirrors the elbow across the line to the target:
    # theta1' = 2 atan2(1.366, 0.366) - 30 = 120 deg, theta2' = -90 deg (closed form)
    expected = {(30.0, 90.0), (120.0, -90.0)}
    found = {tuple(np.round(row, 1)) for row in solutions}
    assert found == expected
    for m in result.valid_solutions(0):
        label = result.branch_label(0, m)
        # elbow bent counter-clockwise (theta2 > 0) lies right of the line to the target,
        # seen from above (definition in posebridge.kinematics.branches)
        assert label == ("right" if result.q[0, m, 1] > 0 else "left")


def test_two_link_boundary_has_one_branch() -> None:
    robot = planar_2r(400, 300)
    direction = np.array([np.cos(0.4), np.sin(0.4)])
    result = solve(robot, target_at(*(0.7 * direction)))
    # closed form: on the outer boundary r = l1 + l2 one branch (stretched)
    assert result.valid[0].sum() == 1
    m = result.valid_solutions(0)[0]
    np.testing.assert_allclose(result.q[0, m], [0.4, 0.0], atol=1e-7)
    assert result.elbow[0, m] == 0


def test_two_link_inner_boundary_has_one_branch() -> None:
    robot = planar_2r(400, 300)
    result = solve(robot, target_at(0.1, 0.0))
    # closed form: on the inner boundary r = |l1 - l2| the arm is folded, q2 = pi
    assert result.valid[0].sum() == 1
    m = result.valid_solutions(0)[0]
    assert abs(np.cos(result.q[0, m, 1]) + 1.0) < 1e-12


@pytest.mark.parametrize("radius", [0.05, 0.75])
def test_two_link_outside_the_annulus_is_out_of_reach(radius: float) -> None:
    robot = planar_2r(400, 300)
    result = solve(robot, target_at(radius, 0.0))
    # closed form: reachable radii |l1 - l2| <= r <= l1 + l2 = [0.1, 0.7] m
    assert not result.valid.any()
    assert result.reason == (REASON_OUT_OF_REACH,)


def test_two_link_equal_links_target_at_the_base_takes_seed() -> None:
    robot = planar_2r(500, 500)
    result = solve(robot, target_at(0.0, 0.0), seed=np.array([0.8, 0.0]))
    # closed form: a full disk when l1 = l2; at r = 0 the arm is folded (q2 = pi) and
    # joint 1 is free: it keeps the seed
    m = result.valid_solutions(0)[0]
    assert result.q[0, m, 0] == pytest.approx(0.8)
    assert abs(np.cos(result.q[0, m, 1]) + 1.0) < 1e-12


def test_two_link_ignores_height_and_orientation() -> None:
    robot = planar_2r(1000, 1000)
    target = target_at(0.366, 1.366, z=0.5)
    target[0, :3, :3] = np.diag([1.0, -1.0, -1.0])
    result = solve(robot, target)
    assert result.ignored_components == ("z", "roll", "pitch", "yaw")
    # x and y still follow the closed-form example (30, 90) deg on one branch
    assert result.valid[0].sum() == 2
    reached = fk_tool(robot, result.q[0, result.valid[0]])
    np.testing.assert_allclose(reached[:, :2, 3], [[0.366, 1.366]] * 2, atol=1e-12)


# ---------------------------------------------------------------- bundled planar arms


@pytest.mark.parametrize("name", ["pb-planar2r", "pb-planar3r", "pb-scara4"])
def test_generating_configuration_is_found(name: str) -> None:
    robot = load_robot(name)
    q = np.random.default_rng(3).uniform(robot.lower, robot.upper, size=(3000, robot.dof))
    result = solve(robot, fk_tool(robot, q), seed=q)
    # closed form: the configuration that produced a pose solves it, and with itself as
    # the seed it comes first
    np.testing.assert_allclose(result.q[:, 0], q, atol=1e-9)


CONTROLLED = {
    "pb-planar2r": (slice(0, 2), None),
    "pb-planar3r": (slice(0, 2), "yaw"),
    "pb-scara4": (slice(0, 3), "yaw"),
}


@settings(derandomize=True, deadline=None, max_examples=40)
@given(
    name=st.sampled_from(sorted(CONTROLLED)),
    position=arrays(np.float64, (3,), elements=st.floats(-0.8, 0.8)),
    rpy=arrays(np.float64, (3,), elements=st.floats(-3.1, 3.1)),
)
def test_fk_matches_the_controlled_components(
    name: str, position: np.ndarray, rpy: np.ndarray
) -> None:
    robot = load_robot(name)
    T = np.eye(4)
    T[:3, 3] = position
    # a target with roll and pitch that the arm cannot follow (ignored components)
    T[:3, :3] = rotation_matrix_from_rpy(rpy)
    result = solve(robot, T[None])
    axes, angle = CONTROLLED[name]
    rows, slots = np.nonzero(result.valid)
    if not rows.size:
        assert result.reason[0] in (REASON_OUT_OF_REACH, REASON_ORIENTATION)
        return
    reached = fk_tool(robot, result.q[rows, slots])
    # reference: forward kinematics, compared on the controlled components only
    np.testing.assert_allclose(
        reached[:, axes, 3], np.repeat(T[None, axes, 3], rows.size, 0), atol=1e-9
    )
    if angle == "yaw":
        # heading: the rotation about z nearest R_target (module docstring); the bundled
        # arms have the TCP frame's z parallel to the base z, so the reached frame is
        # Rz(heading) R_tcp0 with heading = atan2(M10 - M01, M00 + M11), M = R R_tcp0^T
        R0 = fk_tool(robot, np.zeros((1, robot.dof)))[0, :3, :3]
        M = T[:3, :3] @ R0.T
        heading = np.arctan2(M[1, 0] - M[0, 1], M[0, 0] + M[1, 1])
        reached_m = reached[:, :3, :3] @ R0.T
        reached_heading = np.arctan2(reached_m[:, 1, 0], reached_m[:, 0, 0])
        difference = np.angle(np.exp(1j * (reached_heading - heading)))
        assert np.abs(difference).max() < 1e-9


def test_three_link_heading_with_flat_target_matches_yaw() -> None:
    robot = load_robot("pb-planar3r")
    q = np.array([[0.4, -0.8, 1.1]])
    target = fk_tool(robot, q)
    result = solve(robot, target)
    reached = fk_tool(robot, result.q[0, result.valid[0]])
    # reference: yaw of the roll-pitch-yaw decomposition (posebridge.transforms, the URDF
    # convention) of the reached and target orientations
    np.testing.assert_allclose(
        rpy_from_rotation_matrix(reached[:, :3, :3])[:, 2],
        rpy_from_rotation_matrix(target[0, :3, :3])[2],
        atol=1e-12,
    )


def test_three_link_orientation_not_reachable() -> None:
    robot = load_robot("pb-planar3r")
    # robots/pb-planar3r.toml: links 350, 300, 150 mm. The TCP at 0.75 m heading straight
    # away from the base puts joint 3 at 0.6 m (reachable), heading back towards the base
    # at 0.9 m > 0.65 m (not reachable), though the TCP itself is within 0.8 m
    away = target_at(0.75, 0.0)
    back = target_at(0.75, 0.0)
    back[0, :3, :3] = np.diag([-1.0, -1.0, 1.0])
    assert solve(robot, away).valid.any()
    result = solve(robot, back)
    assert not result.valid.any()
    assert result.reason == (REASON_ORIENTATION,)


def test_scara_quill_sets_the_height() -> None:
    robot = load_robot("pb-scara4")
    q = np.array([[0.3, 1.2, 0.15, -2.0]])
    target = fk_tool(robot, q)
    target[0, 2, 3] -= 0.02  # 20 mm lower: quill 20 mm further out (axis points down)
    result = solve(robot, target)
    assert result.ignored_components == ("roll", "pitch")
    m = result.valid_solutions(0)[0]
    # closed form: the quill (robots/pb-scara4.toml, axis [0, 0, -1]) moves the TCP down
    # by its stroke, so 20 mm lower is 20 mm more stroke
    assert result.q[0, m, 2] == pytest.approx(0.17, abs=1e-12)


def test_scara_labels_left_and_right() -> None:
    robot = load_robot("pb-scara4")
    q = np.array([[0.3, 1.2, 0.1, 0.0]])
    result = solve(robot, fk_tool(robot, q))
    labels = {result.branch_label(0, m) for m in result.valid_solutions(0)}
    # elbow bent counter-clockwise (q2 > 0, axes up) lies right of the line from axis 1
    # to the quill seen from above; the mirrored solution lies left
    assert labels == {"left", "right"}
    first = result.valid_solutions(0)
    right = next(m for m in first if result.branch_label(0, m) == "right")
    assert result.q[0, right, 1] > 0


@pytest.mark.parametrize("name", ["pb-arm6", "pb-gantry3", "pb-scara4", "pb-arm7"])
def test_planar_extractor_rejects_other_arms(name: str) -> None:
    # pb-scara4 has a prismatic joint (a SCARA, not a planar arm); the others are not
    # planar chains of two or three revolute joints about z
    assert PlanarGeometry.from_robot(load_robot(name)) is None


@pytest.mark.parametrize("name", ["pb-arm6", "pb-gantry3", "pb-planar2r", "pb-planar3r"])
def test_scara_extractor_rejects_other_arms(name: str) -> None:
    assert ScaraGeometry.from_robot(load_robot(name)) is None


def test_tilted_planar_arm_is_rejected() -> None:
    robot = planar_2r(400, 300)
    text = PLANAR_2R.format(l1=400, l2=300).replace("axis = [0, 0, 1]", "axis = [0, 1, 0]", 1)
    # joint 1 about y: the two axes are no longer parallel, not a planar arm in x-y
    assert PlanarGeometry.from_robot(parse_robot_toml(text)) is None
    assert PlanarGeometry.from_robot(robot) is not None


def test_continuous_joint_takes_the_revolution_nearest_the_seed() -> None:
    text = PLANAR_2R.format(l1=1000, l2=1000).replace(
        'type = "revolute"\norigin = { xyz_mm = [0, 0, 0]',
        'type = "revolute"\ncontinuous = true\norigin = { xyz_mm = [0, 0, 0]',
        1,
    )
    text = text.replace(
        "limits = { min_deg = -180, max_deg = 180, velocity_deg_s", "limits = { velocity_deg_s", 1
    )
    robot = parse_robot_toml(text)
    assert robot.continuous[0]
    seed = np.array([10.0, 1.0])
    result = solve(robot, target_at(0.366, 1.366), seed=seed)
    by_elbow = {np.sign(result.q[0, m, 1]): m for m in result.valid_solutions(0)}
    # closed-form example (cos 30 + cos 120, sin 30 + sin 120) = (0.366, 1.366): (30, 90) deg and the mirrored (120, -90) deg; a continuous
    # joint 1 has no limits, so each stores its angle plus the whole revolutions k nearest the
    # seed: round((10 - 0.5236) / 2 pi) = 2 and round((10 - 2.0944) / 2 pi) = 1
    up, down = by_elbow[1.0], by_elbow[-1.0]
    # (the reference target is rounded to 1 mm, hence the 1e-4 rad tolerance)
    assert result.q[0, up, 0] == pytest.approx(np.radians(30.0) + 4 * np.pi, abs=1e-4)
    assert result.q[0, down, 0] == pytest.approx(np.radians(120.0) + 2 * np.pi, abs=1e-4)
    assert (result.revolutions[0, up, 0], result.revolutions[0, down, 0]) == (2, 1)
    assert result.within_limits[0, up]
    assert result.within_limits[0, down]
