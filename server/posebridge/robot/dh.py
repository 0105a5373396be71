"""Denavit–Hartenberg rows as fixed transforms.

Standard convention (Spong, Hutchinson, Vidyasagar, *Robot Modeling and
Control*, ch. 3): ``A_i = Rot_z(theta_i) Trans_z(d_i) Trans_x(a_i) Rot_x(alpha_i)``.
Modified convention (Craig, *Introduction to Robotics*, ch. 3):
``A_i = Rot_x(alpha_{i-1}) Trans_x(a_{i-1}) Rot_z(theta_i) Trans_z(d_i)``.

Both are turned into the internal joint model (fixed origin, then motion
about the joint frame's z axis): see :func:`split_dh_chain`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from posebridge.units import FloatArray

__all__ = ["DhConvention", "DhRow", "rot_x", "rot_z", "split_dh_chain", "trans_x", "trans_z"]

DhConvention = Literal["dh_standard", "dh_modified"]


@dataclass(frozen=True)
class DhRow:
    """One DH row in SI units.

    For the modified convention ``a`` and ``alpha`` are Craig's ``a_{i-1}`` and
    ``alpha_{i-1}`` (they precede joint i). ``theta`` is the joint angle offset
    of a revolute joint (the fixed angle of a prismatic one); ``d`` is the fixed
    offset of a revolute joint (the offset added to a prismatic joint's value).
    """

    a: float
    alpha: float
    d: float
    theta: float
    prismatic: bool


def rot_x(angle: float) -> FloatArray:
    """Homogeneous rotation about x, shape (4, 4)."""
    c, s = np.cos(angle), np.sin(angle)
    return np.array([[1.0, 0, 0, 0], [0, c, -s, 0], [0, s, c, 0], [0, 0, 0, 1.0]])


def rot_z(angle: float) -> FloatArray:
    """Homogeneous rotation about z, shape (4, 4)."""
    c, s = np.cos(angle), np.sin(angle)
    return np.array([[c, -s, 0, 0], [s, c, 0, 0], [0, 0, 1.0, 0], [0, 0, 0, 1.0]])


def trans_x(distance: float) -> FloatArray:
    """Homogeneous translation along x, shape (4, 4)."""
    T = np.eye(4)
    T[0, 3] = distance
    return T


def trans_z(distance: float) -> FloatArray:
    """Homogeneous translation along z, shape (4, 4)."""
    T = np.eye(4)
    T[2, 3] = distance
    return T


def split_dh_chain(
    rows: list[DhRow], convention: DhConvention
) -> tuple[list[FloatArray], FloatArray, list[FloatArray]]:
    """Turn DH rows into joint origins (motion about z after each origin).

    With the standard convention the motion of joint i comes first in
    ``A_i``, so the fixed part of row i becomes the start of joint i+1's
    origin and the last row's fixed part goes to the flange. With the
    modified convention the motion comes last in ``A_i`` and each row is one
    origin.

    Parameters
    ----------
    rows : list of DhRow, length n
    convention : "dh_standard" or "dh_modified"

    Returns
    -------
    origins : list of n arrays, shape (4, 4)
        Joint frame poses in the parent link frame at zero joint value.
    tail : array, shape (4, 4)
        Fixed transform after the last joint's motion (to be pre-multiplied to
        the flange).
    T_joint_dh : list of n arrays, shape (4, 4)
        Pose of the convention's link frame i in the internal link frame i
        (for converting capsules given in DH link frames).
    """
    origins: list[FloatArray] = []
    T_joint_dh: list[FloatArray] = []
    if convention == "dh_standard":
        previous_tail = np.eye(4)
        for row in rows:
            if row.prismatic:
                origins.append(previous_tail)
                previous_tail = (
                    rot_z(row.theta) @ trans_z(row.d) @ trans_x(row.a) @ rot_x(row.alpha)
                )
            else:
                origins.append(previous_tail @ rot_z(row.theta))
                previous_tail = trans_z(row.d) @ trans_x(row.a) @ rot_x(row.alpha)
            T_joint_dh.append(previous_tail)
        return origins, previous_tail, T_joint_dh
    for row in rows:
        fixed = rot_x(row.alpha) @ trans_x(row.a)
        if row.prismatic:
            origins.append(fixed @ rot_z(row.theta) @ trans_z(row.d))
        else:
            origins.append(fixed @ trans_z(row.d) @ rot_z(row.theta))
        T_joint_dh.append(np.eye(4))
    return origins, np.eye(4), T_joint_dh
