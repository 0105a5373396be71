"""The command line with a URDF robot: chain choice (--from-link/--to-link), mesh folders and
``posebridge describe``. The robot package is invented and written by the test
(:mod:`posebridge.bench.invented_urdf`); positions are checked against pinocchio."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pinocchio as pin
import pytest

from posebridge.bench.invented_urdf import ARM_JOINTS, PACKAGE, write_invented_arm
from posebridge.cli import main


@pytest.fixture
def arm_urdf(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))  # the mesh cache goes there
    return write_invented_arm(tmp_path, level=0)


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_several_leaves_error_names_the_option(
    capsys: pytest.CaptureFixture[str], arm_urdf: Path
) -> None:
    code, out, err = run(capsys, "fk", str(arm_urdf), "--joints", "0,0,0,0,0,0")
    assert code == 2
    assert out == ""
    assert "--to-link" in err
    assert "tool0" in err
    assert "finger_left" in err


def test_fk_on_the_chosen_chain_matches_pinocchio(
    capsys: pytest.CaptureFixture[str], arm_urdf: Path
) -> None:
    joints_deg = [10.0, -20.0, 30.0, 40.0, -50.0, 60.0]
    code, out, err = run(
        capsys,
        "fk",
        str(arm_urdf),
        "--to-link",
        "tool0",
        "--joints",
        ",".join(map(str, joints_deg)),
        "--json",
    )
    assert code == 0, err
    model = pin.buildModelFromXML(arm_urdf.read_text())
    data = model.createData()
    config = pin.neutral(model)
    for name, value in zip(ARM_JOINTS, np.radians(joints_deg), strict=True):
        joint = model.joints[model.getJointId(name)]
        if joint.nq == 2:  # continuous joint: (cos, sin)
            config[joint.idx_q : joint.idx_q + 2] = [np.cos(value), np.sin(value)]
        else:
            config[joint.idx_q] = value
    pin.framesForwardKinematics(model, data, config)
    expected_mm = data.oMf[model.getFrameId("tool0")].translation * 1000.0  # pinocchio
    assert json.loads(out)["position_mm"] == pytest.approx(expected_mm.tolist(), abs=1e-9)


def test_describe_reports_chain_meshes_and_capsules(
    capsys: pytest.CaptureFixture[str], arm_urdf: Path, tmp_path: Path
) -> None:
    shelf = tmp_path / "shelf" / PACKAGE
    shelf.mkdir(parents=True)
    (arm_urdf.parent.parent / "meshes").rename(shelf / "meshes")
    code, out, err = run(capsys, "describe", str(arm_urdf), "--to-link", "tool0", "--json")
    assert code == 0, err
    lost = json.loads(out)
    assert not any(m["found"] for m in lost["meshes"])
    assert len(lost["meshes"]) == 20
    code, out, err = run(
        capsys,
        "describe",
        str(arm_urdf),
        "--to-link",
        "tool0",
        "--mesh-folder",
        str(tmp_path / "shelf"),
        "--json",
    )
    assert code == 0, err
    report = json.loads(out)
    assert (report["from_link"], report["to_link"]) == ("base_link", "tool0")
    assert [j["name"] for j in report["joints"]] == list(ARM_JOINTS)
    assert set(report["held_joints"]) == {"finger_left_slide", "finger_right_slide"}
    # package:// references are found in the listed folder; the one written relative to the
    # URDF (../meshes/turret_visual.obj) is not, and is reported missing
    missing = [m["filename"] for m in report["meshes"] if not m["found"]]
    assert missing == ["../meshes/turret_visual.obj"]
    assert len(report["link_fits"]) == 10
    assert report["robot_geometry_missing"] is None
    # a capsule holds a box's hull, so the ratio is at least 1 (closed form)
    assert all(fit["excess"] >= 1.0 for fit in report["link_fits"])
    assert any("acceleration" in note for note in report["notes"])
    code, text, _ = run(
        capsys, "describe", str(arm_urdf), "--to-link", "tool0", "--mesh-folder", str(shelf.parent)
    )
    assert code == 0
    assert "chain: base_link -> tool0" in text
    assert "meshes: 19 found, 1 missing" in text
    assert "fitted forearm on forearm to 1 collision mesh(es): excess" in text


def test_chain_options_refused_for_a_posebridge_description(
    capsys: pytest.CaptureFixture[str],
) -> None:
    code, _, err = run(capsys, "describe", "pb-arm6", "--to-link", "flange")
    assert code == 2
    assert "choose the chain of a URDF or a robot overlay" in err
