"""How far each target is from the fixture it belongs to.

A target is a tool pose in its fixture's frame, so moving the fixture moves
the target; a target dragged far from its fixture (a drop point moved off its
bin) still moves with it but no longer does its job. :func:`target_fixture_distances`
measures the distance from each target's TCP point to the solid of its
fixture: a box fixture its box, a cylinder its cylinder, a mesh fixture the
box of its vertices in the fixture frame (an upper bound of the distance to the
mesh itself, so a target near a mesh is never flagged), a frame fixture the
nearest of the solids below it in the parent chain. Closed forms: a point's
distance to an axis-aligned box is the norm of ``max(|p| - h, 0)`` per axis;
to a solid cylinder it is the hypotenuse of the radial and axial excesses
(Ericson, *Real-Time Collision Detection*, sec. 5.1.3, the clamping argument).
Targets in the world frame, or on a frame fixture without solids below it,
get ``nan``.
"""

from __future__ import annotations

import numpy as np

from posebridge.cell.model import WORLD
from posebridge.cell.scene import Scene
from posebridge.units import FloatArray

__all__ = ["target_fixture_distances"]


def _point_box(p_local: FloatArray, half: FloatArray) -> float:
    """Distance of a point (box frame, m, shape (3,)) to a box of half extents ``half``."""
    return float(np.linalg.norm(np.maximum(np.abs(p_local) - half, 0.0)))


def _point_cylinder(p_local: FloatArray, radius: float, half_length: float) -> float:
    """Distance of a point (cylinder frame, axis z, m) to the solid cylinder."""
    radial = max(float(np.hypot(p_local[0], p_local[1])) - radius, 0.0)
    axial = max(abs(float(p_local[2])) - half_length, 0.0)
    return float(np.hypot(radial, axial))


def _local(T_world: FloatArray, p_world: FloatArray) -> FloatArray:
    """``p_world`` (3,) in the frame ``T_world`` (4, 4): ``R^T (p - t)``."""
    return np.asarray(T_world[:3, :3].T @ (p_world - T_world[:3, 3]))


def _solid_distances(scene: Scene, p_world: FloatArray) -> dict[str, float]:
    """Distance of ``p_world`` to every solid fixture (boxes, cylinders, meshes), m, by name."""
    found: dict[str, float] = {}
    boxes = scene.boxes
    for name, T, half in zip(boxes.names, boxes.T_world, boxes.half_extents, strict=True):
        found[name] = _point_box(_local(T, p_world), half)
    cylinders = scene.cylinders
    for name, T, radius, half_length in zip(
        cylinders.names, cylinders.T_world, cylinders.radius, cylinders.half_length, strict=True
    ):
        found[name] = _point_cylinder(_local(T, p_world), float(radius), float(half_length))
    meshes = scene.meshes
    for name, T, mesh in zip(meshes.names, meshes.T_world, meshes.meshes, strict=True):
        low = mesh.vertices.min(axis=0)
        high = mesh.vertices.max(axis=0)
        found[name] = _point_box(_local(T, p_world) - (low + high) / 2.0, (high - low) / 2.0)
    return found


def _descendants(scene: Scene, name: str) -> list[str]:
    """``name`` and every fixture below it in the parent chains."""
    children: dict[str, list[str]] = {}
    for fixture in scene.cell.fixtures:
        if fixture.parent is not None:
            children.setdefault(fixture.parent, []).append(fixture.name)
    found: list[str] = []
    stack = [name]
    while stack:
        current = stack.pop()
        found.append(current)
        stack.extend(children.get(current, []))
    return found


def target_fixture_distances(scene: Scene) -> FloatArray:
    """Distance of each target's TCP point to the solid of its fixture (module docstring).

    Parameters
    ----------
    scene : Scene

    Returns
    -------
    array, shape (K,)
        m, 0 inside or on the solid; ``nan`` for targets in the world frame or on a
        frame fixture without solids below it.
    """
    targets = scene.targets
    distances = np.full(len(targets.names), np.nan)
    for i, fixture in enumerate(targets.fixtures):
        if fixture == WORLD:
            continue
        solids = _solid_distances(scene, targets.T_world_target[i, :3, 3])
        mine = [solids[n] for n in _descendants(scene, fixture) if n in solids]
        if mine:
            distances[i] = min(mine)
    return distances
