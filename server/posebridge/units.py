"""Unit conversion between the user-facing boundary and SI computation.

Every number that crosses a user-facing boundary (CLI, JSON files, HTTP API,
UI) is in millimetres and degrees, with the unit in the field name
(``position_mm``, ``joints_deg``). Every computation inside posebridge is in
metres, radians and seconds. This module is the only place that converts
between the two.

Joint vectors mix units: revolute joints are degrees at the boundary and
radians inside, prismatic joints are millimetres at the boundary and metres
inside. ``prismatic`` masks of shape ``(n,)`` select the prismatic joints.

Domain code that puts a quantity into a message for the user (an error, a
warning, a note) writes it with the quantity-text formatters at the end of this
module (:func:`length_text`, :func:`angle_text`, :func:`joint_value_text`,
:func:`speed_text`): they take the SI value and write it in the user units, so
the domain code itself never converts.
"""

from __future__ import annotations

from typing import Literal

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


AngleUnit = Literal["°", "deg"]
"""How an angle's unit is written: the degree sign right after the number ("4.0°") or the
word after a space ("4.0 deg")."""


def _number_text(value: float, digits: int, significant: bool) -> str:
    """``value`` with ``digits`` decimals, or ``digits`` significant digits (format ``g``)."""
    return f"{value:.{digits}{'g' if significant else 'f'}}"


def length_text(value_m: float, digits: int = 1, *, significant: bool = False) -> str:
    """Write a length for a message in millimetres: ``length_text(0.0123)`` is ``"12.3 mm"``.

    Parameters
    ----------
    value_m : float
        Length in metres.
    digits : int
        Decimals of the millimetre value, or significant digits if ``significant``.
    significant : bool
        Round to ``digits`` significant digits (Python's ``g`` format) instead of decimals.

    Examples
    --------
    >>> length_text(0.0123)
    '12.3 mm'
    >>> length_text(0.25, 0)
    '250 mm'
    >>> length_text(0.0123456, 3, significant=True)
    '12.3 mm'
    """
    return f"{_number_text(float(mm_from_m(value_m)), digits, significant)} mm"


def angle_text(
    value_rad: float, digits: int = 1, *, unit: AngleUnit = "°", significant: bool = False
) -> str:
    """Write an angle for a message in degrees: ``angle_text(math.pi / 4)`` is ``"45.0°"``.

    Parameters
    ----------
    value_rad : float
        Angle in radians.
    digits : int
        Decimals of the degree value, or significant digits if ``significant``.
    unit : "°" or "deg"
        The degree sign right after the number, or the word ``deg`` after a space.
    significant : bool
        Round to ``digits`` significant digits (Python's ``g`` format) instead of decimals.

    Examples
    --------
    >>> import math
    >>> angle_text(math.pi / 4)
    '45.0°'
    >>> angle_text(math.pi, 0, unit="deg")
    '180 deg'
    """
    number = _number_text(float(deg_from_rad(value_rad)), digits, significant)
    return f"{number}°" if unit == "°" else f"{number} deg"


def joint_value_text(
    value: float, prismatic: bool, digits: int = 1, *, angle_unit: AngleUnit = "°"
) -> str:
    """Write a joint value (position, distance to a limit, step) for a message, by joint kind.

    Parameters
    ----------
    value : float
        Radians for a revolute joint, metres for a prismatic joint.
    prismatic : bool
        The joint slides (millimetres) rather than turns (degrees).
    digits : int
        Decimals.
    angle_unit : "°" or "deg"
        How a revolute joint's unit is written, as in :func:`angle_text`.

    Examples
    --------
    >>> joint_value_text(0.05, True)
    '50.0 mm'
    >>> import math
    >>> joint_value_text(math.pi / 2, False, 0, angle_unit="deg")
    '90 deg'
    """
    if prismatic:
        return length_text(value, digits)
    return angle_text(value, digits, unit=angle_unit)


def speed_text(value_m_s: float, digits: int = 0) -> str:
    """Write a linear speed for a message in mm/s: ``speed_text(0.25)`` is ``"250 mm/s"``.

    Parameters
    ----------
    value_m_s : float
        Speed in metres per second.
    digits : int
        Decimals of the millimetre-per-second value.

    Examples
    --------
    >>> speed_text(0.25)
    '250 mm/s'
    """
    return f"{float(mm_from_m(value_m_s)):.{digits}f} mm/s"
