"""What every command of the command line shares.

Exit codes, the input error, parsing of mm/deg arguments and CSV files, printing, the progress bar.

Values at this boundary are millimetres and degrees (prismatic joints in mm).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import threading
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from posebridge.errors import InputError
from posebridge.messages import printable
from posebridge.units import FloatArray, joints_si_from_user

if TYPE_CHECKING:
    from pydantic import BaseModel

    from posebridge.robot.model import Robot


EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3


class CommandLineInputError(InputError):
    """Bad command-line input; the message is printed as one line."""


# ---------------------------------------------------------------- parsing


def parse_numbers(text: str, what: str, count: int | None = None) -> list[float]:
    """Comma-separated finite numbers, e.g. ``"0, -20, 20, 0, 90, 0"``."""
    parts = [p.strip() for p in text.split(",")]
    values: list[float] = []
    for index, part in enumerate(parts, start=1):
        try:
            value = float(part)
        except ValueError:
            raise CommandLineInputError(f"{what}: value {index} {part!r} is not a number") from None
        if not math.isfinite(value):
            raise CommandLineInputError(f"{what}: value {index} {part!r} is not a finite number")
        values.append(value)
    if count is not None and len(values) != count:
        raise CommandLineInputError(
            f"{what}: expected {count} comma-separated values, got {len(values)}"
        )
    return values


def joints_argument(text: str, option: str, robot: Robot) -> FloatArray:
    """One value per joint of ``robot``, comma-separated (deg; mm for prismatic), in SI."""
    return joints_si_from_user(parse_numbers(text, option, robot.dof), robot.prismatic)


def tool_from_argument(text: str | None) -> FloatArray | None:
    """``--tool "x,y,z,roll,pitch,yaw"`` (mm, deg) as T_flange_tool, shape (4, 4), in m."""
    from posebridge.transforms import transform_from_position_rpy
    from posebridge.units import m_from_mm

    if text is None:
        return None
    values = parse_numbers(text, "--tool", 6)
    return transform_from_position_rpy(m_from_mm(values[:3]), values[3:], degrees=True)


def read_numeric_csv(path: str, columns: Sequence[str], what: str) -> FloatArray:
    """Read rows of numbers, with an optional header naming ``columns`` in any order.

    Read as a size-capped stream (:func:`posebridge.value_files.read_value_rows`).

    Returns
    -------
    values : array, shape (rows, len(columns)), in the order of ``columns``
    """
    from posebridge.value_files import ValueFileError, read_value_rows

    try:
        return read_value_rows(path, columns, what)
    except ValueFileError as error:
        raise CommandLineInputError(str(error)) from error


def print_robot_notes(robot: Robot, *, quiet: bool) -> None:
    """Print the robot's notes (assumed values, unread meshes, ...) on stderr, one per line.

    Nothing unless there are notes, nothing with ``quiet`` (``--quiet``); every command that
    loads a robot calls this once.
    """
    if quiet:
        return
    for note in robot.notes:
        print(f"posebridge: robot note: {printable(note)}", file=sys.stderr)


def load_robot_argument(args: argparse.Namespace) -> Robot:
    """Return the robot named on the command line, its chain chosen and its meshes fitted.

    Its notes are printed on stderr (:func:`print_robot_notes`).
    """
    from posebridge.geometry.robot_meshes import load_robot_with_meshes

    robot = load_robot_with_meshes(
        args.robot,
        from_link=args.from_link,
        to_link=args.to_link,
        mesh_folders=[Path(folder) for folder in args.mesh_folder],
    )
    print_robot_notes(robot, quiet=args.quiet)
    return robot


def load_scene(cell_argument: str, *, quiet: bool) -> Any:
    """Return the resolved scene (SI arrays) of the cell file named on the command line.

    Its robot's notes are printed on stderr unless ``quiet`` (:func:`print_robot_notes`).
    """
    from posebridge.cell import load_cell, resolve_scene

    path = Path(cell_argument)
    scene = resolve_scene(load_cell(path), path)
    print_robot_notes(scene.robot, quiet=quiet)
    return scene


# ---------------------------------------------------------------- output


def print_json(data: Any) -> None:
    """Print ``data`` as indented JSON on stdout (NaN refused: JSON has none)."""
    json.dump(data, sys.stdout, indent=2, allow_nan=False)
    sys.stdout.write("\n")


def has_findings(result: Any) -> bool:
    """Whether a result's ``findings`` hold an error or a warning (info findings do not count)."""
    return any(f.severity in ("error", "warning") for f in result.findings)


def never_fails(result: Any) -> bool:
    """For :func:`print_results` of commands whose answer is never a finding (always False)."""
    return False


def print_results(
    results: BaseModel | Sequence[BaseModel],
    render: Callable[[Any], str],
    *,
    as_json: bool,
    failed: Callable[[Any], bool] = has_findings,
) -> int:
    """Print result models as JSON or text and return the exit code (1 when any is a finding).

    Parameters
    ----------
    results : BaseModel or sequence of BaseModel
        One result (printed as a JSON object) or several (a JSON list; as text, blank-line
        separated).
    render : callable
        The text of one result.
    as_json : bool
        ``--json``: print the models' JSON instead of their text.
    failed : callable
        Whether one result is a finding; default :func:`has_findings`.

    Returns
    -------
    int
        :data:`EXIT_FINDINGS` when ``failed`` holds for any result, else :data:`EXIT_OK`.
    """
    several = isinstance(results, Sequence)
    listed: Sequence[Any] = results if isinstance(results, Sequence) else [results]
    if as_json:
        dumped = [result.model_dump(mode="json") for result in listed]
        print_json(dumped if several else dumped[0])
    else:
        print("\n\n".join(render(result) for result in listed))
    return EXIT_FINDINGS if any(failed(result) for result in listed) else EXIT_OK


def finite_or_none(values: FloatArray) -> Any:
    """Nested lists of ``values`` with NaN/inf as ``None`` (JSON has no NaN)."""
    cells = values.astype(object)
    cells[~np.isfinite(values)] = None
    return cells.tolist()


def format_row(values: Sequence[float], digits: int = 3) -> str:
    """``values`` comma-separated with ``digits`` decimals (no negative zero)."""
    return ", ".join(f"{round(v, digits) + 0.0:.{digits}f}" for v in values)


class ProgressBar:
    """Progress on stderr, ``progress(done, total)`` style.

    A one-line bar on a terminal; else (piped, logged) a line ``label 12/40`` at each further
    tenth of the work and at the end.
    """

    def __init__(self, label: str, *, enabled: bool) -> None:
        self.label = label
        self.enabled = enabled
        self.tenths_shown = -1

    def __call__(self, done: int, total: int) -> None:
        """Draw the bar at ``done`` of ``total`` on stderr (nothing when disabled)."""
        if not self.enabled or total <= 0:
            return
        if not sys.stderr.isatty():
            tenths = 10 * done // total
            if tenths > self.tenths_shown:
                self.tenths_shown = tenths
                print(f"{self.label} {done}/{total}", file=sys.stderr, flush=True)
            return
        width = 30
        filled = int(width * done / total)
        sys.stderr.write(f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] {done}/{total}")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


KERNEL_ANNOUNCE_AFTER_S = 2.0
"""A kernel-loading step still running after this long is announced on stderr (a cached
load takes about a second, the first compile after installing minutes)."""


def load_kernels(steps: Sequence[tuple[str, Callable[[], None]]], *, quiet: bool) -> None:
    """Run a command's kernel warm-up ``steps`` (name, call) before it computes.

    Each step that takes longer than :data:`KERNEL_ANNOUNCE_AFTER_S` is announced on stderr,
    also when it is not a terminal (at most one line per step, and one when all are loaded),
    so a first run that compiles for minutes is not silent; ``quiet`` says nothing.
    """
    announced = threading.Event()

    def say(text: str) -> None:
        announced.set()
        print(f"posebridge: {text}", file=sys.stderr, flush=True)

    for number, (name, run) in enumerate(steps, start=1):
        text = (
            f"kernels {number}/{len(steps)}: {name} (compiled on the first run after "
            "installing, loaded from the cache afterwards)"
        )
        timer = None
        if not quiet:
            if KERNEL_ANNOUNCE_AFTER_S <= 0.0:
                say(text)
            else:
                timer = threading.Timer(KERNEL_ANNOUNCE_AFTER_S, say, args=(text,))
                timer.daemon = True
                timer.start()
        try:
            run()
        finally:
            if timer is not None:
                timer.cancel()
                timer.join()
    if announced.is_set():
        say("kernels: all loaded")


def executor_from(args: argparse.Namespace, warm_up: Callable[[], None]) -> Any:
    """Return the executor of ``--workers``/``--scheduler`` (see ``SharedOptions.executor``).

    Its workers run ``warm_up`` (a layer's warm-up function) once when they start.
    """
    from posebridge.compute import make_executor, worker_initializer

    return make_executor(
        scheduler=args.scheduler, workers=args.workers, initializer=worker_initializer(warm_up)
    )
