"""Table placement for a turntable cell: closed-form reach of a planar arm to targets turning on
a table, a brute-force sweep of the table angle, the cycle time with the table's turn, the
demo track cell, and a track cell whose targets are solved at their pinned track positions."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from posebridge.cell.clearance import clearance_to_cell
from posebridge.cell.external_axes import turntable_motion
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.cell.turntable_move import cell_with_turntable_at
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import solve_ik_all
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.placement import (
    BLENDED_TOP,
    BRANCHES,
    PlacementGrid,
    RankedCandidate,
)
from posebridge.planning.placement_table import (
    search_mode,
    search_table_placement,
    table_axis,
    table_grid,
)
from posebridge.planning.scene_moves import scene_with_table_at
from posebridge.planning.time_scaling import trapezoidal_profile
from posebridge.resources import data_folder
from posebridge.results.placement import placement_result, render_placement
from posebridge.transforms import invert_transform

L1, L2 = 0.4, 0.3  # pb-planar2r.toml link lengths, m
INNER = np.sqrt(L1**2 + L2**2 + 2.0 * L1 * L2 * np.cos(np.radians(150.0)))  # |j2| <= 150 deg
RADII = (0.2, 0.32)  # m, the targets' distances from the table's axis
TABLE_X = 1.0  # m, the table's current position on world x (y = 0)
GRID_X_MM = [50.0 + 100.0 * i for i in range(14)]  # 50 .. 1350 mm, no candidate on a boundary


def table_cell_data(
    *,
    path: bool = False,
    via_mm: list[float] | None = None,
    table_speed_deg_s: float = 90.0,
    table_accel_deg_s2: float = 180.0,
) -> dict[str, Any]:
    """pb-planar2r at the origin; a turntable on world x carrying a jig with two targets.

    The targets lie in the arm's plane (z = 0) at RADII from the table's axis, on opposite
    sides; the plate and the jig are below the plane, clear of the arm's capsules.
    """
    data: dict[str, Any] = {
        "robot": {"name": "pb-planar2r"},
        "floor_height_mm": -500.0,
        "turntables": [
            {
                "name": "table-1",
                "position_mm": [1000.0 * TABLE_X, 0.0, -100.0],
                "range_deg": [-180.0, 180.0],
                "speed_deg_s": table_speed_deg_s,
                "accel_deg_s2": table_accel_deg_s2,
                "plate_radius_mm": 150.0,
                "fixtures": ["jig"],
            }
        ],
        "fixtures": [
            {
                "name": "jig",
                "shape": "box",
                "position_mm": [1000.0 * TABLE_X, 0.0, -200.0],
                "size_mm": [100.0, 100.0, 100.0],
            }
        ],
        "targets": [
            {"name": "near", "fixture": "jig", "position_mm": [1000.0 * RADII[0], 0.0, 200.0]},
            {"name": "far", "fixture": "jig", "position_mm": [-1000.0 * RADII[1], 0.0, 200.0]},
        ],
    }
    if path:
        via = [] if via_mm is None else [{"pose": {"position_mm": via_mm}}]
        waypoints = [{"target": "near"}, *via, {"target": "far"}]
        data["paths"] = [
            {
                "name": "swap",
                "waypoints": [{**w, "motion": "joint", "speed_percent": 100.0} for w in waypoints],
            }
        ]
    return data


def table_cell(**options: Any) -> Scene:
    return resolve_scene(validate_cell(table_cell_data(**options)))


def test_auto_searches_the_table_of_a_turntable_cell() -> None:
    scene = table_cell()
    assert search_mode(scene, "auto") == "table"
    assert table_axis(scene) == 0  # no track: the first table is external axis 0
    plain = resolve_scene(validate_cell({"robot": {"name": "pb-planar2r"}}))
    assert search_mode(plain, "auto") == "base"
    with pytest.raises(PlanningInputError, match="no turntable"):
        table_grid(plain)
    with pytest.raises(PlanningInputError, match="no turntable called 'table-9'"):
        table_grid(scene, table="table-9")


def test_table_position_follows_the_reach_of_the_arm() -> None:
    scene = table_cell()
    grid = table_grid(scene, x_mm=GRID_X_MM, y_mm=[0.0])
    result = search_table_placement(scene, grid, top=3)
    D = np.array(GRID_X_MM) / 1000.0  # the table's distance from the robot's axis
    # closed form: a target at radius r from the table's axis turns on a circle whose distance
    # from the robot's first axis runs over [|D - r|, D + r] (the full turn: range +-180 deg);
    # the planar arm reaches the annulus [INNER, l1 + l2] (law of cosines, |j2| <= 150 deg),
    # so some table angle reaches the target iff both intervals meet
    expected = np.zeros_like(D)
    for r in RADII:
        assert np.all(np.abs(np.abs(D - r) - (L1 + L2)) > 0.01)  # no candidate on a boundary
        assert np.all(np.abs(D + r - INNER) > 0.01)
        expected += ((np.abs(D - r) <= L1 + L2) & (D + r >= INNER)).astype(float)
    np.testing.assert_array_equal(result.reach_fraction[0, :, 0, 0], expected / len(RADII))
    report = placement_result(result)
    assert report.search == "table"
    best = report.best[0]
    assert best.reach_fraction == 1.0
    assert best.table is not None
    D_best = best.table.position_mm[0] / 1000.0
    assert all(abs(D_best - r) <= L1 + L2 for r in RADII)  # the closed form above
    assert best.table.name == "table-1"
    assert best.table.angle_range_deg == pytest.approx([-180.0, 180.0])  # the cell's range
    span = best.table.angle_span_deg
    assert span is not None
    angles = [t.table_angle_deg for t in best.targets]
    assert span == pytest.approx([min(angles), max(angles)])  # type: ignore[type-var]
    assert result.current is None  # the current table (x = 1000 mm) is not on this grid
    text = render_placement(report)
    assert text.startswith("Table placement for pb-planar2r (table-1)")
    assert "Rank 1 table angles" in text


def test_chosen_angles_lie_in_a_dense_sweep_of_the_table_angle() -> None:
    scene = table_cell()
    grid = table_grid(scene, x_mm=[450.0, 650.0, 850.0], y_mm=[-150.0, 150.0])
    result = search_table_placement(scene, grid, top=grid.size)
    table = scene.external.turntables[0]
    sweep = np.radians(np.linspace(-180.0, 180.0, 3601))  # 0.1 deg steps
    for candidate in result.best:
        assert candidate.table_angle is not None
        iy, ix, _, _ = candidate.index
        shift = np.array([grid.x[ix] - table.point[0], grid.y[iy] - table.point[1], 0.0])
        D = turntable_motion(table.point, table.axis, sweep)  # the table's turn, current angle 0
        D[:, :3, 3] += shift
        reached = result.reached[candidate.index]
        for k in range(len(RADII)):
            T_world = D @ scene.targets.T_world_target[k]
            T_base = invert_transform(scene.T_world_base) @ T_world
            ik = solve_ik_all(scene.robot, T_base, T_flange_tool=scene.T_flange_tool)
            # reference: a brute-force sweep of the table angle solved with the same IK (nothing
            # collides; both elbow branches mirror each other, so any branch will do)
            feasible = np.any(ik.valid & ik.within_limits, axis=1)
            assert reached[k] == bool(np.any(feasible))
            if not reached[k]:
                continue
            angle = candidate.table_angle[k]
            step = int(np.argmin(np.abs(sweep - angle)))
            assert feasible[max(step - 1, 0) : step + 2].any()  # inside a feasible interval
            # the longest run of the sweep (the middle-of-the-longest rule, module docstring)
            edges = np.flatnonzero(np.diff(np.r_[0, feasible.astype(int), 0]))
            runs = edges.reshape(-1, 2)
            longest = runs[np.argmax(runs[:, 1] - runs[:, 0])]
            middle = 0.5 * (sweep[longest[0]] + sweep[longest[1] - 1])
            assert np.degrees(abs(angle - middle)) < 0.2  # two sweep steps
            # the reported configuration puts the TCP on the turned, moved target
            q = result.q[candidate.index][k]
            tcp = scene.T_world_base @ fk_tool(scene.robot, q[None], scene.T_flange_tool)[0]
            turned = turntable_motion(table.point, table.axis, [angle])[0]
            turned[:3, 3] += shift
            np.testing.assert_allclose(  # forward kinematics, closed form of the chain
                tcp[:2, 3], (turned @ scene.targets.T_world_target[k])[:2, 3], atol=1e-6
            )


def test_cycle_time_includes_the_turn_of_a_slow_table() -> None:
    # a table far slower than the arm: the synchronised joint move lasts as long as the
    # table's own trapezoid between the two chosen angles
    scene = table_cell(path=True, table_speed_deg_s=5.0, table_accel_deg_s2=5.0)
    grid = table_grid(scene, x_mm=[650.0], y_mm=[0.0])
    result = search_table_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.table_angle is not None
    assert result.reached[candidate.index].all()
    turn = abs(float(candidate.table_angle[1] - candidate.table_angle[0]))
    q = result.q[candidate.index]
    robot = scene.robot
    assert turn > 0.1  # the two targets sit on opposite sides of the table
    # the table dominates both limits of the synchronised move (c_i / v_i and c_i / a_i)
    v_table, a_table = np.radians(5.0), np.radians(5.0)
    assert np.all(np.abs(q[1] - q[0]) / robot.velocity_max < turn / v_table)
    assert np.all(np.abs(q[1] - q[0]) / robot.acceleration_max < turn / a_table)
    # closed form: trapezoid t = d / v + v / a (Lynch & Park, Modern Robotics, sec. 9.2.2.2)
    expected = turn / v_table + v_table / a_table if turn >= v_table**2 / a_table else None
    assert expected is not None
    assert float(result.cycle_time[candidate.index]) == pytest.approx(expected, rel=1e-9)
    # the same closed form through the project's trapezoid (rest to rest)
    assert trapezoidal_profile(turn, v_table, a_table).duration == pytest.approx(expected)


def test_demo_track_cell_searches_its_table() -> None:
    path = data_folder("robots") / "demo-track-cell.json"
    scene = resolve_scene(load_cell(path), path)
    assert search_mode(scene, "auto") == "rail"  # a track and a table: the rail stays automatic
    grid = table_grid(scene, half_width_mm=400.0, count=3)
    result = search_table_placement(scene, grid, top=2)
    # source: demo-track-cell.json, table-1 at (2000, -1300) mm, range -185..185 deg
    assert result.table_name == "table-1"
    assert result.current == (1, 1, 0, 0)
    report = placement_result(result)
    assert report.search == "table"
    assert report.grid.x_mm == pytest.approx([1600.0, 2000.0, 2400.0])
    best = report.best[0]
    assert best.table is not None
    assert best.table.angle_range_deg == pytest.approx([-185.0, 185.0])
    assert best.table.position_mm[2] == pytest.approx(700.0)  # height kept
    # the robot stays on its track: the robot's base is the scene's at the track's home
    assert best.yaw_deg == pytest.approx(0.0)
    on_table = [t for t in best.targets if t.table_angle_deg is not None]
    for t in on_table:
        assert -185.0 <= t.table_angle_deg <= 185.0  # type: ignore[operator]


def synchronised_trapezoid_s(delta: np.ndarray, v: np.ndarray, a: np.ndarray) -> float:
    """Duration of a synchronised joint move, closed form (Lynch & Park, Modern Robotics,
    sec. 9.2.2.2): D = max |d_i|, c_i = |d_i| / D, V = 1 / max(c_i / v_i), A = 1 / max(c_i / a_i),
    t = D / V + V / A when D >= V^2 / A, else 2 sqrt(D / A)."""
    D = float(np.max(np.abs(delta)))
    c = np.abs(delta) / D
    V, A = 1.0 / float(np.max(c / v)), 1.0 / float(np.max(c / a))
    return D / V + V / A if D >= V**2 / A else 2.0 * float(np.sqrt(D / A))


def test_a_waypoint_off_the_table_holds_the_table_angle() -> None:
    # near -> a world pose -> far: the table holds near's angle into the world pose and turns
    # to far's angle on the move out of it
    scene = table_cell(path=True, via_mm=[450.0, 250.0, 0.0])
    grid = table_grid(scene, x_mm=[650.0], y_mm=[0.0])
    result = search_table_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.table_angle is not None
    assert result.reached[candidate.index].all()
    q_near, q_far = result.q[candidate.index]
    T_base = invert_transform(scene.T_world_base) @ scene.paths[0].T_world_tool[1]
    ik = solve_ik_all(scene.robot, T_base[None], T_flange_tool=scene.T_flange_tool)
    elbow = BRANCHES[result.branch[candidate.index]][1]  # the candidate's branch (elbow)
    slots = np.flatnonzero(ik.valid[0] & ik.within_limits[0] & (ik.elbow[0] == elbow))
    q_via = ik.q[0, slots[0]]
    robot = scene.robot
    v = np.r_[robot.velocity_max, np.radians(90.0)]  # the table's limits of table_cell_data
    a = np.r_[robot.acceleration_max, np.radians(180.0)]
    turn = float(candidate.table_angle[1] - candidate.table_angle[0])
    expected = synchronised_trapezoid_s(np.r_[q_via - q_near, 0.0], v, a)  # table held
    expected += synchronised_trapezoid_s(np.r_[q_far - q_via, turn], v, a)  # table turns
    assert float(result.cycle_time[candidate.index]) == pytest.approx(expected, rel=1e-9)


def test_clearance_is_to_the_moved_and_turned_table() -> None:
    # a post on the table reaching into the arm's plane, off the axis, so that where the table
    # stands and how far it turns both change the arm's clearance
    data = table_cell_data()
    post = {"name": "post", "shape": "box", "position_mm": [1000.0 * TABLE_X, 120.0, 0.0]}
    data["fixtures"].append({**post, "size_mm": [60.0, 60.0, 200.0]})
    data["turntables"][0]["fixtures"].append("post")
    scene = resolve_scene(validate_cell(data))
    grid = table_grid(scene, x_mm=[550.0, 650.0], y_mm=[-100.0, 100.0])
    result = search_table_placement(scene, grid, top=grid.size)
    checked = 0
    for candidate in result.best:
        assert candidate.table_angle is not None
        iy, ix, _, _ = candidate.index
        step = 1000.0 * np.array([grid.x[ix] - TABLE_X, grid.y[iy]])
        # reference: the cell edited as the page applies a candidate (table, jig and post moved
        # by the step), resolved afresh, posed at the chosen angle, and its clearance computed
        moved = table_cell_data()
        moved["fixtures"].append({**post, "size_mm": [60.0, 60.0, 200.0]})
        moved["turntables"][0]["fixtures"].append("post")
        for item in [moved["turntables"][0], *moved["fixtures"]]:
            item["position_mm"] = [
                *(np.array(item["position_mm"][:2]) + step),
                item["position_mm"][2],
            ]
        edited = resolve_scene(validate_cell(moved))
        for k in range(len(RADII)):
            if not result.reached[candidate.index][k]:
                continue
            posed = posed_scene(edited, [candidate.table_angle[k]])
            q = result.q[candidate.index][k][None]
            reference = clearance_to_cell(posed, q, scope="environment").distance[0]
            assert candidate.clearance[k] == pytest.approx(reference, abs=1e-9)
            checked += 1
    assert checked >= 4


def test_scene_with_table_at_matches_the_cell_file_edit() -> None:
    # a child fixture on the jig and a pose waypoint in the path: the child moves with the
    # jig, the world pose stays
    data = table_cell_data(path=True, via_mm=[450.0, 250.0, 0.0])
    child = {"name": "clamp", "shape": "box", "parent": "jig", "position_mm": [0.0, 0.0, 80.0]}
    data["fixtures"].append({**child, "size_mm": [20.0, 20.0, 20.0]})
    data["targets"].append(
        {"name": "on-clamp", "fixture": "clamp", "position_mm": [0.0, 0.0, 50.0]}
    )
    scene = resolve_scene(validate_cell(data))
    xy = np.array([0.65, 0.2])
    angles = [np.array([0.3, np.nan, -1.2])]
    moved = scene_with_table_at(scene, 0, xy, angles)
    # reference: the cell-file edit (cell_with_turntable_at), resolved afresh
    edited = resolve_scene(cell_with_turntable_at(scene, "table-1", [650.0, 200.0, -100.0]))
    np.testing.assert_allclose(moved.T_world_fixture, edited.T_world_fixture, atol=1e-12)
    assert moved.boxes.names == edited.boxes.names
    np.testing.assert_allclose(moved.boxes.T_world, edited.boxes.T_world, atol=1e-12)
    np.testing.assert_allclose(moved.cylinders.T_world, edited.cylinders.T_world, atol=1e-12)
    np.testing.assert_allclose(
        moved.targets.T_world_target, edited.targets.T_world_target, atol=1e-12
    )
    np.testing.assert_allclose(
        moved.targets.T_world_approach, edited.targets.T_world_approach, atol=1e-12
    )
    np.testing.assert_allclose(
        moved.paths[0].T_world_tool, edited.paths[0].T_world_tool, atol=1e-12
    )
    np.testing.assert_allclose(  # the cell-file edit's table, at its new axis point
        moved.external.turntables[0].point, edited.external.turntables[0].point, atol=1e-12
    )
    # the path's table angles: the given ones, NaN keeps the path's value (the cell's home)
    np.testing.assert_allclose(moved.paths[0].external[:, 0], [0.3, 0.0, -1.2])  # the input above


def _applied_cell(
    scene: Scene, grid: PlacementGrid, candidate: RankedCandidate, angles: dict[int, float]
) -> dict[str, Any]:
    """Return the cell with a table candidate applied, as JSON data.

    The edit of cell_with_turntable_at (table-1 at the candidate's grid point, its height
    -100 mm as in these cells), target ``k`` pinned at ``angles[k]`` rad on table-1, every
    other target as the edit leaves it.
    """
    iy, ix, _, _ = candidate.index
    edited = cell_with_turntable_at(
        scene, "table-1", [1000.0 * grid.x[ix], 1000.0 * grid.y[iy], -100.0]
    )
    applied = edited.model_dump(mode="json", exclude_none=True)
    for k, angle in angles.items():
        applied["targets"][k]["external_axes"] = {"table-1": float(np.degrees(angle))}
    return applied


def _blended_total(applied: dict[str, Any]) -> float:
    """Return the path check's blended cycle time of the cell's first path (path_check)."""
    return check_path(resolve_scene(validate_cell(applied)), 0).blended.total


def test_blended_cycle_time_of_a_table_candidate_matches_the_path_check() -> None:
    data = table_cell_data(path=True)
    data["paths"][0]["waypoints"][0]["blend_mm"] = 50.0
    scene = resolve_scene(validate_cell(data))
    grid = table_grid(scene, x_mm=[550.0, 650.0, 750.0], y_mm=[-100.0, 100.0])
    result = search_table_placement(scene, grid, top=grid.size)
    checked = 0
    for candidate in result.best:
        if candidate.rank > BLENDED_TOP:
            # our own contract: the blended time of the BLENDED_TOP best only
            assert candidate.blended_cycle_time is None
            continue
        if not result.reached[candidate.index].all():
            continue
        assert candidate.table_angle is not None
        assert candidate.blended_cycle_time is not None
        # reference: the path check (path_check / blended_timing) run on the applied candidate:
        # the cell edited by cell_with_turntable_at, each target pinned at its chosen angle
        angles = dict(enumerate(candidate.table_angle))
        assert len(angles) == len(scene.cell.targets)
        total = _blended_total(_applied_cell(scene, grid, candidate, angles))
        assert candidate.blended_cycle_time == pytest.approx(total, rel=1e-6)
        checked += 1
    assert checked >= 2
    assert len(result.best) > BLENDED_TOP


TRACK_PIN_MM = 2000.0  # the table target's pinned track position (the track's current: 0)
TRACK_GRID_X_MM = [1450.0 + 200.0 * i for i in range(9)]  # 1450 .. 3050 mm, y = 0


def track_table_cell_data(*, path: bool = False) -> dict[str, Any]:
    """pb-planar2r on a track along world x (at 0, its base at the origin) and a turntable
    2 m along it carrying a jig with one target, pinned at track TRACK_PIN_MM; one world target
    near the robot, unpinned, and one 3.5 m along, pinned at 3000 mm, all in the arm's plane."""
    data = table_cell_data()  # the table, its plate and jig, moved 2 m along x
    data["turntables"][0]["position_mm"][0] = 2000.0
    data["fixtures"][0]["position_mm"][0] = 2000.0
    data["track"] = {
        "origin_mm": [0.0, 0.0, -200.0],
        "direction": [1.0, 0.0, 0.0],
        "range_mm": [0.0, 3000.0],
        "speed_mm_s": 1000.0,
        "accel_mm_s2": 2000.0,
        "carriage_height_mm": 200.0,
    }
    data["targets"] = [
        {"name": "by-home", "position_mm": [500.0, 0.0, 0.0]},
        {
            "name": "on-table",
            "fixture": "jig",
            "position_mm": [1000.0 * RADII[0], 0.0, 200.0],
            "external_axes": {"track": TRACK_PIN_MM},
        },
        {"name": "far-side", "position_mm": [3500.0, 0.0, 0.0], "external_axes": {"track": 3000.0}},
    ]
    if path:
        waypoints = [{"target": "by-home"}, {"target": "on-table"}]
        data["paths"] = [
            {
                "name": "fetch",
                "waypoints": [{**w, "motion": "joint", "speed_percent": 100.0} for w in waypoints],
            }
        ]
    return data


def test_table_targets_are_solved_at_their_pinned_track_position() -> None:
    scene = resolve_scene(validate_cell(track_table_cell_data()))
    assert scene.external.values[0] == 0.0  # the track stands at 0, away from every pin
    grid = table_grid(scene, x_mm=TRACK_GRID_X_MM, y_mm=[0.0])
    result = search_table_placement(scene, grid, top=grid.size)
    table = scene.external.turntables[0]
    pinned = {0: 0.0, 1: TRACK_PIN_MM / 1000.0, 2: 3.0}  # m, the cell's track value per target
    sweep = np.radians(np.linspace(-180.0, 180.0, 3601))  # 0.1 deg steps
    D = np.array(TRACK_GRID_X_MM) / 1000.0 - pinned[1]  # table axis from the robot's, on x
    # closed form (as test_table_position_follows_the_reach_of_the_arm): from the pinned track
    # position the carried target turns on a circle whose distance from the robot's first
    # axis runs over [||D| - r|, |D| + r]; the arm reaches [INNER, l1 + l2]
    r = RADII[0]
    expected = (np.abs(np.abs(D) - r) <= L1 + L2) & (np.abs(D) + r >= INNER)
    assert expected.any()  # the grid holds both verdicts
    assert not expected.all()
    np.testing.assert_array_equal(result.reached[0, :, 0, 0, 1], expected)
    assert result.reached[0, :, 0, 0, 0].all()  # by-home: |0.5| in [INNER, 0.7] at track 0
    assert result.reached[0, :, 0, 0, 2].all()  # far-side: 0.5 m from the base at 3000 mm
    for ix in range(len(TRACK_GRID_X_MM)):
        shift = np.array([grid.x[ix] - table.point[0], 0.0, 0.0])
        turn = turntable_motion(table.point, table.axis, sweep)  # the table's turn, current 0
        turn[:, :3, 3] += shift
        for k, s in pinned.items():
            # reference: the IK solved directly with the base at the target's pinned track
            # position (ExternalAxes.T_world_base), the carried target over a dense sweep of
            # the table angle; nothing collides, so reach within limits decides
            T_world_base = scene.external.T_world_base([[s, 0.0]], scene.T_world_base)[0]
            T_world = scene.targets.T_world_target[k]
            poses = turn @ T_world if k == 1 else T_world[None]
            ik = solve_ik_all(
                scene.robot,
                invert_transform(T_world_base) @ poses,
                T_flange_tool=scene.T_flange_tool,
            )
            feasible = bool(np.any(ik.valid & ik.within_limits))
            assert result.reached[0, ix, 0, 0, k] == feasible
            if not feasible:
                continue
            # the reported configuration, from the pinned base, puts the TCP on the target
            # (forward kinematics of the chain; on the table at the reported angle)
            q = result.q[0, ix, 0, 0, k]
            tcp = T_world_base @ fk_tool(scene.robot, q[None], scene.T_flange_tool)[0]
            if k == 1:
                angle = result.table_angle[0, ix, 0, 0, k]  # type: ignore[index]
                T_world = turntable_motion(table.point, table.axis, [angle])[0] @ T_world
                T_world[:3, 3] += shift
            np.testing.assert_allclose(tcp[:2, 3], T_world[:2, 3], atol=1e-6)


def test_cycle_time_of_a_track_and_table_cell_includes_the_track_move() -> None:
    # by-home (track 0) -> on-table (pinned at TRACK_PIN_MM): one joint move of the arm, the
    # track and the table; the table holds on-table's angle from the start (module docstring)
    scene = resolve_scene(validate_cell(track_table_cell_data(path=True)))
    grid = table_grid(scene, x_mm=[2250.0], y_mm=[0.0])
    result = search_table_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert result.reached[candidate.index][:2].all()
    q = result.q[candidate.index]
    robot = scene.robot
    v = np.r_[robot.velocity_max, 1.0, np.radians(90.0)]  # the track's and table's limits above
    a = np.r_[robot.acceleration_max, 2.0, np.radians(180.0)]
    delta = np.r_[q[1] - q[0], TRACK_PIN_MM / 1000.0, 0.0]
    expected = synchronised_trapezoid_s(delta, v, a)  # closed form, Lynch & Park (above)
    assert float(result.cycle_time[candidate.index]) == pytest.approx(expected, rel=1e-9)
    # the blended time of the same candidate: the path check on the applied candidate (the
    # cell edited by cell_with_turntable_at, on-table pinned at its chosen angle as well)
    assert candidate.blended_cycle_time is not None
    assert candidate.table_angle is not None
    edited = cell_with_turntable_at(scene, "table-1", [2250.0, 0.0, -100.0])
    data = edited.model_dump(mode="json", exclude_none=True)
    data["targets"][1]["external_axes"]["table-1"] = float(np.degrees(candidate.table_angle[1]))
    check = check_path(resolve_scene(validate_cell(data)), 0)
    assert candidate.blended_cycle_time == pytest.approx(check.blended.total, rel=1e-6)


TABLE_PIN_DEG = 90.0  # near's pinned table angle: near then sits RADII[0] across world x


def test_a_target_pinned_on_the_searched_table_is_solved_at_its_pin() -> None:
    data = table_cell_data(path=True)
    data["targets"][0]["external_axes"] = {"table-1": TABLE_PIN_DEG}
    scene = resolve_scene(validate_cell(data))
    grid = table_grid(scene, x_mm=GRID_X_MM, y_mm=[0.0])
    result = search_table_placement(scene, grid, top=grid.size)
    table = scene.external.turntables[0]
    pin = np.radians(TABLE_PIN_DEG)
    verdicts = []
    for ix in range(len(GRID_X_MM)):
        # reference: the IK solved directly with near turned to its pinned angle about the
        # moved table's axis (turntable_motion, then the move); nothing collides, so reach
        # within limits decides (closed form: |(x, r)| in [INNER, l1 + l2])
        turn = turntable_motion(table.point, table.axis, [pin])[0]
        turn[0, 3] += grid.x[ix] - table.point[0]
        T_world = turn @ scene.targets.T_world_target[0]
        ik = solve_ik_all(
            scene.robot,
            invert_transform(scene.T_world_base) @ T_world[None],
            T_flange_tool=scene.T_flange_tool,
        )
        feasible = bool(np.any(ik.valid & ik.within_limits))
        assert result.reached[0, ix, 0, 0, 0] == feasible
        verdicts.append(feasible)
        if feasible:
            # the estimate's table angle is the pin (module docstring: used as given)
            angle = result.table_angle[0, ix, 0, 0, 0]  # type: ignore[index]
            assert angle == pytest.approx(pin, abs=1e-12)
    assert any(verdicts)  # the grid holds both verdicts; an angle of its own would reach
    assert not all(verdicts)  # near up to x = RADII[0] + l1 + l2, beyond the pin's reach
    checked = 0
    for candidate in result.best[:BLENDED_TOP]:
        if not result.reached[candidate.index].all():
            continue
        assert candidate.table_angle is not None
        assert candidate.blended_cycle_time is not None
        # reference: the path check on the applied candidate (cell_with_turntable_at), near
        # keeping its pin and far pinned at its chosen angle
        applied = _applied_cell(scene, grid, candidate, {1: candidate.table_angle[1]})
        assert applied["targets"][0]["external_axes"] == {"table-1": TABLE_PIN_DEG}
        total = _blended_total(applied)
        assert candidate.blended_cycle_time == pytest.approx(total, rel=1e-6)
        checked += 1
    assert checked >= 1


OTHER_PIN_DEG = 180.0  # the second table's pin: its target turns from (0.8, 0.5) to (0.2, 0.5) m


def two_table_cell_data() -> dict[str, Any]:
    """table_cell_data with a second turntable at world (0.5, 0.5) m carrying jig-2, whose
    target 'other' lies 0.3 m from that axis and pins table-2 at OTHER_PIN_DEG; the path
    visits near, far, then other."""
    data = table_cell_data(path=True)
    data["turntables"].append(
        {
            "name": "table-2",
            "position_mm": [500.0, 500.0, -100.0],
            "range_deg": [-180.0, 180.0],
            "speed_deg_s": 90.0,
            "accel_deg_s2": 180.0,
            "plate_radius_mm": 100.0,
            "fixtures": ["jig-2"],
        }
    )
    data["fixtures"].append(
        {
            "name": "jig-2",
            "shape": "box",
            "position_mm": [500.0, 500.0, -200.0],
            "size_mm": [100.0, 100.0, 100.0],
        }
    )
    data["targets"].append(
        {
            "name": "other",
            "fixture": "jig-2",
            "position_mm": [300.0, 0.0, 200.0],
            "external_axes": {"table-2": OTHER_PIN_DEG},
        }
    )
    data["paths"][0]["waypoints"].append(
        {"target": "other", "motion": "joint", "speed_percent": 100.0}
    )
    return data


def test_a_target_pinned_on_another_table_is_solved_with_that_table_turned() -> None:
    scene = resolve_scene(validate_cell(two_table_cell_data()))
    grid = table_grid(scene, x_mm=[450.0, 650.0, 850.0], y_mm=[0.0])
    assert table_axis(scene) == scene.external.table_offset  # the search moves table-1
    result = search_table_placement(scene, grid, top=grid.size)
    other = scene.external.turntables[1]
    # reference: the IK solved directly at the pose the path check gives 'other' (the
    # second table turned to its pin: turntable_motion about its axis); closed form: the
    # target turns from 0.943 m from the robot (beyond l1 + l2) to 0.539 m (inside)
    turn = turntable_motion(other.point, other.axis, [np.radians(OTHER_PIN_DEG)])[0]
    T_world = turn @ scene.targets.T_world_target[2]
    ik = solve_ik_all(
        scene.robot,
        invert_transform(scene.T_world_base) @ T_world[None],
        T_flange_tool=scene.T_flange_tool,
    )
    assert np.any(ik.valid & ik.within_limits)
    assert result.reached[..., 2].all()
    for candidate in result.best:
        # the reported configuration puts the TCP on the turned target (forward kinematics)
        q = result.q[candidate.index][2]
        tcp = scene.T_world_base @ fk_tool(scene.robot, q[None], scene.T_flange_tool)[0]
        np.testing.assert_allclose(tcp[:2, 3], T_world[:2, 3], atol=1e-6)
    checked = 0
    for candidate in result.best[:BLENDED_TOP]:
        if not result.reached[candidate.index].all():
            continue
        assert candidate.table_angle is not None
        assert candidate.blended_cycle_time is not None
        # reference: the path check on the applied candidate (cell_with_turntable_at), near
        # and far pinned at their chosen angles, other keeping its pin on table-2
        angles = {k: candidate.table_angle[k] for k in range(2)}
        total = _blended_total(_applied_cell(scene, grid, candidate, angles))
        assert candidate.blended_cycle_time == pytest.approx(total, rel=1e-6)
        checked += 1
    assert checked >= 1
