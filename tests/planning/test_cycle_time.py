"""Cycle time: synchronised joint moves and capped linear moves against closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.cycle_time import (
    BLEND_NOTE,
    joint_move_duration,
    joint_move_durations,
    path_cycle_time,
)
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.planning.time_scaling import joint_move
from posebridge.results.path_check import path_check_result
from posebridge.robot.library import load_robot


def gantry_cell(waypoints: list[dict[str, object]]) -> Scene:
    """pb-gantry3 (x and y travel 1500 mm/s, 3000 mm/s^2) with one path and no fixtures."""
    data = {
        "robot": {"name": "pb-gantry3"},
        "paths": [{"name": "line", "waypoints": waypoints}],
    }
    return resolve_scene(validate_cell(data))


def down(x_mm: float, *, motion: str = "linear", **speed: float) -> dict[str, object]:
    """A pose waypoint 1000 mm above the floor at y = 500 mm, tool pointing down."""
    return {
        "pose": {"position_mm": [x_mm, 500.0, 1000.0], "rpy_deg": [180.0, 0.0, 0.0]},
        "motion": motion,
        **speed,
    }


def test_trapezoid_closed_forms() -> None:
    # closed form (cycle time d/v + v/a, Lynch & Park, Modern Robotics, sec. 9.2.2.2): v_max = 1, a_max = 2: distance 1 -> 1.5 s, distance 0.25 ->
    # triangular 2 sqrt(0.25 / 2) = 0.7071 s
    durations = joint_move_durations([[0.0], [0.0]], [[1.0], [0.25]], [1.0], [2.0], [100.0, 100.0])
    assert durations[0] == pytest.approx(1.5, abs=1e-12)
    assert durations[1] == pytest.approx(2.0 * math.sqrt(0.25 / 2.0), abs=1e-12)


def test_speed_percent_stretches_time() -> None:
    # closed form: at 50 % the limits are v = 0.5, a = 0.5 (k, k^2), so distance 1 takes
    # 1 / 0.5 + 0.5 / 0.5 = 3 s, twice the 100 % time (time scaling s(k t), Lynch & Park sec. 9.2)
    durations = joint_move_durations([[0.0]], [[1.0]], [1.0], [2.0], [50.0])
    assert durations[0] == pytest.approx(3.0, abs=1e-12)


def test_joint_move_duration_of_a_six_axis_arm() -> None:
    robot = load_robot("pb-arm6")
    q_end = np.zeros(6)
    q_end[0] = np.radians(90.0)
    # closed form (Lynch & Park sec. 9.2.2.2): only j1 moves 90 deg with 143 deg/s and
    # 520 deg/s^2 (robots/pb-arm6.toml); 90 >= 143^2 / 520, so T = 90 / 143 + 143 / 520 s;
    # at 50 % twice that
    expected = 90.0 / 143.0 + 143.0 / 520.0
    assert joint_move_duration(robot, np.zeros(6), q_end, 100.0) == pytest.approx(expected)
    assert joint_move_duration(robot, np.zeros(6), q_end, 50.0) == pytest.approx(2 * expected)


@settings(derandomize=True, deadline=None, max_examples=40)
@given(
    st.lists(st.floats(-3.0, 3.0), min_size=3, max_size=3),
    st.lists(st.floats(-3.0, 3.0), min_size=3, max_size=3),
    st.floats(1.0, 100.0),
)
def test_batched_durations_match_the_synchronised_move(
    start: list[float], end: list[float], percent: float
) -> None:
    v = np.array([2.0, 1.5, 3.0])
    a = np.array([5.0, 9.0, 4.0])
    # reference: posebridge.planning.time_scaling.joint_move (tested against Lynch & Park and
    # Biagiotti & Melchiorri closed forms in tests/planning/test_time_scaling.py)
    reference = joint_move(start, end, v, a, speed_percent=percent).duration
    batched = joint_move_durations([start], [end], v, a, [percent])[0]
    assert batched == pytest.approx(reference, rel=1e-9, abs=1e-12)


def test_linear_move_at_constant_requested_speed() -> None:
    scene = gantry_cell(
        [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=250.0)]
    )
    timing = path_cycle_time(scene.robot, sample_path(scene, 0), linear_acceleration_m_s2=2.0)
    line = timing.segments[0]
    # closed form (Lynch & Park sec. 9.2.2.2): 0.5 m at 0.25 m/s with 2 m/s^2 (below the x
    # axis' 3 m/s^2): 0.5 / 0.25 + 0.25 / 2 = 2.125 s; not capped (the x axis allows 1.5 m/s)
    assert line.duration == pytest.approx(2.125, abs=1e-9)
    assert not line.speed_capped
    # closed form: moving along x needs dq_x/ds = 1, so the cap is the x axis' 1500 mm/s
    assert line.speed_cap == pytest.approx(1.5, abs=1e-9)


def test_linear_move_capped_by_joint_velocity() -> None:
    scene = gantry_cell(
        [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=2000.0)]
    )
    report = path_check_result(check_path(scene, 0))
    segment = report.segments[0]
    assert segment.speed_capped
    # closed form: dq_x/ds = 1 caps the speed at the x axis' 1500 mm/s; with 2 m/s^2 the
    # 0.5 m profile is triangular (1.5^2 / 2 > 0.5): 2 sqrt(0.5 / 2) = 1.0 s
    assert segment.speed_cap_mm_s == pytest.approx(1500.0, abs=1e-6)
    assert segment.duration_s == pytest.approx(1.0, abs=1e-9)
    assert segment.limiting_joint == "x"


def test_cycle_time_is_the_sum_of_rest_to_rest_segments() -> None:
    scene = gantry_cell(
        [
            down(500.0, motion="joint", speed_percent=100.0),
            down(1000.0, motion="joint", speed_percent=50.0),
            down(500.0, speed_mm_s=250.0),
        ]
    )
    report = path_check_result(check_path(scene, 0))
    # closed forms: the joint move is x: 0.5 m at 50 % of 1.5 m/s and 3 m/s^2 (0.75 m/s,
    # 0.75 m/s^2): 0.5 < 0.75^2 / 0.75, triangular 2 sqrt(0.5 / 0.75) s; the linear move back
    # 0.5 / 0.25 + 0.25 / 2 s (Lynch & Park sec. 9.2.2.2); no blend shortens them
    joint = 2.0 * math.sqrt(0.5 / 0.75)
    assert report.segments[0].duration_s == pytest.approx(joint, abs=1e-9)
    assert report.cycle_time_s == pytest.approx(joint + 2.125, abs=1e-9)
    assert report.blend_note == BLEND_NOTE


def test_jerk_limit_lengthens_the_linear_move() -> None:
    scene = gantry_cell(
        [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=250.0)]
    )
    report = path_check_result(check_path(scene, 0, linear_jerk_m_s3=100.0))
    # closed form (Biagiotti & Melchiorri 2008, sec. 3.4): v j = 25 >= a^2 = 4 and
    # h = 0.5 >= v (a / j + v / a), so all three limits are reached and the double-S profile
    # lasts h / v + v / a + a / j = 0.5 / 0.25 + 0.25 / 2 + 2 / 100 s
    assert report.segments[0].duration_s == pytest.approx(2.0 + 0.125 + 0.02, abs=1e-9)
    assert report.jerk_limited


def test_bad_speed_percent_is_refused() -> None:
    with pytest.raises(PlanningInputError, match="speed_percent"):
        joint_move_durations([[0.0]], [[1.0]], [1.0], [1.0], [0.0])
