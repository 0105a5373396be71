"""Report figures: outlines, targets and the joint map against closed forms.

Polygon areas use the shoelace formula.
"""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.clearance import clearance_scene
from posebridge.cell.scene import Scene
from posebridge.report.figures import cartesian_figures, joint_map_figure, outline_2d
from posebridge.report.meshes import box_mesh
from posebridge.spaces.joint_map import joint_map
from posebridge.transforms import transform_from_position_rpy
from posebridge.units import mm_from_m


def _area(polygon: np.ndarray) -> float:
    x, y = polygon[:-1, 0], polygon[:-1, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


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
