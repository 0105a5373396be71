"""Commands about motion in a cell.

``paths`` (path check, fastest solution sequence), ``export`` (timed motion as plain numbers),
``plan`` (joint move) and ``place`` (base placement search).
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from posebridge.cli.common import (
    EXIT_OK,
    CommandLineInputError,
    ProgressBar,
    executor_from,
    joints_argument,
    load_scene,
    never_fails,
    parse_numbers,
    print_results,
)
from posebridge.cli.options import SharedOptions, options
from posebridge.units import FloatArray, m_from_mm, rad_from_deg


def _parse_range(text: str, what: str) -> FloatArray:
    """``"start:stop:count"`` (inclusive, evenly spaced) or a single value."""
    parts = text.split(":")
    if len(parts) == 1:
        return np.array(parse_numbers(parts[0], what, 1))
    if len(parts) != 3:
        raise CommandLineInputError(f"{what}: expected START:STOP:COUNT or one value, got {text!r}")
    start, stop = parse_numbers(parts[0], what, 1)[0], parse_numbers(parts[1], what, 1)[0]
    try:
        count = int(parts[2])
    except ValueError:
        raise CommandLineInputError(f"{what}: COUNT {parts[2]!r} is not a whole number") from None
    if not 1 <= count <= 1000:
        raise CommandLineInputError(f"{what}: COUNT must be 1..1000, got {count}")
    return np.linspace(start, stop, count)


def _parse_grid(text: str) -> dict[str, FloatArray]:
    """``"x_mm=-1000:1000:21 y_mm=-1000:1000:21 yaw_deg=0:315:8 height_mm=400"`` (or ``offset_mm``)."""
    allowed = ("x_mm", "y_mm", "yaw_deg", "height_mm", "offset_mm")
    grid: dict[str, FloatArray] = {}
    for item in text.replace(",", " ").split():
        key, sep, value = item.partition("=")
        if not sep or key not in allowed:
            raise CommandLineInputError(
                f"--grid: expected items KEY=START:STOP:COUNT with KEY in {', '.join(allowed)}, got {item!r}"
            )
        grid[key] = _parse_range(value, f"--grid {key}")
    return grid


def _path_index(scene: Any, name: str) -> int:
    names = [p.name for p in scene.paths]
    if name not in names:
        raise CommandLineInputError(
            f"unknown path {name!r}; the cell has: {', '.join(names) or 'none'}"
        )
    return names.index(name)


def _cmd_optimise(args: argparse.Namespace, scene: Any, chosen: list[int]) -> int:
    from posebridge.planning.sequence_report import optimise_path
    from posebridge.results.sequence import render_sequence, sequence_result

    margin_deg, margin_mm = args.limit_margin_deg, args.limit_margin_mm
    reports = [
        sequence_result(
            optimise_path(
                scene,
                i,
                limit_margin_rad=None if margin_deg is None else float(rad_from_deg(margin_deg)),
                limit_margin_m=None if margin_mm is None else float(m_from_mm(margin_mm)),
                resolution_m=float(m_from_mm(args.resolution_mm)),
            ),
            limit_margin_deg=margin_deg,
            limit_margin_mm=margin_mm,
        )
        for i in chosen
    ]
    return print_results(
        reports, render_sequence, as_json=args.json, failed=lambda report: not report.feasible
    )


def _cmd_paths(args: argparse.Namespace) -> int:
    from posebridge.planning.path_check import check_path
    from posebridge.results.path_check import path_check_result, render_path_check

    scene = load_scene(args.cell, quiet=args.quiet)
    if args.path is not None:
        _path_index(scene, args.path)
    chosen = [i for i, p in enumerate(scene.paths) if args.path in (None, p.name)]
    if args.optimise:
        return _cmd_optimise(args, scene, chosen)
    reports = [
        path_check_result(check_path(scene, i, resolution_m=float(m_from_mm(args.resolution_mm))))
        for i in chosen
    ]
    return print_results(
        reports, render_path_check, as_json=args.json, failed=lambda report: not report.ok
    )


def _cmd_export(args: argparse.Namespace) -> int:
    from pathlib import Path

    from posebridge.planning.motion_export import export_motion
    from posebridge.results.motion_export import motion_csv, motion_export_result, motion_json

    output = Path(args.output)
    kind = output.suffix.lower()
    if kind not in (".csv", ".json"):
        raise CommandLineInputError(
            f"-o/--output: expected a .csv or .json file, got {args.output!r}"
        )
    scene = load_scene(args.cell, quiet=args.quiet)
    report = motion_export_result(
        export_motion(
            scene,
            _path_index(scene, args.path),
            period_ms=args.period_ms,
            resolution_m=float(m_from_mm(args.resolution_mm)),
        ),
        cell_name=Path(args.cell).name,
    )
    text = motion_csv(report) if kind == ".csv" else motion_json(report)
    try:
        output.write_text(text, encoding="utf-8")
    except OSError as error:
        raise CommandLineInputError(
            f"-o/--output: cannot write {args.output!r} ({error.strerror})"
        ) from error
    header = report.header
    print(
        f"{header.rows} rows every {header.period_ms:g} ms written to {args.output} "
        f"(path {header.path!r}, {header.cycle_time_s:.2f} s blended, "
        f"{header.rest_to_rest_cycle_time_s:.2f} s rest to rest)"
    )
    return EXIT_OK


def _cmd_plan(args: argparse.Namespace) -> int:
    from posebridge.planning.rrt import plan_joint_move
    from posebridge.results.joint_plan import joint_plan_result, render_joint_plan

    scene = load_scene(args.cell, quiet=args.quiet)
    robot = scene.robot
    start = joints_argument(args.start, "--from", robot)
    goal = joints_argument(args.goal, "--to", robot)
    report = joint_plan_result(
        plan_joint_move(scene, start, goal, seed=args.seed, time_limit_s=args.time_limit_s)
    )
    return print_results(
        report,
        render_joint_plan,
        as_json=args.json,
        failed=lambda result: result.status not in ("solved", "direct"),
    )


def _cmd_place(args: argparse.Namespace) -> int:
    from posebridge.geometry.warm import warm_geometry
    from posebridge.planning.placement import PlacementGrid, search_base_placement
    from posebridge.planning.placement_table import search_mode, search_table_placement, table_grid
    from posebridge.results.placement import placement_result, render_placement
    from posebridge.units import deg_from_rad, mm_from_m

    scene = load_scene(args.cell, quiet=args.quiet)
    mode = search_mode(scene, args.search)
    rail = mode == "rail"
    given = _parse_grid(args.grid) if args.grid else {}
    if args.table is not None and mode != "table":
        raise CommandLineInputError("--table: only for a table search (--search table)")
    if mode == "table":
        if given.keys() - {"x_mm", "y_mm"}:
            raise CommandLineInputError("--grid: a table search takes x_mm and y_mm only")
        grid = table_grid(scene, table=args.table, x_mm=given.get("x_mm"), y_mm=given.get("y_mm"))
    elif rail:
        if given.keys() - {"offset_mm", "yaw_deg"}:
            raise CommandLineInputError("--grid: a rail search takes offset_mm and yaw_deg only")
        grid = PlacementGrid.rail_around(
            scene, offset_mm=given.get("offset_mm"), yaw_deg=given.get("yaw_deg")
        )
    elif "offset_mm" in given:
        raise CommandLineInputError("--grid: offset_mm is for a rail search (--search rail)")
    elif given:
        around = PlacementGrid.around(scene)
        grid = PlacementGrid.from_user(
            given.get("x_mm", mm_from_m(around.x)),
            given.get("y_mm", mm_from_m(around.y)),
            given.get("yaw_deg", deg_from_rad(around.yaw)),
            given.get("height_mm", mm_from_m(around.height)),
        )
    else:
        grid = PlacementGrid.around(scene)
    search = search_table_placement if mode == "table" else search_base_placement
    with executor_from(args, warm_geometry) as executor:
        result = search(
            scene,
            grid,
            executor=executor,
            progress=ProgressBar(f"{mode} placement", enabled=not args.json),
            top=args.top,
        )
    return print_results(
        placement_result(result),
        lambda report: render_placement(report, top=args.top),
        as_json=args.json,
        failed=never_fails,
    )


def add_paths(sub: Any, shared: SharedOptions) -> None:
    """Add the ``posebridge paths`` command.

    ``posebridge paths CELL [PATH] [--resolution-mm] [--optimise [--limit-margin-deg]
    [--limit-margin-mm]] [--json]``.
    """
    own = options()
    own.add_argument("path", nargs="?", help="one path by name (default: all)")
    own.add_argument(
        "--resolution-mm", type=float, default=5.0, help="sampling step of linear moves"
    )
    own.add_argument(
        "--optimise",
        action="store_true",
        help="find the fastest consistent IK solution sequence (exact, dynamic programming) "
        "and compare it with the current one",
    )
    own.add_argument(
        "--limit-margin-deg",
        type=float,
        default=None,
        help="with --optimise: joint-limit margin every configuration keeps (revolute joints; "
        "default: the cell's thresholds.limit_margin_deg)",
    )
    own.add_argument(
        "--limit-margin-mm",
        type=float,
        default=None,
        help="with --optimise: joint-limit margin of prismatic joints (default: the cell's "
        "thresholds.limit_margin_mm)",
    )
    command = sub.add_parser(
        "paths",
        help="check the cell's paths and their cycle time (exit 1 on errors)",
        parents=[shared.cell, own, shared.json],
    )
    command.set_defaults(run=_cmd_paths)


def add_export(sub: Any, shared: SharedOptions) -> None:
    """``posebridge export CELL PATH -o FILE.csv|.json [--period-ms] [--resolution-mm]``."""
    own = options()
    own.add_argument("path", help="path name")
    own.add_argument("-o", "--output", required=True, help="output .csv or .json file")
    own.add_argument("--period-ms", type=float, default=4.0, help="row period in ms (default 4)")
    own.add_argument(
        "--resolution-mm", type=float, default=5.0, help="sampling step of linear moves"
    )
    command = sub.add_parser(
        "export",
        help="write a path's timed motion as plain numbers (CSV or JSON)",
        parents=[shared.cell, own],
    )
    command.set_defaults(run=_cmd_export)


def add_plan(sub: Any, shared: SharedOptions) -> None:
    """``posebridge plan CELL --from JOINTS --to JOINTS [--seed] [--time-limit-s] [--json]``."""
    own = options()
    own.add_argument(
        "--from", dest="start", required=True, help="start joint values (deg; mm for prismatic)"
    )
    own.add_argument(
        "--to", dest="goal", required=True, help="goal joint values (deg; mm for prismatic)"
    )
    own.add_argument("--seed", type=int, default=1, help="random seed (same seed, same path)")
    own.add_argument("--time-limit-s", type=float, default=5.0, help="planning time limit")
    command = sub.add_parser(
        "plan",
        help="collision-free joint move between two configurations (RRT-Connect)",
        parents=[shared.cell, own, shared.json],
    )
    command.set_defaults(run=_cmd_plan)


def add_place(sub: Any, shared: SharedOptions) -> None:
    """``posebridge place CELL [--grid] [--top] [--workers] [--scheduler] [--json]``."""
    own = options()
    own.add_argument(
        "--grid",
        help='candidates, e.g. "x_mm=-1000:1000:21 y_mm=-1000:1000:21 yaw_deg=0:315:8 height_mm=400" '
        "(default: +-1 m around the current base, 21 x 21 x 8 yaws)",
    )
    own.add_argument("--top", type=int, default=10, help="candidates to list (default 10)")
    own.add_argument(
        "--search",
        choices=("auto", "base", "rail", "table"),
        default="auto",
        help="what to move: the robot's base, the track's rail line (offset_mm x yaw_deg, "
        "each target from its own track position), or a turntable (x_mm x y_mm of its axis, "
        "each target on it at its own table angle); auto: rail for a cell with a track, else "
        "table for a cell whose targets ride a turntable, else base",
    )
    own.add_argument(
        "--table",
        default=None,
        help="with --search table: the turntable to move (default: the first carrying a target)",
    )
    as_json = options()
    as_json.add_argument("--json", action="store_true", help="print JSON with the whole score grid")
    command = sub.add_parser(
        "place",
        help="search base placements and rank them",
        parents=[shared.cell, own, shared.executor, as_json],
    )
    command.set_defaults(run=_cmd_place)
