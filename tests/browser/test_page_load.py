"""How the dashboard loads: what it asks the server first, and in which order it draws.

The checks are of order, never of time (how fast a load is: ``posebridge bench --only
dashboard``): the page's own fetch calls and figure drawings are recorded in the page by an
init script, numbered by the display frame they happen in.
"""

from __future__ import annotations

import json
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import new_review_token
from posebridge.review.comments import CommentStore, Pin, comments_path_for

VIEWPORT = {"width": 1600, "height": 1000}

# Runs before the page's scripts: numbers display frames, logs every fetch call and its answer,
# and every plotly.js drawing call (with the frame it was made in) once plotly.js has loaded.
_RECORD = """(() => {
  const log = { frame: 0, fetches: [], draws: [], events: 0 };
  window.__loadLog = log;
  const tick = () => { log.frame += 1; requestAnimationFrame(tick); };
  requestAnimationFrame(tick);
  const fetchBefore = window.fetch;
  window.fetch = function (input, init) {
    const entry = {
      path: new URL(String(input), location.href).pathname,
      method: ((init && init.method) || "GET").toUpperCase(),
      called: log.events++,
      answered: null,
    };
    log.fetches.push(entry);
    const answer = fetchBefore.call(this, input, init);
    answer.then(() => { entry.answered = log.events++; }, () => { entry.answered = log.events++; });
    return answer;
  };
  let plotly;
  const wrap = (name) => {
    const call = plotly[name];
    plotly[name] = function (figure, ...rest) {
      log.draws.push({ figure: figure.id, call: name, frame: log.frame, at: log.events++ });
      return call.call(this, figure, ...rest);
    };
  };
  Object.defineProperty(window, "Plotly", {
    configurable: true,
    get: () => plotly,
    set: (value) => { plotly = value; wrap("react"); wrap("restyle"); },
  });
})();"""

# the page is done loading: arm and markers, both joint maps and the 3D joint view drawn
_LOADED = """() => {
  const s = window.posebridge && window.posebridge.getState();
  const space = document.getElementById("joint-space-3d");
  return Boolean(s && s.fk && s.ik && s.jointMap && s.jointMap3 && s.targetCheck &&
    space.data && space.data.length > 1);
}"""


@pytest.fixture
def loaded(browser: Any, server_url: str) -> dict[str, Any]:
    """The load log of one page load on the demo cell, once everything is drawn."""
    page = browser.new_page(viewport=VIEWPORT)
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.add_init_script(_RECORD)
    page.goto(server_url)
    page.wait_for_function(_LOADED, timeout=180_000)
    log: dict[str, Any] = page.evaluate("() => window.__loadLog")
    page.close()
    assert errors == []
    return log


def test_first_questions_go_out_together(loaded: dict[str, Any]) -> None:
    first = {}
    for entry in loaded["fetches"]:
        first.setdefault(entry["path"], entry)
    asked = [first[path] for path in ("/api/reviews/access", "/api/robots", "/api/cell")]
    # our own contract (static/main.js): who is looking, the robot library and the cell are
    # asked for before any of the three has answered, not one after the other
    assert max(entry["called"] for entry in asked) < min(entry["answered"] for entry in asked)


def test_joint_space_view_is_drawn_after_the_arm(loaded: dict[str, Any]) -> None:
    draws = loaded["draws"]
    scene = [d for d in draws if d["figure"] == "scene3d"]
    space = [d for d in draws if d["figure"] == "joint-space-3d"]
    assert scene
    assert space
    # our own contract (views/jointspace3d.js): the 3D joint view's first drawing comes in a
    # later display frame than the Cartesian view's first drawing of the arm (the page draws
    # the cell view once the forward kinematics is in, so its first drawing has the arm)
    assert space[0]["frame"] > scene[0]["frame"]
    assert space[0]["at"] > scene[0]["at"]


_COMMENT = "Fence gap near the press"

# the cell is shown (robot loaded, arm answered) and the comments panel lists its comment
# with a pin for every target of the cell (from the store's cell)
_CELL_AND_COMMENTS_SHOWN = """({ comment, targets }) => {
  const s = window.posebridge && window.posebridge.getState();
  const items = [...document.querySelectorAll("#comments-list li")].map((li) => li.textContent);
  const pins = [...document.querySelectorAll("#comment-pin option")].map((o) => o.textContent);
  return Boolean(s && s.cellActive && s.fk && s.cell) &&
    items.some((text) => text.includes(comment)) &&
    targets.every((name) => pins.includes(`target ${name}`));
}"""


@pytest.fixture(scope="module")
def shared_with_comment(
    tmp_path_factory: pytest.TempPathFactory,
) -> Iterator[tuple[str, str, Path]]:
    """(base URL, review token, cell file) of a dashboard shared for review, serving a copy
    of the demo cell that has one reviewer comment."""
    cell = tmp_path_factory.mktemp("comments") / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    CommentStore(comments_path_for(cell)).add(Pin("cell"), "Ana", _COMMENT)
    token = new_review_token()
    with background_server(Settings(cell_path=cell), review_token=token) as url:
        yield url, token, cell


@pytest.mark.parametrize("role", ["owner", "reviewer"])
def test_page_reads_the_cell_once(
    browser: Any, shared_with_comment: tuple[str, str, Path], role: str
) -> None:
    url, token, cell = shared_with_comment
    targets = [target["name"] for target in json.loads(cell.read_text())["targets"]]
    assert targets
    context = browser.new_context(viewport=VIEWPORT)  # its own cookies: the reviewer's stay here
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.add_init_script(_RECORD)
    try:
        page.goto(url if role == "owner" else f"{url}?token={token}")
        page.wait_for_function(
            _CELL_AND_COMMENTS_SHOWN, arg={"comment": _COMMENT, "targets": targets}, timeout=180_000
        )
        assert page.evaluate("document.body.dataset.review") == role
        log: dict[str, Any] = page.evaluate("() => window.__loadLog")
    finally:
        context.close()
    assert errors == []
    reads = [e for e in log["fetches"] if e["path"] == "/api/cell" and e["method"] == "GET"]
    # our own contract (static/main.js, panels/comments.js): the page asks for the cell once
    # and the comments panel takes its pins from the store's cell instead of asking again
    assert len(reads) == 1
