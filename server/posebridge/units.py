"""Unit conversion between the user-facing boundary and SI computation.

Every number that crosses a user-facing boundary (CLI, JSON files, HTTP API,
UI) is in millimetres and degrees, with the unit in the field name
(``position_mm``, ``joints_deg``). Every computation inside posebridge is in
metres, radians and seconds. This module is the only place that converts
between the two.

Joint vectors mix units: revolute joints are degrees at the boundary and
radians inside, prismatic joints are millimetres at the boundary and metres
inside. ``prismatic`` masks of shape ``(n,)`` select the prismatic joints.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

# The array aliases live in posebridge.arrays; many modules import these two from here.
from posebridge.arrays import BoolArray, FloatArray

MM_PER_M = 1000.0
DEG_PER_RAD = 180.0 / np.pi


def m_from_mm(value_mm: npt.ArrayLike) -> FloatArray:
    """Millimetres to metres, any shape."""
    return np.asarray(value_mm, dtype=np.float64) / MM_PER_M


def mm_from_m(value_m: npt.ArrayLike) -> FloatArray:
    """Metres to millimetres, any shape."""
    return np.asarray(value_m, dtype=np.float64) * MM_PER_M


def rad_from_deg(value_deg: npt.ArrayLike) -> FloatArray:
    """Degrees to radians, any shape."""
    return np.asarray(value_deg, dtype=np.float64) / DEG_PER_RAD


def deg_from_rad(value_rad: npt.ArrayLike) -> FloatArray:
    """Radians to degrees, any shape."""
    return np.asarray(value_rad, dtype=np.float64) * DEG_PER_RAD


def joint_scale_to_si(prismatic: BoolArray) -> FloatArray:
    """Per-joint factor from boundary units (deg, mm) to SI (rad, m).

    Parameters
    ----------
    prismatic : array of bool, shape (n,)

    Returns
    -------
    scale : array, shape (n,)
        ``pi/180`` for revolute joints, ``1/1000`` for prismatic joints.
    """
    return np.where(np.asarray(prismatic, dtype=bool), 1.0 / MM_PER_M, 1.0 / DEG_PER_RAD)


def joints_si_from_user(values: npt.ArrayLike, prismatic: BoolArray) -> FloatArray:
    """Joint values from degrees/millimetres to radians/metres.

    Parameters
    ----------
    values : array-like, shape (..., n)
        Revolute joints in degrees, prismatic joints in millimetres.
    prismatic : array of bool, shape (n,)

    Returns
    -------
    q : array, shape (..., n)
        Revolute joints in radians, prismatic joints in metres.
    """
    return np.asarray(values, dtype=np.float64) * joint_scale_to_si(prismatic)


def joints_user_from_si(q: npt.ArrayLike, prismatic: BoolArray) -> FloatArray:
    """Joint values from radians/metres to degrees/millimetres.

    Inverse of :func:`joints_si_from_user`; shapes as there.
    """
    return np.asarray(q, dtype=np.float64) / joint_scale_to_si(prismatic)


def joint_unit_labels(prismatic: BoolArray) -> list[str]:
    """Boundary unit label per joint: ``"deg"`` or ``"mm"``."""
    return ["mm" if p else "deg" for p in np.asarray(prismatic, dtype=bool)]
