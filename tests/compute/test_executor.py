"""Chunked execution: serial, local process pool and Dask cluster give the same results."""

from __future__ import annotations

import math
import os
import socket
import sys
import threading
import time
from collections.abc import Iterator

import numba
import numpy as np
import pytest

from posebridge.compute.executor import (
    ComputationCancelled,
    DaskExecutor,
    Executor,
    ExecutorError,
    LocalPoolExecutor,
    SerialExecutor,
    make_executor,
    single_thread_worker,
    split_range,
    worker_initializer,
)
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.warm import warm_kinematics
from posebridge.robot.library import load_robot

EXECUTOR_KINDS = ["serial", "pool", "dask"]


@pytest.fixture(scope="module")
def pool() -> Iterator[LocalPoolExecutor]:
    with LocalPoolExecutor(2) as executor:
        yield executor


@pytest.fixture(scope="module")
def dask_executor(dask_scheduler: str) -> Iterator[DaskExecutor]:
    with DaskExecutor(dask_scheduler) as executor:
        yield executor


@pytest.fixture(params=EXECUTOR_KINDS)
def executor(request: pytest.FixtureRequest) -> Iterator[Executor]:
    if request.param == "serial":
        with SerialExecutor() as serial:
            yield serial
    elif request.param == "pool":
        yield request.getfixturevalue("pool")
    else:
        yield request.getfixturevalue("dask_executor")


def _unused_loopback_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


# --- split_range ------------------------------------------------------------------------


@pytest.mark.parametrize(("total", "chunk_size"), [(10, 4), (12, 4), (1, 5), (0, 3), (7, 1)])
def test_split_range_covers_range_in_order(total: int, chunk_size: int) -> None:
    ranges = split_range(total, chunk_size)
    # closed form: ceil(total / chunk_size) consecutive ranges covering 0..total
    assert len(ranges) == math.ceil(total / chunk_size)
    covered = [i for start, stop in ranges for i in range(start, stop)]
    assert covered == list(range(total))
    assert all(0 < stop - start <= chunk_size for start, stop in ranges)


@pytest.mark.parametrize(
    ("total", "chunk_size", "message"),
    [(-1, 3, "^total: expected"), (5, 0, "^chunk_size: expected"), (5, 2.0, "^chunk_size")],
)
def test_split_range_rejects_bad_arguments(total, chunk_size, message) -> None:
    with pytest.raises(ExecutorError, match=message):
        split_range(total, chunk_size)


# --- same results everywhere ------------------------------------------------------------


def test_sum_of_squares_matches_closed_form(executor: Executor) -> None:
    total = 100_001
    values = np.arange(total, dtype=np.int64)
    chunks = [(values[a:b], values[a:b]) for a, b in split_range(total, 7_000)]
    partial = executor.map_chunks(np.dot, chunks)
    # closed form: sum_{k<N} k^2 = (N - 1) N (2N - 1) / 6 (exact in int64)
    assert int(sum(partial)) == (total - 1) * total * (2 * total - 1) // 6
    # chunk order is kept: each partial is that chunk's own sum (closed-form difference)
    starts = [a for a, _ in split_range(total, 7_000)]
    stops = [b for _, b in split_range(total, 7_000)]
    expected = [
        ((b - 1) * b * (2 * b - 1) - (a - 1) * a * (2 * a - 1)) // 6
        for a, b in zip(starts, stops, strict=True)
    ]
    assert [int(p) for p in partial] == expected


def test_fk_sweep_identical_on_every_executor(pool, dask_executor) -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(20240611)
    q = rng.uniform(robot.lower, robot.upper, size=(3_000, robot.dof))
    chunks = [(robot, q[a:b]) for a, b in split_range(len(q), 400)]
    with SerialExecutor() as serial:
        serial_poses = np.concatenate(serial.map_chunks(fk_tool, chunks))
    pool_poses = np.concatenate(pool.map_chunks(fk_tool, chunks))
    dask_poses = np.concatenate(dask_executor.map_chunks(fk_tool, chunks))
    # identical bits whichever executor runs the same chunks (common practice, no source)
    np.testing.assert_array_equal(pool_poses, serial_poses)
    np.testing.assert_array_equal(dask_poses, serial_poses)
    # and the same poses as one in-process call on the whole batch
    np.testing.assert_allclose(serial_poses, fk_tool(robot, q), rtol=0, atol=1e-12)


# --- progress, cancellation, errors -----------------------------------------------------


def test_progress_reaches_completion_in_caller_thread(executor: Executor) -> None:
    calls: list[tuple[int, int, int]] = []

    def progress(done: int, total: int) -> None:
        calls.append((done, total, threading.get_ident()))

    chunks = [(float(k),) for k in range(9)]
    assert executor.map_chunks(math.sqrt, chunks, progress=progress) == [
        math.sqrt(k) for k in range(9)
    ]
    # one call per chunk, counting up to the total, in the calling thread
    assert [(done, total) for done, total, _ in calls] == [(k, 9) for k in range(1, 10)]
    assert {thread for _, _, thread in calls} == {threading.get_ident()}


def test_cancel_stops_early_and_raises(executor: Executor) -> None:
    cancel = threading.Event()
    seen: list[int] = []

    def progress(done: int, total: int) -> None:
        seen.append(done)
        cancel.set()

    chunks = [(0.05,)] * 40
    with pytest.raises(ComputationCancelled) as caught:
        executor.map_chunks(time.sleep, chunks, progress=progress, cancel=cancel)
    assert caught.value.total == 40
    assert 1 <= caught.value.done < 40
    assert seen[-1] == caught.value.done
    assert "cancelled after" in str(caught.value)


def test_cancel_before_start_runs_nothing(executor: Executor) -> None:
    cancel = threading.Event()
    cancel.set()
    with pytest.raises(ComputationCancelled) as caught:
        executor.map_chunks(math.sqrt, [(1.0,), (4.0,)], cancel=cancel)
    assert caught.value.done == 0


def test_serial_cancel_runs_no_further_chunk() -> None:
    cancel = threading.Event()
    ran: list[int] = []

    def work(index: int) -> int:
        ran.append(index)
        if index == 2:
            cancel.set()
        return index

    with SerialExecutor() as serial, pytest.raises(ComputationCancelled):
        serial.map_chunks(work, [(k,) for k in range(10)], cancel=cancel)
    assert ran == [0, 1, 2]


def test_chunk_exception_propagates(executor: Executor) -> None:
    # math.sqrt(-1) raises ValueError("math domain error") (Python documentation of math)
    with pytest.raises(ValueError, match="math domain error"):
        executor.map_chunks(math.sqrt, [(1.0,), (-1.0,), (4.0,)])


def test_pool_rejects_function_it_cannot_send(pool: LocalPoolExecutor) -> None:
    with pytest.raises(ExecutorError, match=r"^function: .* cannot be sent to worker processes"):
        pool.map_chunks(lambda x: x, [(1,)])


def test_chunks_must_be_tuples(executor: Executor) -> None:
    with pytest.raises(ExecutorError, match=r"^chunks\[1\]: expected a tuple of arguments"):
        executor.map_chunks(math.sqrt, [(1.0,), [4.0]])


def test_pool_workers_run_the_initializer(pool: LocalPoolExecutor) -> None:
    # the default initializer (single_thread_worker) limits numba to one thread per worker
    assert pool.map_chunks(numba.get_num_threads, [()] * 4) == [1, 1, 1, 1]
    assert pool.map_chunks(os.getpid, [()] * 2)[0] != os.getpid()


def test_worker_initializer_warms_in_one_thread() -> None:
    # the layer's warm-up runs after the thread limit, in a worker process
    assert worker_initializer(None) is single_thread_worker
    with LocalPoolExecutor(2, initializer=worker_initializer(warm_kinematics)) as pool:
        assert pool.map_chunks(numba.get_num_threads, [()] * 2) == [1, 1]


def test_serial_executor_runs_kernels_on_one_thread() -> None:
    # one worker means one core: numba's per-thread count is 1 inside, restored after
    before = numba.get_num_threads()
    with SerialExecutor() as serial:
        assert serial.map_chunks(numba.get_num_threads, [()]) == [1]
    assert numba.get_num_threads() == before


# --- factory and lifecycle --------------------------------------------------------------


def test_make_executor_choices() -> None:
    with make_executor(workers=1) as serial:
        assert isinstance(serial, SerialExecutor)
    with make_executor(workers=2, initializer=None) as local:
        assert isinstance(local, LocalPoolExecutor)
        assert local.workers == 2
        assert local.map_chunks(math.sqrt, [(16.0,)]) == [4.0]
    default = make_executor(initializer=None)
    # default worker count: os.cpu_count() (serial when that is 1)
    assert default.workers == (os.cpu_count() or 1)
    default.close()


def test_make_executor_connects_to_dask(dask_scheduler: str) -> None:
    with make_executor(dask_scheduler, initializer=None) as cluster:
        assert isinstance(cluster, DaskExecutor)
        assert cluster.workers == 2
        assert cluster.map_chunks(math.sqrt, [(9.0,), (25.0,)]) == [3.0, 5.0]


@pytest.mark.parametrize(
    ("arguments", "message"),
    [
        ({"workers": 0}, "^workers: expected an integer >= 1"),
        ({"workers": 2.5}, "^workers: expected an integer >= 1"),
        ({"scheduler": "tcp://127.0.0.1:1", "workers": 2}, "^workers: the Dask cluster"),
        ({"scheduler": "127.0.0.1:8786"}, "^scheduler: expected an address like"),
    ],
)
def test_make_executor_rejects_bad_arguments(arguments, message) -> None:
    with pytest.raises(ExecutorError, match=message):
        make_executor(**arguments)


def test_closed_executor_refuses_work() -> None:
    executor = make_executor(workers=2, initializer=None)
    with executor:
        pass
    with pytest.raises(ExecutorError, match=r"^executor: already closed"):
        executor.map_chunks(math.sqrt, [(1.0,)])


def test_unreachable_scheduler_gives_clear_error() -> None:
    address = f"tcp://127.0.0.1:{_unused_loopback_port()}"
    started = time.monotonic()
    with pytest.raises(ExecutorError, match=f"^scheduler: could not reach .*{address}.*1 s"):
        make_executor(address, connect_timeout_s=1.0)
    assert time.monotonic() - started < 30.0  # gives up instead of hanging


def test_missing_dask_gives_clear_error(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)  # import now raises ImportError
    with pytest.raises(ExecutorError, match=r"needs the 'distributed' package"):
        make_executor("tcp://127.0.0.1:8786")
