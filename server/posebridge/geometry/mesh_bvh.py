"""Exact distances between capsules (or points) and triangle meshes through a bounding-volume hierarchy.

A mesh obstacle is its triangles in its own frame plus a pose ``T_world_mesh``.
Queries move the capsule's segment into the mesh frame and search a binary
tree of axis-aligned boxes over the triangles; the minimum is exact (a node
is skipped only when a lower bound of its distance is not below the best
distance found so far, or the distance asked for).

Hierarchy (:func:`MeshBVH.build`): top-down, each node's triangles sorted by
centroid along the longest axis of their centroids' bounds and split at the
median (object median split; Ericson, *Real-Time Collision Detection*, 2004,
sec. 6.2), leaves of at most :data:`LEAF_SIZE` triangles. Children are
stored next to each other and the arrays are flat, so numba kernels read them
directly; all meshes of a scene are concatenated in one :class:`MeshTable`.

Traversal: depth first with an explicit stack, the nearer child first (its
lower bound decides); a node's lower bound for a segment is first the larger
of the gap between the segment's and the node's axis-aligned boxes and the
distance from the node's centre to the segment minus its half diagonal, and,
where that is below the best distance so far, the exact segment-box distance
(measured on the 100k-triangle housing: a quarter of the node visits and a
twelfth of the triangle tests of the cheap bound alone; the collide-only
search keeps the cheap bound, which is faster when any triangle within the
margin ends the search); for a point, the exact point-box distance. Inside a leaf, the distance of the segment to a
triangle's plane bounds the triangle before the exact segment-triangle test
(:mod:`posebridge.geometry.triangle_distance`).

Sign (closed meshes only, see :mod:`posebridge.geometry.meshes`): a point is
inside when a ray from it crosses the surface more often outward than inward
(the winding number along the ray; overlapping closed bodies count as
inside). A ray that passes within a relative 1e-9 of a triangle's edge or
vertex, runs in a triangle's plane, or starts on the surface is degenerate and
the next of :data:`RAY_DIRECTIONS` is tried; if every direction is degenerate
the point counts as inside (conservative). Points outside the mesh's bounding
box are outside without a ray. An inside grid answers most points without a
ray: the bounding box is cut into cubic cells (:data:`GRID_CELLS` along its
longest side); a cell that no triangle's bounding box touches lies wholly on
one side of the surface, so the ray test of its centre, done once when the
hierarchy is built, holds for every point in it. Cells that triangles touch
(or whose centre ray was degenerate) fall back to the ray test.

Signed distance of a capsule (segment ``a b``, radius ``r``) to a mesh, the
value every kernel returns, ``d = sd - r``:

* segment apart from the surface and outside (or the mesh open):
  ``sd = u``, the exact segment-surface distance; ``d`` is exact, also when
  negative (the surface comes within the radius).
* segment crossing the surface, or wholly inside a closed mesh:
  ``sd = -e`` with ``e >= 0`` the larger depth of the segment's end points
  that are inside (their exact distance to the surface; 0 if neither is).
  Then ``d = -(r + e) <= -r``: a **penetration depth estimate**. The true
  signed distance ``min_t sd(a + t (b - a)) - r`` may be lower (the deepest
  point of the axis may lie between the end points), so ``e`` under-states
  the depth, but ``d`` is negative for every capsule that meets the solid:
  a collision is never reported as clear.

Witness points follow :mod:`posebridge.geometry.distance`: ``q`` on the
surface, ``p - r n`` on the capsule with ``p`` the segment point and ``n`` the
unit vector from ``q`` to ``p`` (the triangle's normal when they coincide;
pointing out of the solid when ``p`` is inside).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.geometry.distance import (
    _axpy,
    _dot,
    _segment_box,
    _sub,
    _to_local,
    _to_world_point,
)
from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.triangle_distance import (
    _plane_gap,
    _point_triangle,
    _segment_triangle,
    triangle_planes,
)
from posebridge.transforms import TransformError, check_transform
from posebridge.units import BoolArray, FloatArray

if TYPE_CHECKING:
    from posebridge.geometry.meshes import TriangleMesh

__all__ = [
    "GRID_CELLS",
    "LEAF_SIZE",
    "RAY_DIRECTIONS",
    "MeshBVH",
    "MeshDistanceResult",
    "MeshTable",
    "closest_points_capsule_mesh",
    "collision_capsules_mesh",
    "points_inside_mesh",
    "signed_distance_points_mesh",
]

IntArray = npt.NDArray[np.int64]

LEAF_SIZE = 4
"""Most triangles in a leaf of the hierarchy."""

GRID_CELLS = 32
"""Cells of the inside grid along the longest side of a closed mesh's bounding box."""
_OUTSIDE = 0
_INSIDE = 1
_MIXED = 2

_DIRECTIONS = np.array(
    [
        [0.5773502691896258, 0.3090169943749474, 0.7557613140761708],
        [-0.2672612419124244, 0.8017837257372732, -0.5345224838248488],
        [0.8164965809277261, -0.4082482904638631, -0.4082482904638631],
        [-0.3713906763541037, -0.5570860145311556, 0.7427813527082074],
        [0.1543033499620919, 0.6172133998483676, 0.7715167498104596],
        [-0.7071067811865476, 0.1, 0.7],
    ]
)
RAY_DIRECTIONS = _DIRECTIONS / np.linalg.norm(_DIRECTIONS, axis=1, keepdims=True)
"""Unit directions tried in turn by the inside test (none along an axis or in an axis plane)."""

_EDGE_TOLERANCE = 1e-9
"""Barycentric margin within which a ray counts as hitting an edge or vertex (degenerate)."""
_LENGTH_TOLERANCE = 1e-9
"""Length tolerance of the inside test relative to the mesh's bounding-box diagonal."""


# --- hierarchy build ----------------------------------------------------------------------


@nb.njit(cache=True)
def _build_hierarchy(tri_lo, tri_hi, centroid, leaf_size):
    """Object-median hierarchy over boxes ``tri_lo``/``tri_hi`` (T, 3) with centroids (T, 3).

    Returns ``(order, box, link, depth)``: the triangle order (leaves hold
    ``order[first:first + count]``), node boxes (N, 6) ``lo, hi``, node
    links (N, 2) ``(first, count)`` with ``count = 0`` for an inner node
    whose children are ``first`` and ``first + 1``, and the tree depth.
    """
    n = tri_lo.shape[0]
    order = np.arange(n)
    capacity = max(2 * n, 1)
    box = np.empty((capacity, 6))
    link = np.zeros((capacity, 2), dtype=np.int64)
    stack = np.empty((128, 4), dtype=np.int64)  # node, start, end, level
    stack[0, 0] = 0
    stack[0, 1] = 0
    stack[0, 2] = n
    stack[0, 3] = 1
    top = 1
    nodes = 1
    depth = 1
    while top > 0:
        top -= 1
        node = stack[top, 0]
        start = stack[top, 1]
        end = stack[top, 2]
        level = stack[top, 3]
        depth = max(depth, level)
        lo = np.full(3, np.inf)
        hi = np.full(3, -np.inf)
        clo = np.full(3, np.inf)
        chi = np.full(3, -np.inf)
        for i in range(start, end):
            t = order[i]
            for r in range(3):
                lo[r] = min(lo[r], tri_lo[t, r])
                hi[r] = max(hi[r], tri_hi[t, r])
                clo[r] = min(clo[r], centroid[t, r])
                chi[r] = max(chi[r], centroid[t, r])
        for r in range(3):
            box[node, r] = lo[r]
            box[node, 3 + r] = hi[r]
        if end - start <= leaf_size:
            link[node, 0] = start
            link[node, 1] = end - start
            continue
        axis = 0
        for r in range(1, 3):
            if chi[r] - clo[r] > chi[axis] - clo[axis]:
                axis = r
        part = order[start:end].copy()
        keys = np.empty(end - start)
        for i in range(end - start):
            keys[i] = centroid[part[i], axis]
        ranked = np.argsort(keys, kind="mergesort")
        for i in range(end - start):
            order[start + i] = part[ranked[i]]
        middle = (start + end) // 2
        left = nodes
        nodes += 2
        link[node, 0] = left
        link[node, 1] = 0
        stack[top, 0] = left
        stack[top, 1] = start
        stack[top, 2] = middle
        stack[top, 3] = level + 1
        stack[top + 1, 0] = left + 1
        stack[top + 1, 1] = middle
        stack[top + 1, 2] = end
        stack[top + 1, 3] = level + 1
        top += 2
    return order, box[:nodes].copy(), link[:nodes].copy(), depth


@dataclass(frozen=True, eq=False)
class MeshBVH:
    """The hierarchy of one mesh in its own frame (flat arrays, module docstring).

    Attributes
    ----------
    name : str
    triangles : array, shape (T, 13)
        Per triangle in leaf order: ``v0, v1, v2`` (9 values, m), the unit
        normal ``n`` and ``n . v0`` (zero for degenerate triangles).
    face_index : array of int64, shape (T,)
        Row of the mesh's ``faces`` each stored triangle came from.
    box : array, shape (N, 6)
        Node boxes ``(lo, hi)``, m; node 0 is the root.
    link : array of int64, shape (N, 2)
        ``(first, count)``: a leaf holds triangles ``first .. first + count - 1``;
        an inner node (``count = 0``) has children ``first`` and ``first + 1``.
    depth : int
        Levels of the tree.
    is_closed : bool
        Signed distances (module docstring of :mod:`posebridge.geometry.meshes`).
    tolerance : float
        Length tolerance of the inside test, m.
    grid_frame : array, shape (4,)
        Inside grid: corner of cell 0 (3 values, m) and the cell side, m.
    grid_shape : array of int64, shape (3,)
        Cells along x, y, z (all 1 with one outside-unknown cell for an open mesh).
    grid : array of int8, shape (nx * ny * nz,)
        Per cell (index ``(i * ny + j) * nz + k``): 0 outside, 1 inside,
        2 unknown (ask the ray test).
    """

    name: str
    triangles: FloatArray
    face_index: IntArray
    box: FloatArray
    link: IntArray
    depth: int
    is_closed: bool
    tolerance: float
    grid_frame: FloatArray
    grid_shape: IntArray
    grid: npt.NDArray[np.int8]

    @classmethod
    def build(cls, mesh: TriangleMesh, *, leaf_size: int = LEAF_SIZE) -> MeshBVH:
        """Build the hierarchy of a mesh (module docstring); about 0.1 s per 100k triangles.

        Parameters
        ----------
        mesh : TriangleMesh
        leaf_size : int, keyword-only
            Most triangles per leaf (>= 1).

        Returns
        -------
        MeshBVH
        """
        if leaf_size < 1:
            raise GeometryInputError(f"leaf_size: expected an integer >= 1, got {leaf_size}")
        corners = mesh.triangles
        order, box, link, depth = _build_hierarchy(
            np.ascontiguousarray(corners.min(axis=1)),
            np.ascontiguousarray(corners.max(axis=1)),
            np.ascontiguousarray(corners.mean(axis=1)),
            int(leaf_size),
        )
        ordered = corners[order]
        triangles = np.empty((ordered.shape[0], 13))
        triangles[:, :9] = ordered.reshape(-1, 9)
        triangles[:, 9:] = triangle_planes(ordered)
        diagonal = float(np.linalg.norm(box[0, 3:] - box[0, :3]))
        tolerance = _LENGTH_TOLERANCE * max(diagonal, 1e-3)
        frame = np.array([*box[0, :3], 1.0])
        shape = np.ones(3, dtype=np.int64)
        grid = np.full(1, _MIXED, dtype=np.int8)
        if mesh.is_closed:
            extent = box[0, 3:] - box[0, :3]
            cell = max(float(extent.max()) / GRID_CELLS, tolerance)
            shape = np.maximum(np.ceil(extent / cell).astype(np.int64), 1)
            frame = np.array([*box[0, :3], cell])
            grid = _build_grid(
                np.ascontiguousarray(ordered.min(axis=1)),
                np.ascontiguousarray(ordered.max(axis=1)),
                frame,
                shape,
                box,
                link,
                triangles,
                tolerance,
                np.empty(2 * int(depth) + 4, dtype=np.int64),
            )
        return cls(
            name=mesh.name,
            triangles=triangles,
            face_index=order.astype(np.int64),
            box=box,
            link=link,
            depth=int(depth),
            is_closed=mesh.is_closed,
            tolerance=tolerance,
            grid_frame=frame,
            grid_shape=shape,
            grid=grid,
        )

    @property
    def triangle_count(self) -> int:
        """Number of triangles ``T``."""
        return int(self.triangles.shape[0])

    @cached_property
    def table(self) -> MeshTable:
        """The mesh alone as a :class:`MeshTable` (for single-mesh queries)."""
        return MeshTable.pack([self])


@dataclass(frozen=True, eq=False)
class MeshTable:
    """Several hierarchies concatenated for the kernels (mesh ``i`` is ``meshes[i]``).

    Attributes
    ----------
    root : array of int64, shape (M,)
        Root node of each mesh in ``box``/``link``.
    is_closed : array of bool, shape (M,)
    tolerance : array, shape (M,)
    box, link, triangles : arrays
        :class:`MeshBVH`'s arrays one after the other; node links and
        triangle indices are global.
    grid_frame : array, shape (M, 4)
    grid_index : array of int64, shape (M, 4)
        Offset of each mesh's cells in ``grid`` and its grid shape.
    grid : array of int8
        The inside grids one after the other.
    stack_size : int
        Stack entries any traversal needs.
    """

    root: IntArray
    is_closed: BoolArray
    tolerance: FloatArray
    box: FloatArray
    link: IntArray
    triangles: FloatArray
    grid_frame: FloatArray
    grid_index: IntArray
    grid: npt.NDArray[np.int8]
    stack_size: int

    @classmethod
    def pack(cls, meshes: Sequence[MeshBVH]) -> MeshTable:
        """Concatenate hierarchies (an empty table for no meshes).

        Parameters
        ----------
        meshes : sequence of MeshBVH

        Returns
        -------
        MeshTable
        """
        roots = []
        boxes = [np.empty((0, 6))]
        links = [np.empty((0, 2), dtype=np.int64)]
        triangles = [np.empty((0, 13))]
        grids = [np.empty(0, dtype=np.int8)]
        grid_index = []
        node_offset = 0
        triangle_offset = 0
        grid_offset = 0
        for mesh in meshes:
            roots.append(node_offset)
            link = mesh.link.copy()
            leaf = link[:, 1] > 0
            link[leaf, 0] += triangle_offset
            link[~leaf, 0] += node_offset
            boxes.append(mesh.box)
            links.append(link)
            triangles.append(mesh.triangles)
            grids.append(mesh.grid)
            grid_index.append([grid_offset, *mesh.grid_shape])
            node_offset += mesh.box.shape[0]
            triangle_offset += mesh.triangles.shape[0]
            grid_offset += mesh.grid.shape[0]
        depth = max((mesh.depth for mesh in meshes), default=1)
        return cls(
            root=np.array(roots, dtype=np.int64),
            is_closed=np.array([mesh.is_closed for mesh in meshes], dtype=bool),
            tolerance=np.array([mesh.tolerance for mesh in meshes], dtype=np.float64),
            box=np.ascontiguousarray(np.concatenate(boxes)),
            link=np.ascontiguousarray(np.concatenate(links)),
            triangles=np.ascontiguousarray(np.concatenate(triangles)),
            grid_frame=np.array([mesh.grid_frame for mesh in meshes], dtype=np.float64).reshape(
                -1, 4
            ),
            grid_index=np.array(grid_index, dtype=np.int64).reshape(-1, 4),
            grid=np.ascontiguousarray(np.concatenate(grids)),
            stack_size=2 * depth + 4,
        )

    @property
    def kernel_inputs(self) -> tuple[npt.NDArray[np.generic], ...]:
        """Return the tuple the kernels read.

        ``(root, is_closed, tolerance, box, link, triangles, grid_frame, grid_index, grid)``.
        """
        return (
            self.root,
            self.is_closed,
            self.tolerance,
            self.box,
            self.link,
            self.triangles,
            self.grid_frame,
            self.grid_index,
            self.grid,
        )

    def stack(self) -> tuple[IntArray, FloatArray]:
        """Fresh traversal scratch: node indices and their lower bounds."""
        return np.empty(self.stack_size, dtype=np.int64), np.empty(self.stack_size)


# --- kernels: bounds ----------------------------------------------------------------------


@nb.njit(cache=True, inline="always")
def _segment_box_bound(a, b, box, node):
    """Lower bound of the distance from segment ``a b`` to node ``node``'s box (module docstring)."""
    gap = 0.0
    centre_distance2 = 0.0
    half2 = 0.0
    d = _sub(b, a)
    dd = _dot(d, d)
    lo0 = box[node, 0]
    lo1 = box[node, 1]
    lo2 = box[node, 2]
    hi0 = box[node, 3]
    hi1 = box[node, 4]
    hi2 = box[node, 5]
    c = (0.5 * (lo0 + hi0), 0.5 * (lo1 + hi1), 0.5 * (lo2 + hi2))
    for r, lo, hi in ((0, lo0, hi0), (1, lo1, hi1), (2, lo2, hi2)):
        s_lo = min(a[r], b[r])
        s_hi = max(a[r], b[r])
        if s_lo > hi:
            gap += (s_lo - hi) * (s_lo - hi)
        elif s_hi < lo:
            gap += (lo - s_hi) * (lo - s_hi)
        h = 0.5 * (hi - lo)
        half2 += h * h
    t = 0.0
    if dd > 0.0:
        t = min(max(_dot(_sub(c, a), d) / dd, 0.0), 1.0)
    x = _axpy(a, t, d)
    w = _sub(x, c)
    centre_distance2 = _dot(w, w)
    sphere = math.sqrt(centre_distance2) - math.sqrt(half2)
    return max(math.sqrt(gap), sphere)


@nb.njit(cache=True, inline="always")
def _segment_node_bound(a, b, box, node, best, cheap_only):
    """Lower bound of the segment-node distance, exact where the cheap bound is below ``best``.

    The exact distance is the segment-box distance of
    :func:`posebridge.geometry.distance._segment_box` (Ericson 2004, ch. 5) in
    the box's centre frame; it prunes the many near-equidistant leaves along a
    subdivided wall that the cheap bound lets through. ``cheap_only`` skips
    it (the collide-only search, which stops at the first triangle found and
    gains nothing from the better order: three times faster there).
    """
    cheap = _segment_box_bound(a, b, box, node)
    if cheap >= best or cheap_only:
        return cheap
    centre = (
        0.5 * (box[node, 0] + box[node, 3]),
        0.5 * (box[node, 1] + box[node, 4]),
        0.5 * (box[node, 2] + box[node, 5]),
    )
    half = (
        0.5 * (box[node, 3] - box[node, 0]),
        0.5 * (box[node, 4] - box[node, 1]),
        0.5 * (box[node, 5] - box[node, 2]),
    )
    exact = _segment_box(_sub(a, centre), _sub(b, centre), half)[0]
    return max(exact, cheap)


@nb.njit(cache=True, inline="always")
def _point_box_bound(x, box, node):
    """Exact distance from point ``x`` to node ``node``'s box (0 inside)."""
    gap = 0.0
    for r in range(3):
        lo = box[node, r]
        hi = box[node, 3 + r]
        if x[r] < lo:
            gap += (lo - x[r]) * (lo - x[r])
        elif x[r] > hi:
            gap += (x[r] - hi) * (x[r] - hi)
    return math.sqrt(gap)


@nb.njit(cache=True, inline="always")
def _triangle(triangles, i):
    """Row ``i`` as ``(v0, v1, v2, n, offset)`` tuples."""
    return (
        (triangles[i, 0], triangles[i, 1], triangles[i, 2]),
        (triangles[i, 3], triangles[i, 4], triangles[i, 5]),
        (triangles[i, 6], triangles[i, 7], triangles[i, 8]),
        (triangles[i, 9], triangles[i, 10], triangles[i, 11]),
        triangles[i, 12],
    )


# --- kernels: searches --------------------------------------------------------------------


@nb.njit(cache=True)
def _segment_search(a, b, root, box, link, triangles, limit, first_only, stack_node, stack_bound):
    """Nearest triangle to segment ``a b`` (mesh frame) closer than ``limit``.

    Returns ``(found, distance, p, q, triangle)``; with ``first_only`` the
    search stops at the first triangle closer than ``limit``.
    """
    best = limit
    found = False
    nan = (math.nan, math.nan, math.nan)
    best_p = nan
    best_q = nan
    best_t = -1
    stack_node[0] = root
    stack_bound[0] = _segment_node_bound(a, b, box, root, best, first_only)
    top = 1
    while top > 0:
        top -= 1
        node = stack_node[top]
        if stack_bound[top] >= best:
            continue
        first = link[node, 0]
        count = link[node, 1]
        if count > 0:
            for i in range(first, first + count):
                v0, v1, v2, n, offset = _triangle(triangles, i)
                if _plane_gap(a, b, n, offset) >= best:
                    continue
                d, p, q = _segment_triangle(a, b, v0, v1, v2, n, offset)
                if d < best:
                    best = d
                    best_p = p
                    best_q = q
                    best_t = i
                    found = True
                    if first_only:
                        return found, best, best_p, best_q, best_t
            continue
        near_bound = _segment_node_bound(a, b, box, first, best, first_only)
        far_bound = _segment_node_bound(a, b, box, first + 1, best, first_only)
        near = first
        far = first + 1
        if far_bound < near_bound:
            near, far = far, near
            near_bound, far_bound = far_bound, near_bound
        if far_bound < best:
            stack_node[top] = far
            stack_bound[top] = far_bound
            top += 1
        if near_bound < best:
            stack_node[top] = near
            stack_bound[top] = near_bound
            top += 1
    return found, best, best_p, best_q, best_t


@nb.njit(cache=True)
def _point_search(x, root, box, link, triangles, stack_node, stack_bound):
    """Nearest surface point to point ``x`` (mesh frame): ``(distance, q, triangle)``."""
    best = math.inf
    best_q = (math.nan, math.nan, math.nan)
    best_t = -1
    stack_node[0] = root
    stack_bound[0] = _point_box_bound(x, box, root)
    top = 1
    while top > 0:
        top -= 1
        node = stack_node[top]
        if stack_bound[top] >= best:
            continue
        first = link[node, 0]
        count = link[node, 1]
        if count > 0:
            for i in range(first, first + count):
                v0, v1, v2, n, _ = _triangle(triangles, i)
                degenerate = n[0] == 0.0 and n[1] == 0.0 and n[2] == 0.0
                q = _point_triangle(x, v0, v1, v2, degenerate)
                w = _sub(x, q)
                d = math.sqrt(_dot(w, w))
                if d < best:
                    best = d
                    best_q = q
                    best_t = i
            continue
        near_bound = _point_box_bound(x, box, first)
        far_bound = _point_box_bound(x, box, first + 1)
        near = first
        far = first + 1
        if far_bound < near_bound:
            near, far = far, near
            near_bound, far_bound = far_bound, near_bound
        if far_bound < best:
            stack_node[top] = far
            stack_bound[top] = far_bound
            top += 1
        if near_bound < best:
            stack_node[top] = near
            stack_bound[top] = near_bound
            top += 1
    return best, best_q, best_t


@nb.njit(cache=True, inline="always")
def _ray_hits_box(x, inverse, box, node):
    """Slab test: tell whether the ray ``x + s dir`` (``s >= 0``, ``inverse = 1 / dir``) meets the node's box."""
    enter = 0.0
    leave = math.inf
    for r in range(3):
        s1 = (box[node, r] - x[r]) * inverse[r]
        s2 = (box[node, 3 + r] - x[r]) * inverse[r]
        if s1 > s2:
            s1, s2 = s2, s1
        enter = max(enter, s1)
        leave = min(leave, s2)
    return enter <= leave


@nb.njit(cache=True)
def _ray_winding(x, direction, root, box, link, triangles, tolerance, stack_node):
    """Winding number of the closed surface about ``x`` along one ray (module docstring).

    Returns ``1`` (inside), ``0`` (outside) or ``-1`` (degenerate ray).
    Moeller and Trumbore (1997), "Fast, minimum storage ray-triangle intersection".
    """
    inverse = (1.0 / direction[0], 1.0 / direction[1], 1.0 / direction[2])
    winding = 0
    stack_node[0] = root
    top = 1
    while top > 0:
        top -= 1
        node = stack_node[top]
        if not _ray_hits_box(x, inverse, box, node):
            continue
        first = link[node, 0]
        count = link[node, 1]
        if count == 0:
            stack_node[top] = first
            stack_node[top + 1] = first + 1
            top += 2
            continue
        for i in range(first, first + count):
            v0, v1, v2, n, offset = _triangle(triangles, i)
            if n[0] == 0.0 and n[1] == 0.0 and n[2] == 0.0:
                continue  # zero area: its edges are its neighbours' edges
            e1 = _sub(v1, v0)
            e2 = _sub(v2, v0)
            height = _dot(n, x) - offset
            slope = _dot(n, direction)
            if abs(slope) <= _EDGE_TOLERANCE:
                if abs(height) <= tolerance:
                    return -1  # the ray runs in the triangle's plane
                continue
            s = -height / slope
            if s < -tolerance:
                continue
            hit = _axpy(x, s, direction)
            # Barycentric coordinates of the hit in the triangle (areas against the normal).
            area = _dot(n, _cross3(e1, e2))
            u = _dot(n, _cross3(_sub(v1, hit), _sub(v2, hit))) / area
            v = _dot(n, _cross3(_sub(v2, hit), _sub(v0, hit))) / area
            w = 1.0 - u - v
            if u < -_EDGE_TOLERANCE or v < -_EDGE_TOLERANCE or w < -_EDGE_TOLERANCE:
                continue
            if s <= tolerance:
                return -1  # starts on the surface
            if u <= _EDGE_TOLERANCE or v <= _EDGE_TOLERANCE or w <= _EDGE_TOLERANCE:
                return -1  # through an edge or a vertex
            winding += 1 if slope > 0.0 else -1
    return 1 if winding != 0 else 0


@nb.njit(cache=True, inline="always")
def _cross3(a, b):
    return (a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0])


@nb.njit(cache=True)
def _ray_contains(x, root, box, link, triangles, tolerance, stack_node):
    """Ray winding test of ``x`` over :data:`RAY_DIRECTIONS`: inside, outside, or ``-1`` undecided."""
    for k in range(RAY_DIRECTIONS.shape[0]):
        direction = (RAY_DIRECTIONS[k, 0], RAY_DIRECTIONS[k, 1], RAY_DIRECTIONS[k, 2])
        status = _ray_winding(x, direction, root, box, link, triangles, tolerance, stack_node)
        if status >= 0:
            return status
    return -1


@nb.njit(cache=True)
def _build_grid(tri_lo, tri_hi, frame, shape, box, link, triangles, tolerance, stack_node):
    """Build the inside grid (module docstring): cells touched by triangle boxes unknown, the rest by ray."""
    nx, ny, nz = shape[0], shape[1], shape[2]
    grid = np.zeros(nx * ny * nz, dtype=np.int8)
    cell = frame[3]
    for t in range(tri_lo.shape[0]):
        lo = np.empty(3, dtype=np.int64)
        hi = np.empty(3, dtype=np.int64)
        for r in range(3):
            lo[r] = max(math.floor((tri_lo[t, r] - tolerance - frame[r]) / cell), 0)
            hi[r] = min(math.floor((tri_hi[t, r] + tolerance - frame[r]) / cell), shape[r] - 1)
        for i in range(lo[0], hi[0] + 1):
            for j in range(lo[1], hi[1] + 1):
                for k in range(lo[2], hi[2] + 1):
                    grid[(i * ny + j) * nz + k] = _MIXED
    for i in range(nx):
        for j in range(ny):
            for k in range(nz):
                index = (i * ny + j) * nz + k
                if grid[index] == _MIXED:
                    continue
                centre = (
                    frame[0] + (i + 0.5) * cell,
                    frame[1] + (j + 0.5) * cell,
                    frame[2] + (k + 0.5) * cell,
                )
                status = _ray_contains(centre, 0, box, link, triangles, tolerance, stack_node)
                grid[index] = _MIXED if status < 0 else (_INSIDE if status == 1 else _OUTSIDE)
    return grid


@nb.njit(cache=True)
def _contains(x, mesh, meshes, stack_node):
    """Whether point ``x`` (mesh frame) is inside closed mesh ``mesh`` (module docstring)."""
    root_of, _, tolerance_of, box, link, triangles, grid_frame, grid_index, grid = meshes
    root = root_of[mesh]
    tolerance = tolerance_of[mesh]
    for r in range(3):
        if x[r] < box[root, r] - tolerance or x[r] > box[root, 3 + r] + tolerance:
            return False
    cell = grid_frame[mesh, 3]
    i = min(max(int((x[0] - grid_frame[mesh, 0]) / cell), 0), grid_index[mesh, 1] - 1)
    j = min(max(int((x[1] - grid_frame[mesh, 1]) / cell), 0), grid_index[mesh, 2] - 1)
    k = min(max(int((x[2] - grid_frame[mesh, 2]) / cell), 0), grid_index[mesh, 3] - 1)
    status = grid[grid_index[mesh, 0] + (i * grid_index[mesh, 2] + j) * grid_index[mesh, 3] + k]
    if status != _MIXED:
        return status == _INSIDE
    return _ray_contains(x, root, box, link, triangles, tolerance, stack_node) != 0


@nb.njit(cache=True, inline="always")
def _unit_normal(triangles, i):
    n = (triangles[i, 9], triangles[i, 10], triangles[i, 11])
    if n[0] == 0.0 and n[1] == 0.0 and n[2] == 0.0:
        return (0.0, 0.0, 1.0)
    return n


@nb.njit(cache=True)
def _deeper_end(a, b, mesh, meshes, stack_node, stack_bound):
    """Return the end point of ``a b`` deepest inside closed mesh ``mesh``: ``(depth, p, q)`` (``depth = 0``: neither inside)."""
    root = meshes[0][mesh]
    box, link, triangles = meshes[3], meshes[4], meshes[5]
    depth = 0.0
    p = a
    q = a
    for end in (a, b):
        if _contains(end, mesh, meshes, stack_node):
            d, nearest, _ = _point_search(end, root, box, link, triangles, stack_node, stack_bound)
            if d > depth:
                depth = d
                p = end
                q = nearest
    return depth, p, q


@nb.njit(cache=True)
def _segment_mesh(a, b, mesh, meshes, needed_below, first_only, stack_node, stack_bound):
    """Signed distance of segment ``a b`` (mesh frame) to mesh ``mesh``: ``(sd, p, q, n)``.

    Meaning of ``sd`` and the witnesses in the module docstring. The caller
    needs the value only if it is below ``needed_below``: when the segment is
    outside and no triangle is closer, ``max(needed_below, tolerance)`` is
    returned with NaN points. With ``first_only`` (and ``needed_below`` above
    the mesh's length tolerance) any value below ``needed_below`` may be
    returned (the first triangle found closer).

    A segment within the length tolerance of the surface counts as crossing
    it (a crossing through an edge comes out as a rounding-size distance);
    then, and for a segment whose start is inside, the depths of the end
    points that are inside decide (:func:`_deeper_end`).
    """
    root = meshes[0][mesh]
    tolerance = meshes[2][mesh]
    box, link, triangles = meshes[3], meshes[4], meshes[5]
    limit = max(needed_below, tolerance)
    early = first_only and needed_below > tolerance
    found, u, p, q, t = _segment_search(
        a, b, root, box, link, triangles, limit, early, stack_node, stack_bound
    )
    if found and early:
        return u, p, q, _unit_direction(p, q, triangles, t)
    if meshes[1][mesh]:
        near = found and u <= tolerance
        if near or _contains(a, mesh, meshes, stack_node):
            depth, pe, qe = _deeper_end(a, b, mesh, meshes, stack_node, stack_bound)
            if depth > 0.0:
                return -depth, pe, qe, _scale(_sub(qe, pe), 1.0 / depth)
            if near:
                return 0.0, p, q, _unit_normal(triangles, t)
    if not found:
        nan = (math.nan, math.nan, math.nan)
        return limit, nan, nan, nan
    return u, p, q, _unit_direction(p, q, triangles, t)
    if meshes[1][mesh]:
        if found and u == 0.0:
            depth, pe, qe = _deeper_end(a, b, mesh, meshes, stack_node, stack_bound)
            if depth > 0.0:
                return -depth, pe, qe, _scale(_sub(qe, pe), 1.0 / depth)
            return 0.0, p, q, _unit_normal(triangles, t)
        if _contains(a, mesh, meshes, stack_node):
            depth_a, qa, _ = _point_search(a, root, box, link, triangles, stack_node, stack_bound)
            depth_b, qb, _ = _point_search(b, root, box, link, triangles, stack_node, stack_bound)
            if depth_b > depth_a:
                return -depth_b, b, qb, _scale(_sub(qb, b), 1.0 / depth_b)
            return -depth_a, a, qa, _scale(_sub(qa, a), 1.0 / depth_a)
    if not found:
        return limit, nan, nan, nan
    return u, p, q, _unit_direction(p, q, triangles, t)


@nb.njit(cache=True, inline="always")
def _scale(v, s):
    return (v[0] * s, v[1] * s, v[2] * s)


@nb.njit(cache=True, inline="always")
def _unit_direction(p, q, triangles, t):
    """``(p - q) / |p - q|``, or the triangle's normal where they coincide."""
    w = _sub(p, q)
    length = math.sqrt(_dot(w, w))
    if length > 0.0:
        return _scale(w, 1.0 / length)
    return _unit_normal(triangles, t)


@nb.njit(cache=True, inline="always")
def _capsule_mesh(a, b, radius, R, t, mesh, meshes, needed_below, first_only, stack):
    """Capsule (world segment ``a b``, ``radius``) against a mesh posed at ``(R, t)``.

    Returns ``(distance, w_capsule, w_mesh)`` in the world frame like
    :func:`posebridge.geometry.distance._capsule_obstacle`; ``needed_below``
    and ``first_only`` as :func:`_segment_mesh`, for the capsule.

    Inlined into the clearance kernels: a capsule whose segment is at least
    ``needed_below + radius`` from the mesh's bounding box (so outside the
    mesh) is answered here with that lower bound, without the call into the
    search (each call with array arguments costs reference counting).
    """
    la = _to_local(a, R, t)
    lb = _to_local(b, R, t)
    gap = _segment_box_bound(la, lb, meshes[3], meshes[0][mesh])
    if gap > 0.0 and gap >= needed_below + radius:
        nan = (math.nan, math.nan, math.nan)
        return max(gap - radius, needed_below), nan, nan
    stack_node, stack_bound = stack
    sd, p, q, n = _segment_mesh(
        la, lb, mesh, meshes, needed_below + radius, first_only, stack_node, stack_bound
    )
    if math.isnan(p[0]):
        # A lower bound: never below needed_below (``(x + r) - r`` may round below ``x``).
        nan = (math.nan, math.nan, math.nan)
        return max(sd - radius, needed_below), nan, nan
    capsule_point = (p[0] - radius * n[0], p[1] - radius * n[1], p[2] - radius * n[2])
    return sd - radius, _to_world_point(capsule_point, R, t), _to_world_point(q, R, t)


@nb.njit(cache=True)
def _point_mesh(x, R, t, mesh, meshes, stack):
    """Signed distance of world point ``x`` to a mesh posed at ``(R, t)``: ``(sd, q)``, ``q`` in the world.

    Negative inside closed meshes; unsigned for open ones.
    """
    stack_node, stack_bound = stack
    local = _to_local(x, R, t)
    d, q, _ = _point_search(
        local, meshes[0][mesh], meshes[3], meshes[4], meshes[5], stack_node, stack_bound
    )
    if meshes[1][mesh] and d > 0.0 and _contains(local, mesh, meshes, stack_node):
        d = -d
    return d, _to_world_point(q, R, t)


# --- batch drivers ------------------------------------------------------------------------


@nb.njit(cache=True)
def _capsules_mesh_many(start, end, radius, R, t, meshes, stack, distance, witness):
    for k in range(start.shape[0]):
        d, wc, wm = _capsule_mesh(
            (start[k, 0], start[k, 1], start[k, 2]),
            (end[k, 0], end[k, 1], end[k, 2]),
            radius[k],
            R,
            t,
            0,
            meshes,
            math.inf,
            False,
            stack,
        )
        distance[k] = d
        for i in range(3):
            witness[k, 0, i] = wc[i]
            witness[k, 1, i] = wm[i]


@nb.njit(cache=True)
def _collision_many(start, end, radius, R, t, meshes, stack, margin, out):
    for k in range(start.shape[0]):
        d, _, _ = _capsule_mesh(
            (start[k, 0], start[k, 1], start[k, 2]),
            (end[k, 0], end[k, 1], end[k, 2]),
            radius[k],
            R,
            t,
            0,
            meshes,
            margin,
            True,
            stack,
        )
        out[k] = d < margin


@nb.njit(cache=True)
def _points_mesh_many(x, R, t, meshes, stack, distance, closest):
    for k in range(x.shape[0]):
        d, q = _point_mesh((x[k, 0], x[k, 1], x[k, 2]), R, t, 0, meshes, stack)
        distance[k] = d
        for i in range(3):
            closest[k, i] = q[i]


@nb.njit(cache=True)
def _inside_many(x, meshes, stack_node, out):
    for k in range(x.shape[0]):
        out[k] = _contains((x[k, 0], x[k, 1], x[k, 2]), 0, meshes, stack_node)


# --- public wrappers ----------------------------------------------------------------------


@dataclass(frozen=True)
class MeshDistanceResult:
    """Capsule-mesh distances.

    Attributes
    ----------
    distance : array, shape (N,)
        ``sd - radius``, m (module docstring; negative: penetration estimate).
    witness : array, shape (N, 2, 3)
        Point on the capsule, then on the mesh surface, world frame, m.
    is_signed : bool
        The mesh is closed, so a capsule wholly inside is negative; ``False``
        for open meshes, whose distances are unsigned (only capsules meeting
        the surface are negative).
    """

    distance: FloatArray
    witness: FloatArray
    is_signed: bool


def _pose_tuple(
    T_world_mesh: npt.ArrayLike,
) -> tuple[tuple[float, ...], tuple[float, float, float]]:
    try:
        T = check_transform(T_world_mesh)
    except TransformError as e:
        raise GeometryInputError(f"T_world_mesh: {e}") from e
    if T.shape != (4, 4):
        raise GeometryInputError(f"T_world_mesh: expected shape (4, 4), got {T.shape}")
    R = tuple(float(v) for v in T[:3, :3].reshape(9))
    return R, (float(T[0, 3]), float(T[1, 3]), float(T[2, 3]))


def _points(value: npt.ArrayLike, field: str) -> FloatArray:
    array = np.ascontiguousarray(value, dtype=np.float64)
    if array.ndim != 2 or array.shape[1] != 3:
        raise GeometryInputError(f"{field}: expected shape (N, 3), got {array.shape}")
    if not np.all(np.isfinite(array)):
        raise GeometryInputError(f"{field}: contains NaN or infinite values")
    return array


def _capsules(
    start: npt.ArrayLike, end: npt.ArrayLike, radius: npt.ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray]:
    a = _points(start, "start")
    b = _points(end, "end")
    if a.shape != b.shape:
        raise GeometryInputError(f"end: expected shape {a.shape} like start, got {b.shape}")
    r = np.ascontiguousarray(np.broadcast_to(np.asarray(radius, dtype=np.float64), a.shape[:1]))
    if not np.all(np.isfinite(r)) or np.any(r < 0.0):
        raise GeometryInputError("radius: expected finite values >= 0 m")
    return a, b, r


def _single(mesh: TriangleMesh) -> MeshTable:
    return mesh.bvh.table


def closest_points_capsule_mesh(
    start: npt.ArrayLike,
    end: npt.ArrayLike,
    radius: npt.ArrayLike,
    mesh: TriangleMesh,
    T_world_mesh: npt.ArrayLike,
) -> MeshDistanceResult:
    """Signed distance and witness points between world capsules and one posed mesh.

    Parameters
    ----------
    start, end : array-like, shape (N, 3)
        Capsule segment end points in the world, m.
    radius : array-like, shape (N,)
        m (broadcast from a scalar).
    mesh : TriangleMesh
    T_world_mesh : array-like, shape (4, 4)
        Pose of the mesh frame in the world.

    Returns
    -------
    MeshDistanceResult
        Exact distances for capsules apart from the solid; a penetration
        estimate (never above the true value) otherwise (module docstring).
    """
    a, b, r = _capsules(start, end, radius)
    R, t = _pose_tuple(T_world_mesh)
    table = _single(mesh)
    distance = np.empty(a.shape[0])
    witness = np.empty((a.shape[0], 2, 3))
    _capsules_mesh_many(a, b, r, R, t, table.kernel_inputs, table.stack(), distance, witness)
    return MeshDistanceResult(distance=distance, witness=witness, is_signed=mesh.is_closed)


def collision_capsules_mesh(
    start: npt.ArrayLike,
    end: npt.ArrayLike,
    radius: npt.ArrayLike,
    mesh: TriangleMesh,
    T_world_mesh: npt.ArrayLike,
    *,
    margin_m: float = 0.0,
) -> BoolArray:
    """Whether each capsule comes closer than ``margin_m`` to the mesh (collide-only, early exit).

    The same decision as ``closest_points_capsule_mesh(...).distance < margin_m``,
    but the search of a capsule stops at the first triangle closer than the
    margin and never computes the exact distance.

    Parameters
    ----------
    start, end : array-like, shape (N, 3)
    radius : array-like, shape (N,)
    mesh : TriangleMesh
    T_world_mesh : array-like, shape (4, 4)
    margin_m : float, keyword-only
        m (0: penetration only).

    Returns
    -------
    colliding : array of bool, shape (N,)
    """
    if not np.isfinite(margin_m):
        raise GeometryInputError(f"margin_m: expected a finite value, got {margin_m!r}")
    a, b, r = _capsules(start, end, radius)
    R, t = _pose_tuple(T_world_mesh)
    table = _single(mesh)
    out = np.empty(a.shape[0], dtype=bool)
    _collision_many(a, b, r, R, t, table.kernel_inputs, table.stack(), float(margin_m), out)
    return out


def signed_distance_points_mesh(
    points: npt.ArrayLike, mesh: TriangleMesh, T_world_mesh: npt.ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """Distance of world points to a posed mesh and the nearest surface points.

    Parameters
    ----------
    points : array-like, shape (N, 3)
        World points, m.
    mesh : TriangleMesh
    T_world_mesh : array-like, shape (4, 4)

    Returns
    -------
    distance : array, shape (N,)
        m; negative inside a closed mesh, unsigned for an open one.
    closest : array, shape (N, 3)
        Nearest surface point, world frame.
    """
    x = _points(points, "points")
    R, t = _pose_tuple(T_world_mesh)
    table = _single(mesh)
    distance = np.empty(x.shape[0])
    closest = np.empty_like(x)
    _points_mesh_many(x, R, t, table.kernel_inputs, table.stack(), distance, closest)
    return distance, closest


def points_inside_mesh(points: npt.ArrayLike, mesh: TriangleMesh) -> BoolArray:
    """Inside test of points in the mesh frame (module docstring); all ``False`` for an open mesh.

    Parameters
    ----------
    points : array-like, shape (N, 3)
        m, mesh frame.
    mesh : TriangleMesh

    Returns
    -------
    inside : array of bool, shape (N,)
    """
    x = _points(points, "points")
    out = np.zeros(x.shape[0], dtype=bool)
    if mesh.is_closed:
        table = _single(mesh)
        _inside_many(x, table.kernel_inputs, table.stack()[0], out)
    return out
