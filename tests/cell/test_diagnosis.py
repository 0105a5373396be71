"""Pose and log diagnosis on the demo cell.

References: the demo CSV and robots/pb-arm6.toml read directly with csv/tomllib (joint
margins, speeds |dq|/dt against the velocity limits, the wrist bend |j5| from straight
and its sign: closed forms for pb-arm6, whose j4 and j6 both turn about x so the wrist is
straight at j5 = 0); pinocchio FK on robots/pb-arm6.urdf for TCP poses; scipy Rotation for
rpy and quaternions; python-fcl with pinocchio placements (``fcl_cell``, conftest.py);
the documented worst-row rule; our own contract for messages.
"""

from __future__ import annotations

import csv
import tomllib

import numpy as np
import pinocchio as pin
import pytest
from scipy.spatial.transform import Rotation

from posebridge.cell.joint_log import parse_joint_log, read_joint_log
from posebridge.cell.log_diagnosis import WORST_ROW_RULE, diagnose_log
from posebridge.cell.pose_diagnosis import diagnose_pose
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.resources import data_folder
from posebridge.results.cell import LogDiagnosis, PoseDiagnosis
from posebridge.results.cell_text import render_log_diagnosis, render_pose_diagnosis
from posebridge.results.diagnosis import pose_diagnosis_result
from posebridge.results.log_diagnosis import log_diagnosis_result

ROBOTS = data_folder("robots")
DEMO_LOG = ROBOTS / "demo-log.csv"
FCL_TOLERANCE_MM = 0.6  # python-fcl overestimates capsule distances by up to 0.5 mm


@pytest.fixture(scope="module")
def csv_log() -> tuple[np.ndarray, np.ndarray]:
    """Time (s) and joint values (deg) of the demo log, read with the csv module."""
    with DEMO_LOG.open(newline="") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == ["time_s", "j1", "j2", "j3", "j4", "j5", "j6"]
    values = np.array(rows[1:], dtype=float)
    return values[:, 0], values[:, 1:]


@pytest.fixture(scope="module")
def limits() -> np.ndarray:
    """Per joint [min_deg, max_deg, velocity_deg_s] from robots/pb-arm6.toml (tomllib)."""
    with (ROBOTS / "pb-arm6.toml").open("rb") as handle:
        joints = tomllib.load(handle)["joint"]
    return np.array(
        [
            [j["limits"]["min_deg"], j["limits"]["max_deg"], j["limits"]["velocity_deg_s"]]
            for j in joints
        ]
    )


@pytest.fixture(scope="module")
def diagnosis(demo_scene) -> LogDiagnosis:
    return log_diagnosis_result(
        diagnose_log(demo_scene, read_joint_log(DEMO_LOG, demo_scene.robot))
    )


# --- the demo log -----------------------------------------------------------------------------


def test_over_limit_jump_found(diagnosis, csv_log, limits) -> None:
    time, q = csv_log
    # closed form: speed between rows = |dq| / dt against robots/pb-arm6.toml's limits
    speed = np.abs(np.diff(q, axis=0)) / np.diff(time)[:, None]
    pairs, joints = np.nonzero(speed > limits[:, 2])
    assert diagnosis.velocity.checked
    assert diagnosis.velocity.jump_count == len(pairs) == 1
    (jump,) = diagnosis.velocity.jumps
    assert (jump.joint, jump.time_from_s, jump.time_to_s) == ("j4", 3.56, 3.60)
    assert jump.row == pairs[0] + 1
    assert jump.joint == f"j{joints[0] + 1}"
    assert jump.speed == pytest.approx(speed[pairs[0], joints[0]], rel=1e-9)
    assert jump.limit == pytest.approx(limits[3, 2], rel=1e-12)  # robots/pb-arm6.toml
    assert jump.change == pytest.approx(q[pairs[0] + 1, 3] - q[pairs[0], 3], abs=1e-9)
    velocity = [f for f in diagnosis.findings if f.code == "velocity"]
    assert [f.severity for f in velocity] == ["error"]
    assert velocity[0].message.startswith("j4 changes by +19.7 deg between t 3.56 s and 3.6 s")


def test_smallest_margin_rows(diagnosis, csv_log, limits) -> None:
    time, q = csv_log
    # closed form: margin = distance to the nearer limit of robots/pb-arm6.toml
    margin = np.minimum(q - limits[:, 0], limits[:, 1] - q)
    for extreme in diagnosis.smallest_margins:
        j = int(extreme.joint[1:]) - 1
        row = int(np.argmin(margin[:, j]))
        assert extreme.row == row
        assert extreme.time_s == time[row]
        assert extreme.margin == pytest.approx(margin[row, j], abs=1e-9)
    j6 = next(e for e in diagnosis.smallest_margins if e.joint == "j6")
    # the demo's smallest margin: j6 at 353.6 deg, 1.4 deg below its 355 deg limit
    assert j6.time_s == 6.40
    assert j6.nearer_limit == "upper"
    assert j6.margin == pytest.approx(limits[5, 1] - 353.6, abs=1e-9)
    low = [s for s in diagnosis.stretches if s.condition == "low limit margin"]
    assert any(s.first_row <= j6.row <= s.last_row and "j6" in s.detail for s in low)


def test_near_singular_rows(diagnosis, csv_log) -> None:
    time, q = csv_log
    # closed form for pb-arm6: the wrist bend from straight is |j5| (|j5| < 90 deg here);
    # threshold 10 deg (common practice, no source)
    expected = set(np.flatnonzero(np.abs(q[:, 4]) < 10.0).tolist())
    stretches = [s for s in diagnosis.stretches if s.condition == "near wrist singularity"]
    found = {r for s in stretches for r in range(s.first_row, s.last_row + 1)}
    assert found == expected
    assert expected
    closest = diagnosis.closest_singularity
    row = int(np.argmin(np.abs(q[:, 4])))
    assert closest.row == row
    assert closest.time_s == time[row]
    assert closest.value == pytest.approx(abs(q[row, 4]), abs=1e-9)
    assert diagnosis.rows is not None
    np.testing.assert_allclose(diagnosis.rows.wrist_bend_deg, np.abs(q[:, 4]), atol=1e-9)


def test_wrist_branch_changes(diagnosis, csv_log) -> None:
    _, q = csv_log
    # closed form for pb-arm6: the wrist branch is the sign of j5; a branch change is a change of
    # sign between consecutive rows where j5 is not exactly 0
    sign = np.sign(q[:, 4])
    defined = np.flatnonzero(sign != 0)
    changes = defined[1:][sign[defined[1:]] != sign[defined[:-1]]]
    assert [f.row for f in diagnosis.branch_changes] == changes.tolist()
    assert all(f.part == "wrist" for f in diagnosis.branch_changes)
    assert diagnosis.branch_change_count == len(changes) == 2
    first = diagnosis.branch_changes[0]
    assert (first.before, first.after) == ("positive", "negative")


def test_rows_follow_pinocchio_fk(diagnosis, demo_scene, csv_log, pin_tool) -> None:
    _, q = csv_log
    model, data, tool = pin_tool
    positions = []
    for row in np.radians(q):
        pin.framesForwardKinematics(model, data, row)
        positions.append((demo_scene.T_world_base @ data.oMf[tool].homogeneous)[:3, 3] * 1000.0)
    # pinocchio forward kinematics (reference library)
    np.testing.assert_allclose(diagnosis.rows.tcp_position_mm, positions, atol=1e-6)
    assert diagnosis.rows.line == list(range(2, len(q) + 2))


def test_worst_row_of_the_demo_log_is_its_deepest_collision(diagnosis) -> None:
    worst = diagnosis.worst_row
    assert worst.rule == WORST_ROW_RULE
    clearance = np.array(diagnosis.rows.clearance_mm, dtype=float)
    # the documented rule: a collision exists (the move from the press to the conveyor
    # sweeps the gripper through the press), so the deepest one is the worst row
    assert clearance.min() < 0.0
    assert worst.row == int(np.argmin(clearance))
    assert worst.reason.startswith("deepest collision")
    assert worst.diagnosis.clearance_mm == pytest.approx(clearance.min(), abs=1e-9)


# --- worst-row rule and other logs ---------------------------------------------------------


def rows_text(rows: list[list[float]], times: list[float] | None = None) -> str:
    header = ("time_s," if times else "") + "j1,j2,j3,j4,j5,j6\n"
    lines = []
    for k, row in enumerate(rows):
        values = ([times[k]] if times else []) + row
        lines.append(",".join(repr(float(v)) for v in values))
    return header + "\n".join(lines) + "\n"


def test_worst_row_rule_order(demo_scene, documented_joints) -> None:
    rack = documented_joints["rack-low-1"]
    gauge = documented_joints["gauge-probe"]
    # j6 at -360 deg is 5 deg beyond its -355 deg limit; the gripper and flange capsules are
    # round about the j6 axis, so clearance is that of rack-low-1 (closed form)
    beyond = [*rack[:5], -360.0]
    robot = demo_scene.robot
    outside = log_diagnosis_result(
        diagnose_log(demo_scene, parse_joint_log(rows_text([rack, gauge, beyond]), robot))
    )
    clearance = np.array(outside.rows.clearance_mm, dtype=float)
    assert clearance.min() >= 0.0  # no collision, so the next rule decides
    # documented rule: the row farthest outside a limit
    assert outside.worst_row.row == 2
    assert outside.worst_row.reason.startswith("farthest outside a limit: j6 5.0 deg")
    assert any(f.code == "outside-limits" and f.severity == "error" for f in outside.findings)
    # documented rule: faster than a limit comes next (j1 moves 214.3 deg in 0.01 s)
    fast = log_diagnosis_result(
        diagnose_log(demo_scene, parse_joint_log(rows_text([rack, gauge], [0.0, 0.01]), robot))
    )
    assert fast.worst_row.row == 1
    assert fast.worst_row.reason.startswith("fastest change above a velocity limit: j1")


def test_worst_row_without_hazards_is_closest_to_a_threshold(demo_scene, documented_joints) -> None:
    rows = [documented_joints[name] for name in ("rack-low-1", "rack-low-2", "gauge-probe")]
    result = log_diagnosis_result(
        diagnose_log(demo_scene, parse_joint_log(rows_text(rows), demo_scene.robot))
    )
    t = result.thresholds
    r = result.rows
    # closed form of the documented rule over the reported per-row values
    ratio = [
        min(
            r.clearance_mm[k] / t.clearance_mm,
            min(m / t.limit_margin_deg for m in r.margins[k] if m is not None),
            r.wrist_bend_deg[k] / t.wrist_deg,
            r.elbow_deg[k] / t.elbow_deg,
            r.shoulder_mm[k] / t.shoulder_mm,
        )
        for k in range(3)
    ]
    assert min(r.clearance_mm) >= 0.0
    assert result.worst_row.row == int(np.argmin(ratio))
    assert result.worst_row.reason.startswith("closest to a warning threshold")


def test_velocity_check_skipped_without_time(demo_scene, documented_joints) -> None:
    text = rows_text([documented_joints["rack-low-1"], documented_joints["gauge-probe"]])
    result = log_diagnosis_result(
        diagnose_log(demo_scene, parse_joint_log(text, demo_scene.robot)), include_rows=False
    )
    assert not result.velocity.checked
    assert result.velocity.reason == "skipped: the log has no time_s column"
    assert result.duration_s is None
    assert result.rows is None
    (skipped,) = [f for f in result.findings if f.code == "velocity-skipped"]
    assert skipped.severity == "info"


def test_log_of_another_robot_is_refused(demo_scene, robot) -> None:
    log = parse_joint_log("x,y,z,c\n0,0,0,0\n", robot("pb-gantry3"), source="gantry.csv")
    with pytest.raises(KinematicsInputError) as error:
        log_diagnosis_result(diagnose_log(demo_scene, log))
    assert str(error.value) == (
        "joint log 'gantry.csv': its joints (x, y, z, c) are not those of robot 'pb-arm6' "
        "(j1, j2, j3, j4, j5, j6)"
    )


def test_log_report_round_trips_and_renders(diagnosis) -> None:
    assert LogDiagnosis.model_validate_json(diagnosis.model_dump_json()) == diagnosis
    text = render_log_diagnosis(diagnosis)
    assert "worst row:" in text
    assert "j6" in text
    assert all(line == line.rstrip() for line in text.splitlines())


# --- one pose -----------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def gauge_pose(demo_scene, documented_joints) -> PoseDiagnosis:
    return pose_diagnosis_result(
        diagnose_pose(demo_scene, np.radians(documented_joints["gauge-probe"]))
    )


def test_pose_frames_match_pinocchio_and_scipy(
    gauge_pose, demo_scene, documented_joints, pin_tool
) -> None:
    model, data, tool = pin_tool
    pin.framesForwardKinematics(model, data, np.radians(documented_joints["gauge-probe"]))
    T_base = data.oMf[tool].homogeneous
    T_world = demo_scene.T_world_base @ T_base
    for frame, T in ((gauge_pose.tcp_world, T_world), (gauge_pose.tcp_base, T_base)):
        # pinocchio forward kinematics (reference library)
        np.testing.assert_allclose(frame.position_mm, T[:3, 3] * 1000.0, atol=1e-6)
        # scipy Rotation (reference library): fixed-axis xyz rpy, quaternion scalar-last
        R = Rotation.from_euler("xyz", frame.rpy_deg, degrees=True).as_matrix()
        np.testing.assert_allclose(R, T[:3, :3], atol=1e-9)
        x, y, z, w = Rotation.from_matrix(T[:3, :3]).as_quat()
        expected = np.array([w, x, y, z]) * (1.0 if w >= 0 else -1.0)
        np.testing.assert_allclose(frame.quaternion_wxyz, expected, atol=1e-9)


def test_pose_margins_branch_and_singularity(gauge_pose, documented_joints, limits) -> None:
    q = np.array(documented_joints["gauge-probe"])
    # closed form: margins to the robots/pb-arm6.toml limits
    margin = np.minimum(q - limits[:, 0], limits[:, 1] - q)
    np.testing.assert_allclose([m.margin for m in gauge_pose.margins], margin, atol=1e-9)
    assert gauge_pose.min_margin_joint == "j3"  # 23 deg of a 280 deg range: smallest fraction
    # j5 = 3 deg > 0: wrist positive (closed form for pb-arm6)
    assert gauge_pose.wrist == 1
    assert gauge_pose.branch.endswith("positive")
    assert gauge_pose.singularity.kind == "wrist"
    assert gauge_pose.singularity.wrist_bend_deg == pytest.approx(3.0, abs=1e-9)
    assert any(f.code == "singularity" for f in gauge_pose.findings)


def test_pose_nearest_target_and_other_branches(gauge_pose, documented_joints) -> None:
    nearest = gauge_pose.nearest_targets[0]
    # demo notes: gauge-probe was placed by FK of these joint values (file rounding 0.001 mm)
    assert (nearest.name, nearest.pose) == ("gauge-probe", "target")
    assert nearest.distance_mm < 0.01
    assert nearest.angle_deg < 1e-3
    assert any(f.code == "at-target" and f.target == "gauge-probe" for f in gauge_pose.findings)
    distances = [t.distance_mm for t in gauge_pose.nearest_targets]
    assert distances == sorted(distances)
    # the approach pose is 80 mm back along the tool axis (cell file)
    approach = next(t for t in gauge_pose.nearest_targets if t.pose == "approach")
    assert approach.distance_mm == pytest.approx(80.0, abs=0.01)
    mine = gauge_pose.branches[gauge_pose.input_branch]
    np.testing.assert_allclose(mine.joints_deg, documented_joints["gauge-probe"], atol=1e-9)
    assert len({b.branch for b in gauge_pose.branches}) == len(gauge_pose.branches) > 1


def test_pose_closest_objects_match_python_fcl(gauge_pose, fcl_cell, documented_joints) -> None:
    table = fcl_cell.obstacle_distances(np.radians(documented_joints["gauge-probe"]))
    per_object: dict[str, float] = {}
    for (_, name), distance in table.items():
        per_object[name] = min(per_object.get(name, np.inf), distance * 1000.0)
    reference = sorted(per_object.items(), key=lambda item: item[1])
    listed = gauge_pose.closest_objects
    # python-fcl (reference library): the same nearest obstacles, within 0.6 mm
    assert [o.name for o in listed[:3]] == [name for name, _ in reference[:3]]
    for entry in listed:
        assert entry.distance_mm == pytest.approx(per_object[entry.name], abs=FCL_TOLERANCE_MM)
    assert gauge_pose.closest_environment.other == listed[0].name
    assert gauge_pose.clearance_mm == pytest.approx(
        min(gauge_pose.closest_environment.distance_mm, gauge_pose.closest_self.distance_mm)
    )


def test_pose_input_shapes(demo_scene) -> None:
    with pytest.raises(KinematicsInputError, match="expected one configuration of 6 values"):
        diagnose_pose(demo_scene, np.zeros((2, 6)))
    text = render_pose_diagnosis(pose_diagnosis_result(diagnose_pose(demo_scene, np.zeros(6))))
    assert "TCP in world" in text
    assert "* " in text


def test_pose_reports_environment_and_self_clearance_apart(
    gauge_pose, fcl_cell, documented_joints
) -> None:
    table = fcl_cell.obstacle_distances(np.radians(documented_joints["gauge-probe"]))
    (capsule, obstacle), distance = min(table.items(), key=lambda item: item[1])
    # python-fcl (reference library): the clearance to the cell, whatever the arm's own pairs
    assert gauge_pose.environment_clearance_mm == pytest.approx(
        distance * 1000.0, abs=FCL_TOLERANCE_MM
    )
    first, second = gauge_pose.closest_self.capsule, gauge_pose.closest_self.other
    own = fcl_cell.capsule_distance(np.radians(documented_joints["gauge-probe"]), first, second)
    assert gauge_pose.self_clearance_mm == pytest.approx(own * 1000.0, abs=FCL_TOLERANCE_MM)
    # our own contract: the text gives both, each with its pair
    text = render_pose_diagnosis(gauge_pose)
    assert f"environment:       {gauge_pose.environment_clearance_mm:.1f} mm ({capsule}" in text
    assert f"self-clearance:    {gauge_pose.self_clearance_mm:.1f} mm ({first}" in text
    assert obstacle in text
