"""The review report draws a URDF robot with its link meshes (an invented robot package
written by the test, :mod:`posebridge.bench.invented_urdf`)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from posebridge.bench.invented_urdf import write_invented_arm
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.kinematics.fk import fk_frames
from posebridge.report.meshes import scene_meshes
from posebridge.resources import data_folder


def test_report_meshes_are_the_robot_link_meshes(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))  # the mesh cache goes there
    urdf = write_invented_arm(tmp_path, level=0)
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = {"file": str(urdf.relative_to(tmp_path)), "to_link": "tool0"}
    data["paths"] = []
    path = tmp_path / "cell.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    scene = resolve_scene(load_cell(path), path)
    q = scene.robot.home_configuration()
    robot = [m for m in scene_meshes(scene, q) if m.kind == "robot"]
    assert sorted(m.name for m in robot) == sorted(fit.source_link for fit in scene.robot.link_fits)
    # the base link's box (invented_urdf: 0.24 m x 0.24 m x 0.2 m from the base frame up) sits
    # on the robot base in the world: its lowest vertex at the base frame's height
    base = next(m for m in robot if m.name == "base_link")
    T_world_base = scene.T_world_base @ fk_frames(scene.robot, q[None])[0, 0]
    assert base.vertices[:, 2].min() == pytest.approx(T_world_base[2, 3], abs=1e-6)
    assert np.ptp(base.vertices[:, 2]) == pytest.approx(0.2, abs=1e-6)
