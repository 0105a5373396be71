"""One palette for the page and the review report.

The page's colours are the CSS custom properties ``--pb-<name>`` in static/style.css,
read by static/palette.js; the report's come from posebridge.palette. These tests read
the two files as text and hold them to the Python table (our own contract: a reviewer
sees one colour for one thing in both places).
"""

from __future__ import annotations

import re

import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.palette import PALETTE, REGION_COUNT, region_colour, rgba
from posebridge.report.figures import cartesian_figures
from posebridge.resources import data_folder

STATIC = data_folder("static")


def page_colours() -> dict[str, str]:
    """The ``:root`` custom properties of style.css that hold colours, ``var()`` resolved."""
    css = (STATIC / "style.css").read_text(encoding="utf-8")
    root = re.search(r":root\s*\{(.*?)\}", css, flags=re.S)
    assert root is not None
    raw = dict(re.findall(r"--pb-([a-z0-9-]+):\s*([^;]+);", root.group(1)))

    def resolve(value: str) -> str:
        reference = re.fullmatch(r"var\(--pb-([a-z0-9-]+)\)", value.strip())
        return resolve(raw[reference.group(1)]) if reference else value.strip()

    resolved = {name: resolve(value) for name, value in raw.items()}
    return {name: value for name, value in resolved.items() if value.startswith("#")}


def test_the_page_and_the_python_palette_are_one_table() -> None:
    assert page_colours() == PALETTE


def test_every_colour_the_page_script_reads_is_in_the_palette() -> None:
    script = (STATIC / "palette.js").read_text(encoding="utf-8")
    block = re.search(r"const NAMES = \[(.*?)\];", script, flags=re.S)
    assert block is not None
    names = re.findall(r'"([a-z0-9-]+)"', block.group(1))
    assert names
    assert set(names) <= set(PALETTE)
    count = re.search(r"const REGION_COUNT = (\d+);", script)
    assert count is not None
    assert int(count.group(1)) == REGION_COUNT


@pytest.mark.parametrize(("index", "name"), [(0, "region-1"), (11, "region-12"), (13, "region-2")])
def test_region_colours_cycle_like_the_page(index: int, name: str) -> None:
    # static/palette.js regionColour: region-((index mod 12) + 1)
    assert region_colour(index) == PALETTE[name]


def test_twelve_region_colours_are_distinct() -> None:
    # our own contract (issue: every object in a map its own colour)
    colours = [PALETTE[f"region-{k}"] for k in range(1, REGION_COUNT + 1)]
    assert len(set(colours)) == REGION_COUNT == 12


def test_rgba_text() -> None:
    # #c8bfae is (200, 191, 174) in decimal
    assert rgba("#c8bfae", 0.45) == "rgba(200, 191, 174, 0.45)"


def test_report_draws_fixtures_in_the_page_colours() -> None:
    path = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(path), path)
    figures = cartesian_figures(scene, scene.robot.home_configuration())
    page = page_colours()
    (solid,) = [t for t in figures["scene3d"]["data"] if t.get("legendgroup") == "fixture"]
    assert solid["color"] == page["fixture"]
    for view in ("plan", "elevation"):
        (outline,) = [t for t in figures[view]["data"] if t.get("legendgroup") == "fixture"]
        assert outline["line"]["color"] == page["fixture-edge"]
        assert outline["fillcolor"].startswith("rgba(200, 191, 174, ")  # --pb-fixture
