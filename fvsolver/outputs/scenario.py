"""The scenario a run computed, in one line built from its inputs (never from the free-text title,
which goes stale when a key is edited or swept)."""
from __future__ import annotations

import math


def scenario_text(case, target_pa: float | None = None) -> str:
    """E.g. ``"room 24.0 °C, 45 % RH, air 0.20 m/s; dichloromethane; target 50 mm column (647 Pa)"``.

    Parameters
    ----------
    case : Case (or a mapping with the case's tables)
    target_pa : the target pressure difference in Pa, when known (column targets depend on the
        second bulb's temperature)

    Returns
    -------
    str, empty for a case without a room (conduction only) unless it has an end time
    """
    data = case.data if hasattr(case, "data") else case
    parts = []
    room = data.get("room")
    if room is not None:
        parts.append(f"room {room['air_temperature'] - 273.15:.1f} °C, {100 * room['relative_humidity']:.0f} % RH, "
                     f"air {room['air_speed']:.2f} m/s")
    fluid = data.get("fluid")
    if fluid is not None:
        parts.append(str(fluid["name"]))
    target = data.get("target")
    if target is not None:
        if target.get("column_height") is not None:
            text = f"target {1e3 * target['column_height']:.4g} mm column"
            if target_pa is not None and math.isfinite(target_pa):
                text += f" ({target_pa:.0f} Pa)"
        else:
            text = f"target {target['pressure_drop']:.4g} Pa"
        parts.append(text)
    if not parts and "time" in data:
        parts.append(f"conduction to t = {data['time']['end']:g} s")
    return "; ".join(parts)
