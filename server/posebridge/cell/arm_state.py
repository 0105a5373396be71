"""The state of the arm shown on the page: limits, contacts and singularity distances.

:func:`arm_state` is the small, fast answer the page asks for after every
change of the joint values while it shows a cell: per joint the value, limits
and signed margin (negative beyond a limit), every obstacle and self pair
closer than the clearance warning threshold with the arm capsule involved
and the signed distance (negative is the penetration depth), and the
distances to the three singularities. It states numbers only; the page's one
severity policy (``static/severity.js``) turns them into levels and words
with the same thresholds (:class:`~posebridge.cell.reports.QualityThresholds`)
the checks use, which are part of the answer.

Contacts per obstacle: the per-obstacle minimum of
:func:`~posebridge.geometry.clearance.clearance_per_obstacle_batch`, and for
each obstacle inside the threshold the closest pair of the same exact
kernel restricted to that obstacle's column of the pair mask (so the capsule
named is the one closest to that obstacle).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import numpy.typing as npt
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.clearance import clearance_scene, obstacle_kinds, obstacle_names
from posebridge.cell.quality import (
    evaluate_configurations,
    full_branch_words,
    joint_margins_model,
    revolution_counts,
    singularity_model,
)
from posebridge.cell.reports import (
    JointMargin,
    PartKind,
    QualityThresholds,
    SingularityProximity,
)
from posebridge.cell.scene import Scene
from posebridge.geometry.clearance import clearance_batch, clearance_per_obstacle_batch
from posebridge.kinematics.fk import KinematicsInputError, check_configurations
from posebridge.units import joint_unit_labels, joints_user_from_si, m_from_mm, mm_from_m

__all__ = ["ArmContact", "ArmState", "arm_state"]


class _Result(BaseModel):
    model_config = ConfigDict(extra="forbid")


class ArmContact(_Result):
    """One arm capsule closer than the clearance threshold to an obstacle or another capsule."""

    capsule: str = Field(description="Arm or tool capsule.")
    other: str = Field(description="Obstacle name, or the second capsule for a self pair.")
    other_kind: PartKind
    distance_mm: float = Field(description="Signed distance; negative is the penetration depth.")


class ArmState(_Result):
    """The arm's state at one joint configuration in the cell (numbers; the page words them)."""

    joint_names: list[str]
    joint_units: list[str]
    joints_deg: list[float] = Field(
        description="Joint values: degrees for revolute joints, millimetres for prismatic joints."
    )
    branch: str
    within_limits: bool
    limits: list[JointMargin] = Field(description="Per joint: value, limits and signed margin.")
    clearance_mm: float | None = Field(description="Smallest signed distance; null if none.")
    collision_free: bool
    contacts: list[ArmContact] = Field(
        description="Every obstacle and the self pair closer than thresholds.clearance_mm, "
        "nearest first."
    )
    singularity: SingularityProximity | None = Field(description="null for non-arm robots.")
    thresholds: QualityThresholds


def _single(scene: Scene, q: npt.ArrayLike) -> npt.NDArray[np.float64]:
    array = np.asarray(q, dtype=np.float64)
    if array.ndim == 1:
        array = array[None]
    if array.shape[0] != 1:
        raise KinematicsInputError(
            f"joint values: expected one configuration of {scene.robot.dof} values, got shape "
            f"{np.shape(q)}"
        )
    return check_configurations(scene.robot, array)


def arm_state(
    scene: Scene, q: npt.ArrayLike, thresholds: QualityThresholds | None = None
) -> ArmState:
    """Limits, contacts and singularity distances of one configuration (module docstring).

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,) or (1, n)
        Joint values, rad or m.
    thresholds : QualityThresholds, optional
        Defaults of :class:`~posebridge.cell.reports.QualityThresholds`.

    Returns
    -------
    ArmState
        Boundary units (mm, deg).
    """
    robot = scene.robot
    q = _single(scene, q)
    quality = evaluate_configurations(scene, q, thresholds)
    limit_m = float(m_from_mm(quality.thresholds.clearance_mm))
    everything = clearance_scene(scene)
    per_obstacle = clearance_per_obstacle_batch(everything, q)
    names = obstacle_names(scene)
    kinds = obstacle_kinds(scene)
    capsule_names = quality.environment.capsule_names
    contacts: list[ArmContact] = []
    for o in np.flatnonzero(per_obstacle.distance[0] < limit_m):
        mask = np.zeros_like(everything.pair_mask)
        mask[:, o] = everything.pair_mask[:, o]
        only = dataclasses.replace(
            everything, pair_mask=mask, self_pairs=np.empty((0, 2), dtype=np.int64)
        )
        closest = clearance_batch(only, q)
        contacts.append(
            ArmContact(
                capsule=capsule_names[int(closest.capsule[0])],
                other=names[o],
                other_kind=kinds[o],
                distance_mm=float(mm_from_m(per_obstacle.distance[0, o])),
            )
        )
    self_clearance = quality.self_clearance
    if self_clearance.distance[0] < limit_m:
        capsule, other, _ = self_clearance.pair(0)
        contacts.append(
            ArmContact(
                capsule=capsule,
                other=other,
                other_kind="self",
                distance_mm=float(mm_from_m(self_clearance.distance[0])),
            )
        )
    contacts.sort(key=lambda contact: contact.distance_mm)
    clearance = float(mm_from_m(quality.clearance[0]))
    return ArmState(
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        joints_deg=joints_user_from_si(q[0], robot.prismatic).tolist(),
        branch=full_branch_words(quality, 0, revolution_counts(robot, q)[0]),
        within_limits=bool(quality.within_limits[0]),
        limits=joint_margins_model(quality, 0),
        clearance_mm=clearance if np.isfinite(clearance) else None,
        collision_free=bool(quality.collision_free[0]),
        contacts=contacts,
        singularity=singularity_model(quality, 0),
        thresholds=quality.thresholds,
    )
