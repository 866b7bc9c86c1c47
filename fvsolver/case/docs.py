"""The case file's keys in words: a listing with units, defaults and ranges (``fvsolver keys``)
and a commented starter case (``fvsolver new``), both read off the one schema definition."""
from __future__ import annotations

import math
import textwrap

from fvsolver.case.schema import CASE, REQUIRED, Key


def _walk(key: Key, prefix: str = ""):
    """(dotted path, key) of every leaf; map and array items as ``NAME`` and ``[i]``."""
    for child in key.children:
        path = f"{prefix}{child.name}"
        if child.kind == "table":
            yield from _walk(child, path + ".")
        elif child.kind == "map":
            yield from _walk(child.item, path + ".NAME.")
        elif child.kind == "tables":
            yield from _walk(child.item, path + "[i].")
        else:
            yield path, child


def _number(v) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v)


def describe_range(key: Key) -> str:
    if key.choices:
        return " | ".join(key.choices)
    lo, hi = key.minimum, key.maximum
    if lo is None and hi is None:
        return ""
    low = "" if lo is None else (f"> {_number(lo)}" if key.exclusive_minimum else f">= {_number(lo)}")
    high = "" if hi is None else f"<= {_number(hi)}"
    return ", ".join(p for p in (low, high) if p)


def describe_default(key: Key) -> str:
    if key.default is REQUIRED:
        return "required"
    if key.default is None:
        return "-"
    if isinstance(key.default, bool):
        return "true" if key.default else "false"
    if isinstance(key.default, (list, dict)) and not key.default:
        return "none"
    return _number(key.default) if not isinstance(key.default, str) else f'"{key.default}"'


def keys_table(width: int = 100, only: str | None = None) -> str:
    """Every case key, one row each: path, unit, default, range, then its description on the next
    line(s).  ``only`` keeps the keys whose path starts with it."""
    rows = [(p, k) for p, k in _walk(CASE) if only is None or p.startswith(only)]
    if not rows:
        return f"no key starts with {only!r}"
    w_path = max(len(p) for p, _ in rows)
    w_unit = max(4, max(len(k.unit or "-") for _, k in rows))
    w_def = max(7, max(len(describe_default(k)) for _, k in rows))
    lines = [f"{'key':<{w_path}}  {'unit':<{w_unit}}  {'default':<{w_def}}  range",
             f"{'-' * w_path}  {'-' * w_unit}  {'-' * w_def}  -----"]
    indent = " " * 4
    for path, key in rows:
        lines.append(f"{path:<{w_path}}  {key.unit or '-':<{w_unit}}  {describe_default(key):<{w_def}}  "
                     f"{describe_range(key)}".rstrip())
        lines += textwrap.wrap(key.doc, width=max(40, width - len(indent)), initial_indent=indent,
                               subsequent_indent=indent)
    lines.append("")
    lines.append("Values with units may be written as strings, e.g. glass_thickness = \"1.2 mm\", "
                 "air_temperature = \"24 degC\", relative_humidity = \"45 %\" (needs the 'units' extra: pint).")
    return "\n".join(lines)


#: The starter case: a head like the demo's, each value commented from the schema.
STARTER = {
    "geometry": {"shape": "device_head", "bulb_inner_radius": 0.019, "glass_thickness": 0.0012,
                 "cap_thickness": 0.002, "cap_from_deg": 0.0, "cap_to_deg": 110.0, "neck_inner_radius": 0.003,
                 "neck_outer_radius": 0.0045, "neck_length": 0.03},
    "mesh": {"glass_cells": 4, "cap_cells": 8, "polar_cells": 40, "neck_cells": 12},
    "materials.glass": {"density": 2230.0, "conductivity": 1.14, "heat_capacity": 750.0},
    "boundary.neck_end": {"insulated": True},
    "room": {"air_temperature": 297.15, "relative_humidity": 0.45, "air_speed": 0.2, "convection": "mixed"},
    "cap": {"porosity": 0.85},
    "cap_water": {"mode": "reservoir"},
    "fluid": {"name": "dichloromethane", "accommodation_coefficient": 0.1, "initial_film": 0.002},
    "second_bulb": {"mode": "room"},
    "target": {"column_height": 0.05},
    "time": {"end": 1800.0},
    "numerics": {"tolerance": 0.001, "initial_step": 0.05, "max_step": 20.0},
    "output": {"field_times": [30.0, 120.0, 600.0]},
}

#: the starter of a whole running device (`fvsolver new --whole-device`): the running-device demo's values
STARTER_WHOLE = {
    "geometry": {"shape": "whole_device", "bulb_inner_radius": 0.019, "glass_thickness": 0.0012,
                 "cap_thickness": 0.002, "cap_from_deg": 0.0, "cap_to_deg": 110.0, "neck_inner_radius": 0.0025,
                 "neck_outer_radius": 0.004, "tube_length": 0.12, "body_inner_radius": 0.024,
                 "body_glass_thickness": 0.0015, "tube_end_gap": 0.004},
    "mesh": {"glass_cells": 3, "cap_cells": 8, "polar_cells": 30, "neck_cells": 12, "body_polar_cells": 20,
             "dip_tube_cells": 6},
    "materials.glass": {"density": 2230.0, "conductivity": 1.14, "heat_capacity": 750.0},
    "room": {"air_temperature": 297.15, "relative_humidity": 0.45, "air_speed": 0.2, "convection": "mixed"},
    "cap": {"porosity": 0.85},
    "cap_water": {"mode": "charge"},
    "fluid": {"name": "dichloromethane", "accommodation_coefficient": 0.1, "initial_film": 0.002},
    "pool": {"fill_volume": 2.0e-5},
    "cycle": {"tip_column_height": 0.05, "water_glass": True},
    "time": {"end": 1200.0},
    "numerics": {"tolerance": 0.005, "initial_step": 0.05, "max_step": 5.0},
    "output": {"field_count": 4},
}


def _key(path: str) -> Key:
    node = CASE
    for part in path.split("."):
        match = next((c for c in node.children if c.name == part), None)
        if match is None and node.kind == "map":
            match = node.item
        if match is None:
            raise KeyError(path)
        node = match.item if match.kind == "map" and part != path.split(".")[-1] else match
    return node


def _toml(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, float) and math.isfinite(value):
        return repr(value)
    return str(value)


def starter_case(title: str | None = None, whole_device: bool = False) -> str:
    """A commented case file that validates and runs: each key with its meaning, unit, default and
    range from the schema.  The values are those of the demo (``whole_device``: of the
    running-device demo), invented for a demonstration."""
    starter = STARTER_WHOLE if whole_device else STARTER
    if title is None:
        title = "My running device: head, tube and body" if whole_device else "My head: a wet-cap evaporative device"
    lines = [
        "# fvsolver starter case. Edit the values; `fvsolver keys` lists every key with its unit,",
        "# default and range, and `fvsolver check FILE` validates the file.",
        "# The values are invented for a demonstration (a " + ("device like the running-device demo's"
                                                                  if whole_device else "head like the demo's")
        + "), not a measured device.",
        "# CAUTION: working fluids such as dichloromethane are toxic and volatile, and sealed glass",
        "# under pressure can burst. Follow the safety data sheet, local codes and licensed practice.",
        "schema_version = 1",
        f"title = {_toml(title)}",
    ]
    for table_path, values in starter.items():
        head = _key(table_path.split(".")[0])
        lines += ["", f"[{table_path}]" + (f"   # {head.doc}" if head.doc else "")]
        for name, value in values.items():
            key = _key(f"{table_path.split('.')[0]}.{name}") if "." not in table_path else \
                next(c for c in (head.item.children if head.kind == "map" else head.children) if c.name == name)
            notes = [key.doc.rstrip(".")]
            if key.unit:
                notes.append(key.unit)
            default = describe_default(key)
            if default not in ("-", "required"):
                notes.append(f"default {default}")
            rng = describe_range(key)
            if rng:
                notes.append(rng)
            lines.append(f"{name} = {_toml(value)}   # " + "; ".join(notes))
    return "\n".join(lines) + "\n"
