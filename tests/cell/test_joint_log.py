"""Reading controller joint logs (CSV): the demo log, units, and every error message.

References: the demo CSV read with Python's csv module; the unit conversion closed
form (rad = deg * pi / 180, m = mm / 1000); messages are our own contract (exact text).
"""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.cell import joint_log
from posebridge.cell.joint_log import (
    JointLogError,
    JointLogTooLongError,
    parse_joint_log,
    read_joint_log,
)
from posebridge.resources import data_folder

DEMO_LOG = data_folder("robots") / "demo-log.csv"
HEADER = "time_s,j1,j2,j3,j4,j5,j6\n"


@pytest.fixture(scope="module")
def arm(robot):
    return robot("pb-arm6")


def test_demo_log_matches_the_csv_module(arm) -> None:
    log = read_joint_log(DEMO_LOG, arm)
    with DEMO_LOG.open(newline="") as handle:
        rows = list(csv.reader(handle))
    values = np.array(rows[1:], dtype=float)
    assert log.joint_names == ("j1", "j2", "j3", "j4", "j5", "j6")
    assert log.count == len(rows) - 1
    # csv module (reference) and the closed form rad = deg * pi / 180
    np.testing.assert_array_equal(log.time_s, values[:, 0])
    np.testing.assert_allclose(log.q, values[:, 1:] * math.pi / 180.0, rtol=1e-15)
    # header is line 1, so data row k is line k + 2
    np.testing.assert_array_equal(log.line, np.arange(2, len(rows) + 1))
    assert log.source == str(DEMO_LOG)


def test_columns_in_any_order_and_without_time(arm) -> None:
    log = parse_joint_log("j6,j5,j4,j3,j2,j1\n6,5,4,3,2,1\n\n", arm)
    # closed form: columns are matched by name, deg -> rad
    np.testing.assert_allclose(log.q, [np.radians([1, 2, 3, 4, 5, 6])], rtol=1e-15)
    assert log.time_s is None
    np.testing.assert_array_equal(log.line, [2])


def test_export_files_read_as_logs(robot) -> None:
    gantry = robot("pb-gantry3")
    text = (
        "# posebridge motion export\n# robot: pb-gantry3\n"
        "time_s,segment,x_mm,y_mm,z_mm,c_deg,branch,clearance_mm\n"
        '0,0,1000,750,400,90,"front, up",12.5\n0.004,0,1001,750,400,90,"front, up",12.4\n'
    )
    log = parse_joint_log(text, gantry)
    # closed form: m = mm / 1000, rad = deg * pi / 180; the header follows two comment lines
    np.testing.assert_allclose(log.q[1], [1.001, 0.75, 0.4, math.pi / 2], rtol=1e-15)
    np.testing.assert_array_equal(log.line, [4, 5])
    assert log.time_s is not None
    assert log.time_s.tolist() == [0.0, 0.004]


def test_prismatic_joints_are_millimetres(robot) -> None:
    gantry = robot("pb-gantry3")
    log = parse_joint_log("x, y ,z,c\n1000,750,400,90\n", gantry)
    # closed form: m = mm / 1000 for prismatic joints, rad = deg * pi / 180 for c
    np.testing.assert_allclose(log.q, [[1.0, 0.75, 0.4, math.pi / 2]], rtol=1e-15)


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (
            "time_s,j1,j2,j3,j4,j5\n0,1,2,3,4,5\n",
            "log.csv: line 1: missing column 'j6'; expected the joint names of robot 'pb-arm6' "
            "(j1, j2, j3, j4, j5, j6)",
        ),
        (
            "time_s,j1,j2,j3,j4,j5,j6,j7\n",
            "log.csv: line 1, column 8: unknown column 'j7'; expected the joint names of robot "
            "'pb-arm6' (j1, j2, j3, j4, j5, j6) and optionally time_s",
        ),
        (
            "time_s,j1_mm,j2,j3,j4,j5,j6\n",
            "log.csv: line 1, column 2: unknown column 'j1_mm'; joint 'j1' is in deg "
            "(write 'j1' or 'j1_deg')",
        ),
        ("j1,j2,j3,j4,j5,j6,j2_deg\n", "log.csv: line 1, column 7: duplicate column 'j2_deg'"),
        (
            "# a comment\n\nj1,j2,j3,j4,j5,j6\n",
            "log.csv: line 2: expected the header row of joint names",
        ),
        ("j1,j2,j3,j4,j5,j6,j2\n", "log.csv: line 1, column 7: duplicate column 'j2'"),
        (
            HEADER + "0,1,2,3,4,5,6\n0.1,1,2,x,4,5,6\n",
            "log.csv: line 3, column 4 (j3): expected a number, got 'x'",
        ),
        (
            HEADER + "0,1,2,3,4,nan,6\n",
            "log.csv: line 2, column 6 (j5): expected a finite number, got nan",
        ),
        (
            HEADER + "0,1,2,3,4,5,-inf\n",
            "log.csv: line 2, column 7 (j6): expected a finite number, got -inf",
        ),
        (HEADER + "0,1,2,3,4,,6\n", "log.csv: line 2, column 6 (j5): empty value"),
        (
            HEADER + "0,1,2,3,4,5,6\n\n0.1,1,2,3,4,5\n",
            "log.csv: line 4: expected 7 values (time_s, j1, j2, j3, j4, j5, j6), got 6",
        ),
        (
            HEADER + "0,1,2,3,4,5,6,7\n",
            "log.csv: line 2: expected 7 values (time_s, j1, j2, j3, j4, j5, j6), got 8",
        ),
        (
            HEADER + "0,1,2,3,4,5,6\n0.5,1,2,3,4,5,6\n0.5,1,2,3,4,5,6\n",
            "log.csv: line 4, column 1 (time_s): time must increase from row to row "
            "(previous 0.5 s, got 0.5 s)",
        ),
        ("", "log.csv: line 1: expected the header row of joint names, got an empty file"),
        (HEADER, "log.csv: no data rows after the header"),
        ("\n" + HEADER, "log.csv: line 1: expected the header row of joint names"),
    ],
)
def test_errors_name_the_line_and_column(arm, text: str, message: str) -> None:
    with pytest.raises(JointLogError) as error:
        parse_joint_log(text, arm, source="log.csv")
    # our own contract: the exact message
    assert str(error.value) == message


def test_row_cap(arm, monkeypatch) -> None:
    monkeypatch.setattr(joint_log, "MAX_LOG_ROWS", 2)
    text = HEADER + "".join(f"{t},1,2,3,4,5,6\n" for t in range(3))
    with pytest.raises(JointLogError) as error:
        parse_joint_log(text, arm, source="big.csv")
    assert str(error.value) == "big.csv: line 4: more than 2 data rows (the limit)"


@pytest.mark.parametrize("newline", ["\n", "\r\n", "\r"])
def test_every_newline_convention(arm, newline: str) -> None:
    # the reference: Python's csv module on the same rows split by hand
    rows = [["0", "1", "2", "3", "4", "5", "6"], ["0.5", "6", "5", "4", "3", "2", "1"]]
    text = newline.join([HEADER.strip(), *(",".join(r) for r in rows), "", ""])
    log = parse_joint_log(text, arm)
    expected = np.radians(np.array([r[1:] for r in rows], dtype=float))  # closed form
    np.testing.assert_allclose(log.q, expected)
    assert log.line.tolist() == [2, 3]


def test_mixed_newlines_and_cap_counted_after_parsing(arm) -> None:
    text = HEADER.strip() + "\r" + "0,1,2,3,4,5,6\r\n\n\n1,1,2,3,4,5,6\r2,1,2,3,4,5,6\n"
    log = parse_joint_log(text, arm, max_rows=3)
    assert log.line.tolist() == [2, 5, 6]  # blank lines 3 and 4 are not rows
    with pytest.raises(JointLogTooLongError) as error:
        parse_joint_log(text + "3,1,2,3,4,5,6\r", arm, max_rows=3, source="cr.csv")
    assert str(error.value) == "cr.csv: line 7: more than 3 data rows (the limit)"


def test_csv_module_error_names_the_line(arm) -> None:
    text = HEADER + "0,1,2,3,4,5," + "6" * 200_000 + "\n"
    with pytest.raises(JointLogError) as error:
        parse_joint_log(text, arm, source="wide.csv")
    assert str(error.value).startswith("wide.csv: line 2: not readable as CSV (field larger")


def test_control_characters_escaped_in_messages(arm) -> None:
    with pytest.raises(JointLogError) as error:
        parse_joint_log(HEADER + "0,1,2,3,4,5,6,7\n", arm, source="a\x00b\x1b.csv")
    assert str(error.value).startswith("a\\x00b\\x1b.csv: line 2: expected 7 values")


def test_file_errors(arm, tmp_path, monkeypatch) -> None:
    missing = tmp_path / "missing.csv"
    with pytest.raises(JointLogError, match=r"missing\.csv: cannot read: No such file"):
        read_joint_log(missing, arm)
    latin = tmp_path / "latin.csv"
    latin.write_bytes(HEADER.encode() + b"0,1,2,3,4,5,\xb0\n")
    with pytest.raises(JointLogError) as error:
        read_joint_log(latin, arm)
    # the bad byte follows the header and "0,1,2,3,4,5," (12 bytes)
    offset = len(HEADER) + 12
    assert str(error.value) == f"{latin}: not UTF-8 text (invalid start byte at byte {offset})"
    monkeypatch.setattr(joint_log, "MAX_LOG_BYTES", 10)
    big = tmp_path / "big.csv"
    big.write_text(HEADER)
    with pytest.raises(JointLogError) as error:
        read_joint_log(big, arm)
    assert str(error.value) == f"{big}: file is larger than 10 bytes, the limit for logs"


@settings(derandomize=True, deadline=2000, max_examples=40)
@given(
    st.lists(
        st.lists(
            st.floats(min_value=-360.0, max_value=360.0, allow_nan=False, allow_infinity=False),
            min_size=6,
            max_size=6,
        ),
        min_size=1,
        max_size=20,
    )
)
def test_written_values_read_back(robot, rows: list[list[float]]) -> None:
    text = "j1,j2,j3,j4,j5,j6\n" + "".join(",".join(repr(v) for v in row) + "\n" for row in rows)
    log = parse_joint_log(text, robot("pb-arm6"))
    # closed form: repr round-trips a float exactly; rad = deg * pi / 180
    np.testing.assert_allclose(log.q, np.asarray(rows) * math.pi / 180.0, rtol=1e-15, atol=0)
