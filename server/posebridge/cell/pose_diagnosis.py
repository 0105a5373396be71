"""Diagnosis of one joint configuration in a cell, in SI units.

:func:`diagnose_pose` answers "where was the robot and what was it close
to?" for one configuration: TCP pose in the world and the base frame, branch,
limit margins, manipulability, singularity distances, clearance with the
closest obstacles named, the nearest targets, and every other IK solution of
the same TCP pose (with the input's own solution marked). It returns a
:class:`PoseDiagnosisData` in SI units;
:func:`posebridge.results.diagnosis.pose_diagnosis_result` turns it into the
boundary model (mm, deg) with its findings. A whole controller log is
diagnosed by :mod:`posebridge.cell.log_diagnosis`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int16Array
from posebridge.cell.clearance import (
    CellClearance,
    clearance_scene,
    obstacle_kinds,
    obstacle_names,
)
from posebridge.cell.quality import ConfigurationQuality, evaluate_configurations
from posebridge.cell.scene import Scene, posed_scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.geometry.clearance import clearance_per_obstacle_batch
from posebridge.kinematics.fk import check_one_configuration
from posebridge.kinematics.ik import solve_ik_all
from posebridge.transforms import rotation_vector_from_rotation_matrix
from posebridge.units import FloatArray

__all__ = [
    "CLOSEST_OBJECTS",
    "INPUT_MATCH_TOLERANCE",
    "NEAREST_TARGETS",
    "NearTargets",
    "ObjectDistances",
    "PoseDiagnosisData",
    "diagnose_pose",
    "overall_pair",
    "pair_label",
]

CLOSEST_OBJECTS = 5
"""Obstacles listed in :attr:`PoseDiagnosis.closest_objects`."""
NEAREST_TARGETS = 3
"""Target and approach poses listed in :attr:`PoseDiagnosis.nearest_targets`."""
INPUT_MATCH_TOLERANCE = 1e-5
"""An IK solution within this (rad or m, every joint) of the input is the input's own."""


@dataclass(frozen=True)
class NearTargets:
    """Target and approach poses nearest a TCP, nearest first (at most :data:`NEAREST_TARGETS`).

    Attributes
    ----------
    names : list of str
    kinds : list of str
        ``"target"`` or ``"approach"`` per entry.
    distance_m : array, shape (K,)
        TCP position distance.
    rotation_rad : array, shape (K, 3)
        Rotation vector from the target's orientation to the TCP's (its length is the
        angle between the two).
    """

    names: list[str]
    kinds: list[str]
    distance_m: FloatArray
    rotation_rad: FloatArray


@dataclass(frozen=True)
class ObjectDistances:
    """Obstacles nearest a configuration, nearest first (at most :data:`CLOSEST_OBJECTS`).

    Attributes
    ----------
    names, kinds : list of str
    distance_m : array, shape (K,)
        Signed distance; negative is the penetration depth.
    """

    names: list[str]
    kinds: list[str]
    distance_m: FloatArray


@dataclass(frozen=True, eq=False)
class PoseDiagnosisData:
    """Diagnosis of one configuration (module docstring), SI units.

    Attributes
    ----------
    scene : Scene
        The scene, posed at the external axis values diagnosed.
    quality : ConfigurationQuality
        Of the input configuration (N = 1).
    branches : ConfigurationQuality or None
        Of every IK solution of the input's TCP pose (all revolutions within
        limits); None when there is none.
    revolutions : array of int, shape (B, n)
        Extra whole revolutions of each of ``branches``.
    input_branch : int or None
        Index into ``branches`` of the solution equal to the input joints.
    nearest_targets : NearTargets
    closest_objects : ObjectDistances
    """

    scene: Scene
    quality: ConfigurationQuality
    branches: ConfigurationQuality | None
    revolutions: Int16Array
    input_branch: int | None
    nearest_targets: NearTargets
    closest_objects: ObjectDistances


def pair_label(clearance: CellClearance, k: int) -> str:
    """Return configuration ``k``'s closest pair as ``"capsule – other"``, empty when none."""
    capsule, other, _ = clearance.pair(k)
    return f"{capsule} – {other}" if capsule else ""


def overall_pair(quality: ConfigurationQuality, k: int) -> CellClearance:
    """Return the clearance (environment or self) holding configuration ``k``'s closest pair."""
    if quality.self_clearance.distance[k] < quality.environment.distance[k]:
        return quality.self_clearance
    return quality.environment


def _nearest_targets(scene: Scene, T_world_tool: FloatArray) -> NearTargets:
    """Target and approach poses nearest the TCP (4, 4), by position distance."""
    targets = scene.targets
    has_approach = targets.approach_offset > 0.0
    poses = np.concatenate([targets.T_world_target, targets.T_world_approach[has_approach]])
    names = list(targets.names) + [n for n, a in zip(targets.names, has_approach, strict=True) if a]
    kinds = ["target"] * len(targets.names) + ["approach"] * int(has_approach.sum())
    if not names:
        return NearTargets([], [], np.zeros(0), np.zeros((0, 3)))
    distance = np.linalg.norm(poses[:, :3, 3] - T_world_tool[:3, 3], axis=1)
    relative = np.swapaxes(poses[:, :3, :3], 1, 2) @ T_world_tool[:3, :3]
    rotation = rotation_vector_from_rotation_matrix(relative)
    order = np.argsort(distance, kind="stable")[:NEAREST_TARGETS]
    return NearTargets(
        names=[names[i] for i in order],
        kinds=[kinds[i] for i in order],
        distance_m=distance[order],
        rotation_rad=rotation[order],
    )


def _closest_objects(scene: Scene, q: FloatArray) -> ObjectDistances:
    """Return the obstacles nearest configuration ``q`` (1, n), nearest first."""
    distance = clearance_per_obstacle_batch(clearance_scene(scene), q).distance[0]
    names = obstacle_names(scene)
    kinds = obstacle_kinds(scene)
    order = [o for o in np.argsort(distance, kind="stable") if np.isfinite(distance[o])]
    order = order[:CLOSEST_OBJECTS]
    return ObjectDistances(
        names=[names[o] for o in order],
        kinds=[kinds[o] for o in order],
        distance_m=distance[np.asarray(order, dtype=np.intp)],
    )


def diagnose_pose(
    scene: Scene,
    q: npt.ArrayLike,
    thresholds: QualityThresholds | None = None,
    *,
    external: npt.ArrayLike | None = None,
) -> PoseDiagnosisData:
    """Everything about one joint configuration in the cell (module docstring).

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,) or (1, n)
        Joint values, rad or m (convert user input with
        :func:`posebridge.units.joints_si_from_user`).
    thresholds : QualityThresholds, optional
        The cell's own (``scene.cell.thresholds``) if omitted.
    external : array-like, shape (m,), optional
        External axis values (m, rad); the scene's values if omitted. The scene is
        posed there (:func:`~posebridge.cell.scene.posed_scene`).

    Returns
    -------
    PoseDiagnosisData
        SI units. ``input_branch`` is None when no IK solution equals the
        input (a joint outside its limits by whole revolutions).
    """
    if external is not None:
        scene = posed_scene(scene, external)
    robot = scene.robot
    q = check_one_configuration(scene.robot, q)
    quality = evaluate_configurations(scene, q, thresholds)
    solutions = solve_ik_all(
        robot,
        quality.T_base_tool,
        T_flange_tool=scene.T_flange_tool,
        seed=q[0],
        all_revolutions=True,
    )
    slots = solutions.valid_solutions(0)
    branches = None
    input_branch = None
    if slots:
        branches = evaluate_configurations(scene, solutions.q[0, slots], quality.thresholds)
        gap = np.max(np.abs(branches.q - q), axis=1)
        if gap.min() <= INPUT_MATCH_TOLERANCE:
            input_branch = int(np.argmin(gap))
    return PoseDiagnosisData(
        scene=scene,
        quality=quality,
        branches=branches,
        revolutions=solutions.revolutions[0, slots],
        input_branch=input_branch,
        nearest_targets=_nearest_targets(scene, quality.T_world_tool[0]),
        closest_objects=_closest_objects(scene, q),
    )
