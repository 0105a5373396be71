"""Collects every benchmark module into one flat mapping of named figures.

Figures are numbers; a figure that cannot be measured here (a reference
library not installed) is replaced by ``<key>_missing`` holding the reason.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from typing import NamedTuple

from posebridge.bench.checks import bench_checks
from posebridge.bench.clearance import bench_clearance
from posebridge.bench.drag import bench_drag
from posebridge.bench.external_axis import bench_external_axis
from posebridge.bench.first_serve import bench_first_serve
from posebridge.bench.ik_analytic import bench_ik_analytic
from posebridge.bench.ik_numeric import bench_ik_numeric
from posebridge.bench.ik_offset_wrist import bench_ik_offset_wrist
from posebridge.bench.kinematics import bench_kinematics
from posebridge.bench.maps import bench_maps
from posebridge.bench.mesh_clearance import bench_mesh_clearance
from posebridge.bench.mesh_load import bench_mesh_load
from posebridge.bench.page_load import bench_page_load
from posebridge.bench.placement import bench_placement
from posebridge.bench.placement_table import bench_placement_table
from posebridge.bench.review_load import bench_review_load
from posebridge.bench.sequence import bench_sequence

__all__ = ["BENCHMARKS", "run_benchmarks", "with_missing_reasons"]


class Benchmark(NamedTuple):
    name: str
    run: Callable[[bool], Mapping[str, float | str]]


BENCHMARKS: tuple[Benchmark, ...] = (
    Benchmark("first start with an empty kernel cache", bench_first_serve),
    Benchmark("forward kinematics and Jacobian", bench_kinematics),
    Benchmark("analytic inverse kinematics", bench_ik_analytic),
    Benchmark("numerical inverse kinematics", bench_ik_numeric),
    Benchmark("closed-form inverse kinematics, offset wrist", bench_ik_offset_wrist),
    Benchmark("feasible intervals of an external axis", bench_external_axis),
    Benchmark("clearance", bench_clearance),
    Benchmark("mesh clearance", bench_mesh_clearance),
    Benchmark("robot mesh loading and capsule fitting", bench_mesh_load),
    Benchmark("joint-space and reach maps", bench_maps),
    Benchmark("base placement", bench_placement),
    Benchmark("table placement", bench_placement_table),
    Benchmark("target check and log diagnosis", bench_checks),
    Benchmark("solution sequence and blended timing", bench_sequence),
    Benchmark("dashboard page load", bench_page_load),
    Benchmark("dashboard drag round trip", bench_drag),
    Benchmark("shared review under load", bench_review_load),
)


def run_benchmarks(
    *, quick: bool, progress: Callable[[str], None] | None = None, only: Sequence[str] = ()
) -> dict[str, float | str]:
    """Run every benchmark in order; ``progress(name)`` is called before each.

    With ``only``, just the benchmarks whose name contains one of its words
    (``only=["dashboard"]``: page load and drag round trip).

    A figure that came out NaN or infinite (nothing measured) is replaced by
    ``<key>_missing`` saying so, so no figure is a bare ``null``.
    """
    figures: dict[str, float | str] = {}
    for benchmark in BENCHMARKS:
        if only and not any(word in benchmark.name for word in only):
            continue
        if progress is not None:
            progress(benchmark.name)
        figures.update(benchmark.run(quick))
    return with_missing_reasons(figures)


def with_missing_reasons(figures: Mapping[str, float | str]) -> dict[str, float | str]:
    """``figures`` with every non-finite number replaced by ``<key>_missing`` and a reason."""
    out: dict[str, float | str] = {}
    for key, value in figures.items():
        if isinstance(value, str) or math.isfinite(value):
            out[key] = value
        else:
            out[f"{key}_missing"] = f"not measured in this run (the benchmark gave {value})"
    return out
