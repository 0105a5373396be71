"""Browser test fixtures: a loopback server in a thread and Debian's headless Chromium.

The server works on a copy of the demo cell in a temporary folder, put back
to the demo's content before every test, so edits made by one test never
reach the next.

The tests are skipped when /usr/bin/chromium (or playwright) is missing,
unless POSEBRIDGE_REQUIRE_BROWSER=1, which turns the skip into a failure.
"""

from __future__ import annotations

import contextlib
import functools
import json
import os
import shutil
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.bench.browser import CHROMIUM_PATH, chromium_available, launch_chromium
from posebridge.bench.invented_urdf import write_invented_arm
from posebridge.resources import data_folder

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
VIEWPORT = {"width": 1600, "height": 1000}


@pytest.fixture(scope="session", autouse=True)
def _require_chromium() -> None:
    if chromium_available():
        return
    message = f"headless Chromium not available ({CHROMIUM_PATH} or the playwright package missing)"
    if os.environ.get("POSEBRIDGE_REQUIRE_BROWSER") == "1":
        pytest.fail(message + " and POSEBRIDGE_REQUIRE_BROWSER=1")
    pytest.skip(message + "; install Debian's chromium package to run the browser tests")


@pytest.fixture(scope="session")
def artifacts() -> Path:
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    return ARTIFACTS


DEMO_CELL = data_folder("robots") / "demo-cell.json"


@pytest.fixture(scope="session")
def cell_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The cell file the test server reads and saves: a copy of the demo cell."""
    path = tmp_path_factory.mktemp("cell") / "cell.json"
    shutil.copyfile(DEMO_CELL, path)
    return path


@pytest.fixture(scope="session")
def server_url(cell_path: Path) -> Iterator[str]:
    """Base URL (ending in /) of a dashboard serving the demo cell (six-axis arm) on loopback."""
    with background_server(Settings(robot="pb-arm6", cell_path=cell_path)) as url:
        yield url


@contextlib.contextmanager
def _gripper_arm_server(folder: Path, robot_entry: dict[str, str]) -> Iterator[tuple[str, Path]]:
    """Serve the demo cell with the invented gripper arm as its robot; yield (base URL, cell file).

    The arm's URDF package (:mod:`posebridge.bench.invented_urdf`) is written into
    ``folder``, the cell's robot entry is its file plus ``robot_entry`` (``to_link``,
    ``from_link``: none gives a URDF with three leaf links and no chain chosen), without the
    demo's paths and approaches. The mesh cache goes to ``folder/data`` while it serves.
    """
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("XDG_DATA_HOME", str(folder / "data"))
        urdf = write_invented_arm(folder, level=1)
        data = json.loads(DEMO_CELL.read_text())
        data["robot"] = {"file": str(urdf.relative_to(folder)), **robot_entry}
        data["paths"] = []
        for target in data["targets"]:
            target.pop("approach", None)
        cell = folder / "cell.json"
        cell.write_text(json.dumps(data), encoding="utf-8")
        with background_server(Settings(robot="pb-arm6", cell_path=cell)) as url:
            yield url, cell


GripperArmServer = Callable[[Path, dict[str, str]], AbstractContextManager[tuple[str, Path]]]


@pytest.fixture(scope="session")
def gripper_arm_server() -> GripperArmServer:
    """``with gripper_arm_server(folder, robot_entry) as (url, cell_file)``: the demo cell with
    the invented gripper arm (:func:`_gripper_arm_server`)."""
    return _gripper_arm_server


TALL_VIEWPORT = {"width": 1600, "height": 1250}


@dataclass
class WatchedPage:
    """A page opened on a server of its own test, with the uncaught errors seen on it."""

    page: Any
    errors: list[str]


def _open_at(
    browser: Any, url: str, ready: str, *, console: bool = False, timeout_ms: int = 180_000
) -> WatchedPage:
    """Open ``url`` in a new page (:data:`TALL_VIEWPORT`) and wait until its state is ready.

    ``ready`` is a JavaScript expression over the page's state ``s``
    (``window.posebridge.getState()``), e.g. ``"s.cellActive && s.fk"``. Uncaught page
    errors are recorded, and with ``console`` the console's errors other than failed loads
    (answers the page handles, such as a 422 or 429, are logged by the browser as those).
    """
    page = browser.new_page(viewport=TALL_VIEWPORT)
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    if console:
        page.on(
            "console",
            lambda m: (
                errors.append(m.text)
                if m.type == "error" and not m.text.startswith("Failed to load resource")
                else None
            ),
        )
    page.goto(url)
    page.wait_for_function(
        "() => { const s = window.posebridge && window.posebridge.getState();"
        f" return Boolean(s && ({ready})); }}",
        timeout=timeout_ms,
    )
    return WatchedPage(page=page, errors=errors)


@pytest.fixture(scope="session")
def open_at(browser: Any) -> Callable[..., WatchedPage]:
    """``open_at(url, ready, console=False)``: a new page at ``url`` once the JavaScript
    expression ``ready`` over its state ``s`` holds (:func:`_open_at`)."""
    return functools.partial(_open_at, browser)


def reset_cell(base_url: str) -> dict[str, Any]:
    """Put the demo cell's content back through the API; returns the GET /api/cell answer."""
    api = base_url.rstrip("/")
    etag = httpx.get(api + "/api/cell", timeout=120).json()["etag"]
    demo = json.loads(DEMO_CELL.read_text())
    response = httpx.put(api + "/api/cell", json=demo, headers={"If-Match": etag}, timeout=120)
    assert response.status_code == 200, response.text
    document: dict[str, Any] = response.json()
    return document


@pytest.fixture(scope="session")
def browser() -> Iterator[Any]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        instance = launch_chromium(playwright)
        yield instance
        instance.close()


@dataclass
class PageProblems:
    """Console errors, uncaught page errors and failed or refused requests seen by a page."""

    console_errors: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    failed_requests: list[str] = field(default_factory=list)
    requested_urls: list[str] = field(default_factory=list)


# The page has answered everything: IK for the current target, FK for the current joints.
_SETTLED_SCRIPT = """() => {
  const state = window.posebridge && window.posebridge.getState();
  if (!state || !state.fk || !state.ik || !state.target) return false;
  const a = state.ik.target.position_mm, b = state.target.position_mm;
  return a.every((v, k) => v === b[k]) && state.fkJoints === state.joints;
}"""


# Both joint maps describe the current cell, joints and held values (maps.js mapIsCurrent), or
# the page has no cell: its map jobs are done.
_MAPS_DONE_SCRIPT = """() => {
  const s = window.posebridge && window.posebridge.getState();
  if (!s || !s.cellActive) return true;
  const current = (m, chosen) => Boolean(m && s.cell && m.cell_etag === s.cell.etag &&
    chosen.every((j, k) => m.joints[k] === j) &&
    s.joints.every((v, i) => chosen.includes(i) || Math.abs(v - m.hold_deg[i]) <= 0.05));
  return current(s.jointMap, s.mapJoints) && (!s.map3Joints || current(s.jointMap3, s.map3Joints));
}"""


@dataclass
class OpenPage:
    """A loaded dashboard page, what went wrong on it, and the server's base URL."""

    page: Any
    problems: PageProblems
    base_url: str

    def wait_settled(self, timeout_ms: int = 120_000) -> None:
        """Wait until the page has FK for its joints and IK for its target."""
        self.page.wait_for_function(_SETTLED_SCRIPT, timeout=timeout_ms)


@pytest.fixture
def open_page(browser: Any, server_url: str) -> Iterator[OpenPage]:
    """The dashboard loaded on the demo cell and settled (FK and IK answered for the opening pose)."""
    reset_cell(server_url)
    page = browser.new_page(viewport=VIEWPORT)
    problems = PageProblems()
    page.on(
        "console", lambda m: problems.console_errors.append(m.text) if m.type == "error" else None
    )
    page.on("pageerror", lambda error: problems.page_errors.append(str(error)))
    page.on("requestfailed", lambda request: problems.failed_requests.append(request.url))
    page.on(
        "response",
        lambda response: (
            problems.failed_requests.append(f"{response.status} {response.url}")
            if response.status >= 400
            else None
        ),
    )
    page.on("request", lambda request: problems.requested_urls.append(request.url))
    page.goto(server_url)
    opened = OpenPage(page=page, problems=problems, base_url=server_url)
    opened.wait_settled(timeout_ms=180_000)
    yield opened
    # let the page's map jobs finish before it closes: jobs outlive their page on the server,
    # and a next page starting its own beyond the per-client cap would be refused (429)
    with contextlib.suppress(Exception):
        page.wait_for_function(_MAPS_DONE_SCRIPT, timeout=120_000)
    page.close()
