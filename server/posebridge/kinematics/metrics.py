"""Kinematic quality metrics: manipulability, conditioning and joint-limit margins.

All functions are batch-first. Jacobians are geometric Jacobians with rows
``[v_x, v_y, v_z, w_x, w_y, w_z]`` as returned by
:func:`posebridge.kinematics.jacobian.jacobian_base`.

The full 6-row Jacobian mixes units (m/s and rad/s per joint rate), so its
manipulability and condition number depend on the chosen length unit and on
the TCP. The ``part`` keyword of :func:`manipulability` and
:func:`inverse_condition` selects the translational rows (``"position"``,
unit-consistent, the usual choice for reach and dexterity maps of the TCP),
the rotational rows (``"orientation"``) or all six (``"full"``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.fk import KinematicsInputError, check_configurations
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.robot.model import Robot
from posebridge.units import FloatArray

__all__ = [
    "JacobianPart",
    "LimitMargins",
    "characteristic_length_m",
    "inverse_condition",
    "inverse_condition_number",
    "jacobian_rows",
    "limit_margins",
    "manipulability",
    "manipulability_scaled_full",
    "manipulability_yoshikawa",
]

JacobianPart = Literal["full", "position", "orientation"]

_ROWS: dict[str, slice] = {
    "full": slice(0, 6),
    "position": slice(0, 3),
    "orientation": slice(3, 6),
}


def _check_jacobians(J: npt.ArrayLike) -> FloatArray:
    array = np.asarray(J, dtype=np.float64)
    if array.ndim != 3 or array.shape[1] == 0 or array.shape[2] == 0:
        raise KinematicsInputError(
            f"Jacobian: expected shape (N, m, n) with m, n >= 1, got {array.shape}"
        )
    if not np.all(np.isfinite(array)):
        raise KinematicsInputError("Jacobian: contains NaN or infinite values")
    return array


def jacobian_rows(J: npt.ArrayLike, part: JacobianPart) -> FloatArray:
    """Select the translational, rotational or all rows of geometric Jacobians.

    Parameters
    ----------
    J : array-like, shape (N, 6, n)
        Rows ``[v; w]`` as from :func:`~posebridge.kinematics.jacobian.jacobian_base`.
    part : "full", "position" or "orientation"

    Returns
    -------
    J_part : array, shape (N, 6, n) or (N, 3, n)
    """
    array = _check_jacobians(J)
    if array.shape[1] != 6:
        raise KinematicsInputError(f"Jacobian: expected 6 rows [v; w], got shape {array.shape}")
    if part not in _ROWS:
        raise KinematicsInputError(f"part: expected one of {', '.join(_ROWS)}, got {part!r}")
    return array[:, _ROWS[part], :]


def manipulability_yoshikawa(J: npt.ArrayLike) -> FloatArray:
    """Yoshikawa's manipulability measure of a batch of Jacobians.

    ``w = sqrt(det(J J^T))`` for ``m <= n`` (Yoshikawa 1985, "Manipulability
    of robotic mechanisms", Int. J. Robotics Research 4(2)), the volume
    factor of the velocity ellipsoid; it equals the product of the ``m``
    singular values. For ``m > n`` (fewer joints than task rows, e.g. a
    planar arm's 3-row position Jacobian) ``det(J J^T)`` is identically zero,
    so the product of the ``n`` singular values, ``sqrt(det(J^T J))``, is
    returned instead: the ``n``-volume of the ellipsoid in the reachable
    velocity subspace (common practice, no source). Both are evaluated as
    ``|det(R)|`` of the QR factorisation of the tall one of ``J^T`` and ``J``.

    Parameters
    ----------
    J : array-like, shape (N, m, n)

    Returns
    -------
    w : array, shape (N,)
        ``>= 0``; zero at a singular configuration.
    """
    array = _check_jacobians(J)
    tall = np.swapaxes(array, 1, 2) if array.shape[1] <= array.shape[2] else array
    # det(A^T A) = det(R)^2 for the thin QR factorisation A = Q R (Golub & Van Loan,
    # Matrix Computations, sec. 5.2); Householder QR keeps a near-zero w accurate,
    # where the determinant of the Gram matrix loses half the digits.
    R = np.linalg.qr(tall, mode="r")
    return np.abs(np.prod(np.diagonal(R, axis1=1, axis2=2), axis=1))


def characteristic_length_m(robot: Robot, T_flange_tool: npt.ArrayLike | None = None) -> float:
    """Return the length that makes the full Jacobian dimensionless, m.

    The sum of the distances from joint to joint, then to the flange and the TCP (the arm's
    stretched length, an upper bound of its reach; common practice, no source).

    Parameters
    ----------
    robot : Robot
    T_flange_tool : array-like, shape (4, 4), optional
        The robot's default tool if omitted.
    """
    tool = robot.T_flange_tool if T_flange_tool is None else np.asarray(T_flange_tool, float)
    steps = [origin[:3, 3] for origin in robot.origins[1:]]
    steps += [robot.T_link_flange[:3, 3], tool[:3, 3]]
    return float(sum(np.linalg.norm(step) for step in steps))


def manipulability_scaled_full(J: npt.ArrayLike, length_m: float) -> FloatArray:
    """Yoshikawa manipulability of the full (6-row) Jacobian made dimensionless.

    The translational rows are divided by ``length_m`` (translational
    velocity per characteristic length, so both row groups are rad/s per
    joint rate), then :func:`manipulability_yoshikawa`. Unlike the measure of
    the translational rows alone it is zero at every singularity of a
    six-axis arm, the wrist singularity included (Yoshikawa 1985; the
    characteristic-length scaling as in Angeles, *Fundamentals of Robotic
    Mechanical Systems*, sec. 5.8).

    Parameters
    ----------
    J : array-like, shape (N, 6, n)
        Geometric Jacobians, translational rows first, SI units.
    length_m : float
        Characteristic length (> 0), e.g. :func:`characteristic_length_m`.

    Returns
    -------
    w : array, shape (N,)
        Dimensionless for revolute joints, ``>= 0``.
    """
    array = _check_jacobians(J)
    if array.shape[1] != 6:
        raise KinematicsInputError(f"J: expected 6 rows, got shape {array.shape}")
    if not math.isfinite(length_m) or length_m <= 0.0:
        raise KinematicsInputError(f"length_m: expected a positive length, got {length_m!r}")
    scaled = array.copy()
    scaled[:, :3, :] /= length_m
    return manipulability_yoshikawa(scaled)


def inverse_condition_number(J: npt.ArrayLike) -> FloatArray:
    """Inverse condition number ``sigma_min / sigma_max`` of a batch of Jacobians.

    Singular values from the SVD (Golub & Van Loan, *Matrix Computations*,
    sec. 2.4); ``sigma_min`` is the smallest of the ``min(m, n)`` singular
    values. 1 is isotropic, 0 singular (or an all-zero Jacobian).

    Parameters
    ----------
    J : array-like, shape (N, m, n)

    Returns
    -------
    inverse_condition : array, shape (N,)
        In [0, 1].
    """
    sigma = np.linalg.svd(_check_jacobians(J), compute_uv=False)
    largest = sigma[:, 0]
    safe = largest > 0.0
    return np.where(safe, sigma[:, -1] / np.where(safe, largest, 1.0), 0.0)


def manipulability(
    robot: Robot,
    q: npt.ArrayLike,
    T_flange_tool: npt.ArrayLike | None = None,
    *,
    part: JacobianPart = "position",
) -> FloatArray:
    """Yoshikawa manipulability of the TCP at joint configurations.

    :func:`manipulability_yoshikawa` of the rows ``part`` of
    :func:`~posebridge.kinematics.jacobian.jacobian_base`.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool pose in the flange frame; the robot's default tool if omitted.
    part : "position", "orientation" or "full", keyword-only
        Which rows of the Jacobian; ``"position"`` (default) is in
        ``m^k`` per ``rad^k``-or-``m^k`` with ``k = min(3, n)``.

    Returns
    -------
    w : array, shape (N,)
    """
    return manipulability_yoshikawa(jacobian_rows(jacobian_base(robot, q, T_flange_tool), part))


def inverse_condition(
    robot: Robot,
    q: npt.ArrayLike,
    T_flange_tool: npt.ArrayLike | None = None,
    *,
    part: JacobianPart = "position",
) -> FloatArray:
    """Inverse condition number of the TCP Jacobian at joint configurations.

    :func:`inverse_condition_number` of the rows ``part`` of
    :func:`~posebridge.kinematics.jacobian.jacobian_base`; shapes and
    arguments as :func:`manipulability`.
    """
    return inverse_condition_number(jacobian_rows(jacobian_base(robot, q, T_flange_tool), part))


@dataclass(frozen=True, eq=False)
class LimitMargins:
    """Distances of joint configurations to their position limits (SI units).

    Continuous joints have no limits: their entries are ``inf`` (and their
    fractions too), so ``min`` over joints simply skips them.

    Attributes
    ----------
    to_lower : array, shape (N, n)
        ``q - lower``, rad or m; negative below the lower limit.
    to_upper : array, shape (N, n)
        ``upper - q``, rad or m; negative above the upper limit.
    margin : array, shape (N, n)
        ``min(to_lower, to_upper)``: distance to the nearer limit, negative
        when outside the range.
    fraction : array, shape (N, n)
        ``margin / (upper - lower)``: 0 at a limit, 0.5 at mid-range.
    min_fraction : array, shape (N,)
        Smallest ``fraction`` over the joints (``inf`` if every joint is
        continuous).
    min_joint : array of int, shape (N,)
        Index of the joint with the smallest fraction (-1 if every joint is
        continuous). The fraction, not the absolute margin, picks the joint
        because revolute and prismatic margins have different units.
    min_margin : array, shape (N,)
        ``margin`` of that joint, rad or m (``inf`` if every joint is
        continuous).
    """

    to_lower: FloatArray
    to_upper: FloatArray
    margin: FloatArray
    fraction: FloatArray
    min_fraction: FloatArray
    min_joint: npt.NDArray[np.intp]
    min_margin: FloatArray


def limit_margins(robot: Robot, q: npt.ArrayLike) -> LimitMargins:
    """Distance of each joint to its nearer position limit, absolute and as a fraction of range.

    ``margin_i = min(q_i - lower_i, upper_i - q_i)`` and
    ``fraction_i = margin_i / (upper_i - lower_i)`` (common practice, no
    source).

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.

    Returns
    -------
    LimitMargins
        Arrays of shape (N, n) and (N,), see :class:`LimitMargins`.
    """
    q = check_configurations(robot, q)
    continuous = robot.continuous
    to_lower = np.where(continuous, np.inf, q - robot.lower)
    to_upper = np.where(continuous, np.inf, robot.upper - q)
    margin = np.minimum(to_lower, to_upper)
    span = np.where(continuous, 1.0, robot.upper - robot.lower)
    fraction = np.where(continuous, np.inf, margin / span)
    if np.all(continuous):
        min_joint = np.full(q.shape[0], -1, dtype=np.intp)
        min_fraction = np.full(q.shape[0], np.inf)
        min_margin = np.full(q.shape[0], np.inf)
    else:
        min_joint = np.argmin(fraction, axis=1)
        rows = np.arange(q.shape[0])
        min_fraction = fraction[rows, min_joint]
        min_margin = margin[rows, min_joint]
    return LimitMargins(
        to_lower=to_lower,
        to_upper=to_upper,
        margin=margin,
        fraction=fraction,
        min_fraction=min_fraction,
        min_joint=min_joint,
        min_margin=min_margin,
    )
