"""The ``posebridge`` command line: the front door to every computation.

Values at this boundary are millimetres and degrees (prismatic joints in mm).
Exit codes: 0 success, 1 findings (an unreachable pose, a failed check),
2 bad input (one line on stderr, never a traceback), 3 internal error.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import traceback
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from posebridge.messages import printable
from posebridge.units import FloatArray, joints_si_from_user

if TYPE_CHECKING:
    from pydantic import BaseModel

    from posebridge.robot.model import Robot

__all__ = ["main"]

SAFETY_CAUTION = (
    "Safety: posebridge is a kinematic planning aid, not a safety function. Carry out the risk "
    "assessment per ISO 10218-2, size safeguard distances per ISO 13855, verify every program on "
    "the real controller at reduced speed; local codes and qualified practice prevail."
)
DEFAULT_CELL = "demo-cell.json"

EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3


class InputError(ValueError):
    """Bad command-line input; the message is printed as one line."""


class _DeprecatedFlag(argparse.Action):
    """A flag kept for one release under an old name: sets the new option's value and says
    on stderr which option replaces it."""

    def __init__(self, option_strings: Sequence[str], dest: str, **kwargs: Any) -> None:
        self.replacement = kwargs.pop("replacement")
        super().__init__(option_strings, dest, nargs=0, **kwargs)

    def __call__(
        self,
        parser: argparse.ArgumentParser,
        namespace: argparse.Namespace,
        values: Any,
        option_string: str | None = None,
    ) -> None:
        print(
            f"posebridge: {option_string} is deprecated and will be removed in the next release; "
            f"use {self.replacement}",
            file=sys.stderr,
        )
        setattr(namespace, self.dest, True)


# ---------------------------------------------------------------- parsing


def _parse_numbers(text: str, what: str, count: int | None = None) -> list[float]:
    """Comma-separated finite numbers, e.g. ``"0, -20, 20, 0, 90, 0"``."""
    parts = [p.strip() for p in text.split(",")]
    values: list[float] = []
    for index, part in enumerate(parts, start=1):
        try:
            value = float(part)
        except ValueError:
            raise InputError(f"{what}: value {index} {part!r} is not a number") from None
        if not math.isfinite(value):
            raise InputError(f"{what}: value {index} {part!r} is not a finite number")
        values.append(value)
    if count is not None and len(values) != count:
        raise InputError(f"{what}: expected {count} comma-separated values, got {len(values)}")
    return values


def _joints_argument(text: str, option: str, robot: Robot) -> FloatArray:
    """One value per joint of ``robot``, comma-separated (deg; mm for prismatic), in SI."""
    return joints_si_from_user(_parse_numbers(text, option, robot.dof), robot.prismatic)


def _read_numeric_csv(path: str, columns: Sequence[str], what: str) -> FloatArray:
    """Rows of numbers, with an optional header naming ``columns`` in any order, read as a
    size-capped stream (:func:`posebridge.value_files.read_value_rows`).

    Returns
    -------
    values : array, shape (rows, len(columns)), in the order of ``columns``
    """
    from posebridge.value_files import ValueFileError, read_value_rows

    try:
        return read_value_rows(path, columns, what)
    except ValueFileError as error:
        raise InputError(str(error)) from error


def _print_json(data: Any) -> None:
    json.dump(data, sys.stdout, indent=2, allow_nan=False)
    sys.stdout.write("\n")


def _print_report(report: BaseModel, render: Callable[[Any], str], *, as_json: bool) -> None:
    """Print a result model as JSON (``--json``) or as the text ``render`` makes of it."""
    if as_json:
        _print_json(report.model_dump(mode="json"))
    else:
        print(render(report))


def _finite_or_none(values: FloatArray) -> Any:
    """Nested lists of ``values`` with NaN/inf as ``None`` (JSON has no NaN)."""
    cells = values.astype(object)
    cells[~np.isfinite(values)] = None
    return cells.tolist()


def _format_row(values: Sequence[float], digits: int = 3) -> str:
    return ", ".join(f"{round(v, digits) + 0.0:.{digits}f}" for v in values)


# ---------------------------------------------------------------- commands


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
        _print_json(entries)
        return EXIT_OK
    print(f"{'name':<16} {'joints':>6}  {'kind':<12} {'reach_mm':>9}  description")
    for e in entries:
        print(
            f"{e['name']:<16} {e['joints']:>6}  {e['kind']:<12} {e['reach_mm']:>9.1f}  {e['description']}"
        )
    return EXIT_OK


def _tool_from_argument(text: str | None) -> FloatArray | None:
    from posebridge.transforms import transform_from_position_rpy
    from posebridge.units import m_from_mm

    if text is None:
        return None
    values = _parse_numbers(text, "--tool", 6)
    return transform_from_position_rpy(m_from_mm(values[:3]), values[3:], degrees=True)


def _cmd_fk(args: argparse.Namespace) -> int:
    from posebridge.api.schemas.kinematics import fk_result
    from posebridge.robot.library import load_robot

    robot = load_robot(args.robot)
    if args.joints_file:
        joints_user = _read_numeric_csv(args.joints_file, robot.joint_names, "joint value")
    else:
        joints_user = np.array([_parse_numbers(args.joints, "--joints", robot.dof)])
    q = joints_si_from_user(joints_user, robot.prismatic)
    result = fk_result(robot, q, T_flange_tool=_tool_from_argument(args.tool), spec=args.robot)
    entries = []
    for values, configuration in zip(joints_user, result.configurations, strict=True):
        entry = {"joints_deg": values.tolist()}
        entry.update(
            configuration.model_dump(
                mode="json", exclude={"frames_position_mm", "capsule_segments_mm"}
            )
        )
        entries.append(entry)
    if args.json:
        _print_json(entries if args.joints_file else entries[0])
        return EXIT_OK
    units = result.joint_units
    for entry in entries:
        print(f"joints ({', '.join(units)}): {_format_row(entry['joints_deg'])}")
        print(f"  position_mm:     {_format_row(entry['position_mm'])}")
        print(f"  rpy_deg:         {_format_row(entry['rpy_deg'])}")
        print(f"  quaternion_wxyz: {_format_row(entry['quaternion_wxyz'], 6)}")
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
    from posebridge.api.schemas.kinematics import ik_result
    from posebridge.kinematics.ik import solve_ik_all
    from posebridge.robot.library import load_robot
    from posebridge.transforms import transform_from_position_rpy
    from posebridge.units import m_from_mm

    robot = load_robot(args.robot)
    if args.poses_file:
        poses = _read_numeric_csv(
            args.poses_file,
            ("x_mm", "y_mm", "z_mm", "roll_deg", "pitch_deg", "yaw_deg"),
            "pose value",
        )
    else:
        poses = np.array([_parse_numbers(args.pose, "--pose", 6)])
    T = transform_from_position_rpy(m_from_mm(poses[:, :3]), poses[:, 3:], degrees=True)
    seed = None
    if args.seed is not None:
        seed = _joints_argument(args.seed, "--seed", robot)
    tool = _tool_from_argument(args.tool)
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
        _print_json(dumped if args.poses_file else dumped[0])
        return EXIT_FINDINGS if unreachable else EXIT_OK
    for pose, result in zip(poses, results, strict=True):
        print(f"pose (x, y, z mm; roll, pitch, yaw deg): {_format_row(pose)}")
        if result.ignored_components:
            print(f"  not controlled by this arm (ignored): {', '.join(result.ignored_components)}")
        if not result.solutions:
            print(f"  no solution: {result.reason}")
            continue
        if result.reason:
            print(f"  note: {result.reason}")
        for s in result.solutions:
            flag = "within limits" if s.within_limits else "OUTSIDE LIMITS"
            print(
                f"  [{s.branch}] {_format_row(s.joints_deg, 2)}  ({flag}; "
                f"manipulability {s.manipulability:.4g})"
            )
    return EXIT_FINDINGS if unreachable else EXIT_OK


def _load_scene(cell_argument: str) -> Any:
    from posebridge.cell import load_cell, resolve_scene

    path = Path(cell_argument)
    return resolve_scene(load_cell(path), path)


def _exit_for_findings(findings: Sequence[Any]) -> int:
    """1 when any finding is an error or a warning, else 0 (info findings do not count)."""
    return EXIT_FINDINGS if any(f.severity in ("error", "warning") for f in findings) else EXIT_OK


def _cmd_check(args: argparse.Namespace) -> int:
    from posebridge.cell.checks import check_targets
    from posebridge.cell.report_text import render_target_check

    report = check_targets(_load_scene(args.cell))
    _print_report(report, render_target_check, as_json=args.json)
    return _exit_for_findings(report.findings)


def _cmd_diagnose(args: argparse.Namespace) -> int:
    from posebridge.cell.diagnosis import diagnose_log, diagnose_pose
    from posebridge.cell.joint_log import read_joint_log
    from posebridge.cell.report_text import render_log_diagnosis, render_pose_diagnosis

    scene = _load_scene(args.cell)
    robot = scene.robot
    if args.log:
        log_result = diagnose_log(scene, read_joint_log(args.log, robot), include_rows=args.json)
        _print_report(log_result, render_log_diagnosis, as_json=args.json)
        return _exit_for_findings(log_result.findings)
    q = _joints_argument(args.joints, "--joints", robot)
    pose_result = diagnose_pose(scene, q)
    _print_report(pose_result, render_pose_diagnosis, as_json=args.json)
    return _exit_for_findings(pose_result.findings)


class _ProgressBar:
    """A one-line progress bar on stderr, ``progress(done, total)`` style."""

    def __init__(self, label: str, *, enabled: bool) -> None:
        self.label = label
        self.enabled = enabled and sys.stderr.isatty()

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled or total <= 0:
            return
        width = 30
        filled = int(width * done / total)
        sys.stderr.write(f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] {done}/{total}")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


def _executor(args: argparse.Namespace) -> Any:
    from posebridge.compute import make_executor

    return make_executor(scheduler=args.scheduler, workers=args.workers)


def _parse_range(text: str, what: str) -> FloatArray:
    """``"start:stop:count"`` (inclusive, evenly spaced) or a single value."""
    parts = text.split(":")
    if len(parts) == 1:
        return np.array(_parse_numbers(parts[0], what, 1))
    if len(parts) != 3:
        raise InputError(f"{what}: expected START:STOP:COUNT or one value, got {text!r}")
    start, stop = _parse_numbers(parts[0], what, 1)[0], _parse_numbers(parts[1], what, 1)[0]
    try:
        count = int(parts[2])
    except ValueError:
        raise InputError(f"{what}: COUNT {parts[2]!r} is not a whole number") from None
    if not 1 <= count <= 1000:
        raise InputError(f"{what}: COUNT must be 1..1000, got {count}")
    return np.linspace(start, stop, count)


def _parse_grid(text: str) -> dict[str, FloatArray]:
    """``"x_mm=-1000:1000:21 y_mm=-1000:1000:21 yaw_deg=0:315:8 height_mm=400"``."""
    allowed = ("x_mm", "y_mm", "yaw_deg", "height_mm")
    grid: dict[str, FloatArray] = {}
    for item in text.replace(",", " ").split():
        key, sep, value = item.partition("=")
        if not sep or key not in allowed:
            raise InputError(
                f"--grid: expected items KEY=START:STOP:COUNT with KEY in {', '.join(allowed)}, got {item!r}"
            )
        grid[key] = _parse_range(value, f"--grid {key}")
    return grid


def _cmd_reach(args: argparse.Namespace) -> int:
    from posebridge.robot.library import load_robot
    from posebridge.spaces.planar_boundary import planar_reach_summary
    from posebridge.spaces.workspace import reach_map
    from posebridge.units import m_from_mm, mm_from_m

    robot = load_robot(args.robot)
    if not 5.0 <= args.voxel_mm <= 1000.0:
        raise InputError(f"--voxel-mm: expected 5..1000, got {args.voxel_mm:g}")
    planar = planar_reach_summary(robot)
    if planar is not None:
        planar = {"robot": args.robot, **planar}
        if args.json:
            _print_json(planar)
        else:
            for key, value in planar.items():
                print(f"{key:<34} {value}")
        return EXIT_OK
    with _executor(args) as executor:
        result = reach_map(
            robot,
            voxel_size_m=float(m_from_mm(args.voxel_mm)),
            executor=executor,
            progress=_ProgressBar("reach map", enabled=not args.json),
        )
    directions = result.directions.shape[0]
    reachable = int(np.count_nonzero(result.count))
    every = int(np.count_nonzero(result.count == directions))
    voxel_m3 = result.voxel_size**3
    summary = {
        "robot": args.robot,
        "voxel_mm": float(mm_from_m(result.voxel_size)),
        "tool_directions": directions,
        "shape": list(result.count.shape),
        "voxels_reachable_any_direction": reachable,
        "voxels_reachable_every_direction": every,
        "volume_any_direction_m3": reachable * voxel_m3,
        "volume_every_direction_m3": every * voxel_m3,
    }
    if args.json:
        summary |= {
            "x_mm": mm_from_m(result.x).tolist(),
            "y_mm": mm_from_m(result.y).tolist(),
            "z_mm": mm_from_m(result.z).tolist(),
            "count": result.count.tolist(),
            "best_manipulability": _finite_or_none(np.round(result.best_manipulability, 6)),
        }
        _print_json(summary)
        return EXIT_OK
    for key, value in summary.items():
        print(f"{key:<34} {value}")
    return EXIT_OK


def _cmd_jointmap(args: argparse.Namespace) -> int:
    from posebridge.api.schemas.maps import joint_map_result
    from posebridge.cell import load_cell, resolve_scene
    from posebridge.cell.clearance import clearance_scene
    from posebridge.cell.files import cell_etag
    from posebridge.spaces.joint_map import joint_map
    from posebridge.units import joint_unit_labels

    cell = load_cell(args.cell)
    scene = resolve_scene(cell, Path(args.cell))
    robot = scene.robot
    names = [n.strip() for n in args.joints.split(",")]
    unknown = [n for n in names if n not in robot.joint_names]
    if unknown or len(names) not in (2, 3):
        raise InputError(
            f"--joints: expected 2 or 3 of {', '.join(robot.joint_names)}, got {args.joints!r}"
        )
    q_hold = (
        _joints_argument(args.hold, "--hold", robot) if args.hold else robot.home_configuration()
    )
    with _executor(args) as executor:
        computed = joint_map(
            clearance_scene(scene),
            [robot.joint_names.index(n) for n in names],
            q_hold,
            resolution=args.resolution,
            executor=executor,
            progress=_ProgressBar("joint map", enabled=not args.json),
        )
    result = joint_map_result(computed, robot, cell_etag(cell))
    if args.json:
        _print_json(result.model_dump(mode="json"))
        return EXIT_OK
    total = int(np.prod(result.shape))
    free = sum(
        1 for o, sc in zip(result.obstacle, result.self_collision, strict=True) if o < 0 and not sc
    )
    print(
        f"joint map over {', '.join(names)} ({' x '.join(map(str, result.shape))} cells), other joints held at"
    )
    print(f"  {_format_row(result.hold_deg, 2)} ({', '.join(joint_unit_labels(robot.prismatic))})")
    print(f"free cells: {free} of {total} ({100.0 * free / total:.1f} %)")
    for name in result.colliding_obstacles:
        k = result.obstacle_names.index(name)
        print(f"  in collision with {name}: {sum(1 for o in result.obstacle if o == k)} cells")
    print(f"  self-collision: {sum(result.self_collision)} cells")
    return EXIT_OK


def _cmd_paths(args: argparse.Namespace) -> int:
    from posebridge.planning.path_check import check_path
    from posebridge.planning.reports import render_path_check

    scene = _load_scene(args.cell)
    names = [p.name for p in scene.paths]
    if args.path is not None and args.path not in names:
        raise InputError(f"unknown path {args.path!r}; the cell has: {', '.join(names) or 'none'}")
    chosen = [i for i, name in enumerate(names) if args.path in (None, name)]
    reports = [check_path(scene, i, resolution_mm=args.resolution_mm) for i in chosen]
    if args.json:
        _print_json([r.model_dump(mode="json") for r in reports])
    else:
        print("\n\n".join(render_path_check(r) for r in reports))
    return EXIT_FINDINGS if any(not r.ok for r in reports) else EXIT_OK


def _cmd_plan(args: argparse.Namespace) -> int:
    from posebridge.planning.reports import render_joint_plan
    from posebridge.planning.rrt import plan_joint_move

    scene = _load_scene(args.cell)
    robot = scene.robot
    start = _joints_argument(args.start, "--from", robot)
    goal = _joints_argument(args.goal, "--to", robot)
    report = plan_joint_move(scene, start, goal, seed=args.seed, time_limit_s=args.time_limit_s)
    _print_report(report, render_joint_plan, as_json=args.json)
    return EXIT_OK if report.status in ("solved", "direct") else EXIT_FINDINGS


def _cmd_place(args: argparse.Namespace) -> int:
    from posebridge.planning.placement import PlacementGrid, search_base_placement
    from posebridge.planning.reports import render_placement
    from posebridge.units import deg_from_rad, mm_from_m

    scene = _load_scene(args.cell)
    grid = None
    if args.grid:
        around = PlacementGrid.around(scene)
        given = _parse_grid(args.grid)
        grid = PlacementGrid.from_user(
            given.get("x_mm", mm_from_m(around.x)),
            given.get("y_mm", mm_from_m(around.y)),
            given.get("yaw_deg", deg_from_rad(around.yaw)),
            given.get("height_mm", mm_from_m(around.height)),
        )
    with _executor(args) as executor:
        result = search_base_placement(
            scene,
            grid,
            executor=executor,
            progress=_ProgressBar("base placement", enabled=not args.json),
            top=args.top,
        )
    _print_report(
        result.report, lambda report: render_placement(report, top=args.top), as_json=args.json
    )
    return EXIT_OK


def _cmd_report(args: argparse.Namespace) -> int:
    from posebridge.report import write_report

    write_report(Path(args.cell), Path(args.output))
    print(f"review report written to {args.output}")
    return EXIT_OK


def _cmd_schema(args: argparse.Namespace) -> int:
    from posebridge.cell import cell_json_schema

    _print_json(cell_json_schema())
    return EXIT_OK


def _cmd_serve(args: argparse.Namespace) -> int:
    from posebridge.api.server import check_host, run_server
    from posebridge.resources import demo_working_folder

    check_host(args.host, share=args.share)
    if args.cell:
        cell_path = Path(args.cell)
    else:
        cell_path = demo_working_folder() / DEFAULT_CELL
        print(f"demo cell: working copy {cell_path} (delete it to start afresh)")
    run_server(host=args.host, port=args.port, cell_path=cell_path, share=args.share)
    return EXIT_OK


def _cmd_bench(args: argparse.Namespace) -> int:
    from posebridge.bench.runner import run_benchmarks

    figures = run_benchmarks(quick=args.quick, progress=None if args.json else _bench_progress)
    if args.json:
        _print_json(
            {k: (v if isinstance(v, str) or math.isfinite(v) else None) for k, v in figures.items()}
        )
        return EXIT_OK
    width = max(len(k) for k in figures)
    for key, value in figures.items():
        print(f"{key:<{width}}  {value if isinstance(value, str) else format(value, ',.4g')}")
    return EXIT_OK


def _bench_progress(name: str) -> None:
    print(f"measuring {name} ...", file=sys.stderr, flush=True)


# ---------------------------------------------------------------- parser


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="posebridge",
        description="Robot work-cell layout and troubleshooting in Cartesian and joint space. "
        "Lengths in mm, angles in deg (prismatic joints in mm); orientation as roll, pitch, yaw "
        "about fixed X, Y, Z.",
        epilog=SAFETY_CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    serve = sub.add_parser("serve", help="run the web dashboard (loopback only unless --share)")
    serve.add_argument(
        "--cell", help="cell file (default: a working copy of the bundled demo cell)"
    )
    serve.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    serve.add_argument("--port", type=int, default=8000, help="port (default 8000, 0 = any free)")
    serve.add_argument(
        "--share", action="store_true", help="allow a non-loopback bind for a read-only review"
    )
    serve.set_defaults(run=_cmd_serve)

    robots = sub.add_parser("robots", help="list the bundled robots")
    robots.add_argument("--json", action="store_true", help="print JSON")
    robots.set_defaults(run=_cmd_robots)

    fk = sub.add_parser("fk", help="forward kinematics: tool pose of joint values")
    fk.add_argument("robot", help="bundled robot name or .toml/.urdf path")
    source = fk.add_mutually_exclusive_group(required=True)
    source.add_argument(
        "--joints", help='joint values, e.g. "0,-20,20,0,90,0" (deg; mm for prismatic)'
    )
    source.add_argument(
        "--joints-file", help="CSV, one configuration per row, optional header of joint names"
    )
    fk.add_argument(
        "--tool", help='tool in the flange frame "x,y,z,roll,pitch,yaw" (default: the robot\'s)'
    )
    fk.add_argument("--json", action="store_true", help="print JSON")
    fk.set_defaults(run=_cmd_fk)

    ik = sub.add_parser("ik", help="inverse kinematics: every joint solution of a tool pose")
    ik.add_argument("robot", help="bundled robot name or .toml/.urdf path")
    target = ik.add_mutually_exclusive_group(required=True)
    target.add_argument(
        "--pose", help='tool pose in the base frame "x,y,z,roll,pitch,yaw" (mm, deg)'
    )
    target.add_argument(
        "--poses-file",
        help="CSV, one pose per row: x_mm,y_mm,z_mm,roll_deg,pitch_deg,yaw_deg (header optional)",
    )
    ik.add_argument(
        "--seed", help="joint values to sort solutions by closeness (deg; mm for prismatic)"
    )
    ik.add_argument(
        "--all-revolutions",
        action="store_true",
        help="list every whole-revolution variant of joints whose range exceeds +-180 deg",
    )
    ik.add_argument(
        "--all-turns",
        action=_DeprecatedFlag,
        dest="all_revolutions",
        replacement="--all-revolutions",
        help="deprecated name of --all-revolutions (removed in the next release)",
    )
    ik.add_argument(
        "--tool", help='tool in the flange frame "x,y,z,roll,pitch,yaw" (default: the robot\'s)'
    )
    ik.add_argument("--json", action="store_true", help="print JSON")
    ik.set_defaults(run=_cmd_ik)

    check = sub.add_parser("check", help="check every target of a cell (exit 1 on findings)")
    check.add_argument("cell", help="cell file (JSON)")
    check.add_argument("--json", action="store_true", help="print JSON")
    check.set_defaults(run=_cmd_check)

    diagnose = sub.add_parser("diagnose", help="diagnose a fault pose or a logged run in a cell")
    diagnose.add_argument("cell", help="cell file (JSON)")
    what = diagnose.add_mutually_exclusive_group(required=True)
    what.add_argument(
        "--joints", help='joint values, e.g. "0,-20,20,0,90,0" (deg; mm for prismatic)'
    )
    what.add_argument(
        "--log", help="CSV log: header of joint names (optional time_s column), deg/mm"
    )
    diagnose.add_argument("--json", action="store_true", help="print JSON")
    diagnose.set_defaults(run=_cmd_diagnose)

    def add_executor_options(command: argparse.ArgumentParser) -> None:
        command.add_argument(
            "--workers", type=int, help="local worker processes (default: one per core)"
        )
        command.add_argument(
            "--scheduler", help="use an existing Dask cluster, e.g. tcp://HOST:8786"
        )

    reach = sub.add_parser("reach", help="voxel reach map: reachable tool directions per voxel")
    reach.add_argument("robot", help="bundled robot name or .toml/.urdf path")
    reach.add_argument("--voxel-mm", type=float, default=50.0, help="voxel edge (default 50 mm)")
    add_executor_options(reach)
    reach.add_argument("--json", action="store_true", help="print JSON with the whole grid")
    reach.set_defaults(run=_cmd_reach)

    jointmap = sub.add_parser(
        "jointmap", help="joint-space obstacle map over 2 or 3 joints of a cell"
    )
    jointmap.add_argument("cell", help="cell file (JSON)")
    jointmap.add_argument(
        "--joints", default="j2,j3", help="joint names, e.g. j2,j3 (default) or j1,j2,j3"
    )
    jointmap.add_argument(
        "--hold", help="values of every joint; the mapped ones are ignored (default: home)"
    )
    jointmap.add_argument(
        "--resolution", type=int, default=128, help="cells per joint (2 joints <= 512, 3 <= 128)"
    )
    add_executor_options(jointmap)
    jointmap.add_argument("--json", action="store_true", help="print JSON with the whole grid")
    jointmap.set_defaults(run=_cmd_jointmap)

    paths = sub.add_parser(
        "paths", help="check the cell's paths and their cycle time (exit 1 on errors)"
    )
    paths.add_argument("cell", help="cell file (JSON)")
    paths.add_argument("path", nargs="?", help="one path by name (default: all)")
    paths.add_argument(
        "--resolution-mm", type=float, default=5.0, help="sampling step of linear moves"
    )
    paths.add_argument("--json", action="store_true", help="print JSON")
    paths.set_defaults(run=_cmd_paths)

    plan = sub.add_parser(
        "plan", help="collision-free joint move between two configurations (RRT-Connect)"
    )
    plan.add_argument("cell", help="cell file (JSON)")
    plan.add_argument(
        "--from", dest="start", required=True, help="start joint values (deg; mm for prismatic)"
    )
    plan.add_argument(
        "--to", dest="goal", required=True, help="goal joint values (deg; mm for prismatic)"
    )
    plan.add_argument("--seed", type=int, default=1, help="random seed (same seed, same path)")
    plan.add_argument("--time-limit-s", type=float, default=5.0, help="planning time limit")
    plan.add_argument("--json", action="store_true", help="print JSON")
    plan.set_defaults(run=_cmd_plan)

    place = sub.add_parser("place", help="search base placements and rank them")
    place.add_argument("cell", help="cell file (JSON)")
    place.add_argument(
        "--grid",
        help='candidates, e.g. "x_mm=-1000:1000:21 y_mm=-1000:1000:21 yaw_deg=0:315:8 height_mm=400" '
        "(default: +-1 m around the current base, 21 x 21 x 8 yaws)",
    )
    place.add_argument("--top", type=int, default=10, help="candidates to list (default 10)")
    add_executor_options(place)
    place.add_argument("--json", action="store_true", help="print JSON with the whole score grid")
    place.set_defaults(run=_cmd_place)

    report = sub.add_parser("report", help="write a self-contained HTML review report")
    report.add_argument("cell", help="cell file (JSON)")
    report.add_argument("-o", "--output", required=True, help="output .html file")
    report.set_defaults(run=_cmd_report)

    schema = sub.add_parser("schema", help="print the JSON Schema of cell files")
    schema.set_defaults(run=_cmd_schema)

    bench = sub.add_parser("bench", help="measure throughput and speed ratios")
    bench.add_argument("--quick", action="store_true", help="smaller problems, same keys")
    bench.add_argument("--json", action="store_true", help="print one flat JSON object of numbers")
    bench.set_defaults(run=_cmd_bench)
    return parser


def _input_error_types() -> tuple[type[BaseException], ...]:
    from posebridge.api.server import ServerConfigError
    from posebridge.cell.files import CellConflictError
    from posebridge.cell.joint_log import JointLogError
    from posebridge.cell.model import CellFileError
    from posebridge.compute import ComputationCancelled, ExecutorError
    from posebridge.kinematics.fk import KinematicsInputError
    from posebridge.planning.errors import PlanningInputError
    from posebridge.report import ReportError
    from posebridge.robot.errors import RobotDescriptionError
    from posebridge.spaces.errors import SpacesInputError
    from posebridge.transforms import TransformError

    return (
        InputError,
        RobotDescriptionError,
        KinematicsInputError,
        TransformError,
        ServerConfigError,
        CellFileError,
        CellConflictError,
        JointLogError,
        PlanningInputError,
        SpacesInputError,
        ReportError,
        ExecutorError,
        ComputationCancelled,
    )


_VALUE_OPTIONS = ("--joints", "--pose", "--seed", "--tool", "--from", "--to", "--hold")
"""Options whose value is a comma-separated list that often starts with a minus sign."""


def _attach_negative_values(argv: Sequence[str]) -> list[str]:
    """``--joints -10,20`` -> ``--joints=-10,20`` so argparse does not read ``-10,20`` as an option."""
    joined: list[str] = []
    index = 0
    while index < len(argv):
        token = argv[index]
        following = argv[index + 1] if index + 1 < len(argv) else None
        if (
            token in _VALUE_OPTIONS
            and following is not None
            and following.startswith("-")
            and following[1:2] in "0123456789."
        ):
            joined.append(f"{token}={following}")
            index += 2
            continue
        joined.append(token)
        index += 1
    return joined


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(_attach_negative_values(sys.argv[1:] if argv is None else argv))
    run: Callable[[argparse.Namespace], int] = args.run
    try:
        return run(args)
    except _input_error_types() as error:
        problems = [printable(line.strip()) for line in str(error).splitlines() if line.strip()]
        print(
            f"posebridge {args.command}: {'; '.join(problems) or type(error).__name__}",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("posebridge: interrupted", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as error:  # noqa: BLE001 - the CLI reports, never shows a traceback by default
        if os.environ.get("POSEBRIDGE_DEBUG"):
            traceback.print_exc()
        print(
            f"posebridge {args.command}: internal error: {type(error).__name__}: {error}",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
