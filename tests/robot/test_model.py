"""Robot models are immutable: every array of a robot refuses writes.

The per-robot IK memo (:func:`posebridge.kinematics.ik.ik_solver`) and the
kernel tables computed from a robot rely on it. Reference values: the robot
file robots/pb-arm6.toml read with tomllib in the test.
"""

from __future__ import annotations

import tomllib

import numpy as np
import pytest

from posebridge.kinematics import fk
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.kinematics.ik.analytic import ortho_parallel
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot

ARRAY_PROPERTIES = (
    "origins",
    "axes",
    "prismatic",
    "continuous",
    "lower",
    "upper",
    "velocity_max",
    "acceleration_max",
    "T_link_flange",
    "T_flange_tool",
    "T_link_tool",
    "motion_table",
)


@pytest.mark.parametrize("name", ARRAY_PROPERTIES)
def test_robot_arrays_refuse_writes(name: str) -> None:
    robot = load_robot("pb-arm6")
    array = getattr(robot, name)
    with pytest.raises(ValueError, match="read-only"):
        array[..., 0] = 0
    with pytest.raises(ValueError, match="read-only"):
        array += 1


def test_joint_and_capsule_arrays_refuse_writes() -> None:
    robot = load_robot("pb-arm6")
    for array in (robot.joints[0].origin, robot.joints[0].axis):
        with pytest.raises(ValueError, match="read-only"):
            array[0] = 1.0
    for array in (robot.capsules[0].start, robot.capsules[0].end):
        with pytest.raises(ValueError, match="read-only"):
            array[0] = 1.0


def test_urdf_link_poses_refuse_writes() -> None:
    robot = load_robot(data_folder("robots") / "pb-arm6.urdf")
    _, pose = next(iter(robot.link_poses.values()))
    with pytest.raises(ValueError, match="read-only"):
        pose[0, 3] = 1.0


def test_ik_memo_survives_a_refused_write() -> None:
    robot = load_robot("pb-arm6")
    solver = ik_solver(robot)
    with pytest.raises(ValueError, match="read-only"):
        robot.upper[0] = 0.0
    # robots/pb-arm6.toml: the joint limits as written in the file
    text = (data_folder("robots") / "pb-arm6.toml").read_text(encoding="utf-8")
    limits = [joint["limits"] for joint in tomllib.loads(text)["joint"]]
    np.testing.assert_allclose(np.rad2deg(robot.upper), [x["max_deg"] for x in limits])
    np.testing.assert_allclose(np.rad2deg(robot.lower), [x["min_deg"] for x in limits])
    assert ik_solver(robot) is solver
    q = np.array([[0.1, 0.2, -0.3, 0.4, 0.5, 0.6]])
    target = fk_tool(robot, q)
    result = solve_ik_all(robot, target)
    # reference: forward kinematics of the returned solutions reproduce the target, and the
    # configuration the target was made from is one of them
    rows, slots = np.nonzero(result.valid)
    np.testing.assert_allclose(fk_tool(robot, result.q[rows, slots]), target[rows], atol=1e-9)
    assert np.any(np.all(np.abs(result.q[rows, slots] - q) < 1e-9, axis=1))


def test_read_only_inputs_compile_no_second_kernel() -> None:
    robot = load_robot("pb-arm6")
    q = np.array([[0.1, 0.2, -0.3, 0.4, 0.5, 0.6]])
    tool = np.eye(4)
    tool[2, 3] = 0.1
    frozen_q = q.copy()
    frozen_q.flags.writeable = False
    for joints in (q, frozen_q, robot.home_configuration()[None], robot.lower[None]):
        for T_flange_tool in (None, tool):
            target = fk_tool(robot, joints, T_flange_tool)
            solve_ik_all(robot, target, T_flange_tool=T_flange_tool, seed=joints[0])
            solve_ik_all(robot, target, T_flange_tool=T_flange_tool, seed=robot.lower)
    # numba compiles one machine-code version per argument type; a read-only array is a
    # type of its own, so one signature means every call passed the same kinds of arrays
    assert len(fk._tool_serial.signatures) == 1
    assert len(ortho_parallel._solve_block.signatures) == 1
