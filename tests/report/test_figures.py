"""Report figures: solid meshes and outlines against closed forms.

Mesh volumes use the divergence theorem (signed tetrahedron volumes
``sum(a . (b x c)) / 6`` over the triangles of a closed, consistently
oriented surface); polygon areas the shoelace formula. A regular N-gon
inscribed in a circle of radius r has area ``N r^2 sin(2 pi / N) / 2``.
"""

from __future__ import annotations

import shutil

import numpy as np
import pytest

from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.report.figures import (
    box_mesh,
    capsule_mesh,
    cartesian_figures,
    cylinder_mesh,
    joint_map_figure,
    outline_2d,
    scene_meshes,
)
from posebridge.resources import data_folder
from posebridge.spaces.joint_map import joint_map
from posebridge.transforms import transform_from_position_rpy
from posebridge.units import mm_from_m


def _volume(vertices: np.ndarray, triangles: np.ndarray) -> float:
    a, b, c = (vertices[triangles[:, k]] for k in range(3))
    return float(np.einsum("ij,ij->i", a, np.cross(b, c)).sum() / 6.0)


def _area(polygon: np.ndarray) -> float:
    x, y = polygon[:-1, 0], polygon[:-1, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _segment_distance(points: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    t = np.clip((points - a) @ (b - a) / np.dot(b - a, b - a), 0.0, 1.0)
    return np.linalg.norm(points - (a + t[:, None] * (b - a)), axis=1)


POSE = transform_from_position_rpy(
    np.array([0.3, -0.2, 0.5]), np.array([20.0, -35.0, 70.0]), degrees=True
)


def test_box_mesh_corners_and_volume() -> None:
    half = np.array([0.1, 0.2, 0.3])
    vertices, triangles = box_mesh(POSE, half)
    assert triangles.shape == (12, 3)
    local = (vertices - POSE[:3, 3]) @ POSE[:3, :3]  # back into the box frame
    assert np.allclose(np.abs(local), half)  # every corner at (+-hx, +-hy, +-hz)
    assert len({tuple(np.sign(p).astype(int)) for p in local}) == 8
    # closed, consistently oriented: |volume| = 8 hx hy hz
    assert abs(_volume(vertices, triangles)) == pytest.approx(8 * 0.1 * 0.2 * 0.3)


def test_cylinder_mesh_volume_is_inscribed_prism() -> None:
    radius, half_length, segments = 0.25, 0.4, 32
    vertices, triangles = cylinder_mesh(POSE, radius, half_length, segments=segments)
    prism = 0.5 * segments * radius**2 * np.sin(2 * np.pi / segments) * 2 * half_length
    assert abs(_volume(vertices, triangles)) == pytest.approx(prism)


def test_capsule_mesh_points_lie_on_the_surface() -> None:
    a, b, radius = np.array([0.1, 0.0, 0.2]), np.array([0.4, 0.3, 0.9]), 0.07
    vertices, triangles = capsule_mesh(a, b, radius)
    # surface of a capsule: distance exactly r from the segment (definition)
    assert np.allclose(_segment_distance(vertices, a, b), radius)
    assert triangles.max() < len(vertices)
    # closed and consistently oriented: volume below the exact capsule volume
    # pi r^2 L + 4/3 pi r^3 and above half of it (inscribed polyhedron)
    exact = np.pi * radius**2 * np.linalg.norm(b - a) + 4.0 / 3.0 * np.pi * radius**3
    assert 0.5 * exact < abs(_volume(vertices, triangles)) < exact


def test_capsule_mesh_of_a_sphere() -> None:
    centre = np.array([0.0, 0.0, 1.0])
    vertices, _ = capsule_mesh(centre, centre, 0.1)
    assert np.allclose(np.linalg.norm(vertices - centre, axis=1), 0.1)


def test_outline_of_rotated_box_projection() -> None:
    # plan outline of a box turned 30 deg about z: its area is the footprint 2hx * 2hy
    T = transform_from_position_rpy(
        np.array([1.0, 2.0, 0.0]), np.array([0.0, 0.0, 30.0]), degrees=True
    )
    vertices, _ = box_mesh(T, np.array([0.2, 0.1, 0.5]))
    outline = outline_2d(vertices[:, :2])
    assert np.allclose(outline[0], outline[-1])  # closed
    assert _area(outline) == pytest.approx(0.4 * 0.2)


def test_outline_of_collinear_points() -> None:
    outline = outline_2d(np.array([[0.0, 0.0], [1.0, 0.0], [3.0, 0.0]]))
    assert np.allclose(outline, [[0.0, 0.0], [3.0, 0.0], [0.0, 0.0]])


@pytest.fixture(scope="module")
def demo_scene(tmp_path_factory: pytest.TempPathFactory) -> Scene:
    path = tmp_path_factory.mktemp("cell") / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return resolve_scene(load_cell(path), path)


def test_scene_meshes_cover_every_solid(demo_scene: Scene) -> None:
    meshes = scene_meshes(demo_scene, demo_scene.robot.home_configuration())
    kinds = [mesh.kind for mesh in meshes]
    assert kinds.count("fixture") == len(demo_scene.boxes.names) + len(demo_scene.cylinders.names)
    assert kinds.count("keep-out") == len(demo_scene.keep_outs.names)
    assert kinds.count("pedestal") == len(demo_scene.pedestal.names)
    assert kinds.count("robot") == len(demo_scene.robot.capsules)
    assert kinds.count("tool") == len(demo_scene.tool_capsules.names)


def test_plan_outline_of_a_box_fixture(demo_scene: Scene) -> None:
    figures = cartesian_figures(demo_scene, demo_scene.robot.home_configuration())
    [trace] = [t for t in figures["plan"]["data"] if t["name"] == "fixtures"]
    cell = demo_scene.cell
    name = "conveyor-belt"  # a box without rotation, on a frame fixture without rotation
    k = demo_scene.boxes.names.index(name)
    centre = mm_from_m(demo_scene.boxes.T_world[k, :3, 3])
    size = next(f.size_mm for f in cell.fixtures if f.name == name)
    xs = [x for x, label in zip(trace["x"], trace["text"], strict=True) if label == name]
    ys = [y for y, label in zip(trace["y"], trace["text"], strict=True) if label == name]
    # closed form: the outline spans centre +- size / 2 (rounded to 0.1 mm)
    assert min(xs) == pytest.approx(centre[0] - size[0] / 2, abs=0.05)
    assert max(xs) == pytest.approx(centre[0] + size[0] / 2, abs=0.05)
    assert min(ys) == pytest.approx(centre[1] - size[1] / 2, abs=0.05)
    assert max(ys) == pytest.approx(centre[1] + size[1] / 2, abs=0.05)


def test_targets_in_every_view(demo_scene: Scene) -> None:
    figures = cartesian_figures(demo_scene, demo_scene.robot.home_configuration())
    position = mm_from_m(demo_scene.targets.T_world_target[:, :3, 3])
    for key, axes in (("scene3d", (0, 1, 2)), ("plan", (0, 1)), ("elevation", (0, 2))):
        [trace] = [t for t in figures[key]["data"] if t["name"] == "targets"]
        assert trace["text"] == list(demo_scene.targets.names)
        for slot, axis in zip("xyz", axes, strict=False):
            assert np.allclose(trace[slot], position[:, axis], atol=0.05)


def test_joint_map_figure_categories(demo_scene: Scene) -> None:
    q = demo_scene.robot.home_configuration()
    computed = joint_map(clearance_scene(demo_scene), (1, 2), q, resolution=24)
    figure = joint_map_figure(computed, np.degrees(q))
    heatmap = figure["data"][0]
    z = np.array(heatmap["z"]).T  # the figure holds rows along the vertical joint
    # free cells are category 0, exactly where the map has neither obstacle nor self contact
    assert np.array_equal(z == 0, computed.free)
    legend = [t["name"] for t in figure["data"][1:] if t["name"].startswith("collision: ")]
    present = {computed.obstacle_names[k] for k in np.unique(computed.obstacle) if k >= 0}
    expected = {f"collision: {name}" for name in present}
    if np.any(computed.self_collision & (computed.obstacle < 0)):
        expected.add("collision: arm itself")
    assert set(legend) == expected
    rect = figure["layout"]["shapes"][0]
    assert [rect["x0"], rect["x1"]] == pytest.approx(
        np.degrees(demo_scene.robot.lower[1:2]).tolist()
        + np.degrees(demo_scene.robot.upper[1:2]).tolist()
    )
