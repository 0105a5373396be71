"""External axes moving inside a path segment: sampling and the per-sample scene of the path check."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from posebridge.cell.clearance import clearance_to_cell
from posebridge.cell.external_kinematics import fk_cell_tool
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.kinematics.fk import fk_tool
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result
from posebridge.transforms import invert_transform
from posebridge.units import m_from_mm, rad_from_deg

DEMO = data_folder("robots") / "demo-track-cell.json"
ROBOT_DEG = [0.0, 0.0, 0.0, 0.0, 30.0, 0.0]  # the demo path's first joint values


def _scene(paths: list[dict[str, Any]], fixtures: list[dict[str, Any]] | None = None) -> Scene:
    cell = load_cell(DEMO)
    data = cell.model_dump(mode="json")
    data["paths"] = paths
    data["fixtures"] = data["fixtures"] + (fixtures or [])
    return resolve_scene(type(cell).model_validate(data), DEMO)


def _joints(track_mm: float, table_deg: float, motion: str = "joint") -> dict[str, Any]:
    return {
        "joints_deg": [*ROBOT_DEG, track_mm, table_deg],
        "motion": motion,
        "speed_percent": 100.0,
    }


def _tool_at_track(scene: Scene, track_m: float) -> np.ndarray:
    """Tool pose in the world with the robot at ROBOT_DEG and the track at ``track_m``, (4, 4)."""
    q = rad_from_deg(np.array(ROBOT_DEG))[None]
    T_base_tool = fk_tool(scene.robot, q, scene.T_flange_tool)[0]
    return scene.external.track.T_world_base(track_m)[0] @ T_base_tool


def test_joint_move_interpolates_the_track_with_the_joints() -> None:
    scene = _scene([{"name": "slide", "waypoints": [_joints(200.0, 0.0), _joints(2200.0, 0.0)]}])
    segment = sample_path(scene, 0).segments[0]
    # closed form: the track value is linear in the fraction, 200 mm -> 2200 mm
    expected = m_from_mm(200.0 + segment.fraction * 2000.0)
    assert segment.external[:, 0] == pytest.approx(expected, abs=1e-12)
    assert np.all(segment.external[:, 1] == 0.0)  # the table stays (closed form)
    # the 5 mm default resolution also holds for the track: 2000 mm / 5 mm steps (closed form)
    assert segment.q.shape[0] == 401
    # closed form: with the joints still, the tool slides along the rail direction (world x)
    start = _tool_at_track(scene, 0.2)
    travel = segment.T_world_tool[:, :3, 3] - start[:3, 3]
    assert travel[:, 0] == pytest.approx(expected - 0.2, abs=1e-12)
    assert travel[:, 1:] == pytest.approx(np.zeros_like(travel[:, 1:]), abs=1e-12)


def test_path_check_sees_an_obstacle_the_track_passes_in_the_middle() -> None:
    probe = _scene([{"name": "slide", "waypoints": [_joints(200.0, 0.0), _joints(3200.0, 0.0)]}])
    middle = _tool_at_track(probe, 1.7)[:3, 3] * 1000.0  # the tool halfway, mm
    post = {"name": "post", "shape": "box", "position_mm": middle.tolist(), "size_mm": [60.0] * 3}
    scene = _scene(probe.cell.model_dump(mode="json")["paths"], [post])
    report = path_check_result(check_path(scene, 0))
    hits = [f for f in report.findings if f.kind == "collision" and f.obstacle == "post"]
    assert hits, "the tool crosses the post halfway along the track"
    # closed form: the post is centred on the TCP at track 1700 mm (half of the travel), and
    # the gripper capsule (radius 50 mm, ending 60 mm before the TCP) reaches 20 mm into it
    assert hits[0].fraction_start <= 0.5 <= hits[0].fraction_end
    # brute force: every sample checked on its own in the scene posed by hand
    segment = sample_path(scene, 0).segments[0]
    by_hand = min(
        float(clearance_to_cell(posed_scene(scene, e), q[None], scope="environment").distance[0])
        for q, e in zip(segment.q, segment.external, strict=True)
    )
    assert report.environment_clearance_mm == pytest.approx(by_hand * 1000.0, abs=1e-9)
    # neither end touches it: the old end-of-segment scene would have missed the collision
    for end in (0, -1):
        ends = posed_scene(scene, segment.external[end])
        assert clearance_to_cell(ends, segment.q[end][None], scope="environment").distance[0] > 0.0


def test_linear_move_is_straight_on_the_turning_table() -> None:
    target = {"target": "seam-front", "motion": "linear", "speed_mm_s": 200.0}
    scene = _scene([{"name": "weld", "waypoints": [_joints(2000.0, 20.0), target]}])
    segment = sample_path(scene, 0).segments[0]
    # closed form: the table angle goes linearly from 20 deg to its home value 0 deg
    angle = rad_from_deg(20.0) * (1.0 - segment.fraction)
    assert segment.external[:, 1] == pytest.approx(angle, abs=1e-12)
    table = scene.external.turntables[0]
    on_plate = invert_transform(table.motion(segment.external[:, 1])) @ segment.T_world_tool
    p = on_plate[:, :3, 3]
    t = segment.fraction[:, None]
    # closed form: on the plate the tool goes on a straight line at even steps
    assert p == pytest.approx(p[0] + t * (p[-1] - p[0]), abs=1e-9)
    # and it ends on the target with the table at home (the resolved target pose)
    assert segment.T_world_tool[-1] == pytest.approx(scene.targets.T_world_target[2], abs=1e-9)
    world = segment.T_world_tool[:, :3, 3]
    bow = np.max(np.linalg.norm(world - (world[0] + t * (world[-1] - world[0])), axis=1))
    assert bow > 0.01  # in the world the path bends with the table (more than 10 mm)


def test_linear_move_with_the_track_moving_is_straight_in_the_world() -> None:
    start = _joints(1000.0, 0.0)
    end = {**_joints(1600.0, 0.0, "linear"), "speed_mm_s": 250.0}
    end["joints_deg"] = [10.0, 10.0, -10.0, 0.0, 40.0, 0.0, 1600.0, 0.0]
    del end["speed_percent"]
    scene = _scene([{"name": "line", "waypoints": [start, end]}])
    segment = sample_path(scene, 0).segments[0]
    world = segment.T_world_tool[:, :3, 3]
    t = segment.fraction[:, None]
    # closed form: a straight line in the world with the track moving 1000 -> 1600 mm
    assert world == pytest.approx(world[0] + t * (world[-1] - world[0]), abs=1e-9)
    assert segment.external[:, 0] == pytest.approx(m_from_mm(1000.0 + 600.0 * t[:, 0]))
    reached = segment.reachable
    assert np.all(reached)
    # forward kinematics of every sample with its own track value gives its commanded pose
    fk = fk_cell_tool(scene, segment.q, segment.external)
    assert fk == pytest.approx(segment.T_world_tool, abs=1e-7)
