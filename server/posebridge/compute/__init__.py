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
    single_thread_worker,
    split_range,
    worker_initializer,
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
    "single_thread_worker",
    "split_range",
    "worker_initializer",
]
