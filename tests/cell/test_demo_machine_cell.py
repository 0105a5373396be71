"""The machine-tending demo cell: generated mesh files, door-opening target, every clearance user.

References: the committed files are compared byte for byte with a fresh run
of the generator; the binary STL writer against trimesh's own STL reader;
the door-opening claim against the same cell with the housing replaced by a
box over its bounding box (posebridge's exact box clearance, a separate code
path, Ericson 2004, sec. 5.1).
"""

from __future__ import annotations

import copy
import hashlib
import io
import json

import numpy as np
import pytest
import trimesh

from posebridge.bench.demo_meshes import (
    DEMO_MESH_FILES,
    HOUSING_SIZE_M,
    demo_mesh_bytes,
    stl_bytes,
)
from posebridge.bench.meshes import housing_boxes
from posebridge.cell.checks import check_targets
from posebridge.cell.files import load_cell
from posebridge.cell.mesh_fixtures import MeshFixtureLoader
from posebridge.cell.model import validate_cell
from posebridge.cell.pose_diagnosis import diagnose_pose
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.path_check import check_path
from posebridge.planning.placement import PlacementGrid, search_base_placement
from posebridge.planning.rrt import plan_joint_move
from posebridge.resources import data_folder
from posebridge.results.diagnosis import pose_diagnosis_result
from posebridge.results.joint_plan import joint_plan_result
from posebridge.results.path_check import path_check_result
from posebridge.results.target_check import target_check_result

CELL = data_folder("robots") / "demo-machine-cell.json"


@pytest.fixture(scope="module")
def scene() -> Scene:
    return resolve_scene(load_cell(CELL), CELL, mesh_loader=MeshFixtureLoader())


def test_committed_mesh_files_are_the_generator_output() -> None:
    generated = demo_mesh_bytes()
    assert sorted(generated) == sorted(DEMO_MESH_FILES)
    for name, data in generated.items():
        committed = (CELL.parent / "meshes" / name).read_bytes()
        # our own contract (bench/demo_meshes.py): regenerating gives the same bytes
        assert hashlib.sha256(committed).hexdigest() == hashlib.sha256(data).hexdigest(), name


def test_stl_writer_is_read_back_by_trimesh() -> None:
    box = trimesh.creation.box(extents=(2.0, 3.0, 4.0))
    data = stl_bytes(np.asarray(box.vertices), np.asarray(box.faces))
    read = trimesh.load(io.BytesIO(data), file_type="stl", process=False)
    # trimesh's STL reader (reference library): the same triangles, in order
    np.testing.assert_allclose(read.triangles, box.triangles, atol=1e-6)
    # binary STL layout: 80-byte header, uint32 count, 50 bytes per triangle
    assert len(data) == 84 + 50 * len(box.faces)


def test_housing_is_about_100k_closed_triangles(scene: Scene) -> None:
    housing = scene.meshes.meshes[scene.meshes.names.index("machine")]
    # the figure: about 100k triangles; closed, so clearance is signed
    assert 80_000 <= housing.triangle_count <= 130_000
    assert housing.is_closed


def test_every_target_is_reachable_clear_on_one_branch(scene: Scene) -> None:
    report = target_check_result(check_targets(scene))
    # the demo's promise (its notes): every target and approach reachable on one branch
    assert all(target.reachable for target in report.targets)
    assert report.consistent_branch.consistent
    machine = report.targets[[t.name for t in report.targets].index("machine-table")]
    best = machine.target.branches[machine.target.recommended]
    assert best.closest_environment is not None
    assert best.closest_environment.other == "machine"  # reached through the door, near it


def test_door_target_collides_when_the_housing_is_a_box() -> None:
    raw = json.loads(CELL.read_text())
    boxed = copy.deepcopy(raw)
    housing = next(f for f in boxed["fixtures"] if f["name"] == "machine")
    mesh = MeshFixtureLoader().load(validate_cell(raw).fixtures[0], CELL, "fixtures[0]")  # type: ignore[arg-type]
    lo, hi = mesh.bounds * 1000.0
    centre = 0.5 * (lo + hi)
    housing.pop("file"), housing.pop("unit"), housing.pop("colour")
    housing.update(
        shape="box",
        position_mm=(np.array(housing["position_mm"]) + centre).tolist(),
        size_mm=(hi - lo).tolist(),
    )
    for target in boxed["targets"]:
        if target["fixture"] == "machine":
            target["position_mm"] = (np.array(target["position_mm"]) - centre).tolist()
    report = target_check_result(check_targets(resolve_scene(validate_cell(boxed), CELL)))
    machine = report.targets[[t.name for t in report.targets].index("machine-table")]
    # the claim: a box around the housing calls the door-opening target a collision
    assert not machine.reachable
    assert "collides" in machine.target.reason


def test_demo_path_is_clear_and_the_planner_finds_a_way_in(scene: Scene) -> None:
    report = path_check_result(check_path(scene, 0))
    assert report.ok, [f.message for f in report.findings]  # the demo's promise
    check = target_check_result(check_targets(scene))
    joints = {
        t.name: np.radians(t.target.branches[t.target.recommended].joints_deg)
        for t in check.targets
    }
    plan = joint_plan_result(
        plan_joint_move(
            scene, joints["conveyor-pick"], joints["machine-table"], seed=1, max_checks=300_000
        )
    )
    # RRT-Connect (Kuffner & LaValle 2000) through the door with the 10 mm margin
    assert plan.status == "solved", plan.message
    assert plan.min_clearance_mm is not None
    assert plan.min_clearance_mm >= 10.0 - 1e-6


def test_diagnosis_names_the_mesh_fixture_and_its_closest_point(scene: Scene) -> None:
    check = target_check_result(check_targets(scene))
    machine = check.targets[[t.name for t in check.targets].index("machine-table")]
    q = np.radians(machine.target.branches[machine.target.recommended].joints_deg)
    diagnosis = pose_diagnosis_result(diagnose_pose(scene, q))
    closest = diagnosis.closest_environment
    assert closest is not None
    assert closest.other == "machine"
    point_m = np.asarray(closest.other_point_mm) / 1000.0 - scene.meshes.T_world[0, :3, 3]
    # closed form (Ericson 2004, sec. 5.1.4): signed point-box distance to each of the
    # housing's generating boxes; the named point lies on the surface of their union
    signed = []
    for lo, hi in housing_boxes(HOUSING_SIZE_M):
        offset = np.abs(point_m - 0.5 * (lo + hi)) - 0.5 * (hi - lo)
        outside = np.linalg.norm(np.maximum(offset, 0.0))
        signed.append(outside if outside > 0.0 else offset.max())
    assert min(abs(d) for d in signed) < 1e-6
    assert min(signed) > -1e-6  # not inside any box


def test_placement_runs_with_mesh_fixtures(scene: Scene) -> None:
    grid = PlacementGrid.around(scene, half_width_mm=100.0, count=3, yaw_count=2)
    result = search_base_placement(scene, grid, top=2)
    # the current base (grid centre, yaw 0) reaches every target (the target check above)
    assert result.reach_fraction[1, 1, 0, 0] == pytest.approx(1.0)


def test_review_report_draws_the_mesh_fixtures(scene: Scene) -> None:
    from posebridge.report.meshes import REPORT_MESH_TRIANGLES, scene_meshes

    meshes = {m.name: m for m in scene_meshes(scene, np.zeros(scene.robot.dof))}
    drawn = [meshes[name] for name in ("machine", "conveyor", "fence")]
    assert all(mesh.kind == "fixture" for mesh in drawn)
    # our own budget (report/meshes.py), shared among the three meshes
    assert sum(len(mesh.triangles) for mesh in drawn) <= REPORT_MESH_TRIANGLES
    housing = meshes["machine"].vertices
    # the housing's world bounds: its file bounds (bench/meshes.py housing_boxes at 1 m:
    # x 0.45..1.35, y -0.6..0.6, z 0..1.3) moved by the fixture's 300 mm along x
    np.testing.assert_allclose(housing.min(axis=0), [0.75, -0.6, 0.0], atol=1e-6)
    np.testing.assert_allclose(housing.max(axis=0), [1.65, 0.6, 1.3], atol=1e-6)


def test_joint_map_has_a_region_for_the_housing(scene: Scene) -> None:
    from posebridge.cell.clearance import clearance_scene, clearance_to_cell
    from posebridge.spaces.joint_map import joint_map

    hold = scene.robot.home_configuration()
    grid = joint_map(clearance_scene(scene), (1, 2), hold, resolution=48)
    machine = grid.obstacle_names.index("machine")
    cells = np.argwhere(grid.obstacle == machine)
    assert len(cells) > 0  # the housing has its own region (its own colour on the page)
    for i, j in cells[:: max(1, len(cells) // 5)]:
        q = hold.copy()
        q[1], q[2] = grid.axes[0][i], grid.axes[1][j]
        result = clearance_to_cell(scene, q[None], scope="environment")
        # the map's label agrees with the cell clearance at that cell (our own contract):
        # the arm is in collision there, nearest to the housing
        assert result.distance[0] < 0.0
        assert result.pair(0)[1] == "machine"
