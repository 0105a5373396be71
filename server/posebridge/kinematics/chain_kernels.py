"""Numba building blocks shared by the kinematics kernels (FK, Jacobian, numerical IK).

A pose is carried as a 3x3 rotation ``R`` and a translation ``p`` (the top 3x4
block of a homogeneous transform). ``row`` is one row of
:attr:`posebridge.robot.model.Robot.motion_table`.

The Jacobian column formula (Siciliano, Sciavicco, Villani, Oriolo,
*Robotics: Modelling, Planning and Control*, eq. 3.30) is written once here,
in :func:`pose_and_jacobian`, for :mod:`posebridge.kinematics.jacobian` and
:mod:`posebridge.kinematics.ik.numeric`.
"""

from __future__ import annotations

import numba as nb
import numpy as np

__all__ = ["chain_step", "pose_and_jacobian", "write_pose"]


@nb.njit(cache=True, inline="always")
def chain_step(R, p, row, prismatic, qi, R_out, p_out):
    """``[R_out | p_out] = [R | p] @ origin @ Motion(q_i)`` for one joint (3x4 affine).

    The joint's 3x3 factor ``M`` is kept in nine scalars (no per-call array
    allocation): ``M = P + C`` for a prismatic joint, ``C + cos(q) P + sin(q) B``
    for a revolute one (see ``Robot.motion_table``).
    """
    if prismatic:
        m00 = row[0] + row[18]
        m01 = row[1] + row[19]
        m02 = row[2] + row[20]
        m10 = row[3] + row[21]
        m11 = row[4] + row[22]
        m12 = row[5] + row[23]
        m20 = row[6] + row[24]
        m21 = row[7] + row[25]
        m22 = row[8] + row[26]
        o0 = row[27] + qi * row[30]
        o1 = row[28] + qi * row[31]
        o2 = row[29] + qi * row[32]
    else:
        c = np.cos(qi)
        s = np.sin(qi)
        m00 = row[18] + c * row[0] + s * row[9]
        m01 = row[19] + c * row[1] + s * row[10]
        m02 = row[20] + c * row[2] + s * row[11]
        m10 = row[21] + c * row[3] + s * row[12]
        m11 = row[22] + c * row[4] + s * row[13]
        m12 = row[23] + c * row[5] + s * row[14]
        m20 = row[24] + c * row[6] + s * row[15]
        m21 = row[25] + c * row[7] + s * row[16]
        m22 = row[26] + c * row[8] + s * row[17]
        o0 = row[27]
        o1 = row[28]
        o2 = row[29]
    for r in range(3):
        a0 = R[r, 0]
        a1 = R[r, 1]
        a2 = R[r, 2]
        R_out[r, 0] = a0 * m00 + a1 * m10 + a2 * m20
        R_out[r, 1] = a0 * m01 + a1 * m11 + a2 * m21
        R_out[r, 2] = a0 * m02 + a1 * m12 + a2 * m22
        p_out[r] = a0 * o0 + a1 * o1 + a2 * o2 + p[r]


@nb.njit(cache=True, inline="always")
def write_pose(R, p, tail, out):
    """``out = [R | p] @ tail`` as a full 4x4 transform."""
    for r in range(3):
        a0 = R[r, 0]
        a1 = R[r, 1]
        a2 = R[r, 2]
        for col in range(4):
            out[r, col] = a0 * tail[0, col] + a1 * tail[1, col] + a2 * tail[2, col]
        out[r, 3] += p[r]
    out[3, 0] = 0.0
    out[3, 1] = 0.0
    out[3, 2] = 0.0
    out[3, 3] = 1.0


@nb.njit(cache=True, inline="always")
def pose_and_jacobian(
    q, table, prismatic, axes, tail, in_tool_frame, R, p, R2, p2, w, origin, T_out, J_out
):
    """Tool pose ``T_out`` (4, 4) and geometric Jacobian ``J_out`` (6, n) of one configuration.

    Column ``j`` is ``[w_j x (p_tool - p_j); w_j]`` for a revolute joint and
    ``[w_j; 0]`` for a prismatic one, with ``w_j`` the joint axis and ``p_j``
    a point on it in the base frame (Siciliano et al., eq. 3.30); with
    ``in_tool_frame`` both halves are rotated into the tool frame
    (``R_base_tool^T @ vector``). ``R`` (3, 3), ``p`` (3,), ``R2``, ``p2``,
    ``w`` (n, 3) and ``origin`` (n, 3) are scratch arrays (their contents on
    entry do not matter), so a caller in a loop allocates them once.
    """
    n = q.shape[0]
    for r in range(3):
        for c in range(3):
            R[r, c] = 1.0 if r == c else 0.0
        p[r] = 0.0
    for j in range(n):
        chain_step(R, p, table[j], prismatic[j], q[j], R2, p2)
        R[:, :] = R2
        p[:] = p2
        for r in range(3):
            w[j, r] = R[r, 0] * axes[j, 0] + R[r, 1] * axes[j, 1] + R[r, 2] * axes[j, 2]
            origin[j, r] = p[r]
    write_pose(R, p, tail, T_out)
    px = T_out[0, 3]
    py = T_out[1, 3]
    pz = T_out[2, 3]
    for j in range(n):
        wx = w[j, 0]
        wy = w[j, 1]
        wz = w[j, 2]
        if prismatic[j]:
            vx, vy, vz = wx, wy, wz
            ax, ay, az = 0.0, 0.0, 0.0
        else:
            dx = px - origin[j, 0]
            dy = py - origin[j, 1]
            dz = pz - origin[j, 2]
            vx = wy * dz - wz * dy
            vy = wz * dx - wx * dz
            vz = wx * dy - wy * dx
            ax, ay, az = wx, wy, wz
        if in_tool_frame:
            J_out[0, j] = T_out[0, 0] * vx + T_out[1, 0] * vy + T_out[2, 0] * vz
            J_out[1, j] = T_out[0, 1] * vx + T_out[1, 1] * vy + T_out[2, 1] * vz
            J_out[2, j] = T_out[0, 2] * vx + T_out[1, 2] * vy + T_out[2, 2] * vz
            J_out[3, j] = T_out[0, 0] * ax + T_out[1, 0] * ay + T_out[2, 0] * az
            J_out[4, j] = T_out[0, 1] * ax + T_out[1, 1] * ay + T_out[2, 1] * az
            J_out[5, j] = T_out[0, 2] * ax + T_out[1, 2] * ay + T_out[2, 2] * az
        else:
            J_out[0, j] = vx
            J_out[1, j] = vy
            J_out[2, j] = vz
            J_out[3, j] = ax
            J_out[4, j] = ay
            J_out[5, j] = az
