"""Fixtures of the geometry tests: independent numpy reference formulas (not used by posebridge).

Each is a textbook closed form written out directly, vectorised over rows:

* point-segment distance: projection onto the line clamped to the segment
  (Ericson, Real-Time Collision Detection, 2004, sec. 5.1.2);
* segment-segment distance by enumeration: the minimum over the four end point
  to segment distances and, where both line parameters of the two lines'
  common perpendicular fall inside (0, 1), that perpendicular's length
  (the minimum of a convex quadratic on a square lies in the interior or on an edge);
* point-box signed distance: clamping to the box outside (Ericson 2004,
  sec. 5.1.4), minus the distance to the nearest face inside;
* point-cylinder signed distance: ``sqrt(max(rho - r, 0)^2 + max(|z| - h, 0)^2)``
  outside, ``max(rho - r, |z| - h)`` inside.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest


def point_segment_distance(x: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Distance of points ``x`` to segments ``a b``, all shape (N, 3)."""
    d = b - a
    length2 = np.einsum("ij,ij->i", d, d)
    t = np.where(
        length2 > 0.0, np.einsum("ij,ij->i", x - a, d) / np.where(length2 > 0, length2, 1), 0.0
    )
    t = np.clip(t, 0.0, 1.0)
    return np.linalg.norm(x - (a + t[:, None] * d), axis=1)


def segment_segment_distance(
    p1: np.ndarray, q1: np.ndarray, p2: np.ndarray, q2: np.ndarray
) -> np.ndarray:
    """Distance between segments ``p1 q1`` and ``p2 q2`` by enumeration, shape (N,)."""
    candidates = [
        point_segment_distance(p1, p2, q2),
        point_segment_distance(q1, p2, q2),
        point_segment_distance(p2, p1, q1),
        point_segment_distance(q2, p1, q1),
    ]
    d1 = q1 - p1
    d2 = q2 - p2
    r = p1 - p2
    a = np.einsum("ij,ij->i", d1, d1)
    e = np.einsum("ij,ij->i", d2, d2)
    b = np.einsum("ij,ij->i", d1, d2)
    c = np.einsum("ij,ij->i", d1, r)
    f = np.einsum("ij,ij->i", d2, r)
    denom = a * e - b * b
    ok = denom > 1e-12 * np.maximum(a * e, 1e-300)
    safe = np.where(ok, denom, 1.0)
    s = (b * f - c * e) / safe
    t = (a * f - b * c) / safe
    inside = ok & (s > 0) & (s < 1) & (t > 0) & (t < 1)
    interior = np.linalg.norm((p1 + s[:, None] * d1) - (p2 + t[:, None] * d2), axis=1)
    candidates.append(np.where(inside, interior, np.inf))
    return np.min(candidates, axis=0)


def point_box_signed_distance(x_local: np.ndarray, half: np.ndarray) -> np.ndarray:
    """Signed distance of local points (N, 3) to the box ``|x_i| <= half_i``."""
    excess = np.abs(x_local) - half
    outside = np.linalg.norm(np.maximum(excess, 0.0), axis=1)
    inside = np.minimum(excess.max(axis=1), 0.0)
    return outside + inside


def point_cylinder_signed_distance(
    x_local: np.ndarray, radius: float, half_length: float
) -> np.ndarray:
    """Signed distance of local points (N, 3) to the cylinder about local z."""
    dr = np.hypot(x_local[:, 0], x_local[:, 1]) - radius
    dz = np.abs(x_local[:, 2]) - half_length
    outside = np.hypot(np.maximum(dr, 0.0), np.maximum(dz, 0.0))
    inside = np.minimum(np.maximum(dr, dz), 0.0)
    return outside + inside


def to_local(T_world_shape: np.ndarray, x_world: np.ndarray) -> np.ndarray:
    """World points (N, 3) in a shape's frame: ``R^T (x - t)``."""
    return (x_world - T_world_shape[:3, 3]) @ T_world_shape[:3, :3]


@pytest.fixture(scope="session")
def reference() -> SimpleNamespace:
    """The reference formulas above: ``reference.segment_segment_distance(...)`` etc."""
    return SimpleNamespace(
        point_segment_distance=point_segment_distance,
        segment_segment_distance=segment_segment_distance,
        point_box_signed_distance=point_box_signed_distance,
        point_cylinder_signed_distance=point_cylinder_signed_distance,
        to_local=to_local,
    )
