"""The IK finishing step on its own: raw candidates -> sorted slots with revolution variants,
limit flags and reasons (rules of posebridge.kinematics.ik.finishing, checked in closed form)."""

from __future__ import annotations

import numpy as np

from posebridge.kinematics.ik.finishing import finish_solutions
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS, REASON_OUT_OF_REACH
from posebridge.robot.library import load_robot

TWO_PI = 2.0 * np.pi
NO_LABELS = (np.zeros((1, 1)), np.zeros((1, 1)), np.zeros((1, 1)))


def _candidate(j3: float = 0.0, j6: float = 0.3) -> np.ndarray:
    return np.array([[[0.0, 0.0, j3, 0.0, 0.5, j6]]])


def test_one_slot_per_candidate_nearest_zero_revolution() -> None:
    robot = load_robot("pb-arm6")
    # j6 given a revolution too far: wrapped to (-pi, pi], the in-limit value nearest zero kept
    result = finish_solutions(
        robot, _candidate(j6=0.3 + TWO_PI), [[True]], labels=NO_LABELS, method="test"
    )
    assert result.q.shape == (1, 1, 6)
    assert np.isclose(result.q[0, 0, 5], 0.3)  # closed form: 0.3 + 2 pi wrapped
    assert result.revolutions[0, 0, 5] == 0
    assert result.valid[0, 0]
    assert result.within_limits[0, 0]
    assert result.reason == ("",)


def test_all_revolutions_lists_every_in_limit_variant() -> None:
    robot = load_robot("pb-arm6")
    result = finish_solutions(
        robot, _candidate(j6=0.3), [[True]], labels=NO_LABELS, all_revolutions=True, method="test"
    )
    values = result.q[0, result.valid[0], 5]
    # closed form: 0.3 + 2 pi k inside j6's limits (range read from pb-arm6.toml)
    k = np.arange(-3, 4)
    expected = 0.3 + TWO_PI * k
    expected = expected[(expected >= robot.lower[5]) & (expected <= robot.upper[5])]
    assert np.allclose(np.sort(values), np.sort(expected))
    mid = 0.5 * (robot.lower[5] + robot.upper[5])
    counts = result.revolutions[0, result.valid[0], 5]
    # documented rule: revolutions = floor((q - mid) / 2 pi + 1/2)
    assert np.array_equal(counts, np.floor((values - mid) / TWO_PI + 0.5).astype(np.int16))


def test_outside_limits_sorts_after_within_and_names_the_reason() -> None:
    robot = load_robot("pb-arm6")
    beyond_j3 = robot.upper[2] + 0.2  # past j3's upper limit (range read from pb-arm6.toml)
    q_raw = np.concatenate([_candidate(j3=beyond_j3), _candidate()], axis=1)
    labels = (np.zeros((1, 2)), np.zeros((1, 2)), np.zeros((1, 2)))
    result = finish_solutions(robot, q_raw, [[True, True]], labels=labels, method="test")
    assert list(result.within_limits[0]) == [True, False]  # module rule: in limits first
    assert np.isclose(result.q[0, 1, 2], beyond_j3)
    only_outside = finish_solutions(
        robot, _candidate(j3=beyond_j3), [[True]], labels=NO_LABELS, method="test"
    )
    assert only_outside.reason == (REASON_NO_WITHIN_LIMITS,)


def test_candidates_that_miss_the_pose_leave_empty_slots() -> None:
    robot = load_robot("pb-arm6")
    result = finish_solutions(robot, _candidate(), [[False]], labels=NO_LABELS, method="test")
    assert not result.valid[0, 0]
    assert not result.within_limits[0, 0]
    assert np.all(np.isnan(result.q[0, 0]))  # module rule: empty slots hold NaN
    assert result.branch_label(0, 0) == ""
    assert result.reason == (REASON_OUT_OF_REACH,)
