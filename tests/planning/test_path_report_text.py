"""Path-check findings grouped by cause, and the text table of a path check (no kernels: the
reports are built by hand)."""

from __future__ import annotations

from typing import Any

from posebridge.results.path_check import (
    PathCheckReport,
    PathFinding,
    SegmentReport,
    group_path_findings,
    path_finding_cause,
    render_path_check,
)


def _finding(segment: int, distance_mm: float | None, **fields: Any) -> PathFinding:
    values: dict[str, Any] = {
        "kind": "collision",
        "severity": "error",
        "segment_index": segment,
        "from_waypoint": f"w{segment}",
        "to_waypoint": f"w{segment + 1}",
        "fraction_start": 0.2,
        "fraction_end": 0.8,
        "fraction_worst": 0.5,
        "message": f"gripper-body is {distance_mm} mm into press-column (seg {segment})",
        "capsule": "gripper-body",
        "obstacle": "press-column",
        "distance_mm": distance_mm,
    }
    values |= fields
    # what the path check fills in: the pair, else the joint (our own contract)
    values["cause"] = path_finding_cause(values["capsule"], values["obstacle"], values.get("joint"))
    return PathFinding(**values)


def _segment(index: int, motion: str, **fields: Any) -> SegmentReport:
    values: dict[str, Any] = {
        "index": index,
        "motion": motion,
        "from_waypoint": f"w{index}",
        "to_waypoint": f"w{index + 1}",
        "samples": 10,
        "length_mm": None,
        "rotation_deg": None,
        "joint_travel_deg": None,
        "duration_s": 1.0,
        "blend_mm": 0.0,
        "min_clearance_mm": 50.0,
    }
    return SegmentReport(**(values | fields))


def _report(segments: list[SegmentReport], findings: list[PathFinding]) -> PathCheckReport:
    return PathCheckReport.model_construct(
        path="p",
        robot="r",
        tool="t",
        ok=False,
        errors=len(findings),
        warnings=0,
        cycle_time_s=None,
        blended_cycle_time_s=None,
        blend_note="",
        blended_note="",
        environment_clearance_mm=None,
        closest_environment=None,
        self_clearance_mm=None,
        closest_self=None,
        segments=segments,
        findings=findings,
        robot_geometry_missing=None,
    )


def test_findings_of_one_pair_are_one_group_with_the_deepest_as_worst() -> None:
    findings = [
        _finding(0, -3.0),
        _finding(1, -26.5),
        _finding(2, -7.8),
        _finding(0, 4.0, kind="low_clearance", severity="warning"),
        _finding(1, None, kind="joint_limit", capsule=None, obstacle=None, joint="j5"),
        _finding(2, None, kind="unreachable", capsule=None, obstacle=None),
    ]
    groups = group_path_findings(findings)
    # our own contract: grouped by (severity, kind, cause) in first-seen order; the worst is
    # the smallest distance (min of the given values); findings naming no pair or joint stay
    # ungrouped
    assert [(g.kind, g.cause, g.count) for g in groups] == [
        ("collision", "gripper-body – press-column", 3),
        ("low_clearance", "gripper-body – press-column", 1),
        ("joint_limit", "j5", 1),
    ]
    assert groups[0].worst.distance_mm == -26.5
    assert groups[0].worst.segment_index == 1


def test_text_shows_a_repeated_cause_once_with_its_count_and_worst() -> None:
    findings = [_finding(0, -3.0), _finding(1, -26.5), _finding(2, -7.8)]
    text = render_path_check(_report([_segment(0, "joint", joint_travel_deg=90.0)], findings))
    lines = [line for line in text.splitlines() if "collision" in line]
    # our own contract: one line per group, "N x", the worst instance's place and message
    assert lines == [
        "  [error] 3 x, worst collision (seg 1 at 50 %): "
        "gripper-body is -26.5 mm into press-column (seg 1)"
    ]


def test_length_column_gives_each_move_its_own_unit() -> None:
    segments = [
        _segment(0, "joint", joint_travel_deg=90.0),
        _segment(1, "linear", length_mm=250.0, rotation_deg=0.0),
    ]
    lines = render_path_check(_report(segments, [])).splitlines()
    header = next(i for i, line in enumerate(lines) if line.startswith("seg"))
    # our own contract: the column is "length" (no unit in its title); a joint move shows its
    # joint travel in deg, a linear move its TCP length in mm (values given above)
    assert " length " in lines[header]
    assert "mm" not in lines[header].split("time s")[0]
    joint_row, linear_row = lines[header + 2], lines[header + 3]
    assert "90.0 deg joint travel" in joint_row
    assert " mm " not in joint_row.split("deg")[0]
    assert "250.0 mm" in linear_row
