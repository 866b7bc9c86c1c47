"""Runs in worker processes that die with their parent and whose deaths are a result, not a crash.

- A worker watches its parent: if the parent is killed (even with SIGKILL, which it cannot
  catch) the worker ends within a second instead of idling on as an orphan.
- A worker that dies (killed, or ended by the system when out of memory) breaks the whole pool;
  the runs it took with it are run again one at a time, each in a fresh worker, so the run that
  kills its worker is named and becomes a ``failed`` row while the others finish.
- If the parent is stopped (Ctrl-C, SIGTERM), the workers are interrupted too, so each run saves
  its checkpoint and says ``interrupted``.
"""
from __future__ import annotations

import multiprocessing
import os
import signal
import threading
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from typing import Callable

PARENT_POLL_S = 0.5  # how often a worker looks for its parent


def _watch_parent(parent: int) -> None:
    """Worker initializer: end this process as soon as ``parent`` is gone."""

    def watch() -> None:
        while True:
            time.sleep(PARENT_POLL_S)
            if os.getppid() != parent:  # re-parented: the sweep that started us has died
                os._exit(1)

    threading.Thread(target=watch, name="parent-watch", daemon=True).start()


def _pool(jobs: int) -> ProcessPoolExecutor:
    return ProcessPoolExecutor(max_workers=jobs, mp_context=multiprocessing.get_context("spawn"),
                               initializer=_watch_parent, initargs=(os.getpid(),))


def _interrupt(pool: ProcessPoolExecutor) -> None:
    """Interrupt the workers' runs (each saves its checkpoint), then let the pool go."""
    for process in list((getattr(pool, "_processes", None) or {}).values()):
        try:
            os.kill(process.pid, signal.SIGINT)
        except (OSError, AttributeError):
            pass
    pool.shutdown(wait=False, cancel_futures=True)


def run_all(function: Callable, tasks: dict[int, tuple], jobs: int, record: Callable[[int, object], None],
            died: Callable[[int, str], object]) -> None:
    """``record(i, function(*tasks[i]))`` for every task, ``jobs`` worker processes at a time.

    Parameters
    ----------
    function : a module-level function (it is pickled by name into the workers)
    tasks : index -> arguments
    record : called in this process with each index and its result, as results arrive
    died : (index, what happened) -> the result to record for a run whose worker died or that
        raised an error of its own
    """
    broken = _run_pool(function, tasks, jobs, record, died)
    for index in sorted(broken):  # one at a time: a death now belongs to this run alone
        if _run_pool(function, {index: tasks[index]}, 1, record, died):
            record(index, died(index, "its worker process died (killed, or ended by the system when out of "
                                      "memory)"))


def _run_pool(function, tasks, jobs, record, died) -> list[int]:
    """Run ``tasks`` in one pool; the indices whose worker died (the pool broke under them)."""
    broken: list[int] = []
    pool = _pool(min(jobs, len(tasks)))
    try:
        pending = {pool.submit(function, *args): index for index, args in tasks.items()}
        for future in as_completed(pending):
            index = pending[future]
            try:
                result = future.result()
            except BrokenProcessPool:
                broken.append(index)
                continue
            except Exception as exc:  # noqa: BLE001 - an error inside the run: its row says so
                result = died(index, f"{type(exc).__name__}: {str(exc)[:300]}")
            record(index, result)
    except BaseException:
        _interrupt(pool)
        raise
    pool.shutdown(wait=True)
    return broken
