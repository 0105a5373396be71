"""Benchmark: the target check and the log diagnosis of the demo cells, reports built.

Times the whole answer the CLI and the API give: the SI computation and the boundary model
built from it (``target_check_result(check_targets(scene))``,
``log_diagnosis_result(diagnose_log(scene, log))``), best of several runs after a warm-up.
Cells: ``robots/demo-cell.json`` (no external axes) and ``robots/demo-track-cell.json`` (a track
and a turntable: external values chosen per target); log: ``robots/demo-log.csv`` (200 rows) on
the demo cell, per-row values included.
"""

from __future__ import annotations

from posebridge.bench.timing import best_seconds
from posebridge.cell.checks import check_targets
from posebridge.cell.files import load_cell
from posebridge.cell.joint_log import read_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.resources import data_folder
from posebridge.results.log_diagnosis import log_diagnosis_result
from posebridge.results.target_check import target_check_result

__all__ = ["bench_checks"]


def _scene(name: str) -> Scene:
    path = data_folder("robots") / name
    return resolve_scene(load_cell(path), path)


def bench_checks(quick: bool) -> dict[str, float]:
    """``target_check_demo_ms``, ``target_check_track_ms`` and ``log_diagnosis_rows_per_s``."""
    repeats = 3 if quick else 7
    demo = _scene("demo-cell.json")
    track = _scene("demo-track-cell.json")
    log = read_joint_log(data_folder("robots") / "demo-log.csv", demo.robot)
    demo_s = best_seconds(lambda: target_check_result(check_targets(demo)), repeats=repeats)
    track_s = best_seconds(lambda: target_check_result(check_targets(track)), repeats=repeats)
    log_s = best_seconds(lambda: log_diagnosis_result(diagnose_log(demo, log)), repeats=repeats)
    return {
        "target_check_demo_ms": demo_s * 1000.0,
        "target_check_track_ms": track_s * 1000.0,
        "log_diagnosis_rows_per_s": log.count / log_s,
    }
