"""The benchmark timing helpers: which runs are made, in which order."""

from __future__ import annotations

from posebridge.bench.timing import best_seconds_alternating


def test_alternating_runs_take_turns_after_one_warm_up_each() -> None:
    calls: list[str] = []
    best = best_seconds_alternating(
        [lambda: calls.append("a"), lambda: calls.append("b")], repeats=3
    )
    # the order the helper's docstring states: one warm-up of each, then turns
    assert calls == ["a", "b"] + ["a", "b"] * 3
    assert len(best) == 2
    assert all(seconds >= 0.0 for seconds in best)
