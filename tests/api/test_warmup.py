"""Kernel warm-up at server start: the first steps before serving, the rest behind, told."""

from __future__ import annotations

import io
import threading

from posebridge.api.warmup import KernelWarmUp, WarmStep


def test_first_steps_run_before_the_rest_which_runs_behind() -> None:
    gate = threading.Event()
    ran: list[str] = []
    stream = io.StringIO()
    warm = KernelWarmUp(
        [
            WarmStep("forward kinematics", lambda: ran.append("fk")),
            WarmStep("inverse kinematics", lambda: ran.append("ik")),
            WarmStep("target check", lambda: (gate.wait(), ran.append("check"))[1]),
        ],
        first=2,
        stream=stream,
    )
    warm.run_first()
    # our own contract: the first two steps have run, the server may answer; not all ready
    assert ran == ["fk", "ik"]
    assert warm.done == 2
    assert not warm.ready
    thread = warm.start_rest()
    assert thread is not None
    gate.set()
    assert warm.wait(timeout_s=60)  # wait on the warm-up's own state
    assert ran == ["fk", "ik", "check"]
    assert warm.done == warm.total == 3
    lines = stream.getvalue().splitlines()
    # our own contract: one line per step with its number and name, then the end
    assert lines[0].startswith("posebridge: kernels 1/3: forward kinematics")
    assert lines[2].startswith("posebridge: kernels 3/3: target check")
    assert lines[-1] == "posebridge: kernels: all loaded"


def test_a_failed_step_ends_the_warm_up_and_says_so() -> None:
    stream = io.StringIO()

    def broken() -> None:
        raise RuntimeError("no cache folder")

    warm = KernelWarmUp([WarmStep("clearance", broken)], first=1, stream=stream)
    warm.run_first()
    # our own contract: the server still starts (ready), the failure is named
    assert warm.ready
    assert warm.failed == "clearance: RuntimeError: no cache folder"
    assert "could not be loaded now" in stream.getvalue()
