r"""Controller joint logs: CSV files of joint values, one configuration per row.

Format (our own, kept plain so any controller export can be massaged into it):

* UTF-8 text, comma-separated, lines ended by ``\n``, ``\r\n`` or a bare
  ``\r`` (mixed too), at most :data:`MAX_LOG_BYTES` bytes and
  :data:`MAX_LOG_ROWS` data rows (counted as parsed, blank lines not
  counted);
* lines starting with ``#`` before the header are comments (the header
  block of a ``posebridge export`` file);
* the first other line is the header: the robot's joint names, each exactly
  once, in any order, each either bare (``j1``) or with its unit (``j1_deg``
  for a revolute joint, ``x_mm`` for a prismatic one), plus an optional
  ``time_s`` column (seconds); the other columns a ``posebridge export``
  writes (:data:`EXPORT_COLUMNS`) are allowed and not read; in a cell with
  external axes (a track, turntables) their columns may follow, named like
  joints (``track`` or ``track_mm``, ``table-1`` or ``table-1_deg``); an axis
  without a column stays at the cell's value for it (its ``home``, or the
  value the cell is posed at) in every row;
* every further non-blank line is one row: finite numbers, degrees for
  revolute joints and millimetres for prismatic joints; ``time_s`` must
  increase strictly from row to row.

Every problem is reported with its line (and column) number:
``"demo-log.csv: line 7, column 3 (j2): expected a number, got 'abc'"``;
control characters of the file's text in a message are shown escaped.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import numpy.typing as npt

from posebridge.cell.external_axes import NO_EXTERNAL_AXES, ExternalAxes
from posebridge.errors import InputError
from posebridge.messages import printable
from posebridge.robot.model import Robot
from posebridge.units import FloatArray, joints_si_from_user, m_from_mm, rad_from_deg

__all__ = [
    "EXPORT_COLUMNS",
    "MAX_LOG_BYTES",
    "MAX_LOG_ROWS",
    "TIME_COLUMN",
    "JointLog",
    "JointLogError",
    "JointLogTooLongError",
    "parse_joint_log",
    "read_joint_log",
]

MAX_LOG_ROWS = 200_000
"""Most data rows in one log."""
MAX_LOG_BYTES = 64 * 1024 * 1024
"""Largest log file, bytes."""
TIME_COLUMN = "time_s"
"""Name of the optional time column (seconds)."""
EXPORT_COLUMNS = (
    "segment",
    "tcp_x_mm",
    "tcp_y_mm",
    "tcp_z_mm",
    "tcp_roll_deg",
    "tcp_pitch_deg",
    "tcp_yaw_deg",
    "branch",
    "limit_margin_deg",
    "limit_margin_mm",
    "limit_joint",
    "clearance_mm",
    "closest_pair",
)
"""Columns of a motion export besides time and joints; a log may have them, they are not read."""

IntArray = npt.NDArray[np.int64]


class JointLogError(InputError):
    """A joint log cannot be read; the message names the file, line and column."""


class JointLogTooLongError(JointLogError):
    """A joint log has more data rows than the reader was asked to take."""


@dataclass(frozen=True, eq=False)
class JointLog:
    """Joint values of a controller log in SI units.

    Attributes
    ----------
    source : str
        File name, or the label given for pasted text.
    joint_names : tuple of str
        The robot's joint names (the columns of ``q``).
    q : array, shape (N, n)
        Joint values, rad or m, in the robot's joint order.
    time_s : array, shape (N,), or None
        Time of each row, s; None without a ``time_s`` column.
    line : array of int64, shape (N,)
        Line of each row in the file (line 1 is the header or the first comment).
    external_names : tuple of str, length m
        The cell's external axes (the columns of ``external``).
    external : array, shape (N, m)
        External axis values, m or rad; an axis without a column at the cell's value.
    external_given : tuple of str
        External axes the log has a column for.
    """

    source: str
    joint_names: tuple[str, ...]
    q: FloatArray
    time_s: FloatArray | None
    line: IntArray
    external_names: tuple[str, ...] = ()
    external: FloatArray = field(default_factory=lambda: np.zeros((0, 0)))
    external_given: tuple[str, ...] = ()

    @property
    def count(self) -> int:
        """Number of rows ``N``."""
        return int(self.q.shape[0])


def _header(
    fields: list[str], robot: Robot, external: ExternalAxes, where: str, line: int
) -> tuple[list[int], int, dict[int, int]]:
    """Column of each robot joint, of the time (-1 without) and of each logged external axis."""
    names = [field.strip() for field in fields]
    axes = external.names
    known = robot.joint_names + axes
    units = [*("mm" if p else "deg" for p in robot.prismatic), *external.units]
    expected = f"the joint names of robot {robot.name!r} ({', '.join(robot.joint_names)})"
    optional = f"{TIME_COLUMN}" + (f" and the external axes ({', '.join(axes)})" if axes else "")
    column_of: dict[str, int] = {}
    seen: set[str] = set()
    for c, name in enumerate(names):
        place = f"{where}line {line}, column {c + 1}"
        if name in seen:
            raise JointLogError(f"{place}: duplicate column {name!r}")
        seen.add(name)
        if name in EXPORT_COLUMNS:
            continue
        joint = name
        if name != TIME_COLUMN and name not in known:
            stem, _, suffix = name.rpartition("_")
            if stem not in known:
                raise JointLogError(
                    f"{place}: unknown column {name!r}; expected {expected} and optionally "
                    f"{optional}"
                )
            unit = units[known.index(stem)]
            if suffix != unit:
                raise JointLogError(
                    f"{place}: unknown column {name!r}; joint {stem!r} is in {unit} "
                    f"(write {stem!r} or '{stem}_{unit}')"
                )
            joint = stem
        if joint in column_of:
            raise JointLogError(f"{place}: duplicate column {name!r}")
        column_of[joint] = c
    missing = [name for name in robot.joint_names if name not in column_of]
    if missing:
        raise JointLogError(
            f"{where}line {line}: missing column{'s' if len(missing) > 1 else ''} "
            f"{', '.join(repr(m) for m in missing)}; expected {expected}"
        )
    logged = {i: column_of[name] for i, name in enumerate(axes) if name in column_of}
    return [column_of[name] for name in robot.joint_names], column_of.get(TIME_COLUMN, -1), logged


def _bad_value(text: str, line: int, column: int, name: str, where: str) -> JointLogError:
    place = f"{where}line {line}, column {column + 1} ({name})"
    try:
        value = float(text)
    except ValueError:
        shown = text.strip()
        return JointLogError(
            f"{place}: expected a number, got {shown!r}" if shown else f"{place}: empty value"
        )
    return JointLogError(f"{place}: expected a finite number, got {value!r}")


def _records(reader: Iterator[list[str]], where: str) -> Iterator[list[str]]:
    """Yield the records of a csv reader, its errors as :class:`JointLogError` naming the line.

    An error is, e.g., a field over the csv module's size limit.
    """
    try:
        yield from reader
    except csv.Error as error:
        line = getattr(reader, "line_num", 0)
        raise JointLogError(f"{where}line {line}: not readable as CSV ({error})") from error


def parse_joint_log(
    text: str,
    robot: Robot,
    *,
    source: str = "",
    max_rows: int | None = None,
    external: ExternalAxes = NO_EXTERNAL_AXES,
) -> JointLog:
    """Read a joint log from CSV text (format in the module docstring).

    Parameters
    ----------
    text : str
    robot : Robot
        Gives the expected joint names and units.
    source : str, keyword-only
        Name used in messages (a file name, or e.g. ``"pasted log"``).
    max_rows : int, optional, keyword-only
        Most data rows taken (:data:`MAX_LOG_ROWS` if omitted); reading stops at the
        first row beyond.
    external : ExternalAxes, keyword-only
        The cell's external axes (``scene.external``): their columns are read, an
        axis without one takes ``external.values``; none by default.

    Returns
    -------
    JointLog

    Raises
    ------
    JointLogTooLongError
        More than ``max_rows`` data rows.
    JointLogError
        The message names the line and column of the first problem.
    """
    where = f"{printable(source)}: " if source else ""
    limit = MAX_LOG_ROWS if max_rows is None else max_rows
    # newline="": the csv module splits records at \n, \r\n and a bare \r itself
    reader = csv.reader(io.StringIO(text.removeprefix("\ufeff"), newline=""))
    header: list[str] | None = None
    rows: list[list[str]] = []
    lines: list[int] = []
    comments = 0
    for fields in _records(reader, where):
        line = reader.line_num
        if not fields or all(not field.strip() for field in fields):
            continue
        if header is None:
            if fields[0].lstrip().startswith("#") and line == comments + 1:
                comments = line
                continue
            if line != comments + 1:
                raise JointLogError(
                    f"{where}line {comments + 1}: expected the header row of joint names"
                )
            header = fields
            joint_columns, time_column, axis_columns = _header(header, robot, external, where, line)
            continue
        if len(fields) != len(header):
            raise JointLogError(
                f"{where}line {line}: expected {len(header)} values "
                f"({printable(', '.join(h.strip() for h in header))}), got {len(fields)}"
            )
        if len(rows) == limit:
            raise JointLogTooLongError(
                f"{where}line {line}: more than {limit} data rows (the limit)"
            )
        rows.append(fields)
        lines.append(line)
    if header is None:
        raise JointLogError(
            f"{where}line 1: expected the header row of joint names, got an empty file"
        )
    if not rows:
        raise JointLogError(f"{where}no data rows after the header")
    names = [h.strip() for h in header]
    used = joint_columns + ([time_column] if time_column >= 0 else []) + list(axis_columns.values())
    read = [[row[c] for c in used] for row in rows]
    try:
        values = np.array(read, dtype=np.float64)
        suspects = np.flatnonzero(~np.all(np.isfinite(values), axis=1)).tolist()
    except ValueError:
        values = None
        suspects = list(range(len(rows)))
    for r in suspects:
        for c in used:
            field = rows[r][c]
            try:
                number = float(field)
            except ValueError:
                number = math.nan
            if not math.isfinite(number):
                raise _bad_value(field, lines[r], c, names[c], where)
    if values is None:  # numpy refused a field that Python's float() reads
        values = np.array([[float(field) for field in row] for row in read], dtype=np.float64)
    n = len(joint_columns)
    time_s = None
    if time_column >= 0:
        time_s = values[:, n].copy()
        steps = np.flatnonzero(np.diff(time_s) <= 0.0)
        if steps.size:
            r = int(steps[0]) + 1
            raise JointLogError(
                f"{where}line {lines[r]}, column {time_column + 1} ({TIME_COLUMN}): time must "
                f"increase from row to row (previous {time_s[r - 1]:g} s, got {time_s[r]:g} s)"
            )
    q = joints_si_from_user(values[:, :n], robot.prismatic)
    external_values = np.broadcast_to(external.values, (len(rows), external.count)).copy()
    first_axis = n + (1 if time_column >= 0 else 0)
    for k, axis in enumerate(axis_columns):
        logged = values[:, first_axis + k]
        external_values[:, axis] = (
            m_from_mm(logged) if external.prismatic[axis] else rad_from_deg(logged)
        )
    return JointLog(
        source=source,
        joint_names=robot.joint_names,
        q=q,
        time_s=time_s,
        line=np.asarray(lines, dtype=np.int64),
        external_names=external.names,
        external=external_values,
        external_given=tuple(external.names[axis] for axis in axis_columns),
    )


def read_joint_log(
    path: str | Path, robot: Robot, *, external: ExternalAxes = NO_EXTERNAL_AXES
) -> JointLog:
    """Read a joint log file (format in the module docstring; at most :data:`MAX_LOG_BYTES`).

    Parameters
    ----------
    path : str or Path
    robot : Robot
    external : ExternalAxes, keyword-only
        As in :func:`parse_joint_log`.

    Returns
    -------
    JointLog

    Raises
    ------
    JointLogError
        Unreadable, too large, not UTF-8, or a problem on a line (named).
    """
    path = Path(path)
    try:
        with path.open("rb") as handle:
            raw = handle.read(MAX_LOG_BYTES + 1)
    except OSError as error:
        raise JointLogError(f"{path}: cannot read: {error.strerror or error}") from error
    if len(raw) > MAX_LOG_BYTES:
        raise JointLogError(
            f"{path}: file is larger than {MAX_LOG_BYTES} bytes, the limit for logs"
        )
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as error:
        raise JointLogError(
            f"{path}: not UTF-8 text ({error.reason} at byte {error.start})"
        ) from error
    return parse_joint_log(text, robot, source=str(path), external=external)
