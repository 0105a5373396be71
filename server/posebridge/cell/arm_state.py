"""The state of the arm shown on the page: limits, contacts and singularity distances.

:func:`arm_state` is the small, fast answer the page asks for after every
change of the joint values while it shows a cell: per joint the value, limits
and signed margin (negative beyond a limit), every obstacle and self pair
closer than the clearance warning threshold with the arm capsule involved
and the signed distance (negative is the penetration depth), and the
distances to the three singularities. It states numbers only; the page's one
severity policy (``static/severity.js``) turns them into levels and words
with the same thresholds (:class:`~posebridge.cell.thresholds.QualityThresholds`)
the checks use, which are part of the answer.

Contacts per obstacle: the per-obstacle minimum of
:func:`~posebridge.geometry.clearance.clearance_per_obstacle_batch`, and for
each obstacle inside the threshold the closest pair of the same exact
kernel restricted to that obstacle's column of the pair mask (so the capsule
named is the one closest to that obstacle).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import clearance_scene, obstacle_kinds, obstacle_names
from posebridge.cell.quality import (
    ConfigurationQuality,
    evaluate_configurations,
)
from posebridge.cell.scene import Scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.geometry.clearance import clearance_batch, clearance_per_obstacle_batch
from posebridge.kinematics.fk import check_one_configuration

__all__ = ["ArmContact", "ArmStateData", "arm_state"]


@dataclass(frozen=True)
class ArmContact:
    """One arm capsule closer than the clearance threshold to an obstacle or another capsule.

    Attributes
    ----------
    capsule : str
        Arm or tool capsule.
    other : str
        Obstacle name, or the second capsule for a self pair.
    other_kind : str
        ``"fixture"``, ``"keep-out"``, ``"pedestal"``, ``"floor"`` or ``"self"``.
    distance_m : float
        Signed distance; negative is the penetration depth.
    """

    capsule: str
    other: str
    other_kind: str
    distance_m: float


@dataclass(frozen=True, eq=False)
class ArmStateData:
    """The arm's state at one configuration (module docstring), SI units.

    Attributes
    ----------
    quality : ConfigurationQuality
        Of the configuration (N = 1).
    contacts : list of ArmContact
        Every obstacle and the self pair closer than the clearance threshold, nearest first.
    """

    quality: ConfigurationQuality
    contacts: list[ArmContact]


def arm_state(
    scene: Scene, q: npt.ArrayLike, thresholds: QualityThresholds | None = None
) -> ArmStateData:
    """Limits, contacts and singularity distances of one configuration (module docstring).

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,) or (1, n)
        Joint values, rad or m.
    thresholds : QualityThresholds, optional
        Defaults of :class:`~posebridge.cell.thresholds.QualityThresholds`.

    Returns
    -------
    ArmStateData
        SI units; :func:`posebridge.results.arm_state.arm_state_result` makes the answer.
    """
    q = check_one_configuration(scene.robot, q)
    quality = evaluate_configurations(scene, q, thresholds)
    limit_m = quality.thresholds.clearance_m
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
                distance_m=float(per_obstacle.distance[0, o]),
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
                distance_m=float(self_clearance.distance[0]),
            )
        )
    contacts.sort(key=lambda contact: contact.distance_m)
    return ArmStateData(quality=quality, contacts=contacts)
