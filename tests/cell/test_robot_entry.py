"""The cell file's robot entry with a URDF: chain choice and mesh folders (an invented
robot package written by the test, :mod:`posebridge.bench.invented_urdf`)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from posebridge.bench.invented_urdf import ARM_JOINTS, PACKAGE, write_invented_arm
from posebridge.cell.files import load_cell
from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.scene import resolve_scene
from posebridge.resources import data_folder


def cell_with_robot(folder: Path, robot: dict[str, object]) -> Path:
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = robot
    path = folder / "cell.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def test_cell_robot_entry_chooses_chain_and_mesh_folders(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))  # the mesh cache goes there
    urdf = write_invented_arm(tmp_path / "arm", level=0)
    shelf = tmp_path / "shelf" / PACKAGE
    shelf.mkdir(parents=True)
    (urdf.parent.parent / "meshes").rename(shelf / "meshes")
    path = cell_with_robot(
        tmp_path,
        {
            "file": str(urdf.relative_to(tmp_path)),
            "to_link": "tool0",
            "mesh_folders": ["shelf"],
        },
    )
    scene = resolve_scene(load_cell(path), path)
    assert scene.robot.joint_names == ARM_JOINTS
    assert scene.robot.to_link == "tool0"
    assert len(scene.robot.link_fits) == 10
    assert scene.robot.has_geometry
    # the default chain has several leaves: the error names the option of the cell file
    no_choice = cell_with_robot(tmp_path, {"file": str(urdf.relative_to(tmp_path))})
    with pytest.raises(CellFileError, match=r"robot\.file: .*to_link in a cell's robot entry"):
        resolve_scene(load_cell(no_choice), no_choice)


def test_chain_choice_needs_a_robot_file() -> None:
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = {"name": "pb-arm6", "to_link": "flange"}
    with pytest.raises(CellFileError, match=r"to_link.*chooses the chain of a URDF"):
        validate_cell(data)
