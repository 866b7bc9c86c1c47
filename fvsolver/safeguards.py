"""What keeps a run honest: stop signals, non-physical states, properties used out of range,
and plain-text titles.

- :func:`stop_signals_as_interrupt`: SIGTERM (``timeout``, batch schedulers, container stops)
  ends a run as Ctrl-C does: a checkpoint, status ``interrupted``, exit 128 + 15.
- :class:`StateWatch`: after every accepted step, a state below 0 K or a vapour-space wall above
  the working fluid's critical temperature stops the run (exit 3, the last good fields kept);
  temperatures where a property was held at the end of its data become warnings in summary.json.
- :func:`plain_title`: a case title as plain text of bounded length for plots and reports.
"""
from __future__ import annotations

import contextlib
import math
import signal
import threading
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # numpy is imported where a run needs it: `--help` and `check` start without it
    import numpy as np

TITLE_LIMIT = 100  # characters of a title shown on a plot or in a report


def plain_title(title: str, limit: int = TITLE_LIMIT) -> str:
    """``title`` as plain text: no math markup (``$...$`` is shown as typed), control characters
    as spaces, at most ``limit`` characters."""
    text = "".join(" " if ord(ch) < 0x20 or ord(ch) == 0x7F else ch for ch in str(title))
    if len(text) > limit:
        text = text[: limit - 1].rstrip() + "\u2026"
    return text.replace("$", r"\$")  # matplotlib reads $...$ as mathtext


class Terminated(KeyboardInterrupt):
    """A stop signal received during a run; handled wherever Ctrl-C is."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum
        self.reason = f"stopped by {signal.Signals(signum).name}"


class StopSignal:
    """The stop signal received inside :func:`stop_signals_as_interrupt` (``signum``: None if none)."""

    signum: int | None = None

    @property
    def exit_code(self) -> int | None:
        """128 + the signal's number, as shells report a process ended by it."""
        return None if self.signum is None else 128 + self.signum


@contextlib.contextmanager
def stop_signals_as_interrupt():
    """Inside the block, SIGTERM raises :class:`Terminated` (a ``KeyboardInterrupt``); the block
    gets a :class:`StopSignal` that says which signal came.

    Only the main thread can take signals; elsewhere the block changes nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield StopSignal()
        return

    received = StopSignal()

    def handler(signum, frame):
        received.signum = signum
        raise Terminated(signum)

    old = signal.signal(signal.SIGTERM, handler)
    try:
        yield received
    finally:
        signal.signal(signal.SIGTERM, old)


class StateWatch:
    """Watches the temperatures of a run after every accepted step.

    Parameters
    ----------
    setup : fvsolver.case.build.Setup

    Attributes
    ----------
    extremes : dict of str to [low, high], K, the lowest and highest temperature met in each
        watched region (materials with tabulated properties, the wet cap, the vapour-space walls)
    """

    def __init__(self, setup):
        import numpy as np

        mesh = setup.mesh
        self.n_cells = mesh.n_cells
        self.material_of = np.asarray(mesh.material_names)[mesh.cell_material]
        # region name -> (cells, low, high, what is held there)
        self.regions: dict[str, tuple[np.ndarray, float, float, str]] = {}
        for i, material in enumerate(getattr(setup.conduction, "materials", ())):
            for prop in ("conductivity", "heat_capacity"):
                f = getattr(material, prop, None)
                if getattr(f, "kind", None) == "table":
                    cells = np.flatnonzero(mesh.cell_material == i)
                    self.regions[f"{material.name} {prop.replace('_', ' ')}"] = (
                        cells, float(f.temperatures[0]), float(f.temperatures[-1]),
                        f"material {material.name}'s {prop.replace('_', ' ')} table (held constant beyond it)")
        self.critical = None
        if setup.device is not None:
            from fvsolver.device.surfaces import WATER_T_MAX, WATER_T_MIN

            problem = setup.problem
            fluid = setup.device.vapour.fluid
            eq = fluid.vapour_pressure
            wall = np.unique(mesh.boundary_cell[problem.inner])
            self.regions["cap"] = (np.asarray(problem.cap_cells), WATER_T_MIN, WATER_T_MAX,
                                   "the water properties of the wet cap (held at the range's ends)")
            self.regions["inner wall"] = (wall, max(eq.t_min, fluid.liquid_range[0]),
                                          min(eq.t_max, fluid.liquid_range[1]),
                                          f"{fluid.name}'s data at the vapour-space walls (held at the range's ends)")
            self.critical = (wall, float(fluid.critical_temperature), fluid.name)
        self.extremes: dict[str, list[float]] = {name: [math.inf, -math.inf] for name in self.regions}

    def check(self, y: np.ndarray, t: float) -> str | None:
        """Record the extremes of the state ``y`` at time ``t``; the reason it is not physical, or None."""
        import numpy as np

        T = y[: self.n_cells]
        if not np.all(np.isfinite(y)):
            return f"at t = {t:.6g} s the state holds values that are not finite"
        low = float(T.min())
        if low <= 0.0:
            where = self.material_of[int(T.argmin())]
            return (f"at t = {t:.6g} s the {where} reached {low:.4g} K, below absolute zero: more heat is drawn "
                    "out than the body holds; check the heat sinks (heat_flux, fixed temperatures) and their units")
        for name, (cells, _, _, _) in self.regions.items():
            if cells.size:
                e = self.extremes[name]
                e[0], e[1] = min(e[0], float(T[cells].min())), max(e[1], float(T[cells].max()))
        if self.critical is not None and self.critical[0].size:
            cells, tc, fluid = self.critical
            high = float(T[cells].max())
            if high >= tc:
                return (f"at t = {t:.6g} s a vapour-space wall reached {high:.2f} K, above {fluid}'s critical "
                        f"temperature {tc:.2f} K: the head would hold a supercritical fluid, which the model "
                        "does not cover; lower the heating")
        return None

    def warnings(self) -> list[str]:
        """One sentence for each region whose temperatures left the range of its property data."""
        out = []
        for name, (_, low, high, what) in self.regions.items():
            lo, hi = self.extremes[name]
            if lo < low or hi > high:
                out.append(f"property used out of range: the {name} reached {lo:.2f}-{hi:.2f} K, outside "
                           f"{low:g}-{high:g} K of {what}; results there lie outside the data")
        return out

    def state(self) -> dict:
        return {name: list(e) for name, e in self.extremes.items()}

    def restore(self, state) -> None:
        """Take the extremes of an earlier part of the run (a checkpoint's; malformed entries are skipped)."""
        if not isinstance(state, dict):
            return
        for name, e in state.items():
            if name in self.extremes and isinstance(e, list) and len(e) == 2 and all(
                    isinstance(x, (int, float)) and not isinstance(x, bool) for x in e):
                self.extremes[name] = [float(e[0]), float(e[1])]
