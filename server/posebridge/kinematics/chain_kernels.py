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
