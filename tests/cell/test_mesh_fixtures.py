"""Mesh fixtures in cells: files, units, poses, attachments, and clearance in every user.

Test meshes are made here with trimesh's box primitive and written as files;
references are closed forms (a capsule above a box) and posebridge's exact
box clearance (Ericson 2004, sec. 5.1, a separate code path) on the same box
given as a box fixture.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import trimesh

from posebridge.cell.clearance import (
    clearance_scene,
    clearance_to_cell,
    obstacle_kinds,
    obstacle_names,
)
from posebridge.cell.files import load_cell
from posebridge.cell.mesh_fixtures import MeshFixtureLoader
from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.scene import resolve_scene
from posebridge.geometry.clearance import collision_batch
from posebridge.geometry.mesh_cache import MeshCache

LIFT_TOML = (Path(__file__).parents[1] / "fixtures" / "robots" / "lift-1.toml").read_text(
    encoding="utf-8"
)
"""The shared test robot: a one-joint vertical lift (prismatic z)."""


def write_box(path: Path, size: tuple[float, float, float], *, scale: float = 1.0) -> Path:
    """A closed box centred on the origin, side lengths ``size`` times ``scale``, as a file."""
    box = trimesh.creation.box(extents=np.array(size) * scale)
    box.export(path)
    return path


def lift_cell(folder: Path, fixture: dict) -> Path:
    """A one-capsule vertical lift over a 400 x 400 x 200 mm table whose top is at z = 0."""
    data = {
        "schema_version": 1,
        "robot": {"toml": LIFT_TOML},
        "tool": {
            "name": "rod",
            "tcp": {"position_mm": [0.0, 0.0, 0.0]},
            "capsules": [
                {
                    "name": "rod",
                    "start_mm": [0.0, 0.0, 0.0],
                    "end_mm": [0.0, 0.0, 200.0],
                    "radius_mm": 30.0,
                }
            ],
        },
        "floor_height_mm": -1000.0,
        "fixtures": [{"name": "table", "position_mm": [0.0, 0.0, -100.0], **fixture}],
        "targets": [{"name": "on-table", "fixture": "table", "position_mm": [0.0, 0.0, 150.0]}],
    }
    path = folder / "cell.json"
    path.write_text(json.dumps(data))
    return path


def loader(tmp_path: Path) -> MeshFixtureLoader:
    return MeshFixtureLoader(MeshCache(tmp_path / "cache"))


@pytest.mark.parametrize("height_mm", [100.0, 31.0, 10.0])
def test_capsule_above_a_mesh_table_closed_form(tmp_path: Path, height_mm: float) -> None:
    write_box(tmp_path / "table.stl", (400.0, 400.0, 200.0))
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "table.stl", "unit": "mm"})
    scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    result = clearance_to_cell(scene, [[height_mm / 1000.0]])
    # closed form: a vertical capsule whose lowest axis point is ``gap`` above the
    # table top: distance = gap - radius
    assert result.distance[0] == pytest.approx((height_mm - 30.0) / 1000.0, abs=1e-9)
    assert result.pair(0) == ("rod", "table", "fixture")
    # closed form: the closest point on the table is the top face's centre
    np.testing.assert_allclose(result.witness_world[0, 1], [0.0, 0.0, 0.0], atol=1e-9)


def test_mesh_fixture_comes_after_boxes_and_cylinders_and_targets_ride_on_it(
    tmp_path: Path,
) -> None:
    write_box(tmp_path / "table.stl", (400.0, 400.0, 200.0))
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "table.stl", "unit": "mm"})
    raw = json.loads(path.read_text())
    raw["fixtures"].append(
        {"name": "post", "shape": "box", "position_mm": [900, 0, 0], "size_mm": [50, 50, 50]}
    )
    raw["keep_outs"] = [{"name": "zone", "position_mm": [0, 900, 0], "size_mm": [50, 50, 50]}]
    path.write_text(json.dumps(raw))
    scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    # our own contract (cell/clearance.py docstring): boxes, cylinders, meshes, keep-outs,
    # pedestal, floor
    assert obstacle_names(scene) == ["post", "table", "zone", "floor"]
    assert obstacle_kinds(scene) == ["fixture", "fixture", "keep-out", "floor"]
    # closed form: the target is 150 mm above the table frame at z = -100 mm
    np.testing.assert_allclose(scene.targets.T_world_target[0, :3, 3], [0.0, 0.0, 0.05])


def test_mesh_clearance_agrees_with_the_same_box_as_a_box_fixture(tmp_path: Path) -> None:
    size = (300.0, 500.0, 400.0)
    write_box(tmp_path / "block.stl", size)
    pose = {"position_mm": [650.0, -150.0, 350.0], "rpy_deg": [10.0, -20.0, 35.0]}
    base = {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "floor_height_mm": -2000.0,
        "fixtures": [{"name": "block", "shape": "mesh", "file": "block.stl", **pose}],
    }
    path = tmp_path / "mesh.json"
    path.write_text(json.dumps(base))
    mesh_scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    box_cell = validate_cell(
        {**base, "fixtures": [{"name": "block", "shape": "box", "size_mm": list(size), **pose}]}
    )
    box_scene = resolve_scene(box_cell)
    robot = mesh_scene.robot
    q = np.random.default_rng(7).uniform(robot.lower, robot.upper, (400, robot.dof))
    meshed = clearance_to_cell(mesh_scene, q, scope="environment").distance
    boxed = clearance_to_cell(box_scene, q, scope="environment").distance
    outside = boxed > 0.0
    assert outside.sum() > 100
    # posebridge's exact segment-box distance (Ericson 2004, sec. 5.1.9 and 5.1.4): the
    # same solid, so the exact mesh distance agrees to 0.001 mm outside it
    np.testing.assert_allclose(meshed[outside], boxed[outside], atol=1e-6)
    # never reported clear inside: both signed distances are negative together
    assert np.all(meshed[~outside] < 0.0)
    # collide-only agrees with the sign of the exact distance (our own contract)
    colliding = collision_batch(clearance_scene(mesh_scene), q, threshold_m=0.0)
    np.testing.assert_array_equal(colliding, clearance_to_cell(mesh_scene, q).distance < 0.0)


def test_missing_unit_of_a_file_in_metres_names_the_unit(tmp_path: Path) -> None:
    write_box(tmp_path / "table.stl", (400.0, 400.0, 200.0), scale=0.001)
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "table.stl"})
    with pytest.raises(CellFileError) as caught:
        resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    # our own message (cell/mesh_fixtures.py): the fixture's JSON path and the unit to give
    assert caught.value.problems == [
        "fixtures[0].unit: required for 'table.stl': its largest side is 0.4 file units, "
        '0.4 mm if they were millimetres; as m it would be 0.4 m. Give "unit": "m" '
        '(or "mm", "m", "inch")'
    ]


def test_missing_unit_of_a_plausible_millimetre_file_is_millimetres(tmp_path: Path) -> None:
    write_box(tmp_path / "table.stl", (400.0, 400.0, 200.0))
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "table.stl"})
    scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    # closed form: 400 mm side read as millimetres
    assert np.ptp(scene.meshes.meshes[0].bounds, axis=0).max() == pytest.approx(0.4)


def test_inch_and_metre_units_scale_the_file(tmp_path: Path) -> None:
    write_box(tmp_path / "a.stl", (10.0, 10.0, 10.0))
    write_box(tmp_path / "b.obj", (0.4, 0.4, 0.4))
    raw = json.loads(lift_cell(tmp_path, {"shape": "frame"}).read_text())
    raw["fixtures"] += [
        {"name": "a", "shape": "mesh", "file": "a.stl", "unit": "inch", "position_mm": [0, 0, 0]},
        {"name": "b", "shape": "mesh", "file": "b.obj", "unit": "m", "position_mm": [0, 0, 0]},
    ]
    path = tmp_path / "units.json"
    path.write_text(json.dumps(raw))
    scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    sides = [np.ptp(mesh.bounds, axis=0).max() for mesh in scene.meshes.meshes]
    # closed form: 10 inch = 0.254 m (international inch, 1959); 0.4 m
    assert sides == [pytest.approx(0.254), pytest.approx(0.4)]


def test_missing_and_broken_files_name_the_fixture(tmp_path: Path) -> None:
    (tmp_path / "broken.stl").write_bytes(b"solid x\nfacet normal 0 0 1\n")
    raw = json.loads(lift_cell(tmp_path, {"shape": "frame"}).read_text())
    raw["fixtures"] += [
        {"name": "a", "shape": "mesh", "file": "gone.stl", "unit": "mm", "position_mm": [0, 0, 0]},
        {
            "name": "b",
            "shape": "mesh",
            "file": "broken.stl",
            "unit": "mm",
            "position_mm": [0, 0, 0],
        },
    ]
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(raw))
    with pytest.raises(CellFileError) as caught:
        resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    problems = caught.value.problems
    # our own messages: every failing fixture with its JSON path, the file named
    assert len(problems) == 2
    assert problems[0].startswith("fixtures[1].file: 'gone.stl' cannot be read")
    assert problems[1].startswith("fixtures[2].file: broken.stl:")


def test_model_refuses_wrong_endings_and_colours() -> None:
    data = {
        "robot": {"name": "pb-arm6"},
        "fixtures": [
            {
                "name": "m",
                "shape": "mesh",
                "file": "part.txt",
                "unit": "cm",
                "colour": "red",
                "position_mm": [0, 0, 0],
            }
        ],
    }
    with pytest.raises(CellFileError) as caught:
        validate_cell(data)
    # our own messages (cell/model.py)
    assert caught.value.problems == [
        "fixtures[0].file: must end in .stl, .obj, .ply, .glb, .gltf, .dae, .step, .stp",
        "fixtures[0].unit: expected 'mm', 'm' or 'inch', got 'cm'",
        "fixtures[0].colour: expected a colour #rrggbb, got 'red'",
    ]


def test_loader_reuses_the_mesh_until_the_file_changes(tmp_path: Path) -> None:
    write_box(tmp_path / "table.stl", (400.0, 400.0, 200.0))
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "table.stl", "unit": "mm"})
    reader = loader(tmp_path)
    first = resolve_scene(load_cell(path), path, mesh_loader=reader).meshes.meshes[0]
    again = resolve_scene(load_cell(path), path, mesh_loader=reader).meshes.meshes[0]
    assert again is first  # our own contract: same file, same object (and hierarchy)
    write_box(tmp_path / "table.stl", (400.0, 400.0, 300.0))
    changed = resolve_scene(load_cell(path), path, mesh_loader=reader).meshes.meshes[0]
    # closed form: the new file's 300 mm height
    assert np.ptp(changed.bounds, axis=0)[2] == pytest.approx(0.3)


def test_open_mesh_is_noted_by_the_target_check(tmp_path: Path) -> None:
    from posebridge.cell.checks import check_targets
    from posebridge.results.target_check import target_check_result

    sheet = trimesh.Trimesh(
        vertices=[[-200.0, -200.0, 0.0], [200.0, -200.0, 0.0], [200.0, 200.0, 0.0]],
        faces=[[0, 1, 2]],
    )
    sheet.export(tmp_path / "sheet.stl")
    path = lift_cell(tmp_path, {"shape": "mesh", "file": "sheet.stl", "unit": "mm"})
    scene = resolve_scene(load_cell(path), path, mesh_loader=loader(tmp_path))
    assert not scene.meshes.meshes[0].is_closed  # one triangle: an open surface
    notes = [f for f in target_check_result(check_targets(scene)).findings if f.code == "open-mesh"]
    # our own contract (cell/checks.py): one note naming the open mesh fixture
    assert [note.message.split(" is not")[0] for note in notes] == ["mesh fixture 'table'"]
