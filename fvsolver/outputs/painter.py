"""A run's figures drawn in a helper process beside the run.

Importing matplotlib and drawing a run's figures costs about as much as a small run's stepping.
When a core is free (:func:`idle_core`), ``fvsolver run`` starts one helper process before it
reads the case: the helper imports the plotting while the run sets up and steps, then draws the
figures while the run estimates its numerical uncertainty, and the run writes its report once
both are done.  The figures are the
same as when drawn in the run's own process (the same functions of :mod:`fvsolver.plotting`).

:func:`draw_here` draws in this process instead, with the same interface; a figure whose helper
process died is drawn here, so a lost helper costs time, never a figure.
"""
from __future__ import annotations

import os
import time
from concurrent.futures import Future


def idle_core(interval: float = 0.05) -> bool:
    """Whether a core looks free for a helper process beside this one.

    Measured now: the cores' idle time over ``interval`` s (from ``/proc/stat``, while this process
    sleeps) must add up to at least 1.5 cores, that is this process's own and most of another.
    The load average is a minute's lagging mean: right after another run (a sweep, a script's
    loop) it still counts that run as busy, and the figures are then drawn in line for nothing
    (measured: runs of the demo back to back drew them in line every time).

    Only with a free core does a helper pay off; on a machine whose cores are all busy it would
    add its own start-up (an interpreter, numpy, matplotlib: about 1 s of CPU) to the work and hide
    nothing (measured on a 2-core machine at load 4: 1.4-5.6 s slower than drawing in the run's own
    process).  Without ``/proc/stat``, the 1-minute load average must be at least one below the
    number of cores."""
    cores = os.cpu_count() or 1
    if cores < 2:
        return False
    try:
        first = _cpu_times()
        time.sleep(interval)
        second = _cpu_times()
    except (OSError, ValueError, IndexError):
        try:
            return os.getloadavg()[0] <= cores - 1
        except OSError:  # no load average on this platform
            return False
    return idle_cores(first, second, cores) >= 1.5


def idle_cores(first: list[int], second: list[int], cores: int) -> float:
    """How many of ``cores`` were idle between two readings of :func:`_cpu_times` (idle time and
    time waiting for input/output, as a share of all the time that passed)."""
    total = sum(second) - sum(first)
    idle = (second[3] + second[4]) - (first[3] + first[4])
    return cores * idle / total if total > 0 else 0.0


def _cpu_times() -> list[int]:
    """All cores' times (user, nice, system, idle, iowait, ...) in clock ticks, from /proc/stat."""
    with open("/proc/stat", encoding="ascii") as f:
        return [int(v) for v in f.readline().split()[1:]]


def _draw(name: str, args: tuple, kwargs: dict) -> None:
    from fvsolver import plotting

    getattr(plotting, name)(*args, **kwargs)


class Drawing:
    """A figure asked for: :meth:`wait` returns when its PNG is written, or raises its error."""

    def __init__(self, future: Future | None, name: str, args: tuple, kwargs: dict):
        self.future, self.name, self.args, self.kwargs = future, name, args, kwargs

    def wait(self) -> None:
        from concurrent.futures.process import BrokenProcessPool

        if self.future is not None:
            try:
                return self.future.result()
            except BrokenProcessPool:  # the helper died (killed, out of memory): draw it here
                pass
        _draw(self.name, self.args, self.kwargs)


def draw_here(name: str, *args, **kwargs) -> Drawing:
    """``plotting.<name>(*args, **kwargs)``, drawn in this process when waited for."""
    return Drawing(None, name, args, kwargs)


class Painter:
    """One helper process that imports :mod:`fvsolver.plotting` from the start and draws on
    request; it dies with its parent (see :mod:`fvsolver.workers`).  A context manager."""

    def __init__(self):
        from fvsolver import workers

        self.pool = workers.start(1, modules=("fvsolver.plotting",))

    def draw(self, name: str, *args, **kwargs) -> Drawing:
        """Start drawing ``plotting.<name>(*args, **kwargs)`` in the helper."""
        try:
            future = self.pool.submit(_draw, name, args, kwargs)
        except Exception:  # noqa: BLE001 - the helper is gone already: the figure is drawn here
            future = None
        return Drawing(future, name, args, kwargs)

    def close(self) -> None:
        """End the helper now (a caller waits for its figures before closing)."""
        from fvsolver import workers

        workers.stop(self.pool, end_processes=True)

    def __enter__(self) -> Painter:
        return self

    def __exit__(self, *exc) -> None:
        self.close()
