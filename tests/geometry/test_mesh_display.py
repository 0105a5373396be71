"""Display meshes: the triangle budget, metres, poses, budget sharing, the cache.

References: the full mesh itself (a decimated mesh stays inside its bounding
box grown by little and keeps its extent; mm = 1000 m by definition), the
closed-form triangle counts of the generated meshes.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from posebridge.bench.meshes import box_arrays, housing_mesh
from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.geometry.mesh_display import decimate_for_display, split_triangle_budget
from posebridge.geometry.meshes import TriangleMesh
from posebridge.transforms import rotation_matrix_from_rotation_vector

MESHES = {
    "sphere": lambda: TriangleMesh.from_arrays(
        *(lambda m: (m.vertices, m.faces))(trimesh.creation.icosphere(5, 0.4)), name="sphere"
    ),
    # Thin subdivided plates stop quadric decimation early; clustering finishes the job.
    "thin plate": lambda: TriangleMesh.from_arrays(
        *box_arrays(np.zeros(3), np.array([1.0, 0.5, 0.03]), 5), name="thin plate"
    ),
    "housing": lambda: housing_mesh(1.0, triangles=20_000),
}


@pytest.mark.parametrize("name", list(MESHES))
@pytest.mark.parametrize("budget", [12, 400, 5_000])
def test_budget_is_met_and_the_shape_kept(name: str, budget: int) -> None:
    mesh = MESHES[name]()
    display = decimate_for_display(mesh, max_triangles=budget)
    assert 0 < display.triangle_count <= budget
    assert display.source_triangles == mesh.triangle_count
    assert display.faces.min() >= 0
    assert display.faces.max() < display.vertices_m.shape[0]
    lo, hi = mesh.bounds
    size = float(np.max(hi - lo))
    # Every display vertex lies within the full mesh's bounding box, grown by 5 % (decimation
    # moves vertices inside the shape's neighbourhood; common practice, no source).
    assert np.all(display.vertices_m >= lo - 0.05 * size)
    assert np.all(display.vertices_m <= hi + 0.05 * size)
    if budget >= 400:
        # Enough triangles keep the extent to 10 % (common practice, no source).
        extent = display.vertices_m.max(axis=0) - display.vertices_m.min(axis=0)
        np.testing.assert_allclose(extent, hi - lo, rtol=0.0, atol=0.1 * size)


def test_small_meshes_are_sent_whole() -> None:
    v, f = box_arrays(np.zeros(3), np.array([0.1, 0.2, 0.3]), 0)
    mesh = TriangleMesh.from_arrays(v, f, name="box")
    display = decimate_for_display(mesh, max_triangles=100)
    np.testing.assert_array_equal(display.vertices_m, mesh.vertices)
    np.testing.assert_array_equal(display.faces, mesh.faces)


def test_posed_moves_vertices() -> None:
    v, f = box_arrays(np.zeros(3), np.array([0.1, 0.2, 0.3]), 0)
    display = decimate_for_display(TriangleMesh.from_arrays(v, f, name="box"), max_triangles=100)
    T = np.eye(4)
    T[:3, :3] = rotation_matrix_from_rotation_vector(np.array([0.0, 0.0, np.pi / 2]))
    T[:3, 3] = (1.0, 2.0, 3.0)
    posed = display.posed(T)
    # x_world = R x + t (closed form); a quarter turn about z: (x, y, z) -> (-y, x, z).
    v_m = display.vertices_m
    expected = np.stack([1.0 - v_m[:, 1], 2.0 + v_m[:, 0], 3.0 + v_m[:, 2]], axis=1)
    np.testing.assert_allclose(posed.vertices_m, expected, atol=1e-12)
    with pytest.raises(GeometryInputError, match="T_world_mesh"):
        display.posed(np.eye(3))


def test_budget_sharing() -> None:
    # Everything fits: every mesh whole.
    assert split_triangle_budget([100, 200], 1_000) == [100, 200]
    shares = split_triangle_budget([10_000, 30_000, 60_000, 5], 10_000)
    assert sum(shares) <= 10_000
    # The tiny mesh whole, the other 9 995 shared 10 % / 30 % / 60 %, rounded down (closed form).
    assert shares == [999, 2_998, 5_997, 5]


def test_display_meshes_are_cached(tmp_path) -> None:
    mesh = MESHES["sphere"]()
    cache = MeshCache(tmp_path)
    first = decimate_for_display(mesh, max_triangles=300, cache=cache)
    second = decimate_for_display(mesh, max_triangles=300, cache=cache)
    assert (cache.misses, cache.hits) == (1, 1)
    np.testing.assert_array_equal(first.faces, second.faces)
    np.testing.assert_array_equal(first.vertices_m, second.vertices_m)


def test_entries_of_the_millimetre_format_are_not_read(tmp_path) -> None:
    mesh = MESHES["sphere"]()
    cache = MeshCache(tmp_path)
    fresh = decimate_for_display(mesh, max_triangles=300)
    # an entry as the earlier format stored it: key without the format, vertices in mm
    old_key = cache_key("display", mesh.content_key, "300")
    cache.store(old_key, {"vertices_mm": fresh.vertices_m * 1000.0, "faces": fresh.faces})
    shown = decimate_for_display(mesh, max_triangles=300, cache=cache)
    assert (cache.misses, cache.hits) == (1, 0)
    np.testing.assert_array_equal(shown.vertices_m, fresh.vertices_m)


def test_budget_is_checked() -> None:
    with pytest.raises(GeometryInputError, match="max_triangles: expected an integer >= 12"):
        decimate_for_display(MESHES["sphere"](), max_triangles=3)


def test_decimations_on_threads_at_once_do_not_mix_meshes() -> None:
    from concurrent.futures import ThreadPoolExecutor

    # two different boxes, each decimated alone first, then many at once on threads
    meshes = [
        TriangleMesh.from_arrays(*box_arrays(np.zeros(3), np.array(hi), 4), name=str(hi))
        for hi in ([1.0, 0.2, 0.1], [0.05, 2.0, 0.3])
    ]
    alone = [decimate_for_display(mesh, max_triangles=500) for mesh in meshes]
    with ThreadPoolExecutor(max_workers=4) as pool:
        together = list(
            pool.map(lambda k: decimate_for_display(meshes[k % 2], max_triangles=500), range(16))
        )
    for k, display in enumerate(together):
        # the same input gives the same output (the library is deterministic); a mixed-up
        # call would return the other box's triangles
        np.testing.assert_array_equal(display.vertices_m, alone[k % 2].vertices_m)
        np.testing.assert_array_equal(display.faces, alone[k % 2].faces)
