"""Joint maps over an external axis (posebridge.spaces.joint_map.cell_joint_map).

Checked against a brute force that poses the scene at every cell and asks the scalar
clearance path (posed_scene + clearance_to_cell), and against the closed form of a wall
across the rail (capsule to slab distance).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from posebridge.cell.clearance import cell_arm, clearance_to_cell
from posebridge.cell.external_kinematics import fk_cell_tool
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.compute import SerialExecutor
from posebridge.geometry.clearance import capsule_segments_world
from posebridge.resources import data_folder
from posebridge.results.spaces import joint_map_result
from posebridge.spaces.errors import SpacesInputError
from posebridge.spaces.joint_map import cell_joint_map

DEMO = data_folder("robots") / "demo-track-cell.json"
HOLD = np.radians([0.0, 70.0, -30.0, 0.0, 40.0, 0.0])  # leans out over the machines


@pytest.fixture(scope="module")
def demo() -> Scene:
    return resolve_scene(load_cell(DEMO), DEMO)


def test_track_by_j1_cells_match_the_posed_scene_brute_force(demo) -> None:
    n = demo.robot.dof
    track = n + demo.external.index("track")
    result = cell_joint_map(demo, (track, 0), HOLD, resolution=(14, 10))
    assert result.joint_names == ("track", demo.robot.joint_names[0])
    assert bool(result.prismatic[0])
    # Range of the demo's track (robots/demo-track-cell.json: range_mm 0..4000).
    np.testing.assert_allclose(result.lower[0], 0.0)
    np.testing.assert_allclose(result.upper[0], 4.0)
    cells = result.cell_configurations().reshape(-1, n + demo.external.count)
    names = result.obstacle_names
    collided = 0
    for k, row in enumerate(cells):
        posed = posed_scene(demo, row[n:])
        reference = clearance_to_cell(posed, row[None, :n])  # the scalar path, posed per cell
        # Clearance: the same exact distances (posed scene, capsule-obstacle and self pairs).
        assert result.clearance.ravel()[k] == pytest.approx(reference.distance[0], abs=1e-9)
        environment = clearance_to_cell(posed, row[None, :n], scope="environment")
        label = int(result.obstacle.ravel()[k])
        if environment.distance[0] < -1e-9:
            collided += 1
            assert names[label] == environment.pair(0)[1]
        elif environment.distance[0] > 1e-9:
            assert label == -1
    assert collided > 0  # the slice meets the machines and the table somewhere along the track


def test_executor_gives_the_same_external_map(demo) -> None:
    n = demo.robot.dof
    asked = ((0, n, 1), HOLD)
    inside = cell_joint_map(demo, *asked, resolution=(6, 40, 5))
    through = cell_joint_map(demo, *asked, resolution=(6, 40, 5), executor=SerialExecutor())
    np.testing.assert_array_equal(inside.obstacle, through.obstacle)
    np.testing.assert_array_equal(inside.clearance, through.clearance)
    assert inside.shape == (6, 40, 5)


def _wall_cell(tmp_path: Path) -> Scene:
    """The demo track cell with one wall across the rail instead of its machines and table."""
    data = json.loads(DEMO.read_text(encoding="utf-8"))
    data.pop("turntables", None)
    data["targets"] = []
    data["paths"] = []
    data["fixtures"] = [
        {
            "name": "wall",
            "shape": "box",
            "position_mm": [2500.0, 0.0, 0.0],
            "size_mm": [200.0, 20000.0, 20000.0],
        }
    ]
    path = tmp_path / "wall.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return resolve_scene(load_cell(path), path)


def test_blocked_track_interval_matches_the_slab_closed_form(tmp_path) -> None:
    scene = _wall_cell(tmp_path)
    n = scene.robot.dof
    result = cell_joint_map(scene, (n, 0), HOLD, resolution=(200, 7))
    wall = result.obstacle_names.index("wall")
    assert wall in result.colliding_obstacles.tolist()
    hit = result.colliding[..., result.colliding_obstacles.tolist().index(wall)]
    arm = cell_arm(scene)
    track_x = result.axes[0]
    for column, j1 in enumerate(result.axes[1]):
        q = HOLD.copy()
        q[0] = j1
        # Capsule segments with the carriage at track 0; the track shifts them by s along
        # world x (rail direction [1, 0, 0], robots/demo-track-cell.json).
        T_world_base = scene.external.track.T_world_base([0.0])[0]
        segments = capsule_segments_world(arm, q[None], T_world_base)[0]
        x_low = segments[:, :, 0].min(axis=1)
        x_high = segments[:, :, 0].max(axis=1)
        # The wall is a slab 2.4 <= x <= 2.6 m spanning every y and z the arm reaches, so a
        # capsule's distance to it is the gap between its axis' x range and the slab's,
        # less its radius (closed form; zero gap when they overlap). Blocked where < 0:
        # s in (2.4 - r - x_high, 2.6 + r - x_low) for some capsule.
        start = 2.4 - arm.radius - x_high
        stop = 2.6 + arm.radius - x_low
        s = track_x[:, None]
        depth = np.minimum(s - start, stop - s)  # > 0 inside a capsule's blocked interval
        decided = np.all(np.abs(depth) > 1e-6, axis=1)
        expected = np.any(depth > 0.0, axis=1)
        np.testing.assert_array_equal(hit[decided, column], expected[decided])
        assert np.count_nonzero(expected) > 0


def test_result_carries_the_axis_units_and_held_values(demo) -> None:
    n = demo.robot.dof
    result = joint_map_result(
        cell_joint_map(demo, (n, 1), HOLD, resolution=4), demo.robot, "etag", demo.external
    )
    assert result.joint_units == ["mm", "deg"]
    assert result.joints == [n, 1]
    # Cell centres of 4 cells over 0..4000 mm (robots/demo-track-cell.json): 500, 1500, ...
    assert result.axes_deg[0] == pytest.approx([500.0, 1500.0, 2500.0, 3500.0])
    # The track at its home (0 mm), the table at its home (0 deg) (robots/demo-track-cell.json).
    assert result.external_hold_deg == pytest.approx([0.0, 0.0])


@pytest.mark.parametrize(
    ("joints", "message"),
    [
        ((6, 7), "at most one external axis"),
        ((0, 8), r"expected distinct indices in 0\.\.7"),
    ],
)
def test_bad_external_requests_are_refused(demo, joints, message) -> None:
    with pytest.raises(SpacesInputError, match=message):
        cell_joint_map(demo, joints, HOLD, resolution=4)


def test_solutions_along_the_track_reach_their_targets(demo) -> None:
    n = demo.robot.dof
    result = cell_joint_map(demo, (n, 0), HOLD, resolution=(16, 4))
    along = result.along
    assert along is not None
    assert along.targets == demo.targets.names
    K, R, B = along.q.shape[:3]
    assert (R, B) == (16, 8)
    reached = 0
    for k in range(K):
        for b in range(B):
            rows = np.flatnonzero(~np.isnan(along.q[k, :, b, 0]))
            reached += len(rows)
            if len(rows) == 0:
                continue
            external = np.zeros((len(rows), demo.external.count))
            external[:, 0] = result.axes[0][rows]
            q = along.q[k, rows, b]
            # every solution reaches its target: forward kinematics of the cell's joint vector
            # (robot on the track, tested against pinocchio in tests/cell/test_external_axes.py)
            T = fk_cell_tool(demo, q, external)
            np.testing.assert_allclose(
                T, np.broadcast_to(demo.targets.T_world_target[k], T.shape), atol=1e-9
            )
            assert np.all(q >= demo.robot.lower - 1e-9)
            assert np.all(q <= demo.robot.upper + 1e-9)
    assert reached > 0


def test_no_solutions_along_a_robot_joint_map(demo) -> None:
    result = cell_joint_map(demo, (0, 1), HOLD, resolution=4)
    assert result.along is None
