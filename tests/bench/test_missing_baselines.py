"""`posebridge bench` names every baseline it could not measure, with the reason."""

from __future__ import annotations

import math
import sys

import pytest

from posebridge.bench import clearance, drag, kinematics, runner
from posebridge.bench.runner import Benchmark, run_benchmarks, with_missing_reasons


def test_missing_reference_libraries_give_reason_keys(monkeypatch: pytest.MonkeyPatch) -> None:
    # a None entry in sys.modules makes the import raise ImportError (Python language reference,
    # "The module cache"): pinocchio and python-fcl as if not installed
    monkeypatch.setitem(sys.modules, "pinocchio", None)
    monkeypatch.setitem(sys.modules, "fcl", None)
    monkeypatch.setattr(drag, "chromium_available", lambda: False)
    figures = {
        **kinematics.bench_kinematics(True),
        **clearance.bench_clearance(True),
        **drag.bench_drag(True),
    }
    # our own contract: the figure is replaced by <key>_missing naming the library and the extra
    for key, library in (
        ("fk_ratio_vs_pin_loop", "pinocchio"),
        ("clearance_ratio_vs_fcl_manager", "python-fcl"),
        ("drag_roundtrip_p95_ms", "Chromium"),
        ("drag_roundtrip_p50_ms", "Chromium"),
        ("nudge_roundtrip_p95_ms", "Chromium"),
        ("nudge_roundtrip_p50_ms", "Chromium"),
    ):
        assert key not in figures
        reason = figures[f"{key}_missing"]
        assert isinstance(reason, str)
        assert library in reason
        assert "posebridge[bench]" in reason
    assert all(isinstance(v, str) or math.isfinite(v) for v in figures.values())


def test_figures_that_came_out_empty_get_a_reason() -> None:
    figures = with_missing_reasons({"a_s": 1.5, "b_s": math.nan, "c_missing": "why"})
    # our own contract: numbers kept, NaN replaced by a reason key, reasons kept
    assert figures["a_s"] == 1.5
    assert "b_s" not in figures
    assert "not measured" in str(figures["b_s_missing"])
    assert figures["c_missing"] == "why"


def test_only_runs_the_benchmarks_named(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(
        runner,
        "BENCHMARKS",
        (
            Benchmark("dashboard page load", lambda quick: {"page_ms": 1.0}),
            Benchmark("clearance", lambda quick: {"clearance_s": 2.0}),
        ),
    )
    seen: list[str] = []
    # our own contract: a benchmark runs when its name contains one of the words
    assert run_benchmarks(quick=True, progress=seen.append, only=["dashboard"]) == {"page_ms": 1.0}
    assert seen == ["dashboard page load"]
    assert run_benchmarks(quick=True) == {"page_ms": 1.0, "clearance_s": 2.0}
