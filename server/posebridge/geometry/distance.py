"""Exact closest points between segments and segments, boxes, cylinders and the floor.

A capsule is all points within ``radius`` of a segment, so every capsule
query is a segment query followed by a radius offset. Distances are signed:
negative means penetration, and for a capsule against a solid the depth is
that of the capsule's deepest point, ``min_t sd(a + t (b - a)) - radius``,
where ``sd`` is the point's signed distance to the solid (negative inside,
minus the distance to the surface). Two witness points are returned, their
separation equal to the absolute distance: on the obstacle, the surface
point nearest to the capsule's closest (or deepest) axis point ``p``; on the
capsule, ``p - radius n`` with ``n`` the obstacle's outward normal there.
When the capsule is apart from the obstacle that point is on the capsule's
surface; in penetration it lies inside the capsule (on the surface when ``n``
is perpendicular to the axis).

Methods
-------
* Segment-segment: Ericson, *Real-Time Collision Detection* (2004),
  sec. 5.1.9 ``ClosestPtSegmentSegment``; for nearly parallel segments the
  four end point to segment distances are compared as well.
* Point-box, point-cylinder: clamping to the solid (Ericson 2004, sec. 5.1.4
  for the box); inside, the nearest face.
* Segment-box: the squared distance along the segment,
  ``f(t) = |p(t) - clamp(p(t))|^2``, is convex and piecewise quadratic with
  at most six breakpoints (where a coordinate crosses a face plane), so
  ``f'`` is piecewise linear and non-decreasing; the bracket between the two
  breakpoints around its sign change holds a linear piece, whose root is the
  exact minimiser. If the segment meets the box, the signed distance inside is
  ``max_i(|p_i| - h_i)``, a maximum of six lines in ``t``; its minimum lies
  at an end point or an intersection of two of the lines (15 candidates).
* Segment-cylinder: closed form when the closest point is on the lateral
  surface (segment-to-axis closest points). Otherwise the signed distance to
  a convex set is a convex function, hence convex in the segment parameter,
  and Brent's method (parabolic steps with golden-section fallback; Brent
  1973, *Algorithms for Minimization without Derivatives*, ch. 5) narrows
  the parameter to :data:`SEGMENT_TOLERANCE` along the segment; the signed
  distance is 1-Lipschitz, so the value is exact to about that tolerance.
* Segment-floor: the signed height ``z - h`` is linear in ``t``; the lower end
  point is closest.

The ``_``-prefixed functions are numba kernels on 3-tuples used by
:mod:`posebridge.geometry.clearance`; the public functions are batch-first
wrappers around them.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.geometry.shapes import (
    BOX,
    FLOOR,
    MESH,
    GeometryInputError,
    ObstacleSet,
)
from posebridge.units import FloatArray

__all__ = [
    "SEGMENT_TOLERANCE",
    "closest_points_capsule_obstacle",
    "closest_points_point_obstacle",
    "closest_points_segment_segment",
]

SEGMENT_TOLERANCE = 1e-10
"""Accuracy of the iterative segment-cylinder minimiser along the segment, m."""

_PARALLEL = 1e-6
"""Segments count as nearly parallel when ``|d1 x d2|^2 <= _PARALLEL |d1|^2 |d2|^2``."""
_TOUCH = 1e-12
"""A segment closer than this to a box (m) is tested for penetration."""
_GOLDEN_SECTION = 0.3819660112501051
"""Golden-section step ``(3 - sqrt(5)) / 2`` of Brent's method."""


# --- 3-tuple arithmetic -------------------------------------------------------------------


@nb.njit(cache=True, inline="always")
def _sub(a, b):
    return (a[0] - b[0], a[1] - b[1], a[2] - b[2])


@nb.njit(cache=True, inline="always")
def _axpy(a, s, d):
    """Return ``a + s d``."""
    return (a[0] + s * d[0], a[1] + s * d[1], a[2] + s * d[2])


@nb.njit(cache=True, inline="always")
def _dot(a, b):
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


@nb.njit(cache=True, inline="always")
def _clamp(x, lo, hi):
    if x < lo:
        return lo
    if x > hi:
        return hi
    return x


@nb.njit(cache=True, inline="always")
def _to_local(x, R, t):
    """``R^T (x - t)``: a world point in an obstacle frame with ``R`` a row-major 9-tuple."""
    v0 = x[0] - t[0]
    v1 = x[1] - t[1]
    v2 = x[2] - t[2]
    return (
        R[0] * v0 + R[3] * v1 + R[6] * v2,
        R[1] * v0 + R[4] * v1 + R[7] * v2,
        R[2] * v0 + R[5] * v1 + R[8] * v2,
    )


@nb.njit(cache=True, inline="always")
def _to_world_vector(v, R):
    """``R v``: a direction in an obstacle frame expressed in the world."""
    return (
        R[0] * v[0] + R[1] * v[1] + R[2] * v[2],
        R[3] * v[0] + R[4] * v[1] + R[5] * v[2],
        R[6] * v[0] + R[7] * v[1] + R[8] * v[2],
    )


@nb.njit(cache=True, inline="always")
def _to_world_point(v, R, t):
    w = _to_world_vector(v, R)
    return (w[0] + t[0], w[1] + t[1], w[2] + t[2])


@nb.njit(cache=True, inline="always")
def _obstacle_record(o, kind, rotation, translation, params):
    """Obstacle ``o`` as plain values: ``(kind, R as a row-major 9-tuple, t, params)``.

    Kernels read the obstacle arrays only here, so the narrow phase works on
    values (no array references to count in the hot loop).
    """
    return (
        kind[o],
        (
            rotation[o, 0, 0],
            rotation[o, 0, 1],
            rotation[o, 0, 2],
            rotation[o, 1, 0],
            rotation[o, 1, 1],
            rotation[o, 1, 2],
            rotation[o, 2, 0],
            rotation[o, 2, 1],
            rotation[o, 2, 2],
        ),
        (translation[o, 0], translation[o, 1], translation[o, 2]),
        (params[o, 0], params[o, 1], params[o, 2]),
    )


# --- segment-segment ----------------------------------------------------------------------


@nb.njit(cache=True, inline="always")
def _point_on_segment(x, a, d, dd):
    """Point of segment ``a + t d`` (``dd = d . d > 0``) nearest to ``x`` (Ericson 2004, sec. 5.1.2)."""
    return _axpy(a, _clamp(_dot(_sub(x, a), d) / dd, 0.0, 1.0), d)


@nb.njit(cache=True, inline="always")
def _keep_closer(best, c1, c2, x1, x2):
    """``(distance^2, c1, c2)`` of the closer of the current pair and ``x1 x2``."""
    w = _sub(x1, x2)
    value = _dot(w, w)
    if value < best:
        return value, x1, x2
    return best, c1, c2


@nb.njit(cache=True)
def _segment_segment(p1, q1, p2, q2):
    """Closest points of segments ``p1 q1`` and ``p2 q2`` (Ericson 2004, sec. 5.1.9).

    For nearly parallel segments (``|d1 x d2|^2 <= 1e-6 |d1|^2 |d2|^2``) the
    2x2 solve is ill-conditioned and Ericson's choice ``s = 0`` for parallel
    segments is off by up to ``|d1| sin(angle)``; there the four end point to
    segment distances (where the minimum lies unless it is interior) are also
    taken and the closest pair kept. Returns ``(distance, c1, c2)`` with
    ``c1`` on the first segment and ``c2`` on the second.
    """
    d1 = _sub(q1, p1)
    d2 = _sub(q2, p2)
    r = _sub(p1, p2)
    a = _dot(d1, d1)
    e = _dot(d2, d2)
    f = _dot(d2, r)
    near_parallel = False
    if a <= 0.0 and e <= 0.0:
        s = 0.0
        t = 0.0
    elif a <= 0.0:
        s = 0.0
        t = _clamp(f / e, 0.0, 1.0)
    else:
        c = _dot(d1, r)
        if e <= 0.0:
            t = 0.0
            s = _clamp(-c / a, 0.0, 1.0)
        else:
            b = _dot(d1, d2)
            denom = a * e - b * b
            near_parallel = denom <= _PARALLEL * a * e
            s = _clamp((b * f - c * e) / denom, 0.0, 1.0) if denom > 0.0 else 0.0
            t = (b * s + f) / e
            if t < 0.0:
                t = 0.0
                s = _clamp(-c / a, 0.0, 1.0)
            elif t > 1.0:
                t = 1.0
                s = _clamp((b - c) / a, 0.0, 1.0)
    c1 = _axpy(p1, s, d1)
    c2 = _axpy(p2, t, d2)
    w = _sub(c1, c2)
    best = _dot(w, w)
    if near_parallel:
        best, c1, c2 = _keep_closer(best, c1, c2, p1, _point_on_segment(p1, p2, d2, e))
        best, c1, c2 = _keep_closer(best, c1, c2, q1, _point_on_segment(q1, p2, d2, e))
        best, c1, c2 = _keep_closer(best, c1, c2, _point_on_segment(p2, p1, d1, a), p2)
        best, c1, c2 = _keep_closer(best, c1, c2, _point_on_segment(q2, p1, d1, a), q2)
    return math.sqrt(best), c1, c2


# --- point queries (local frames) ---------------------------------------------------------


@nb.njit(cache=True)
def _point_box(p, h):
    """Signed distance of local point ``p`` to the box ``|x_i| <= h_i`` (Ericson 2004, sec. 5.1.4).

    Returns ``(sd, q, n)``: ``q`` the nearest surface point, ``n`` the unit
    outward normal there (``p = q + sd n``).
    """
    q = (_clamp(p[0], -h[0], h[0]), _clamp(p[1], -h[1], h[1]), _clamp(p[2], -h[2], h[2]))
    e = _sub(p, q)
    d2 = _dot(e, e)
    if d2 > 0.0:
        d = math.sqrt(d2)
        return d, q, (e[0] / d, e[1] / d, e[2] / d)
    # Inside: the face with the largest |p_i| - h_i is nearest.
    axis = 0
    depth = abs(p[0]) - h[0]
    for i in range(1, 3):
        value = abs(p[i]) - h[i]
        if value > depth:
            depth = value
            axis = i
    sign = 1.0 if p[axis] >= 0.0 else -1.0
    if axis == 0:
        return depth, (sign * h[0], p[1], p[2]), (sign, 0.0, 0.0)
    if axis == 1:
        return depth, (p[0], sign * h[1], p[2]), (0.0, sign, 0.0)
    return depth, (p[0], p[1], sign * h[2]), (0.0, 0.0, sign)


@nb.njit(cache=True)
def _point_cylinder(p, radius, half_length):
    """Signed distance of local point ``p`` to the cylinder ``x^2 + y^2 <= r^2, |z| <= h``.

    Returns ``(sd, q, n)`` as :func:`_point_box`. Outside, ``q`` clamps the
    radial distance to ``r`` and ``z`` to ``[-h, h]``; inside, the nearer of
    the lateral surface and the cap is taken.
    """
    rho = math.sqrt(p[0] * p[0] + p[1] * p[1])
    if rho > 0.0:
        ux = p[0] / rho
        uy = p[1] / rho
    else:
        ux = 1.0
        uy = 0.0
    dr = rho - radius
    dz = abs(p[2]) - half_length
    sz = 1.0 if p[2] >= 0.0 else -1.0
    if dr <= 0.0 and dz <= 0.0:
        if dr >= dz:
            return dr, (ux * radius, uy * radius, p[2]), (ux, uy, 0.0)
        return dz, (p[0], p[1], sz * half_length), (0.0, 0.0, sz)
    qr = min(rho, radius)
    q = (ux * qr, uy * qr, _clamp(p[2], -half_length, half_length))
    e = _sub(p, q)
    d = math.sqrt(_dot(e, e))
    return d, q, (e[0] / d, e[1] / d, e[2] / d)


# --- segment queries (local frames) -------------------------------------------------------


@nb.njit(cache=True, inline="always")
def _excess(x, h):
    """``x - clamp(x, -h, h)`` without branches."""
    return max(x - h, 0.0) + min(x + h, 0.0)


@nb.njit(cache=True, inline="always")
def _box_slope(a, d, h, t):
    """Half the derivative of ``|p(t) - clamp(p(t))|^2``: ``(p - clamp(p)) . d``."""
    return (
        _excess(a[0] + t * d[0], h[0]) * d[0]
        + _excess(a[1] + t * d[1], h[1]) * d[1]
        + _excess(a[2] + t * d[2], h[2]) * d[2]
    )


@nb.njit(cache=True, inline="always")
def _face_crossings(a, d, h):
    """Parameters where ``p_i(t) = -h_i`` and ``p_i(t) = h_i``; ``-1`` (outside ``[0, 1]``) when ``d_i = 0``."""
    if d == 0.0:
        return -1.0, -1.0
    inverse = 1.0 / d
    return (-h - a) * inverse, (h - a) * inverse


@nb.njit(cache=True, inline="always")
def _tighten(tk, a, d, h, t_lo, g_lo, t_hi, g_hi):
    """Shrink the bracket ``[t_lo, t_hi]`` of the slope's sign change with breakpoint ``tk``."""
    if t_lo < tk < t_hi:
        gk = _box_slope(a, d, h, tk)
        if gk < 0.0:
            return tk, gk, t_hi, g_hi
        return t_lo, g_lo, tk, gk
    return t_lo, g_lo, t_hi, g_hi


@nb.njit(cache=True, inline="always")
def _box_depth(a, d, h, t):
    """``max_i(|p_i(t)| - h_i)``, the signed distance inside the box."""
    depth = -math.inf
    for i in range(3):
        value = abs(a[i] + t * d[i]) - h[i]
        if value > depth:
            depth = value
    return depth


@nb.njit(cache=True)
def _segment_box(a, b, h):
    """Closest points of segment ``a b`` and the box ``|x_i| <= h_i`` (local frame).

    Returns ``(sd, p, q, n)``: the minimum signed distance of the segment's
    points, the segment point ``p`` reaching it, the box surface point ``q``
    and the unit outward normal ``n`` at ``q`` (``p = q + sd n``).
    Method in the module docstring.
    """
    d = _sub(b, a)
    g0 = _box_slope(a, d, h, 0.0)
    g1 = _box_slope(a, d, h, 1.0)
    if g0 >= 0.0:
        t = 0.0
    elif g1 <= 0.0:
        t = 1.0
    else:
        t_lo, g_lo, t_hi, g_hi = 0.0, g0, 1.0, g1
        for i in range(3):
            t_minus, t_plus = _face_crossings(a[i], d[i], h[i])
            t_lo, g_lo, t_hi, g_hi = _tighten(t_minus, a, d, h, t_lo, g_lo, t_hi, g_hi)
            t_lo, g_lo, t_hi, g_hi = _tighten(t_plus, a, d, h, t_lo, g_lo, t_hi, g_hi)
        t = t_lo - g_lo * (t_hi - t_lo) / (g_hi - g_lo)
    p = _axpy(a, t, d)
    q = (_clamp(p[0], -h[0], h[0]), _clamp(p[1], -h[1], h[1]), _clamp(p[2], -h[2], h[2]))
    e = _sub(p, q)
    dist = math.sqrt(_dot(e, e))
    if dist > _TOUCH:
        return dist, p, q, (e[0] / dist, e[1] / dist, e[2] / dist)
    # The segment meets the box: minimise max_i(|p_i| - h_i) over its breakpoints.
    t_best = 0.0
    best = _box_depth(a, d, h, 0.0)
    value = _box_depth(a, d, h, 1.0)
    if value < best:
        best = value
        t_best = 1.0
    for i in range(3):
        if d[i] != 0.0:
            tk = -a[i] / d[i]
            if 0.0 < tk < 1.0:
                value = _box_depth(a, d, h, tk)
                if value < best:
                    best = value
                    t_best = tk
        for j in range(i + 1, 3):
            for si in (-1.0, 1.0):
                for sj in (-1.0, 1.0):
                    slope = si * d[i] - sj * d[j]
                    if slope != 0.0:
                        tk = (h[i] - h[j] - si * a[i] + sj * a[j]) / slope
                        if 0.0 < tk < 1.0:
                            value = _box_depth(a, d, h, tk)
                            if value < best:
                                best = value
                                t_best = tk
    p = _axpy(a, t_best, d)
    sd, q, n = _point_box(p, h)
    return sd, p, q, n


@nb.njit(cache=True, inline="always")
def _cylinder_along(a, d, t, radius, half_length):
    return _point_cylinder(_axpy(a, t, d), radius, half_length)[0]


@nb.njit(cache=True, inline="always")
def _segment_cylinder_at(a, d, t, radius, half_length):
    p = _axpy(a, t, d)
    sd, q, n = _point_cylinder(p, radius, half_length)
    return sd, p, q, n


@nb.njit(cache=True)
def _segment_cylinder(a, b, radius, half_length):
    """Closest points of segment ``a b`` and a cylinder (local frame); returns as :func:`_segment_box`.

    Lateral case in closed form: the cylinder's signed distance is at least
    ``rho - r`` (``rho`` the distance to the axis), so when the segment's
    closest point to the axis segment lies strictly between the caps and
    ``rho >= r`` there, that point is the minimiser. Otherwise Brent's
    minimisation of the convex ``sd(p(t))`` on ``[0, 1]`` (Brent 1973,
    *Algorithms for Minimization without Derivatives*, ch. 5), stopped when
    ``t`` is known to :data:`SEGMENT_TOLERANCE` along the segment.
    """
    rho, p, axis_point = _segment_segment(a, b, (0.0, 0.0, -half_length), (0.0, 0.0, half_length))
    if rho >= radius and abs(axis_point[2]) < half_length:
        sd, q, n = _point_cylinder(p, radius, half_length)
        return sd, p, q, n
    d = _sub(b, a)
    length = math.sqrt(_dot(d, d))
    tol = SEGMENT_TOLERANCE / max(length, SEGMENT_TOLERANCE)
    # Convexity: if sd does not fall over the first (last) tol, the minimiser is at that end.
    f0 = _cylinder_along(a, d, 0.0, radius, half_length)
    if _cylinder_along(a, d, tol, radius, half_length) >= f0:
        return _segment_cylinder_at(a, d, 0.0, radius, half_length)
    f1 = _cylinder_along(a, d, 1.0, radius, half_length)
    if _cylinder_along(a, d, 1.0 - tol, radius, half_length) >= f1:
        return _segment_cylinder_at(a, d, 1.0, radius, half_length)
    lo = 0.0
    hi = 1.0
    x = w = v = _GOLDEN_SECTION
    fx = fw = fv = _cylinder_along(a, d, x, radius, half_length)
    step = 0.0
    previous = 0.0
    while True:
        middle = 0.5 * (lo + hi)
        if abs(x - middle) <= 2.0 * tol - 0.5 * (hi - lo):
            break
        golden = True
        if abs(previous) > tol:
            # Parabola through (v, fv), (w, fw), (x, fx).
            r = (x - w) * (fx - fv)
            s = (x - v) * (fx - fw)
            num = (x - v) * s - (x - w) * r
            den = 2.0 * (s - r)
            if den > 0.0:
                num = -num
            den = abs(den)
            if abs(num) < abs(0.5 * den * previous) and den * (lo - x) < num < den * (hi - x):
                previous = step
                step = num / den
                golden = False
                if (x + step) - lo < 2.0 * tol or hi - (x + step) < 2.0 * tol:
                    step = tol if middle >= x else -tol
        if golden:
            previous = (lo - x) if x >= middle else (hi - x)
            step = _GOLDEN_SECTION * previous
        u = x + step if abs(step) >= tol else x + (tol if step > 0.0 else -tol)
        fu = _cylinder_along(a, d, u, radius, half_length)
        if fu <= fx:
            if u >= x:
                lo = x
            else:
                hi = x
            v = w
            fv = fw
            w = x
            fw = fx
            x = u
            fx = fu
        else:
            if u < x:
                lo = u
            else:
                hi = u
            if fu <= fw or w == x:
                v = w
                fv = fw
                w = u
                fw = fu
            elif fu <= fv or v in (x, w):
                v = u
                fv = fu
    return _segment_cylinder_at(a, d, x, radius, half_length)


@nb.njit(cache=True, inline="always")
def _segment_floor(a, b, height):
    """Closest points of segment ``a b`` (world) and the floor ``z <= height``."""
    p = a if a[2] <= b[2] else b
    return p[2] - height, p, (p[0], p[1], height), (0.0, 0.0, 1.0)


@nb.njit(cache=True, inline="always")
def _aabb_gap(la, lb, h0, h1, h2):
    """Distance between the axis-aligned box around local segment ``la lb`` and ``|x_i| <= h_i``.

    A lower bound of the segment's distance to any solid inside that box when positive.
    """
    gap = 0.0
    h = (h0, h1, h2)
    for i in range(3):
        lo = min(la[i], lb[i])
        hi = max(la[i], lb[i])
        if lo > h[i]:
            gap += (lo - h[i]) * (lo - h[i])
        elif hi < -h[i]:
            gap += (hi + h[i]) * (hi + h[i])
    return math.sqrt(gap)


@nb.njit(cache=True)
def _segment_obstacle(a, b, kind, R, t, params, needed_below):
    """Closest points of world segment ``a b`` and one obstacle, all in the world frame.

    The obstacle is given by :func:`_obstacle_record`'s values. Returns
    ``(sd, p, q, n)`` as :func:`_segment_box`. The caller needs the result
    only if ``sd < needed_below``: when the gap between the segment's local
    bounding box and the obstacle's box is positive (so a lower bound of
    ``sd``) and already reaches it, that gap is returned with NaN points instead.
    """
    if kind == FLOOR:
        return _segment_floor(a, b, params[0])
    la = _to_local(a, R, t)
    lb = _to_local(b, R, t)
    if kind == BOX:
        gap = _aabb_gap(la, lb, params[0], params[1], params[2])
    else:
        gap = _aabb_gap(la, lb, params[0], params[0], params[1])
    if gap > 0.0 and gap >= needed_below:
        nan = (math.nan, math.nan, math.nan)
        return gap, nan, nan, nan
    if kind == BOX:
        sd, p, q, n = _segment_box(la, lb, params)
    else:
        sd, p, q, n = _segment_cylinder(la, lb, params[0], params[1])
    return sd, _to_world_point(p, R, t), _to_world_point(q, R, t), _to_world_vector(n, R)


@nb.njit(cache=True, inline="always")
def _capsule_obstacle(a, b, radius, kind, R, t, params, needed_below):
    """Capsule (segment ``a b``, ``radius``) against one obstacle: ``(distance, w_capsule, w_obstacle)``.

    ``distance = sd - radius``; the capsule witness is ``p - radius n`` (module
    docstring). ``needed_below`` as :func:`_segment_obstacle`, for the capsule.
    """
    sd, p, q, n = _segment_obstacle(a, b, kind, R, t, params, needed_below + radius)
    return (
        sd - radius,
        (p[0] - radius * n[0], p[1] - radius * n[1], p[2] - radius * n[2]),
        q,
    )


@nb.njit(cache=True)
def _capsule_capsule(a1, b1, r1, a2, b2, r2):
    """Two capsules: ``(distance, w_1, w_2)``, the axis distance minus both radii.

    The witnesses sit on the surfaces along the axes' common normal (any
    direction when the axes touch).
    """
    d, c1, c2 = _segment_segment(a1, b1, a2, b2)
    if d > 0.0:
        n = ((c1[0] - c2[0]) / d, (c1[1] - c2[1]) / d, (c1[2] - c2[2]) / d)
    else:
        n = (0.0, 0.0, 1.0)
    w1 = (c1[0] - r1 * n[0], c1[1] - r1 * n[1], c1[2] - r1 * n[2])
    w2 = (c2[0] + r2 * n[0], c2[1] + r2 * n[1], c2[2] + r2 * n[2])
    return d - r1 - r2, w1, w2


@nb.njit(cache=True)
def _point_obstacle(x, kind, R, t, params):
    """Signed distance of world point ``x`` to one obstacle: ``(sd, q)`` with ``q`` in the world."""
    if kind == FLOOR:
        return x[2] - params[0], (x[0], x[1], params[0])
    local = _to_local(x, R, t)
    if kind == BOX:
        sd, q, _ = _point_box(local, params)
    else:
        sd, q, _ = _point_cylinder(local, params[0], params[1])
    return sd, _to_world_point(q, R, t)


# --- batch drivers for the public wrappers ------------------------------------------------


@nb.njit(cache=True)
def _segment_segment_many(p1, q1, p2, q2, distance, points):
    for k in range(p1.shape[0]):
        d, c1, c2 = _segment_segment(
            (p1[k, 0], p1[k, 1], p1[k, 2]),
            (q1[k, 0], q1[k, 1], q1[k, 2]),
            (p2[k, 0], p2[k, 1], p2[k, 2]),
            (q2[k, 0], q2[k, 1], q2[k, 2]),
        )
        distance[k] = d
        for i in range(3):
            points[k, 0, i] = c1[i]
            points[k, 1, i] = c2[i]


@nb.njit(cache=True)
def _point_obstacle_many(x, o, kind, rotation, translation, params, distance, closest):
    kind_o, R, t, prm = _obstacle_record(o, kind, rotation, translation, params)
    for k in range(x.shape[0]):
        sd, q = _point_obstacle((x[k, 0], x[k, 1], x[k, 2]), kind_o, R, t, prm)
        distance[k] = sd
        for i in range(3):
            closest[k, i] = q[i]


@nb.njit(cache=True)
def _capsule_obstacle_many(
    start, end, radius, o, kind, rotation, translation, params, distance, witness
):
    kind_o, R, t, prm = _obstacle_record(o, kind, rotation, translation, params)
    for k in range(start.shape[0]):
        d, w_capsule, w_obstacle = _capsule_obstacle(
            (start[k, 0], start[k, 1], start[k, 2]),
            (end[k, 0], end[k, 1], end[k, 2]),
            radius[k],
            kind_o,
            R,
            t,
            prm,
            math.inf,
        )
        distance[k] = d
        for i in range(3):
            witness[k, 0, i] = w_capsule[i]
            witness[k, 1, i] = w_obstacle[i]


# --- public wrappers ----------------------------------------------------------------------


def _points(value: npt.ArrayLike, field: str) -> FloatArray:
    array = np.ascontiguousarray(value, dtype=np.float64)
    if array.ndim != 2 or array.shape[1] != 3:
        raise GeometryInputError(f"{field}: expected shape (N, 3), got {array.shape}")
    if not np.all(np.isfinite(array)):
        raise GeometryInputError(f"{field}: contains NaN or infinite values")
    return array


def _obstacle_index(obstacles: ObstacleSet, index: int) -> int:
    if not 0 <= index < obstacles.count:
        raise GeometryInputError(f"obstacle index: expected 0..{obstacles.count - 1}, got {index}")
    return int(index)


def _pose_of(obstacles: ObstacleSet, o: int) -> FloatArray:
    T = np.eye(4)
    T[:3, :3] = obstacles.rotation[o]
    T[:3, 3] = obstacles.translation[o]
    return T


def closest_points_segment_segment(
    p1: npt.ArrayLike, q1: npt.ArrayLike, p2: npt.ArrayLike, q2: npt.ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """Closest points between segments ``p1 q1`` and ``p2 q2``, row by row.

    Ericson, *Real-Time Collision Detection* (2004), sec. 5.1.9.

    Parameters
    ----------
    p1, q1, p2, q2 : array-like, shape (N, 3)
        End points, m.

    Returns
    -------
    distance : array, shape (N,)
        Unsigned distance, m.
    points : array, shape (N, 2, 3)
        Closest point on the first segment, then on the second.
    """
    a1 = _points(p1, "p1")
    b1 = _points(q1, "q1")
    a2 = _points(p2, "p2")
    b2 = _points(q2, "q2")
    if not a1.shape == b1.shape == a2.shape == b2.shape:
        raise GeometryInputError(
            f"segment end points: expected equal shapes, got {a1.shape}, {b1.shape}, {a2.shape}, {b2.shape}"
        )
    distance = np.empty(a1.shape[0])
    points = np.empty((a1.shape[0], 2, 3))
    _segment_segment_many(a1, b1, a2, b2, distance, points)
    return distance, points


def closest_points_point_obstacle(
    points: npt.ArrayLike, obstacles: ObstacleSet, index: int
) -> tuple[FloatArray, FloatArray]:
    """Signed distance of world points to one obstacle and the nearest surface points.

    Parameters
    ----------
    points : array-like, shape (N, 3)
        World points, m.
    obstacles : ObstacleSet
    index : int
        Obstacle index.

    Returns
    -------
    distance : array, shape (N,)
        Signed distance, m (negative inside; unsigned for an open mesh,
        see ``obstacles.is_signed``).
    closest : array, shape (N, 3)
        Nearest point on the obstacle's surface, world frame.
    """
    x = _points(points, "points")
    o = _obstacle_index(obstacles, index)
    if obstacles.kind[o] == MESH:
        from posebridge.geometry.mesh_bvh import signed_distance_points_mesh

        return signed_distance_points_mesh(
            x, obstacles.meshes[obstacles.mesh_index[o]], _pose_of(obstacles, o)
        )
    distance = np.empty(x.shape[0])
    closest = np.empty_like(x)
    _point_obstacle_many(
        x,
        o,
        obstacles.kind,
        obstacles.rotation,
        obstacles.translation,
        obstacles.params,
        distance,
        closest,
    )
    return distance, closest


def closest_points_capsule_obstacle(
    start: npt.ArrayLike,
    end: npt.ArrayLike,
    radius: npt.ArrayLike,
    obstacles: ObstacleSet,
    index: int,
) -> tuple[FloatArray, FloatArray]:
    """Signed distance and witness points between world capsules and one obstacle.

    Parameters
    ----------
    start, end : array-like, shape (N, 3)
        Capsule segment end points in the world, m.
    radius : array-like, shape (N,)
        Capsule radii, m (broadcast from a scalar).
    obstacles : ObstacleSet
    index : int
        Obstacle index.

    Returns
    -------
    distance : array, shape (N,)
        ``min_t sd(a + t (b - a)) - radius``, m; negative is the depth of
        the capsule's deepest point inside the obstacle (for a mesh, the
        estimate of :mod:`posebridge.geometry.mesh_bvh`, never above it).
    witness : array, shape (N, 2, 3)
        Point on the capsule surface, then on the obstacle surface, world frame.
    """
    a = _points(start, "start")
    b = _points(end, "end")
    if a.shape != b.shape:
        raise GeometryInputError(f"end: expected shape {a.shape} like start, got {b.shape}")
    r = np.ascontiguousarray(np.broadcast_to(np.asarray(radius, dtype=np.float64), a.shape[:1]))
    if not np.all(np.isfinite(r)) or np.any(r < 0.0):
        raise GeometryInputError("radius: expected finite values >= 0 m")
    o = _obstacle_index(obstacles, index)
    if obstacles.kind[o] == MESH:
        from posebridge.geometry.mesh_bvh import closest_points_capsule_mesh

        mesh = obstacles.meshes[obstacles.mesh_index[o]]
        result = closest_points_capsule_mesh(a, b, r, mesh, _pose_of(obstacles, o))
        return result.distance, result.witness
    distance = np.empty(a.shape[0])
    witness = np.empty((a.shape[0], 2, 3))
    _capsule_obstacle_many(
        a,
        b,
        r,
        o,
        obstacles.kind,
        obstacles.rotation,
        obstacles.translation,
        obstacles.params,
        distance,
        witness,
    )
    return distance, witness
