"""Checks of the inputs every IK solver takes: target poses, seeds, tolerances."""

from __future__ import annotations

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge import errors
from posebridge.arrays import FloatArray, writable_float_array
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.robot.model import Robot

__all__ = ["check_positive", "check_seed", "check_target_poses"]

_ORTHONORMAL_TOLERANCE = 1e-6
"""Largest ``|R R^T - I|`` accepted in a target pose's rotation block."""


def check_positive(value: float, name: str) -> float:
    """``value`` as a float if it is positive and finite (a tolerance), else KinematicsInputError."""
    return errors.check_positive(name, value, KinematicsInputError)


def check_target_poses(T_base_tool: npt.ArrayLike) -> FloatArray:
    """Validate target poses and return them as C-contiguous float64, shape (N, 4, 4).

    Raises
    ------
    KinematicsInputError
        Wrong shape, non-finite values, or a rotation block that is not orthonormal.
    """
    T = writable_float_array(T_base_tool)
    if T.ndim != 3 or T.shape[1:] != (4, 4):
        raise KinematicsInputError(f"target poses: expected shape (N, 4, 4), got {T.shape}")
    deviation, determinant, finite = _pose_checks(T)
    if not finite:
        raise KinematicsInputError("target poses: contain NaN or infinite values")
    if deviation > _ORTHONORMAL_TOLERANCE:
        raise KinematicsInputError(
            f"target poses: rotation blocks are not orthonormal (max |R R^T - I| = {deviation:.3g} > {_ORTHONORMAL_TOLERANCE:g})"
        )
    if determinant < 0.0:
        raise KinematicsInputError("target poses: a rotation block has determinant -1")
    return T


@nb.njit(cache=True)
def _pose_checks(T):
    """Largest ``|R R^T - I|``, smallest ``det R`` and whether all entries are finite."""
    deviation = 0.0
    determinant = np.inf
    finite = True
    for i in range(T.shape[0]):
        for r in range(4):
            for c in range(4):
                if not np.isfinite(T[i, r, c]):
                    finite = False
        for r in range(3):
            for c in range(3):
                dot = T[i, r, 0] * T[i, c, 0] + T[i, r, 1] * T[i, c, 1] + T[i, r, 2] * T[i, c, 2]
                deviation = max(deviation, abs(dot - (1.0 if r == c else 0.0)))
        det = (
            T[i, 0, 0] * (T[i, 1, 1] * T[i, 2, 2] - T[i, 1, 2] * T[i, 2, 1])
            - T[i, 0, 1] * (T[i, 1, 0] * T[i, 2, 2] - T[i, 1, 2] * T[i, 2, 0])
            + T[i, 0, 2] * (T[i, 1, 0] * T[i, 2, 1] - T[i, 1, 1] * T[i, 2, 0])
        )
        determinant = min(determinant, det)
    return deviation, determinant, finite


def check_seed(robot: Robot, seed: npt.ArrayLike | None, n_poses: int) -> tuple[FloatArray, bool]:
    """Seed configurations broadcast to every pose.

    Parameters
    ----------
    robot : Robot
    seed : array-like, shape (n,) or (N, n), or None
    n_poses : int
        ``N``.

    Returns
    -------
    seed : array, shape (N, n)
        Zeros when no seed is given.
    has_seed : bool
    """
    if seed is None:
        return np.zeros((n_poses, robot.dof)), False
    array = np.asarray(seed, dtype=np.float64)
    if array.ndim == 1:
        array = array[None, :]
    if array.ndim != 2 or array.shape[1] != robot.dof or array.shape[0] not in (1, n_poses):
        raise KinematicsInputError(
            f"seed: expected shape ({robot.dof},) or ({n_poses}, {robot.dof}), got {np.shape(seed)}"
        )
    if not np.all(np.isfinite(array)):
        raise KinematicsInputError("seed: contains NaN or infinite values")
    return writable_float_array(np.broadcast_to(array, (n_poses, robot.dof))), True
