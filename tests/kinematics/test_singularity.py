"""Tests of posebridge.kinematics.singularity (wrist, elbow, shoulder singularities).

References: closed forms from robots/pb-arm6.toml written beside the checks,
pinocchio joint placements of robots/pb-arm6.urdf, scipy root finding, and
the Jacobian rank (numpy SVD of posebridge's geometric Jacobian) at exact
singularities.
"""

from __future__ import annotations

import numpy as np
import pinocchio as pin
import pytest
from scipy.optimize import brentq

from posebridge.kinematics.fk import KinematicsInputError
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.kinematics.singularity import SingularityThresholds, classify_singularity
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot

URDF_PATH = data_folder("robots") / "pb-arm6.urdf"
Q3_STRETCHED = np.arctan2(-0.627, 0.097)
"""pb-arm6: forearm (627 mm along, 97 mm above axis 3) in line with the upper arm."""


def _q3_wrist_centre_on_axis_1() -> float:
    # with q2 = 0 the wrist centre is 0.143 + 0.627 cos(q3) + 0.097 sin(q3) in front of
    # axis 1 (robots/pb-arm6.toml); scipy finds the root
    return float(
        brentq(lambda t: 0.143 + 0.627 * np.cos(t) + 0.097 * np.sin(t), -np.pi, -np.pi / 2)
    )


@pytest.fixture(scope="module")
def arm6():
    return load_robot("pb-arm6")


def test_distances_from_closed_forms(arm6) -> None:
    q = np.array(
        [
            [0.1, 0.2, -0.3, 0.4, 0.35, 0.5],
            [0.1, 0.3, Q3_STRETCHED + 0.02, 0.4, 0.8, 0.5],
            [0.1, 0.0, _q3_wrist_centre_on_axis_1(), 0.4, 0.8, 0.5],
        ]
    )
    report = classify_singularity(arm6, q)
    # wrist: joint 5 of pb-arm6 is straight at 0, so the bend is q5 itself
    assert report.wrist_rad[0] == pytest.approx(0.35)
    assert report.wrist_sin[0] == pytest.approx(np.sin(0.35))
    # elbow: 0.02 rad past the stretched q3 = atan2(-0.627, 0.097)
    assert report.elbow_rad[1] == pytest.approx(0.02, abs=1e-9)
    # shoulder: the wrist centre on axis 1 (root found by scipy above)
    assert report.shoulder_m[2] == pytest.approx(0.0, abs=1e-9)
    assert report.label == ("none", "elbow", "shoulder")


def test_exact_singularities_lose_jacobian_rank(arm6) -> None:
    q = np.array(
        [
            [0.1, 0.2, -0.3, 0.4, 0.0, 0.5],
            [0.1, 0.3, Q3_STRETCHED, 0.4, 0.8, 0.5],
            [0.1, 0.0, _q3_wrist_centre_on_axis_1(), 0.4, 0.8, 0.5],
        ]
    )
    report = classify_singularity(arm6, q)
    assert report.label == ("wrist", "elbow", "shoulder")
    # reference: the geometric Jacobian is rank deficient at each (smallest singular
    # value by numpy SVD; Siciliano et al., sec. 3.3)
    smallest = np.linalg.svd(jacobian_base(arm6, q), compute_uv=False)[:, -1]
    assert np.all(smallest < 1e-8)


def test_shoulder_distance_matches_pinocchio(arm6) -> None:
    model = pin.buildModelFromXML(URDF_PATH.read_text(encoding="utf-8"))
    data = model.createData()
    q = np.random.default_rng(5).uniform(arm6.lower, arm6.upper, size=(100, 6))
    expected = []
    for row in q:
        pin.forwardKinematics(model, data, row)
        centre = data.oMi[model.getJointId("j5")].translation  # axes 4, 5, 6 meet here
        expected.append(np.hypot(centre[0], centre[1]))  # axis 1 is the base z axis
    report = classify_singularity(arm6, q)
    # reference: pinocchio placement of the wrist centre; pb-arm6 has no lateral offset,
    # so the distance from the shoulder plane is the distance from axis 1
    np.testing.assert_allclose(report.shoulder_m, expected, atol=1e-12)


def test_thresholds_decide_the_class(arm6) -> None:
    q = np.array([[0.1, 0.2, -0.3, 0.4, np.radians(7.0), 0.5]])
    assert classify_singularity(arm6, q).label == ("wrist",)  # default wrist 10 deg
    narrow = SingularityThresholds(wrist_rad=np.radians(5.0))
    report = classify_singularity(arm6, q, narrow)
    assert report.label == ("none",)
    assert not report.near_wrist[0]


def test_nearest_kind_wins(arm6) -> None:
    # wrist 2 deg (ratio 0.2 of 10 deg) and elbow 4 deg (0.8 of 5 deg): wrist is nearer
    q = np.array([[0.1, 0.3, Q3_STRETCHED + np.radians(4.0), 0.4, np.radians(2.0), 0.5]])
    report = classify_singularity(arm6, q)
    assert report.near_wrist[0]
    assert report.near_elbow[0]
    assert report.label == ("wrist",)


def test_bad_thresholds_and_robots(arm6) -> None:
    with pytest.raises(KinematicsInputError, match=r"thresholds\.elbow_rad"):
        classify_singularity(arm6, np.zeros((1, 6)), SingularityThresholds(elbow_rad=0.0))
    with pytest.raises(KinematicsInputError, match="six- and seven-axis arms"):
        classify_singularity(load_robot("pb-scara4"), np.zeros((1, 4)))
