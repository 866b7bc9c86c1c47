"""A small whole device, built in code, for the cycle tests (invented data, our own scenario)."""
from __future__ import annotations

import copy

from fvsolver.case.loader import Case
from tests.device.helpers import case_from_data

WHOLE = {
    "schema_version": 1,
    "title": "test device",
    "geometry": {"shape": "whole_device", "bulb_inner_radius": 0.019, "glass_thickness": 0.0012,
                 "cap_thickness": 0.002, "cap_from_deg": 0.0, "cap_to_deg": 110.0, "neck_inner_radius": 0.0025,
                 "neck_outer_radius": 0.004, "tube_length": 0.12, "body_inner_radius": 0.024,
                 "body_glass_thickness": 0.0015, "tube_end_gap": 0.004},
    "mesh": {"glass_cells": 2, "cap_cells": 2, "polar_cells": 16, "neck_cells": 6, "body_polar_cells": 12,
             "dip_tube_cells": 4},
    "materials": {"glass": {"density": 2230.0, "conductivity": 1.14, "heat_capacity": 750.0}},
    "room": {"air_temperature": 297.15, "relative_humidity": 0.45, "air_speed": 0.2},
    "cap_water": {"mode": "charge"},
    "fluid": {"name": "dichloromethane", "initial_film": 0.002},
    "pool": {"fill_volume": 2.0e-5},
    "cycle": {"tip_column_height": 0.05, "water_glass": True, "max_cycles": 6},
    "time": {"end": 120.0},
    "numerics": {"tolerance": 0.02, "initial_step": 0.05, "max_step": 5.0},
    "output": {"field_count": 0},
}


def whole_case(**changes) -> Case:
    """WHOLE with nested changes, e.g. whole_case(room={"relative_humidity": 0.8}); a value None
    removes the key."""
    data = copy.deepcopy(WHOLE)
    for key, value in changes.items():
        if isinstance(value, dict) and isinstance(data.get(key), dict):
            for k, v in value.items():
                if v is None:
                    data[key].pop(k, None)
                else:
                    data[key][k] = v
        else:
            data[key] = value
    return case_from_data(data)
