"""The ``posebridge`` command line: the front door to every computation.

Values at this boundary are millimetres and degrees (prismatic joints in mm).
Exit codes: 0 success, 1 findings (an unreachable pose, a failed check),
2 bad input (one line on stderr, never a traceback), 3 internal error.
"""

from __future__ import annotations

import argparse
import os
import sys
import traceback
from collections.abc import Callable, Sequence

from posebridge.cli import cells, planning, robots, service, spaces
from posebridge.cli.common import EXIT_BAD_INPUT, EXIT_INTERNAL
from posebridge.cli.options import SharedOptions
from posebridge.errors import InputError
from posebridge.messages import printable

SAFETY_CAUTION = (
    "Safety: posebridge is a kinematic planning aid, not a safety function. Carry out the risk "
    "assessment per ISO 10218-2, size safeguard distances per ISO 13855, verify every program on "
    "the real controller at reduced speed; local codes and qualified practice prevail."
)

_COMMANDS = (
    service.add_serve,
    robots.add_robots,
    robots.add_describe,
    robots.add_fk,
    robots.add_ik,
    cells.add_check,
    cells.add_diagnose,
    spaces.add_reach,
    spaces.add_jointmap,
    planning.add_paths,
    planning.add_export,
    planning.add_plan,
    planning.add_place,
    cells.add_report,
    cells.add_schema,
    service.add_bench,
)
"""Every subcommand, in the order of the help."""


def build_parser() -> argparse.ArgumentParser:
    """Build the argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="posebridge",
        description="Robot work-cell layout and troubleshooting in Cartesian and joint space. "
        "Lengths in mm, angles in deg (prismatic joints in mm); orientation as roll, pitch, yaw "
        "about fixed X, Y, Z.",
        epilog=SAFETY_CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    shared = SharedOptions.build()
    for add_command in _COMMANDS:
        add_command(sub, shared)
    return parser


def _exit_2_errors() -> tuple[type[BaseException], ...]:
    """Return the errors that end a command with exit code 2.

    Every input error (one base class), and the executor's (a bad ``--scheduler``/``--workers``, a
    cancelled run) and a cell changed on disk meanwhile, which the user can also act on.
    """
    from posebridge.cell.files import CellConflictError
    from posebridge.compute import ComputationCancelled, ExecutorError

    return (InputError, CellConflictError, ExecutorError, ComputationCancelled)


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
    except _exit_2_errors() as error:
        problems = [printable(line.strip()) for line in str(error).splitlines() if line.strip()]
        print(
            f"posebridge {args.command}: {'; '.join(problems) or type(error).__name__}",
            file=sys.stderr,
        )
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("posebridge: interrupted", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as error:  # the CLI reports, never shows a traceback by default
        if os.environ.get("POSEBRIDGE_DEBUG"):
            traceback.print_exc()
        print(
            f"posebridge {args.command}: internal error: {type(error).__name__}: {error}",
            file=sys.stderr,
        )
        return EXIT_INTERNAL
