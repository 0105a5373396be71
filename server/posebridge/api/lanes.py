"""The owner's requests first: reviewers' computations run in a lane of their own.

A shared server has one owner, working interactively, and any number of
reviewers whose requests cost CPU. Reviewers' rate caps count requests;
this module makes their cost wait for the owner:

* every computation a reviewer asks for (kinematics, checks, pose and log
  diagnosis) runs on **one** reviewer worker thread, one at a time, in
  arrival order, never on the thread pool that serves the owner; at most
  :data:`MAX_WAITING` wait (503 with ``Retry-After`` beyond);
* before each reviewer computation, and between the chunks of reviewers'
  jobs (:meth:`ReviewerLane.yield_to_owner`), the lane waits while an owner
  request is being served (at most :data:`OWNER_WAIT_S` each time, so
  reviewers are slowed, never starved).

The owner's own requests never wait here. Python runs one thread at a time
(the GIL), so a computation already running still shares the processor;
that is why reviewers' work is kept to one task at a time, in small pieces,
and budgeted (:mod:`posebridge.review.access`, ``CostBudget``).
"""

from __future__ import annotations

import asyncio
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from typing import Final, TypeVar

__all__ = ["MAX_WAITING", "OWNER_WAIT_S", "LaneFullError", "ReviewerLane"]

MAX_WAITING: Final = 32
"""Reviewer computations queued or running at once; more are refused (503)."""
OWNER_WAIT_S: Final = 0.25
"""Longest wait of one reviewer step for the owner's requests to finish."""

T = TypeVar("T")


class LaneFullError(RuntimeError):
    """Too many reviewer computations are waiting; the message says so."""


class ReviewerLane:
    """One worker thread for reviewers' computations, yielding to the owner (module docstring).

    Parameters
    ----------
    max_waiting : int
        Computations queued or running at most.
    owner_wait_s : float
        Longest wait for the owner before each step.
    """

    def __init__(self, *, max_waiting: int = MAX_WAITING, owner_wait_s: float = OWNER_WAIT_S):
        self._max_waiting = max_waiting
        self._owner_wait_s = owner_wait_s
        self._executor = ThreadPoolExecutor(max_workers=1, thread_name_prefix="posebridge-review")
        self._owner_active = 0
        self._waiting = 0
        self._condition = threading.Condition()

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

    async def run(self, work: Callable[[], T]) -> T:
        """Run ``work()`` on the reviewer thread after yielding to the owner; its result.

        Raises
        ------
        LaneFullError
            ``max_waiting`` computations are already queued or running.
        """
        with self._condition:
            if self._waiting >= self._max_waiting:
                raise LaneFullError(
                    f"{self._waiting} reviewer computations are waiting on this server (at "
                    f"most {self._max_waiting}); retry in a few seconds"
                )
            self._waiting += 1
        try:
            future = self._executor.submit(self._step, work)
            return await asyncio.wrap_future(future)
        finally:
            with self._condition:
                self._waiting -= 1

    def _step(self, work: Callable[[], T]) -> T:
        self.yield_to_owner()
        return work()

    def close(self) -> None:
        """Stop the worker; queued computations are dropped."""
        self._executor.shutdown(wait=False, cancel_futures=True)
