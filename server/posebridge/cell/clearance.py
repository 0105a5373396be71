"""Clearance between the arm (with the cell's tool) and the cell: fixtures, keep-outs, pedestal, floor.

The cell's shapes become the geometry engine's arrays here, once per
:class:`~posebridge.cell.scene.Scene`:

* **Arm capsules**: the robot's link capsules, then the cell tool's capsules
  (given in the flange frame, carried by the last link).
* **Obstacle order** (the index every result that names an obstacle uses):
  box fixtures, cylinder fixtures, mesh fixtures, keep-out zones, the
  pedestal, the floor, each in the cell file's order
  (:func:`fixture_count`: how many come before the keep-outs). Keep-out
  zones are obstacles like any other: a capsule inside one is in collision
  with it. Mesh fixtures are exact to their triangles (signed for closed
  meshes, unsigned for open ones: :attr:`ObstacleSet.is_signed`), so a
  target reached through a door opening of a machine housing is clear where
  a box around the housing would collide.
* **Pairs**: every capsule against every obstacle, except the base-link
  capsules (link 0) against the floor, the pedestal and a track's carriage,
  which the robot stands on (:func:`posebridge.geometry.shapes.default_pair_mask` and the same
  rule for the pedestal; common practice, no source). Self pairs come from
  :func:`posebridge.geometry.self_pairs.self_collision_pairs` with
  :data:`SELF_PAIR_SAMPLES` samples and seed 0.

:func:`clearance_scene` builds the :class:`~posebridge.geometry.clearance.ClearanceScene`
once per scene object and keeps it in a weak cache (:data:`_BUILT`): the entry
lives as long as the scene does, so repeated queries on one scene (a target
check, a log of many rows, a drag in the UI) reuse it.

:func:`clearance_to_cell` is the exact minimum signed distance (negative:
penetration depth) of :func:`posebridge.geometry.clearance.clearance_batch`,
over the whole cell or only its environment (obstacles) or only the arm
itself (self pairs), with the closest pair named.
"""

from __future__ import annotations

import threading
import weakref
from dataclasses import dataclass
from functools import cached_property
from typing import Literal

import numpy as np
import numpy.typing as npt

from posebridge.cell.scene import BoxSet, CylinderSet, MeshSet, Scene, posed_scene
from posebridge.geometry.clearance import ClearanceScene, clearance_batch
from posebridge.geometry.self_pairs import self_collision_pairs
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    IntArray,
    Mesh,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.robot.model import Capsule
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "OBSTACLE_KINDS",
    "SELF_PAIR_SAMPLES",
    "CellClearance",
    "ClearanceScope",
    "ObstacleKind",
    "cell_arm",
    "cell_obstacles",
    "clearance_along",
    "clearance_scene",
    "clearance_to_cell",
    "fixture_count",
    "obstacle_kinds",
    "obstacle_names",
    "posed_clearance_scene",
]

ObstacleKind = Literal["fixture", "keep-out", "pedestal", "floor"]
OBSTACLE_KINDS: tuple[ObstacleKind, ...] = ("fixture", "keep-out", "pedestal", "floor")
"""What an obstacle is in the cell, in plain words."""

ClearanceScope = Literal["all", "environment", "self"]
"""``"all"``: obstacles and self pairs; ``"environment"``: obstacles only; ``"self"``: self pairs only."""

SELF_PAIR_SAMPLES = 1000
"""Random configurations (seed 0) used to find capsule pairs that touch by design."""


def cell_arm(scene: Scene) -> ArmCapsules:
    """Return the robot's link capsules followed by the cell tool's capsules (flange frame).

    Returns
    -------
    ArmCapsules
    """
    tool = scene.tool_capsules
    capsules = [
        Capsule(name=name, link=scene.robot.dof, start=start, end=end, radius=float(radius))
        for name, start, end, radius in zip(
            tool.names, tool.start, tool.end, tool.radius, strict=True
        )
    ]
    return ArmCapsules.from_robot(scene.robot, capsules)


def _boxes(boxes: BoxSet) -> list[Box]:
    return [
        Box(name, T, half)
        for name, T, half in zip(boxes.names, boxes.T_world, boxes.half_extents, strict=True)
    ]


def _cylinders(cylinders: CylinderSet) -> list[Cylinder]:
    return [
        Cylinder(name, T, float(radius), float(half))
        for name, T, radius, half in zip(
            cylinders.names, cylinders.T_world, cylinders.radius, cylinders.half_length, strict=True
        )
    ]


def _meshes(meshes: MeshSet) -> list[Mesh]:
    return [
        Mesh(name, T, mesh)
        for name, T, mesh in zip(meshes.names, meshes.T_world, meshes.meshes, strict=True)
    ]


def fixture_count(scene: Scene) -> int:
    """Obstacles that are fixtures (boxes, cylinders, meshes): the first ones in the order."""
    return len(scene.boxes.names) + len(scene.cylinders.names) + len(scene.meshes.names)


def cell_obstacles(scene: Scene) -> ObstacleSet:
    """Every obstacle of the cell in the documented order (module docstring).

    Returns
    -------
    ObstacleSet
        ``k = B + C + M + K + P + 1`` obstacles (box, cylinder and mesh
        fixtures, keep-outs, pedestal, floor).
    """
    shapes: list[Box | Cylinder | Floor | Mesh] = []
    shapes.extend(_boxes(scene.boxes))
    shapes.extend(_cylinders(scene.cylinders))
    shapes.extend(_meshes(scene.meshes))
    shapes.extend(_boxes(scene.keep_outs))
    shapes.extend(_cylinders(scene.pedestal))
    shapes.append(Floor(scene.floor_height))
    return ObstacleSet.from_shapes(shapes)


def obstacle_names(scene: Scene) -> list[str]:
    """Obstacle names in the documented order; the floor is ``"floor"``, length k."""
    return [
        *scene.boxes.names,
        *scene.cylinders.names,
        *scene.meshes.names,
        *scene.keep_outs.names,
        *scene.pedestal.names,
        "floor",
    ]


def obstacle_kinds(scene: Scene) -> list[ObstacleKind]:
    """Return what each obstacle is (``"fixture"``, ``"keep-out"``, ``"pedestal"``, ``"floor"``), length k."""
    kinds: list[ObstacleKind] = ["fixture"] * fixture_count(scene)
    kinds += ["keep-out"] * len(scene.keep_outs.names)
    kinds += ["pedestal"] * len(scene.pedestal.names)
    kinds.append("floor")
    return kinds


class _Built:
    """The clearance scenes of one cell: everything, obstacles only, self pairs only.

    Each is built on first use: a scene posed for one path sample needs only its
    obstacles, and the self pairs (a sampling of the arm) are the costly part.
    """

    def __init__(self, scene: Scene) -> None:
        self.arm = cell_arm(scene)
        self.obstacles = cell_obstacles(scene)
        mask = default_pair_mask(self.arm, self.obstacles)
        first_pedestal = fixture_count(scene) + len(scene.keep_outs.names)
        mask[self.arm.link == 0, first_pedestal : first_pedestal + len(scene.pedestal.names)] = (
            False
        )
        if scene.external.track is not None:  # the base stands on the track's carriage
            carriage = f"{scene.external.names[0]} carriage"
            rows = [i for i, name in enumerate(scene.boxes.names) if name == carriage]
            mask[self.arm.link == 0, rows] = False
        self.mask = mask
        self.T_world_base = scene.T_world_base

    def _scene(self, pairs: IntArray, mask: BoolArray) -> ClearanceScene:
        return ClearanceScene.build(
            self.arm, self.obstacles, self.T_world_base, self_pairs=pairs, pair_mask=mask
        )

    @cached_property
    def pairs(self) -> IntArray:
        """Self pairs of the arm, shape (P, 2)."""
        return self_collision_pairs(self.arm, samples=SELF_PAIR_SAMPLES, seed=0)

    @cached_property
    def everything(self) -> ClearanceScene:
        """Obstacles and self pairs."""
        return self._scene(self.pairs, self.mask)

    @cached_property
    def environment(self) -> ClearanceScene:
        """Obstacles only."""
        return self._scene(np.empty((0, 2), dtype=np.int64), self.mask)

    @cached_property
    def self_only(self) -> ClearanceScene:
        """Self pairs only."""
        return self._scene(self.pairs, np.zeros_like(self.mask))


_BUILT: weakref.WeakKeyDictionary[Scene, _Built] = weakref.WeakKeyDictionary()
"""Built clearance scenes by scene object; an entry goes away with its scene."""
_BUILT_LOCK = threading.Lock()


def _built(scene: Scene) -> _Built:
    with _BUILT_LOCK:
        built = _BUILT.get(scene)
        if built is None:
            built = _Built(scene)
            _BUILT[scene] = built
        return built


def clearance_scene(scene: Scene) -> ClearanceScene:
    """Return the clearance scene of a cell: arm with tool, obstacles, base pose, pairs (module docstring).

    Built on the first call for a scene object and reused after that.

    Returns
    -------
    ClearanceScene
    """
    return _built(scene).everything


def posed_clearance_scene(scene: Scene, values: npt.ArrayLike) -> ClearanceScene:
    """Return the clearance scene of ``scene`` with its external axes at ``values`` (m, rad; (m,)).

    The scene is posed by :func:`~posebridge.cell.scene.posed_scene` (the track moves the
    base, pedestal and carriage; a turntable its fixtures) and takes the self pairs of
    ``scene`` itself: the arm is the same at every axis value, so its costly pair sampling
    is done once. At the scene's own values this is :func:`clearance_scene`.

    Returns
    -------
    ClearanceScene
    """
    posed = posed_scene(scene, values)
    if posed is scene:
        return clearance_scene(scene)
    built = _Built(posed)
    return built._scene(_built(scene).pairs, built.mask)


@dataclass(frozen=True, eq=False)
class CellClearance:
    """Minimum clearance of N configurations to the cell, with the closest pair (SI units).

    Attributes
    ----------
    distance : array, shape (N,)
        Minimum signed distance, m; negative is the penetration depth;
        ``inf`` when there is no pair to check.
    capsule : array of int64, shape (N,)
        Index into ``capsule_names`` of the closest pair's arm capsule (-1: none).
    other : array of int64, shape (N,)
        Index into ``obstacle_names``, or into ``capsule_names`` where ``is_self``.
    is_self : array of bool, shape (N,)
        The closest pair is two capsules of the arm.
    witness_world : array, shape (N, 2, 3)
        Closest points in the world, m: on ``capsule``, then on the other shape.
    capsule_names : tuple of str
        Arm capsules: robot link capsules, then tool capsules.
    obstacle_names : tuple of str
        Obstacles in the order of :func:`obstacle_names`.
    obstacle_kinds : tuple of str
        :data:`OBSTACLE_KINDS` word per obstacle.
    """

    distance: FloatArray
    capsule: IntArray
    other: IntArray
    is_self: BoolArray
    witness_world: FloatArray
    capsule_names: tuple[str, ...]
    obstacle_names: tuple[str, ...]
    obstacle_kinds: tuple[ObstacleKind, ...]

    def pair(self, k: int) -> tuple[str, str, str]:
        """Names of configuration ``k``'s closest pair and the other's kind.

        Returns
        -------
        capsule, other, kind : str
            ``kind`` is ``"self"`` for two arm capsules, else the obstacle's
            kind; three empty strings when there is no pair.
        """
        c = int(self.capsule[k])
        if c < 0:
            return "", "", ""
        o = int(self.other[k])
        if self.is_self[k]:
            return self.capsule_names[c], self.capsule_names[o], "self"
        return self.capsule_names[c], self.obstacle_names[o], self.obstacle_kinds[o]


def clearance_to_cell(
    scene: Scene, q: npt.ArrayLike, *, scope: ClearanceScope = "all"
) -> CellClearance:
    """Exact minimum signed distance of the arm to the cell, and the closest pair.

    :func:`posebridge.geometry.clearance.clearance_batch` (fused forward
    kinematics, exact capsule-obstacle and capsule-capsule closest points,
    Ericson 2004, ch. 5) on the scene of :func:`clearance_scene`.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (N, n)
        Joint values, rad or m.
    scope : "all", "environment" or "self", keyword-only
        Obstacles and self pairs, obstacles only, or self pairs only.

    Returns
    -------
    CellClearance
    """
    if scope not in ("all", "environment", "self"):
        raise ValueError(f"scope: expected 'all', 'environment' or 'self', got {scope!r}")
    built = _built(scene)
    chosen = {"all": built.everything, "environment": built.environment, "self": built.self_only}[
        scope
    ]
    result = clearance_batch(chosen, q)
    return CellClearance(
        distance=result.distance,
        capsule=result.capsule,
        other=result.other,
        is_self=result.is_self,
        witness_world=result.witness,
        capsule_names=chosen.arm.names,
        obstacle_names=chosen.obstacles.names,
        obstacle_kinds=tuple(obstacle_kinds(scene)),
    )


def clearance_along(
    scene: Scene, q: npt.ArrayLike, external: npt.ArrayLike, *, scope: ClearanceScope = "all"
) -> CellClearance:
    """:func:`clearance_to_cell` with the external axes at each configuration's own values.

    The scene provider of a path check: configurations are grouped by their
    external values and each group is checked in the scene posed there
    (:func:`~posebridge.cell.scene.posed_scene`: the track moves the base and its
    carriage, a turntable its fixtures). A cell without external axes, or a group
    at the scene's own values, is checked in ``scene`` itself.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (N, n)
        Joint values, rad or m.
    external : array-like, shape (N, m)
        External axis values of each configuration, m or rad.
    scope : "all", "environment" or "self", keyword-only

    Returns
    -------
    CellClearance
        Rows in the order of ``q``.
    """
    q = np.asarray(q, dtype=np.float64).reshape(-1, scene.robot.dof)
    values = np.asarray(external, dtype=np.float64).reshape(len(q), scene.external.count)
    if len(q) == 0 or scope == "self" or scene.external.count == 0:
        return clearance_to_cell(scene, q, scope=scope)  # self pairs do not see the axes
    distinct, group = np.unique(values, axis=0, return_inverse=True)
    group = group.ravel()
    parts = [
        (rows, clearance_to_cell(posed_scene(scene, distinct[g]), q[rows], scope=scope))
        for g in range(len(distinct))
        for rows in [np.flatnonzero(group == g)]
    ]
    first = parts[0][1]
    distance = np.empty(len(q))
    capsule = np.empty(len(q), dtype=np.int64)
    other = np.empty(len(q), dtype=np.int64)
    is_self = np.empty(len(q), dtype=bool)
    witness = np.empty((len(q), 2, 3))
    for rows, part in parts:
        distance[rows] = part.distance
        capsule[rows] = part.capsule
        other[rows] = part.other
        is_self[rows] = part.is_self
        witness[rows] = part.witness_world
    return CellClearance(
        distance=distance,
        capsule=capsule,
        other=other,
        is_self=is_self,
        witness_world=witness,
        capsule_names=first.capsule_names,
        obstacle_names=first.obstacle_names,
        obstacle_kinds=first.obstacle_kinds,
    )
