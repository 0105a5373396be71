"""Motion export: the columns, the header, and the round trip through the joint-log pose check."""

from __future__ import annotations

import json

import numpy as np
import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.joint_log import parse_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.motion_export import export_motion
from posebridge.planning.path_check import check_path
from posebridge.resources import data_folder
from posebridge.results.log_diagnosis import log_diagnosis_result
from posebridge.results.motion_export import motion_csv, motion_export_result, motion_json
from posebridge.results.path_check import path_check_result

DEMO = data_folder("robots") / "demo-cell.json"


@pytest.fixture(scope="module")
def demo() -> Scene:
    return resolve_scene(load_cell(DEMO), DEMO)


def test_csv_export_round_trips_through_the_pose_check(demo: Scene) -> None:
    index = [p.name for p in demo.paths].index("pick-from-rack")
    report = motion_export_result(
        export_motion(demo, index, period_ms=4.0), cell_name="demo-cell.json"
    )
    text = motion_csv(report)
    log = parse_joint_log(text, demo.robot, source="export.csv")
    columns = report.columns
    table = np.array([[row[columns.index(c)] for c in columns[:8]] for row in report.rows])
    # the joint log reads back the exported joints (six decimals written: 1e-6 deg)
    np.testing.assert_allclose(np.degrees(log.q), table[:, 2:8], atol=1e-6)
    assert log.time_s is not None
    np.testing.assert_allclose(log.time_s, table[:, 0], atol=1e-6)
    # closed form: rows every 4 ms from 0, the last at the end of the motion
    assert np.allclose(np.diff(log.time_s[:-1]), 0.004, atol=1e-6)
    assert log.time_s[-1] == pytest.approx(report.header.cycle_time_s, abs=1e-6)
    diagnosis = log_diagnosis_result(diagnose_log(demo, log))
    assert diagnosis.rows is not None
    replay = np.array(diagnosis.rows.tcp_position_mm)
    tcp = np.array([[row[columns.index(f"tcp_{a}_mm")] for a in "xyz"] for row in report.rows])
    # the pose check's own forward kinematics of the re-imported rows gives the exported TCP
    np.testing.assert_allclose(replay, tcp, atol=1e-3)
    clearance = [row[columns.index("clearance_mm")] for row in report.rows]
    np.testing.assert_allclose(diagnosis.rows.clearance_mm, clearance, atol=1e-3)
    # the replay reproduces the path: the path check's waypoint configurations are passed
    # through at the stops and within the blend radius elsewhere (the path check is the
    # reference for the configurations, the cell file for the blend radii)
    check = path_check_result(check_path(demo, index))
    path = demo.cell.paths[index]
    for w, waypoint in enumerate(check.waypoints):
        assert waypoint.joints_deg is not None
        distance = np.min(np.max(np.abs(np.degrees(log.q) - waypoint.joints_deg), axis=1))
        if not waypoint.blended:
            assert distance < 1e-3
        assert waypoint.pass_distance_mm is not None
        assert waypoint.pass_distance_mm <= path.waypoints[w].blend_mm + 1e-6
    assert diagnosis.branch_change_count == 0  # the path keeps one branch (the path check says so)


def test_json_export_has_the_header_block_and_units(demo: Scene) -> None:
    report = motion_export_result(
        export_motion(demo, 0, period_ms=10.0), cell_name="demo-cell.json"
    )
    data = json.loads(motion_json(report))
    header = data["header"]
    assert header["cell"] == "demo-cell.json"
    assert header["robot"] == demo.robot.name
    assert header["tool"] == demo.tool_name
    assert header["path"] == demo.paths[0].name
    assert header["posebridge_version"]
    # the cell file's speeds, as written (the demo cell is the reference)
    written = demo.cell.paths[0].waypoints
    assert [w["speed_percent"] for w in header["waypoints"]] == [w.speed_percent for w in written]
    assert [w["speed_mm_s"] for w in header["waypoints"]] == [w.speed_mm_s for w in written]
    # every joint column names its unit; blended is never above rest to rest (closed form)
    assert data["columns"][2:8] == [f"{name}_deg" for name in demo.robot.joint_names]
    assert header["cycle_time_s"] <= header["rest_to_rest_cycle_time_s"]
    assert len(data["rows"]) == header["rows"]


def test_bad_periods_are_refused(demo: Scene) -> None:
    with pytest.raises(PlanningInputError, match="period_ms"):
        export_motion(demo, 0, period_ms=0.0)
    with pytest.raises(PlanningInputError, match="period_ms"):
        export_motion(demo, 0, period_ms=float("nan"))
