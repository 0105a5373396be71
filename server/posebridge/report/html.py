"""The self-contained HTML review report of a cell: one file that opens anywhere, offline.

:func:`build_report` loads the cell, runs the target check
(:func:`posebridge.cell.checks.check_targets`), times and checks every path,
computes a joint-space map over a chosen pair of joints, reads the reviewer
comments (:mod:`posebridge.review.comments`) and renders
``templates/report.html`` with jinja2 autoescaping, so every name and text
from the cell or a reviewer is shown as text, never run as markup.
plotly.js is inlined from the installed plotly package (after V8's compile
hint, :mod:`posebridge.compile_hint`) and the figures are embedded as JSON;
the page's Content-Security-Policy allows no network connection at all.
"""

from __future__ import annotations

import os
import re
import secrets
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib.metadata import version
from importlib.resources import files
from pathlib import Path
from typing import Any

import numpy as np
from jinja2 import Environment, FileSystemLoader, select_autoescape
from markupsafe import Markup

from posebridge.cell.checks import check_targets
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.compile_hint import COMPILE_HINT
from posebridge.errors import InputError
from posebridge.palette import PALETTE
from posebridge.planning.path_check import check_path
from posebridge.report.figures import TargetMarker, cartesian_figures, joint_map_figure
from posebridge.resources import data_folder
from posebridge.results.cell import BranchReport, TargetCheck, TargetCheckReport
from posebridge.results.path_check import PathCheckReport, SegmentReport, path_check_result
from posebridge.results.target_check import target_check_result
from posebridge.review.comments import (
    Comment,
    CommentStorageError,
    CommentStore,
    comments_path_for,
)
from posebridge.spaces.joint_map import joint_map
from posebridge.units import FloatArray, joints_si_from_user, joints_user_from_si

__all__ = [
    "DEFAULT_MAP_RESOLUTION",
    "SAFETY_CAUTION",
    "ReportError",
    "build_report",
    "default_map_joints",
    "plotly_script",
    "write_report",
]

SAFETY_CAUTION = (
    "posebridge is a kinematic planning aid, not a safety function. Risk assessment per "
    "ISO 10218-2, safeguard distances per ISO 13855, verify on the real controller at reduced "
    "speed; local codes and qualified practice prevail."
)
DEFAULT_MAP_RESOLUTION = 120
"""Cells per axis of the report's joint map."""

_MISSING = "—"
_SCRIPT_END = re.compile(r"</(script)", re.IGNORECASE)


class ReportError(InputError):
    """The report cannot be built as asked (joint names, output file)."""


def plotly_script() -> str:
    r"""Return plotly.min.js of the installed plotly package, safe inside a ``<script>`` element.

    The text starts with V8's compile hint (:data:`posebridge.compile_hint.COMPILE_HINT`, the
    first line the dashboard gives its plotly.js too), to be the inline script's first line;
    the package's bundle follows unchanged, except that a ``</script`` inside the library
    (none in current releases) is written ``<\/script``, which JavaScript reads the same inside
    strings and regular expressions, the only places it can occur.
    """
    text = (files("plotly") / "package_data" / "plotly.min.js").read_text(encoding="utf-8")
    return COMPILE_HINT + _SCRIPT_END.sub(r"<\\/\1", text)


def default_map_joints(scene: Scene) -> tuple[int, int]:
    """Return the joint pair of the report's map.

    The second and third joints (shoulder and elbow of an arm) when the robot has three or more,
    else the first two.
    """
    if scene.robot.dof < 2:
        raise ReportError(f"joint map: robot {scene.robot.name!r} has fewer than two joints")
    return (1, 2) if scene.robot.dof >= 3 else (0, 1)


def _map_joint_indices(scene: Scene, names: Sequence[str] | None) -> tuple[int, int]:
    if names is None:
        return default_map_joints(scene)
    known = list(scene.robot.joint_names)
    if len(names) != 2 or len(set(names)) != 2 or not all(name in known for name in names):
        raise ReportError(
            f"map_joints: expected two different joint names of {', '.join(known)}, got {list(names)}"
        )
    return known.index(names[0]), known.index(names[1])


def _number(value: float | None, digits: int, unit: str = "") -> str:
    if value is None or not np.isfinite(value):
        return _MISSING
    text = f"{value:.{digits}f}"
    return f"{text} {unit}" if unit else text


def _vector(values: Sequence[float], digits: int = 1) -> str:
    return ", ".join(f"{v:.{digits}f}" for v in values)


def _joint_values(scene: Scene, q: FloatArray) -> str:
    user = joints_user_from_si(q, scene.robot.prismatic)
    units = ["mm" if p else "deg" for p in scene.robot.prismatic]
    return ", ".join(
        f"{name} {value:.1f} {unit}"
        for name, value, unit in zip(scene.robot.joint_names, user, units, strict=True)
    )


def _shown_configuration(scene: Scene, check: TargetCheckReport) -> tuple[FloatArray, str]:
    """Return the arm's configuration in the views.

    The robot's home, else the first target's recommended branch, else the middle of the joint
    ranges.
    """
    robot = scene.robot
    if robot.home is not None:
        return robot.home_configuration(), "robot's home configuration"
    for target in check.targets:
        pose = target.target
        if pose.recommended is not None:
            chosen = pose.branches[pose.recommended]
            q = joints_si_from_user(np.asarray(chosen.joints_deg), robot.prismatic)
            return q, f"recommended branch ({chosen.branch}) of target {target.name!r}"
    return robot.mid_configuration(), "middle of the joint ranges (no home, no reachable target)"


def _summary(scene: Scene, cell_file: str, shown: tuple[FloatArray, str]) -> list[tuple[str, str]]:
    cell = scene.cell
    robot = scene.robot
    base = cell.base
    pedestal = (
        f"; pedestal {base.pedestal_height_mm:.1f} mm high, radius {base.pedestal_radius_mm:.1f} mm"
        if base.pedestal_height_mm > 0.0 and base.pedestal_radius_mm is not None
        else ""
    )
    if cell.tool is None:
        tool = "the robot's default tool"
    else:
        tcp = cell.tool.tcp
        tool = (
            f"{cell.tool.name}: TCP at {_vector(tcp.position_mm)} mm, rpy {_vector(tcp.rpy_deg)} deg "
            f"in the flange frame; {len(cell.tool.capsules)} collision capsules"
        )
    waypoints = sum(len(path.waypoints) for path in cell.paths)
    return [
        ("Cell", cell.title or cell_file),
        ("Robot", f"{robot.name} ({robot.kind}, {robot.dof} joints)"),
        (
            "Base",
            f"foot at {_vector(base.position_mm)} mm, rpy {_vector(base.rpy_deg)} deg in the world"
            + pedestal,
        ),
        ("Tool", tool),
        ("Floor", f"z = {cell.floor_height_mm:.1f} mm"),
        (
            "Contents",
            f"{len(cell.fixtures)} fixtures, {len(cell.keep_outs)} keep-out zones, "
            f"{len(cell.targets)} targets, {len(cell.paths)} paths with {waypoints} waypoints",
        ),
        ("Arm shown at", f"{shown[1]}: {_joint_values(scene, shown[0])}"),
        ("Notes", cell.notes or _MISSING),
    ]


def _singularity_words(report: BranchReport) -> str:
    singularity = report.singularity
    if singularity is None:
        return _MISSING
    near = [
        part
        for part, flag in (
            ("wrist", singularity.near_wrist),
            ("elbow", singularity.near_elbow),
            ("shoulder", singularity.near_shoulder),
        )
        if flag
    ]
    if not near:
        return f"clear (wrist bend {singularity.wrist_bend_deg:.1f} deg)"
    return "near " + ", ".join(near)


def _approach_words(target: TargetCheck) -> str:
    approach = target.approach
    if approach is None:
        return "none"
    if not approach.reachable:
        return f"not reachable: {approach.reason}"
    return f"reachable ({approach.recommended_branch}), {target.approach_offset_mm:.1f} mm back"


@dataclass(frozen=True)
class _TargetRow:
    name: str
    fixture: str
    reachable: bool
    reason: str
    branch: str
    usable_count: int
    margin: str
    manipulability: str
    singularity: str
    clearance: str
    approach: str


def _target_row(target: TargetCheck) -> _TargetRow:
    pose = target.target
    chosen = None if pose.recommended is None else pose.branches[pose.recommended]
    if chosen is None:
        margin = manipulability = singularity = clearance = _MISSING
    else:
        margin = (
            _MISSING
            if chosen.min_margin is None
            else f"{chosen.min_margin:.1f} {chosen.min_margin_unit} ({chosen.min_margin_joint})"
        )
        manipulability = f"{chosen.manipulability:.4f}"
        singularity = _singularity_words(chosen)
        clearance = _number(chosen.clearance_mm, 1)
    return _TargetRow(
        name=target.name,
        fixture=target.fixture,
        reachable=target.reachable,
        reason=pose.reason,
        branch=pose.recommended_branch or _MISSING,
        usable_count=len(target.usable_branches),
        margin=margin,
        manipulability=manipulability,
        singularity=singularity,
        clearance=clearance,
        approach=_approach_words(target),
    )


def _targets_section(check: TargetCheckReport) -> dict[str, Any]:
    consistent = check.consistent_branch
    if consistent.consistent:
        consistency = f"one branch ({consistent.branch}) reaches every target clear of the cell"
    elif consistent.branch is None:
        consistency = "no branch reaches the targets clear of the cell"
    else:
        consistency = (
            f"no single branch reaches every target; {consistent.branch} misses "
            + ", ".join(consistent.breaking_targets)
        )
    return {
        "rows": [_target_row(target) for target in check.targets],
        "reachable_count": check.reachable_count,
        "consistency": consistency,
        "findings": [
            {
                "severity": finding.severity,
                "target": finding.target or "cell",
                "message": finding.message,
            }
            for finding in check.findings
        ],
    }


def _speed_words(segment: SegmentReport) -> str:
    if segment.motion == "joint":
        return f"{_number(segment.speed_percent, 0)} % of joint speed"
    requested = _number(segment.speed_requested_mm_s, 0, "mm/s")
    if segment.speed_capped:
        return f"{requested} requested, {_number(segment.speed_used_mm_s, 0, 'mm/s')} reached"
    return requested


def _limit_words(segment: SegmentReport) -> str:
    parts = []
    if segment.speed_capped:
        joint = f" of {segment.limiting_joint}" if segment.limiting_joint else ""
        parts.append(f"velocity limit{joint}")
    if segment.acceleration_capped:
        parts.append("joint acceleration limits")
    return ", ".join(parts) or _MISSING


def _path_item(report: PathCheckReport) -> dict[str, Any]:
    verdict = "no errors" if report.ok else f"{report.errors} errors"
    return {
        "name": report.path,
        "total": (
            f"{_number(report.cycle_time_s, 3, 's')} rest to rest, "
            f"{_number(report.blended_cycle_time_s, 3, 's')} blended "
            f"({verdict}, {report.warnings} warnings)"
        ),
        "segments": [
            {
                "number": segment.index + 1,
                "start": segment.from_waypoint,
                "end": segment.to_waypoint,
                "motion": f"{segment.motion} move",
                "speed": _speed_words(segment),
                "duration": _number(segment.duration_s, 3, "s"),
                "blended": _number(segment.blended_duration_s, 3, "s"),
                "limit": _limit_words(segment),
            }
            for segment in report.segments
        ],
        "findings": _path_findings(report),
    }


def _path_findings(report: PathCheckReport) -> list[dict[str, Any]]:
    """Return the path's finding rows in order, a repeated cause once.

    A cause (object pair, joint) of more than one finding of a kind and severity is one row
    with its count and worst instance (the path check's ``finding_groups``), where that cause
    first appears; as the CLI text and the page list them.
    """
    repeated = {(g.severity, g.kind, g.cause): g for g in report.finding_groups if g.count > 1}
    shown: set[tuple[str, str, str]] = set()
    rows: list[dict[str, Any]] = []
    for finding in report.findings:
        group = None
        if finding.cause is not None:
            key = (finding.severity, finding.kind, finding.cause)
            group = repeated.get(key)
            if group is not None and key in shown:
                continue
            shown.add(key)
        worst = finding if group is None else group.worst
        where = (
            "path"
            if worst.segment_index is None
            else f"segment {worst.segment_index + 1} ({worst.from_waypoint} to "
            f"{worst.to_waypoint}) at {100.0 * worst.fraction_worst:.0f} %"
        )
        count = 1 if group is None else group.count
        rows.append(
            {
                "severity": worst.severity,
                "count": count,
                "where": where if group is None else f"{count} × {group.cause}, worst at {where}",
                "message": worst.message,
            }
        )
    return rows


def _paths_section(reports: list[PathCheckReport]) -> dict[str, Any]:
    note = (
        f"Rest-to-rest cycle times: {reports[0].blend_note}. Blended cycle times: "
        f"{reports[0].blended_note.removeprefix('blended: ')}."
        if reports
        else ""
    )
    return {"note": note, "entries": [_path_item(report) for report in reports]}


def _target_markers(scene: Scene, check: TargetCheckReport) -> list[TargetMarker]:
    markers = []
    for target in check.targets:
        pose = target.target
        if pose.recommended is not None:
            chosen = pose.branches[pose.recommended]
            markers.append(TargetMarker(label=target.name, joints_user=tuple(chosen.joints_deg)))
    return markers


def _joint_map_section(
    scene: Scene,
    q_shown: FloatArray,
    pair: tuple[int, int],
    resolution: int,
    markers: list[TargetMarker],
) -> tuple[dict[str, str], dict[str, Any]]:
    computed = joint_map(clearance_scene(scene), pair, q_shown, resolution=resolution)
    shown_user = joints_user_from_si(q_shown, scene.robot.prismatic)
    names = scene.robot.joint_names
    held = [k for k in range(scene.robot.dof) if k not in pair]
    held_words = _joint_values(scene, q_shown).split(", ")
    note = (
        f"Collisions of the arm and tool with the cell over {names[pair[0]]} and "
        f"{names[pair[1]]} ({resolution} x {resolution} cells, dashed box: joint limits), the "
        "other joints held as shown: "
        + ", ".join(held_words[k] for k in held)
        + ". The targets' recommended configurations are marked too; their other joints "
        "differ from this slice."
    )
    section = {"title": f"{names[pair[0]]} and {names[pair[1]]}", "note": note}
    return section, joint_map_figure(computed, shown_user, markers)


def _comment_rows(comments: list[Comment]) -> list[dict[str, Any]]:
    return [
        {
            "id": comment.id,
            "pin": comment.pin.describe(),
            "author": comment.author,
            "created_utc": comment.created_utc,
            "status": f"resolved {comment.resolved_utc}" if comment.resolved else "open",
            "text": comment.text,
        }
        for comment in comments
    ]


def _comments(cell_path: Path) -> list[Comment]:
    try:
        return CommentStore(comments_path_for(cell_path)).list_comments()
    except CommentStorageError as error:
        raise ReportError(f"comments: {error}") from error


def build_report(
    cell_path: str | Path,
    *,
    map_joints: Sequence[str] | None = None,
    map_resolution: int = DEFAULT_MAP_RESOLUTION,
    generated: datetime | None = None,
    scene: Scene | None = None,
) -> str:
    """Build the review report of a cell as one self-contained HTML document.

    Parameters
    ----------
    cell_path : str or Path
        The cell file; its comments are read from :func:`comments_path_for` of it.
    map_joints : sequence of two str, optional, keyword-only
        Joint names of the joint-space map; :func:`default_map_joints` if omitted.
    map_resolution : int, keyword-only
        Cells per axis of the joint map (2..512).
    generated : datetime, optional, keyword-only
        Time stamp printed in the report; now if omitted.
    scene : Scene, optional, keyword-only
        The resolved scene of ``cell_path`` when the caller has loaded it already; read from
        ``cell_path`` if omitted.

    Returns
    -------
    str
        The HTML text (about 5 MB, most of it plotly.js).

    Raises
    ------
    CellFileError
        The cell file cannot be read or is invalid.
    ReportError
        ``map_joints`` does not name two joints of the robot, or the
        cell's comment file exists but cannot be read.
    """
    path = Path(cell_path)
    if scene is None:
        scene = resolve_scene(load_cell(path), path)
    pair = _map_joint_indices(scene, map_joints)
    check = target_check_result(check_targets(scene))
    shown = _shown_configuration(scene, check)
    figures: dict[str, Any] = cartesian_figures(scene, shown[0])
    map_section, figures["joint-map"] = _joint_map_section(
        scene, shown[0], pair, map_resolution, _target_markers(scene, check)
    )
    moment = generated or datetime.now(UTC)
    environment = Environment(
        loader=FileSystemLoader(data_folder("templates")),
        autoescape=select_autoescape(["html"]),
        keep_trailing_newline=True,
    )
    template = environment.get_template("report.html")
    return template.render(
        title=scene.cell.title or path.name,
        cell_file=path.name,
        generated_utc=moment.astimezone(UTC).strftime("%Y-%m-%d %H:%M"),
        version=version("posebridge"),
        caution=SAFETY_CAUTION,
        summary=_summary(scene, path.name, shown),
        configuration_label=shown[1],
        targets=_targets_section(check),
        paths=_paths_section(
            [path_check_result(check_path(scene, p)) for p in range(len(scene.paths))]
        ),
        joint_map=map_section,
        comments=_comment_rows(_comments(path)),
        figures=figures,
        palette=PALETTE,
        plotly_js=Markup(plotly_script()),
    )


def write_report(
    cell_path: str | Path,
    output_path: str | Path,
    *,
    map_joints: Sequence[str] | None = None,
    map_resolution: int = DEFAULT_MAP_RESOLUTION,
    scene: Scene | None = None,
) -> Path:
    """Build the report of ``cell_path`` and write it to ``output_path`` atomically.

    The text goes to a temporary file in the output folder, is flushed to
    disk and renamed over ``output_path``, so a failed run never leaves a
    half-written report. ``map_joints``, ``map_resolution`` and ``scene`` are those of
    :func:`build_report`.

    Returns
    -------
    Path
        ``output_path``.

    Raises
    ------
    ReportError
        The output folder does not exist or the file cannot be written.
    """
    output = Path(output_path)
    if not output.parent.is_dir():
        raise ReportError(f"output: folder {str(output.parent)!r} does not exist")
    text = build_report(
        cell_path, map_joints=map_joints, map_resolution=map_resolution, scene=scene
    )
    temporary = output.with_name(f".{output.name}.{secrets.token_hex(6)}.tmp")
    try:
        # created like any new file (mode 0o666 less the umask), never over an existing one
        handle = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        try:
            with os.fdopen(handle, "w", encoding="utf-8") as stream:
                stream.write(text)
                stream.flush()
                os.fsync(stream.fileno())
            os.replace(temporary, output)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
    except OSError as error:
        raise ReportError(
            f"output: cannot write {str(output)!r}: {error.strerror or error}"
        ) from error
    return output
