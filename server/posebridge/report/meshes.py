"""Triangle meshes of a cell's solids for the review report, world frame, m.

Every solid (box and cylinder fixtures, mesh fixtures, keep-out zones, the
pedestal, the arm's link meshes or capsules and the tool's capsules) becomes
a triangle mesh of its surface: boxes from their eight corners, cylinders and
capsules as surfaces of revolution (rings of points about the axis,
consecutive rings joined by two triangles per segment), mesh fixtures and
link meshes decimated for display. :mod:`posebridge.report.figures` turns
them into plotly traces.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.cell.scene import BoxSet, CylinderSet, Scene
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_display import (
    MIN_TRIANGLE_BUDGET,
    decimate_for_display,
    split_triangle_budget,
)
from posebridge.geometry.robot_meshes import robot_display_meshes
from posebridge.kinematics.fk import fk_frames
from posebridge.transforms import transform_points
from posebridge.units import FloatArray

__all__ = [
    "REPORT_MESH_TRIANGLES",
    "Mesh",
    "box_mesh",
    "capsule_mesh",
    "cylinder_mesh",
    "revolution_mesh",
    "scene_meshes",
]

IntArray = npt.NDArray[np.int64]

_CYLINDER_SEGMENTS = 32
_CAPSULE_SEGMENTS = 16
_CAPSULE_CAP_RINGS = 4

# the 6 faces of a box as quads of corner indices, corner k at signs (bit 2: x, bit 1: y, bit 0: z)
_BOX_QUADS = np.array(
    [[0, 1, 3, 2], [4, 6, 7, 5], [0, 4, 5, 1], [2, 3, 7, 6], [0, 2, 6, 4], [1, 5, 7, 3]],
    dtype=np.int64,
)
_BOX_TRIANGLES = np.concatenate([_BOX_QUADS[:, [0, 1, 2]], _BOX_QUADS[:, [0, 2, 3]]])
_BOX_SIGNS = (
    np.array([[(k >> 2) & 1, (k >> 1) & 1, k & 1] for k in range(8)], dtype=np.float64) * 2.0 - 1.0
)


@dataclass(frozen=True, eq=False)
class Mesh:
    """A triangle mesh of one solid, world frame.

    Attributes
    ----------
    name : str
    kind : str
        ``fixture``, ``keep-out``, ``pedestal``, ``robot`` or ``tool``.
    vertices : array, shape (V, 3)
        m.
    triangles : array of int64, shape (T, 3)
        Vertex indices.
    """

    name: str
    kind: str
    vertices: FloatArray
    triangles: IntArray


def box_mesh(T_world: npt.ArrayLike, half_extents: npt.ArrayLike) -> tuple[FloatArray, IntArray]:
    """Corners and triangles of a box centred on its frame.

    Parameters
    ----------
    T_world : array-like, shape (4, 4)
        Box centre frame in the world.
    half_extents : array-like, shape (3,)
        Half side lengths along the frame's x, y, z, m.

    Returns
    -------
    vertices : array, shape (8, 3)
    triangles : array of int64, shape (12, 3)
    """
    corners = _BOX_SIGNS * np.asarray(half_extents, dtype=np.float64)
    return transform_points(np.asarray(T_world, dtype=np.float64), corners), _BOX_TRIANGLES.copy()


def _perpendicular_pair(axis: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Two unit vectors completing the unit ``axis`` to a right-handed frame."""
    helper = np.zeros(3)
    helper[int(np.argmin(np.abs(axis)))] = 1.0
    u = np.cross(axis, helper)
    u /= np.linalg.norm(u)
    return u, np.cross(axis, u)


def revolution_mesh(
    centres: npt.ArrayLike,
    radii: npt.ArrayLike,
    u: npt.ArrayLike,
    v: npt.ArrayLike,
    segments: int,
) -> tuple[FloatArray, IntArray]:
    """Mesh of a surface of revolution given as rings about an axis.

    Ring ``r`` holds ``segments`` points ``centres[r] + radii[r] (cos a u + sin a v)``,
    ``a = 2 pi s / segments``; consecutive rings are joined by two triangles
    per segment. A ring of radius 0 closes the surface (a cap or a pole).

    Parameters
    ----------
    centres : array-like, shape (R, 3)
    radii : array-like, shape (R,)
    u, v : array-like, shape (3,)
        Orthonormal vectors perpendicular to the axis.
    segments : int

    Returns
    -------
    vertices : array, shape (R * segments, 3)
    triangles : array of int64, shape (2 (R - 1) segments, 3)
    """
    centres = np.asarray(centres, dtype=np.float64)
    radii = np.asarray(radii, dtype=np.float64)
    angle = 2.0 * np.pi * np.arange(segments) / segments
    circle = np.cos(angle)[:, None] * np.asarray(u) + np.sin(angle)[:, None] * np.asarray(v)
    vertices = (centres[:, None, :] + radii[:, None, None] * circle[None]).reshape(-1, 3)
    ring = np.arange(len(radii) - 1)[:, None] * segments
    s = np.arange(segments)[None, :]
    a = ring + s
    b = ring + (s + 1) % segments
    c = a + segments
    d = b + segments
    triangles = np.concatenate(
        [np.stack([a, b, d], axis=-1).reshape(-1, 3), np.stack([a, d, c], axis=-1).reshape(-1, 3)]
    )
    return vertices, triangles.astype(np.int64)


def cylinder_mesh(
    T_world: npt.ArrayLike, radius: float, half_length: float, *, segments: int = _CYLINDER_SEGMENTS
) -> tuple[FloatArray, IntArray]:
    """Return a closed cylinder centred on its frame, axis along the frame's z (radii 0, r, r, 0).

    Returns
    -------
    vertices : array, shape (4 segments, 3)
    triangles : array of int64, shape (6 segments, 3)
    """
    T = np.asarray(T_world, dtype=np.float64)
    axis = T[:3, 2]
    centres = T[:3, 3] + np.array([-1.0, -1.0, 1.0, 1.0])[:, None] * half_length * axis
    return revolution_mesh(
        centres, [0.0, radius, radius, 0.0], T[:3, 0], T[:3, 1], segments=segments
    )


def capsule_mesh(
    start: npt.ArrayLike,
    end: npt.ArrayLike,
    radius: float,
    *,
    segments: int = _CAPSULE_SEGMENTS,
    cap_rings: int = _CAPSULE_CAP_RINGS,
) -> tuple[FloatArray, IntArray]:
    """Capsule (points within ``radius`` of the segment start–end): a tube and two hemispheres.

    Hemisphere rings sit at polar angles ``phi`` in ``[-pi/2, 0]`` about the
    start and ``[0, pi/2]`` about the end: centre ``p + radius sin(phi) axis``,
    ring radius ``radius cos(phi)``.

    Returns
    -------
    vertices : array, shape (2 (cap_rings + 1) segments, 3)
    triangles : array of int64, shape (2 (2 cap_rings + 1) segments, 3)
    """
    a = np.asarray(start, dtype=np.float64)
    b = np.asarray(end, dtype=np.float64)
    length = float(np.linalg.norm(b - a))
    axis = (b - a) / length if length > 0.0 else np.array([0.0, 0.0, 1.0])
    u, v = _perpendicular_pair(axis)
    phi_start = np.linspace(-0.5 * np.pi, 0.0, cap_rings + 1)
    phi_end = np.linspace(0.0, 0.5 * np.pi, cap_rings + 1)
    centres = np.concatenate(
        [
            a + radius * np.sin(phi_start)[:, None] * axis,
            b + radius * np.sin(phi_end)[:, None] * axis,
        ]
    )
    radii = radius * np.cos(np.concatenate([phi_start, phi_end]))
    return revolution_mesh(centres, radii, u, v, segments=segments)


def _box_meshes(boxes: BoxSet, kind: str) -> list[Mesh]:
    return [
        Mesh(name, kind, *box_mesh(T, half))
        for name, T, half in zip(boxes.names, boxes.T_world, boxes.half_extents, strict=True)
    ]


def _cylinder_meshes(cylinders: CylinderSet, kind: str) -> list[Mesh]:
    return [
        Mesh(name, kind, *cylinder_mesh(T, float(radius), float(half)))
        for name, T, radius, half in zip(
            cylinders.names, cylinders.T_world, cylinders.radius, cylinders.half_length, strict=True
        )
    ]


REPORT_MESH_TRIANGLES = 20_000
"""Triangles the review file draws for all mesh fixtures together (shared by size)."""


def _fixture_meshes(scene: Scene) -> list[Mesh]:
    """Mesh fixtures decimated to their share of :data:`REPORT_MESH_TRIANGLES`, world frame."""
    meshes = scene.meshes
    budgets = split_triangle_budget(
        [mesh.triangle_count for mesh in meshes.meshes], REPORT_MESH_TRIANGLES
    )
    drawn = []
    for name, T, mesh, budget in zip(
        meshes.names, meshes.T_world, meshes.meshes, budgets, strict=True
    ):
        display = decimate_for_display(mesh, max_triangles=max(budget, MIN_TRIANGLE_BUDGET))
        vertices = transform_points(T, display.vertices_m)
        drawn.append(Mesh(name, "fixture", vertices, display.faces))
    return drawn


def scene_meshes(scene: Scene, q: npt.ArrayLike) -> list[Mesh]:
    """Meshes of every solid of the cell with the arm at ``q``, world frame.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,)
        Joint values, rad or m.

    Returns
    -------
    list of Mesh
        Box, cylinder and mesh fixtures (meshes decimated to
        :data:`REPORT_MESH_TRIANGLES`), keep-out zones, the pedestal, the arm's
        link meshes (decimated visual meshes; its capsules for a robot without
        mesh files), then the tool's capsules.
    """
    frames = (
        scene.T_world_base
        @ fk_frames(scene.robot, np.asarray(q, dtype=np.float64)[None], scene.T_flange_tool)[0]
    )
    meshes = _box_meshes(scene.boxes, "fixture") + _cylinder_meshes(scene.cylinders, "fixture")
    meshes += _fixture_meshes(scene)
    meshes += _box_meshes(scene.keep_outs, "keep-out")
    meshes += _cylinder_meshes(scene.pedestal, "pedestal")
    drawings = robot_display_meshes(
        scene.robot, cache=MeshCache.default() if scene.robot.meshes else None
    )
    for drawing in drawings:  # the robot as itself: its link meshes
        vertices = transform_points(frames[drawing.link], drawing.mesh.vertices_m)
        meshes.append(Mesh(drawing.source_link, "robot", vertices, drawing.mesh.faces))
    for capsule in () if drawings else scene.robot.capsules:
        ends = transform_points(frames[capsule.link], np.stack([capsule.start, capsule.end]))
        meshes.append(Mesh(capsule.name, "robot", *capsule_mesh(ends[0], ends[1], capsule.radius)))
    flange = frames[scene.robot.dof + 1]
    tool = scene.tool_capsules
    for name, start, end, radius in zip(tool.names, tool.start, tool.end, tool.radius, strict=True):
        ends = transform_points(flange, np.stack([start, end]))
        meshes.append(Mesh(name, "tool", *capsule_mesh(ends[0], ends[1], float(radius))))
    return meshes
