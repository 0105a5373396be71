"""Benchmarks behind ``posebridge bench``.

One module per area, each exposing ``bench_<area>(quick: bool) -> dict[str, float]``;
:mod:`posebridge.bench.runner` collects them into one flat JSON object of numbers.
"""
