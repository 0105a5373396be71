"""Forward kinematics of serial chains, batch-first.

Method: product of the joints' fixed origin transforms and their motions,
``T_base_link_i = T_base_link_{i-1} @ origin_i @ Motion(axis_i, q_i)``
(the URDF joint model; equivalently the product of exponentials, Lynch & Park,
Modern Robotics, eq. 4.14, with every screw written in its own joint frame).
Each revolute motion uses Rodrigues' formula in the pre-multiplied form of
:attr:`posebridge.robot.model.Robot.motion_table`, so one joint costs two
3x3 products and a sine-cosine pair.

The kernels are numba-compiled at module level (cached on disk); batches
smaller than :data:`PARALLEL_THRESHOLD` run on one thread because thread
start-up dominates there.
"""

from __future__ import annotations

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.arrays import read_only, writable_float_array
from posebridge.errors import InputError
from posebridge.kinematics.chain_kernels import chain_step, write_pose
from posebridge.robot.model import Robot
from posebridge.transforms import TransformError, check_transform
from posebridge.units import FloatArray

__all__ = [
    "PARALLEL_THRESHOLD",
    "KinematicsInputError",
    "check_configurations",
    "check_one_configuration",
    "fk_flange",
    "fk_frames",
    "fk_tool",
    "tool_tail",
]

PARALLEL_THRESHOLD = 2048
"""Batches at least this large use all numba threads."""


class KinematicsInputError(InputError):
    """Joint or pose input of the wrong shape, or with non-finite values."""


def check_configurations(robot: Robot, q: npt.ArrayLike) -> FloatArray:
    """Validate a batch of joint configurations and return it as C-contiguous float64.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values in SI units (rad, m).

    Returns
    -------
    q : array, shape (N, n)
    """
    array = writable_float_array(q)
    if array.ndim != 2 or array.shape[1] != robot.dof:
        raise KinematicsInputError(
            f"joint values: expected shape (N, {robot.dof}) for robot {robot.name!r}, got {array.shape}"
        )
    if not np.all(np.isfinite(array)):
        raise KinematicsInputError("joint values: contain NaN or infinite values")
    return array


def check_one_configuration(robot: Robot, q: npt.ArrayLike) -> FloatArray:
    """Validate one joint configuration, given flat or as a batch of one.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (n,) or (1, n)
        Joint values in SI units (rad, m).

    Returns
    -------
    q : array, shape (1, n)
    """
    array = np.asarray(q, dtype=np.float64)
    if array.ndim == 1:
        array = array[None]
    if array.shape[0] != 1:
        raise KinematicsInputError(
            f"joint values: expected one configuration of {robot.dof} values, got shape "
            f"{np.shape(q)}"
        )
    return check_configurations(robot, array)


@nb.njit(cache=True, inline="always")
def _tool_one(q, table, prismatic, tail, out):
    R = np.eye(3)
    p = np.zeros(3)
    R2 = np.empty((3, 3))
    p2 = np.empty(3)
    for j in range(q.shape[0]):
        chain_step(R, p, table[j], prismatic[j], q[j], R2, p2)
        R[:, :] = R2
        p[:] = p2
    write_pose(R, p, tail, out)


@nb.njit(cache=True)
def _tool_serial(q, table, prismatic, tail, out):
    for k in range(q.shape[0]):
        _tool_one(q[k], table, prismatic, tail, out[k])


@nb.njit(cache=True, parallel=True)
def _tool_parallel(q, table, prismatic, tail, out):
    for k in nb.prange(q.shape[0]):
        _tool_one(q[k], table, prismatic, tail, out[k])


@nb.njit(cache=True, inline="always")
def _frames_one(q, table, prismatic, tail_flange, tail_tool, out):
    n = q.shape[0]
    identity = np.eye(4)
    R = np.eye(3)
    p = np.zeros(3)
    R2 = np.empty((3, 3))
    p2 = np.empty(3)
    out[0, :, :] = identity
    for j in range(n):
        chain_step(R, p, table[j], prismatic[j], q[j], R2, p2)
        R[:, :] = R2
        p[:] = p2
        write_pose(R, p, identity, out[j + 1])
    write_pose(R, p, tail_flange, out[n + 1])
    write_pose(R, p, tail_tool, out[n + 2])


@nb.njit(cache=True)
def _frames_serial(q, table, prismatic, tail_flange, tail_tool, out):
    for k in range(q.shape[0]):
        _frames_one(q[k], table, prismatic, tail_flange, tail_tool, out[k])


@nb.njit(cache=True, parallel=True)
def _frames_parallel(q, table, prismatic, tail_flange, tail_tool, out):
    for k in nb.prange(q.shape[0]):
        _frames_one(q[k], table, prismatic, tail_flange, tail_tool, out[k])


def tool_tail(robot: Robot, T_flange_tool: npt.ArrayLike | None) -> FloatArray:
    """Tool pose in the last link frame, shape (4, 4): the robot's default or ``T_flange_tool``.

    Read-only either way, like the robot's own arrays (one kernel signature).

    Raises
    ------
    KinematicsInputError
        ``T_flange_tool`` is not a finite rigid transform of shape (4, 4).
    """
    if T_flange_tool is None:
        return robot.T_link_tool
    try:
        tool = check_transform(T_flange_tool)
    except TransformError as error:
        raise KinematicsInputError(f"T_flange_tool: {error}") from error
    if tool.shape != (4, 4):
        raise KinematicsInputError(f"T_flange_tool: expected shape (4, 4), got {tool.shape}")
    return read_only(robot.T_link_flange @ tool)


def fk_tool(
    robot: Robot, q: npt.ArrayLike, T_flange_tool: npt.ArrayLike | None = None
) -> FloatArray:
    """Tool (TCP) poses in the robot base frame.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool pose in the flange frame; the robot's default tool if omitted.

    Returns
    -------
    T_base_tool : array, shape (N, 4, 4)

    Examples
    --------
    >>> from posebridge.robot.library import load_robot
    >>> robot = load_robot("pb-planar2r")
    >>> fk_tool(robot, [[0.0, 0.0]])[0, :3, 3].round(3).tolist()
    [0.7, 0.0, 0.0]
    """
    q = check_configurations(robot, q)
    out = np.empty((q.shape[0], 4, 4))
    kernel = _tool_parallel if q.shape[0] >= PARALLEL_THRESHOLD else _tool_serial
    kernel(q, robot.motion_table, robot.prismatic, tool_tail(robot, T_flange_tool), out)
    return out


def fk_flange(robot: Robot, q: npt.ArrayLike) -> FloatArray:
    """Flange (mechanical interface) poses in the base frame.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)

    Returns
    -------
    T_base_flange : array, shape (N, 4, 4)
    """
    return fk_tool(robot, q, np.eye(4))


def fk_frames(
    robot: Robot, q: npt.ArrayLike, T_flange_tool: npt.ArrayLike | None = None
) -> FloatArray:
    """Poses of every link frame, the flange and the tool in the base frame.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
    T_flange_tool : array-like, shape (4, 4), optional

    Returns
    -------
    frames : array, shape (N, n + 3, 4, 4)
        Index 0 is the base (identity), ``1..n`` the link frames, ``n + 1``
        the flange and ``n + 2`` the tool.
    """
    q = check_configurations(robot, q)
    n = robot.dof
    out = np.empty((q.shape[0], n + 3, 4, 4))
    kernel = _frames_parallel if q.shape[0] >= PARALLEL_THRESHOLD else _frames_serial
    kernel(
        q,
        robot.motion_table,
        robot.prismatic,
        robot.T_link_flange,
        tool_tail(robot, T_flange_tool),
        out,
    )
    return out
