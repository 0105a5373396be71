"""Geometric Jacobians of serial chains, batch-first.

The geometric Jacobian maps joint velocities to the tool's spatial velocity
``[v; omega]`` (linear velocity of the TCP, then angular velocity). Column
``i`` is ``[w_i x (p_tool - p_i); w_i]`` for a revolute joint and
``[w_i; 0]`` for a prismatic joint, with ``w_i`` the joint axis and ``p_i``
a point on it, both in the base frame (Siciliano, Sciavicco, Villani, Oriolo,
*Robotics: Modelling, Planning and Control*, eq. 3.30; the kernel is
:func:`posebridge.kinematics.chain_kernels.pose_and_jacobian`). Row order
matches pinocchio's ``[linear; angular]``.

``jacobian_base`` expresses both vectors in the base frame (pinocchio's
``LOCAL_WORLD_ALIGNED``), ``jacobian_tool`` in the tool frame (``LOCAL``).
"""

from __future__ import annotations

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.kinematics.chain_kernels import pose_and_jacobian
from posebridge.kinematics.fk import PARALLEL_THRESHOLD, check_configurations, tool_tail
from posebridge.robot.model import Robot
from posebridge.units import FloatArray

__all__ = ["jacobian_base", "jacobian_tool"]


@nb.njit(cache=True, inline="always")
def _jacobian_one(q, table, prismatic, axes, tail, in_tool_frame, T_out, J_out):
    n = q.shape[0]
    pose_and_jacobian(
        q,
        table,
        prismatic,
        axes,
        tail,
        in_tool_frame,
        np.empty((3, 3)),
        np.empty(3),
        np.empty((3, 3)),
        np.empty(3),
        np.empty((n, 3)),
        np.empty((n, 3)),
        T_out,
        J_out,
    )


@nb.njit(cache=True)
def _jacobian_serial(q, table, prismatic, axes, tail, in_tool_frame, T_out, J_out):
    for k in range(q.shape[0]):
        _jacobian_one(q[k], table, prismatic, axes, tail, in_tool_frame, T_out[k], J_out[k])


@nb.njit(cache=True, parallel=True)
def _jacobian_parallel(q, table, prismatic, axes, tail, in_tool_frame, T_out, J_out):
    for k in nb.prange(q.shape[0]):
        _jacobian_one(q[k], table, prismatic, axes, tail, in_tool_frame, T_out[k], J_out[k])


def _jacobian(
    robot: Robot, q: npt.ArrayLike, T_flange_tool: npt.ArrayLike | None, in_tool_frame: bool
) -> FloatArray:
    q = check_configurations(robot, q)
    tail = tool_tail(robot, T_flange_tool)
    N = q.shape[0]
    T_out = np.empty((N, 4, 4))
    J_out = np.empty((N, 6, robot.dof))
    kernel = _jacobian_parallel if N >= PARALLEL_THRESHOLD else _jacobian_serial
    kernel(q, robot.motion_table, robot.prismatic, robot.axes, tail, in_tool_frame, T_out, J_out)
    return J_out


def jacobian_base(
    robot: Robot, q: npt.ArrayLike, T_flange_tool: npt.ArrayLike | None = None
) -> FloatArray:
    """Geometric Jacobian of the TCP, expressed in the base frame.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool pose in the flange frame; the robot's default tool if omitted.

    Returns
    -------
    J : array, shape (N, 6, n)
        Rows ``[v_x, v_y, v_z, w_x, w_y, w_z]`` per unit joint velocity
        (m/s and rad/s per rad/s or m/s).
    """
    return _jacobian(robot, q, T_flange_tool, in_tool_frame=False)


def jacobian_tool(
    robot: Robot, q: npt.ArrayLike, T_flange_tool: npt.ArrayLike | None = None
) -> FloatArray:
    """Geometric Jacobian of the TCP, expressed in the tool frame.

    ``J_tool = blockdiag(R^T, R^T) @ J_base`` with ``R`` the tool orientation.
    Shapes and units as :func:`jacobian_base`.
    """
    return _jacobian(robot, q, T_flange_tool, in_tool_frame=True)
