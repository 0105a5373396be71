"""Commands mapping a space: ``reach`` (voxel reach map) and ``jointmap`` (joint-space obstacles)."""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from posebridge.cli.common import (
    EXIT_OK,
    CommandLineInputError,
    ProgressBar,
    executor_from,
    finite_or_none,
    format_row,
    joints_argument,
    load_kernels,
    load_robot_argument,
    load_scene,
    parse_numbers,
    print_json,
)
from posebridge.cli.options import SharedOptions, options


def _cmd_reach(args: argparse.Namespace) -> int:
    from posebridge.kinematics.warm import warm_kinematics
    from posebridge.results.planar_reach import planar_reach_summary
    from posebridge.spaces.planar_boundary import planar_reach
    from posebridge.spaces.workspace import reach_map
    from posebridge.units import m_from_mm, mm_from_m

    robot = load_robot_argument(args)
    if not 5.0 <= args.voxel_mm <= 1000.0:
        raise CommandLineInputError(f"--voxel-mm: expected 5..1000, got {args.voxel_mm:g}")
    load_kernels(
        [("forward and inverse kinematics", lambda: warm_kinematics(robot))], quiet=args.quiet
    )
    reach = planar_reach(robot)
    if reach is not None:
        planar = {"robot": args.robot, **planar_reach_summary(reach, robot.dof)}
        if args.json:
            print_json(planar)
        else:
            for key, value in planar.items():
                print(f"{key:<34} {value}")
        return EXIT_OK
    with executor_from(args, warm_kinematics) as executor:
        result = reach_map(
            robot,
            voxel_size_m=float(m_from_mm(args.voxel_mm)),
            executor=executor,
            progress=ProgressBar("reach map", enabled=not args.json),
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
            "best_manipulability": finite_or_none(np.round(result.best_manipulability, 6)),
        }
        print_json(summary)
        return EXIT_OK
    for key, value in summary.items():
        print(f"{key:<34} {value}")
    return EXIT_OK


def _cmd_jointmap(args: argparse.Namespace) -> int:
    from posebridge.cell.files import cell_etag
    from posebridge.geometry.warm import warm_geometry
    from posebridge.kinematics.warm import warm_kinematics
    from posebridge.results.spaces import joint_map_result
    from posebridge.spaces.joint_map import cell_joint_map
    from posebridge.units import joint_unit_labels

    scene = load_scene(args.cell, quiet=args.quiet)
    cell = scene.cell
    robot = scene.robot
    external = scene.external
    vector = [*robot.joint_names, *external.names]
    names = [n.strip() for n in args.joints.split(",")]
    unknown = [n for n in names if n not in vector]
    if unknown or len(names) not in (2, 3) or sum(n in external.names for n in names) > 1:
        axes = " (at most one external axis)" if external.count else ""
        raise CommandLineInputError(
            f"--joints: expected 2 or 3 of {', '.join(vector)}{axes}, got {args.joints!r}"
        )
    external_hold = external.values.copy()
    if args.hold is None:
        q_hold = robot.home_configuration()
    elif external.count and len(args.hold.split(",")) == len(vector):
        q, values = scene.split_joints([parse_numbers(args.hold, "--hold")], where="--hold")
        q_hold, external_hold = q[0], values[0]
    else:
        q_hold = joints_argument(args.hold, "--hold", robot)
    load_kernels(
        [
            ("forward and inverse kinematics", lambda: warm_kinematics(robot)),
            ("clearance and joint maps", lambda: warm_geometry(robot)),
        ],
        quiet=args.quiet,
    )
    with executor_from(args, warm_geometry) as executor:
        computed = cell_joint_map(
            scene,
            [vector.index(n) for n in names],
            q_hold,
            external_hold,
            resolution=args.resolution,
            executor=executor,
            progress=ProgressBar("joint map", enabled=not args.json),
        )
    result = joint_map_result(computed, robot, cell_etag(cell), external)
    if args.json:
        print_json(result.model_dump(mode="json"))
        return EXIT_OK
    total = int(np.prod(result.shape))
    free = sum(
        1 for o, sc in zip(result.obstacle, result.self_collision, strict=True) if o < 0 and not sc
    )
    print(
        f"joint map over {', '.join(names)} ({' x '.join(map(str, result.shape))} cells), other joints held at"
    )
    print(f"  {format_row(result.hold_deg, 2)} ({', '.join(joint_unit_labels(robot.prismatic))})")
    if external.count:
        held = [
            f"{name} {value:.2f} {unit}"
            for name, value, unit in zip(
                external.names, result.external_hold_deg, external.units, strict=True
            )
            if name not in names
        ]
        print(f"  external axes: {', '.join(held) if held else 'none held'}")
    print(f"free cells: {free} of {total} ({100.0 * free / total:.1f} %)")
    for name in result.colliding_obstacles:
        k = result.obstacle_names.index(name)
        print(f"  in collision with {name}: {sum(1 for o in result.obstacle if o == k)} cells")
    print(f"  self-collision: {sum(result.self_collision)} cells")
    return EXIT_OK


def add_reach(sub: Any, shared: SharedOptions) -> None:
    """``posebridge reach ROBOT [--voxel-mm] [--workers] [--scheduler] [--json]``."""
    own = options()
    own.add_argument("--voxel-mm", type=float, default=50.0, help="voxel edge (default 50 mm)")
    command = sub.add_parser(
        "reach",
        help="voxel reach map: reachable tool directions per voxel",
        parents=[shared.robot, own, shared.executor, shared.json_whole_grid],
    )
    command.set_defaults(run=_cmd_reach)


def add_jointmap(sub: Any, shared: SharedOptions) -> None:
    """``posebridge jointmap CELL [--joints NAMES] [--hold] [--resolution] [--workers] [--json]``."""
    own = options()
    own.add_argument(
        "--joints",
        default="j2,j3",
        help="joint names, e.g. j2,j3 (default) or j1,j2,j3; one may be an external axis "
        "of the cell (track,j1)",
    )
    own.add_argument(
        "--hold",
        help="values of every joint, optionally followed by the cell's external axes (mm, deg); "
        "the mapped ones are ignored (default: home, the axes at the cell's values)",
    )
    own.add_argument(
        "--resolution", type=int, default=128, help="cells per joint (2 joints <= 512, 3 <= 128)"
    )
    command = sub.add_parser(
        "jointmap",
        help="joint-space obstacle map over 2 or 3 joints of a cell",
        parents=[shared.cell, own, shared.executor, shared.json_whole_grid],
    )
    command.set_defaults(run=_cmd_jointmap)
