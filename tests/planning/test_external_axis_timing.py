"""Cycle time with external axes: a track-only move against the trapezoid closed form
(Lynch & Park, *Modern Robotics*, sec. 9.2.2.2: ``T = D / v + v / a`` when ``D >= v^2 / a``,
else ``T = 2 sqrt(D / a)``)."""

from __future__ import annotations

import math

import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.planning.blended_timing import blended_cycle_time, sample_motion
from posebridge.planning.cycle_time import ExternalAxisMotion, path_cycle_time
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result

DEMO = data_folder("robots") / "demo-track-cell.json"
SPEED_M_S = 1.5  # the demo track's 1500 mm/s
ACCEL_M_S2 = 1.8  # and 1800 mm/s^2


@pytest.mark.parametrize(
    ("travel_mm", "percent"), [(2000.0, 100.0), (500.0, 100.0), (3000.0, 50.0)]
)
def test_track_only_move_is_the_trapezoid_closed_form(travel_mm: float, percent: float) -> None:
    cell = load_cell(DEMO)
    robot_joints = [10.0, -20.0, 30.0, 0.0, 45.0, 0.0]
    waypoints = [
        {"joints_deg": [*robot_joints, 200.0, 0.0], "motion": "joint", "speed_percent": 100.0},
        {
            "joints_deg": [*robot_joints, 200.0 + travel_mm, 0.0],
            "motion": "joint",
            "speed_percent": percent,
        },
    ]
    data = cell.model_dump(mode="json")
    data["paths"] = [{"name": "slide", "waypoints": waypoints}]
    scene = resolve_scene(type(cell).model_validate(data), DEMO)
    sampled = sample_path(scene, 0)
    external = ExternalAxisMotion(
        scene.paths[0].external, scene.external.velocity_max, scene.external.acceleration_max
    )
    timing = path_cycle_time(scene.robot, sampled, external=external)
    k = percent / 100.0
    v, a, d = SPEED_M_S * k, ACCEL_M_S2 * k * k, travel_mm / 1000.0
    expected = d / v + v / a if d >= v * v / a else 2.0 * math.sqrt(d / a)  # closed form
    assert timing.segments[0].duration == pytest.approx(expected, rel=1e-12)
    # without the external axes the robot does not move: zero duration (closed form)
    assert path_cycle_time(scene.robot, sampled).segments[0].duration == 0.0
    # the blended timing of a one-segment path is its rest-to-rest move, track included
    blended = blended_cycle_time(scene, sampled)
    assert blended.total == pytest.approx(expected, rel=1e-12)  # closed form above
    motion = sample_motion(blended, 0.01)
    assert motion.t[-1] == pytest.approx(expected, rel=1e-12)  # the arm waits for the track


def test_demo_path_reaches_the_mill_at_its_pinned_track_value() -> None:
    scene = resolve_scene(load_cell(DEMO), DEMO)
    report = path_check_result(check_path(scene, 0))
    # demo notes: the mill is reachable only with the track moved; the path pins it at 3300 mm
    assert not [f for f in report.findings if f.severity == "error"]
    assert scene.paths[0].external[-1, 0] == pytest.approx(3.3)  # the pin, in m
    # closed form: the joint move into "joints #4" is track-only, 3500 mm at 1500 mm/s, 1800 mm/s^2
    d, v, a = 3.5, SPEED_M_S, ACCEL_M_S2
    assert report.segments[2].duration_s >= d / v + v / a - 1e-9
    assert report.segments[2].blended_duration_s >= d / v + v / a - 1e-9  # blended too


def test_linear_move_waits_for_the_track_in_the_blended_motion() -> None:
    cell = load_cell(DEMO)
    robot_joints = [10.0, -20.0, 30.0, 0.0, 45.0, 0.0]
    waypoints = [
        {"joints_deg": [*robot_joints, 200.0, 0.0], "motion": "joint", "speed_percent": 100.0},
        {"joints_deg": [*robot_joints, 2200.0, 0.0], "motion": "linear", "speed_mm_s": 5000.0},
    ]
    data = cell.model_dump(mode="json")
    data["paths"] = [{"name": "glide", "waypoints": waypoints}]
    scene = resolve_scene(type(cell).model_validate(data), DEMO)
    sampled = sample_path(scene, 0)
    # the arm rides the track 2 m with its joints still: the TCP's own trapezoid (2 m at
    # 5 m/s and 2 m/s^2: triangular, 2 sqrt(2 / 2) = 2 s) is shorter than the track's
    # (2 / 1.5 + 1.5 / 1.8 = 2.17 s), both closed form (Lynch & Park, sec. 9.2.2.2)
    d, v, a = 2.0, SPEED_M_S, ACCEL_M_S2
    expected = d / v + v / a
    assert 2.0 * math.sqrt(d / 2.0) < expected
    blended = blended_cycle_time(scene, sampled)
    assert blended.total == pytest.approx(expected, rel=1e-12)
    motion = sample_motion(blended, 0.01)
    assert motion.t[-1] == pytest.approx(expected, rel=1e-12)  # the profile stretched to it
    # the arm's joints stand still all along (they are the same at both ends)
    assert float(abs(motion.qdot).max()) == pytest.approx(0.0, abs=1e-9)
