"""Singularity classification of six-axis spherical-wrist arms (and seven-axis arms).

A six-axis arm with a spherical wrist loses a degree of freedom in three
ways (Siciliano, Sciavicco, Villani, Oriolo, *Robotics: Modelling, Planning
and Control*, sec. 3.3, decoupling of arm and wrist singularities):

* **wrist**: the wrist bend joint is straight (joint 5 at 0 or 180°), so
  axes 4 and 6 line up and only their sum (or difference) moves the tool;
* **elbow**: shoulder, elbow and wrist centre are in line (arm stretched to
  the edge of the reach, or folded back onto itself);
* **shoulder**: the wrist point lies in the plane through axis 1 parallel to
  axis 2 (for arms without a lateral offset: on axis 1), where the two
  solutions of joint 1 meet.

For each configuration :func:`classify_singularity` reports how far it is
from each kind, in the arm-plane geometry of
:mod:`posebridge.kinematics.branches` (shoulder, elbow, wrist centre and
wrist point as defined there, which is exact for spherical wrists and for
offset wrists whose second, third and fourth axes are parallel, and an
approximation for other wrists whose axes do not meet), and names the
nearest kind among those below their thresholds. Seven-axis arms use joints 2, 4 and 6 as shoulder, elbow
and wrist bend.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import arm_plane_points, branch_geometry
from posebridge.kinematics.fk import KinematicsInputError, check_configurations
from posebridge.robot.model import Robot
from posebridge.units import BoolArray, FloatArray, rad_from_deg

__all__ = ["SingularityReport", "SingularityThresholds", "classify_singularity"]


@dataclass(frozen=True)
class SingularityThresholds:
    """Distances below which a configuration counts as near a singularity (SI units).

    Attributes
    ----------
    wrist_rad : float
        Wrist bend from straight; default 10 degrees.
    elbow_rad : float
        Elbow angle from stretched or folded; default 5 degrees.
    shoulder_m : float
        Wrist centre from the shoulder singular plane; default 50 mm.
    """

    # common practice, no source
    wrist_rad: float = field(default_factory=lambda: float(rad_from_deg(10.0)))
    # common practice, no source
    elbow_rad: float = field(default_factory=lambda: float(rad_from_deg(5.0)))
    # common practice, no source
    shoulder_m: float = 0.05


@dataclass(frozen=True, eq=False)
class SingularityReport:
    """Distances of N configurations from the three singularities, and their class.

    Attributes
    ----------
    wrist_rad : array, shape (N,)
        Wrist bend from straight (0 or pi), in [0, pi/2].
    wrist_sin : array, shape (N,)
        ``|sin(wrist bend)|``.
    elbow_rad : array, shape (N,)
        Angle between upper arm (shoulder to elbow) and forearm (elbow to
        wrist centre) from 0 (stretched) or pi (folded), in [0, pi/2].
    shoulder_m : array, shape (N,)
        Distance of the wrist point from the plane through axis 1 parallel
        to axis 2 (from axis 1 itself for arms without lateral offset).
    near_wrist, near_elbow, near_shoulder : arrays of bool, shape (N,)
        Below the respective threshold.
    label : tuple of str, length N
        ``"wrist"``, ``"elbow"``, ``"shoulder"`` or ``"none"``: the kind below
        its threshold with the smallest distance-to-threshold ratio.
    thresholds : SingularityThresholds
    """

    wrist_rad: FloatArray
    wrist_sin: FloatArray
    elbow_rad: FloatArray
    shoulder_m: FloatArray
    near_wrist: BoolArray
    near_elbow: BoolArray
    near_shoulder: BoolArray
    label: tuple[str, ...]
    thresholds: SingularityThresholds


def _from_line(angle: FloatArray) -> FloatArray:
    """Distance of an angle from the nearest multiple of pi, in [0, pi/2]."""
    return np.abs(angle - np.pi * np.round(angle / np.pi))


def classify_singularity(
    robot: Robot,
    q: npt.ArrayLike,
    thresholds: SingularityThresholds | None = None,
) -> SingularityReport:
    """Distances from the wrist, elbow and shoulder singularities, and the nearest kind.

    Method in the module docstring.

    Parameters
    ----------
    robot : Robot
        A six- or seven-axis arm (branch label scheme ``"arm"``).
    q : array-like, shape (N, n)
        Joint values, rad.
    thresholds : SingularityThresholds, optional
        Defaults: wrist 10 deg, elbow 5 deg, shoulder 50 mm.

    Returns
    -------
    SingularityReport

    Raises
    ------
    KinematicsInputError
        ``q`` has the wrong shape, or the robot is not a six- or seven-axis arm.
    """
    thresholds = SingularityThresholds() if thresholds is None else thresholds
    for name in ("wrist_rad", "elbow_rad", "shoulder_m"):
        value = getattr(thresholds, name)
        if not np.isfinite(value) or value <= 0.0:
            raise KinematicsInputError(
                f"thresholds.{name}: expected a positive finite number, got {value!r}"
            )
    q = check_configurations(robot, q)
    geometry = branch_geometry(robot)
    points = arm_plane_points(robot, q, geometry)
    bend = q[:, geometry.wrist_joint] - geometry.wrist_straight
    wrist = _from_line(bend)
    upper = points.elbow - points.shoulder
    fore = points.wrist_centre - points.elbow
    elbow = _from_line(
        np.arctan2(
            upper[:, 0] * fore[:, 1] - upper[:, 1] * fore[:, 0],
            np.einsum("ki,ki->k", upper, fore),
        )
    )
    shoulder = np.abs(points.wrist_point[:, 0])
    ratios = np.stack(
        [
            wrist / thresholds.wrist_rad,
            elbow / thresholds.elbow_rad,
            shoulder / thresholds.shoulder_m,
        ],
        axis=1,
    )
    names = np.array(["wrist", "elbow", "shoulder"], dtype=object)
    nearest = np.argmin(ratios, axis=1)
    label = np.where(ratios.min(axis=1) < 1.0, names[nearest], "none")
    return SingularityReport(
        wrist_rad=wrist,
        wrist_sin=np.abs(np.sin(bend)),
        elbow_rad=elbow,
        shoulder_m=shoulder,
        near_wrist=ratios[:, 0] < 1.0,
        near_elbow=ratios[:, 1] < 1.0,
        near_shoulder=ratios[:, 2] < 1.0,
        label=tuple(label.tolist()),
        thresholds=thresholds,
    )
