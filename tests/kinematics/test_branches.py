"""Tests of posebridge.kinematics.branches (plain-word branch labels of any arm).

References: pinocchio joint placements of robots/pb-arm6.urdf with the label
definitions re-implemented here in numpy, and closed forms from the robot
files written beside the checks.
"""

from __future__ import annotations

import numpy as np
import pinocchio as pin
import pytest

from posebridge.kinematics.branches import branch_geometry, label_branches, labels_match
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot

URDF_PATH = data_folder("robots") / "pb-arm6.urdf"


def test_pb_arm6_hand_cases() -> None:
    robot = load_robot("pb-arm6")
    q3_stretched = np.arctan2(-0.627, 0.097)
    q = np.array(
        [
            [0, 0, 0, 0, 0.5, 0],
            [0, 0, 0, 0, -0.5, 0],
            [0, 0, 0, 0, 0, 0],
            [np.pi, 0, -np.pi, 0, 0.5, 0],
            [0, 0, q3_stretched - 0.2, 0, 0.5, 0],
            [0, 0, q3_stretched + 0.2, 0, 0.5, 0],
        ]
    )
    shoulder, elbow, wrist = label_branches(robot, q)
    # robots/pb-arm6.toml at q = 0: wrist centre 143 + 268 + 359 mm in front of axis 1
    # (front), elbow (axis 3) above the line from the shoulder to the wrist centre
    # (forearm horizontal, upper arm vertical: up); joint 5 at +-0.5 rad: positive/negative;
    # at 0 the wrist is straight (0)
    assert shoulder.tolist()[:3] == [1, 1, 1]
    assert elbow.tolist()[:3] == [1, 1, 1]
    assert wrist.tolist()[:3] == [1, -1, 0]
    # joint 1 at 180 deg and the forearm pointing backwards (q3 = -180 deg): the wrist
    # centre is 627 - 143 mm behind axis 1 in the turned arm plane: back
    assert shoulder[3] == -1
    # closed form: the forearm (627 mm along, 97 mm above axis 3) lines up with the
    # upper arm at q3 = atan2(-0.627, 0.097); beyond it (more negative) the elbow is down
    assert elbow[4] == -1
    assert elbow[5] == 1


def _pin_labels(q: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The module docstring's definitions, computed from pinocchio joint placements."""
    model = pin.buildModelFromXML(URDF_PATH.read_text(encoding="utf-8"))
    data = model.createData()

    def placements(row: np.ndarray):
        # joint origins (oMi) and joint axes in the world frame (angular rows of the joint
        # Jacobian in the world frame, pinocchio's computeJointJacobians)
        J = pin.computeJointJacobians(model, data, row)
        points = {model.names[j]: data.oMi[j].translation.copy() for j in range(1, model.njoints)}
        axes = {
            model.names[j]: J[3:, model.joints[j].idx_v].copy() for j in range(1, model.njoints)
        }
        return points, axes

    points0, axes0 = placements(np.zeros(6))
    forward0 = np.cross(axes0["j2"], axes0["j1"])
    forward_sign = 1.0 if (points0["j5"] - points0["j1"]) @ forward0 > 0 else -1.0
    up_sign = 1.0 if points0["j2"] @ axes0["j1"] > 0 else -1.0
    shoulder, elbow, wrist = [], [], []
    for row in q:
        points, axes = placements(row)
        forward = forward_sign * np.cross(axes["j2"], axes["j1"])
        forward /= np.linalg.norm(forward)
        up = up_sign * axes["j1"]

        def plane(p, points=points, forward=forward, up=up):
            d = p - points["j1"]
            return np.array([d @ forward, d @ up])

        s, e, w = plane(points["j2"]), plane(points["j3"]), plane(points["j5"])
        front = np.sign(w[0])
        shoulder.append(front)
        v, u = w - s, e - s
        elbow.append(np.sign(front * (v[0] * u[1] - v[1] * u[0])))
        wrist.append(np.sign(np.sin(row[4])))
    return np.array(shoulder), np.array(elbow), np.array(wrist)


def test_pb_arm6_labels_match_pinocchio_geometry() -> None:
    robot = load_robot("pb-arm6")
    q = np.random.default_rng(11).uniform(robot.lower, robot.upper, size=(300, 6))
    expected = _pin_labels(q)
    labels = label_branches(robot, q)
    # reference: pinocchio joint placements (robots/pb-arm6.urdf, a file with different
    # joint frames and axis signs than the TOML) with the definitions re-implemented above
    for got, want in zip(labels, expected, strict=True):
        np.testing.assert_array_equal(got, want)


def test_offset_wrist_front_and_back_are_measured_at_the_wrist_point(offset_wrist_arm) -> None:
    arm = offset_wrist_arm(np.random.default_rng(21))
    model = pin.buildModelFromXML(arm.urdf)
    data = model.createData()

    def forward_of_wrist_point(row: np.ndarray) -> float:
        # pinocchio joint placements and world axes (angular rows of the joint Jacobian);
        # the wrist point is the point of axis 5 nearest axis 6, which it meets
        J = pin.computeJointJacobians(model, data, row)
        origin = [data.oMi[j].translation for j in range(1, 7)]
        axis = [J[3:, model.joints[j].idx_v] for j in range(1, 7)]
        point = origin[4] - ((origin[4] - origin[5]) @ axis[4]) * axis[4]
        forward = np.cross(axis[1], axis[0])
        return float((point - origin[0]) @ forward / np.linalg.norm(forward))

    sign_at_zero = np.sign(forward_of_wrist_point(np.zeros(6)))
    q = np.random.default_rng(22).uniform(-np.pi, np.pi, size=(200, 6))
    expected = [np.sign(sign_at_zero * forward_of_wrist_point(row)) for row in q]
    shoulder, _, _ = label_branches(arm.robot, q)
    # reference: the module docstring's definition re-implemented on pinocchio placements
    # of the generated URDF (forward flipped so that the arm is in front at zero)
    np.testing.assert_array_equal(shoulder, expected)


def test_planar_two_link_left_and_right() -> None:
    robot = load_robot("pb-planar2r")
    q = np.array([[0.3, 0.8], [0.3, -0.8], [1.0, 0.0], [-2.0, 2.5]])
    shoulder, elbow, wrist = label_branches(robot, q)
    # closed form: cross(flange, elbow) . z = -l1 l2 sin(q2), so the elbow is left of the
    # line to the flange (+1) when q2 < 0, right (-1) when q2 > 0, in line when q2 = 0
    assert elbow.tolist() == [-1, 1, 0, -1]
    assert not shoulder.any()
    assert not wrist.any()
    assert branch_geometry(robot).scheme == "planar"


def test_seven_axis_wrist_is_joint_6() -> None:
    robot = load_robot("pb-arm7")
    q = np.zeros((3, 7))
    q[:, 5] = [0.4, -0.4, 0.0]
    q[:, 3] = -1.0
    _, _, wrist = label_branches(robot, q)
    # robots/pb-arm7.toml (modified DH, alpha -90 then +90 around joint 6): axes 5 and 7
    # are parallel at q6 = 0, so the wrist bend is q6 itself
    assert wrist.tolist() == [1, -1, 0]
    assert branch_geometry(robot).wrist_joint == 5


def test_gantry_has_no_branches() -> None:
    robot = load_robot("pb-gantry3")
    labels = label_branches(robot, np.zeros((2, 4)))
    assert branch_geometry(robot).scheme == "none"
    for values in labels:
        assert values.tolist() == [0, 0]


def test_bad_shape_is_refused() -> None:
    with pytest.raises(KinematicsInputError, match=r"expected shape \(N, 6\)"):
        label_branches(load_robot("pb-arm6"), np.zeros((2, 5)))


def test_labels_match_treats_zero_on_either_side_as_either_sign() -> None:
    # The documented matching rule (a 0 label, singular or "either", matches +1 and -1;
    # common practice, no source), written out case by case.
    labels = np.array([[1, 1, 1], [1, -1, 1], [0, -1, 1], [-1, 0, 0], [1, 1, -1]], dtype=np.int8)
    required = np.array([1, 0, 1], dtype=np.int8)
    assert labels_match(labels, required).tolist() == [True, True, True, False, False]
    # broadcast over a batch of requirements, last axis the triple
    assert labels_match(labels[:, None, :], [[1, 1, 1], [0, 0, 0]]).shape == (5, 2)
    assert labels_match(labels[:, None, :], [[1, 1, 1], [0, 0, 0]])[:, 1].all()
