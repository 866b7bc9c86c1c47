"""Runs in worker processes that die with their parent and whose deaths are a result, not a crash.

- A worker watches its parent: if the parent is killed (even with SIGKILL, which it cannot
  catch) the worker ends within a second instead of idling on as an orphan.
- A worker that dies (killed, or ended by the system when out of memory) breaks the whole pool;
  the runs it took with it are run again one at a time, each in a fresh worker, so the run that
  kills its worker is named and becomes a ``failed`` row while the others finish.
- If the parent is stopped (Ctrl-C, SIGTERM), the workers are interrupted too, so each run saves
  its checkpoint and says ``interrupted``.
- A pool can be started ahead of its runs (:func:`start`): its workers import the solver while
  the parent still validates the grid, so the parent itself never needs to import it, and each
  worker imports it once for all the runs it takes from the queue.
"""
from __future__ import annotations

import importlib
import multiprocessing
import os
import signal
import threading
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from typing import Callable

PARENT_POLL_S = 0.5  # how often a worker looks for its parent


def _alive(pid: int) -> bool:
    """Whether process ``pid`` still runs (a zombie, killed and not yet reaped, does not)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # it exists, under another user
        return True
    try:
        with open(f"/proc/{pid}/stat") as f:
            return f.read().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):  # no /proc here: kill(pid, 0) said it exists
        return True


def _watch_parent(parent: int, modules: tuple[str, ...] = ()) -> None:
    """Worker initializer: end this process as soon as the sweep ``parent`` is gone; then import
    ``modules`` (once per worker, before its first run; a no-op when its fork server has them).

    A spawned worker's own parent is the sweep; a worker forked by a fork server keeps the server
    alive (it holds the server's "alive" pipe), so it watches the sweep's process itself."""
    started_under = os.getppid()

    def watch() -> None:
        while True:
            if os.getppid() != started_under or not _alive(parent):  # the sweep that started us has died
                os._exit(1)
            time.sleep(PARENT_POLL_S)

    threading.Thread(target=watch, name="parent-watch", daemon=True).start()
    for name in modules:
        importlib.import_module(name)


def _ready() -> None:
    """A call that does nothing: submitted once per worker to start the workers ahead of the runs."""


def _context(shared: tuple[str, ...]):
    """Spawned workers, or with ``shared`` modules workers forked from a fork server that imported
    them once (where the platform has one): a second worker then costs no second import."""
    if shared and "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(list(shared))  # heeded when this process starts its server
        return context
    return multiprocessing.get_context("spawn")


def _pool(jobs: int, modules: tuple[str, ...] = (), shared: bool = False) -> ProcessPoolExecutor:
    return ProcessPoolExecutor(max_workers=jobs, mp_context=_context(tuple(modules) if shared else ()),
                               initializer=_watch_parent, initargs=(os.getpid(), tuple(modules)))


def start(jobs: int, modules: tuple[str, ...] = (), shared: bool = False) -> ProcessPoolExecutor:
    """A pool of ``jobs`` workers started now (each submission of a no-op starts one more worker
    while none is idle), importing ``modules`` while the caller goes on; pass it to
    :func:`run_all`, which shuts it down.  A caller that stops before :func:`run_all` calls
    :func:`stop`.  ``shared``: the workers are forked from a server that imports ``modules``
    once for all of them (and for later pools of this process)."""
    pool = _pool(jobs, modules, shared)
    for _ in range(jobs):
        pool.submit(_ready)
    return pool


def stop(pool: ProcessPoolExecutor, end_processes: bool = False) -> None:
    """Let a started pool go without running anything more in it; ``end_processes`` also ends
    its workers at once (SIGTERM) instead of letting them finish their start-up first."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    if end_processes:
        for process in processes:
            try:
                process.terminate()
            except (OSError, AttributeError):
                pass


def _interrupt(pool: ProcessPoolExecutor) -> None:
    """Interrupt the workers' runs (each saves its checkpoint), then let the pool go."""
    for process in list((getattr(pool, "_processes", None) or {}).values()):
        try:
            os.kill(process.pid, signal.SIGINT)
        except (OSError, AttributeError):
            pass
    pool.shutdown(wait=False, cancel_futures=True)


def run_all(function: Callable, tasks: dict[int, tuple], jobs: int, record: Callable[[int, object], None],
            died: Callable[[int, str], object], pool: ProcessPoolExecutor | None = None) -> None:
    """``record(i, function(*tasks[i]))`` for every task, ``jobs`` worker processes at a time.

    Parameters
    ----------
    function : a module-level function (it is pickled by name into the workers)
    tasks : index -> arguments, handed out in this order (put the longest first: the workers
        take the next task as they come free, so the last ones to start should be short)
    record : called in this process with each index and its result, as results arrive
    died : (index, what happened) -> the result to record for a run whose worker died or that
        raised an error of its own
    pool : a pool from :func:`start` to run the tasks in (default: a new one)
    """
    broken = _run_pool(function, tasks, jobs, record, died, pool)
    for index in sorted(broken):  # one at a time: a death now belongs to this run alone
        if _run_pool(function, {index: tasks[index]}, 1, record, died):
            record(index, died(index, "its worker process died (killed, or ended by the system when out of "
                                      "memory)"))


def _run_pool(function, tasks, jobs, record, died, pool=None) -> list[int]:
    """Run ``tasks`` in one pool; the indices whose worker died (the pool broke under them)."""
    broken: list[int] = []
    pool = pool or _pool(min(jobs, len(tasks)))
    try:
        pending = {}
        for index, args in tasks.items():
            try:
                pending[pool.submit(function, *args)] = index
            except BrokenProcessPool:  # a worker died before this task went in
                broken.append(index)
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
