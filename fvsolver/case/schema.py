"""The case-file schema, defined once: validation, defaults, documentation and JSON Schema.

Every key has a kind, SI units, a range and a one-line description.  Angles are in
degrees (their keys end in ``_deg``), temperatures in kelvin, everything else SI.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

SCHEMA_VERSION = 1


class _Required:
    def __repr__(self) -> str:
        return "REQUIRED"


REQUIRED: Any = _Required()


@dataclass(frozen=True)
class Key:
    """One key of the case file.

    kind: "number", "integer", "string", "boolean", "numbers" (array of numbers),
    "strings", "table" (fixed children), "map" (free names, each an ``item`` table),
    "tables" (array of ``item`` tables), "property" (a number or a T-table/polynomial).
    """

    name: str
    kind: str
    doc: str
    unit: str = ""
    default: Any = None
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple = ()
    children: tuple = ()
    item: "Key | None" = None

    @property
    def required(self) -> bool:
        return self.default is REQUIRED


def num(name, doc, unit="", default=None, minimum=None, maximum=None, positive=False) -> Key:
    return Key(name, "number", doc, unit, default, 0.0 if positive else minimum, maximum, positive)


def table(name, doc, *children, default=None) -> Key:
    return Key(name, "table", doc, children=tuple(children), default=default)


PROPERTY_DOC = "a number, or {temperatures = [K...], values = [...]}, or {polynomial = [a0, a1, ...]} in T/K"

MATERIAL = table(
    "material", "Properties of one material tag of the mesh.",
    Key("density", "number", "Density.", "kg/m3", REQUIRED, 0.0, None, True),
    Key("conductivity", "property", "Thermal conductivity, " + PROPERTY_DOC + ".", "W/(m K)", REQUIRED),
    Key("heat_capacity", "property", "Specific heat capacity, " + PROPERTY_DOC + ".", "J/(kg K)", REQUIRED),
)

PATCH = table(
    "patch", "Boundary condition of one mesh patch: one fixed_temperature, or symmetry, or any "
    "sum of heat_flux, convection and radiation (none: insulated).",
    num("fixed_temperature", "Surface temperature held fixed.", "K", positive=True),
    Key("symmetry", "boolean", "Mirror plane: no heat crosses."),
    Key("insulated", "boolean", "No heat crosses (the default of a patch with no terms)."),
    num("heat_flux", "Heat flux into the body (a heater patch; negative draws heat out).", "W/m2"),
    table("convection", "Convection to a fluid.",
          num("h", "Heat-transfer coefficient.", "W/(m2 K)", REQUIRED, minimum=0.0),
          num("ambient_temperature", "Fluid temperature.", "K", REQUIRED, positive=True)),
    table("radiation", "Grey radiation to large surroundings.",
          num("emissivity", "Surface emissivity.", "", REQUIRED, 0.0, 1.0),
          num("surroundings_temperature", "Temperature of the surroundings.", "K", REQUIRED, positive=True)),
)

SOURCE = table(
    "source", "Heat generated inside one material.",
    Key("material", "string", "Material tag the source heats.", default=REQUIRED),
    num("power_density", "Heat generated per volume.", "W/m3", REQUIRED),
)

SHAPES = {
    "device_head": ("bulb_inner_radius", "glass_thickness", "cap_thickness", "cap_from_deg", "cap_to_deg",
                    "neck_inner_radius", "neck_outer_radius", "neck_length"),
    "whole_device": ("bulb_inner_radius", "glass_thickness", "cap_thickness", "cap_from_deg", "cap_to_deg",
                     "neck_inner_radius", "neck_outer_radius", "tube_length", "body_inner_radius",
                     "body_glass_thickness", "tube_end_gap"),
    "two_layer_shell": ("inner_radius", "glass_thickness", "cap_thickness", "cap_from_deg", "cap_to_deg"),
    "spherical_shell": ("inner_radius", "outer_radius"),
    "solid_sphere": ("radius",),
    "solid_cylinder": ("radius", "height"),
    "hollow_cylinder": ("inner_radius", "outer_radius", "height"),
    "slab": ("width", "height"),
    "mesh_file": ("file",),
}

LENGTH_DOCS = {
    "bulb_inner_radius": "Inner radius of the spherical glass bulb.",
    "glass_thickness": "Thickness of the glass wall.",
    "cap_thickness": "Thickness of the porous cap.",
    "neck_inner_radius": "Inner (bore) radius of the neck tube.",
    "neck_outer_radius": "Outer radius of the neck tube.",
    "neck_length": "Length of the neck tube below the bulb.",
    "tube_length": "Length of the tube between the head's and the body's outer glass (whole device).",
    "body_inner_radius": "Inner radius of the body bulb (whole device).",
    "body_glass_thickness": "Thickness of the body bulb's glass (whole device).",
    "tube_end_gap": "Distance from the dip tube's lower end to the body's inner bottom (whole device).",
    "inner_radius": "Inner radius.",
    "outer_radius": "Outer radius.",
    "radius": "Radius.",
    "height": "Height (axial length).",
    "width": "Width (x extent).",
}

GEOMETRY = table(
    "geometry", "The body: a parametric shape or a mesh file from meshes/.",
    Key("shape", "string", "Which body.", default=REQUIRED, choices=tuple(SHAPES)),
    *(num(n, d, "m", positive=True) for n, d in LENGTH_DOCS.items()),
    num("cap_from_deg", "Polar angle where the cap starts, from the top pole.", "deg", minimum=0.0, maximum=180.0),
    num("cap_to_deg", "Polar angle where the cap ends, from the top pole.", "deg", minimum=0.0, maximum=180.0),
    Key("coordinate_system", "string", "Coordinate system of a slab.", default="axisymmetric",
        choices=("axisymmetric", "planar")),
    Key("file", "string", "A VTU mesh written by `fvsolver mesh` (resolved in the case's folder or meshes/)."),
    Key("material", "string", "Material tag of a one-material shape.", default="glass"),
    default=REQUIRED,
)

MESH = table(
    "mesh", "Cell counts of the parametric shapes (ignored for a mesh file).",
    Key("glass_cells", "integer", "Cells through the glass wall.", default=4, minimum=2),
    Key("cap_cells", "integer", "Cells through the porous cap (8 keep the demo's mesh error near 0.1 %).", default=8,
        minimum=2),
    Key("polar_cells", "integer", "Cells along the bulb's meridian.", default=48, minimum=4),
    Key("neck_cells", "integer", "Cells along the neck tube (whole device: the tube between the bulbs).",
        default=16, minimum=2),
    Key("body_polar_cells", "integer", "Cells along the body bulb's meridian (whole device).", default=24,
        minimum=4),
    Key("dip_tube_cells", "integer", "Cells along the dip tube inside the body (whole device).", default=8,
        minimum=2),
    Key("radial_cells", "integer", "Cells across a radius or wall (other shapes).", default=16, minimum=2),
    Key("axial_cells", "integer", "Cells along z (cylinders and slabs).", default=16, minimum=1),
    Key("refinement", "integer", "Multiply every cell count by this (mesh studies).", default=1, minimum=1),
)

NUMERICS = table(
    "numerics", "Time stepping.",
    Key("scheme", "string", "Time integration scheme.", default="bdf2", choices=("bdf2", "backward_euler")),
    Key("adaptive", "boolean", "Choose steps from the local error estimate.", default=True),
    num("tolerance", "Local temperature error allowed per step (1e-3 keeps the demo's time-step error near "
        "0.15 %).", "K", 0.001, positive=True),
    num("initial_step", "First (or, if not adaptive, every) time step.", "s", 0.1, positive=True),
    num("min_step", "Smallest step before the run fails.", "s", 1e-6, positive=True),
    num("max_step", "Largest step.", "s", 60.0, positive=True),
    Key("max_cells", "integer", "Refuse a mesh estimated larger than this many cells (raise it for a bigger "
        "machine).", default=200_000, minimum=1),
    num("max_memory_mb", "Refuse a run whose memory is estimated above this (megabytes).", "MB", 4000.0,
        positive=True),
    Key("max_output_files", "integer", "Refuse a run that would write more field files than this.",
        default=2000, minimum=1),
    Key("max_steps", "integer", "Refuse a run that needs more steps than this, and stop one that takes them.",
        default=2_000_000, minimum=1),
)

OUTPUT = table(
    "output", "What the run writes.",
    Key("field_times", "numbers", "Times to write the fields (VTU), s; the end time is always written.",
        "s", []),
    Key("field_count", "integer", "Or: this many evenly spaced field outputs.", default=5, minimum=0),
)

ROOM = table(
    "room", "The room around the head.",
    num("air_temperature", "Air temperature (above freezing: ice is not modelled).", "K", REQUIRED, 274.15, 330.0),
    num("relative_humidity", "Relative humidity of the air.", "", REQUIRED, 0.0, 1.0),
    num("pressure", "Barometric pressure.", "Pa", 101325.0, 60000.0, 110000.0),
    num("air_speed", "Air speed past the head.", "m/s", 0.0, 0.0, 30.0),
    Key("convection", "string", "Outside heat transfer: sphere correlations or a given coefficient.",
        default="mixed", choices=("mixed", "natural", "forced", "given")),
    num("heat_transfer_coefficient", "Convection coefficient when convection = 'given'.", "W/(m2 K)", minimum=0.0),
    num("surroundings_temperature", "Radiant temperature of the room (default: the air's).", "K", positive=True),
    num("emissivity", "Emissivity of the head's outer surfaces (wet felt, glass: ~0.9).", "", 0.9, 0.0, 1.0),
    num("lewis_number", "Lewis number override for the heat-mass analogy (default: from the air).", "",
        positive=True),
)

HEAT_SOURCE = table(
    "heat_source", "A heat flux imposed on an outer patch of the head (a lamp, sunlight).",
    Key("patch", "string", "The patch it falls on.", default=REQUIRED),
    num("heat_flux", "Heat flux into the surface.", "W/m2", REQUIRED),
    Key("kind", "string", "What it is, for the report and its cautions.", default="lamp",
        choices=("lamp", "heater", "flame", "sunlight")),
)

CAP = table(
    "cap", "The porous cap's make-up (its properties follow its water content).",
    num("porosity", "Pore volume fraction.", "", 0.85, 0.05, 0.99),
    num("fibre_density", "Density of the fibre material (wool ~1300).", "kg/m3", 1300.0, positive=True),
    num("fibre_conductivity", "Conductivity of the fibre material (wool ~0.2).", "W/(m K)", 0.2, positive=True),
    num("fibre_heat_capacity", "Specific heat of the fibre material (wool ~1360).", "J/(kg K)", 1360.0,
        positive=True),
    Key("conductivity_model", "string", "Mixing model for the wet cap's conductivity.", default="maxwell_eucken",
        choices=("maxwell_eucken", "emt", "parallel", "series")),
)

REWETTING = table(
    "rewetting", "Water added to the cap at a time.",
    num("time", "When.", "s", REQUIRED, minimum=0.0),
    num("mass", "How much water.", "kg", REQUIRED, positive=True),
    num("temperature", "Temperature of the water added (hot or cold).", "K", REQUIRED, 274.15, 372.0),
)

CAP_WATER = table(
    "cap_water", "The cap's water: kept wet from a reservoir, or a finite charge.",
    Key("mode", "string", "reservoir: the cap stays at initial_saturation; charge: it dries as it evaporates.",
        default="reservoir", choices=("reservoir", "charge")),
    num("initial_saturation", "Fraction of the pores filled with water at the start.", "", 1.0, 0.0, 1.0),
    num("critical_saturation", "Below this the drying rate falls (falling-rate period).", "", 0.3, 0.0, 1.0),
    num("residual_saturation", "Water held too tightly to evaporate.", "", 0.02, 0.0, 1.0),
    num("reservoir_temperature", "Temperature of the reservoir's water (default: the air's).", "K", None, 274.15,
        372.0),
    Key("rewettings", "tables", "Water added at given times (charge mode).", default=[], item=REWETTING),
)

FLUID = table(
    "fluid", "The working fluid and the head's vapour space.",
    Key("name", "string", "Working fluid (dichloromethane, diethyl ether, pentane, isopentane, methyl formate, "
        "acetone).", default=REQUIRED),
    num("vapour_volume", "Volume of the head's vapour space (default: the bulb's interior).", "m3", positive=True),
    num("accommodation_coefficient", "Condensation (accommodation) coefficient in the Schrage relation.", "", 0.1,
        0.0, 1.0, positive=True),
    Key("condensation_model", "string", "kinetic (Hertz-Knudsen-Schrage) or its quasi-equilibrium limit.",
        default="kinetic", choices=("kinetic", "equilibrium")),
    num("non_condensable_pressure", "Partial pressure of air left in the head at the start.", "Pa", 0.0,
        minimum=0.0),
    num("initial_film", "Condensate on each inner face at the start.", "kg/m2", 0.0, minimum=0.0),
    Key("condensing_patches", "strings", "Patches of the vapour space where vapour condenses (default: "
        "inner_wall and bore; inner_wall alone for a whole device, whose bore holds the column).",
        default=["inner_wall", "bore"]),
)

SECOND_BULB = table(
    "second_bulb", "The second, warmer bulb the head is connected to.",
    Key("mode", "string", "room: it stays at the air temperature; lumped: a thermal mass with losses and a "
        "heater.", default="room", choices=("room", "lumped")),
    num("heat_capacity", "Heat capacity of the bulb with its liquid.", "J/K", 60.0, positive=True),
    num("loss_conductance", "Conductance from the bulb to the room (h A).", "W/K", 0.05, minimum=0.0),
    num("heater_power", "Heat supplied to the bulb.", "W", 0.0),
    num("initial_temperature", "Starting temperature (default: the air's).", "K", positive=True),
)

TARGET = table(
    "target", "The pressure drop that lifts the column: a column height or a pressure.",
    num("column_height", "Height of liquid column to lift.", "m", positive=True),
    num("pressure_drop", "Pressure difference to reach (instead of a column height).", "Pa", positive=True),
    Key("stop_when_reached", "boolean", "End the run when the target is reached.", default=True),
)

POOL = table(
    "pool", "The working fluid's liquid in the body bulb (whole device): well mixed, one temperature.",
    num("fill_volume", "Liquid volume filled into the device.", "m3", REQUIRED, positive=True),
    num("fill_temperature", "Temperature at which fill_volume was measured (default: the air's).", "K",
        positive=True),
    num("initial_temperature", "Starting temperature of the pool (default: the air's).", "K", positive=True),
    num("heat_transfer_coefficient", "Pool to the wetted inner glass (natural convection in the liquid).",
        "W/(m2 K)", 150.0, positive=True),
    num("vapour_heat_transfer_coefficient", "The body's saturated vapour to its inner glass above the pool.",
        "W/(m2 K)", 20.0, minimum=0.0),
)

ADDED_PART = table(
    "added_part", "A part fixed to the device (a beak, a hat, the pivot's cross bar): a point mass.",
    num("mass", "Its mass.", "kg", REQUIRED, positive=True),
    num("height", "Height of its centre of mass above the body's bottom (outer glass).", "m", REQUIRED),
)

CYCLE = table(
    "cycle", "The running device (whole device): tip, dip, stand up, again.",
    num("pivot_height", "Height of the pivot above the body's bottom (outer glass): the device tips when its "
        "centre of mass rises to it.", "m", positive=True),
    num("tip_column_height", "Or: the column height at which it tips, given directly.", "m", positive=True),
    num("tipped_time", "How long it stays tipped (vapour spaces joined, column draining).", "s", 2.0,
        positive=True),
    num("equalisation_time", "Time constant of the pressure equalisation while tipped.", "s", 0.01,
        positive=True),
    num("refill_time", "A column that refills to the tip within this time of standing up holds the device "
        "tipped.", "s", 1.0, positive=True),
    Key("water_glass", "boolean", "The cap dips into a glass of water at every tip.", default=False),
    num("water_temperature", "Temperature of the water in the glass (default: the air's).", "K", None, 274.15,
        372.0),
    num("period_tolerance", "Consecutive periods within this fraction count as settled.", "", 0.005,
        positive=True, maximum=0.5),
    Key("settle_cycles", "integer", "Consecutive periods that must agree.", default=3, minimum=2),
    Key("max_cycles", "integer", "Stop after this many tips.", default=200, minimum=1),
    Key("stop_when_settled", "boolean", "End the run once the period has settled.", default=True),
    Key("added_parts", "tables", "Point masses fixed to the device.", default=[], item=ADDED_PART),
)

HOT_AIR = table(
    "hot_air_stream", "A stream of warm air over an outer patch (forced convection, sphere of the bulb's size).",
    Key("patch", "string", "The patch it blows on (e.g. body_outer).", default=REQUIRED),
    num("air_temperature", "The stream's temperature.", "K", REQUIRED, 274.15, 400.0),
    num("air_speed", "The stream's speed.", "m/s", REQUIRED, positive=True, maximum=30.0),
)

SAFETY = table(
    "safety", "Limits that raise warnings (conservative defaults for sealed glass).",
    num("max_absolute_pressure", "Largest absolute internal pressure before a warning.", "Pa", 120000.0,
        positive=True),
    num("max_glass_temperature", "Largest glass temperature before a warning.", "K", 323.15, positive=True),
)

CASE = table(
    "case", "An fvsolver case.",
    Key("schema_version", "integer", "Version of this case format.", default=REQUIRED,
        minimum=SCHEMA_VERSION, maximum=SCHEMA_VERSION),
    Key("title", "string", "A short name for reports.", default=""),
    GEOMETRY,
    table("mesh", MESH.doc, *MESH.children, default={}),
    Key("materials", "map", "Material properties by mesh material tag (glass, cap, ...); with a [fluid], the "
        "cap's come from [cap].", default=REQUIRED, item=MATERIAL),
    table("initial", "Initial state.", num("temperature", "Uniform initial temperature (default: the room's air).",
                                            "K", positive=True), default={}),
    Key("boundary", "map", "Boundary conditions by patch name (the axis is always symmetry); with a [fluid], "
        "the cap, the vapour-space walls and the bare outer glass are set by the device model.",
        default={}, item=PATCH),
    Key("sources", "tables", "Volumetric heat sources.", default=[], item=SOURCE),
    ROOM, CAP, CAP_WATER, FLUID, SECOND_BULB, TARGET,
    Key("heat_sources", "tables", "Heat fluxes imposed on outer patches (the head's; the body's too for a "
        "whole device).", default=[], item=HEAT_SOURCE),
    POOL, CYCLE,
    Key("hot_air", "tables", "Warm air streams over outer patches (whole device).", default=[], item=HOT_AIR),
    table("safety", SAFETY.doc, *SAFETY.children, default={}),
    table("time", "Simulated time.", num("end", "End of the simulation.", "s", REQUIRED, positive=True),
          default=REQUIRED),
    table("numerics", NUMERICS.doc, *NUMERICS.children, default={}),
    table("output", OUTPUT.doc, *OUTPUT.children, default={}),
)


def json_schema(key: Key = CASE) -> dict:
    """JSON Schema (draft 2020-12) of the case format, for editors."""

    def convert(k: Key) -> dict:
        desc = k.doc + (f" [{k.unit}]" if k.unit else "")
        if k.kind == "number":
            out: dict = {"type": "number"}
            if k.minimum is not None:
                out["exclusiveMinimum" if k.exclusive_minimum else "minimum"] = k.minimum
            if k.maximum is not None:
                out["maximum"] = k.maximum
        elif k.kind == "integer":
            out = {"type": "integer"}
            if k.minimum is not None:
                out["minimum"] = k.minimum
            if k.maximum is not None:
                out["maximum"] = k.maximum
        elif k.kind == "string":
            out = {"type": "string"}
            if k.choices:
                out["enum"] = list(k.choices)
        elif k.kind == "boolean":
            out = {"type": "boolean"}
        elif k.kind == "numbers":
            out = {"type": "array", "items": {"type": "number"}}
        elif k.kind == "strings":
            out = {"type": "array", "items": {"type": "string"}}
        elif k.kind == "property":
            out = {"oneOf": [
                {"type": "number", "exclusiveMinimum": 0},
                {"type": "object", "additionalProperties": False, "required": ["temperatures", "values"],
                 "properties": {"temperatures": {"type": "array", "items": {"type": "number"}},
                                "values": {"type": "array", "items": {"type": "number"}}}},
                {"type": "object", "additionalProperties": False, "required": ["polynomial"],
                 "properties": {"polynomial": {"type": "array", "items": {"type": "number"}}}},
            ]}
        elif k.kind == "table":
            out = {"type": "object", "additionalProperties": False,
                   "properties": {c.name: convert(c) for c in k.children}}
            req = [c.name for c in k.children if c.required]
            if req:
                out["required"] = req
        elif k.kind == "map":
            out = {"type": "object", "additionalProperties": convert(k.item)}
        elif k.kind == "tables":
            out = {"type": "array", "items": convert(k.item)}
        else:  # pragma: no cover - the definition above is closed
            raise ValueError(k.kind)
        out["description"] = desc
        if k.default is not None and k.default is not REQUIRED and k.kind not in ("table", "map", "tables"):
            out["default"] = k.default
        return out

    schema = convert(key)
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "fvsolver case file"
    return schema
