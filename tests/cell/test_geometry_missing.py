"""A robot without collision geometry: every clearance answer says so (issue: a robot with no
geometry is never reported as collision-free). The robot is the bundled pb-arm6 written as a
URDF without its capsules; the cell is the demo cell with that robot file."""

from __future__ import annotations

import dataclasses
import json

import pytest

from posebridge.cell.checks import check_targets
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.pose_diagnosis import diagnose_pose
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.path_check import check_path
from posebridge.planning.rrt import plan_joint_move
from posebridge.resources import data_folder
from posebridge.results.diagnosis import pose_diagnosis_result
from posebridge.results.joint_plan import joint_plan_result, render_joint_plan
from posebridge.results.path_check import path_check_result, render_path_check
from posebridge.results.robots import robot_description_result
from posebridge.results.spaces import joint_map_result
from posebridge.results.target_check import target_check_result
from posebridge.robot.library import load_robot
from posebridge.robot.model import GEOMETRY_MISSING
from posebridge.robot.urdf_export import urdf_from_robot
from posebridge.spaces.joint_map import joint_map


@pytest.fixture(scope="module")
def bare_scene(tmp_path_factory: pytest.TempPathFactory) -> Scene:
    folder = tmp_path_factory.mktemp("bare")
    robot = dataclasses.replace(load_robot("pb-arm6"), capsules=())
    (folder / "bare.urdf").write_text(urdf_from_robot(robot), encoding="utf-8")
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = {"file": "bare.urdf", "to_link": "flange"}
    path = folder / "cell.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return resolve_scene(load_cell(path), path)


def test_every_clearance_answer_flags_missing_geometry(bare_scene: Scene) -> None:
    robot = bare_scene.robot
    assert not robot.has_geometry
    check = target_check_result(check_targets(bare_scene))
    assert check.robot_geometry_missing == GEOMETRY_MISSING
    assert any(
        f.code == "robot-geometry-missing" and f.severity == "warning" for f in check.findings
    )
    pose = pose_diagnosis_result(diagnose_pose(bare_scene, robot.home_configuration()))
    assert pose.robot_geometry_missing == GEOMETRY_MISSING
    assert any(f.code == "robot-geometry-missing" for f in pose.findings)
    path = path_check_result(check_path(bare_scene, 0))
    assert path.robot_geometry_missing == GEOMETRY_MISSING
    assert render_path_check(path).startswith("WARNING: ROBOT GEOMETRY IS MISSING")
    q = robot.home_configuration()
    plan = joint_plan_result(plan_joint_move(bare_scene, q, q, time_limit_s=1.0))
    assert plan.robot_geometry_missing == GEOMETRY_MISSING
    assert render_joint_plan(plan).startswith("WARNING: ROBOT GEOMETRY IS MISSING")
    computed = joint_map(clearance_scene(bare_scene), [1, 2], q, resolution=8)
    assert joint_map_result(computed, robot, "x").robot_geometry_missing == GEOMETRY_MISSING
    assert robot_description_result(robot, "bare").robot_geometry_missing == GEOMETRY_MISSING


def test_a_robot_with_geometry_is_not_flagged() -> None:
    demo = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(demo), demo)
    assert target_check_result(check_targets(scene)).robot_geometry_missing is None
    assert not any(
        f.code == "robot-geometry-missing"
        for f in target_check_result(check_targets(scene)).findings
    )
