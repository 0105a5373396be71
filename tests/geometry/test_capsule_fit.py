"""Capsules fitted to link vertices: every vertex inside, splits where they pay, excess, cache.

References: the point-segment distance of the ``reference`` fixture (Ericson
2004, sec. 5.1.2, conftest.py) for enclosure; closed forms (the smallest
sphere around points on a sphere of radius R has radius R; a capsule holding
every vertex holds their convex hull, so its volume is at least the hull's);
trimesh's convex hull volume.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from posebridge.bench.meshes import box_arrays, meshed_arm_parts
from posebridge.geometry.capsule_fit import fit_capsules
from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.mesh_cache import MeshCache


def _inside(reference, vertices: np.ndarray, fit) -> np.ndarray:
    """Which vertices lie within some fitted capsule (brute-force point-segment distances)."""
    inside = np.zeros(vertices.shape[0], dtype=bool)
    for capsule in fit.capsules:
        n = vertices.shape[0]
        d = reference.point_segment_distance(
            vertices, np.broadcast_to(capsule.start, (n, 3)), np.broadcast_to(capsule.end, (n, 3))
        )
        inside |= d <= capsule.radius
    return inside


coordinates = st.floats(min_value=-0.5, max_value=0.5, allow_nan=False, width=64)


@settings(derandomize=True, deadline=None, max_examples=40)
@given(
    points=arrays(np.float64, st.tuples(st.integers(1, 60), st.just(3)), elements=coordinates),
    stretch=st.sampled_from([1.0, 4.0, 12.0]),
    max_capsules=st.sampled_from([1, 2, 3]),
)
def test_every_vertex_is_inside(reference, points, stretch: float, max_capsules: int) -> None:
    vertices = points * np.array([stretch, 1.0, 0.3])
    fit = fit_capsules(vertices, max_capsules=max_capsules)
    assert 1 <= len(fit.capsules) <= max_capsules
    assert _inside(reference, vertices, fit).all()


def test_generated_links_are_enclosed_and_long_links_split(reference) -> None:
    lengths = np.array([0.6, 0.3])
    for parts in meshed_arm_parts(lengths, triangles=20_000):
        vertices = np.concatenate([v for v, _ in parts])
        fit = fit_capsules(vertices)
        assert _inside(reference, vertices, fit).all()
        hull = trimesh.convex.convex_hull(vertices).volume
        # Capsules that hold every vertex hold the hull (convexity), so their volume is at least its.
        assert fit.hull_volume_m3 == pytest.approx(hull, rel=1e-9)
        assert fit.excess is not None
        assert fit.excess >= 1.0
        assert fit.capsule_volume_m3 == pytest.approx(sum(c.volume_m3 for c in fit.capsules))
        # A link with a housing at each end is better held by more than one capsule.
        assert len(fit.capsules) >= 2


def test_sphere_gets_one_capsule_of_its_radius(reference) -> None:
    sphere = trimesh.creation.icosphere(3, 0.25)
    fit = fit_capsules(sphere.vertices)
    assert _inside(reference, np.asarray(sphere.vertices), fit).all()
    # The smallest capsule around points on a sphere is that sphere (closed form).
    assert len(fit.capsules) == 1
    assert fit.capsules[0].radius == pytest.approx(0.25, rel=2e-3)
    assert np.linalg.norm(fit.capsules[0].end - fit.capsules[0].start) < 0.01


def test_slender_box_gets_a_capsule_along_it(reference) -> None:
    v, _ = box_arrays(np.array([0.0, -0.02, -0.02]), np.array([0.8, 0.02, 0.02]), 1)
    fit = fit_capsules(v, max_capsules=1)
    capsule = fit.capsules[0]
    axis = (capsule.end - capsule.start) / np.linalg.norm(capsule.end - capsule.start)
    # Along the long side (x); radius at least the half diagonal of the 40 x 40 mm section.
    assert abs(axis[0]) > 0.999
    assert capsule.radius >= 0.02 * np.sqrt(2.0)
    assert capsule.radius < 0.02 * np.sqrt(2.0) * 1.05
    robot_capsules = fit.as_capsules(3, "forearm")
    assert [c.name for c in robot_capsules] == ["forearm"]
    assert robot_capsules[0].link == 3


def test_flat_vertex_sets_have_no_excess(reference) -> None:
    rng = np.random.default_rng(3)
    flat = np.column_stack([rng.uniform(-0.2, 0.2, (50, 2)), np.zeros(50)])
    fit = fit_capsules(flat)
    assert fit.hull_volume_m3 == 0.0
    assert fit.excess is None
    assert _inside(reference, flat, fit).all()


def test_fits_are_cached_and_checked(tmp_path, reference) -> None:
    v, _ = box_arrays(np.zeros(3), np.array([0.5, 0.1, 0.1]), 2)
    cache = MeshCache(tmp_path)
    first = fit_capsules(v, cache=cache)
    second = fit_capsules(v, cache=cache)
    assert (cache.misses, cache.hits) == (1, 1)
    for a, b in zip(first.capsules, second.capsules, strict=True):
        np.testing.assert_array_equal(a.start, b.start)
        assert a.radius == b.radius
    # An entry that no longer holds the vertices is refitted, never trusted.
    (entry,) = tmp_path.glob("*.npz")
    with np.load(entry) as stored:
        arrays = dict(stored)
    arrays["radius"] = arrays["radius"] * 0.5
    with open(entry, "wb") as stream:
        np.savez(stream, **arrays)
    third = fit_capsules(v, cache=cache)
    assert _inside(reference, v, third).all()


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"vertices": np.zeros((0, 3))}, r"vertices: expected shape \(V, 3\) with V >= 1"),
        ({"vertices": np.full((4, 3), np.nan)}, "vertices: contains NaN"),
        ({"vertices": np.zeros((4, 3)), "max_capsules": 4}, "max_capsules: expected 1, 2 or 3"),
        (
            {"vertices": np.zeros((4, 3)), "split_gain": 0.0},
            r"split_gain: expected a value in \(0, 1\]",
        ),
    ],
)
def test_inputs_are_checked(kwargs, message: str) -> None:
    with pytest.raises(GeometryInputError, match=message):
        fit_capsules(**kwargs)
