"""Exact closest points between a point or a segment and one triangle.

The narrow phase of the mesh queries in :mod:`posebridge.geometry.mesh_bvh`;
everything works on 3-tuples (numba kernels, no arrays) in the mesh's own frame.

Methods
-------
* Point-triangle: Ericson, *Real-Time Collision Detection* (2004), sec. 5.1.5
  ``ClosestPtPointTriangle``: the Voronoi region of the point (a vertex, an
  edge or the face) is found from six dot products, then the point is
  projected onto that feature.
* Segment-triangle: Ericson (2004), sec. 5.1.10. If the segment crosses the
  triangle (its end points lie on opposite sides of the plane, or on it, and
  the crossing point lies inside the triangle) the distance is 0. Otherwise
  one of the two closest points lies on a boundary of its feature, so the
  minimum is the smallest of the two end point-triangle distances
  (sec. 5.1.5) and the three segment-edge distances (sec. 5.1.9,
  :func:`posebridge.geometry.distance._segment_segment`).
* Degenerate triangles (``|(v1 - v0) x (v2 - v0)| <= DEGENERATE_AREA * l^2``
  with ``l`` the longest edge, a sliver or a point) have no usable plane;
  their points lie within ``DEGENERATE_AREA * l`` of their edges, so the
  three edges stand in for them.

Triangles are given as a row of the packed arrays of
:func:`triangle_planes`: the three vertices and the plane ``(n, n . v0)``
with ``n`` the unit normal by the right-hand rule ``(v1 - v0) x (v2 - v0)``,
or ``n = 0`` for a degenerate triangle.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from posebridge.geometry.distance import _axpy, _dot, _segment_segment, _sub
from posebridge.units import FloatArray

__all__ = ["DEGENERATE_AREA", "triangle_planes"]

DEGENERATE_AREA = 1e-12
"""Relative size ``|e1 x e2| / l^2`` below which a triangle counts as degenerate."""


def triangle_planes(triangles: FloatArray) -> FloatArray:
    """Return unit normal and offset of each triangle's plane, zero for degenerate triangles.

    Parameters
    ----------
    triangles : array, shape (T, 3, 3)
        Vertices ``v0, v1, v2`` of each triangle, m.

    Returns
    -------
    planes : array, shape (T, 4)
        ``(n_x, n_y, n_z, n . v0)`` with ``n`` the unit normal of
        ``(v1 - v0) x (v2 - v0)`` (counter-clockwise seen from outside for an
        outward-oriented mesh); all zero where the triangle is degenerate
        (module docstring).
    """
    e1 = triangles[:, 1] - triangles[:, 0]
    e2 = triangles[:, 2] - triangles[:, 0]
    e3 = triangles[:, 2] - triangles[:, 1]
    normal = np.cross(e1, e2)
    area2 = np.linalg.norm(normal, axis=1)
    longest2 = np.max(np.stack([np.einsum("ij,ij->i", e, e) for e in (e1, e2, e3)], axis=1), axis=1)
    good = area2 > DEGENERATE_AREA * longest2
    planes = np.zeros((triangles.shape[0], 4))
    planes[good, :3] = normal[good] / area2[good, None]
    planes[good, 3] = np.einsum("ij,ij->i", planes[good, :3], triangles[good, 0])
    return planes


@nb.njit(cache=True, inline="always")
def _cross(a, b):
    return (a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0])


@nb.njit(cache=True, inline="always")
def _distance2(a, b):
    w = _sub(a, b)
    return _dot(w, w)


@nb.njit(cache=True)
def _point_segment(p, a, b):
    """Point of segment ``a b`` nearest ``p`` (Ericson 2004, sec. 5.1.2), any length."""
    d = _sub(b, a)
    dd = _dot(d, d)
    if dd <= 0.0:
        return a
    t = _dot(_sub(p, a), d) / dd
    if t <= 0.0:
        return a
    if t >= 1.0:
        return b
    return _axpy(a, t, d)


@nb.njit(cache=True)
def _point_edges(p, v0, v1, v2):
    """Nearest point to ``p`` on the three edges (stands in for a degenerate triangle)."""
    q = _point_segment(p, v0, v1)
    best = _distance2(p, q)
    r = _point_segment(p, v1, v2)
    value = _distance2(p, r)
    if value < best:
        best = value
        q = r
    r = _point_segment(p, v2, v0)
    if _distance2(p, r) < best:
        q = r
    return q


@nb.njit(cache=True)
def _point_triangle(p, v0, v1, v2, degenerate):
    """Point of triangle ``v0 v1 v2`` nearest ``p`` (Ericson 2004, sec. 5.1.5 ``ClosestPtPointTriangle``)."""
    if degenerate:
        return _point_edges(p, v0, v1, v2)
    ab = _sub(v1, v0)
    ac = _sub(v2, v0)
    ap = _sub(p, v0)
    d1 = _dot(ab, ap)
    d2 = _dot(ac, ap)
    if d1 <= 0.0 and d2 <= 0.0:
        return v0
    bp = _sub(p, v1)
    d3 = _dot(ab, bp)
    d4 = _dot(ac, bp)
    if d3 >= 0.0 and d4 <= d3:
        return v1
    vc = d1 * d4 - d3 * d2
    if vc <= 0.0 and d1 >= 0.0 and d3 <= 0.0:
        return _axpy(v0, d1 / (d1 - d3), ab)
    cp = _sub(p, v2)
    d5 = _dot(ab, cp)
    d6 = _dot(ac, cp)
    if d6 >= 0.0 and d5 <= d6:
        return v2
    vb = d5 * d2 - d1 * d6
    if vb <= 0.0 and d2 >= 0.0 and d6 <= 0.0:
        return _axpy(v0, d2 / (d2 - d6), ac)
    va = d3 * d6 - d5 * d4
    if va <= 0.0 and d4 - d3 >= 0.0 and d5 - d6 >= 0.0:
        return _axpy(v1, (d4 - d3) / ((d4 - d3) + (d5 - d6)), _sub(v2, v1))
    denom = 1.0 / (va + vb + vc)
    v = vb * denom
    w = vc * denom
    return (
        v0[0] + ab[0] * v + ac[0] * w,
        v0[1] + ab[1] * v + ac[1] * w,
        v0[2] + ab[2] * v + ac[2] * w,
    )


@nb.njit(cache=True, inline="always")
def _inside_in_plane(x, v0, v1, v2, n):
    """Whether ``x`` (in the triangle's plane) lies inside the triangle: three edge-side signs."""
    return (
        _dot(n, _cross(_sub(v1, v0), _sub(x, v0))) >= 0.0
        and _dot(n, _cross(_sub(v2, v1), _sub(x, v1))) >= 0.0
        and _dot(n, _cross(_sub(v0, v2), _sub(x, v2))) >= 0.0
    )


@nb.njit(cache=True, inline="always")
def _keep(best, p, q, x, y):
    value = _distance2(x, y)
    if value < best:
        return value, x, y
    return best, p, q


@nb.njit(cache=True)
def _segment_triangle(a, b, v0, v1, v2, n, offset):
    """Closest points of segment ``a b`` and triangle ``v0 v1 v2`` (Ericson 2004, sec. 5.1.10).

    ``n``, ``offset``: the triangle's plane from :func:`triangle_planes`
    (``n = 0`` for a degenerate triangle). Returns ``(distance, p, q)``
    with ``p`` on the segment and ``q`` on the triangle; ``p = q`` and
    distance 0 where the segment crosses the triangle.
    """
    degenerate = n[0] == 0.0 and n[1] == 0.0 and n[2] == 0.0
    if not degenerate:
        da = _dot(n, a) - offset
        db = _dot(n, b) - offset
        if (da <= 0.0 <= db or db <= 0.0 <= da) and da != db:
            x = _axpy(a, da / (da - db), _sub(b, a))
            if _inside_in_plane(x, v0, v1, v2, n):
                return 0.0, x, x
    d, p, q = _segment_segment(a, b, v0, v1)
    best = d * d
    d, x, y = _segment_segment(a, b, v1, v2)
    if d * d < best:
        best = d * d
        p = x
        q = y
    d, x, y = _segment_segment(a, b, v2, v0)
    if d * d < best:
        best = d * d
        p = x
        q = y
    if not degenerate:
        best, p, q = _keep(best, p, q, a, _point_triangle(a, v0, v1, v2, False))
        best, p, q = _keep(best, p, q, b, _point_triangle(b, v0, v1, v2, False))
    return math.sqrt(best), p, q


@nb.njit(cache=True, inline="always")
def _plane_gap(a, b, n, offset):
    """Return a lower bound of the segment-triangle distance: the segment's distance to the plane (0 if crossing)."""
    da = _dot(n, a) - offset
    db = _dot(n, b) - offset
    if da > 0.0 and db > 0.0:
        return min(da, db)
    if da < 0.0 and db < 0.0:
        return -max(da, db)
    return 0.0
