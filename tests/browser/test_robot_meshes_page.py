"""The page with a URDF robot and its meshes: the invented gripper arm
(:mod:`posebridge.bench.invented_urdf`, written by the test) as the cell's robot with the
chain chosen in the cell file; link meshes drawn in 3D and in plan, the capsule toggle, the
chain chosen on the page."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

ARM_VERTICES = """() => {
  const trace = (document.getElementById("scene3d").data || []).find((t) => t.name === "arm");
  return trace ? trace.x.length : -1;
}"""
PLAN_ARM_POINTS = """() => {
  const trace = (document.getElementById("plan").data || []).find((t) => t.name === "arm");
  return trace ? trace.x.length : -1;
}"""


@pytest.fixture(scope="module")
def gripper_server(
    tmp_path_factory: pytest.TempPathFactory, gripper_arm_server: Any
) -> Iterator[tuple[str, Path]]:
    with gripper_arm_server(tmp_path_factory.mktemp("gripper"), {"to_link": "tool0"}) as served:
        yield served


def test_page_draws_the_urdf_robot_meshes(
    open_at: Any, gripper_server: tuple[str, Path], artifacts: Path
) -> None:
    url, cell_file = gripper_server
    # console errors too: answers refused while the robot switches chains (a 422 for a stale
    # joint count, a 429 of the server's pacing) are failed loads the page handles
    opened = open_at(url, "s.cellActive && s.robotMeshes.length === 10 && s.fk", console=True)
    page, errors = opened.page, opened.errors
    state = page.evaluate("() => window.posebridge.getState().robot")
    assert state["joints"][0]["name"] == "shoulder_pan"
    assert state["dof"] == 6
    drawn = page.evaluate(
        "() => window.posebridge.getState().robotMeshes"
        ".reduce((n, m) => n + m.vertices_mm.length, 0)"
    )
    # the 3D arm trace holds exactly the link meshes' vertices (the server's drawing answer)
    page.wait_for_function(f"() => ({ARM_VERTICES})() === {drawn}", timeout=180_000)
    assert page.evaluate(PLAN_ARM_POINTS) > 0
    page.screenshot(path=str(artifacts / "page-urdf-robot-meshes.png"), full_page=True)
    # the toggle shows the fitted capsules instead: the arm trace changes to capsule meshes
    page.check("#show-capsules")
    page.wait_for_function(
        f"() => {{ const n = ({ARM_VERTICES})(); return n > 0 && n !== {drawn}; }}", timeout=180_000
    )
    page.screenshot(path=str(artifacts / "page-urdf-robot-capsules.png"), full_page=True)
    # the chain control lists the URDF's leaf links (invented_urdf: tool0 and two fingers)
    options = page.evaluate(
        "() => [...document.querySelectorAll('#chain-end option')].map((o) => o.value)"
    )
    assert options == ["finger_left", "finger_right", "tool0"]
    page.select_option("#chain-end", "finger_left")
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.robot && s.robot.to_link === 'finger_left' && s.robot.dof === 7; }",
        timeout=120_000,
    )
    saved = json.loads(cell_file.read_text())
    assert saved["robot"]["to_link"] == "finger_left"
    assert errors == []
    page.close()


def test_page_chooses_the_chain_start(
    open_at: Any, gripper_server: tuple[str, Path], artifacts: Path
) -> None:
    url, cell_file = gripper_server
    opened = open_at(
        url,
        "s.cellActive && s.robot && s.robot.chain_starts && s.robot.chain_starts.length > 1"
        " && s.fk",
    )
    page, errors = opened.page, opened.errors
    end = page.evaluate("() => window.posebridge.getState().robot.to_link")
    dof = page.evaluate("() => window.posebridge.getState().robot.dof")
    # the links above the chain's end, from the root down (invented_urdf's tree)
    above = ["base_link", "turret", "upper_arm", "forearm", "wrist_a", "wrist_b", "wrist_c"]
    above += ["flange", "gripper_body"] if end.startswith("finger") else ["flange"]
    options = page.evaluate(
        "() => [...document.querySelectorAll('#chain-start option')].map((o) => o.value)"
    )
    assert options == above
    assert page.input_value("#chain-start") == "base_link"
    page.select_option("#chain-start", "turret")
    # starting below shoulder_pan leaves one moving joint fewer on the chain
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        f" return s.robot && s.robot.from_link === 'turret' && s.robot.dof === {dof - 1}; }}",
        timeout=120_000,
    )
    assert json.loads(cell_file.read_text())["robot"]["from_link"] == "turret"
    page.screenshot(path=str(artifacts / "page-urdf-chain-start.png"), full_page=True)
    assert errors == []
    page.close()


def test_joint_map_moves_show_the_link_meshes(
    open_at: Any, gripper_server: tuple[str, Path], artifacts: Path
) -> None:
    # the joint map has no pose preview of its own: a move on it sets the arm's joints and the
    # views that show the arm draw it with its link meshes at the new pose
    url, _ = gripper_server
    opened = open_at(url, "s.cellActive && s.robotMeshes.length > 0 && s.fk")
    page, errors = opened.page, opened.errors
    drawn = page.evaluate(
        "() => window.posebridge.getState().robotMeshes"
        ".reduce((n, m) => n + m.vertices_mm.length, 0)"
    )
    page.wait_for_function(f"() => ({ARM_VERTICES})() === {drawn}", timeout=180_000)
    first_vertex = """() => {
      const t = (document.getElementById("scene3d").data || []).find((t) => t.name === "arm");
      return t ? [t.x[t.x.length - 1], t.y[t.y.length - 1], t.z[t.z.length - 1]] : null;
    }"""
    page.evaluate(
        f"() => {{ window.pbBefore = [JSON.stringify(window.posebridge.getState().joints),"
        f" JSON.stringify(({first_vertex})())]; }}"
    )
    page.focus("#joint-map")
    page.keyboard.press("Shift+ArrowUp")  # ten angle steps on the map's vertical joint
    page.keyboard.press("Shift+ArrowRight")  # and on its horizontal one (one may be at a limit)
    page.wait_for_function(
        "() => JSON.stringify(window.posebridge.getState().joints) !== window.pbBefore[0]",
        timeout=180_000,
    )
    page.wait_for_function(
        f"() => {{ const v = ({first_vertex})(); return ({ARM_VERTICES})() === {drawn}"
        " && v !== null && JSON.stringify(v) !== window.pbBefore[1]; }",
        timeout=180_000,
    )
    assert page.evaluate(PLAN_ARM_POINTS) > 0
    page.screenshot(path=str(artifacts / "page-urdf-joint-map-move.png"), full_page=True)
    assert errors == []
    page.close()
