"""Joint-value and pose files: streamed, size-capped, one-line errors (exit 2 on the CLI)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from posebridge.cli import main
from posebridge.value_files import (
    MAX_FIELD_CHARS,
    MAX_VALUE_FILE_BYTES,
    ValueFileError,
    read_value_rows,
)

JOINTS = ("j1", "j2")


def test_rows_with_a_header_in_any_order_and_blank_lines(tmp_path: Path) -> None:
    path = tmp_path / "joints.csv"
    path.write_text("j2,j1\n\n10, 1\n20,2\n\n", encoding="utf-8")
    values = read_value_rows(str(path), JOINTS, "joint value")
    # the file's values, columns put in the asked order
    np.testing.assert_array_equal(values, [[1.0, 10.0], [2.0, 20.0]])


def test_rows_without_a_header_past_one_block(tmp_path: Path) -> None:
    path = tmp_path / "joints.csv"
    count = 10_000  # more rows than one reading block
    path.write_text("".join(f"{k},{-k}\n" for k in range(count)), encoding="utf-8")
    values = read_value_rows(str(path), JOINTS, "joint value")
    # the file's values (closed form: row k is k, -k)
    np.testing.assert_array_equal(values[:, 0], np.arange(count))
    np.testing.assert_array_equal(values[:, 1], -np.arange(count))


def test_a_file_over_the_size_cap_is_refused_unread(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "huge.csv"
    with path.open("wb") as handle:
        handle.truncate(MAX_VALUE_FILE_BYTES + 1)  # sparse: takes no disk space, never read
    code = main(["fk", "pb-planar2r", "--joints-file", str(path), "--json"])
    err = capsys.readouterr().err
    # our own contract: exit 2 and one line naming the cap
    assert code == 2
    assert err.count("\n") == 1
    assert f"larger than {MAX_VALUE_FILE_BYTES} bytes" in err


def test_a_field_over_the_field_cap_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "long.csv"
    path.write_text("1," + "9" * 200_000 + "\n", encoding="utf-8")
    code = main(["ik", "pb-planar2r", "--poses-file", str(path), "--json"])
    err = capsys.readouterr().err
    # our own contract: exit 2, one line; the standard csv module's "field larger than field
    # limit" is never reached
    assert code == 2
    assert err.count("\n") == 1
    assert "field limit" not in err
    assert "rows of numbers are shorter" in err


def test_a_long_field_in_a_short_line_names_the_field_cap(tmp_path: Path) -> None:
    path = tmp_path / "field.csv"
    path.write_text("1," + "9" * (MAX_FIELD_CHARS + 1) + "\n", encoding="utf-8")
    with pytest.raises(ValueFileError, match=f"at most {MAX_FIELD_CHARS} are accepted"):
        read_value_rows(str(path), JOINTS, "joint value")


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("", "no rows"),
        ("1,2\n3\n", ":2: expected 2 values, got 1"),
        ("1,2\n1,x\n", ":2: joint value 'x' is not a number"),
        ("1,nan\n", ":1: joint value 'nan' is not a finite number"),
        ("j1,j3\n1,2\n", ":1: header lacks column(s) j2; expected j1, j2"),
        ("1,2\n3,4\n5,6\n", "more than 2 rows; at most 2 are accepted"),
    ],
)
def test_bad_files_say_where_and_what(tmp_path: Path, text: str, message: str) -> None:
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    # our own contract: the message names the file, the line where there is one, and the problem
    with pytest.raises(ValueFileError) as caught:
        read_value_rows(str(path), JOINTS, "joint value", max_rows=2)
    assert str(caught.value).startswith(str(path))
    assert message in str(caught.value)
