"""Headline results of a run, looked up by name in its summary.

Every study (envelope, converge, fit) asks for its result by name, e.g. ``"time_to_target_s"``,
so a new headline (a running device's period, say) is one entry in :data:`HEADLINES` and one
name passed on the command line, not a change to each study.
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from numbers import Real

from fvsolver.errors import CaseError

#: the headline an envelope draws when none is named
DEFAULT_HEADLINE = "time_to_target_s"


@dataclass(frozen=True)
class Headline:
    """A result of a run that a study can report.

    Attributes
    ----------
    name : its key in summary.json
    label : words for plots and reports
    unit : SI unit ("" for none)
    offset : added for display (-273.15 shows kelvin as degrees Celsius)
    display_unit : the unit after the offset
    """

    name: str
    label: str
    unit: str
    offset: float = 0.0
    display_unit: str | None = None

    @property
    def shown_unit(self) -> str:
        return self.display_unit if self.display_unit is not None else self.unit


HEADLINES: dict[str, Headline] = {h.name: h for h in (
    Headline("time_to_target_s", "time to target", "s"),
    Headline("period_s", "period of the cycle", "s"),
    Headline("first_tip_s", "first tip", "s"),
    Headline("dips_per_hour", "dips per hour", "1/h"),
    Headline("water_per_day_kg", "water per day", "kg"),
    Headline("evaporative_cooling_w", "evaporative cooling", "W"),
    Headline("min_temperature_k", "lowest temperature", "K", -273.15, "°C"),
    Headline("max_temperature_k", "highest temperature", "K", -273.15, "°C"),
    Headline("max_pressure_drop_pa", "largest pressure difference", "Pa"),
    Headline("max_internal_pressure_pa", "largest internal pressure", "Pa"),
    Headline("max_glass_temperature_k", "largest glass temperature", "K", -273.15, "°C"),
)}


def headline(name: str) -> Headline:
    """The headline called ``name``; a name not in :data:`HEADLINES` is still usable (any
    numeric summary key) with its own name as its label."""
    if not isinstance(name, str) or not name:
        raise CaseError(f"--result: got {name!r}, expected a summary key such as {', '.join(HEADLINES)}")
    return HEADLINES.get(name, Headline(name, name.replace("_", " "), ""))


def value(summary: Mapping, name: str) -> float | None:
    """The headline ``name`` of a run as a finite float, or None where the run has none (a
    target not reached, a failed run, a key the summary does not carry)."""
    v = summary.get(name)
    if isinstance(v, bool) or not isinstance(v, Real):
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def outcome(summary: Mapping) -> str:
    """What became of a run, in a few words: the summary's own ``outcome`` when it has one,
    otherwise from its status and target."""
    given = summary.get("outcome")
    if isinstance(given, str) and given:
        return given
    status = summary.get("status")
    if status != "complete":
        return str(status or "failed")
    reached = summary.get("target_reached")
    if reached is None:
        return "complete"
    return "target reached" if reached else "target not reached"
