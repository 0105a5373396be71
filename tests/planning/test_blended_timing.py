"""Blended timing: closed forms, toppra run on its own constraints, never slower than rest to rest."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
import toppra
from hypothesis import given, settings
from hypothesis import strategies as st
from toppra import constraint as toppra_constraint

from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.blended_timing import (
    BlendedCycleTime,
    blended_cycle_time,
    sample_motion,
    time_optimal_parameterization,
)
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result, render_path_check

UNIT_RAD_DEG = math.degrees(1.0)

TWO_AXIS_ARM = f"""
schema_version = 1
[robot]
name = "test-unit-limits-2r"
kind = "planar_2r"
convention = "origin_axis"

[[joint]]
name = "j1"
type = "revolute"
origin = {{ xyz_mm = [0, 0, 500], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = -170, max_deg = 170, velocity_deg_s = {UNIT_RAD_DEG!r}, acceleration_deg_s2 = {2 * UNIT_RAD_DEG!r} }}

[[joint]]
name = "j2"
type = "revolute"
origin = {{ xyz_mm = [600, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = -170, max_deg = 170, velocity_deg_s = 90, acceleration_deg_s2 = 300 }}

[flange]
xyz_mm = [400, 0, 0]
rpy_deg = [0, 0, 0]
"""
"""An invented planar arm whose first joint has v_max = 1 rad/s and a_max = 2 rad/s^2."""

GANTRY = """
schema_version = 1
[robot]
name = "test-gantry"
kind = "gantry"
convention = "origin_axis"

[[joint]]
name = "x"
type = "prismatic"
origin = { xyz_mm = [0, 0, 1500], rpy_deg = [0, 0, 0] }
axis = [1, 0, 0]
limits = { min_mm = 0, max_mm = 3000, velocity_mm_s = 1200, acceleration_mm_s2 = 2500 }

[[joint]]
name = "y"
type = "prismatic"
origin = { xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_mm = 0, max_mm = 2000, velocity_mm_s = 900, acceleration_mm_s2 = 2000 }

[[joint]]
name = "z"
type = "prismatic"
origin = { xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, -1]
limits = { min_mm = 0, max_mm = 900, velocity_mm_s = 600, acceleration_mm_s2 = 1500 }

[flange]
xyz_mm = [0, 0, 0]
rpy_deg = [180, 0, 0]
"""
"""An invented three-axis gantry (tool pointing down); its joint paths of linear moves are straight."""


def cell(robot_toml: str, waypoints: list[dict[str, object]]) -> Scene:
    data = {"robot": {"toml": robot_toml}, "paths": [{"name": "p", "waypoints": waypoints}]}
    return resolve_scene(validate_cell(data))


def joints(values_deg: list[float], *, blend_mm: float = 0.0, percent: float = 100.0) -> dict:
    return {
        "joints_deg": values_deg,
        "motion": "joint",
        "speed_percent": percent,
        "blend_mm": blend_mm,
    }


def point(x_mm: float, y_mm: float, z_mm: float, **move: object) -> dict:
    return {"pose": {"position_mm": [x_mm, y_mm, z_mm], "rpy_deg": [180.0, 0.0, 0.0]}, **move}


def timed(scene: Scene) -> BlendedCycleTime:
    return blended_cycle_time(scene, sample_path(scene, 0), linear_acceleration_m_s2=2.0)


@pytest.mark.parametrize(("distance", "expected"), [(1.0, 1.5), (0.25, 2.0 * math.sqrt(0.125))])
def test_single_joint_move_matches_the_trapezoid(distance: float, expected: float) -> None:
    end = math.degrees(distance)
    # closed form (Lynch & Park, Modern Robotics, sec. 9.2.2.2): v_max = 1,
    # a_max = 2: distance 1 -> 1 / 1 + 1 / 2 = 1.5 s; distance 0.25 -> triangular
    # 2 sqrt(0.25 / 2) = 0.7071 s
    stop = timed(cell(TWO_AXIS_ARM, [joints([0.0, 30.0]), joints([end, 30.0])]))
    assert stop.total == pytest.approx(expected, abs=1e-12)
    # the same line split in two joint moves, blended in the middle: the rounded corner of two
    # collinear lines is the line itself, so TOPP-RA must find the same trapezoid
    halves = cell(
        TWO_AXIS_ARM,
        [joints([0.0, 30.0]), joints([end / 2, 30.0], blend_mm=50.0), joints([end, 30.0])],
    )
    blended = timed(halves)
    assert blended.blended.tolist() == [False, True, False]
    assert blended.total == pytest.approx(expected, rel=2e-3)
    assert blended.total <= blended.rest_to_rest_total


def test_collinear_linear_moves_follow_the_tcp_trapezoid() -> None:
    scene = cell(
        GANTRY,
        [
            point(500.0, 800.0, 600.0, motion="joint", speed_percent=100.0),
            point(1000.0, 800.0, 600.0, motion="linear", speed_mm_s=250.0, blend_mm=40.0),
            point(1500.0, 800.0, 600.0, motion="linear", speed_mm_s=250.0),
        ],
    )
    timing = timed(scene)
    # closed form (Lynch & Park sec. 9.2.2.2) of one straight 1 m line at the 0.25 m/s TCP speed
    # and 2 m/s^2 path acceleration (the x axis allows 1.2 m/s and 2.5 m/s^2):
    # 1 / 0.25 + 0.25 / 2 = 4.125 s; rest to rest it is two 0.5 m trapezoids, 2 x 2.125 s
    assert timing.total == pytest.approx(4.125, rel=2e-3)
    assert timing.rest_to_rest_total == pytest.approx(4.25, abs=1e-9)
    samples = sample_motion(timing, 0.004)
    tcp_speed = np.linalg.norm(samples.qdot, axis=1)  # closed form: the gantry's TCP moves as q
    assert np.max(tcp_speed) <= 0.25 * 1.002
    # source: the cell file, the TCP passes the middle waypoint without stopping
    middle = np.argmin(np.abs(samples.q[:, 0] - 1.0))
    assert tcp_speed[middle] == pytest.approx(0.25, rel=2e-3)


def test_against_toppra_on_its_documented_kinematic_example() -> None:
    # toppra's documented kinematic example (from memory: a random 7-joint spline through 5 way
    # points, random velocity and acceleration limits, seidel solver, rest to rest), run here
    # with toppra's own joint constraints as the reference
    rng = np.random.default_rng(9)
    dof = 7
    path = toppra.SplineInterpolator(np.linspace(0.0, 1.0, 5), rng.standard_normal((5, dof)))
    velocity = rng.random(dof) * 20 + 1.0
    acceleration = rng.random(dof) * 2 + 0.5
    grid = np.linspace(0.0, 1.0, 201)
    reference = toppra.algorithm.TOPPRA(
        [
            toppra_constraint.JointVelocityConstraint(np.vstack([-velocity, velocity]).T),
            toppra_constraint.JointAccelerationConstraint(
                np.vstack([-acceleration, acceleration]).T,
                discretization_scheme=toppra_constraint.DiscretizationType.Interpolation,
            ),
        ],
        path,
        gridpoints=grid,
        solver_wrapper="seidel",
    )
    _, speed, _ = reference.compute_parameterization(0.0, 0.0)
    expected = toppra.ParametrizeConstAccel(path, grid, speed)
    ours = time_optimal_parameterization(path, grid, velocity, acceleration)
    assert ours.duration == pytest.approx(expected.duration, rel=1e-9)
    assert np.allclose(ours.path_speed, speed, rtol=1e-9, atol=1e-12)
    t = np.linspace(0.0, expected.duration, 37)
    _, q, qdot = ours.evaluate(t)
    assert np.allclose(q, expected(t), atol=1e-9)
    assert np.allclose(qdot, expected(t, 1), atol=1e-9)


def test_tcp_limits_bound_the_path_speed() -> None:
    # closed form: q(s) = s (one joint), sigma(s) = 0.5 s, TCP speed <= 0.1 m/s means
    # s_dot <= 0.2; a trapezoid over s = 1 at s_dot 0.2 and the TCP acceleration 0.4 m/s^2
    # (s_ddot <= 0.8, tighter than the joint's 5): 1 / 0.2 + 0.2 / 0.8 = 5.25 s (Lynch & Park
    # sec. 9.2.2.2)
    grid = np.linspace(0.0, 1.0, 101)
    path = toppra.SplineInterpolator(grid, grid[:, None])
    timing = time_optimal_parameterization(
        path,
        grid,
        [3.0],
        [5.0],
        tcp_rate=np.full(101, 0.5),
        tcp_rate_derivative=np.zeros(101),
        tcp_speed_max=np.full(101, 0.1),
        tcp_acceleration_max=np.full(101, 0.4),
    )
    assert timing.duration == pytest.approx(5.25, rel=1e-3)


@settings(derandomize=True, deadline=None, max_examples=25)
@given(
    st.lists(
        st.tuples(
            st.lists(st.floats(-150.0, 150.0), min_size=2, max_size=2),
            st.sampled_from([0.0, 1.0, 20.0, 100.0, 400.0]),
            st.floats(5.0, 100.0),
        ),
        min_size=2,
        max_size=6,
    )
)
def test_blended_is_never_slower_than_rest_to_rest(
    waypoints: list[tuple[list[float], float, float]],
) -> None:
    scene = cell(
        TWO_AXIS_ARM,
        [joints(q, blend_mm=blend, percent=percent) for q, blend, percent in waypoints],
    )
    timing = timed(scene)
    # closed form of the construction (module docstring): a block is blended only where that
    # is faster than stopping, so every block and the total are at most rest to rest
    assert timing.total <= timing.rest_to_rest_total
    stops = np.flatnonzero(~timing.blended)
    for a, b in itertools.pairwise(stops):
        block = slice(int(a), int(b))
        assert timing.segment_durations[block].sum() <= (
            timing.rest_to_rest_durations[block].sum() + 1e-12
        )
    samples = sample_motion(timing, 0.002)
    q_way = np.radians([q for q, _, _ in waypoints])
    # source: the cell file: the motion starts and ends at the first and last waypoint at rest
    assert np.allclose(samples.q[0], q_way[0], atol=1e-9)
    assert np.allclose(samples.q[-1], q_way[-1], atol=1e-9)
    assert np.allclose(samples.qdot[[0, -1]], 0.0, atol=1e-9)
    # the joint velocity limits (scaled by each segment's speed percentage, module docstring)
    # hold at every sample, up to the TOPP-RA discretisation between grid points
    percent = np.array([p for _, _, p in waypoints])[samples.segment + 1] / 100.0
    limit = scene.robot.velocity_max * percent[:, None]
    assert np.all(np.abs(samples.qdot) <= limit * 1.005 + 1e-9)


def test_demo_paths_are_faster_blended_where_they_blend() -> None:
    path = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(path), path)
    for index in range(len(scene.paths)):
        sampled = sample_path(scene, index)
        timing = blended_cycle_time(scene, sampled)
        resolved = scene.paths[index]
        # source: the cell file: only waypoints with a blend radius can be passed without
        # stopping, never the first or the last
        assert not timing.blended[0]
        assert not timing.blended[-1]
        assert np.all(resolved.blend_radius[timing.blended] > 0.0)
        assert timing.total <= timing.rest_to_rest_total
        # the blend stays within the blend zone of every blended waypoint
        assert np.all(timing.pass_distance <= resolved.blend_radius + 1e-9)
        if np.any(timing.blended):
            assert timing.total < timing.rest_to_rest_total
        samples = sample_motion(timing, 0.004)
        assert samples.t[-1] == pytest.approx(timing.total, abs=1e-9)
        assert np.all(np.diff(samples.segment) >= 0)
        assert np.allclose(samples.q[-1], sampled.waypoint_q[-1], atol=1e-9)


def test_sampling_refuses_bad_periods() -> None:
    timing = timed(cell(TWO_AXIS_ARM, [joints([0.0, 30.0]), joints([60.0, 30.0])]))
    with pytest.raises(PlanningInputError, match="period_s"):
        sample_motion(timing, 0.0)
    with pytest.raises(PlanningInputError, match="use a longer period"):
        sample_motion(timing, 1e-9)


def test_unreached_paths_cannot_be_sampled() -> None:
    scene = cell(
        GANTRY,
        [
            point(500.0, 800.0, 600.0, motion="joint", speed_percent=100.0),
            point(5000.0, 800.0, 600.0, motion="linear", speed_mm_s=250.0),
        ],
    )
    timing = timed(scene)
    # source: the cell file, 5000 mm is beyond the x axis' 3000 mm
    assert math.isnan(timing.total)
    with pytest.raises(PlanningInputError, match=r"segments \[0\]"):
        sample_motion(timing, 0.004)


def test_path_check_reports_blended_beside_rest_to_rest() -> None:
    end = math.degrees(1.0)
    scene = cell(
        TWO_AXIS_ARM,
        [joints([0.0, 30.0]), joints([end / 2, 30.0], blend_mm=50.0), joints([end, 30.0])],
    )
    report = path_check_result(check_path(scene, 0))
    assert report.cycle_time_s is not None
    assert report.blended_cycle_time_s is not None
    # closed form (Lynch & Park, Modern Robotics, sec. 9.2.2.2): one trapezoid over 1 rad at
    # v_max = 1 rad/s, a_max = 2 rad/s^2 is 1.5 s; TOPP-RA's grid within 0.2 %
    assert report.blended_cycle_time_s == pytest.approx(1.5, rel=2e-3)
    # closed form: two rest-to-rest trapezoids over 0.5 rad each, 2 (0.5 + 0.5) = 2 s
    assert report.cycle_time_s == pytest.approx(2.0, abs=1e-9)
    blended = [s.blended_duration_s for s in report.segments]
    assert None not in blended
    # the total is the sum of its segments (closed form)
    assert report.blended_cycle_time_s == pytest.approx(sum(b for b in blended if b is not None))
    assert [w.blended for w in report.waypoints] == [False, True, False]
    # the arm passes the middle waypoint on its line: the joint path of the corner is the line
    # itself (closed form), so the TCP passes within TOPP-RA's grid spacing of it
    assert report.waypoints[1].pass_distance_mm == pytest.approx(0.0, abs=1.0)
    text = render_path_check(report)
    assert f"{report.blended_cycle_time_s:.2f} s blended" in text
