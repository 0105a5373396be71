"""Commands about one robot: ``robots`` (the library), ``fk`` and ``ik``."""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from posebridge.cli.common import (
    EXIT_FINDINGS,
    EXIT_OK,
    format_row,
    joints_argument,
    load_robot_argument,
    never_fails,
    parse_numbers,
    print_json,
    print_results,
    read_numeric_csv,
    tool_from_argument,
)
from posebridge.cli.options import DeprecatedFlag, SharedOptions, joints_or, options
from posebridge.units import joints_si_from_user


def _cmd_robots(args: argparse.Namespace) -> int:
    from posebridge.robot.library import bundled_robots, load_robot
    from posebridge.spaces.reach import reach_m
    from posebridge.units import mm_from_m

    entries = []
    for bundled in bundled_robots():
        robot = load_robot(bundled.path)
        entries.append(
            {
                "name": bundled.name,
                "joints": robot.dof,
                "kind": bundled.kind,
                "reach_mm": round(float(mm_from_m(reach_m(robot))), 1),
                "description": bundled.description,
            }
        )
    if args.json:
        print_json(entries)
        return EXIT_OK
    print(f"{'name':<16} {'joints':>6}  {'kind':<12} {'reach_mm':>9}  description")
    for e in entries:
        print(
            f"{e['name']:<16} {e['joints']:>6}  {e['kind']:<12} {e['reach_mm']:>9.1f}  {e['description']}"
        )
    return EXIT_OK


def _cmd_fk(args: argparse.Namespace) -> int:
    from posebridge.results.kinematics import fk_result

    robot = load_robot_argument(args)
    if args.joints_file:
        joints_user = read_numeric_csv(args.joints_file, robot.joint_names, "joint value")
    else:
        joints_user = np.array([parse_numbers(args.joints, "--joints", robot.dof)])
    q = joints_si_from_user(joints_user, robot.prismatic)
    result = fk_result(robot, q, T_flange_tool=tool_from_argument(args.tool), spec=args.robot)
    entries: list[dict[str, Any]] = []
    for values, configuration in zip(joints_user, result.configurations, strict=True):
        entry = {"joints_deg": values.tolist()}
        entry.update(
            configuration.model_dump(
                mode="json", exclude={"frames_position_mm", "capsule_segments_mm"}
            )
        )
        entries.append(entry)
    if args.json:
        print_json(entries if args.joints_file else entries[0])
        return EXIT_OK
    units = result.joint_units
    for entry in entries:
        print(f"joints ({', '.join(units)}): {format_row(entry['joints_deg'])}")
        print(f"  position_mm:     {format_row(entry['position_mm'])}")
        print(f"  rpy_deg:         {format_row(entry['rpy_deg'])}")
        print(f"  quaternion_wxyz: {format_row(entry['quaternion_wxyz'], 6)}")
        print(f"  manipulability:  {entry['manipulability']:.6g}")
        margins = entry["limit_margins_deg"]
        print(
            "  limit margins:   "
            + ", ".join(
                f"{name} {'-' if m is None else f'{m:.2f}'} {unit}"
                for name, m, unit in zip(result.joint_names, margins, units, strict=True)
            )
        )
    return EXIT_OK


def _cmd_ik(args: argparse.Namespace) -> int:
    from posebridge.kinematics.ik import solve_ik_all
    from posebridge.results.kinematics import ik_result
    from posebridge.transforms import transform_from_position_rpy
    from posebridge.units import m_from_mm

    robot = load_robot_argument(args)
    if args.poses_file:
        poses = read_numeric_csv(
            args.poses_file,
            ("x_mm", "y_mm", "z_mm", "roll_deg", "pitch_deg", "yaw_deg"),
            "pose value",
        )
    else:
        poses = np.array([parse_numbers(args.pose, "--pose", 6)])
    T = transform_from_position_rpy(m_from_mm(poses[:, :3]), poses[:, 3:], degrees=True)
    seed = None
    if args.seed is not None:
        seed = joints_argument(args.seed, "--seed", robot)
    tool = tool_from_argument(args.tool)
    solutions = solve_ik_all(
        robot, T, T_flange_tool=tool, seed=seed, all_revolutions=args.all_revolutions
    )
    results = [
        ik_result(robot, solutions, i, T_flange_tool=tool, spec=args.robot)
        for i in range(len(poses))
    ]
    unreachable = any(not r.solutions for r in results)
    if args.json:
        dumped = [r.model_dump(mode="json") for r in results]
        print_json(dumped if args.poses_file else dumped[0])
        return EXIT_FINDINGS if unreachable else EXIT_OK
    for pose, result in zip(poses, results, strict=True):
        print(f"pose (x, y, z mm; roll, pitch, yaw deg): {format_row(pose)}")
        if result.ignored_components:
            print(f"  not controlled by this arm (ignored): {', '.join(result.ignored_components)}")
        if not result.solutions:
            print(f"  no solution: {result.reason}")
            continue
        if result.reason:
            print(f"  note: {result.reason}")
        columns = (
            f"{name} ({unit})"
            for name, unit in zip(result.joint_names, result.joint_units, strict=True)
        )
        print(f"  [branch] joints {', '.join(columns)}")
        for s in result.solutions:
            flag = "within limits" if s.within_limits else "OUTSIDE LIMITS"
            print(
                f"  [{s.branch}] {format_row(s.joints_deg, 2)}  ({flag}; "
                f"manipulability {s.manipulability:.4g})"
            )
    return EXIT_FINDINGS if unreachable else EXIT_OK


def _cmd_describe(args: argparse.Namespace) -> int:
    from posebridge.results.robots import render_robot_import, robot_import_report

    report = robot_import_report(load_robot_argument(args), args.robot)
    return print_results(report, render_robot_import, as_json=args.json, failed=never_fails)


def add_describe(sub: Any, shared: SharedOptions) -> None:
    """``posebridge describe ROBOT [--from-link] [--to-link] [--mesh-folder] [--json]``."""
    command = sub.add_parser(
        "describe",
        help="what an import made of a robot file: chain, joints, limits, assumed values, "
        "meshes, capsules, notes",
        parents=[shared.robot, shared.json],
    )
    command.set_defaults(run=_cmd_describe)


def add_robots(sub: Any, shared: SharedOptions) -> None:
    """``posebridge robots [--json]``."""
    command = sub.add_parser("robots", help="list the bundled robots", parents=[shared.json])
    command.set_defaults(run=_cmd_robots)


def add_fk(sub: Any, shared: SharedOptions) -> None:
    """``posebridge fk ROBOT (--joints | --joints-file) [--tool] [--json]``."""
    source = joints_or(
        "--joints-file", "CSV, one configuration per row, optional header of joint names"
    )
    command = sub.add_parser(
        "fk",
        help="forward kinematics: tool pose of joint values",
        parents=[shared.robot, source, shared.tool, shared.json],
    )
    command.set_defaults(run=_cmd_fk)


def add_ik(sub: Any, shared: SharedOptions) -> None:
    """``posebridge ik ROBOT (--pose | --poses-file) [--seed] [--all-revolutions] [--tool] [--json]``."""
    own = options()
    target = own.add_mutually_exclusive_group(required=True)
    target.add_argument(
        "--pose", help='tool pose in the base frame "x,y,z,roll,pitch,yaw" (mm, deg)'
    )
    target.add_argument(
        "--poses-file",
        help="CSV, one pose per row: x_mm,y_mm,z_mm,roll_deg,pitch_deg,yaw_deg (header optional)",
    )
    own.add_argument(
        "--seed", help="joint values to sort solutions by closeness (deg; mm for prismatic)"
    )
    own.add_argument(
        "--all-revolutions",
        action="store_true",
        help="list every whole-revolution variant of joints whose range exceeds +-180 deg",
    )
    own.add_argument(
        "--all-turns",
        action=DeprecatedFlag,
        dest="all_revolutions",
        replacement="--all-revolutions",
        help="deprecated name of --all-revolutions (removed in the next release)",
    )
    command = sub.add_parser(
        "ik",
        help="inverse kinematics: every joint solution of a tool pose",
        parents=[shared.robot, own, shared.tool, shared.json],
    )
    command.set_defaults(run=_cmd_ik)
