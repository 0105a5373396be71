"""Fastest solution sequence: exhaustive enumeration with independent checks, the demo cell."""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.cell.clearance import clearance_to_cell
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import ResolvedPath, Scene, resolve_scene
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import solve_ik_all
from posebridge.kinematics.metrics import limit_margins
from posebridge.planning.cycle_time import path_cycle_time
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.planning.solution_sequence import (
    SequenceLimits,
    WaypointCandidates,
    ik_candidates,
    optimise_sequence,
    revolutions_of,
    segment_costs,
)
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result
from posebridge.transforms import invert_transform, rpy_from_rotation_matrix

ARM = """
schema_version = 1
[robot]
name = "test-arm6"
kind = "six_axis"
convention = "origin_axis"
home_deg = [0, -10, 10, 0, 60, 0]

[[joint]]
name = "j1"
type = "revolute"
origin = { xyz_mm = [0, 0, 250], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_deg = -175, max_deg = 175, velocity_deg_s = 150, acceleration_deg_s2 = 500 }

[[joint]]
name = "j2"
type = "revolute"
origin = { xyz_mm = [120, 0, 200], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -110, max_deg = 150, velocity_deg_s = 140, acceleration_deg_s2 = 450 }

[[joint]]
name = "j3"
type = "revolute"
origin = { xyz_mm = [0, 0, 560], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -210, max_deg = 85, velocity_deg_s = 160, acceleration_deg_s2 = 600 }

[[joint]]
name = "j4"
type = "revolute"
origin = { xyz_mm = [260, 0, 90], rpy_deg = [0, 0, 0] }
axis = [1, 0, 0]
limits = { min_deg = -190, max_deg = 190, velocity_deg_s = 280, acceleration_deg_s2 = 1000 }

[[joint]]
name = "j5"
type = "revolute"
origin = { xyz_mm = [320, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -120, max_deg = 120, velocity_deg_s = 280, acceleration_deg_s2 = 1000 }

[[joint]]
name = "j6"
type = "revolute"
origin = { xyz_mm = [90, 0, 0], rpy_deg = [0, 0, 0] }
axis = [1, 0, 0]
limits = { min_deg = -200, max_deg = 200, velocity_deg_s = 400, acceleration_deg_s2 = 1500 }

[flange]
xyz_mm = [0, 0, 0]
rpy_deg = [0, 90, 0]

[tool]
name = "stub-100"
xyz_mm = [0, 0, 100]
rpy_deg = [0, 0, 0]

[[capsule]]
name = "upper-arm"
link = "j2"
start_mm = [0, 0, 0]
end_mm = [0, 0, 560]
radius_mm = 90

[[capsule]]
name = "forearm"
link = "j3"
start_mm = [-30, 0, 0]
end_mm = [260, 0, 90]
radius_mm = 80

[[capsule]]
name = "wrist"
link = "j5"
start_mm = [-20, 0, 0]
end_mm = [60, 0, 0]
radius_mm = 55
"""
"""An invented six-axis arm (ortho-parallel with a spherical wrist), j4 and j6 past one revolution."""

PILLAR = {
    "name": "pillar",
    "shape": "box",
    "position_mm": [650.0, -350.0, 600.0],
    "rpy_deg": [0.0, 0.0, 20.0],
    "size_mm": [200.0, 200.0, 1200.0],
}


def arm_cell(waypoints: list[dict[str, object]]) -> Scene:
    data = {
        "robot": {"toml": ARM},
        "fixtures": [PILLAR],
        "paths": [{"name": "p", "waypoints": waypoints}],
    }
    return resolve_scene(validate_cell(data))


def pose_waypoint(T: np.ndarray, **move: object) -> dict[str, object]:
    return {
        "pose": {
            "position_mm": (1000.0 * T[:3, 3]).tolist(),
            "rpy_deg": rpy_from_rotation_matrix(T[:3, :3], degrees=True).tolist(),
        },
        **move,
    }


def two_waypoints(path: ResolvedPath, k: int, q_a: np.ndarray) -> ResolvedPath:
    """Segment ``k`` of ``path`` alone, starting from the joint values ``q_a``."""
    return ResolvedPath(
        name="edge",
        sources=("joints", "pose"),
        target_index=np.array([-1, -1]),
        approach=np.zeros(2, dtype=bool),
        T_world_tool=path.T_world_tool[[k, k + 1]],
        q=np.stack([q_a, np.full_like(q_a, np.nan)]),
        joints_given=np.array([True, False]),
        linear=path.linear[[k, k + 1]],
        linear_speed=path.linear_speed[[k, k + 1]],
        speed_percent=path.speed_percent[[k, k + 1]],
        blend_radius=np.zeros(2),
    )


def edge_oracle(
    scene: Scene, path: ResolvedPath, k: int, q_a: np.ndarray, q_b: np.ndarray, margin: float
) -> float:
    """Duration of segment ``k`` from ``q_a`` to ``q_b`` if it meets every constraint, else inf.

    Independent of the optimiser: the path check's own sampling (sample_path), exact
    clearances (clearance_to_cell), limit margins and the rest-to-rest timing.
    """
    resolved = two_waypoints(path, k, q_a)
    if not path.linear[k + 1]:
        resolved = replace(resolved, q=np.stack([q_a, q_b]), joints_given=np.ones(2, dtype=bool))
    sampled = sample_path(scene, resolved)
    segment = sampled.segments[0]
    if not segment.sampled or not np.all(segment.reachable):
        return math.inf
    if path.linear[k + 1] and (np.any(segment.branch_change) or np.any(segment.jump)):
        return math.inf  # a joint move may change branch (the path check's rule)
    if np.max(np.abs(segment.q[-1] - q_b)) > 1e-6:
        return math.inf
    if np.min(limit_margins(scene.robot, segment.q).margin) < margin:
        return math.inf
    if np.min(clearance_to_cell(scene, segment.q).distance) < 0.0:
        return math.inf
    return path_cycle_time(scene.robot, sampled, linear_acceleration_m_s2=2.0).total


def waypoint_oracle(scene: Scene, q: np.ndarray, margin: float) -> bool:
    return bool(
        np.min(limit_margins(scene.robot, q[None]).margin) >= margin
        and clearance_to_cell(scene, q[None]).distance[0] >= 0.0
    )


def brute_force(scene: Scene, margin: float) -> tuple[float, tuple[int, ...] | None, list]:
    """Every sequence of every waypoint's IK solutions, checked one by one (exhaustive)."""
    path = scene.paths[0]
    T_base_tool = invert_transform(scene.T_world_base) @ path.T_world_tool
    result = solve_ik_all(
        scene.robot, T_base_tool, T_flange_tool=scene.T_flange_tool, all_revolutions=True
    )
    layers = [
        np.array([q for q in result.q[w, result.valid[w]] if waypoint_oracle(scene, q, margin)])
        for w in range(len(path.sources))
    ]
    edge = {}
    for k in range(len(layers) - 1):
        for i, j in itertools.product(range(len(layers[k])), range(len(layers[k + 1]))):
            edge[k, i, j] = edge_oracle(scene, path, k, layers[k][i], layers[k + 1][j], margin)
    best, best_sequence = math.inf, None
    for sequence in itertools.product(*[range(len(layer)) for layer in layers]):
        total = sum(edge[k, sequence[k], sequence[k + 1]] for k in range(len(layers) - 1))
        if total < best:
            best, best_sequence = total, sequence
    return best, best_sequence, layers


configuration = st.tuples(
    st.floats(-150.0, 150.0),
    st.floats(-60.0, 80.0),
    st.floats(-150.0, 40.0),
    st.floats(-150.0, 150.0),
    st.floats(20.0, 100.0),
    st.floats(-150.0, 150.0),
)


@settings(derandomize=True, deadline=None, max_examples=12)
@given(
    st.lists(
        st.tuples(
            configuration,
            st.booleans(),
            st.tuples(st.floats(-0.15, 0.15), st.floats(-0.15, 0.15), st.floats(-0.15, 0.15)),
            st.floats(10.0, 100.0),
        ),
        min_size=3,
        max_size=3,
    ),
    st.sampled_from([0.0, 0.1]),
)
def test_optimum_matches_exhaustive_enumeration(
    moves: list[tuple[tuple[float, ...], bool, tuple[float, float, float], float]],
    margin: float,
) -> None:
    probe = arm_cell([])
    robot = probe.robot
    poses = []
    waypoints = []
    for w, (q_deg, linear, offset, percent) in enumerate(moves):
        if w > 0 and linear:
            T = poses[-1].copy()
            T[:3, 3] += offset
            waypoints.append(pose_waypoint(T, motion="linear", speed_mm_s=10.0 * percent))
        else:
            T = fk_tool(robot, np.radians([q_deg]))[0]
            waypoints.append(pose_waypoint(T, motion="joint", speed_percent=percent))
        poses.append(T)
    scene = arm_cell(waypoints)
    limits = SequenceLimits(limit_margin_rad=margin)
    result = optimise_sequence(scene, 0, limits=limits)
    expected, sequence, layers = brute_force(scene, margin)
    # reference: the exhaustive enumeration above, every constraint checked independently
    assert [c.q.shape[0] for c in result.candidates] == [len(layer) for layer in layers]
    if sequence is None:
        assert not result.feasible
        return
    assert result.feasible
    assert result.best is not None
    assert result.best.total == pytest.approx(expected, rel=1e-9, abs=1e-12)
    chosen = result.best.q
    assert all(waypoint_oracle(scene, q, margin) for q in chosen)
    for k in range(len(moves) - 1):
        duration = edge_oracle(scene, scene.paths[0], k, chosen[k], chosen[k + 1], margin)
        assert duration == pytest.approx(result.best.segment_durations[k], rel=1e-9, abs=1e-12)
    if not result.current.violations and math.isfinite(result.current.total):
        assert result.best.total <= result.current.total + 1e-9


@pytest.fixture(scope="module")
def demo() -> Scene:
    path = data_folder("robots") / "demo-cell.json"
    return resolve_scene(load_cell(path), path)


def test_demo_optimum_is_never_slower_than_a_feasible_current_choice(demo: Scene) -> None:
    for index in range(len(demo.paths)):
        result = optimise_sequence(demo, index)
        report = path_check_result(check_path(demo, index))
        # reference: the path check of the current choice finds the same collisions
        collided = {f.segment_index for f in report.findings if f.kind == "collision"}
        assert collided == {v.segment for v in result.current.violations if v.reason == "collision"}
        assert result.current.total == pytest.approx(report.cycle_time_s, abs=1e-9)
        if not result.feasible:
            continue
        assert result.best is not None
        assert result.best.violations == ()
        if not result.current.violations:
            assert result.best.total <= result.current.total + 1e-9
            assert result.saving == pytest.approx(result.current.total - result.best.total)
        # only edges on some tentative optimum were collision-checked
        assert result.edges_checked <= result.edges_total


def test_lazy_search_equals_enumeration_of_eagerly_checked_costs(demo: Scene) -> None:
    for index in range(len(demo.paths)):
        costs = segment_costs(demo, index)
        best = math.inf
        for i in range(costs[0].shape[0]):  # every sequence, summed by broadcasting
            total = costs[0][i]
            for cost in costs[1:]:
                total = total[..., None] + cost.reshape((1,) * (total.ndim - 1) + cost.shape)
            best = min(best, float(np.min(total)))
        result = optimise_sequence(demo, index)
        # reference: exhaustive enumeration over edges whose collisions were all checked
        if math.isfinite(best):
            assert result.best is not None
            assert result.best.total == pytest.approx(best, rel=1e-12)
        else:
            assert not result.feasible


def test_chosen_sequence_passes_the_path_check(demo: Scene) -> None:
    index = 2
    result = optimise_sequence(demo, index)
    assert result.best is not None
    path = demo.paths[index]
    given = replace(path, q=result.best.q, joints_given=np.ones(len(path.sources), dtype=bool))
    report = path_check_result(check_path(demo, given))
    # reference: the path check on the chosen joint values: no error of any kind, and the
    # rest-to-rest cycle time the optimiser summed
    assert [f for f in report.findings if f.severity == "error"] == []
    assert report.cycle_time_s == pytest.approx(result.best.total, abs=1e-9)


def test_revolutions_follow_the_ik_count() -> None:
    scene = arm_cell([])
    T = fk_tool(scene.robot, np.radians([[10.0, 20.0, -30.0, 15.0, 40.0, 5.0]]))
    result = solve_ik_all(scene.robot, T, all_revolutions=True)
    valid = result.valid[0]
    # reference: the IK result's own revolution counts (posebridge.kinematics.ik.finishing rule)
    assert np.array_equal(revolutions_of(scene, result.q[0, valid]), result.revolutions[0, valid])
    assert np.any(result.revolutions[0, valid] != 0)  # source: j4 and j6 reach past +-180 deg here


def test_bad_candidates_are_refused(demo: Scene) -> None:
    with pytest.raises(PlanningInputError, match="expected 4 waypoints, got 1"):
        optimise_sequence(demo, 0, [WaypointCandidates(np.zeros((1, 6)))])
    layers = list(ik_candidates(demo, 0))
    layers[1] = WaypointCandidates(np.zeros((2, 5)))
    with pytest.raises(PlanningInputError, match=r"candidates\[1\]\.q"):
        optimise_sequence(demo, 0, layers)
    with pytest.raises(PlanningInputError, match="limit_margin_rad"):
        SequenceLimits(limit_margin_rad=-1.0)


def test_a_waypoint_without_candidates_blocks_the_path(demo: Scene) -> None:
    layers = list(ik_candidates(demo, 0))
    layers[2] = WaypointCandidates(np.zeros((0, 6)))
    result = optimise_sequence(demo, 0, layers)
    # source: the candidates given: waypoint 2 has none
    assert not result.feasible
    assert result.blocked_at == 2
    assert result.best is None
    assert np.all(result.indices == -1)
