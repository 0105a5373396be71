"""Robot notes on the command line: every command that loads a robot prints its notes once on
stderr; ``--quiet`` hides them. The robot is a bundled one with its ``[flange]`` table cut out,
which the loader accepts with a note."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from posebridge.cli import main
from posebridge.resources import data_folder

ROBOTS = data_folder("robots")
NOTE = "no [flange] table"  # our own contract: the note of a robot file without [flange]


def _without_flange(source: Path, target: Path) -> Path:
    text = source.read_text(encoding="utf-8")
    start = text.index("[flange]")
    end = text.index("\n[", start) + 1
    target.write_text(text[:start] + text[end:], encoding="utf-8")
    return target


@pytest.fixture
def planar_no_flange(tmp_path: Path) -> Path:
    return _without_flange(ROBOTS / "pb-planar2r.toml", tmp_path / "planar-no-flange.toml")


@pytest.fixture
def cell_no_flange(tmp_path: Path) -> Path:
    _without_flange(ROBOTS / "pb-arm6.toml", tmp_path / "arm-no-flange.toml")
    cell = json.loads((ROBOTS / "demo-cell.json").read_text(encoding="utf-8"))
    cell["robot"] = {"file": "arm-no-flange.toml"}
    path = tmp_path / "cell.json"
    path.write_text(json.dumps(cell), encoding="utf-8")
    return path


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.mark.parametrize(
    "argv",
    [
        ("fk", "--joints", "10,20"),
        ("ik", "--pose", "300,100,0,0,0,0"),
        ("describe",),
        ("reach",),
    ],
)
def test_robot_commands_print_the_notes_once_on_stderr(
    capsys: pytest.CaptureFixture[str], planar_no_flange: Path, argv: tuple[str, ...]
) -> None:
    command, *rest = argv
    code, out, err = run(capsys, command, str(planar_no_flange), *rest)
    assert code in (0, 1), err
    assert err.count(NOTE) == 1
    assert NOTE not in out or command == "describe"  # describe lists its notes on stdout too
    code, out, err = run(capsys, command, str(planar_no_flange), *rest, "--quiet")
    assert code in (0, 1), err
    assert NOTE not in err


@pytest.mark.parametrize(
    "argv",
    [
        ("check",),
        ("diagnose", "--joints", "0,0,0,0,90,0"),
        ("paths", "--json"),
        ("jointmap", "--resolution", "8", "--workers", "1", "--json"),
    ],
)
def test_cell_commands_print_their_robots_notes_once_on_stderr(
    capsys: pytest.CaptureFixture[str], cell_no_flange: Path, argv: tuple[str, ...]
) -> None:
    command, *rest = argv
    code, out, err = run(capsys, command, str(cell_no_flange), *rest)
    assert code in (0, 1), err
    assert err.count(NOTE) == 1
    assert NOTE not in out
    code, out, err = run(capsys, command, str(cell_no_flange), *rest, "--quiet")
    assert code in (0, 1), err
    assert NOTE not in err


def test_report_prints_the_robots_notes_once(
    capsys: pytest.CaptureFixture[str], cell_no_flange: Path, tmp_path: Path
) -> None:
    output = tmp_path / "review.html"
    code, _out, err = run(capsys, "report", str(cell_no_flange), "-o", str(output))
    assert code == 0, err
    assert err.count(NOTE) == 1
