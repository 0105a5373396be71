"""Rail placement for a robot on a track: closed-form reach of a planar arm beside a row of
targets, a brute-force sweep of track positions, and the demo track cell."""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import solve_ik_all
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.placement import PlacementGrid, search_base_placement
from posebridge.resources import data_folder
from posebridge.results.placement import placement_result, render_placement
from posebridge.transforms import invert_transform

L1, L2 = 0.4, 0.3  # pb-planar2r.toml link lengths, m
INNER = np.sqrt(L1**2 + L2**2 + 2.0 * L1 * L2 * np.cos(np.radians(150.0)))  # |j2| <= 150 deg
ROW_Y = 0.15  # m, the row of targets runs along world x at this y
ROW_X = [0.5, 1.0, 1.5, 2.0]  # m
OFFSETS_MM = [-900.0, -600.0, -300.0, 0.0, 300.0, 600.0, 900.0]


def row_cell() -> Scene:
    """pb-planar2r on a track along world x through the origin, four targets in a row at y = ROW_Y."""
    data = {
        "robot": {"name": "pb-planar2r"},
        "floor_height_mm": -500.0,
        "track": {
            "origin_mm": [0.0, 0.0, 0.0],
            "range_mm": [0.0, 2000.0],
            "speed_mm_s": 1000.0,
            "accel_mm_s2": 2000.0,
        },
        "targets": [
            {"name": f"t{k}", "position_mm": [1000.0 * x, 1000.0 * ROW_Y, 0.0]}
            for k, x in enumerate(ROW_X)
        ],
    }
    return resolve_scene(validate_cell(data))


def test_rail_offset_follows_the_reach_of_the_row() -> None:
    scene = row_cell()
    grid = PlacementGrid.rail_around(scene, offset_mm=OFFSETS_MM, yaw_deg=[0.0, 180.0])
    result = search_base_placement(scene, grid, top=3)
    offsets = np.array(OFFSETS_MM) / 1000.0
    # closed form: the rail line at yaw 0 is y = offset (the rail frame's y is world y), at
    # yaw 180 y = -offset. With the carriage free along the line, a target at distance d
    # from the line is reached from some position iff d <= l1 + l2 (move the carriage so
    # that the wrist distance sqrt(d^2 + u^2) lies in [INNER, l1 + l2]; planar 2R law of
    # cosines): every target of the row has d = |ROW_Y - line y|
    for iyaw, line_y in ((0, offsets), (1, -offsets)):
        distance = np.abs(ROW_Y - line_y)
        assert np.all(np.abs(distance - (L1 + L2)) > 0.01)  # no line on the boundary
        expected = (distance <= L1 + L2).astype(float)
        np.testing.assert_array_equal(result.reach_fraction[0, :, iyaw, 0], expected)
    report = placement_result(result)
    assert report.search == "rail"
    best = report.best[0]
    assert best.reach_fraction == 1.0
    assert best.rail is not None
    line_y = best.rail.offset_mm if abs(best.rail.yaw_deg) < 1.0 else -best.rail.offset_mm
    assert abs(1000.0 * ROW_Y - line_y) <= 1000.0 * (L1 + L2)  # the closed form above
    assert render_placement(report).startswith("Rail placement for pb-planar2r")


def test_track_positions_of_a_line_beside_the_row() -> None:
    scene = row_cell()
    grid = PlacementGrid.rail_around(scene, offset_mm=[-300.0], yaw_deg=[0.0])
    result = search_base_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.track_position is not None
    # closed form: the line y = -0.3 m is d = 0.45 m from the row, more than INNER, so each
    # target's feasible track positions are one interval |s - x| <= sqrt((l1 + l2)^2 - d^2)
    # centred on the target's x; its middle is the target's x (rail frame origin at the
    # world origin: the middle of the 0..2000 mm travel stays at x = 1 m)
    assert INNER < 0.45
    np.testing.assert_allclose(candidate.track_position, ROW_X, atol=1e-4)
    report = placement_result(result).best[0]
    assert report.rail is not None
    # the travel needed: the positions' span and the 100 mm margin at both ends (module
    # docstring), against the configured 0..2000 mm; rail = travel + the 600 mm carriage
    # (the cell model's default carriage length)
    assert report.rail.travel_needed_mm == pytest.approx([400.0, 2100.0], abs=0.1)
    assert report.rail.travel_configured_mm == [0.0, 2000.0]
    assert report.rail.fits is False
    assert report.rail.rail_length_needed_mm == pytest.approx(2300.0, abs=0.2)
    assert report.rail.origin_mm == pytest.approx([0.0, -300.0, 0.0], abs=1e-9)
    assert [t.track_position_mm for t in report.targets] == pytest.approx(
        [1000.0 * x for x in ROW_X], abs=0.1
    )


def test_reached_targets_match_a_dense_sweep_of_track_positions() -> None:
    scene = row_cell()
    grid = PlacementGrid.rail_around(scene, offset_mm=[-600.0, 0.0, 600.0], yaw_deg=[0.0, 90.0])
    result = search_base_placement(scene, grid, top=grid.size)
    track = scene.external.track
    assert track is not None
    positions = np.linspace(-3.0, 5.0, 2001)  # 4 mm steps, wider than any reach
    for candidate in result.best:
        assert candidate.rail_frame is not None
        T_base = candidate.rail_frame @ np.tile(np.eye(4), (positions.size, 1, 1))
        T_base[:, :3, 3] += positions[:, None] * candidate.rail_frame[:3, 0]
        T_base = T_base @ track.T_carriage_base  # carriage height 0
        reached = result.reached[candidate.index]
        for k in range(len(ROW_X)):
            T_base_target = invert_transform(T_base) @ scene.targets.T_world_target[k]
            ik = solve_ik_all(scene.robot, T_base_target, T_flange_tool=scene.T_flange_tool)
            # reference: a brute-force sweep of track positions solved with the same IK (no
            # obstacles near; both elbow branches mirror each other, so any branch will do)
            assert reached[k] == bool(np.any(ik.valid & ik.within_limits))
            if reached[k]:
                # the reported configuration puts the TCP on the target from its position
                s = candidate.track_position[k]  # type: ignore[index]
                T = candidate.rail_frame.copy()
                T[:3, 3] += s * T[:3, 0]
                q = result.q[candidate.index][k]
                tcp = (
                    T @ track.T_carriage_base @ fk_tool(scene.robot, q[None], scene.T_flange_tool)
                )[0]
                np.testing.assert_allclose(  # forward kinematics, closed form of the chain
                    tcp[:3, 3], scene.targets.T_world_target[k][:3, 3], atol=1e-6
                )


def test_rail_search_needs_a_track() -> None:
    scene = resolve_scene(validate_cell({"robot": {"name": "pb-planar2r"}}))
    with pytest.raises(PlanningInputError, match="no track"):
        PlacementGrid.rail_around(scene)


def test_demo_track_cell_searches_its_rail() -> None:
    path = data_folder("robots") / "demo-track-cell.json"
    scene = resolve_scene(load_cell(path), path)
    grid = PlacementGrid.rail_around(scene, offset_mm=[0.0], yaw_deg=[0.0])
    report = placement_result(search_base_placement(scene, grid, top=1))
    assert report.search == "rail"
    assert report.candidates_evaluated == 1
    assert report.current_score == pytest.approx(report.best[0].score)  # the current line
    rail = report.best[0].rail
    assert rail is not None
    # source: demo-track-cell.json's track: origin (0, 0, 40) mm along x, travel 0..4000 mm
    assert rail.travel_configured_mm == [0.0, 4000.0]
    assert rail.origin_mm == pytest.approx([0.0, 0.0, 40.0], abs=1e-9)
    assert rail.direction == pytest.approx([1.0, 0.0, 0.0], abs=1e-12)


TRACK_SPEED_M_S, TRACK_ACCEL_M_S2 = 1.0, 2.0  # rail_cell's track: 1000 mm/s, 2000 mm/s^2
ROBOT_SPEED = np.radians([180.0, 240.0])  # pb-planar2r.toml velocity limits, rad/s
ROBOT_ACCEL = np.radians([720.0, 960.0])  # and acceleration limits, rad/s^2


def trapezoid_s(distance: float, speed: float, accel: float) -> float:
    """Rest-to-rest trapezoid duration, closed form (Lynch & Park, *Modern Robotics*,
    sec. 9.2.2.2): ``D / v + v / a`` when ``D >= v^2 / a``, else ``2 sqrt(D / a)``."""
    if distance >= speed * speed / accel:
        return distance / speed + speed / accel
    return 2.0 * float(np.sqrt(distance / accel))


def rail_cell(
    targets_xy: list[tuple[float, float]],
    waypoints: list[dict[str, object]],
    *,
    pins_mm: list[float] | None = None,
    origin_mm: tuple[float, float, float] = (0.0, 0.0, 0.0),
    direction: tuple[float, float, float] = (1.0, 0.0, 0.0),
    base: dict[str, object] | None = None,
) -> Scene:
    """pb-planar2r on a track (1000 mm/s, 2000 mm/s^2), targets at world (x, y) m, one path.

    ``base``: the robot's foot on the carriage (the cell's ``base``), default at its origin.
    """
    targets: list[dict[str, object]] = [
        {"name": f"t{k}", "position_mm": [1000.0 * x, 1000.0 * y, 0.0]}
        for k, (x, y) in enumerate(targets_xy)
    ]
    for target, pin in zip(targets, pins_mm or [], strict=False):
        target["external_axes"] = {"track": pin}
    data = {
        "robot": {"name": "pb-planar2r"},
        **({} if base is None else {"base": base}),
        "floor_height_mm": -500.0,
        "track": {
            "origin_mm": list(origin_mm),
            "direction": list(direction),
            "range_mm": [-500.0, 2500.0],
            "speed_mm_s": 1000.0 * TRACK_SPEED_M_S,
            "accel_mm_s2": 1000.0 * TRACK_ACCEL_M_S2,
        },
        "targets": targets,
        "paths": [{"name": "p", "waypoints": waypoints}],
    }
    return resolve_scene(validate_cell(data))


def joint_to(target: str, **extra: object) -> dict[str, object]:
    return {"target": target, "motion": "joint", "speed_percent": 100.0, **extra}


@pytest.mark.parametrize("motion", ["joint", "linear"])
def test_track_only_move_estimate_is_the_track_trapezoid(motion: str) -> None:
    # the two targets differ only by 1 m along the rail: the arm reaches both alike
    second = (
        joint_to("t1")
        if motion == "joint"
        else {
            "target": "t1",
            "motion": "linear",
            "speed_mm_s": 2000.0,
        }
    )
    scene = rail_cell([(0.5, 0.15), (1.5, 0.15)], [joint_to("t0"), second])
    grid = PlacementGrid.rail_around(scene, offset_mm=[-300.0], yaw_deg=[0.0])
    result = search_base_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.track_position is not None
    s0, s1 = candidate.track_position
    q = result.q[candidate.index]
    # closed form: each target's feasible positions are centred on its x (the line is
    # 0.45 m from the row, test_track_positions_of_a_line_beside_the_row), so the track
    # moves 1 m and the arm's joints are the same at both ends (same pose relative to the base)
    assert s1 - s0 == pytest.approx(1.0, abs=1e-3)
    np.testing.assert_allclose(q[0], q[1], atol=1e-3)
    expected = trapezoid_s(abs(s1 - s0), TRACK_SPEED_M_S, TRACK_ACCEL_M_S2)  # closed form
    if motion == "linear":
        # the TCP's own trapezoid (1 m at 2 m/s and the default 2 m/s^2: triangular,
        # 1.41 s, closed form) is shorter than the track's 1.5 s: the track sets the time
        assert trapezoid_s(1.0, 2.0, 2.0) < expected
    assert result.cycle_time[candidate.index] == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize(
    ("targets_xy", "dominant"),
    [
        ([(1.0, 0.45), (1.0, -0.45)], 0),  # j1 swings 180 deg, the track hardly moves
        ([(0.5, 0.45), (1.9, 0.35)], 2),  # the track runs 1.4 m, the joints turn a little
    ],
    ids=["robot-joint-dominates", "track-dominates"],
)
def test_synchronised_move_lasts_as_long_as_its_limiting_axis(
    targets_xy: list[tuple[float, float]], dominant: int
) -> None:
    scene = rail_cell(targets_xy, [joint_to("t0"), joint_to("t1")])
    grid = PlacementGrid.rail_around(scene, offset_mm=[0.0], yaw_deg=[0.0])
    result = search_base_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.track_position is not None
    assert result.reach_fraction[candidate.index] == 1.0
    q = result.q[candidate.index]
    delta = np.abs(np.r_[q[1] - q[0], candidate.track_position[1] - candidate.track_position[0]])
    speed = np.r_[ROBOT_SPEED, TRACK_SPEED_M_S]
    accel = np.r_[ROBOT_ACCEL, TRACK_ACCEL_M_S2]
    share = delta / delta.max()
    # the axis named by the case limits both the speed and the acceleration of the
    # synchronised straight-line move (largest share / limit)
    assert int(np.argmax(share / speed)) == dominant
    assert int(np.argmax(share / accel)) == dominant
    # closed form: a synchronised move whose speed and acceleration one axis limits lasts
    # as long as that axis's own trapezoid (Lynch & Park, sec. 9.2.2.2, with the path
    # limits v_i / share_i and a_i / share_i over the largest travel)
    expected = trapezoid_s(delta[dominant], speed[dominant], accel[dominant])
    estimate = result.cycle_time[candidate.index]
    assert estimate == pytest.approx(expected, rel=1e-9)
    for i in range(delta.size):  # and no axis alone could be faster (closed form above)
        assert estimate >= trapezoid_s(delta[i], speed[i], accel[i]) - 1e-12


def test_blended_cycle_time_of_a_rail_candidate_matches_the_path_check() -> None:
    waypoints = [joint_to("t0"), joint_to("t1", blend_mm=100.0), joint_to("t2")]
    targets_xy = [(0.5, 0.15), (1.0, 0.15), (1.8, 0.25)]
    scene = rail_cell(targets_xy, waypoints)
    grid = PlacementGrid.rail_around(scene, offset_mm=[-300.0, 0.0, 300.0], yaw_deg=[0.0])
    result = search_base_placement(scene, grid, top=3)
    best = result.best[0]
    assert result.reach_fraction[best.index] == 1.0
    assert best.blended_cycle_time is not None
    checked = 0
    for candidate in result.best:
        if candidate.blended_cycle_time is None:
            continue
        assert candidate.rail_frame is not None
        assert candidate.track_position is not None
        # reference: the path check of the same cell with the rail moved to the candidate's
        # line and every target pinned at the candidate's track position
        moved = rail_cell(
            targets_xy,
            waypoints,
            pins_mm=[1000.0 * float(s) for s in candidate.track_position],
            origin_mm=tuple(1000.0 * candidate.rail_frame[:3, 3]),  # type: ignore[arg-type]
            direction=tuple(candidate.rail_frame[:3, 0]),  # type: ignore[arg-type]
        )
        check = check_path(moved, 0)
        assert candidate.blended_cycle_time == pytest.approx(check.blended.total, rel=1e-9)
        # never above the path check's rest-to-rest upper bound (blended_timing)
        assert candidate.blended_cycle_time <= check.timing.total + 1e-9
        # any motion that carries the track from its first to its last position, at rest
        # at both ends, takes at least the trapezoid (time-optimal under the track's
        # speed and acceleration limits; Lynch & Park, sec. 9.2.2.2)
        travel = abs(candidate.track_position[-1] - candidate.track_position[0])
        assert candidate.blended_cycle_time >= trapezoid_s(
            travel, TRACK_SPEED_M_S, TRACK_ACCEL_M_S2
        )
        checked += 1
    assert checked >= 1


def test_base_candidate_at_the_current_placement_times_as_the_rail_search() -> None:
    # the track runs 1.4 m between the targets and a joint-value waypoint states a track value
    waypoints = [
        joint_to("t0"),
        joint_to("t1", blend_mm=100.0),
        {"joints_deg": [30.0, -60.0, 1200.0], "motion": "joint", "speed_percent": 100.0},
        {"target": "t0", "motion": "linear", "speed_mm_s": 500.0},
    ]
    scene = rail_cell([(0.5, 0.45), (1.9, 0.35)], waypoints)
    # reference: the rail search run here, its candidate the current line
    rail = search_base_placement(
        scene, PlacementGrid.rail_around(scene, offset_mm=[0.0], yaw_deg=[0.0]), top=1
    )
    base = search_base_placement(scene, PlacementGrid.from_user([0.0], [0.0], [0.0], [0.0]), top=1)
    assert base.current == (0, 0, 0, 0)  # the grid's one candidate is the cell's placement
    assert rail.reach_fraction[0, 0, 0, 0] == 1.0
    on_rail, on_base = rail.best[0], base.best[0]
    assert on_rail.track_position is not None
    assert on_base.track_position is not None
    np.testing.assert_allclose(on_base.track_position, on_rail.track_position, rtol=0, atol=1e-12)
    assert abs(on_rail.track_position[1] - on_rail.track_position[0]) > 1.0  # the track moves
    estimate = rail.cycle_time[0, 0, 0, 0]
    assert np.isfinite(estimate)
    assert base.cycle_time[0, 0, 0, 0] == pytest.approx(estimate, rel=1e-12)
    assert on_rail.blended_cycle_time is not None
    assert on_base.blended_cycle_time == pytest.approx(on_rail.blended_cycle_time, rel=1e-12)
    assert base.score[0, 0, 0, 0] == pytest.approx(rail.score[0, 0, 0, 0], rel=1e-12)
    report = placement_result(base)
    assert report.search == "base"
    assert report.best[0].rail is None  # the rail stays: no rail line to report
    assert [t.track_position_mm for t in report.best[0].targets] == pytest.approx(
        [1000.0 * s for s in on_rail.track_position], abs=1e-9
    )
    assert "base search on a track cell" in report.cycle_time_note


def test_base_candidate_off_the_carriage_origin_times_as_the_cell_mounted_there() -> None:
    waypoints = [joint_to("t0"), joint_to("t1"), joint_to("t2")]
    targets_xy = [(0.5, 0.45), (1.9, 0.35), (1.2, -0.2)]
    x_mm, y_mm, yaw_deg = 200.0, -100.0, 30.0
    scene = rail_cell(targets_xy, waypoints)
    base = search_base_placement(
        scene, PlacementGrid.from_user([x_mm], [y_mm], [yaw_deg], [0.0]), top=1
    )
    # reference: the rail search of the cell with its foot put there on the carriage (what
    # applying the candidate writes), its current line
    mounted = rail_cell(
        targets_xy, waypoints, base={"position_mm": [x_mm, y_mm, 0.0], "rpy_deg": [0, 0, yaw_deg]}
    )
    rail = search_base_placement(
        mounted, PlacementGrid.rail_around(mounted, offset_mm=[0.0], yaw_deg=[0.0]), top=1
    )
    assert rail.reach_fraction[0, 0, 0, 0] == 1.0
    assert base.reach_fraction[0, 0, 0, 0] == 1.0
    on_rail, on_base = rail.best[0], base.best[0]
    assert on_rail.track_position is not None
    assert on_base.track_position is not None
    # both searches find each interval end to 0.1 mm (TRACK_TOLERANCE_M) but from sweeps over
    # differently widened travels, so each chosen middle agrees to the two ends' tolerance
    np.testing.assert_allclose(on_base.track_position, on_rail.track_position, atol=2e-4)
    np.testing.assert_allclose(base.q[0, 0, 0, 0], rail.q[0, 0, 0, 0], atol=1e-3)
    # a 0.2 mm shift of a track end changes the track's trapezoid time by at most
    # 0.2 mm / 1000 mm/s = 0.2 ms per move (Lynch & Park, sec. 9.2.2.2: dT/dD <= 1 / v)
    assert base.cycle_time[0, 0, 0, 0] == pytest.approx(rail.cycle_time[0, 0, 0, 0], abs=1e-3)


def test_base_search_track_only_move_is_the_track_trapezoid() -> None:
    # the foot 300 mm across the carriage puts the base on the line 0.45 m from the row, as
    # the rail search's -300 mm line (test_track_only_move_estimate_is_the_track_trapezoid)
    scene = rail_cell([(0.5, 0.15), (1.5, 0.15)], [joint_to("t0"), joint_to("t1")])
    grid = PlacementGrid.from_user([0.0], [-300.0], [0.0], [0.0])
    result = search_base_placement(scene, grid, top=1)
    candidate = result.best[0]
    assert candidate.track_position is not None
    s0, s1 = candidate.track_position
    q = result.q[candidate.index]
    # closed form: each target's feasible positions are centred on its x (the base is 0.45 m
    # from the row, more than INNER), so the track moves 1 m and the arm's joints are the
    # same at both ends
    assert s1 - s0 == pytest.approx(1.0, abs=1e-3)
    np.testing.assert_allclose(q[0], q[1], atol=1e-3)
    # closed form: the track's own rest-to-rest trapezoid (Lynch & Park, sec. 9.2.2.2)
    expected = trapezoid_s(abs(s1 - s0), TRACK_SPEED_M_S, TRACK_ACCEL_M_S2)
    assert result.cycle_time[candidate.index] == pytest.approx(expected, rel=1e-9)
    # a joints-only estimate would be 0 s here: the arm does not move
    assert expected > 1.0


def test_demo_track_cell_base_search_at_the_current_placement_scores_as_its_rail() -> None:
    path = data_folder("robots") / "demo-track-cell.json"
    scene = resolve_scene(load_cell(path), path)
    base = scene.cell.base
    grid = PlacementGrid.from_user(
        [base.position_mm[0]], [base.position_mm[1]], [base.rpy_deg[2]], [base.pedestal_height_mm]
    )
    on_base = placement_result(search_base_placement(scene, grid, top=1))
    # reference: the rail search of the same cell, its current line
    line = PlacementGrid.rail_around(scene, offset_mm=[0.0], yaw_deg=[0.0])
    on_rail = placement_result(search_base_placement(scene, line, top=1))
    assert on_base.current_score is not None
    assert on_base.current_score == pytest.approx(on_rail.current_score, rel=1e-12)
    assert on_base.current_cycle_time_s == pytest.approx(on_rail.current_cycle_time_s, rel=1e-12)
    assert on_base.current_score > 0.75  # three of the four demo targets (its notes)


RAIL_PIN_MM = 500.0  # t0's pinned track value (along the track from the rail's origin)


def test_a_target_pinned_on_the_track_is_solved_at_its_pin() -> None:
    waypoints = [joint_to("t0"), joint_to("t1"), joint_to("t2")]
    targets_xy = [(1.0, 0.15), (0.5, 0.15), (1.8, 0.25)]
    scene = rail_cell(targets_xy, waypoints, pins_mm=[RAIL_PIN_MM])
    track = scene.external.track
    assert track is not None
    grid = PlacementGrid.rail_around(scene, offset_mm=OFFSETS_MM, yaw_deg=[0.0, 90.0])
    result = search_base_placement(scene, grid, top=grid.size)
    pin = RAIL_PIN_MM / 1000.0
    verdicts = []
    for candidate in result.best:
        assert candidate.rail_frame is not None
        # reference: the IK solved directly with the base at the pinned value on the
        # candidate's line (origin + value * direction, the carriage height 0); nothing
        # collides, so reach within limits decides
        T_base = candidate.rail_frame.copy()
        T_base[:3, 3] += pin * T_base[:3, 0]
        T_base = T_base @ track.T_carriage_base
        T_base_target = invert_transform(T_base) @ scene.targets.T_world_target[0]
        ik = solve_ik_all(scene.robot, T_base_target[None], T_flange_tool=scene.T_flange_tool)
        feasible = bool(np.any(ik.valid & ik.within_limits))
        assert result.reached[candidate.index][0] == feasible
        verdicts.append(feasible)
        if feasible:
            assert candidate.track_position is not None
            # the estimate's track value is the pin (module docstring: used as given)
            assert candidate.track_position[0] == pytest.approx(pin, abs=1e-12)
    assert any(verdicts)
    # closed form: the line x = 0.7 m (yaw 90 deg, offset 300 mm) passes 0.3 m from t0, a
    # track position of its own would reach it; from the pin the base is 0.716 m away
    assert not all(verdicts)
    checked = 0
    for candidate in result.best:
        if candidate.blended_cycle_time is None:
            continue
        assert candidate.rail_frame is not None
        assert candidate.track_position is not None
        # reference: the path check of the same cell with the rail moved to the candidate's
        # line, t0 keeping its pin and the others pinned at their chosen track positions
        pins = [RAIL_PIN_MM] + [1000.0 * float(s) for s in candidate.track_position[1:]]
        moved = rail_cell(
            targets_xy,
            waypoints,
            pins_mm=pins,
            origin_mm=tuple(1000.0 * candidate.rail_frame[:3, 3]),  # type: ignore[arg-type]
            direction=tuple(candidate.rail_frame[:3, 0]),  # type: ignore[arg-type]
        )
        check = check_path(moved, 0)
        assert candidate.blended_cycle_time == pytest.approx(check.blended.total, rel=1e-9)
        checked += 1
    assert checked >= 1
