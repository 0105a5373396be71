"""The HTML review report: self-contained, complete, escaped.

Contents are compared with the modules the report draws on, run here as the
reference: the target check (:func:`posebridge.cell.checks.check_targets`)
and the path check with its cycle times
(:func:`posebridge.planning.path_check.check_path`). "Self-contained" is
checked by parsing the document with the standard library's HTML parser:
no element may load anything by URL. The caution text is our own contract
(README, "Safety").
"""

from __future__ import annotations

import html as html_text
import json
import os
import shutil
import stat
from html.parser import HTMLParser
from importlib.resources import files
from pathlib import Path
from typing import Any

import pytest

from posebridge.cell.checks import check_targets
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.planning.path_check import check_path
from posebridge.report import SAFETY_CAUTION, ReportError, build_report, write_report
from posebridge.report.html import plotly_script
from posebridge.resources import data_folder
from posebridge.results.path_check import path_check_result
from posebridge.results.target_check import target_check_result
from posebridge.review.comments import CommentStore, Pin, comments_path_for

HOSTILE = "<script>alert(1)</script>"


class _Elements(HTMLParser):
    """Every start tag with its attributes, and the text of each script element."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.scripts: list[str] = []
        self._in_script = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))
        self._in_script = tag == "script"
        if self._in_script:
            self.scripts.append("")

    def handle_endtag(self, tag: str) -> None:
        if tag == "script":
            self._in_script = False

    def handle_data(self, data: str) -> None:
        if self._in_script:
            self.scripts[-1] += data


def _parse(html: str) -> _Elements:
    parser = _Elements()
    parser.feed(html)
    parser.close()
    return parser


@pytest.fixture(scope="module")
def demo_cell(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A copy of the bundled demo cell with two comments, one resolved."""
    folder = tmp_path_factory.mktemp("demo")
    path = folder / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    store = CommentStore(comments_path_for(path))
    store.add(Pin("target", target="rack-low-1"), "Ana", "Approach looks tight\nplease check")
    resolved = store.add(Pin("waypoint", path="load-press", waypoint=1), "Ben", "Slow here")
    store.set_resolved(resolved.id)
    return path


@pytest.fixture(scope="module")
def demo_html(demo_cell: Path) -> str:
    return build_report(demo_cell, map_resolution=48)


@pytest.fixture(scope="module")
def hostile_cell(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A small cell whose names and comments carry markup."""
    data: dict[str, Any] = {
        "schema_version": 1,
        "title": f"Title {HOSTILE}",
        "robot": {"name": "pb-arm6"},
        "fixtures": [
            {
                "name": "<b>table</b>",
                "shape": "box",
                "position_mm": [900, 0, 300],
                "size_mm": [400, 400, 600],
            },
        ],
        "targets": [{"name": HOSTILE, "position_mm": [700, 0, 900], "rpy_deg": [0, 180, 0]}],
        "paths": [
            {
                "name": "<i>p</i>",
                "waypoints": [
                    {"joints_deg": [0, 0, 0, 0, 30, 0], "motion": "joint", "speed_percent": 50},
                    {"target": HOSTILE, "motion": "joint", "speed_percent": 50},
                ],
            }
        ],
        "notes": f"notes {HOSTILE}",
    }
    path = tmp_path_factory.mktemp("hostile") / "hostile.json"
    path.write_text(json.dumps(data))
    CommentStore(comments_path_for(path)).add(
        Pin("target", target=HOSTILE), f"Eve {HOSTILE}", f"text {HOSTILE} & more"
    )
    return path


def test_report_loads_nothing_by_url(demo_html: str) -> None:
    parsed = _parse(demo_html)
    for tag, attributes in parsed.tags:
        for name in ("src", "href", "data", "action", "srcset", "poster"):
            assert attributes.get(name) is None, (tag, name, attributes.get(name))
    assert not any(tag in ("link", "iframe", "object", "embed", "img") for tag, _ in parsed.tags)
    # the Content-Security-Policy forbids every connection of the page
    [policy] = [
        a["content"] for t, a in parsed.tags if a.get("http-equiv") == "Content-Security-Policy"
    ]
    assert policy is not None
    assert "default-src 'none'" in policy
    assert "connect-src 'none'" in policy


def test_report_inlines_plotly(demo_html: str) -> None:
    parsed = _parse(demo_html)
    assert plotly_script() in parsed.scripts
    package = (files("plotly") / "package_data" / "plotly.min.js").read_text(encoding="utf-8")
    assert "</script" not in package.lower()  # so the bundle is inlined without any escape
    hinted = [text for text in parsed.scripts if text.startswith("//# allFunctionsCalledOnLoad\n")]
    # V8's explicit compile hint is the inline script's first line (V8 blog "Giving V8 a
    # heads-up: faster JavaScript startup with explicit compile hints"), then the installed
    # package's plotly.min.js, verbatim
    assert hinted == ["//# allFunctionsCalledOnLoad\n" + package]
    # one embedded copy shared by every figure of the report (our own contract, issue 14)
    assert demo_html.count(package[:2000]) == 1
    assert len(demo_html.encode()) > 4_000_000


def test_report_has_caution_and_summary(demo_html: str, demo_cell: Path) -> None:
    cell = load_cell(demo_cell)
    assert SAFETY_CAUTION in demo_html
    assert SAFETY_CAUTION == (
        "posebridge is a kinematic planning aid, not a safety function. Risk assessment per "
        "ISO 10218-2, safeguard distances per ISO 13855, verify on the real controller at "
        "reduced speed; local codes and qualified practice prevail."
    )  # our contract (the safety caution), no source
    assert cell.title in demo_html
    assert "pb-arm6" in demo_html
    assert cell.tool is not None
    assert cell.tool.name in demo_html
    assert f"{len(cell.fixtures)} fixtures, {len(cell.keep_outs)} keep-out zones" in demo_html
    assert f"{len(cell.targets)} targets, {len(cell.paths)} paths" in demo_html


def test_report_lists_every_target_with_check(demo_html: str, demo_cell: Path) -> None:
    check = target_check_result(
        check_targets(resolve_scene(load_cell(demo_cell), demo_cell))
    )  # reference
    assert f"{check.reachable_count} of {len(check.targets)} targets reachable" in demo_html
    for target in check.targets:
        assert f"<td>{target.name}</td>" in demo_html
        pose = target.target
        if pose.recommended is not None:
            chosen = pose.branches[pose.recommended]
            assert f"{chosen.manipulability:.4f}" in demo_html
            assert f"<td>{pose.recommended_branch}</td>" in demo_html
    shown = html_text.unescape(demo_html)  # the text a reader sees (stdlib unescaping)
    for finding in check.findings:
        assert finding.message in shown


def test_report_shows_cycle_times_of_path_check(demo_html: str, demo_cell: Path) -> None:
    scene = resolve_scene(load_cell(demo_cell), demo_cell)
    shown = html_text.unescape(demo_html)  # the text a reader sees (stdlib unescaping)
    assert scene.paths
    for p in range(len(scene.paths)):
        reference = path_check_result(
            check_path(scene, p)
        )  # the path check's own result is the reference
        assert reference.cycle_time_s is not None
        assert reference.blended_cycle_time_s is not None
        assert (
            f"Path {reference.path}: cycle time {reference.cycle_time_s:.3f} s rest to rest, "
            f"{reference.blended_cycle_time_s:.3f} s blended"
        ) in demo_html
        for segment in reference.segments:
            assert segment.duration_s is not None
            assert segment.blended_duration_s is not None
            assert f"{segment.duration_s:.3f} s" in demo_html
            assert f"{segment.blended_duration_s:.3f} s" in demo_html
        grouped = {(g.severity, g.kind, g.cause) for g in reference.finding_groups if g.count > 1}
        for finding in reference.findings:
            if (finding.severity, finding.kind, finding.cause) not in grouped:
                assert finding.message in shown


def test_report_groups_path_findings_of_one_cause(demo_html: str, demo_cell: Path) -> None:
    scene = resolve_scene(load_cell(demo_cell), demo_cell)
    shown = html_text.unescape(demo_html)
    rows = [attrs for tag, attrs in _parse(demo_html).tags if tag == "tr" and "data-count" in attrs]
    reports = [path_check_result(check_path(scene, p)) for p in range(len(scene.paths))]
    repeated = [g for report in reports for g in report.finding_groups if g.count > 1]
    # the demo's load-press path passes the press die twice too close (demo cell notes: about
    # 20 mm above the die): one cause, more than one finding
    assert repeated
    for group in repeated:
        # our own contract (as the CLI text and the page): one row with the count, the cause
        # and the worst instance
        assert f"{group.count} × {group.cause}, worst at " in shown
        assert group.worst.message in shown
    # one row per finding, less the findings folded into their group's row
    hidden = sum(g.count - 1 for g in repeated)
    assert len(rows) == sum(len(report.findings) for report in reports) - hidden
    assert sorted(
        int(str(row["data-count"])) for row in rows if row["data-count"] != "1"
    ) == sorted(g.count for g in repeated)


def test_report_embeds_the_four_figures(demo_html: str) -> None:
    parsed = _parse(demo_html)
    [data] = [
        parsed.scripts[k]
        for k, (_, attributes) in enumerate((t, a) for t, a in parsed.tags if t == "script")
        if attributes.get("id") == "pb-figures"
    ]
    figures = json.loads(data)
    assert set(figures) == {"scene3d", "plan", "elevation", "joint-map"}
    ids = {a.get("id") for _, a in parsed.tags}
    assert {f"pb-{key}" for key in figures} <= ids
    kinds = {trace["type"] for trace in figures["scene3d"]["data"]}
    assert {"mesh3d", "scatter3d"} <= kinds
    assert figures["joint-map"]["data"][0]["type"] == "heatmap"


def test_report_lists_comments(demo_html: str) -> None:
    assert "target &#39;rack-low-1&#39;" in demo_html
    assert "Approach looks tight\nplease check" in demo_html
    assert "path &#39;load-press&#39; waypoint 2" in demo_html
    assert "resolved 20" in demo_html  # resolved time stamp, year 20xx
    assert "<td>open</td>" in demo_html


def test_report_escapes_user_strings(hostile_cell: Path) -> None:
    html = build_report(hostile_cell, map_resolution=16)
    assert HOSTILE not in html
    assert "<b>table</b>" not in html
    assert "<i>p</i>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "Eve &lt;script&gt;" in html
    assert "text &lt;script&gt;alert(1)&lt;/script&gt; &amp; more" in html
    # inside the figure JSON, "<" is written \u003c so no tag can start there
    assert "\\u003cscript\\u003ealert(1)\\u003c/script\\u003e" in html
    parsed = _parse(html)
    assert [t for t, _ in parsed.tags].count("script") == 3  # plotly, figure data, start-up


def test_report_refuses_unknown_map_joints(demo_cell: Path) -> None:
    with pytest.raises(
        ReportError,
        match=r"^map_joints: expected two different joint names of j1, j2, j3, j4, j5, j6, "
        r"got \['j2', 'j9'\]$",
    ):
        build_report(demo_cell, map_joints=["j2", "j9"])


def test_report_uses_chosen_map_joints(demo_cell: Path) -> None:
    html = build_report(demo_cell, map_joints=["j1", "j4"], map_resolution=8)
    assert "Joint space: j1 and j4" in html


def test_write_report_atomically(demo_cell: Path, tmp_path: Path) -> None:
    output = tmp_path / "review.html"
    output.write_text("old")
    assert write_report(demo_cell, output, map_resolution=8) == output
    assert output.read_text(encoding="utf-8").startswith("<!doctype html>")
    assert [p.name for p in tmp_path.iterdir()] == ["review.html"]  # no temporary file left


def test_write_report_refuses_missing_folder(demo_cell: Path, tmp_path: Path) -> None:
    missing = tmp_path / "nowhere" / "review.html"
    with pytest.raises(ReportError, match=r"^output: folder .* does not exist$"):
        write_report(demo_cell, missing)


def test_write_report_mode_follows_umask(demo_cell: Path, tmp_path: Path) -> None:
    previous = os.umask(0o022)
    try:
        output = write_report(demo_cell, tmp_path / "review.html", map_resolution=8)
    finally:
        os.umask(previous)
    # POSIX open(2): a new file gets mode 0o666 & ~umask = 0o644 (readable by others)
    assert stat.S_IMODE(output.stat().st_mode) == 0o644


def test_report_refuses_unreadable_comment_file(tmp_path: Path) -> None:
    cell = tmp_path / "cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    comments_path_for(cell).write_text("not a database " * 200)
    with pytest.raises(ReportError, match=r"^comments: .*not a readable comment database"):
        build_report(cell, map_resolution=8)
