"""Files of numbers a user hands the command line: joint values and tool poses, one per row.

A file is CSV (comma-separated, UTF-8) with an optional header naming the
expected columns in any order; blank lines are skipped. It is read as a
stream, one row at a time, after a size check, so a huge or hostile file is
refused with one line naming the cap instead of filling memory: at most
:data:`MAX_VALUE_FILE_BYTES` bytes, :data:`MAX_VALUE_ROWS` rows and
:data:`MAX_FIELD_CHARS` characters in one field. Values stay in the file's
units (mm, deg); callers convert.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Iterator, Sequence

import numpy as np

from posebridge.units import FloatArray

__all__ = [
    "MAX_FIELD_CHARS",
    "MAX_VALUE_FILE_BYTES",
    "MAX_VALUE_ROWS",
    "ValueFileError",
    "read_value_rows",
]

MAX_VALUE_FILE_BYTES = 128 * 1024 * 1024
"""Largest joint-value or pose file (128 MiB: a million rows of seven long numbers fit)."""
MAX_VALUE_ROWS = 1_000_000
"""Most rows of numbers in one file."""
MAX_FIELD_CHARS = 100
"""Longest field; a number needs far fewer characters."""
_CHUNK_ROWS = 4096


class ValueFileError(ValueError):
    """A joint-value or pose file cannot be read; the message is one line naming the file."""


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _rows(handle: Iterator[str], path: str) -> Iterator[tuple[int, list[str]]]:
    """Non-blank CSV rows with their line numbers, fields capped at MAX_FIELD_CHARS."""
    reader = csv.reader(handle)
    while True:
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error as error:
            raise ValueFileError(f"{path}:{reader.line_num}: not CSV ({error})") from error
        if not row or not any(cell.strip() for cell in row):
            continue
        for cell in row:
            if len(cell) > MAX_FIELD_CHARS:
                raise ValueFileError(
                    f"{path}:{reader.line_num}: a field of {len(cell)} characters; at most "
                    f"{MAX_FIELD_CHARS} are accepted"
                )
        yield reader.line_num, row


def _limited_lines(handle: Iterator[str], path: str) -> Iterator[str]:
    """Lines of the text file, refusing a line longer than any row of numbers can be."""
    longest = 64 * (MAX_FIELD_CHARS + 1)
    for line in handle:
        if len(line) > longest:
            raise ValueFileError(
                f"{path}: a line of more than {longest} characters; rows of numbers are shorter"
            )
        yield line


def read_value_rows(
    path: str,
    columns: Sequence[str],
    what: str,
    *,
    max_bytes: int = MAX_VALUE_FILE_BYTES,
    max_rows: int = MAX_VALUE_ROWS,
) -> FloatArray:
    """Rows of finite numbers, with an optional header naming ``columns`` in any order.

    Parameters
    ----------
    path : str
    columns : sequence of str
        The expected columns (joint names, or the six pose fields).
    what : str
        What a value is, for messages ("joint value").
    max_bytes, max_rows : int, keyword-only
        Caps (defaults :data:`MAX_VALUE_FILE_BYTES`, :data:`MAX_VALUE_ROWS`).

    Returns
    -------
    values : array, shape (rows, len(columns)), in the order of ``columns``

    Raises
    ------
    ValueFileError
        One line naming the file (and line) and the problem or the cap.
    """
    try:
        size = os.stat(path).st_size
    except OSError as error:
        raise ValueFileError(f"{path}: cannot read: {error.strerror or error}") from error
    if size > max_bytes:
        raise ValueFileError(
            f"{path}: file is larger than {max_bytes} bytes, the limit for {what} files"
        )
    width = len(columns)
    chunks: list[FloatArray] = []  # filled blocks of _CHUNK_ROWS rows: 8 bytes per value
    chunk = np.empty((_CHUNK_ROWS, width))
    filled = 0
    count = 0
    order = list(range(width))
    row_width: int | None = None
    try:
        with open(path, newline="", encoding="utf-8") as handle:
            for line, row in _rows(_limited_lines(handle, path), path):
                if row_width is None:
                    row_width = len(row)
                    if _is_header(row):
                        header = [cell.strip() for cell in row]
                        missing = [c for c in columns if c not in header]
                        if missing:
                            raise ValueFileError(
                                f"{path}:{line}: header lacks column(s) {', '.join(missing)}; "
                                f"expected {', '.join(columns)}"
                            )
                        order = [header.index(c) for c in columns]
                        continue
                    if row_width < width:
                        raise ValueFileError(
                            f"{path}:{line}: expected {width} values, got {row_width}"
                        )
                if len(row) != row_width:
                    raise ValueFileError(
                        f"{path}:{line}: expected {row_width} values, got {len(row)}"
                    )
                if count >= max_rows:
                    raise ValueFileError(
                        f"{path}: more than {max_rows} rows; at most {max_rows} are accepted"
                    )
                chunk[filled] = [_number(row[source], path, line, what) for source in order]
                filled += 1
                count += 1
                if filled == _CHUNK_ROWS:
                    chunks.append(chunk)
                    chunk = np.empty((_CHUNK_ROWS, width))
                    filled = 0
    except UnicodeDecodeError as error:
        raise ValueFileError(f"{path}: not UTF-8 text") from error
    except OSError as error:
        raise ValueFileError(f"{path}: cannot read: {error.strerror or error}") from error
    if count == 0:
        raise ValueFileError(f"{path}: no rows")
    return np.concatenate([*chunks, chunk[:filled]])


def _is_header(row: list[str]) -> bool:
    return not all(_is_number(cell.strip()) for cell in row)


def _number(cell: str, path: str, line: int, what: str) -> float:
    text = cell.strip()
    try:
        value = float(text)
    except ValueError:
        raise ValueFileError(f"{path}:{line}: {what} {text!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueFileError(f"{path}:{line}: {what} {text!r} is not a finite number")
    return value
