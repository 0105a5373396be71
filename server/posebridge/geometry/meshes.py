"""Triangle meshes in SI units: validation, clean-up, closedness.

A :class:`TriangleMesh` is the one mesh type every other module uses (mesh
fixtures, link meshes, display decimation, capsule fitting, the hierarchy of
:mod:`posebridge.geometry.mesh_bvh`). It is made either by the file layer
(:func:`posebridge.geometry.mesh_files.load_mesh_file`) or from arrays
(:meth:`TriangleMesh.from_arrays`, e.g. for meshes generated in code).

Clean-up (in memory; files are never modified): coincident vertices merged
(trimesh's merge tolerance, 1e-8 of the coordinates' unit), unreferenced
vertices dropped, repeated triangles with the same winding dropped (a
triangle repeated with the opposite winding is kept: it may be the two sides
of a sheet). Zero-area triangles are kept (the distance kernels treat them by
their edges).

**Closed** means the triangles form closed oriented surfaces: every edge is
used as often from ``u`` to ``v`` as from ``v`` to ``u``. Separate closed
bodies, bodies that touch or overlap, and bodies with sealed cavities all
qualify. A watertight mesh whose winding is mixed (some triangles flipped, a
common export fault) is re-wound with trimesh (``trimesh.repair.fix_winding``)
first. A point is inside a closed mesh where the surfaces' winding number about
it is non-zero (:mod:`posebridge.geometry.mesh_bvh`), so the overall
orientation does not matter and a cavity modelled as an inward-facing shell
stays free. Closed meshes get signed distances; the rest (open surfaces,
soups) get unsigned distances, and results say so.

trimesh takes about a second to import, so it is imported where a mesh is
cleaned, not when posebridge starts.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from posebridge.geometry.errors import MeshFileError
from posebridge.units import FloatArray

if TYPE_CHECKING:
    from posebridge.geometry.mesh_bvh import MeshBVH

__all__ = ["MAX_COORDINATE_M", "MeshFileError", "TriangleMesh"]

MAX_COORDINATE_M = 10_000.0
"""Largest accepted vertex coordinate after unit scaling, m (larger: a wrong unit or a broken file)."""


IntArray = npt.NDArray[np.int64]


def _geometry_key(vertices: FloatArray, faces: IntArray) -> str:
    digest = hashlib.sha256()
    digest.update(np.ascontiguousarray(vertices, dtype="<f8").tobytes())
    digest.update(np.ascontiguousarray(faces, dtype="<i8").tobytes())
    return digest.hexdigest()


def _check_raw(
    name: str, vertices: npt.ArrayLike, faces: npt.ArrayLike
) -> tuple[FloatArray, IntArray]:
    """Shapes, finiteness, index range and size of raw arrays; the clean arrays."""
    try:
        v = np.asarray(vertices, dtype=np.float64)
    except (TypeError, ValueError) as e:
        raise MeshFileError(f"{name}: vertices are not numbers ({e})") from e
    if v.ndim != 2 or v.shape[1] != 3:
        raise MeshFileError(f"{name}: expected vertices of shape (V, 3), got {v.shape}")
    raw_faces = np.asarray(faces)
    if raw_faces.ndim != 2 or raw_faces.shape[1] != 3:
        raise MeshFileError(f"{name}: expected triangles of shape (F, 3), got {raw_faces.shape}")
    if raw_faces.shape[0] == 0 or v.shape[0] == 0:
        raise MeshFileError(f"{name}: the mesh has no triangles")
    if not np.issubdtype(raw_faces.dtype, np.integer):
        raise MeshFileError(
            f"{name}: triangle vertex indices must be integers, got {raw_faces.dtype}"
        )
    f = np.ascontiguousarray(raw_faces, dtype=np.int64)
    bad = ~np.all(np.isfinite(v), axis=1)
    if np.any(bad):
        raise MeshFileError(
            f"{name}: {int(bad.sum())} of {v.shape[0]} vertices have NaN or infinite coordinates "
            f"(first at vertex {int(np.argmax(bad))})"
        )
    low = int(f.min())
    high = int(f.max())
    if low < 0 or high >= v.shape[0]:
        row = int(np.argmax(np.any((f < 0) | (f >= v.shape[0]), axis=1)))
        raise MeshFileError(
            f"{name}: triangle {row} refers to vertex {f[row].tolist()}, but the mesh has "
            f"{v.shape[0]} vertices (indices 0..{v.shape[0] - 1})"
        )
    largest = float(np.abs(v).max())
    if largest > MAX_COORDINATE_M:
        raise MeshFileError(
            f"{name}: a vertex lies {largest:.6g} m from the origin (at most {MAX_COORDINATE_M:g} m "
            "accepted); check the length unit"
        )
    return np.ascontiguousarray(v), f


def _same_winding_unique(faces: IntArray) -> npt.NDArray[np.bool_]:
    """Mask keeping the first of each group of triangles with the same vertices in the same cyclic order."""
    shift = np.argmin(faces, axis=1)
    rows = np.arange(faces.shape[0])[:, None]
    canonical = faces[rows, (shift[:, None] + np.arange(3)) % 3]
    _, first = np.unique(canonical, axis=0, return_index=True)
    keep = np.zeros(faces.shape[0], dtype=bool)
    keep[first] = True
    return keep


def _edges_balanced(faces: IntArray) -> bool:
    """Whether every edge is used as often from u to v as from v to u (closed oriented surfaces)."""
    directed = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    forward = directed[:, 0] < directed[:, 1]
    key = np.where(forward, directed[:, 0], directed[:, 1]) * (int(faces.max()) + 1) + np.where(
        forward, directed[:, 1], directed[:, 0]
    )
    order = np.argsort(key, kind="stable")
    sign = np.where(forward, 1, -1)[order]
    sorted_key = key[order]
    starts = np.flatnonzero(np.r_[True, sorted_key[1:] != sorted_key[:-1]])
    return bool(np.all(np.add.reduceat(sign, starts) == 0))


@dataclass(frozen=True, eq=False)
class TriangleMesh:
    """A clean triangle mesh in its own frame, m.

    Attributes
    ----------
    name : str
        Where it came from (file name or a given name), used in messages.
    vertices : array, shape (V, 3)
        m.
    faces : array of int64, shape (F, 3)
        Vertex indices per triangle.
    is_closed : bool
        Closed oriented surfaces (module docstring): distances to it are signed.
    content_key : str
        SHA-256 hex digest identifying the geometry (file content and
        processing parameters for files, the arrays otherwise); the cache key
        of everything derived from the mesh.
    """

    name: str
    vertices: FloatArray
    faces: IntArray
    is_closed: bool
    content_key: str

    @classmethod
    def from_arrays(
        cls,
        vertices: npt.ArrayLike,
        faces: npt.ArrayLike,
        *,
        name: str,
        content_key: str | None = None,
    ) -> TriangleMesh:
        """Validate and clean raw arrays (module docstring).

        Parameters
        ----------
        vertices : array-like, shape (V, 3)
            m.
        faces : array-like of int, shape (F, 3)
        name : str, keyword-only
            Named in error messages.
        content_key : str, optional, keyword-only
            Identity of the source (the file layer passes the file hash and
            its parameters); the hash of the cleaned arrays if omitted.

        Returns
        -------
        TriangleMesh

        Raises
        ------
        MeshFileError
            Wrong shapes, NaN or infinite vertices, indices out of range, no
            triangles, all triangles of zero area, coordinates beyond
            :data:`MAX_COORDINATE_M`.
        """
        import trimesh

        v, f = _check_raw(name, vertices, faces)
        mesh = trimesh.Trimesh(vertices=v, faces=f, process=True, validate=False)
        mesh.update_faces(_same_winding_unique(np.asarray(mesh.faces)))
        mesh.remove_unreferenced_vertices()
        if len(mesh.faces) == 0 or not np.any(mesh.area_faces > 0.0):
            raise MeshFileError(f"{name}: every triangle has zero area (degenerate mesh)")
        closed = _edges_balanced(np.asarray(mesh.faces))
        if not closed and mesh.is_watertight:
            trimesh.repair.fix_winding(mesh)
            closed = _edges_balanced(np.asarray(mesh.faces))
        vertices_out = np.ascontiguousarray(mesh.vertices, dtype=np.float64)
        faces_out = np.ascontiguousarray(mesh.faces, dtype=np.int64)
        return cls(
            name=name,
            vertices=vertices_out,
            faces=faces_out,
            is_closed=closed,
            content_key=content_key or _geometry_key(vertices_out, faces_out),
        )

    @classmethod
    def from_processed(
        cls,
        vertices: npt.ArrayLike,
        faces: npt.ArrayLike,
        *,
        name: str,
        is_closed: bool,
        content_key: str,
    ) -> TriangleMesh:
        """Re-create a mesh already cleaned by :meth:`from_arrays` (e.g. read back from the cache).

        Only the cheap checks run again (shapes, finiteness, index range), so
        a tampered cache entry can never reach the kernels with bad indices.

        Raises
        ------
        MeshFileError
        """
        v, f = _check_raw(name, vertices, faces)
        return cls(
            name=name, vertices=v, faces=f, is_closed=bool(is_closed), content_key=content_key
        )

    @property
    def triangle_count(self) -> int:
        """Number of triangles ``F``."""
        return int(self.faces.shape[0])

    @property
    def triangles(self) -> FloatArray:
        """Vertex coordinates per triangle, shape (F, 3, 3), m."""
        return self.vertices[self.faces]

    @property
    def bounds(self) -> FloatArray:
        """Axis-aligned bounds in the mesh frame, shape (2, 3): minimum then maximum corner, m."""
        return np.stack([self.vertices.min(axis=0), self.vertices.max(axis=0)])

    @cached_property
    def bounding_sphere(self) -> tuple[FloatArray, float]:
        """A bounding sphere in the mesh frame: the bounding-box centre (3,) and the farthest vertex's distance, m."""
        bounds = self.bounds
        centre = 0.5 * (bounds[0] + bounds[1])
        return centre, float(np.linalg.norm(self.vertices - centre, axis=1).max())

    @cached_property
    def bvh(self) -> MeshBVH:
        """The bounding-volume hierarchy of the triangles, built on first use."""
        from posebridge.geometry.mesh_bvh import MeshBVH

        return MeshBVH.build(self)
