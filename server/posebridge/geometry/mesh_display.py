"""Meshes for drawing: decimated to a triangle budget, in metres, ready for plotly ``Mesh3d``.

The page draws robots and fixtures with a budget of triangles (dragging must
stay smooth), so every mesh is reduced before it is sent:

1. quadric edge-collapse decimation (Garland and Heckbert 1997, "Surface
   simplification using quadric error metrics") by the ``fast-simplification``
   package, asked for the budget;
2. where that stops above the budget (it refuses collapses that would fold
   thin slivers, e.g. on subdivided thin plates), vertex clustering on a
   uniform grid (Rossignac and Borrel 1993, "Multi-resolution 3D
   approximations for rendering complex scenes"): vertices in one cell become
   their mean, collapsed and repeated triangles go; the cell size grows by
   a factor of 1.5 until the budget is met.

``fast-simplification`` keeps its working mesh in process-global variables,
so two calls at once (two requests of the page on the server's threads)
mix their meshes: :data:`_SIMPLIFY_LOCK` lets one call run at a time.

Display meshes are for looking at only; clearance always uses the full mesh.
Results can be kept in a :class:`~posebridge.geometry.mesh_cache.MeshCache`
(keyed by the mesh's ``content_key``, the budget and :data:`_CACHE_FORMAT`).
The answers built from them (:mod:`posebridge.results.robots`, the mesh fixture
route) convert the vertices to millimetres.
"""

from __future__ import annotations

import threading
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.geometry.meshes import TriangleMesh
from posebridge.transforms import TransformError, check_transform
from posebridge.units import FloatArray

__all__ = [
    "MIN_TRIANGLE_BUDGET",
    "DisplayMesh",
    "decimate_for_display",
    "split_triangle_budget",
]

MIN_TRIANGLE_BUDGET = 12
"""Smallest budget accepted (a box's worth of triangles)."""

IntArray = npt.NDArray[np.int64]

_CACHE_FORMAT = "vertices_m"
"""Part of the cache key and the stored field's name: entries of the earlier millimetre format
(``vertices_mm``) are never read as metres."""

_SIMPLIFY_LOCK = threading.Lock()
"""One ``fast_simplification.simplify`` call at a time (module docstring)."""


@dataclass(frozen=True)
class DisplayMesh:
    """A mesh for drawing (plotly ``Mesh3d``: ``x, y, z = vertices_m.T``, ``i, j, k = faces.T``).

    Attributes
    ----------
    vertices_m : array, shape (V, 3)
        m, in the mesh frame (or the world after :meth:`posed`).
    faces : array of int64, shape (F, 3)
    source_triangles : int
        Triangles of the full mesh it was made from.
    """

    vertices_m: FloatArray
    faces: IntArray
    source_triangles: int

    @property
    def triangle_count(self) -> int:
        """``F``."""
        return int(self.faces.shape[0])

    def posed(self, T_world_mesh: npt.ArrayLike) -> DisplayMesh:
        """Return the same mesh with vertices moved by ``T_world_mesh`` (translation in m): ``R v + t``.

        Parameters
        ----------
        T_world_mesh : array-like, shape (4, 4)

        Returns
        -------
        DisplayMesh
        """
        try:
            T = check_transform(T_world_mesh)
        except TransformError as e:
            raise GeometryInputError(f"T_world_mesh: {e}") from e
        if T.shape != (4, 4):
            raise GeometryInputError(f"T_world_mesh: expected shape (4, 4), got {T.shape}")
        vertices = self.vertices_m @ T[:3, :3].T + T[:3, 3]
        return DisplayMesh(vertices, self.faces, self.source_triangles)


def split_triangle_budget(counts: Sequence[int], total: int) -> list[int]:
    """Share a triangle budget among meshes in proportion to their size.

    Parameters
    ----------
    counts : sequence of int
        Triangles of each mesh.
    total : int
        Budget for all of them (e.g. 60 000 for a whole robot).

    Returns
    -------
    budgets : list of int
        Per mesh: its own count where everything fits; else meshes of at
        most :data:`MIN_TRIANGLE_BUDGET` triangles whole and the rest of the
        budget shared in proportion to size (rounded down, at least
        :data:`MIN_TRIANGLE_BUDGET`). The sum stays within ``total`` unless
        those minimum shares alone exceed it.
    """
    sizes = np.asarray(counts, dtype=np.int64)
    if sizes.sum() <= total:
        return [int(c) for c in sizes]
    small = sizes <= MIN_TRIANGLE_BUDGET
    rest = total - int(sizes[small].sum())
    share = np.floor(sizes * (max(rest, 0) / max(int(sizes[~small].sum()), 1))).astype(np.int64)
    budgets = np.where(small, sizes, np.maximum(share, MIN_TRIANGLE_BUDGET))
    return [int(b) for b in budgets]


def _cluster(vertices: FloatArray, faces: IntArray, cell: float) -> tuple[FloatArray, IntArray]:
    """Vertex clustering on a grid of ``cell`` (module docstring, step 2)."""
    keys = np.floor((vertices - vertices.min(axis=0)) / cell).astype(np.int64)
    _, label, counts = np.unique(keys, axis=0, return_inverse=True, return_counts=True)
    label = label.reshape(-1)
    merged = np.zeros((counts.shape[0], 3))
    np.add.at(merged, label, vertices)
    merged /= counts[:, None]
    remapped = label[faces]
    keep = (
        (remapped[:, 0] != remapped[:, 1])
        & (remapped[:, 1] != remapped[:, 2])
        & (remapped[:, 2] != remapped[:, 0])
    )
    remapped = remapped[keep]
    _, first = np.unique(np.sort(remapped, axis=1), axis=0, return_index=True)
    remapped = remapped[np.sort(first)]
    used, compact = np.unique(remapped, return_inverse=True)
    return merged[used], compact.reshape(-1, 3).astype(np.int64)


def _decimate(vertices: FloatArray, faces: IntArray, budget: int) -> tuple[FloatArray, IntArray]:
    import fast_simplification

    with _SIMPLIFY_LOCK:
        points, triangles = fast_simplification.simplify(
            np.ascontiguousarray(vertices),
            np.ascontiguousarray(faces, dtype=np.int32),
            target_count=budget,
        )
    points = np.asarray(points, dtype=np.float64)
    triangles = np.asarray(triangles, dtype=np.int64)
    if triangles.shape[0] <= budget:
        return points, triangles
    extent = float(np.max(points.max(axis=0) - points.min(axis=0)))
    cell = extent / max(np.sqrt(budget / 2.0), 1.0)
    while True:
        clustered, clustered_faces = _cluster(points, triangles, cell)
        if clustered_faces.shape[0] <= budget:
            return clustered, clustered_faces
        cell *= 1.5


def decimate_for_display(
    mesh: TriangleMesh, *, max_triangles: int, cache: MeshCache | None = None
) -> DisplayMesh:
    """Return the mesh reduced to at most ``max_triangles`` triangles, vertices in m (module docstring).

    Parameters
    ----------
    mesh : TriangleMesh
    max_triangles : int, keyword-only
        Budget, at least :data:`MIN_TRIANGLE_BUDGET`; a mesh within it is
        returned whole.
    cache : MeshCache, optional, keyword-only

    Returns
    -------
    DisplayMesh
        In the mesh frame.
    """
    if int(max_triangles) != max_triangles or max_triangles < MIN_TRIANGLE_BUDGET:
        raise GeometryInputError(
            f"max_triangles: expected an integer >= {MIN_TRIANGLE_BUDGET}, got {max_triangles!r}"
        )
    budget = int(max_triangles)
    if mesh.triangle_count <= budget:
        return DisplayMesh(mesh.vertices.copy(), mesh.faces.copy(), mesh.triangle_count)
    key = cache_key("display", mesh.content_key, str(budget), _CACHE_FORMAT)
    if cache is not None:
        entry = cache.load(key, (_CACHE_FORMAT, "faces"))
        if entry is not None:
            vertices = np.asarray(entry[_CACHE_FORMAT], dtype=np.float64)
            faces = np.asarray(entry["faces"], dtype=np.int64)
            if (
                vertices.ndim == 2
                and vertices.shape[1] == 3
                and faces.ndim == 2
                and faces.shape[1] == 3
                and faces.shape[0] <= budget
                and (faces.size == 0 or 0 <= faces.min() <= faces.max() < vertices.shape[0])
                and np.all(np.isfinite(vertices))
            ):
                return DisplayMesh(vertices, faces, mesh.triangle_count)
    vertices, faces = _decimate(mesh.vertices, mesh.faces, budget)
    display = DisplayMesh(vertices, faces, mesh.triangle_count)
    if cache is not None:
        cache.store(key, {_CACHE_FORMAT: display.vertices_m, "faces": display.faces})
    return display
