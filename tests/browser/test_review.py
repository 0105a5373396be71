"""Shared review in the browser: the reviewer's page is read-only, comments work.

A dashboard shared for review runs on loopback; the reviewer opens the
review link (the token in the query), the owner opens the plain address.
Expectations are our own contract (posebridge.api.auth module docstring).
"""

from __future__ import annotations

import hashlib
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import new_review_token

_TIMEOUT_MS = 60_000
_READY = "() => document.body.dataset.review !== undefined"


@pytest.fixture(scope="module")
def shared(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[str, str, Path]]:
    """(base URL, review token, cell file) of a dashboard shared for review."""
    cell = tmp_path_factory.mktemp("review") / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    token = new_review_token()
    with background_server(Settings(cell_path=cell), review_token=token) as url:
        yield url, token, cell


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _open(browser: Any, url: str) -> tuple[Any, Any, list[str]]:
    context = browser.new_context(viewport={"width": 1600, "height": 1250})
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.goto(url)
    page.wait_for_function(_READY, timeout=_TIMEOUT_MS)
    return context, page, errors


def test_reviewer_page_is_read_only(
    browser: Any, artifacts: Path, shared: tuple[str, str, Path]
) -> None:
    url, token, cell = shared
    before = _digest(cell)
    context, page, errors = _open(browser, f"{url}?token={token}")
    writes: list[tuple[str, str, int]] = []
    page.on(
        "response",
        lambda r: (
            writes.append((r.request.method, r.url, r.status))
            if r.request.method in ("PUT", "PATCH", "DELETE")
            else None
        ),
    )
    try:
        assert page.url == url  # the token left the address bar
        banner = page.locator("#review-banner")
        banner.wait_for(state="visible", timeout=_TIMEOUT_MS)
        assert "Read-only review" in banner.inner_text()
        assert page.evaluate("window.posebridge.getState().readOnly") is True
        assert page.evaluate("document.body.dataset.review") == "reviewer"

        # drag across the plan view as if moving a target, then wait past any save delay
        box = page.locator("#plan").bounding_box()
        assert box is not None
        cx, cy = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        page.mouse.move(cx, cy)
        page.mouse.down()
        page.mouse.move(cx + 60, cy + 40, steps=8)
        page.mouse.up()
        page.wait_for_timeout(1500)
        assert all(status == 403 for method, _, status in writes), writes
        # a save attempted from the page itself is refused too
        status = page.evaluate(
            """async () => {
                const document = await (await fetch("/api/cell")).json();
                const answer = await fetch("/api/cell", {
                    method: "PUT",
                    headers: {"content-type": "application/json", "if-match": document.etag},
                    body: JSON.stringify(document.cell),
                });
                return answer.status;
            }"""
        )
        assert status == 403
        assert _digest(cell) == before

        # comments: pinned to a target chosen in the form
        page.select_option("#comment-pin", label="target rack-low-1")
        page.fill("#comment-author", "Ana <b>")
        page.fill("#comment-text", "Approach <i>too</i> steep")
        page.click("#comment-send")
        item = page.locator("#comments-list li").filter(has_text="Approach <i>too</i> steep")
        item.wait_for(timeout=_TIMEOUT_MS)
        assert "Ana <b>" in item.inner_text()  # shown as text, not markup
        assert page.locator("#comments-list li i").count() == 0
        assert page.locator("#comments-list button").count() == 0  # reviewers cannot resolve
        page.screenshot(path=str(artifacts / "review-reviewer.png"), full_page=True)
    finally:
        context.close()
    assert errors == []
    listed = httpx.get(url + "api/reviews/comments", timeout=10).json()  # the owner, on loopback
    assert [c["text"] for c in listed["comments"]] == ["Approach <i>too</i> steep"]
    assert listed["comments"][0]["pin"]["target"] == "rack-low-1"


def test_owner_page_is_not_read_only(
    browser: Any, artifacts: Path, shared: tuple[str, str, Path]
) -> None:
    url, _, _ = shared
    context, page, errors = _open(browser, url)
    try:
        assert page.locator("#review-banner").is_hidden()
        assert page.evaluate("window.posebridge.getState().readOnly") is False
        assert page.evaluate("document.body.dataset.review") == "owner"
        page.fill("#comment-author", "Owner")
        page.fill("#comment-text", "Noted")
        page.click("#comment-send")
        item = page.locator("#comments-list li").filter(has_text="Noted")
        item.wait_for(timeout=_TIMEOUT_MS)
        item.get_by_role("button", name="Mark resolved").click()
        page.locator("#comments-list li").filter(has_text="Noted").wait_for(
            state="detached", timeout=_TIMEOUT_MS
        )  # resolved comments are hidden until "Show resolved"
        page.check("#comments-resolved")
        assert page.locator("#comments-list li.pb-resolved").filter(has_text="Noted").count() == 1
        page.screenshot(path=str(artifacts / "review-owner.png"), full_page=True)
    finally:
        context.close()
    assert errors == []
