"""Path checks: findings tied to segments and positions, against closed forms."""

from __future__ import annotations

import math

import fcl
import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.geometry.clearance import capsule_segments_world
from posebridge.kinematics.fk import fk_tool
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path, slerp
from posebridge.resources import data_folder
from posebridge.results.path_check import (
    PathCheckReport,
    PathFinding,
    path_check_result,
    render_path_check,
)
from posebridge.robot.library import load_robot
from posebridge.transforms import (
    quaternion_from_rotation_matrix,
    rotation_matrix_from_quaternion,
    rpy_from_rotation_matrix,
)


def cell(robot: str, waypoints: list[dict[str, object]], **extra: object) -> Scene:
    data = {"robot": {"name": robot}, "paths": [{"name": "p", "waypoints": waypoints}], **extra}
    return resolve_scene(validate_cell(data))


def down(x_mm: float, *, motion: str = "linear", **speed: float) -> dict[str, object]:
    """A gantry pose waypoint 1000 mm high at y = 500 mm, tool pointing down."""
    return {
        "pose": {"position_mm": [x_mm, 500.0, 1000.0], "rpy_deg": [180.0, 0.0, 0.0]},
        "motion": motion,
        **speed,
    }


def joints(values: list[float], percent: float = 100.0) -> dict[str, object]:
    return {"joints_deg": values, "motion": "joint", "speed_percent": percent}


def of_kind(report: PathCheckReport, kind: str) -> list[PathFinding]:
    return [f for f in report.findings if f.kind == kind]


def test_collision_with_a_box_under_the_line() -> None:
    box = {
        "name": "block",
        "shape": "box",
        "position_mm": [750.0, 500.0, 900.0],
        "size_mm": [100.0, 100.0, 100.0],
    }
    scene = cell(
        "pb-gantry3",
        [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=250.0)],
        fixtures=[box],
    )
    report = path_check_result(check_path(scene, 0, resolution_m=0.005))
    (hit,) = of_kind(report, "collision")
    # closed form: the head capsule (axis from the TCP 30 mm down, radius 45 mm) dips
    # sqrt(45^2 - d^2) below its axis end at horizontal distance d, so it reaches the box top
    # (950 mm, 20 mm below the axis end at 970 mm) while d < sqrt(45^2 - 20^2) = 40.31 mm:
    # TCP x in (700 - 40.31, 800 + 40.31) mm of the 500..1000 mm line
    reach = math.sqrt(45.0**2 - 20.0**2)
    first = (700.0 - reach - 500.0) / 500.0
    last = (800.0 + reach - 500.0) / 500.0
    step = 5.0 / 500.0
    assert first <= hit.fraction_start <= first + step
    assert last - step <= hit.fraction_end <= last
    # closed form: straight over the box the capsule bottom (925 mm) is 25 mm inside its top
    assert hit.distance_mm == pytest.approx(-25.0, abs=1e-6)
    assert hit.obstacle == "block"
    assert hit.capsule == "head"
    assert (hit.segment_index, hit.from_waypoint, hit.to_waypoint) == (0, "pose #1", "pose #2")
    assert hit.position_mm == pytest.approx(500.0 * hit.fraction_worst, abs=1e-6)
    assert not report.ok


def test_unreachable_beyond_the_axis_travel() -> None:
    scene = cell(
        "pb-gantry3",
        [down(1500.0, motion="joint", speed_percent=100.0), down(2500.0, speed_mm_s=250.0)],
    )
    report = path_check_result(check_path(scene, 0, resolution_m=0.005))
    (gap,) = of_kind(report, "unreachable")
    # closed form: the x axis ends at 2000 mm (pb-gantry3.toml), half way along 1500..2500 mm;
    # the first sample past it is one 5 mm step (fraction 0.005) later
    assert 0.5 < gap.fraction_start <= 0.505 + 1e-9
    assert gap.fraction_end == pytest.approx(1.0)
    assert any(f.kind == "waypoint" and f.to_waypoint == "pose #2" for f in report.findings)
    assert report.cycle_time_s is None


def test_speed_demand_above_the_joint_limit() -> None:
    scene = cell(
        "pb-gantry3",
        [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=2000.0)],
    )
    (limit,) = of_kind(path_check_result(check_path(scene, 0)), "speed_limit")
    # closed form: along x, dq_x/ds = 1, so the highest speed is the x axis' 1500 mm/s
    assert limit.speed_mm_s == pytest.approx(1500.0, abs=1e-6)
    assert limit.joint == "x"
    assert (limit.fraction_start, limit.fraction_end) == (0.0, 1.0)


def test_joint_limit_margin_and_values_outside_the_limits() -> None:
    scene = cell(
        "pb-gantry3",
        [
            joints([1000.0, 750.0, 400.0, 0.0]),
            joints([1995.0, 750.0, 400.0, 0.0]),
            joints([2100.0, 750.0, 400.0, 0.0]),
        ],
    )
    findings = of_kind(
        path_check_result(check_path(scene, 0, thresholds=QualityThresholds(limit_margin_mm=10.0))),
        "joint_limit",
    )
    near = [f for f in findings if f.severity == "warning" and f.segment_index == 0]
    outside = [f for f in findings if f.severity == "error"]
    # closed form: 2000 mm (upper limit of x) - 1995 mm = 5 mm, below the 10 mm margin
    assert near[0].distance_mm == pytest.approx(5.0, abs=1e-6)
    assert near[0].joint == "x"
    assert near[0].fraction_worst == pytest.approx(1.0)
    # closed form: 2100 mm is 100 mm past the 2000 mm limit
    assert min(f.distance_mm for f in outside if f.distance_mm is not None) == pytest.approx(
        -100.0, abs=1e-6
    )


def _pose_waypoint(T: np.ndarray) -> dict[str, object]:
    return {
        "pose": {
            "position_mm": (1000.0 * T[:3, 3]).tolist(),
            "rpy_deg": rpy_from_rotation_matrix(T[:3, :3], degrees=True).tolist(),
        },
        "motion": "linear",
        "speed_mm_s": 100.0,
    }


def test_linear_move_through_the_wrist_singularity_is_an_error() -> None:
    robot = load_robot("pb-arm6")
    q_a = np.radians([0.0, 0.0, 0.0, 0.0, 10.0, 0.0])
    q_b = np.radians([0.0, 0.0, 0.0, 0.0, -10.0, 0.0])
    T_b = fk_tool(robot, q_b[None])[0]
    scene = cell(
        "pb-arm6", [joints(np.degrees(q_a).tolist()), _pose_waypoint(T_b)], floor_height_mm=-2000.0
    )
    report = path_check_result(
        check_path(scene, 0, resolution_m=0.001, resolution_rad=np.radians(0.5))
    )
    changes = [f for f in report.findings if f.kind in ("branch_change", "configuration_jump")]
    # closed form: the move mirrors the wrist bend j5 = +10 deg -> -10 deg about the straight
    # wrist, so half way the orientation (slerp) is the straight-wrist one and j5 must pass 0
    # (wrist singularity, Siciliano et al., Robotics, sec. 3.3): the wrist sign changes there
    assert changes
    assert all(f.severity == "error" and f.segment_index == 0 for f in changes)
    assert any(abs(f.fraction_worst - 0.5) <= 0.05 for f in changes)
    assert any(
        f.kind == "singularity" and abs(f.fraction_worst - 0.5) <= 0.05 for f in report.findings
    )


def test_slerp_against_rotation_composition() -> None:
    R_a = rotation_matrix_from_quaternion([1.0, 0.0, 0.0, 0.0])
    angle = np.radians(120.0)
    q_b = [math.cos(angle / 2), 0.0, 0.0, math.sin(angle / 2)]
    q = slerp(quaternion_from_rotation_matrix(R_a), q_b, np.array([0.25, 0.5]))
    # closed form: slerp between identity and a 120 deg turn about z is a turn about z by
    # t * 120 deg (Shoemake 1985), quaternion (cos(t 60 deg), 0, 0, sin(t 60 deg))
    for k, t in enumerate((0.25, 0.5)):
        half = t * angle / 2
        assert np.allclose(q[k], [math.cos(half), 0.0, 0.0, math.sin(half)], atol=1e-12)


def test_demo_paths_tie_findings_to_their_segments() -> None:
    path = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(path), path)
    for index in range(len(scene.paths)):
        report = path_check_result(check_path(scene, index))
        names = {(s.index, s.from_waypoint, s.to_waypoint) for s in report.segments}
        for finding in report.findings:
            if finding.kind != "waypoint":
                assert (finding.segment_index, finding.from_waypoint, finding.to_waypoint) in names
            assert finding.fraction_start <= finding.fraction_worst <= finding.fraction_end
        # source: the cell file, waypoint counts of each path
        assert len(report.waypoints) == len(scene.cell.paths[index].waypoints)
        assert len(report.segments) == len(report.waypoints) - 1
        assert render_path_check(report).startswith(f"Path {scene.paths[index].name!r}")


def test_demo_return_joint_move_hits_the_press_column() -> None:
    path = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(path), path)
    index = [p.name for p in scene.paths].index("unload-to-conveyor")
    report = path_check_result(check_path(scene, index))
    (hit,) = [f for f in report.findings if f.kind == "collision"]
    last = report.segments[-1]
    # the cell file: the path ends with a joint move back to the start configuration
    assert (hit.segment_index, last.motion) == (last.index, "joint")
    assert (hit.capsule, hit.obstacle) == ("gripper-body", "press-column-right")
    assert hit.distance_mm is not None
    assert hit.distance_mm < 0.0
    # a joint move runs all joints on one straight line in joint space (documented)
    q_from, q_to = sample_path(scene, index).waypoint_q[-2:]
    q = q_from + hit.fraction_worst * (q_to - q_from)
    # python-fcl signed distance there (reference library): the gripper is inside the column
    clearance = clearance_scene(scene)
    c = clearance.arm.names.index("gripper-body")
    o = clearance.obstacles.names.index("press-column-right")
    start, end = capsule_segments_world(clearance.arm, q[None], clearance.T_world_base)[0, c]
    axis = end - start
    rotation = Rotation.align_vectors([axis / np.linalg.norm(axis)], [[0.0, 0.0, 1.0]])[0]
    capsule = fcl.CollisionObject(
        fcl.Capsule(clearance.arm.radius[c], float(np.linalg.norm(axis))),
        fcl.Transform(rotation.as_matrix(), 0.5 * (start + end)),
    )
    column = fcl.CollisionObject(
        fcl.Box(*(2.0 * clearance.obstacles.params[o])),
        fcl.Transform(clearance.obstacles.rotation[o], clearance.obstacles.translation[o]),
    )
    request = fcl.DistanceRequest(enable_signed_distance=True)
    assert fcl.distance(capsule, column, request, fcl.DistanceResult()) < 0.0


def test_joint_waypoints_are_used_as_given() -> None:
    values = [1000.0, 750.0, 400.0, 30.0]
    scene = cell("pb-gantry3", [joints(values), joints([1200.0, 750.0, 400.0, 30.0])])
    sampled = sample_path(scene, 0)
    # source: the cell file's joint values (mm, mm, mm, deg)
    assert np.allclose(sampled.waypoint_q[0], [1.0, 0.75, 0.4, np.radians(30.0)])


def test_bad_path_index_is_refused() -> None:
    scene = cell("pb-gantry3", [down(500.0, motion="joint", speed_percent=100.0)])
    with pytest.raises(PlanningInputError, match=r"path: expected an index in 0\.\.0, got 3"):
        path_check_result(check_path(scene, 3))
    with pytest.raises(PlanningInputError, match="resolution_m"):
        path_check_result(check_path(scene, 0, resolution_m=0.0))


def test_clearance_threshold_comes_from_the_cell() -> None:
    box = {
        "name": "block",
        "shape": "box",
        "position_mm": [750.0, 500.0, 853.0],
        "size_mm": [100.0, 100.0, 100.0],
    }
    waypoints = [down(500.0, motion="joint", speed_percent=100.0), down(1000.0, speed_mm_s=250.0)]
    # closed form: the head capsule's lowest point is 1000 - 30 - 45 = 925 mm, the box top
    # 903 mm, so the move passes 22 mm above the block
    for clearance_mm, warned in ((25.0, True), (15.0, False)):
        scene = cell(
            "pb-gantry3",
            waypoints,
            fixtures=[box],
            thresholds={"clearance_mm": clearance_mm},
        )
        report = path_check_result(check_path(scene, 0, resolution_m=0.005))
        near = [f for f in of_kind(report, "low_clearance") if f.obstacle == "block"]
        assert bool(near) == warned
        if warned:
            assert near[0].distance_mm == pytest.approx(22.0, abs=1e-6)
        assert report.clearance_warning_mm == clearance_mm


def test_stopping_near_a_singularity_is_a_warning_as_in_the_target_check() -> None:
    start = [30.0, 0.0, 0.0, 0.0, 40.0, 0.0]
    stop = [0.0, 0.0, 0.0, 0.0, 3.0, 0.0]
    scene = cell("pb-arm6", [joints(start), joints(stop)], floor_height_mm=-2000.0)
    report = path_check_result(check_path(scene, 0, resolution_rad=np.radians(0.5)))
    wrist = [f for f in of_kind(report, "singularity") if "wrist" in f.message]
    # closed form: pb-arm6's wrist is straight at j5 = 0 (j4 and j6 both turn about x in
    # robots/pb-arm6.toml), so the arm stops 3 deg from the wrist singularity, below the
    # 10 deg default threshold (common practice, no source): the target check's warning
    assert wrist
    assert wrist[0].fraction_end == 1.0
    assert wrist[0].severity == "warning"
    assert wrist[0].angle_deg == pytest.approx(3.0, abs=1e-9)
