"""Commands about one cell file: ``check``, ``diagnose``, ``report`` and ``schema``."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from posebridge.cli.common import (
    EXIT_OK,
    joints_argument,
    load_kernels,
    load_scene,
    parse_numbers,
    print_json,
    print_results,
)
from posebridge.cli.options import SharedOptions, joints_or, options


def _cmd_check(args: argparse.Namespace) -> int:
    from posebridge.cell.checks import check_targets
    from posebridge.geometry.warm import warm_geometry
    from posebridge.kinematics.warm import warm_kinematics
    from posebridge.results.cell_text import render_target_check
    from posebridge.results.target_check import target_check_result

    scene = load_scene(args.cell, quiet=args.quiet)
    load_kernels(
        [
            ("forward and inverse kinematics", lambda: warm_kinematics(scene.robot)),
            ("clearance", lambda: warm_geometry(scene.robot)),
        ],
        quiet=args.quiet,
    )
    report = target_check_result(check_targets(scene))
    return print_results(report, render_target_check, as_json=args.json)


def _cmd_diagnose(args: argparse.Namespace) -> int:
    from posebridge.cell.joint_log import read_joint_log
    from posebridge.cell.log_diagnosis import diagnose_log
    from posebridge.cell.pose_diagnosis import diagnose_pose
    from posebridge.results.cell_text import render_log_diagnosis, render_pose_diagnosis
    from posebridge.results.diagnosis import pose_diagnosis_result
    from posebridge.results.log_diagnosis import log_diagnosis_result

    scene = load_scene(args.cell, quiet=args.quiet)
    robot = scene.robot
    if args.log:
        log = read_joint_log(args.log, robot, external=scene.external)
        log_result = log_diagnosis_result(diagnose_log(scene, log), include_rows=args.json)
        return print_results(log_result, render_log_diagnosis, as_json=args.json)
    if scene.external.count == 0:
        pose_result = pose_diagnosis_result(
            diagnose_pose(scene, joints_argument(args.joints, "--joints", robot))
        )
    else:  # robot joints, optionally followed by the track (mm) and turntables (deg)
        q, external = scene.split_joints([parse_numbers(args.joints, "--joints")], where="--joints")
        pose_result = pose_diagnosis_result(diagnose_pose(scene, q[0], external=external[0]))
    return print_results(pose_result, render_pose_diagnosis, as_json=args.json)


def _cmd_report(args: argparse.Namespace) -> int:
    from posebridge.report import write_report

    scene = load_scene(args.cell, quiet=args.quiet)
    write_report(Path(args.cell), Path(args.output), scene=scene)
    print(f"review report written to {args.output}")
    return EXIT_OK


def _cmd_schema(args: argparse.Namespace) -> int:
    from posebridge.cell import cell_json_schema

    print_json(cell_json_schema())
    return EXIT_OK


def add_check(sub: Any, shared: SharedOptions) -> None:
    """``posebridge check CELL [--json]``."""
    command = sub.add_parser(
        "check",
        help="check every target of a cell (exit 1 on findings)",
        parents=[shared.cell, shared.json],
    )
    command.set_defaults(run=_cmd_check)


def add_diagnose(sub: Any, shared: SharedOptions) -> None:
    """``posebridge diagnose CELL (--joints | --log) [--json]``."""
    what = joints_or("--log", "CSV log: header of joint names (optional time_s column), deg/mm")
    command = sub.add_parser(
        "diagnose",
        help="diagnose a fault pose or a logged run in a cell",
        parents=[shared.cell, what, shared.json],
    )
    command.set_defaults(run=_cmd_diagnose)


def add_report(sub: Any, shared: SharedOptions) -> None:
    """``posebridge report CELL -o OUTPUT``."""
    own = options()
    own.add_argument("-o", "--output", required=True, help="output .html file")
    command = sub.add_parser(
        "report", help="write a self-contained HTML review report", parents=[shared.cell, own]
    )
    command.set_defaults(run=_cmd_report)


def add_schema(sub: Any, shared: SharedOptions) -> None:
    """``posebridge schema``."""
    command = sub.add_parser("schema", help="print the JSON Schema of cell files")
    command.set_defaults(run=_cmd_schema)
