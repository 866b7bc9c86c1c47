"""Running many runs on a Dask cluster (``--scheduler ADDRESS`` or ``--workers N``).

dask and distributed are an optional extra (``pip install "fvsolver[distributed]"``); nothing
here imports them until an engine is opened, and a missing extra is a clear error.

The engine only moves calls and results: each call is a plain function of plain arguments
(the runs are rebuilt from the case text on the worker, as in a local worker process), so a
run gives the same bits wherever it runs. A worker that dies has its calls rescheduled by the
scheduler on another worker (up to dask's ``distributed.scheduler.allowed-failures`` times);
a call that still cannot finish, or raises, comes back through ``on_failure`` so a study
records it as a failed run instead of stopping.
"""
from __future__ import annotations

import time

import uuid
from collections.abc import Callable, Sequence
from typing import Any

from fvsolver.errors import CaseError

EXTRA = "distributed"
INSTALL_HINT = f'pip install "fvsolver[{EXTRA}]" (or: pip install "dask[distributed]")'


def require_distributed():
    """The ``distributed`` module, or a CaseError that names the extra to install."""
    try:
        import dask  # noqa: F401
        import distributed
    except ImportError as exc:
        raise CaseError(f"--scheduler/--workers: Dask is not installed ({exc.name} is missing); runs on a "
                        f"Dask cluster need the optional extra '{EXTRA}': {INSTALL_HINT}, or leave out "
                        "--scheduler/--workers to run on this machine (--jobs N)") from None
    return distributed


# closing a local cluster: how long to let killed workers' restarts finish, and how often to try
CLOSE_SETTLE_S = 10.0
CLOSE_ATTEMPTS = 3


class DaskEngine:
    """Runs calls on a Dask cluster: an existing one (``scheduler``, its address) or a local
    one of ``workers`` worker processes with one thread each.

    Parameters
    ----------
    scheduler : address of a running scheduler, e.g. ``tcp://10.0.0.5:8786``
    workers : worker processes of a local cluster (when no scheduler is given)
    processes : False runs a local cluster's workers as threads of this process (tests)
    allowed_failures : for a local cluster, how many workers a call may outlive before it is
        given up (dask's default is 3)

    Use it as a context manager: the local cluster and the connection close on exit.
    """

    def __init__(self, scheduler: str | None = None, workers: int | None = None, processes: bool = True,
                 allowed_failures: int | None = None):
        if (scheduler is None) == (workers is None):
            raise CaseError("--scheduler/--workers: give one of them: --scheduler ADDRESS for a running Dask "
                            "scheduler, or --workers N for a cluster on this machine")
        if workers is not None and not (isinstance(workers, int) and 1 <= workers <= 256):
            raise CaseError(f"--workers: got {workers!r}, expected a whole number of worker processes from 1 to 256")
        distributed = require_distributed()
        self._distributed = distributed
        self.cluster = None
        if scheduler is not None:
            try:
                self.client = distributed.Client(scheduler, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise CaseError(f"--scheduler {scheduler}: could not connect ({exc}); check the address "
                                "(tcp://HOST:PORT, as `dask scheduler` prints it) and that the scheduler "
                                "is running") from None
        else:
            import dask

            config = {} if allowed_failures is None else {"distributed.scheduler.allowed-failures": allowed_failures}
            with dask.config.set(config):
                # every listener on the loopback only: a local cluster serves this machine alone
                where = {"host": "127.0.0.1"} if processes else {"worker_dashboard_address": "127.0.0.1:0"}
                self.cluster = distributed.LocalCluster(n_workers=workers, threads_per_worker=1,
                                                        processes=processes, dashboard_address="127.0.0.1:0",
                                                        **where)
            self.client = distributed.Client(self.cluster)
        self._keys: set[str] = set()

    def __enter__(self) -> DaskEngine:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        if self.cluster is None:
            self.client.close()
            return
        # a worker killed by its call is being restarted by its nanny: closing the cluster while
        # the new process has not started yet trips distributed's own assertion ("can only join a
        # started process"), so let the restarts finish first, and close again if it still races
        try:
            self.client.wait_for_workers(len(self.cluster.workers), timeout=CLOSE_SETTLE_S)
        except Exception:  # noqa: BLE001 - a worker that cannot come back: close what there is
            pass
        self.client.close()
        for attempt in range(CLOSE_ATTEMPTS):
            try:
                self.cluster.close()
                return
            except AssertionError:
                if attempt == CLOSE_ATTEMPTS - 1:
                    raise
                time.sleep(0.5)

    @property
    def description(self) -> str:
        n = len(self.client.scheduler_info().get("workers", {}))
        where = "a local Dask cluster" if self.cluster is not None else f"the Dask scheduler {self.client.scheduler.address}"
        return f"{where} ({n} workers)"

    def running(self) -> int:
        """Calls of this engine running now: those the workers hold, at most one per worker thread
        (a worker may hold the next call in its queue as well)."""
        try:
            held = self.client.processing()
            threads = self.client.nthreads()
        except Exception:  # noqa: BLE001 - progress only: a lost connection shows as 0
            return 0
        return sum(min(sum(1 for k in keys if k in self._keys), threads.get(w, 1)) for w, keys in held.items())

    def map(self, function: Callable, calls: Sequence[tuple], on_result: Callable[[int, Any], None],
            on_failure: Callable[[int, BaseException], Any]) -> None:
        """Run ``function(*calls[i])`` for every i on the cluster; call ``on_result(i, result)`` as
        each finishes (in the order they finish). A call that raises, or whose workers kept dying,
        gives ``on_result(i, on_failure(i, error))``. Anything raised by ``on_result`` (Ctrl-C, a
        stop) cancels the calls not yet finished and goes on up."""
        distributed = self._distributed
        tag = uuid.uuid4().hex[:8]
        futures = {}
        for i, args in enumerate(calls):
            key = f"fvsolver-run-{tag}-{i:05d}"
            self._keys.add(key)
            futures[self.client.submit(function, *args, key=key, pure=False)] = i
        try:
            for future in distributed.as_completed(list(futures)):
                i = futures[future]
                try:
                    result = future.result()
                except Exception as exc:  # noqa: BLE001 - a lost worker or a crash: a failed run
                    result = on_failure(i, exc)
                self._keys.discard(future.key)
                on_result(i, result)
        except BaseException:
            self.client.cancel(list(futures))
            raise
        finally:
            self._keys.difference_update(f.key for f in futures)


class LocalEngine:
    """The same ``map`` on this machine: one call after the other (``jobs = 1``) or ``jobs``
    worker processes with one BLAS thread each (as ``fvsolver sweep --jobs``)."""

    def __init__(self, jobs: int = 1):
        if not (isinstance(jobs, int) and 1 <= jobs <= 256):
            raise CaseError(f"--jobs: got {jobs!r}, expected a whole number of runs at a time from 1 to 256")
        self.jobs = jobs
        self._running = 0

    def __enter__(self) -> LocalEngine:
        return self

    def __exit__(self, *exc) -> None:
        pass

    @property
    def description(self) -> str:
        return f"this machine ({self.jobs} worker processes)" if self.jobs > 1 else "this machine, one run after the other"

    def running(self) -> int:
        return self._running

    def map(self, function: Callable, calls: Sequence[tuple], on_result: Callable[[int, Any], None],
            on_failure: Callable[[int, BaseException], Any]) -> None:
        """As :meth:`DaskEngine.map`; a call that raises gives ``on_failure``'s result."""
        if self.jobs == 1 or len(calls) == 1:
            for i, args in enumerate(calls):
                self._running = 1
                try:
                    result = function(*args)
                except Exception as exc:  # noqa: BLE001 - a crash of one run: a failed run
                    result = on_failure(i, exc)
                self._running = 0
                on_result(i, result)
            return
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor, as_completed

        from fvsolver.sweeps import _one_blas_thread_per_worker

        with _one_blas_thread_per_worker(), ProcessPoolExecutor(
                max_workers=min(self.jobs, len(calls)), mp_context=multiprocessing.get_context("spawn")) as pool:
            pending = {pool.submit(function, *args): i for i, args in enumerate(calls)}
            left = len(pending)
            try:
                for future in as_completed(pending):
                    left -= 1
                    self._running = min(self.jobs, left)
                    try:
                        result = future.result()
                    except Exception as exc:  # noqa: BLE001 - a crash or a lost worker: a failed run
                        result = on_failure(pending[future], exc)
                    on_result(pending[future], result)
            except BaseException:
                pool.shutdown(wait=False, cancel_futures=True)
                raise
