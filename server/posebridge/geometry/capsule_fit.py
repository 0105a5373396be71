"""Collision capsules fitted to a link's mesh vertices: every vertex inside, small volume.

A robot link collides as one to three capsules (all points within a radius of
a segment). The fit is conservative by construction: whatever the segment,
the radius is the largest distance of the assigned vertices to it (plus
:data:`RADIUS_PAD`), so every vertex lies inside a capsule and clearances can
only be under-estimated. A capsule that holds every vertex holds their
convex hull, so only the hull's vertices are used.

Method, for one capsule on a point set:

1. start on the principal axis (largest-variance direction of the points,
   through their centroid): the radius is the largest distance from the
   axis, and each end is placed as far inward as still keeps every point
   within that radius of the segment;
2. minimise the capsule volume ``pi r^2 |b - a| + 4/3 pi r^3`` over the two
   end points with ``r(a, b) = max_i dist(x_i, [a, b])`` (Nelder-Mead simplex,
   scipy; the objective is continuous but not smooth).

Splits: the vertices are projected on the single capsule's axis and cut into
two or three runs at positions chosen from a grid of fractions of the length
(the cut with the smallest sum of first-step volumes), each run fitted as
above. ``k`` capsules replace fewer only when their volume sum is at most
``split_gain`` times the best so far (default: a split must remove 20 % of
the volume).

Excess is the capsules' volume sum over the convex hull's volume (trimesh's
convex hull); overlaps between capsules count twice, so it is an upper bound
of the union's excess.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.robot.model import Capsule
from posebridge.units import FloatArray

__all__ = [
    "RADIUS_PAD",
    "CapsuleFit",
    "FittedCapsule",
    "fit_capsules",
    "point_segment_distances",
]

RADIUS_PAD = 1e-9
"""Added to every fitted radius, m, so rounding never leaves a vertex outside."""
_CUTS_TWO = np.linspace(0.15, 0.85, 15)
_CUTS_THREE = [
    (f1, f2) for f1 in np.linspace(0.2, 0.7, 6) for f2 in np.linspace(0.3, 0.8, 6) if f2 > f1 + 0.05
]


@dataclass(frozen=True)
class FittedCapsule:
    """One fitted capsule in the link frame.

    Attributes
    ----------
    start, end : array, shape (3,)
        Segment end points, m.
    radius : float
        m.
    """

    start: FloatArray
    end: FloatArray
    radius: float

    @property
    def volume_m3(self) -> float:
        """``pi r^2 L + 4/3 pi r^3``, m^3."""
        return _volume(float(np.linalg.norm(self.end - self.start)), self.radius)


@dataclass(frozen=True)
class CapsuleFit:
    """The capsules fitted to one link and how much they exceed its convex hull.

    Attributes
    ----------
    capsules : tuple of FittedCapsule
        One to three.
    capsule_volume_m3 : float
        Sum of the capsules' volumes, m^3.
    hull_volume_m3 : float
        Volume of the vertices' convex hull, m^3 (0 for flat or degenerate sets).
    excess : float or None
        ``capsule_volume_m3 / hull_volume_m3``; ``None`` when the hull has no volume.
    """

    capsules: tuple[FittedCapsule, ...]
    capsule_volume_m3: float
    hull_volume_m3: float
    excess: float | None

    def as_capsules(self, link: int, name: str) -> tuple[Capsule, ...]:
        """Return the fit as robot-model capsules on link ``link``: ``name``, ``name-2``, ``name-3``."""
        return tuple(
            Capsule(
                name=name if i == 0 else f"{name}-{i + 1}",
                link=link,
                start=capsule.start.copy(),
                end=capsule.end.copy(),
                radius=capsule.radius,
            )
            for i, capsule in enumerate(self.capsules)
        )


def _volume(length: float, radius: float) -> float:
    return math.pi * radius * radius * length + 4.0 / 3.0 * math.pi * radius**3


def point_segment_distances(points: FloatArray, a: FloatArray, b: FloatArray) -> FloatArray:
    """Distance of points (N, 3) to segment ``a b``, shape (N,) (Ericson 2004, sec. 5.1.2)."""
    d = b - a
    dd = float(d @ d)
    if dd <= 0.0:
        return np.linalg.norm(points - a, axis=1)
    t = np.clip((points - a) @ d / dd, 0.0, 1.0)
    return np.linalg.norm(points - a - t[:, None] * d, axis=1)


def _hull_points(points: FloatArray) -> FloatArray:
    """Return the convex hull's vertices (all points when the set is flat or too small for a hull)."""
    from scipy.spatial import ConvexHull, QhullError

    if points.shape[0] < 5:
        return points
    try:
        return points[ConvexHull(points).vertices]
    except (QhullError, ValueError):
        return points


def _start(points: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Step 1: the principal-axis capsule's end points."""
    centre = points.mean(axis=0)
    centred = points - centre
    if points.shape[0] < 2:
        return centre.copy(), centre.copy()
    _, _, vt = np.linalg.svd(centred, full_matrices=False)
    axis = vt[0]
    t = centred @ axis
    rho = np.linalg.norm(centred - t[:, None] * axis, axis=1)
    radius = float(rho.max())
    slack = np.sqrt(np.maximum(radius * radius - rho * rho, 0.0))
    low = float(np.min(t + slack))
    high = float(np.max(t - slack))
    if low > high:
        low = high = 0.5 * (low + high)
    return centre + low * axis, centre + high * axis


MIN_OPTIMISED_EXTENT_M = 1e-9
"""Point clouds smaller than this (m) get the starting capsule: the volume scale would underflow."""


def _enclosing(points: FloatArray, a: FloatArray, b: FloatArray) -> FittedCapsule:
    radius = float(point_segment_distances(points, a, b).max()) + RADIUS_PAD
    return FittedCapsule(start=a.copy(), end=b.copy(), radius=radius)


def _fit_one(points: FloatArray, *, optimise: bool) -> FittedCapsule:
    """One capsule holding every point (module docstring, steps 1 and 2)."""
    from scipy.optimize import minimize

    hull = _hull_points(points)
    a, b = _start(hull)
    scale = float(np.max(np.ptp(hull, axis=0)))
    if not optimise or scale < MIN_OPTIMISED_EXTENT_M:
        return _enclosing(hull, a, b)

    def volume(x: FloatArray) -> float:
        p, q = x[:3], x[3:]
        radius = float(point_segment_distances(hull, p, q).max())
        return _volume(float(np.linalg.norm(q - p)), radius) / scale**3

    result = minimize(
        volume,
        np.concatenate([a, b]),
        method="Nelder-Mead",
        options={"xatol": 1e-5 * scale, "fatol": 1e-7, "maxiter": 2000, "adaptive": True},
    )
    best = result.x if result.fun < volume(np.concatenate([a, b])) else np.concatenate([a, b])
    return _enclosing(hull, best[:3], best[3:])


def _runs(
    points: FloatArray, axis_a: FloatArray, axis_b: FloatArray, cuts: Sequence[float]
) -> list[FloatArray]:
    """Return the points cut into runs along the segment ``axis_a axis_b`` at fractions ``cuts`` of their extent."""
    direction = axis_b - axis_a
    length = float(np.linalg.norm(direction))
    if length == 0.0:
        _, _, vt = np.linalg.svd(points - points.mean(axis=0), full_matrices=False)
        direction = vt[0]
    else:
        direction = direction / length
    t = points @ direction
    lo, hi = float(t.min()), float(t.max())
    edges = [lo + f * (hi - lo) for f in cuts]
    bounds = [-np.inf, *edges, np.inf]
    return [points[(t > bounds[i]) & (t <= bounds[i + 1])] for i in range(len(bounds) - 1)]


def _split(
    points: FloatArray, single: FittedCapsule, count: int
) -> tuple[FittedCapsule, ...] | None:
    """Return the best ``count``-capsule split along the single capsule's axis, or ``None`` if none is valid."""
    options: list[Sequence[float]] = (
        [[float(f)] for f in _CUTS_TWO] if count == 2 else [list(c) for c in _CUTS_THREE]
    )
    best: tuple[float, list[FloatArray]] | None = None
    for cuts in options:
        runs = _runs(points, single.start, single.end, cuts)
        if any(run.shape[0] < 4 for run in runs):
            continue
        total = sum(_fit_one(run, optimise=False).volume_m3 for run in runs)
        if best is None or total < best[0]:
            best = (total, runs)
    if best is None:
        return None
    return tuple(_fit_one(run, optimise=True) for run in best[1])


def fit_capsules(
    vertices: npt.ArrayLike,
    *,
    max_capsules: int = 3,
    split_gain: float = 0.8,
    cache: MeshCache | None = None,
) -> CapsuleFit:
    """Fit one to ``max_capsules`` capsules holding every vertex (module docstring).

    Parameters
    ----------
    vertices : array-like, shape (V, 3)
        A link's mesh vertices in its link frame, m (several meshes
        concatenated after moving them into the link frame).
    max_capsules : int, keyword-only
        1, 2 or 3.
    split_gain : float, keyword-only
        ``k`` capsules replace fewer when their volume is at most this
        fraction of the best so far (0 < split_gain <= 1).
    cache : MeshCache, optional, keyword-only
        Keeps the result under the vertices' hash and the parameters.

    Returns
    -------
    CapsuleFit
    """
    points = np.ascontiguousarray(vertices, dtype=np.float64)
    if points.ndim != 2 or points.shape[1] != 3 or points.shape[0] == 0:
        raise GeometryInputError(f"vertices: expected shape (V, 3) with V >= 1, got {points.shape}")
    if not np.all(np.isfinite(points)):
        raise GeometryInputError("vertices: contains NaN or infinite values")
    if max_capsules not in (1, 2, 3):
        raise GeometryInputError(f"max_capsules: expected 1, 2 or 3, got {max_capsules!r}")
    if not 0.0 < split_gain <= 1.0:
        raise GeometryInputError(f"split_gain: expected a value in (0, 1], got {split_gain!r}")
    key = cache_key(
        "capsules",
        hashlib.sha256(points.tobytes()).hexdigest(),
        str(points.shape[0]),
        str(max_capsules),
        repr(float(split_gain)),
    )
    if cache is not None:
        entry = cache.load(key, ("start", "end", "radius", "hull_volume"))
        if entry is not None:
            fit = _from_entry(points, entry)
            if fit is not None:
                return fit
    fit = _fit(points, max_capsules, split_gain)
    if cache is not None:
        cache.store(
            key,
            {
                "start": np.array([c.start for c in fit.capsules]),
                "end": np.array([c.end for c in fit.capsules]),
                "radius": np.array([c.radius for c in fit.capsules]),
                "hull_volume": np.array(fit.hull_volume_m3),
            },
        )
    return fit


def _hull_volume(points: FloatArray) -> float:
    import trimesh

    try:
        with np.errstate(invalid="ignore", divide="ignore"):  # flat hulls: zero volume
            volume = float(abs(trimesh.convex.convex_hull(points).volume))
    except Exception:  # qhull refuses flat or tiny sets in several ways
        return 0.0
    return volume if np.isfinite(volume) else 0.0


def _result(capsules: tuple[FittedCapsule, ...], hull_volume: float) -> CapsuleFit:
    total = float(sum(c.volume_m3 for c in capsules))
    return CapsuleFit(
        capsules=capsules,
        capsule_volume_m3=total,
        hull_volume_m3=hull_volume,
        excess=total / hull_volume if hull_volume > 0.0 else None,
    )


def _fit(points: FloatArray, max_capsules: int, split_gain: float) -> CapsuleFit:
    single = _fit_one(points, optimise=True)
    best: tuple[FittedCapsule, ...] = (single,)
    best_volume = single.volume_m3
    for count in range(2, max_capsules + 1):
        split = _split(points, single, count)
        if split is None:
            continue
        volume = sum(c.volume_m3 for c in split)
        if volume <= split_gain * best_volume:
            best, best_volume = split, volume
    return _result(best, _hull_volume(points))


def _from_entry(points: FloatArray, entry: dict[str, npt.NDArray[np.generic]]) -> CapsuleFit | None:
    """Return a cached fit, accepted only if it still holds every vertex (a stale or altered entry is refitted)."""
    start = np.asarray(entry["start"], dtype=np.float64)
    end = np.asarray(entry["end"], dtype=np.float64)
    radius = np.asarray(entry["radius"], dtype=np.float64)
    if start.ndim != 2 or start.shape[1:] != (3,) or start.shape != end.shape:
        return None
    if radius.shape != (start.shape[0],) or not 1 <= start.shape[0] <= 3:
        return None
    if not (np.all(np.isfinite(start)) and np.all(np.isfinite(end)) and np.all(radius >= 0.0)):
        return None
    inside = np.zeros(points.shape[0], dtype=bool)
    for a, b, r in zip(start, end, radius, strict=True):
        inside |= point_segment_distances(points, a, b) <= r
    if not inside.all():
        return None
    capsules = tuple(
        FittedCapsule(start=a, end=b, radius=float(r))
        for a, b, r in zip(start, end, radius, strict=True)
    )
    return _result(capsules, float(entry["hull_volume"]))
