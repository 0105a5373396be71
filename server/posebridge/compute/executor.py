"""Run chunked sweeps in-process, on a local process pool, or on a Dask cluster.

Heavy sweeps (reach maps, joint-space volumes, base-placement grids) are cut
into chunks by the caller (:func:`split_range`) and handed to one executor
interface, :class:`Executor`: ``map_chunks(function, chunks)`` calls
``function(*chunk)`` for every chunk and returns the results in chunk order.
Three executors implement it:

- :class:`SerialExecutor` runs the chunks one after another in the calling
  process: for small jobs, and the one-worker baseline of speed-up figures.
- :class:`LocalPoolExecutor` runs them on a pool of worker processes
  (:class:`concurrent.futures.ProcessPoolExecutor`).
- :class:`DaskExecutor` runs them on an existing Dask cluster
  (``dask.distributed``), given its scheduler address ``tcp://HOST:PORT``.

:func:`make_executor` picks one. Results are identical whichever executor
runs them as long as the chunks are fixed by the problem alone (never by the
worker count) and ``function`` is deterministic (explicit seeds only).

Decisions
---------
- **Start method: spawn.** Worker processes start as fresh interpreters.
  ``fork`` copies a parent that may already run numba's worker threads (and
  the server's event loop), which can deadlock the child; ``forkserver`` is
  Unix-only and its server is process-wide state. Spawned workers import
  posebridge once and load the numba kernels from the on-disk cache; the
  start-up cost (about a second) is paid once per executor, so keep one
  executor for many sweeps. Scripts that create a pool need the usual
  ``if __name__ == "__main__":`` guard.
- **Warm-up and threads.** Each pool worker runs an initializer once,
  :func:`single_thread_worker` by default: it limits numba to one thread in
  that worker (processes give the parallelism; numba threads on top would
  oversubscribe the cores). This package is a leaf and knows no kernels:
  callers pass ``worker_initializer(warm_up)`` with the warm-up of the layer
  whose kernels the chunks run (e.g.
  :func:`posebridge.geometry.warm.warm_geometry`), which limits the threads
  and then loads those kernels. On a Dask cluster the initializer is run once on every worker
  present at connection time; numba's thread count there is the cluster's
  own setting (start Dask workers with ``NUMBA_NUM_THREADS=1`` if chunks are
  larger than the kernels' serial/parallel threshold, 2048).
  The serial executor runs no initializer (it must not change the calling
  process) but runs numba kernels on one thread while it works.
- **Scheduling.** At most ``2 * workers`` chunks are in flight, so workers
  stay busy while results come back, memory stays bounded and cancelling
  stops the scheduling of new chunks at once. ``progress(done, total)``
  is called in the caller's thread after every finished chunk.
- **Chunk sizes.** Aim for 0.05 to 1 s of work per chunk: per-chunk overhead
  is about a millisecond on the pool and a few on Dask. Forward kinematics
  of a six-axis arm runs at about 0.8 million configurations per second on
  one core, so 20 000 to 200 000 configurations per chunk suit FK sweeps.
"""

from __future__ import annotations

import concurrent.futures as cf
import functools
import multiprocessing
import os
import pickle
import threading
from abc import ABC, abstractmethod
from collections.abc import Callable, Sequence
from concurrent.futures.process import BrokenProcessPool
from types import TracebackType
from typing import Any, Protocol, Self, TypeVar

import numba

__all__ = [
    "CANCEL_POLL_S",
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

CANCEL_POLL_S = 0.05
"""How often, in s, a pool or cluster executor checks the cancel event while waiting."""

ProgressCallback = Callable[[int, int], None]
"""``progress(done, total)``: chunks finished so far and chunks in all."""

Result = TypeVar("Result")


class ExecutorError(Exception):
    """An executor that cannot be set up or used.

    Bad arguments, missing Dask, an unreachable scheduler, a closed executor or a worker process
    that died.
    """


class ComputationCancelled(Exception):  # noqa: N818 - a stop signal, not an error
    """The cancel event was set: no further chunks were scheduled.

    Attributes
    ----------
    done, total : int
        Chunks finished before the cancellation, and chunks in all.
    """

    def __init__(self, done: int, total: int) -> None:
        super().__init__(f"computation cancelled after {done} of {total} chunks")
        self.done = done
        self.total = total


class Executor(Protocol):
    """Runs ``function(*chunk)`` for every chunk and returns the results in chunk order."""

    @property
    def workers(self) -> int:
        """Number of chunks that can run at the same time."""
        ...

    def map_chunks(
        self,
        function: Callable[..., Result],
        chunks: Sequence[tuple[Any, ...]],
        *,
        progress: ProgressCallback | None = None,
        cancel: threading.Event | None = None,
    ) -> list[Result]:
        """Run every chunk; see :meth:`SerialExecutor.map_chunks`."""
        ...

    def close(self) -> None:
        """Release the workers; the executor cannot be used afterwards."""
        ...

    def __enter__(self) -> Self:
        """Return the executor itself for the ``with`` block."""
        ...

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        traceback: TracebackType | None,
    ) -> None:
        """Close the executor on leaving the ``with`` block."""
        ...


def _check_count(name: str, value: object, minimum: int) -> int:
    """``value`` if it is an integer (not a bool) of at least ``minimum``, else ExecutorError."""
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise ExecutorError(f"{name}: expected an integer >= {minimum}, got {value!r}")
    return value


def split_range(total: int, chunk_size: int) -> list[tuple[int, int]]:
    """Cut ``range(total)`` into consecutive half-open ranges of at most ``chunk_size``.

    Parameters
    ----------
    total : int
        Number of items, ``>= 0``.
    chunk_size : int
        Items per chunk, ``>= 1``; the last chunk may be shorter.

    Returns
    -------
    list of (start, stop)
        ``ceil(total / chunk_size)`` ranges covering ``0 .. total`` in order.

    Examples
    --------
    >>> split_range(10, 4)
    [(0, 4), (4, 8), (8, 10)]
    """
    _check_count("total", total, 0)
    _check_count("chunk_size", chunk_size, 1)
    return [(start, min(start + chunk_size, total)) for start in range(0, total, chunk_size)]


def single_thread_worker() -> None:
    """Return the default worker initializer: one numba thread in this worker process."""
    numba.set_num_threads(1)


def _prepare_worker(warm_up: Callable[[], None]) -> None:
    numba.set_num_threads(1)
    warm_up()


def worker_initializer(warm_up: Callable[[], None] | None) -> Callable[[], None]:
    """Return a worker initializer.

    One numba thread, then ``warm_up()`` (a module-level function, so that it can be sent to spawned
    workers), or only the thread limit for ``None``.
    """
    if warm_up is None:
        return single_thread_worker
    return functools.partial(_prepare_worker, warm_up)


def run_chunks(
    function: Callable[..., Result],
    chunks: Sequence[tuple[Any, ...]],
    *,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
) -> list[Result]:
    """``[function(*chunk) for chunk in chunks]`` in the calling process, numba's threads as set.

    For a caller without an executor (its kernels then use every numba
    thread); :class:`SerialExecutor` runs the same loop on one thread.
    ``progress(done, total)`` is called after each chunk; ``cancel`` is
    checked before each chunk.

    Raises
    ------
    ComputationCancelled
        ``cancel`` was set before all chunks had run.
    """
    total = len(chunks)
    results = []
    for done, chunk in enumerate(chunks):
        if cancel is not None and cancel.is_set():
            raise ComputationCancelled(done, total)
        results.append(function(*chunk))
        if progress is not None:
            progress(done + 1, total)
    return results


class _ExecutorBase(ABC):
    """What every executor shares.

    The closed flag, the checks before a run, and the context-manager protocol (leaving the ``with``
    block closes the executor).
    """

    _closed = False

    def _check_run(self, chunks: Sequence[tuple[Any, ...]]) -> None:
        """Refuse a closed executor and chunks that are not argument tuples."""
        if self._closed:
            raise ExecutorError("executor: already closed")
        for index, chunk in enumerate(chunks):
            if not isinstance(chunk, tuple):
                raise ExecutorError(
                    f"chunks[{index}]: expected a tuple of arguments, got {type(chunk).__name__}"
                )

    @abstractmethod
    def close(self) -> None:
        """Release the workers; the executor cannot be used afterwards."""

    def __enter__(self) -> Self:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        traceback: TracebackType | None,
    ) -> None:
        self.close()


def _map_on_futures(
    pool: cf.Executor,
    function: Callable[..., Result],
    chunks: Sequence[tuple[Any, ...]],
    progress: ProgressCallback | None,
    cancel: threading.Event | None,
    in_flight: int,
) -> list[Result]:
    """Submit at most ``in_flight`` chunks at a time; collect results in chunk order."""
    total = len(chunks)
    results: list[Any] = [None] * total
    pending: dict[cf.Future[Result], int] = {}
    submitted = 0
    done = 0
    try:
        while done < total:
            if cancel is not None and cancel.is_set():
                raise ComputationCancelled(done, total)
            while submitted < total and len(pending) < in_flight:
                pending[pool.submit(function, *chunks[submitted])] = submitted
                submitted += 1
            finished, _ = cf.wait(pending, timeout=CANCEL_POLL_S, return_when=cf.FIRST_COMPLETED)
            for future in finished:
                results[pending.pop(future)] = future.result()
                done += 1
                if progress is not None:
                    progress(done, total)
    finally:
        for future in pending:
            future.cancel()
    return results


class SerialExecutor(_ExecutorBase):
    """Runs the chunks one after another in the calling process (one worker).

    While it runs, numba kernels use one thread (numba's thread count is
    per calling thread and is restored afterwards), so it is a true
    one-core baseline for speed-up figures.
    """

    @property
    def workers(self) -> int:
        """Always 1."""
        return 1

    def map_chunks(
        self,
        function: Callable[..., Result],
        chunks: Sequence[tuple[Any, ...]],
        *,
        progress: ProgressCallback | None = None,
        cancel: threading.Event | None = None,
    ) -> list[Result]:
        """Call ``function(*chunk)`` for every chunk and return the results in chunk order.

        Parameters
        ----------
        function : callable
            A module-level (picklable) function, so that every executor can run it.
        chunks : sequence of tuple
            Positional arguments of each call.
        progress : callable, optional
            ``progress(done, total)``, called in the caller's thread after each chunk.
        cancel : threading.Event, optional
            Checked before each chunk; once set, no further chunk starts.

        Returns
        -------
        list
            ``[function(*chunk) for chunk in chunks]``.

        Raises
        ------
        ComputationCancelled
            ``cancel`` was set before all chunks had run.
        ExecutorError
            The executor is closed, or a chunk is not a tuple.
        """
        self._check_run(chunks)
        threads = numba.get_num_threads()
        numba.set_num_threads(1)
        try:
            return run_chunks(function, chunks, progress=progress, cancel=cancel)
        finally:
            numba.set_num_threads(threads)

    def close(self) -> None:
        """Mark the executor closed."""
        self._closed = True


class LocalPoolExecutor(_ExecutorBase):
    """Runs the chunks on a pool of spawned worker processes on this machine.

    Parameters
    ----------
    workers : int
        Number of worker processes, ``>= 1``.
    initializer : callable, optional
        Run once in every worker process when it starts (module-level
        function); :func:`single_thread_worker` by default, ``None`` for nothing.
    """

    def __init__(
        self, workers: int, *, initializer: Callable[[], None] | None = single_thread_worker
    ) -> None:
        self._workers = _check_count("workers", workers, 1)
        self._pool = cf.ProcessPoolExecutor(
            max_workers=workers,
            mp_context=multiprocessing.get_context("spawn"),
            initializer=initializer,
        )

    @property
    def workers(self) -> int:
        """Number of worker processes."""
        return self._workers

    def map_chunks(
        self,
        function: Callable[..., Result],
        chunks: Sequence[tuple[Any, ...]],
        *,
        progress: ProgressCallback | None = None,
        cancel: threading.Event | None = None,
    ) -> list[Result]:
        """Run every chunk in the worker processes; as :meth:`SerialExecutor.map_chunks`.

        Cancelling stops the scheduling of new chunks and cancels the queued
        ones; chunks already running in a worker finish in the background.

        Raises
        ------
        ComputationCancelled
        ExecutorError
            Closed executor, a function that cannot be sent to a worker
            process, a chunk that is not a tuple, or a worker process that died.
        """
        self._check_run(chunks)
        try:
            pickle.dumps(function)
        except (pickle.PicklingError, AttributeError, TypeError) as error:
            raise ExecutorError(
                f"function: {function!r} cannot be sent to worker processes; "
                f"pass a module-level function ({error})"
            ) from error
        try:
            return _map_on_futures(
                self._pool, function, chunks, progress, cancel, in_flight=2 * self._workers
            )
        except BrokenProcessPool as error:
            raise ExecutorError(
                "a worker process ended unexpectedly (crash or out of memory); "
                "this executor cannot be used any more"
            ) from error

    def close(self) -> None:
        """Cancel queued chunks and shut the worker processes down."""
        if not self._closed:
            self._closed = True
            self._pool.shutdown(wait=True, cancel_futures=True)


class DaskExecutor(_ExecutorBase):
    """Runs the chunks on an existing Dask cluster.

    Parameters
    ----------
    scheduler : str
        Address of the Dask scheduler, e.g. ``"tcp://127.0.0.1:8786"``.
    initializer : callable, optional
        Run once on every worker present at connection time;
        :func:`single_thread_worker` by default, ``None`` for nothing.
    connect_timeout_s : float
        How long to try to reach the scheduler, s.

    Raises
    ------
    ExecutorError
        ``dask.distributed`` is not installed, or the scheduler cannot be reached.
    """

    def __init__(
        self,
        scheduler: str,
        *,
        initializer: Callable[[], None] | None = single_thread_worker,
        connect_timeout_s: float = 10.0,
    ) -> None:
        try:
            import distributed
        except ImportError as error:
            raise ExecutorError(
                f"scheduler: running on the Dask cluster at {scheduler!r} needs the "
                "'distributed' package (pip install 'dask[distributed]')"
            ) from error
        try:
            self._client = distributed.Client(
                scheduler, timeout=connect_timeout_s, set_as_default=False
            )
        except (OSError, TimeoutError) as error:
            raise ExecutorError(
                f"scheduler: could not reach the Dask scheduler at {scheduler!r} "
                f"within {connect_timeout_s:g} s ({error})"
            ) from error
        self._scheduler = scheduler
        self._pool = self._client.get_executor(pure=False)
        if initializer is not None:
            self._client.run(initializer)

    @property
    def workers(self) -> int:
        """Worker threads in the cluster now (at least 1)."""
        return max(1, sum(self._client.nthreads().values()))

    def map_chunks(
        self,
        function: Callable[..., Result],
        chunks: Sequence[tuple[Any, ...]],
        *,
        progress: ProgressCallback | None = None,
        cancel: threading.Event | None = None,
    ) -> list[Result]:
        """Run every chunk on the cluster; as :meth:`SerialExecutor.map_chunks`.

        Every call is a separate task (no caching of equal arguments).
        Cancelling stops the scheduling of new chunks and cancels the
        submitted ones on the cluster.
        """
        self._check_run(chunks)
        return _map_on_futures(
            self._pool, function, chunks, progress, cancel, in_flight=2 * self.workers
        )

    def close(self) -> None:
        """Disconnect from the cluster (the cluster keeps running)."""
        if not self._closed:
            self._closed = True
            self._pool.shutdown(wait=False)
            self._client.close()


def make_executor(
    scheduler: str | None = None,
    workers: int | None = None,
    *,
    initializer: Callable[[], None] | None = single_thread_worker,
    connect_timeout_s: float = 10.0,
) -> Executor:
    """Make the executor for a run: Dask cluster, local process pool, or in-process.

    Parameters
    ----------
    scheduler : str, optional
        Dask scheduler address (``"tcp://HOST:PORT"``); runs on that cluster.
    workers : int, optional
        Local worker processes when no scheduler is given: ``os.cpu_count()``
        by default, ``1`` for the in-process :class:`SerialExecutor`. Must be
        omitted with ``scheduler`` (the cluster has its own workers).
    initializer : callable, optional
        Worker set-up, see :class:`LocalPoolExecutor` and :class:`DaskExecutor`.
    connect_timeout_s : float
        Time allowed to reach the scheduler, s.

    Returns
    -------
    Executor
        Use it as a context manager, or call ``close()``.

    Raises
    ------
    ExecutorError
        Bad arguments, Dask missing, or scheduler unreachable.
    """
    if scheduler is not None:
        if workers is not None:
            raise ExecutorError(
                "workers: the Dask cluster has its own workers; omit workers when "
                f"scheduler is given (got workers={workers!r})"
            )
        if not isinstance(scheduler, str) or "://" not in scheduler:
            raise ExecutorError(
                f"scheduler: expected an address like 'tcp://HOST:PORT', got {scheduler!r}"
            )
        return DaskExecutor(scheduler, initializer=initializer, connect_timeout_s=connect_timeout_s)
    count = (os.cpu_count() or 1) if workers is None else _check_count("workers", workers, 1)
    if count == 1:
        return SerialExecutor()
    return LocalPoolExecutor(count, initializer=initializer)
