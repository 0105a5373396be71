"""Geometric Jacobians against reference libraries and closed forms.

References run in these tests: pinocchio (``computeFrameJacobian`` in
``LOCAL_WORLD_ALIGNED`` and ``LOCAL``; rows [linear; angular]) and modern_robotics
(``mr.JacobianSpace``, Lynch & Park, Modern Robotics, eq. 5.11; rows [angular; linear]
with the linear part taken at the space-frame origin).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import modern_robotics as mr
import numpy as np
import pinocchio as pin
import pytest

from posebridge.kinematics.fk import PARALLEL_THRESHOLD, KinematicsInputError, fk_tool
from posebridge.kinematics.jacobian import jacobian_base, jacobian_tool
from posebridge.resources import data_folder
from posebridge.robot.library import bundled_robots, load_robot
from posebridge.robot.model import Robot
from posebridge.robot.urdf_export import urdf_from_robot

SEED = 515
SIX_AXIS = ["pb-arm6", "pb-arm6-offset"]
ALL_ROBOTS = [robot.name for robot in bundled_robots()]
ATOL = 1e-9


def random_q(robot: Robot, count: int, seed: int = SEED) -> np.ndarray:
    return np.random.default_rng(seed).uniform(robot.lower, robot.upper, (count, robot.dof))


def pin_jacobians(urdf: str, frame: str, q: np.ndarray, tool: np.ndarray) -> tuple:
    """Pinocchio frame Jacobians ``(N, 6, n)`` of a "tcp" frame at ``tool`` in ``frame``.

    Returns the LOCAL_WORLD_ALIGNED and the LOCAL Jacobians.
    """
    model = pin.buildModelFromXML(urdf)
    parent_id = model.getFrameId(frame)
    parent = model.frames[parent_id]
    tcp = model.addFrame(
        pin.Frame(
            "tcp",
            parent.parentJoint,
            parent_id,
            parent.placement * pin.SE3(tool),
            pin.FrameType.OP_FRAME,
        )
    )
    data = model.createData()
    world = np.empty((q.shape[0], 6, model.nv))
    local = np.empty_like(world)
    for k in range(q.shape[0]):
        world[k] = pin.computeFrameJacobian(
            model, data, q[k], tcp, pin.ReferenceFrame.LOCAL_WORLD_ALIGNED
        )
        local[k] = pin.computeFrameJacobian(model, data, q[k], tcp, pin.ReferenceFrame.LOCAL)
    return world, local


# ----------------------------------------------------------------- pinocchio


@pytest.mark.parametrize("name", SIX_AXIS)
def test_six_axis_jacobians_match_pinocchio_on_handwritten_urdf(name: str) -> None:
    robot = load_robot(name)
    urdf = (data_folder("robots") / f"{name}.urdf").read_text()
    q = random_q(robot, 1000)
    world, local = pin_jacobians(urdf, "flange", q, robot.T_flange_tool)
    np.testing.assert_allclose(jacobian_base(robot, q), world, atol=ATOL)
    np.testing.assert_allclose(jacobian_tool(robot, q), local, atol=ATOL)


@pytest.mark.parametrize("name", ALL_ROBOTS)
def test_every_bundled_robot_jacobian_matches_pinocchio(name: str) -> None:
    robot = load_robot(name)
    q = random_q(robot, 1000 if robot.dof == 6 else 300)
    world, local = pin_jacobians(urdf_from_robot(robot), "tool", q, np.eye(4))
    np.testing.assert_allclose(jacobian_base(robot, q), world, atol=ATOL)
    np.testing.assert_allclose(jacobian_tool(robot, q), local, atol=ATOL)


def test_custom_tool_jacobian_matches_pinocchio() -> None:
    robot = load_robot("pb-arm6-offset")
    rng = np.random.default_rng(SEED)
    tool = np.eye(4)
    tool[:3, :3] = pin.rpy.rpyToMatrix(*rng.uniform(-math.pi, math.pi, 3))
    tool[:3, 3] = rng.uniform(-0.2, 0.2, 3)
    urdf = (data_folder("robots") / "pb-arm6-offset.urdf").read_text()
    q = random_q(robot, 200)
    world, local = pin_jacobians(urdf, "flange", q, tool)
    np.testing.assert_allclose(jacobian_base(robot, q, tool), world, atol=ATOL)
    np.testing.assert_allclose(jacobian_tool(robot, q, tool), local, atol=ATOL)


def test_parallel_batch_matches_pinocchio() -> None:
    robot = load_robot("pb-arm6")
    q = random_q(robot, PARALLEL_THRESHOLD + 5)
    urdf = (data_folder("robots") / "pb-arm6.urdf").read_text()
    world, local = pin_jacobians(urdf, "flange", q, robot.T_flange_tool)
    np.testing.assert_allclose(jacobian_base(robot, q), world, atol=ATOL)
    np.testing.assert_allclose(jacobian_tool(robot, q), local, atol=ATOL)


# ------------------------------------------------------------ modern_robotics


@pytest.mark.parametrize("name", ALL_ROBOTS)
def test_jacobian_matches_modern_robotics_space_jacobian(
    name: str, space_screws_at_zero: Callable[[Robot], tuple[np.ndarray, np.ndarray]]
) -> None:
    robot = load_robot(name)
    _, screws = space_screws_at_zero(robot)
    q = random_q(robot, 200, seed=SEED + 1)
    J = jacobian_base(robot, q)
    tool_position = fk_tool(robot, q)[:, :3, 3]
    for k in range(q.shape[0]):
        Js = mr.JacobianSpace(screws, q[k])
        # space twist (w, v_origin) -> velocity of the TCP: v_tcp = v_origin + w x p_tcp
        w = Js[:3]
        v_tcp = Js[3:] + np.cross(w.T, tool_position[k]).T
        np.testing.assert_allclose(J[k], np.vstack([v_tcp, w]), atol=ATOL)


# ----------------------------------------------------------------- closed forms


def test_planar2r_jacobian_closed_form() -> None:
    robot = load_robot("pb-planar2r")
    l1, l2 = 0.4, 0.3  # robots/pb-planar2r.toml (400 mm, 300 mm)
    q = random_q(robot, 300)
    s1, c1 = np.sin(q[:, 0]), np.cos(q[:, 0])
    s12, c12 = np.sin(q.sum(axis=1)), np.cos(q.sum(axis=1))
    J = jacobian_base(robot, q)
    # planar 2R: J_v = [[-l1 s1 - l2 s12, -l2 s12], [l1 c1 + l2 c12, l2 c12]], w_z = [1, 1]
    np.testing.assert_allclose(J[:, 0, 0], -l1 * s1 - l2 * s12, atol=1e-12)
    np.testing.assert_allclose(J[:, 0, 1], -l2 * s12, atol=1e-12)
    np.testing.assert_allclose(J[:, 1, 0], l1 * c1 + l2 * c12, atol=1e-12)
    np.testing.assert_allclose(J[:, 1, 1], l2 * c12, atol=1e-12)
    np.testing.assert_allclose(J[:, 5], 1.0, atol=1e-12)
    np.testing.assert_allclose(J[:, [2, 3, 4]], 0.0, atol=1e-12)


def test_gantry_prismatic_columns_closed_form() -> None:
    robot = load_robot("pb-gantry3")
    q = random_q(robot, 50)
    J = jacobian_base(robot, q)
    # prismatic columns are [axis; 0] (Siciliano et al., eq. 3.30): x, y and z down
    # (robots/pb-gantry3.toml); the last joint turns about base +z through the TCP, so its
    # column is [0; e_z] (the TCP lies on the axis: zero linear part)
    expected = np.array([[1.0, 0, 0, 0, 0, 0], [0, 1.0, 0, 0, 0, 0], [0, 0, -1.0, 0, 0, 0]]).T
    np.testing.assert_allclose(J[:, :, :3], np.broadcast_to(expected, (50, 6, 3)), atol=1e-12)
    np.testing.assert_allclose(
        J[:, :, 3], np.broadcast_to([0, 0, 0, 0, 0, 1.0], (50, 6)), atol=1e-12
    )


def test_jacobian_inputs_are_checked() -> None:
    robot = load_robot("pb-arm6")
    with pytest.raises(KinematicsInputError, match=r"expected shape \(N, 6\)"):
        jacobian_base(robot, np.zeros((2, 7)))
    with pytest.raises(KinematicsInputError, match=r"NaN or infinite"):
        jacobian_tool(robot, np.full((1, 6), np.nan))
    assert jacobian_base(robot, np.zeros((0, 6))).shape == (0, 6, 6)
