"""Progress on stderr of the commands that compile kernels or sweep: also when stderr is not a
terminal (pytest's capture is not one), throttled, and silent with ``--quiet``."""

from __future__ import annotations

import pytest

from posebridge.cli import common, main


def test_progress_when_piped_is_one_line_per_tenth(capsys: pytest.CaptureFixture[str]) -> None:
    progress = common.ProgressBar("reach map", enabled=True)
    for done in range(41):
        progress(done, 40)
    lines = capsys.readouterr().err.splitlines()
    # our own contract: a line at the start, at each further tenth, and at the end
    assert lines[0] == "reach map 0/40"
    assert lines[-1] == "reach map 40/40"
    assert len(lines) == 11


def test_kernel_steps_are_announced_and_quiet_hides_them(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(common, "KERNEL_ANNOUNCE_AFTER_S", 0.0)  # announce every step
    ran: list[str] = []
    steps = [("first", lambda: ran.append("first")), ("second", lambda: ran.append("second"))]
    common.load_kernels(steps, quiet=False)
    err = capsys.readouterr().err
    assert ran == ["first", "second"]
    assert "kernels 1/2: first" in err
    assert "kernels 2/2: second" in err
    assert err.splitlines()[-1] == "posebridge: kernels: all loaded"
    common.load_kernels(steps, quiet=True)
    assert capsys.readouterr().err == ""


@pytest.mark.parametrize(
    ("argv", "announced"),
    [
        (("reach", "pb-planar2r"), "kernels 1/1: forward and inverse kinematics"),
        (("check", "DEMO"), "kernels 2/2: clearance"),
    ],
)
def test_first_commands_announce_their_kernels(
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
    argv: tuple[str, ...],
    announced: str,
) -> None:
    from posebridge.resources import data_folder

    monkeypatch.setattr(common, "KERNEL_ANNOUNCE_AFTER_S", 0.0)
    demo = str(data_folder("robots") / "demo-cell.json")
    args = [demo if a == "DEMO" else a for a in argv]
    code = main([*args, "--json"])
    err = capsys.readouterr().err
    assert code in (0, 1), err
    assert announced in err
    code = main([*args, "--json", "--quiet"])
    assert "kernels" not in capsys.readouterr().err
