"""The optimiser and its result at the user boundary: the report, its words, and edits the path check follows."""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.sequence_report import optimise_path, with_waypoint_joints
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result
from posebridge.results.sequence import WaypointJoints, render_sequence, sequence_result
from posebridge.units import m_from_mm, rad_from_deg

DEMO = data_folder("robots") / "demo-cell.json"


@pytest.mark.parametrize("name", ["pick-from-rack", "unload-to-conveyor"])
def test_edits_make_the_path_check_follow_the_fastest_sequence(name: str) -> None:
    cell = load_cell(DEMO)
    scene = resolve_scene(cell, DEMO)
    index = [p.name for p in scene.paths].index(name)
    report = sequence_result(optimise_path(scene, index))
    assert report.feasible
    assert report.best is not None
    edited = with_waypoint_joints(cell, index, report.edits)
    check = path_check_result(check_path(resolve_scene(edited, DEMO), index))
    # reference: the path check of the edited cell chooses the optimiser's configurations
    for chosen, best in zip(check.waypoints, report.best.waypoints, strict=True):
        assert chosen.joints_deg is not None
        assert best.joints_deg is not None
        assert chosen.joints_deg == pytest.approx(best.joints_deg, abs=1e-6)
    # and it finds no collision on them (the optimiser's constraint, checked independently)
    assert not [f for f in check.findings if f.kind == "collision"]
    assert check.cycle_time_s == pytest.approx(report.best.cycle_time_s, abs=1e-9)
    # only the edited waypoints changed kind; the rest keep their targets (closed form)
    edited_indices = {e.index for e in report.edits}
    before = cell.paths[index].waypoints
    after = edited.paths[index].waypoints
    for w, (a, b) in enumerate(zip(before, after, strict=True)):
        assert (a == b) == (w not in edited_indices)


def test_demo_unload_path_states_the_broken_constraint_and_the_price() -> None:
    scene = resolve_scene(load_cell(DEMO), DEMO)
    index = [p.name for p in scene.paths].index("unload-to-conveyor")
    report = sequence_result(optimise_path(scene, index))
    # the demo's return joint move hits the press column today (the path check finds it)
    assert [v.reason for v in report.current.violations] == ["collision"]
    assert report.saving_s is not None
    assert report.best is not None
    assert report.current.cycle_time_s is not None
    assert report.best.cycle_time_s is not None
    # closed form: the saving is current minus best
    assert report.saving_s == pytest.approx(report.current.cycle_time_s - report.best.cycle_time_s)
    assert "breaks 1 constraint" in report.summary
    assert report.edits, "the valid sequence needs at least one waypoint rewritten"
    text = render_sequence(report)
    assert report.summary in text
    assert "in collision" in text


def test_fastest_sequence_is_never_slower_when_the_current_choice_is_valid() -> None:
    scene = resolve_scene(load_cell(DEMO), DEMO)
    for index in range(len(scene.paths)):
        report = sequence_result(
            optimise_path(scene, index, limit_margin_rad=float(rad_from_deg(2.0))),
            limit_margin_deg=2.0,
        )
        if report.current.violations or report.best is None:
            continue
        assert report.best.cycle_time_s is not None
        assert report.current.cycle_time_s is not None
        # the current choice is one of the sequences searched (closed form: a minimum)
        assert report.best.cycle_time_s <= report.current.cycle_time_s + 1e-9
        assert report.best.violations == []
        worded = "same branch throughout" if report.best.same_branch_throughout else "changes"
        assert worded in report.summary
        # every chosen configuration keeps the margin (joint limits of the cell's robot)
        robot = scene.robot
        for waypoint in report.best.waypoints:
            q = np.radians(np.asarray(waypoint.joints_deg))
            margin = np.degrees(np.minimum(q - robot.lower, robot.upper - q))
            assert np.all(margin >= 2.0 - 1e-9)


def test_edits_outside_the_path_are_refused() -> None:
    cell = load_cell(DEMO)
    with pytest.raises(PlanningInputError, match="waypoint 99"):
        with_waypoint_joints(cell, 0, [WaypointJoints(index=99, joints_deg=[0.0] * 6)])


def test_limit_margin_comes_from_the_cell_thresholds_unless_given() -> None:
    cell = load_cell(DEMO)
    strict = cell.thresholds.model_copy(update={"limit_margin_deg": 12.0, "limit_margin_mm": 7.0})
    scene = resolve_scene(cell.model_copy(update={"thresholds": strict}), DEMO)
    index = 0
    from_cell = sequence_result(optimise_path(scene, index))
    # our own contract: the cell's thresholds are the default margins
    assert (from_cell.limit_margin_deg, from_cell.limit_margin_mm) == (12.0, 7.0)
    given = sequence_result(
        optimise_path(
            scene,
            index,
            limit_margin_rad=float(rad_from_deg(12.0)),
            limit_margin_m=float(m_from_mm(7.0)),
        ),
        limit_margin_deg=12.0,
        limit_margin_mm=7.0,
    )
    assert given == from_cell  # the same search as naming them
    overridden = sequence_result(
        optimise_path(scene, index, limit_margin_rad=float(rad_from_deg(1.0))), limit_margin_deg=1.0
    )
    assert (overridden.limit_margin_deg, overridden.limit_margin_mm) == (1.0, 7.0)
    if overridden.best is not None:
        # every chosen configuration keeps the 1 deg margin (joint limits of the cell's robot)
        robot = scene.robot
        for waypoint in overridden.best.waypoints:
            q = np.radians(np.asarray(waypoint.joints_deg))
            assert np.all(np.minimum(q - robot.lower, robot.upper - q) >= np.radians(1.0) - 1e-9)
