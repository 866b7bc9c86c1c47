"""A small device case, built in code, for the behaviour tests (invented data, our own scenario)."""
from __future__ import annotations

import copy

from fvsolver.case.loader import Case, _freeze, validate_data
from fvsolver.errors import CaseError

BASE = {
    "schema_version": 1,
    "title": "test head",
    "geometry": {"shape": "device_head", "bulb_inner_radius": 0.019, "glass_thickness": 0.0012,
                 "cap_thickness": 0.002, "cap_from_deg": 0.0, "cap_to_deg": 110.0, "neck_inner_radius": 0.003,
                 "neck_outer_radius": 0.0045, "neck_length": 0.03},
    "mesh": {"glass_cells": 2, "cap_cells": 2, "polar_cells": 20, "neck_cells": 4},
    "materials": {"glass": {"density": 2230.0, "conductivity": 1.14, "heat_capacity": 750.0}},
    "boundary": {"neck_end": {"insulated": True}},
    "room": {"air_temperature": 297.15, "relative_humidity": 0.45, "air_speed": 0.2},
    "cap_water": {"mode": "reservoir"},
    "fluid": {"name": "dichloromethane", "initial_film": 0.002},
    "second_bulb": {"mode": "room"},
    "target": {"column_height": 0.05},
    "time": {"end": 400.0},
    "numerics": {"tolerance": 0.02, "initial_step": 0.05, "max_step": 20.0},
    "output": {"field_count": 0},
}


def device_case(replace: tuple = (), **changes) -> Case:
    """BASE with nested changes, e.g. device_case(room={"relative_humidity": 0.8}); a geometry
    with a ``shape`` replaces the whole geometry table."""
    data = copy.deepcopy(BASE)
    for key, value in changes.items():
        if isinstance(value, dict) and isinstance(data.get(key), dict) and "shape" not in value \
                and key not in replace:
            data[key].update(value)
        else:
            data[key] = value
    return case_from_data(data)


def case_from_data(data: dict) -> Case:
    """A validated, frozen case from a plain dict (CaseError listing every problem)."""
    resolved, problems = validate_data(data)
    if problems:
        raise CaseError("\n".join(problems))
    return Case(None, _freeze(resolved), "", "test")
