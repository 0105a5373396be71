"""Options shared by several commands, as argparse parent parsers.

A command lists the parents it takes in the order its options appear in its help,
so an option shared by commands is defined (and its help written) once here.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

JOINTS_HELP = 'joint values, e.g. "0,-20,20,0,90,0" (deg; mm for prismatic)'


def options() -> argparse.ArgumentParser:
    """Return an empty parent parser, for options of one command placed between shared ones."""
    return argparse.ArgumentParser(add_help=False)


def _add_quiet(parent: argparse.ArgumentParser) -> None:
    """``--quiet``: of the commands that load a robot (directly or through a cell)."""
    parent.add_argument(
        "--quiet",
        action="store_true",
        help="do not print the robot's notes (assumed values, unread meshes) or the "
        "kernel-loading progress on stderr",
    )


@dataclass(frozen=True)
class SharedOptions:
    """The parent parsers of the options several commands take (made by ``build``)."""

    robot: argparse.ArgumentParser
    """Positional ``robot`` (a bundled robot name or a .toml, robot overlay or .urdf path),
    the chain choice ``--from-link``/``--to-link`` and ``--mesh-folder`` of URDF robots, and
    ``--quiet`` (the robot's notes are not printed)."""
    cell: argparse.ArgumentParser
    """Positional ``cell``: a cell file; and ``--quiet`` (its robot's notes are not printed)."""
    tool: argparse.ArgumentParser
    """``--tool x,y,z,roll,pitch,yaw`` in the flange frame (mm, deg)."""
    executor: argparse.ArgumentParser
    """``--workers`` and ``--scheduler`` of the commands that fan out over processes."""
    json: argparse.ArgumentParser
    """``--json``: the result as JSON."""
    json_whole_grid: argparse.ArgumentParser
    """``--json`` of the map commands, whose JSON holds the whole grid."""

    @classmethod
    def build(cls) -> SharedOptions:
        """Build the shared parent parsers, one per option group."""
        robot = options()
        robot.add_argument(
            "robot", help="bundled robot name, .toml (or robot overlay) or .urdf path"
        )
        robot.add_argument(
            "--from-link", help="URDF/overlay: link the chain starts at (default: the root link)"
        )
        robot.add_argument(
            "--to-link",
            help="URDF/overlay: link the chain ends at, e.g. tool0 (needed with several leaf "
            "links)",
        )
        robot.add_argument(
            "--mesh-folder",
            action="append",
            default=[],
            metavar="FOLDER",
            help="folder to look for mesh files in (package://NAME/... as FOLDER/NAME/...); "
            "repeatable",
        )
        _add_quiet(robot)
        cell = options()
        cell.add_argument("cell", help="cell file (JSON)")
        _add_quiet(cell)
        tool = options()
        tool.add_argument(
            "--tool", help='tool in the flange frame "x,y,z,roll,pitch,yaw" (default: the robot\'s)'
        )
        executor = options()
        executor.add_argument(
            "--workers", type=int, help="local worker processes (default: one per core)"
        )
        executor.add_argument(
            "--scheduler", help="use an existing Dask cluster, e.g. tcp://HOST:8786"
        )
        json = options()
        json.add_argument("--json", action="store_true", help="print JSON")
        json_whole_grid = options()
        json_whole_grid.add_argument(
            "--json", action="store_true", help="print JSON with the whole grid"
        )
        return cls(robot, cell, tool, executor, json, json_whole_grid)


def joints_or(option: str, help_text: str) -> argparse.ArgumentParser:
    """Return a parent parser requiring exactly one of ``--joints`` (one configuration) and ``option``."""
    parent = options()
    source = parent.add_mutually_exclusive_group(required=True)
    source.add_argument("--joints", help=JOINTS_HELP)
    source.add_argument(option, help=help_text)
    return parent


class DeprecatedFlag(argparse.Action):
    """A flag kept for one release under an old name.

    Sets the new option's value and says on stderr which option replaces it.
    """

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
        """Set the new option's value and name the replacing option on stderr."""
        print(
            f"posebridge: {option_string} is deprecated and will be removed in the next release; "
            f"use {self.replacement}",
            file=sys.stderr,
        )
        setattr(namespace, self.dest, True)
