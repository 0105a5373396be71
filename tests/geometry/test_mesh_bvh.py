"""Capsule-mesh and point-mesh distances against brute force over all triangles and against coal.

References: the numpy brute force of the ``reference`` fixture (conftest.py:
segment-triangle distance after Ericson 2004, sec. 5.1.10, over every
triangle; winding numbers by solid angles after Van Oosterom and Strackee
1983), coal's BVH distance and collision (``coal.distance`` /
``coal.collide`` with ``coal.BVHModelOBBRSS`` and ``coal.Capsule``) run in
the tests, and rigid-motion invariance of distances. Meshes are generated in
the tests (trimesh primitives, a union of boxes with a door opening).
"""

from __future__ import annotations

import coal
import numpy as np
import pytest
import trimesh

from posebridge.bench.meshes import box_arrays, housing_mesh
from posebridge.geometry.mesh_bvh import (
    MeshBVH,
    closest_points_capsule_mesh,
    collision_capsules_mesh,
    points_inside_mesh,
    signed_distance_points_mesh,
)
from posebridge.geometry.meshes import TriangleMesh
from posebridge.transforms import rotation_matrix_from_rotation_vector

SEED = 4711
EXACT = 1e-6
"""0.001 mm: the required agreement with brute force over all triangles, m."""
COAL_TOLERANCE = 1e-6
"""coal's stated distance tolerance: ``DistanceRequest.gjk_tolerance``, 1e-6 by default, m."""


def _mesh(tm: trimesh.Trimesh, name: str) -> TriangleMesh:
    return TriangleMesh.from_arrays(tm.vertices, tm.faces, name=name)


def _open_box() -> TriangleMesh:
    """A subdivided box without its top faces: an open tray."""
    v, f = box_arrays(np.array([-0.3, -0.2, -0.1]), np.array([0.3, 0.2, 0.1]), 2)
    centre = v[f].mean(axis=1)
    return TriangleMesh.from_arrays(v, f[centre[:, 2] < 0.1 - 1e-9], name="open tray")


def _sliver_sheet() -> TriangleMesh:
    """An open sheet with zero-area triangles along its middle (collinear vertices)."""
    v = np.array(
        [
            [0.0, 0.0, 0.0],
            [1.0, 0.0, 0.0],
            [0.5, 0.0, 0.0],
            [0.0, 0.5, 0.0],
            [1.0, 0.5, 0.0],
            [0.2, 0.0, 0.0],
        ]
    )
    f = np.array([[0, 2, 3], [2, 1, 4], [2, 4, 3], [0, 5, 2], [5, 2, 1]])
    return TriangleMesh.from_arrays(v, f, name="sheet with slivers")


MESHES = {
    "sphere": lambda: _mesh(trimesh.creation.icosphere(subdivisions=3, radius=0.3), "sphere"),
    "torus": lambda: _mesh(trimesh.creation.torus(0.35, 0.1), "torus"),
    "housing": lambda: housing_mesh(0.8, triangles=4_000),
    "open tray": _open_box,
    "sheet with slivers": _sliver_sheet,
}


@pytest.fixture(scope="module", params=list(MESHES))
def mesh(request) -> TriangleMesh:
    return MESHES[request.param]()


def _random_capsules(rng: np.random.Generator, mesh: TriangleMesh, count: int):
    """Capsules scattered over the mesh's bounding box grown by a quarter of its size."""
    lo, hi = mesh.bounds
    grow = 0.25 * (hi - lo).max()
    centre = rng.uniform(lo - grow, hi + grow, (count, 3))
    axis = rng.normal(size=(count, 3))
    axis /= np.linalg.norm(axis, axis=1, keepdims=True)
    half = rng.uniform(0.0, 0.3, count)[:, None] * (hi - lo).max()
    radius = rng.uniform(0.005, 0.08, count)
    return centre - half * axis, centre + half * axis, radius


def test_generated_meshes_closedness(mesh: TriangleMesh) -> None:
    # A sphere, a torus and a union of touching closed boxes bound solids; a tray
    # without a lid and a flat sheet do not (common practice, no source).
    assert mesh.is_closed == (mesh.name in ("sphere", "torus", "generated housing"))


def test_capsule_distance_matches_brute_force(reference, mesh: TriangleMesh) -> None:
    rng = np.random.default_rng(SEED)
    a, b, r = _random_capsules(rng, mesh, 150)
    result = closest_points_capsule_mesh(a, b, r, mesh, np.eye(4))
    assert result.is_signed == mesh.is_closed
    expected, inside = reference.capsule_mesh_distance(mesh, a, b, r)
    # Apart from the solid: exact, u - r, to 0.001 mm; crossing or inside: the
    # documented estimate min(sd(a), sd(b), 0) - r (brute force over all triangles).
    np.testing.assert_allclose(result.distance, expected, rtol=0, atol=EXACT)
    assert np.all(result.distance[inside] <= -r[inside] + EXACT)
    assert 0 < inside.sum() < len(r) or not mesh.is_closed
    # Witnesses: separated by |distance|; the mesh witness lies on the surface.
    gap = np.linalg.norm(result.witness[:, 0] - result.witness[:, 1], axis=1)
    np.testing.assert_allclose(gap, np.abs(result.distance), rtol=0, atol=EXACT)
    on_surface = [
        reference.point_triangles_distance(w, mesh.triangles).min() for w in result.witness[:, 1]
    ]
    np.testing.assert_allclose(on_surface, 0.0, atol=EXACT)


def test_capsule_wholly_inside_a_closed_mesh_is_negative(reference) -> None:
    sphere = MESHES["sphere"]()
    a = np.array([[-0.05, 0.0, 0.0], [0.0, -0.1, 0.02]])
    b = np.array([[0.05, 0.0, 0.0], [0.0, 0.1, 0.02]])
    result = closest_points_capsule_mesh(a, b, 0.01, sphere, np.eye(4))
    # Depth of the deeper end point: its distance to the faceted surface by brute force.
    depth = np.array(
        [
            max(reference.point_triangles_distance(p, sphere.triangles).min() for p in (a[k], b[k]))
            for k in range(2)
        ]
    )
    np.testing.assert_allclose(result.distance, -(0.01 + depth), atol=EXACT)
    # The same capsules against the open tray's inside region stay positive (unsigned).
    tray = _open_box()
    assert np.all(closest_points_capsule_mesh(a, b, 0.01, tray, np.eye(4)).distance > 0.0)


def test_distance_is_invariant_under_the_mesh_pose(mesh: TriangleMesh) -> None:
    rng = np.random.default_rng(SEED + 1)
    a, b, r = _random_capsules(rng, mesh, 60)
    T = np.eye(4)
    T[:3, :3] = rotation_matrix_from_rotation_vector(np.array([0.3, -1.1, 0.7]))
    T[:3, 3] = (0.4, -2.0, 1.5)
    local = closest_points_capsule_mesh(a, b, r, mesh, np.eye(4))
    moved = closest_points_capsule_mesh(
        a @ T[:3, :3].T + T[:3, 3], b @ T[:3, :3].T + T[:3, 3], r, mesh, T
    )
    # Distances are invariant under rigid motions (closed form).
    np.testing.assert_allclose(moved.distance, local.distance, atol=1e-9)
    np.testing.assert_allclose(moved.witness, local.witness @ T[:3, :3].T + T[:3, 3], atol=1e-9)


@pytest.mark.parametrize("margin_fraction", [0.0, 0.5, 2.0, -0.5])
def test_collide_only_agrees_with_distance(mesh: TriangleMesh, margin_fraction: float) -> None:
    rng = np.random.default_rng(SEED + 2)
    a, b, r = _random_capsules(rng, mesh, 200)
    margin = margin_fraction * 0.04
    distance = closest_points_capsule_mesh(a, b, r, mesh, np.eye(4)).distance
    colliding = collision_capsules_mesh(a, b, r, mesh, np.eye(4), margin_m=margin)
    # The collide-only mode decides distance < margin (its definition).
    np.testing.assert_array_equal(colliding, distance < margin)


def test_points_inside_agree_with_winding_numbers(reference, mesh: TriangleMesh) -> None:
    rng = np.random.default_rng(SEED + 3)
    lo, hi = mesh.bounds
    x = rng.uniform(lo - 0.1, hi + 0.1, (400, 3))
    inside = points_inside_mesh(x, mesh)
    if mesh.is_closed:
        # Generalised winding number by solid angles (Van Oosterom and Strackee 1983).
        np.testing.assert_array_equal(
            inside, np.abs(reference.winding_numbers(x, mesh.triangles)) > 0.5
        )
    else:
        assert not inside.any()
    distance, closest = signed_distance_points_mesh(x, mesh, np.eye(4))
    np.testing.assert_allclose(distance, reference.signed_point_mesh_distance(mesh, x), atol=EXACT)
    np.testing.assert_allclose(np.linalg.norm(x - closest, axis=1), np.abs(distance), atol=EXACT)


def test_inside_test_on_grid_aligned_points() -> None:
    # Points level with the housing's vertex rows and wall planes make rays meet
    # edges and vertices head on; the test retries other directions. Inside the
    # wall boxes by construction of the housing (closed form of its boxes).
    from posebridge.bench.meshes import housing_boxes

    housing = housing_mesh(0.8, triangles=4_000)
    boxes = housing_boxes(0.8)
    centres = np.array([0.5 * (lo + hi) for lo, hi in boxes])
    assert points_inside_mesh(centres, housing).all()
    hollow = np.array([[0.8 * 0.9, 0.0, 0.8 * 0.8], [0.8 * 0.9, 0.0, 0.8 * 0.2]])
    assert not points_inside_mesh(hollow, housing).any()


def _coal_model(mesh: TriangleMesh) -> coal.BVHModelOBBRSS:
    model = coal.BVHModelOBBRSS()
    model.beginModel(mesh.triangle_count, mesh.vertices.shape[0])
    model.addVertices(mesh.vertices)
    model.addTriangles(mesh.faces)
    model.endModel()
    return model


def _coal_capsule_pose(a: np.ndarray, b: np.ndarray) -> coal.Transform3s:
    """coal capsules lie along their local z, centred: the pose mapping z onto ``b - a``."""
    axis = b - a
    z = axis / np.linalg.norm(axis)
    helper = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(helper, z)
    x /= np.linalg.norm(x)
    return coal.Transform3s(np.column_stack([x, np.cross(z, x), z]), 0.5 * (a + b))


def test_capsule_distance_matches_coal(mesh: TriangleMesh) -> None:
    rng = np.random.default_rng(SEED + 4)
    a, b, r = _random_capsules(rng, mesh, 120)
    keep = np.linalg.norm(b - a, axis=1) > 1e-3
    a, b, r = a[keep], b[keep], r[keep]
    T = np.eye(4)
    T[:3, :3] = rotation_matrix_from_rotation_vector(np.array([0.2, 0.5, -0.4]))
    T[:3, 3] = (0.1, 0.2, -0.3)
    ours = closest_points_capsule_mesh(a, b, r, mesh, T)
    model = _coal_model(mesh)
    mesh_pose = coal.Transform3s(T[:3, :3], T[:3, 3])
    local_points = np.concatenate([a, b]) @ T[:3, :3] - T[:3, :3].T @ T[:3, 3]
    inside = points_inside_mesh(local_points, mesh).reshape(2, -1).any(axis=0)
    compared = 0
    for k in range(len(a)):
        capsule = coal.Capsule(float(r[k]), float(np.linalg.norm(b[k] - a[k])))
        pose = _coal_capsule_pose(a[k], b[k])
        request = coal.DistanceRequest()
        answer = coal.DistanceResult()
        coal_distance = coal.distance(model, mesh_pose, capsule, pose, request, answer)
        collide = coal.CollisionResult()
        coal.collide(model, mesh_pose, capsule, pose, coal.CollisionRequest(), collide)
        if inside[k]:
            # coal treats a mesh as a surface: a capsule wholly inside is apart from it;
            # posebridge reports it negative (closed meshes have an inside).
            assert ours.distance[k] < 0.0
            continue
        compared += 1
        if coal_distance > COAL_TOLERANCE:
            # coal BVH distance, stated tolerance.
            assert ours.distance[k] == pytest.approx(coal_distance, abs=COAL_TOLERANCE)
        if abs(ours.distance[k]) > COAL_TOLERANCE:
            # coal BVH collision (mesh as a surface) agrees outside the tolerance band.
            assert collide.isCollision() == (ours.distance[k] < 0.0)
    assert compared > 30


def test_hierarchy_covers_every_triangle_once(mesh: TriangleMesh) -> None:
    bvh = MeshBVH.build(mesh, leaf_size=3)
    leaves = bvh.link[bvh.link[:, 1] > 0]
    covered = np.concatenate([np.arange(f, f + c) for f, c in leaves])
    # A partition of the triangles (definition of a hierarchy over them).
    np.testing.assert_array_equal(np.sort(covered), np.arange(mesh.triangle_count))
    np.testing.assert_array_equal(np.sort(bvh.face_index), np.arange(mesh.triangle_count))
    # Every leaf box holds its triangles (definition of a bounding volume).
    corners = bvh.triangles[:, :9].reshape(-1, 3, 3)
    for node in np.flatnonzero(bvh.link[:, 1] > 0):
        first, count = bvh.link[node]
        points = corners[first : first + count].reshape(-1, 3)
        assert np.all(points >= bvh.box[node, :3] - 1e-15)
        assert np.all(points <= bvh.box[node, 3:] + 1e-15)


def test_crossing_through_edges_and_vertices() -> None:
    # Segments that leave a subdivided cube exactly through a vertex or along grid lines:
    # the crossing distance comes out at rounding size, and the inside end's depth decides.
    v, f = box_arrays(np.full(3, -0.5), np.full(3, 0.5), 2)  # vertices every 0.25 m
    cube = TriangleMesh.from_arrays(v, f, name="cube")
    a = np.array([[0.0, 0.0, 0.0], [0.25, 0.25, 0.1], [0.25, 0.5, 0.25], [-0.75, 0.0, 0.0]])
    b = np.array([[0.0, 0.0, 0.8], [0.25, 0.25, 0.9], [0.25, 0.9, 0.25], [0.75, 0.0, 0.0]])
    r = 0.02
    result = closest_points_capsule_mesh(a, b, r, cube, np.eye(4))
    # Depth of the inside end in the cube |x_i| <= 0.5: 0.5 - max|x_i| (closed form); the last
    # segment passes straight through with both ends outside: -r.
    expected = np.array([-(r + 0.5), -(r + 0.25), -(r + 0.0), -r])
    np.testing.assert_allclose(result.distance, expected, atol=EXACT)
    for margin in (0.0, 0.01):
        assert collision_capsules_mesh(a, b, r, cube, np.eye(4), margin_m=margin).all()
