"""Chunked execution of heavy sweeps: in-process, local process pool, or Dask cluster."""

from posebridge.compute.executor import (
    ComputationCancelled,
    DaskExecutor,
    Executor,
    ExecutorError,
    LocalPoolExecutor,
    ProgressCallback,
    SerialExecutor,
    make_executor,
    run_chunks,
    split_range,
    warm_worker,
)

__all__ = [
    "ComputationCancelled",
    "DaskExecutor",
    "Executor",
    "ExecutorError",
    "LocalPoolExecutor",
    "ProgressCallback",
    "SerialExecutor",
    "make_executor",
    "run_chunks",
    "split_range",
    "warm_worker",
]
