"""Forward kinematics against reference libraries and closed forms.

References run in these tests: pinocchio (``pin.buildModelFromXML``,
``framesForwardKinematics``) and modern_robotics (``mr.FKinSpace``, Lynch & Park,
Modern Robotics, eq. 4.14).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import modern_robotics as mr
import numpy as np
import pinocchio as pin
import pytest

from posebridge.kinematics.fk import (
    PARALLEL_THRESHOLD,
    KinematicsInputError,
    fk_flange,
    fk_frames,
    fk_tool,
)
from posebridge.resources import data_folder
from posebridge.robot.library import bundled_robots, load_robot
from posebridge.robot.model import Robot
from posebridge.robot.urdf_export import urdf_from_robot

SEED = 4242
SIX_AXIS = ["pb-arm6", "pb-arm6-offset"]
ALL_ROBOTS = [robot.name for robot in bundled_robots()]
ATOL = 1e-9


def random_q(robot: Robot, count: int, seed: int = SEED) -> np.ndarray:
    return np.random.default_rng(seed).uniform(robot.lower, robot.upper, (count, robot.dof))


def pin_poses(urdf: str, frames: list[str], q: np.ndarray, tool: np.ndarray | None = None):
    """Poses ``(N, len(frames), 4, 4)`` of URDF frames by pinocchio; joints in URDF order.

    With ``tool`` (shape (4, 4)) an extra frame "tcp" is added at ``tool`` in the
    last named frame and appended to the output.
    """
    model = pin.buildModelFromXML(urdf)
    ids = [model.getFrameId(name) for name in frames]
    if tool is not None:
        parent = model.frames[ids[-1]]
        ids.append(
            model.addFrame(
                pin.Frame(
                    "tcp",
                    parent.parentJoint,
                    ids[-1],
                    parent.placement * pin.SE3(tool),
                    pin.FrameType.OP_FRAME,
                )
            )
        )
    data = model.createData()
    assert model.nq == q.shape[1]  # no continuous joints in the robots compared here
    out = np.empty((q.shape[0], len(ids), 4, 4))
    for k in range(q.shape[0]):
        pin.framesForwardKinematics(model, data, q[k])
        for j, frame_id in enumerate(ids):
            out[k, j] = data.oMf[frame_id].homogeneous
    return out


# ----------------------------------------------------------------- pinocchio


@pytest.mark.parametrize("name", SIX_AXIS)
def test_six_axis_toml_fk_matches_pinocchio_on_bundled_urdf(name: str) -> None:
    """The TOML robot against pinocchio on the bundled URDF file of the same arm."""
    robot = load_robot(name)
    urdf = (data_folder("robots") / f"{name}.urdf").read_text()
    q = random_q(robot, 1000)
    reference = pin_poses(urdf, ["flange"], q, tool=robot.T_flange_tool)
    np.testing.assert_allclose(fk_flange(robot, q), reference[:, 0], atol=ATOL)
    np.testing.assert_allclose(fk_tool(robot, q), reference[:, 1], atol=ATOL)


@pytest.mark.parametrize("name", SIX_AXIS)
def test_six_axis_urdf_link_frames_match_pinocchio(name: str) -> None:
    """Every link frame of the URDF-imported robot is the URDF child link frame in pinocchio."""
    path = data_folder("robots") / f"{name}.urdf"
    robot = load_robot(path)
    links = [f"link_j{k}" for k in range(1, 7)]
    q = random_q(robot, 1000)
    # the file's single leaf is "tool", the imported robot's flange
    reference = pin_poses(path.read_text(), ["base", *links, "tool"], q)
    frames = fk_frames(robot, q)
    np.testing.assert_allclose(frames[:, : robot.dof + 2], reference, atol=ATOL)


@pytest.mark.parametrize("name", ALL_ROBOTS)
def test_every_bundled_robot_matches_pinocchio(name: str) -> None:
    """All frames (base, links, flange, tool) against pinocchio on the robot's URDF export."""
    robot = load_robot(name)
    urdf = urdf_from_robot(robot)
    names = ["base"] + [f"link_{j}" for j in robot.joint_names] + ["flange", "tool"]
    q = random_q(robot, 1000 if robot.dof == 6 else 300)
    np.testing.assert_allclose(fk_frames(robot, q), pin_poses(urdf, names, q), atol=ATOL)


def test_custom_tool_matches_pinocchio() -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(SEED)
    tool = np.eye(4)
    tool[:3, :3] = pin.rpy.rpyToMatrix(*rng.uniform(-math.pi, math.pi, 3))
    tool[:3, 3] = rng.uniform(-0.2, 0.2, 3)
    urdf = (data_folder("robots") / "pb-arm6.urdf").read_text()
    q = random_q(robot, 200)
    reference = pin_poses(urdf, ["flange"], q, tool=tool)[:, 1]
    np.testing.assert_allclose(fk_tool(robot, q, tool), reference, atol=ATOL)
    np.testing.assert_allclose(fk_frames(robot, q, tool)[:, -1], reference, atol=ATOL)


def test_parallel_batch_matches_pinocchio() -> None:
    """Batches above PARALLEL_THRESHOLD take the parallel kernels: same reference."""
    robot = load_robot("pb-arm6-offset")
    q = random_q(robot, PARALLEL_THRESHOLD + 17)
    urdf = (data_folder("robots") / "pb-arm6-offset.urdf").read_text()
    reference = pin_poses(urdf, ["flange"], q, tool=robot.T_flange_tool)
    np.testing.assert_allclose(fk_flange(robot, q), reference[:, 0], atol=ATOL)
    np.testing.assert_allclose(fk_frames(robot, q)[:, -1], reference[:, 1], atol=ATOL)


# ------------------------------------------------------------ modern_robotics


@pytest.mark.parametrize("name", ALL_ROBOTS)
def test_fk_matches_modern_robotics_product_of_exponentials(
    name: str, space_screws_at_zero: Callable[[Robot], tuple[np.ndarray, np.ndarray]]
) -> None:
    robot = load_robot(name)
    M, screws = space_screws_at_zero(robot)
    q = random_q(robot, 200, seed=SEED + 1)
    poses = fk_tool(robot, q)
    for k in range(q.shape[0]):
        np.testing.assert_allclose(poses[k], mr.FKinSpace(M, screws, q[k]), atol=ATOL)


# ----------------------------------------------------------------- closed forms


def test_planar2r_closed_form() -> None:
    robot = load_robot("pb-planar2r")
    l1, l2 = 0.4, 0.3  # link lengths from robots/pb-planar2r.toml (400 mm, 300 mm)
    q = random_q(robot, 500)
    t1, t2 = q[:, 0], q[:, 1]
    T = fk_tool(robot, q)
    # planar 2R: (l1 cos t1 + l2 cos(t1+t2), l1 sin t1 + l2 sin(t1+t2)), heading t1 + t2
    np.testing.assert_allclose(T[:, 0, 3], l1 * np.cos(t1) + l2 * np.cos(t1 + t2), atol=1e-12)
    np.testing.assert_allclose(T[:, 1, 3], l1 * np.sin(t1) + l2 * np.sin(t1 + t2), atol=1e-12)
    np.testing.assert_allclose(T[:, 2, 3], 0.0, atol=1e-12)
    np.testing.assert_allclose(T[:, 0, 0], np.cos(t1 + t2), atol=1e-12)
    np.testing.assert_allclose(T[:, 1, 0], np.sin(t1 + t2), atol=1e-12)


def test_planar3r_closed_form() -> None:
    robot = load_robot("pb-planar3r")
    lengths = (0.35, 0.3, 0.15)  # robots/pb-planar3r.toml (350, 300, 150 mm)
    q = random_q(robot, 500)
    angles = np.cumsum(q, axis=1)
    T = fk_tool(robot, q)
    # planar nR: x = sum_i l_i cos(t1 + ... + ti), y likewise with sin
    np.testing.assert_allclose(T[:, 0, 3], np.cos(angles) @ lengths, atol=1e-12)
    np.testing.assert_allclose(T[:, 1, 3], np.sin(angles) @ lengths, atol=1e-12)


def test_reference_2r_case_unit_links(unit_planar_2r: Robot) -> None:
    robot = unit_planar_2r
    T = fk_tool(robot, np.radians([[30.0, 90.0]]))[0]
    # closed form: L1 = L2 = 1, (30 deg, 90 deg) -> (cos 30 + cos 120, sin 30 + sin 120) = (0.366, 1.366), 3 decimals given
    np.testing.assert_allclose(T[:2, 3], [0.366, 1.366], atol=5e-4)
    # exact: (cos 30 + cos 120, sin 30 + sin 120)
    np.testing.assert_allclose(
        T[:2, 3], [math.sqrt(3) / 2 - 0.5, 0.5 + math.sqrt(3) / 2], atol=1e-12
    )


def test_gantry_closed_form() -> None:
    robot = load_robot("pb-gantry3")
    q = random_q(robot, 300)
    T = fk_tool(robot, q)
    # robots/pb-gantry3.toml: carriage at z = 1800 mm, z axis moves down, head 150 mm below,
    # flange turned 180 deg about x: position (x, y, 1.8 - z - 0.15), tool z axis down,
    # tool x axis at angle c about the vertical
    np.testing.assert_allclose(
        T[:, :3, 3], np.c_[q[:, 0], q[:, 1], 1.8 - q[:, 2] - 0.15], atol=1e-12
    )
    np.testing.assert_allclose(T[:, :3, 2], np.tile([0.0, 0.0, -1.0], (len(q), 1)), atol=1e-12)
    np.testing.assert_allclose(
        T[:, :3, 0], np.c_[np.cos(q[:, 3]), np.sin(q[:, 3]), 0 * q[:, 3]], atol=1e-12
    )


# ------------------------------------------------------------------ inputs


def test_single_configuration_is_a_batch_of_one() -> None:
    robot = load_robot("pb-arm6")
    q = random_q(robot, 5)
    batch = fk_tool(robot, q)
    for k in range(5):
        np.testing.assert_array_equal(fk_tool(robot, q[k : k + 1])[0], batch[k])
    assert fk_frames(robot, q).shape == (5, robot.dof + 3, 4, 4)
    assert fk_tool(robot, np.empty((0, 6))).shape == (0, 4, 4)


@pytest.mark.parametrize(
    ("q", "message"),
    [
        (np.zeros(6), r"expected shape \(N, 6\) for robot 'pb-arm6', got \(6,\)"),
        (np.zeros((3, 5)), r"expected shape \(N, 6\) for robot 'pb-arm6', got \(3, 5\)"),
        (np.full((1, 6), np.nan), r"joint values: contain NaN or infinite values"),
        (np.full((1, 6), np.inf), r"joint values: contain NaN or infinite values"),
    ],
)
def test_bad_joint_arrays_are_refused(q: np.ndarray, message: str) -> None:
    robot = load_robot("pb-arm6")
    for function in (fk_tool, fk_flange, fk_frames):
        with pytest.raises(KinematicsInputError, match=message):
            function(robot, q)
