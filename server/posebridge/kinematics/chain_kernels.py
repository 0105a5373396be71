"""Numba building blocks shared by the kinematics kernels (FK, Jacobian, numerical IK).

A pose is carried as a 3x3 rotation ``R`` and a translation ``p`` (the top 3x4
block of a homogeneous transform). ``row`` is one row of
:attr:`posebridge.robot.model.Robot.motion_table`.
"""

from __future__ import annotations

import numba as nb
import numpy as np

__all__ = ["chain_step", "write_pose"]


@nb.njit(cache=True, inline="always")
def chain_step(R, p, row, prismatic, qi, R_out, p_out):
    """``[R_out | p_out] = [R | p] @ origin @ Motion(q_i)`` for one joint (3x4 affine)."""
    M = np.empty((3, 3))
    if prismatic:
        for k in range(9):
            M[k // 3, k % 3] = row[k] + row[18 + k]
        o0 = row[27] + qi * row[30]
        o1 = row[28] + qi * row[31]
        o2 = row[29] + qi * row[32]
    else:
        c = np.cos(qi)
        s = np.sin(qi)
        for k in range(9):
            M[k // 3, k % 3] = row[18 + k] + c * row[k] + s * row[9 + k]
        o0 = row[27]
        o1 = row[28]
        o2 = row[29]
    for r in range(3):
        a0 = R[r, 0]
        a1 = R[r, 1]
        a2 = R[r, 2]
        R_out[r, 0] = a0 * M[0, 0] + a1 * M[1, 0] + a2 * M[2, 0]
        R_out[r, 1] = a0 * M[0, 1] + a1 * M[1, 1] + a2 * M[2, 1]
        R_out[r, 2] = a0 * M[0, 2] + a1 * M[1, 2] + a2 * M[2, 2]
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
