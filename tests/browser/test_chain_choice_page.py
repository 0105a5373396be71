"""A cell whose URDF robot has several leaf links and no to_link: the page lists the leaves and
saves the chosen one (If-Match), then loads the cell. The robot is the invented gripper arm
(:mod:`posebridge.bench.invented_urdf`, written by the test)."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest


@pytest.fixture
def unchosen_server(tmp_path: Path, gripper_arm_server: Any) -> Iterator[tuple[str, Path]]:
    with gripper_arm_server(tmp_path, {}) as served:  # no to_link: three leaves
        yield served


def test_page_offers_the_leaf_links_and_saves_the_choice(
    open_at: Any, unchosen_server: tuple[str, Path], artifacts: Path
) -> None:
    url, cell_file = unchosen_server
    opened = open_at(url, "s.chainChoice && s.chainChoice.leaves.length > 0")
    page, errors = opened.page, opened.errors
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
