"""A mesh fixture carried by a turntable: it turns with the table in posed scenes, and its exact
mesh clearance agrees with the same solid given as a box fixture (posebridge's exact box
distance, Ericson 2004, sec. 5.1: a separate code path) at every table angle.

The mesh is trimesh's box primitive, written by the test.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import trimesh

from posebridge.cell.clearance import clearance_along
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.resources import data_folder
from posebridge.units import rad_from_deg

DEMO = data_folder("robots") / "demo-track-cell.json"
JIG_MM = (500.0, 300.0, 300.0)  # the demo's weld jig


def _scene(folder: Path, *, mesh: bool) -> Scene:
    data = json.loads(DEMO.read_text())
    jig = next(f for f in data["fixtures"] if f["name"] == "weld-jig")
    if mesh:
        trimesh.creation.box(extents=JIG_MM).export(folder / "jig.stl")
        del jig["size_mm"]
        jig.update({"shape": "mesh", "file": "jig.stl", "unit": "mm"})
    path = folder / ("mesh.json" if mesh else "box.json")
    path.write_text(json.dumps(data))
    return resolve_scene(load_cell(path), path)


@pytest.fixture(scope="module")
def scenes(tmp_path_factory: pytest.TempPathFactory) -> tuple[Scene, Scene]:
    folder = tmp_path_factory.mktemp("turntable-mesh")
    return _scene(folder, mesh=True), _scene(folder, mesh=False)


@pytest.mark.parametrize("angle_deg", [0.0, 37.0, 90.0, -150.0])
def test_mesh_fixture_turns_with_the_table(scenes: tuple[Scene, Scene], angle_deg: float) -> None:
    mesh_scene, _ = scenes
    posed = posed_scene(mesh_scene, [1.5, float(rad_from_deg(angle_deg))])
    k = posed.meshes.names.index("weld-jig")
    T0, T = mesh_scene.meshes.T_world[k], posed.meshes.T_world[k]
    c, s = np.cos(np.radians(angle_deg)), np.sin(np.radians(angle_deg))
    Rz = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
    # closed form: a turn about the vertical line through the table centre (2000, -1300) mm
    centre = np.array([2.0, -1.3, 0.0])
    assert T[:3, :3] == pytest.approx(Rz @ T0[:3, :3], abs=1e-12)
    assert T[:3, 3] == pytest.approx(centre + Rz @ (T0[:3, 3] - centre), abs=1e-12)


def test_turned_mesh_clearance_matches_the_box_fixture(scenes: tuple[Scene, Scene]) -> None:
    mesh_scene, box_scene = scenes
    robot = mesh_scene.robot
    rng = np.random.default_rng(0)
    count = 1000
    q = rng.uniform(robot.lower, robot.upper, size=(count, robot.dof))
    angles = rng.uniform(rad_from_deg(-185.0), rad_from_deg(185.0), size=count)
    external = np.stack([np.full(count, 2.0), angles], axis=1)  # the carriage at the table
    by_mesh = clearance_along(mesh_scene, q, external, scope="environment")
    by_box = clearance_along(box_scene, q, external, scope="environment")
    outside = (by_box.distance > 1e-4) & (by_mesh.distance > 1e-4)
    # the same solid: the exact mesh distance agrees with the exact box distance outside it
    np.testing.assert_allclose(by_mesh.distance[outside], by_box.distance[outside], atol=1e-6)
    jig = [
        k for k in np.flatnonzero(outside) if by_mesh.obstacle_names[by_mesh.other[k]] == "weld-jig"
    ]
    assert len(jig) >= 5  # the jig is the closest obstacle of enough rows to matter
