"""The owner's requests first: reviewers' computations run in a process of their own.

A shared server has one owner, working interactively, and any number of
reviewers whose requests cost CPU. Reviewers' rate caps count requests and
their budgets count cost (:mod:`posebridge.review.access`, ``CostBudget``);
this module keeps their computations off the owner's processor time:

* every computation a reviewer asks for (kinematics, checks, pose and log
  diagnosis, path sequence and export) and every reviewer job (maps,
  placement) runs in **one reviewer worker process**, one at a time, in
  arrival order, at a lower scheduling priority (``os.nice`` by
  :data:`REVIEWER_NICE`). The server process only sends the request and
  receives the answer, so a reviewer's computation never holds the server's
  interpreter lock (the GIL) while the owner's request waits for it, and the
  operating system gives the owner's work the processor first;
* at most :data:`MAX_WAITING` computations wait (503 with ``Retry-After``
  beyond);
* before each reviewer computation the lane waits while an owner request is
  being served (at most :data:`OWNER_WAIT_S` each time, so reviewers are
  slowed, never starved).

The worker process is started on the first reviewer computation (not with
the server, whose own start-up it would slow) with the ``spawn`` method (as
:mod:`posebridge.compute.executor`). It has its own robot cache, which serves
only bundled names and the cell's robot (never a path), and mirrors the cell
version the server read: the server sends the cell with a computation only
when its version changed since the previous one. Computations are
module-level functions ``function(context, *args)``
(:class:`~posebridge.api.compute_context.ComputeContext`); their answers and
refusals come back as values: a refusal (bad input, a robot path, an HTTP
error) as :class:`WorkerRefusedError` with its status and message, any
other error as an internal error naming its type.
"""

from __future__ import annotations

import asyncio
import concurrent.futures as cf
import logging
import multiprocessing
import os
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final, TypeVar

import numba
from fastapi import HTTPException

from posebridge.api.cell_store import CellSnapshot, snapshot_of
from posebridge.api.compute_context import ComputeContext, cell_robot_spec
from posebridge.api.robot_cache import RobotCache, RobotPathNotAllowedError
from posebridge.cell.mesh_fixtures import MeshFixtureLoader
from posebridge.cell.model import Cell, CellFileError
from posebridge.compute import ComputationCancelled
from posebridge.compute.executor import CANCEL_POLL_S
from posebridge.errors import InputError
from posebridge.geometry.mesh_cache import MeshCache

__all__ = [
    "MAX_WAITING",
    "OWNER_WAIT_S",
    "REVIEWER_NICE",
    "LaneFullError",
    "ReviewerLane",
    "WorkerRefusedError",
]

_log = logging.getLogger(__name__)

MAX_WAITING: Final = 64
"""Reviewer computations queued or running at once (50 reviewers each waiting on one fit);
more are refused (503)."""
OWNER_WAIT_S: Final = 0.25
"""Longest wait of one reviewer step for the owner's requests to finish."""
REVIEWER_NICE: Final = 10
"""Niceness added to the reviewer worker process (lower scheduling priority)."""

T = TypeVar("T")


class LaneFullError(RuntimeError):
    """Too many reviewer computations are waiting; the message says so."""


class WorkerRefusedError(InputError):
    """A reviewer computation refused its input in the worker process.

    Attributes
    ----------
    status : int
        The HTTP status of the refusal (422 bad input, 403 a robot path, ...).
    headers : dict of str or None
        Headers of an HTTP refusal (``Retry-After``).
    """

    def __init__(self, status: int, detail: str, headers: dict[str, str] | None = None):
        super().__init__(detail)
        self.status = status
        self.headers = headers

    def http_error(self) -> HTTPException:
        """Return the same refusal as an HTTP answer."""
        return HTTPException(status_code=self.status, detail=str(self), headers=self.headers)


# ---------------------------------------------------------------- the worker process


@dataclass
class _WorkerState:
    """What the reviewer worker process keeps between computations."""

    robots: RobotCache
    path: Path | None
    mesh_loader: MeshFixtureLoader
    progress: Any  # multiprocessing Array('q', 2): done, total of the running job
    cancel: Any  # multiprocessing Event: the running job is cancelled
    snapshot: CellSnapshot | None = None


_worker: _WorkerState | None = None
"""Set once in each reviewer worker process by its initializer; None in the server."""


def _start_worker(
    cell_path: Path | None, cache_size: int, nice: int, progress: Any, cancel: Any
) -> None:
    """Set up the reviewer worker process: lower priority, one numba thread, its state."""
    global _worker
    os.nice(nice)
    numba.set_num_threads(1)
    _worker = _WorkerState(
        robots=RobotCache(size=cache_size, paths_allowed=False),
        path=cell_path,
        mesh_loader=MeshFixtureLoader(MeshCache.default()),
        progress=progress,
        cancel=cancel,
    )


def _ready() -> int:
    """Return the worker's process id (a first call starts the process)."""
    return os.getpid()


def _mirrored_cell(state: _WorkerState, cell: Cell | None) -> CellSnapshot:
    """Return the worker's copy of the cell version the server sent (``cell``), or the last."""
    if cell is not None:
        state.snapshot = snapshot_of(cell, state.path, state.mesh_loader, state.snapshot)
        cell_robot_spec(state.snapshot, state.robots)
    if state.snapshot is None:
        raise CellFileError(["the server's cell cannot be read now; retry after it is fixed"])
    return state.snapshot


def _call_in_worker(
    function: Callable[..., Any], cell: Cell | None, args: tuple[Any, ...], job: bool
) -> tuple[str, Any]:
    """Run ``function(context, *args)`` in the worker; return the outcome as a value.

    A job also gets ``progress`` and ``cancel``. Outcomes: ``("done", result)``,
    ``("refused", (status, detail, headers))``, ``("cancelled", (done, total))`` or
    ``("failed", error type name)``.
    """
    state = _worker
    assert state is not None, "runs in the reviewer worker process only"
    try:
        snapshot = _mirrored_cell(state, cell) if cell is not None else state.snapshot

        def read_cell() -> CellSnapshot:
            return snapshot if snapshot is not None else _mirrored_cell(state, None)

        context = ComputeContext(state.robots, read_cell, paths_allowed=False)
        if not job:
            return ("done", function(context, *args))

        def progress(done: int, total: int) -> None:
            state.progress[0], state.progress[1] = done, total

        return ("done", function(context, *args, progress=progress, cancel=state.cancel))
    except HTTPException as error:
        return ("refused", (error.status_code, str(error.detail), error.headers))
    except RobotPathNotAllowedError as error:
        return ("refused", (403, str(error), None))
    except InputError as error:
        return ("refused", (error.http_status, error.detail, None))
    except ComputationCancelled as error:
        return ("cancelled", (error.done, error.total))
    except Exception as error:  # reported as an internal error, logged here
        _log.exception("reviewer computation failed")
        return ("failed", type(error).__name__)


def _outcome(answer: tuple[str, Any]) -> Any:
    """Return the result of an answer of :func:`_call_in_worker`, or raise its error here."""
    kind, value = answer
    if kind == "done":
        return value
    if kind == "refused":
        raise WorkerRefusedError(*value)
    if kind == "cancelled":
        raise ComputationCancelled(*value)
    raise RuntimeError(f"reviewer worker: internal error ({value}); see the server log")


# ---------------------------------------------------------------- the server side


class ReviewerLane:
    """The reviewers' worker process, fed by one thread that yields to the owner.

    Parameters
    ----------
    cell_path : Path or None
        The served cell file (None: the in-memory demo cell); mesh files are
        found relative to it.
    robot_cache_size : int
        Robot files the worker keeps loaded.
    max_waiting : int
        Computations queued or running at most.
    owner_wait_s : float
        Longest wait for the owner before each step.
    nice : int
        Niceness added to the worker process.
    """

    def __init__(
        self,
        cell_path: Path | None = None,
        *,
        robot_cache_size: int = 8,
        max_waiting: int = MAX_WAITING,
        owner_wait_s: float = OWNER_WAIT_S,
        nice: int = REVIEWER_NICE,
    ) -> None:
        self._cell_path = cell_path
        self._cache_size = robot_cache_size
        self._nice = nice
        self._max_waiting = max_waiting
        self._owner_wait_s = owner_wait_s
        self._feeder = ThreadPoolExecutor(max_workers=1, thread_name_prefix="posebridge-review")
        self._process: cf.ProcessPoolExecutor | None = None
        self._sent_etag: str | None = None  # the cell version the worker mirrors
        context = multiprocessing.get_context("spawn")
        self._progress = context.Array("q", 2)
        self._cancel = context.Event()
        self._owner_active = 0
        self._waiting = 0
        self._condition = threading.Condition()
        self._process_lock = threading.Lock()
        self._send_lock = threading.Lock()

    def owner_started(self) -> None:
        """Count an owner request as begun (called by the access middleware)."""
        with self._condition:
            self._owner_active += 1

    def owner_finished(self) -> None:
        """Count an owner request as ended."""
        with self._condition:
            self._owner_active -= 1
            if self._owner_active == 0:
                self._condition.notify_all()

    def yield_to_owner(self) -> None:
        """Wait (at most ``owner_wait_s``) until no owner request is being served."""
        with self._condition:
            self._condition.wait_for(lambda: self._owner_active == 0, timeout=self._owner_wait_s)

    def _pool(self) -> cf.ProcessPoolExecutor:
        with self._process_lock:
            if self._process is None:
                self._process = cf.ProcessPoolExecutor(
                    max_workers=1,
                    mp_context=multiprocessing.get_context("spawn"),
                    initializer=_start_worker,
                    initargs=(
                        self._cell_path,
                        self._cache_size,
                        self._nice,
                        self._progress,
                        self._cancel,
                    ),
                )
                self._sent_etag = None
            return self._process

    def worker_pid(self) -> int:
        """Return the worker process's id (starts it if needed; waits for it)."""
        return int(self._pool().submit(_ready).result())

    async def run(
        self,
        function: Callable[..., T],
        *args: Any,
        read_cell: Callable[[], CellSnapshot] | None = None,
    ) -> T:
        """Run ``function(context, *args)`` in the worker after yielding to the owner.

        Parameters
        ----------
        function : callable
            A module-level function; ``args`` must be picklable.
        *args
            Its arguments after the context.
        read_cell : callable, optional
            The server's ``read_cell()``; the worker computes on that version.

        Raises
        ------
        LaneFullError
            ``max_waiting`` computations are already queued or running.
        WorkerRefusedError
            The computation refused its input.
        """
        with self._condition:
            if self._waiting >= self._max_waiting:
                raise LaneFullError(
                    f"{self._waiting} reviewer computations are waiting on this server (at "
                    f"most {self._max_waiting}); retry in a few seconds"
                )
            self._waiting += 1
        try:
            future = self._feeder.submit(self._step, function, args, read_cell)
            result: T = await asyncio.wrap_future(future)
            return result
        finally:
            with self._condition:
                self._waiting -= 1

    def run_job(
        self,
        function: Callable[..., T],
        *args: Any,
        read_cell: Callable[[], CellSnapshot] | None,
        progress: Callable[[int, int], None],
        cancel: threading.Event,
    ) -> T:
        """Run the job ``function(context, *args, progress=..., cancel=...)`` in the worker.

        Called on the job manager's reviewer thread; waits for the job.

        Progress is relayed from the worker and ``cancel`` passed on to it while
        the job runs.

        Raises
        ------
        ComputationCancelled
        WorkerRefusedError
        """
        self.yield_to_owner()
        with self._send_lock:
            self._progress[0], self._progress[1] = 0, 0
            self._cancel.clear()
            future = self._send(function, args, read_cell, job=True)
        seen = (0, 0)
        while True:
            try:
                answer = future.result(timeout=CANCEL_POLL_S)
                break
            except cf.TimeoutError:
                if cancel.is_set():
                    self._cancel.set()
                now = (int(self._progress[0]), int(self._progress[1]))
                if now != seen and now[1] > 0:
                    seen = now
                    progress(*now)
            except BrokenProcessPool as error:
                self._restart()
                raise RuntimeError("reviewer worker: the process stopped; retry") from error
        result: T = _outcome(answer)
        return result

    def _cell_to_send(self, read_cell: Callable[[], CellSnapshot] | None) -> Cell | None:
        """Return the cell if its version differs from the worker's mirror, else None."""
        if read_cell is None:
            return None
        try:
            snapshot = read_cell()
        except CellFileError:
            return None
        if snapshot.etag == self._sent_etag:
            return None
        self._sent_etag = snapshot.etag
        return snapshot.cell

    def _send(
        self,
        function: Callable[..., Any],
        args: tuple[Any, ...],
        read_cell: Callable[[], CellSnapshot] | None,
        *,
        job: bool,
    ) -> cf.Future[tuple[str, Any]]:
        """Submit one computation, with the cell if the worker's mirror is older.

        Call with ``_send_lock`` held: the worker runs submissions in this order.
        """
        cell = self._cell_to_send(read_cell)
        try:
            return self._pool().submit(_call_in_worker, function, cell, args, job)
        except BrokenProcessPool as error:
            self._restart()
            raise RuntimeError("reviewer worker: the process stopped; retry") from error

    def _restart(self) -> None:
        """Drop a worker process that died; the next computation starts a new one."""
        with self._process_lock:
            if self._process is not None:
                self._process.shutdown(wait=False, cancel_futures=True)
            self._process = None
            self._sent_etag = None

    def _step(
        self,
        function: Callable[..., T],
        args: tuple[Any, ...],
        read_cell: Callable[[], CellSnapshot] | None,
    ) -> T:
        self.yield_to_owner()
        with self._send_lock:
            future = self._send(function, args, read_cell, job=False)
        try:
            answer = future.result()
        except BrokenProcessPool as error:
            self._restart()
            raise RuntimeError("reviewer worker: the process stopped; retry") from error
        result: T = _outcome(answer)
        return result

    def close(self) -> None:
        """Stop the feeder and the worker process; queued computations are dropped."""
        self._feeder.shutdown(wait=False, cancel_futures=True)
        with self._process_lock:
            if self._process is not None:
                self._process.shutdown(wait=False, cancel_futures=True)
                self._process = None
