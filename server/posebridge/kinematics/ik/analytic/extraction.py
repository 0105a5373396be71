"""What every analytic family's geometry extractor shares.

An extractor reads the joint axes and points at the zero configuration
(:func:`zero_axes`), checks the family's conditions on them to
:data:`GEOMETRY_TOLERANCE`, and accepts the robot only if the family's
canonical forward kinematics agrees with
:func:`posebridge.kinematics.fk.fk_flange` on :data:`VERIFY_SAMPLES` random
configurations to :data:`VERIFY_TOLERANCE` (:func:`agrees_with_fk`).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from posebridge.kinematics.fk import fk_flange, fk_frames
from posebridge.robot.model import Robot
from posebridge.units import FloatArray

__all__ = [
    "GEOMETRY_TOLERANCE",
    "VERIFY_SAMPLES",
    "VERIFY_TOLERANCE",
    "agrees_with_fk",
    "line_gap",
    "zero_axes",
]

GEOMETRY_TOLERANCE = 1e-9
"""Largest deviation (m, or unit-vector components) accepted by the extractors' checks."""

VERIFY_TOLERANCE = 1e-9
"""Largest |FK difference| on random configurations for an extractor to accept a robot."""

VERIFY_SAMPLES = 64
"""Random configurations of that check."""


def zero_axes(robot: Robot) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Link frames, joint axes and joint points at the zero configuration, base frame.

    Returns
    -------
    frames : array, shape (n + 2, 4, 4)
        :func:`posebridge.kinematics.fk.fk_frames` at zero (base, links, flange).
    axes : array, shape (n, 3)
        Unit joint axes.
    points : array, shape (n, 3)
        Joint frame origins (points of the axes).
    """
    frames = fk_frames(robot, np.zeros((1, robot.dof)))[0]
    joint_frames = frames[1 : robot.dof + 1]
    axes = np.einsum("nij,nj->ni", joint_frames[:, :3, :3], robot.axes)
    return frames, axes, joint_frames[:, :3, 3]


def line_gap(p: FloatArray, a: FloatArray, point: FloatArray) -> float:
    """Distance of ``point`` from the line through ``p`` along unit ``a``, m."""
    d = point - p
    return float(np.linalg.norm(d - (d @ a) * a))


def agrees_with_fk(
    robot: Robot, canonical_fk_flange: Callable[[FloatArray], FloatArray], q: FloatArray
) -> bool:
    """Whether a family's canonical flange poses match the robot's forward kinematics.

    Parameters
    ----------
    robot : Robot
    canonical_fk_flange : callable
        Flange poses (N, 4, 4) in the robot's base frame from joint values (N, n).
    q : array, shape (N, n)
        The configurations compared (rad, m).

    Returns
    -------
    bool
        Largest entry of the pose difference at most :data:`VERIFY_TOLERANCE`.
    """
    return bool(np.abs(canonical_fk_flange(q) - fk_flange(robot, q)).max() <= VERIFY_TOLERANCE)
