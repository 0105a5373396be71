"""Invented meshes made in code for the mesh benchmarks: a machine housing and a meshed arm.

* :func:`housing_mesh`: a machine housing as a union of interior-disjoint
  closed boxes (floor plate, roof, back and side walls, a front wall around a
  door opening, an inner table on four legs), each box subdivided uniformly
  (midpoint subdivision keeps every box watertight) until the whole has about
  the asked number of triangles. Boxes touch but never overlap, so the union
  is a closed mesh whose inside is the walls, roof, floor and table.
* :func:`meshed_arm_parts`: the link meshes of an invented seven-link arm
  (elongated bodies: a cylinder with a box housing at each end, two or three
  parts per link), about the asked number of triangles in all.

All dimensions are invented and scale with the given size, so the scenes
follow the robot they are built around.
"""

from __future__ import annotations

import numpy as np

from posebridge.geometry.meshes import TriangleMesh
from posebridge.units import FloatArray

__all__ = ["box_arrays", "housing_boxes", "housing_mesh", "meshed_arm_parts"]


def box_arrays(lo: FloatArray, hi: FloatArray, level: int) -> tuple[FloatArray, np.ndarray]:
    """Return a closed box from corner ``lo`` to ``hi`` (m), subdivided ``level`` times (12 * 4**level triangles).

    Returns
    -------
    vertices : array, shape (V, 3)
    faces : array of int64, shape (12 * 4**level, 3)
    """
    import trimesh

    box = trimesh.creation.box(bounds=np.stack([lo, hi]))
    vertices = np.asarray(box.vertices, dtype=np.float64)
    faces = np.asarray(box.faces, dtype=np.int64)
    for _ in range(level):
        vertices, faces = trimesh.remesh.subdivide(vertices, faces)
    return np.asarray(vertices, dtype=np.float64), np.asarray(faces, dtype=np.int64)


def housing_boxes(size: float) -> list[tuple[FloatArray, FloatArray]]:
    """Corners ``(lo, hi)`` of the housing's boxes, m; the door opening faces ``-x``.

    The housing's front wall stands at ``x = 0.45 size``, it is ``0.9 size``
    deep, ``1.2 size`` wide (centred on ``y = 0``) and ``1.3 size`` high;
    the door is ``0.55 size`` wide and spans ``0.35 size`` to
    ``1.0 size`` in height; the inner table top is at ``0.45 size``.
    """
    wall = 0.03 * size
    x0, x1 = 0.45 * size, 1.35 * size
    y0, y1 = -0.6 * size, 0.6 * size
    z1 = 1.3 * size
    door_y = 0.275 * size
    door_z0, door_z1 = 0.35 * size, 1.0 * size
    table_z = 0.45 * size
    tx0, tx1 = x0 + 0.25 * size, x1 - 0.15 * size
    ty = 0.3 * size
    leg = 0.04 * size
    corners = [
        ((x0, y0, 0.0), (x1, y1, wall)),  # floor plate
        ((x0, y0, z1 - wall), (x1, y1, z1)),  # roof
        ((x1 - wall, y0, wall), (x1, y1, z1 - wall)),  # back wall
        ((x0 + wall, y0, wall), (x1 - wall, y0 + wall, z1 - wall)),  # side wall -y
        ((x0 + wall, y1 - wall, wall), (x1 - wall, y1, z1 - wall)),  # side wall +y
        ((x0, y0, wall), (x0 + wall, -door_y, z1 - wall)),  # front wall beside the door, -y
        ((x0, door_y, wall), (x0 + wall, y1, z1 - wall)),  # front wall beside the door, +y
        ((x0, -door_y, wall), (x0 + wall, door_y, door_z0)),  # below the door
        ((x0, -door_y, door_z1), (x0 + wall, door_y, z1 - wall)),  # above the door
        ((tx0, -ty, table_z - wall), (tx1, ty, table_z)),  # table top
    ]
    for lx in (tx0, tx1 - leg):
        for ly in (-ty, ty - leg):
            corners.append(((lx, ly, wall), (lx + leg, ly + leg, table_z - wall)))
    return [(np.array(lo, dtype=float), np.array(hi, dtype=float)) for lo, hi in corners]


def _level_for(lo: FloatArray, hi: FloatArray, edge: float) -> int:
    """Subdivisions that bring a box's longest edge to at most ``edge``."""
    longest = float(np.max(hi - lo))
    return max(0, int(np.ceil(np.log2(max(longest / edge, 1.0)))))


def housing_mesh(size: float, *, triangles: int = 100_000) -> TriangleMesh:
    """Return the housing of :func:`housing_boxes` as one closed mesh of about ``triangles`` triangles.

    Parameters
    ----------
    size : float
        m (the robot's reach is a good choice).
    triangles : int, keyword-only
        Target triangle count (the result lies within a factor of about 2).

    Returns
    -------
    TriangleMesh
    """
    boxes = housing_boxes(size)
    edge = size
    for _ in range(40):
        total = sum(12 * 4 ** _level_for(lo, hi, edge) for lo, hi in boxes)
        if total >= triangles:
            break
        edge *= 0.8
    vertices: list[FloatArray] = []
    faces: list[np.ndarray] = []
    offset = 0
    for lo, hi in boxes:
        v, f = box_arrays(lo, hi, _level_for(lo, hi, edge))
        vertices.append(v)
        faces.append(f + offset)
        offset += v.shape[0]
    return TriangleMesh.from_arrays(
        np.concatenate(vertices), np.concatenate(faces), name="generated housing"
    )


def meshed_arm_parts(
    link_lengths: FloatArray, *, triangles: int = 200_000, parts_per_link: int = 3
) -> list[list[tuple[FloatArray, np.ndarray]]]:
    """Link meshes of an invented arm: per link, ``parts_per_link`` closed parts along its x axis.

    Link ``i`` spans ``0 .. link_lengths[i]`` along its x axis: a cylinder of
    radius ``0.12 L`` between two box housings at its ends (the third part; with
    two parts, the end housings only). The radii and housings are invented.

    Parameters
    ----------
    link_lengths : array, shape (L,)
        m.
    triangles : int, keyword-only
        Target total triangle count.
    parts_per_link : int, keyword-only
        2 or 3.

    Returns
    -------
    parts : list (one per link) of lists of ``(vertices (V, 3) m, faces (F, 3))``
    """
    import trimesh

    lengths = np.asarray(link_lengths, dtype=float)
    per_part = triangles / (len(lengths) * parts_per_link)
    level = max(0, round(np.log(per_part / 12.0) / np.log(4.0)))
    sections = max(8, int(np.sqrt(per_part / 4.0)))
    links = []
    for length in lengths:
        radius = 0.12 * length
        parts = []
        for end in (0.0, length):
            lo = np.array([end - 0.16 * length, -0.16 * length, -0.14 * length])
            hi = np.array([end + 0.16 * length, 0.16 * length, 0.14 * length])
            parts.append(box_arrays(lo, hi, level))
        if parts_per_link == 3:
            body = trimesh.creation.cylinder(
                radius=radius,
                segment=np.array([[0.1 * length, 0.0, 0.0], [0.9 * length, 0.0, 0.0]]),
                sections=sections,
            )
            v, f = np.asarray(body.vertices), np.asarray(body.faces)
            while f.shape[0] * 4 <= per_part:
                v, f = trimesh.remesh.subdivide(v, f)
            parts.append((np.asarray(v, dtype=float), np.asarray(f, dtype=np.int64)))
        links.append(parts)
    return links
