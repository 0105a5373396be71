"""Report meshes of the cell's solids against closed forms.

Mesh volumes use the divergence theorem (signed tetrahedron volumes
``sum(a . (b x c)) / 6`` over the triangles of a closed, consistently
oriented surface). A regular N-gon inscribed in a circle of radius r has
area ``N r^2 sin(2 pi / N) / 2``.
"""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.scene import Scene
from posebridge.report.meshes import box_mesh, capsule_mesh, cylinder_mesh, scene_meshes
from posebridge.transforms import transform_from_position_rpy


def _volume(vertices: np.ndarray, triangles: np.ndarray) -> float:
    a, b, c = (vertices[triangles[:, k]] for k in range(3))
    return float(np.einsum("ij,ij->i", a, np.cross(b, c)).sum() / 6.0)


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


def test_scene_meshes_cover_every_solid(demo_scene: Scene) -> None:
    meshes = scene_meshes(demo_scene, demo_scene.robot.home_configuration())
    kinds = [mesh.kind for mesh in meshes]
    assert kinds.count("fixture") == len(demo_scene.boxes.names) + len(demo_scene.cylinders.names)
    assert kinds.count("keep-out") == len(demo_scene.keep_outs.names)
    assert kinds.count("pedestal") == len(demo_scene.pedestal.names)
    assert kinds.count("robot") == len(demo_scene.robot.capsules)
    assert kinds.count("tool") == len(demo_scene.tool_capsules.names)
