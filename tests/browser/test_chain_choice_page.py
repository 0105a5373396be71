"""A cell whose URDF robot has several leaf links and no to_link: the page lists the leaves and
saves the chosen one (If-Match), then loads the cell. The robot is the invented gripper arm
(:mod:`posebridge.bench.invented_urdf`, written by the test)."""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.bench.invented_urdf import write_invented_arm
from posebridge.resources import data_folder

VIEWPORT = {"width": 1600, "height": 1250}


@pytest.fixture
def unchosen_server(tmp_path: Path) -> Iterator[tuple[str, Path]]:
    saved = os.environ.get("XDG_DATA_HOME")
    os.environ["XDG_DATA_HOME"] = str(tmp_path / "data")  # the mesh cache goes there
    urdf = write_invented_arm(tmp_path, level=1)
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = {"file": str(urdf.relative_to(tmp_path))}  # no to_link: three leaves
    data["paths"] = []
    for target in data["targets"]:
        target.pop("approach", None)
    cell = tmp_path / "cell.json"
    cell.write_text(json.dumps(data), encoding="utf-8")
    try:
        with background_server(Settings(robot="pb-arm6", cell_path=cell)) as url:
            yield url, cell
    finally:
        if saved is None:
            os.environ.pop("XDG_DATA_HOME", None)
        else:
            os.environ["XDG_DATA_HOME"] = saved


def test_page_offers_the_leaf_links_and_saves_the_choice(
    browser: Any, unchosen_server: tuple[str, Path], artifacts: Path
) -> None:
    url, cell_file = unchosen_server
    page = browser.new_page(viewport=VIEWPORT)
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.goto(url)
    page.wait_for_function(
        "() => { const s = window.posebridge && window.posebridge.getState();"
        " return s && s.chainChoice && s.chainChoice.leaves.length > 0; }",
        timeout=180_000,
    )
    assert page.is_visible("#chain-choice-row")
    options = page.evaluate(
        "() => [...document.querySelectorAll('#chain-choice option')].map((o) => o.value)"
    )
    # invented_urdf: tool0 and the two fingers are the leaves below base_link
    assert options == ["finger_left", "finger_right", "tool0"]
    page.screenshot(path=str(artifacts / "page-urdf-chain-choice.png"), full_page=True)
    page.select_option("#chain-choice", "tool0")
    page.click("#chain-choice-use")
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.cellActive && !s.chainChoice && s.robot && s.robot.to_link === 'tool0'; }",
        timeout=180_000,
    )
    assert json.loads(cell_file.read_text())["robot"]["to_link"] == "tool0"
    assert page.is_hidden("#chain-choice-row")
    page.screenshot(path=str(artifacts / "page-urdf-chain-chosen.png"), full_page=True)
    assert errors == []
    page.close()
