"""From a frozen case to the solver's inputs: mesh, materials, boundary conditions, options."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fvsolver.boundary import Convection, FixedTemperature, HeatFlux, PatchCondition, Radiation, Symmetry
from fvsolver.case.loader import Case
from fvsolver.conduction import ConductionProblem, VolumetricSource
from fvsolver.materials import Material, TemperatureFunction
from fvsolver.mesh import builders
from fvsolver.mesh.core import Mesh, distinct
from fvsolver.mesh.head import device_head, two_layer_shell
from fvsolver.stepper import StepperOptions


def build_mesh(case: Case) -> Mesh:
    """The case's mesh: a parametric shape at the requested resolution, or its mesh file."""
    g, m = case["geometry"], case["mesh"]
    f = m["refinement"]
    shape = g["shape"]
    if shape == "mesh_file":
        from fvsolver.vtk_io import read_mesh

        return read_mesh(g["file"])
    cap = (math.radians(g.get("cap_from_deg", 0.0)), math.radians(g.get("cap_to_deg", 0.0)))
    if shape == "device_head":
        return device_head(g["bulb_inner_radius"], g["glass_thickness"], g["cap_thickness"], cap,
                           g["neck_inner_radius"], g["neck_outer_radius"], g["neck_length"],
                           n_glass=m["glass_cells"] * f, n_cap=m["cap_cells"] * f, n_polar=m["polar_cells"] * f,
                           n_neck=m["neck_cells"] * f)
    if shape == "whole_device":
        from fvsolver.mesh.device import whole_device

        return whole_device(g["bulb_inner_radius"], g["glass_thickness"], g["cap_thickness"], cap,
                            g["neck_inner_radius"], g["neck_outer_radius"], g["tube_length"], g["body_inner_radius"],
                            g["body_glass_thickness"], g["tube_end_gap"], n_glass=m["glass_cells"] * f,
                            n_cap=m["cap_cells"] * f, n_polar=m["polar_cells"] * f, n_tube=m["neck_cells"] * f,
                            n_body_polar=m["body_polar_cells"] * f, n_dip=m["dip_tube_cells"] * f)
    if shape == "two_layer_shell":
        return two_layer_shell(g["inner_radius"], g["glass_thickness"], g["cap_thickness"], cap,
                               n_glass=m["glass_cells"] * f, n_cap=m["cap_cells"] * f, n_polar=m["polar_cells"] * f)
    nr, nz, material = m["radial_cells"] * f, m["axial_cells"] * f, g["material"]
    if shape == "spherical_shell":
        return builders.spherical_shell(g["inner_radius"], g["outer_radius"], nr, m["polar_cells"] * f,
                                        material=material)
    if shape == "solid_sphere":
        return builders.solid_sphere(g["radius"], nr, material=material)
    if shape == "solid_cylinder":
        return builders.solid_cylinder(g["radius"], g["height"], nr, nz, material=material)
    if shape == "hollow_cylinder":
        return builders.hollow_cylinder(g["inner_radius"], g["outer_radius"], g["height"], nr, nz,
                                        material=material)
    return builders.rectangle(g["width"], g["height"], nr, nz, g["coordinate_system"], material=material)


def temperature_function(value) -> TemperatureFunction:
    if isinstance(value, (int, float)):
        return TemperatureFunction.constant(float(value))
    if "polynomial" in value:
        return TemperatureFunction("polynomial", tuple(value["polynomial"]))
    return TemperatureFunction("table", tuple(value["values"]), tuple(value["temperatures"]))


def build_materials(case: Case) -> dict[str, Material]:
    return {name: Material(name, spec["density"], temperature_function(spec["conductivity"]),
                           temperature_function(spec["heat_capacity"]))
            for name, spec in case["materials"].items()}


def build_conditions(case: Case) -> list[PatchCondition]:
    out = []
    for patch, spec in case["boundary"].items():
        if "fixed_temperature" in spec:
            terms = (FixedTemperature(spec["fixed_temperature"]),)
        elif "symmetry" in spec:
            terms = (Symmetry(),)
        else:
            terms = []
            if "heat_flux" in spec:
                terms.append(HeatFlux(spec["heat_flux"]))
            if "convection" in spec:
                terms.append(Convection(spec["convection"]["h"], spec["convection"]["ambient_temperature"]))
            if "radiation" in spec:
                terms.append(Radiation(spec["radiation"]["emissivity"], spec["radiation"]["surroundings_temperature"]))
            terms = tuple(terms)
        out.append(PatchCondition(patch, terms))
    return out


def build_options(case: Case) -> StepperOptions:
    n = case["numerics"]
    return StepperOptions(scheme=n["scheme"], adaptive=n["adaptive"], initial_step=n["initial_step"],
                          tolerance=n["tolerance"], min_step=n["min_step"], max_step=n["max_step"])


def field_times(case: Case) -> np.ndarray:
    """Output times of the fields: the listed ones, or evenly spaced ones, plus start and end."""
    end = case["time"]["end"]
    listed = list(case["output"]["field_times"])
    if not listed and case["output"]["field_count"] > 0:
        listed = list(np.linspace(0.0, end, case["output"]["field_count"] + 1)[1:])
    return distinct(np.array([0.0, *listed, end]))


def build_device_spec(case: Case, mesh: Mesh):
    """The device model's inputs (room, cap water, vapour space, second bulb, target, safety)."""
    from fvsolver.device.spec import (CapWater, DeviceSpec, Room, Safety, SecondBulb, Target, VapourSpace,
                                      bulb_volume)
    from fvsolver.properties.fluids import get_fluid

    g, r, f = case["geometry"], case["room"], case["fluid"]
    if g["shape"] in ("device_head", "whole_device"):
        inner, outer = g["bulb_inner_radius"], g["bulb_inner_radius"] + g["glass_thickness"] + g["cap_thickness"]
    elif g["shape"] == "two_layer_shell":
        inner, outer = g["inner_radius"], g["inner_radius"] + g["glass_thickness"] + g["cap_thickness"]
    else:  # a mesh file: the extent of the mesh
        outer = float(np.hypot(mesh.nodes[:, 0], mesh.nodes[:, 1]).max())
        inner = float(np.hypot(*mesh.boundary_centres[mesh.patch_faces("inner_wall")].T).mean())
    extra: dict = {}
    for hs in case["heat_sources"]:
        extra[hs["patch"]] = extra.get(hs["patch"], 0.0) + hs["heat_flux"]
    room = Room(r["air_temperature"], r["relative_humidity"], r["pressure"], r["air_speed"], r["convection"],
                r.get("heat_transfer_coefficient"), r["surroundings_temperature"], r["emissivity"],
                r.get("lewis_number"), 2.0 * outer, extra)
    w = case["cap_water"]
    water = CapWater(w["mode"], w["initial_saturation"], w["critical_saturation"], w["residual_saturation"],
                     w["reservoir_temperature"], tuple((x["time"], x["mass"], x["temperature"]) for x in w["rewettings"]))
    t0 = case["initial"]["temperature"]
    vapour = VapourSpace(get_fluid(f["name"]), f.get("vapour_volume", bulb_volume(inner)), f["accommodation_coefficient"],
                         f["condensation_model"], f["non_condensable_pressure"], t0, f["initial_film"],
                         tuple(f["condensing_patches"]))
    b = case["second_bulb"]
    bulb = SecondBulb(b["mode"], b["heat_capacity"], b["loss_conductance"], b["heater_power"], b["initial_temperature"])
    s = case["safety"]
    safety = Safety(s["max_absolute_pressure"], s["max_glass_temperature"])
    if g["shape"] == "whole_device":
        body, cycle = build_body(case, mesh)
        # the tip replaces the target: the pressure difference is followed cycle after cycle
        return DeviceSpec(room, water, vapour, bulb, Target(None, None, False), safety, body, cycle)
    t = case["target"]
    target = Target(t.get("pressure_drop"), t.get("column_height"), t["stop_when_reached"])
    return DeviceSpec(room, water, vapour, bulb, target, safety)


def build_body(case: Case, mesh: Mesh):
    """A whole device's body (pool) and cycle (tip model) from the case and its mesh."""
    from fvsolver.device.body import PoolGeometry, TipModel
    from fvsolver.device.spec import Body, CycleSpec
    from fvsolver.errors import CaseError
    from fvsolver.mesh.device import device_layout
    from fvsolver.properties.fluids import get_fluid

    g, pool, cyc, cap = case["geometry"], case["pool"], case["cycle"], case["cap"]
    fluid = get_fluid(case["fluid"]["name"])
    layout = device_layout(g["bulb_inner_radius"], g["glass_thickness"], g["neck_inner_radius"],
                           g["neck_outer_radius"], g["tube_length"], g["body_inner_radius"],
                           g["body_glass_thickness"], g["tube_end_gap"])
    geometry = PoolGeometry.from_fill(layout, pool["fill_volume"])
    mass = pool["fill_volume"] * float(fluid.liquid_density(pool["fill_temperature"]))
    t0 = pool["initial_temperature"]
    body = Body(geometry, mass, t0, pool["heat_transfer_coefficient"], pool["vapour_heat_transfer_coefficient"],
                float(fluid.liquid_heat_capacity(t0)), 2.0 * layout.body_outer_radius,
                tuple((h["patch"], h["air_temperature"], h["air_speed"]) for h in case["hot_air"]),
                cyc["equalisation_time"])
    # the fixed masses: glass from the mesh, the cap's fibres, the added parts (heights from the body's bottom)
    z = mesh.cell_centres[:, 1]
    v = mesh.cell_volumes
    glass = mesh.cell_material == mesh.material_names.index("glass")
    caps = ~glass
    rho_glass = case["materials"]["glass"]["density"]
    fibres = cap["fibre_density"] * (1.0 - cap["porosity"])
    fixed_mass = rho_glass * v[glass].sum() + fibres * v[caps].sum()
    fixed_moment = rho_glass * (v[glass] * z[glass]).sum() + fibres * (v[caps] * z[caps]).sum()
    for part in cyc["added_parts"]:
        fixed_mass += part["mass"]
        fixed_moment += part["mass"] * (layout.body_bottom_z + part["height"])
    pivot = cyc.get("pivot_height")
    tip = TipModel(fixed_mass, fixed_moment, math.pi * layout.tube_inner_radius**2, layout.tube_top_z,
                   geometry.centroid_z, geometry.level_z, float(np.average(z[caps], weights=v[caps])),
                   None if pivot is None else layout.body_bottom_z + pivot, cyc.get("tip_column_height"))
    cycle = CycleSpec(tip, cyc["tipped_time"], cyc["refill_time"], cyc["water_glass"], cyc["water_temperature"],
                      cyc["period_tolerance"], cyc["settle_cycles"], cyc["max_cycles"], cyc["stop_when_settled"])
    return body, cycle


def _check_tip(case: Case, problem, initial: np.ndarray) -> None:
    """The column that tips the device must fit the tube at the start."""
    from fvsolver.errors import CaseError

    height = problem.column(initial)["tip_height_m"]
    tip = problem.spec.cycle.tip
    if not 0.0 < height < tip.max_column:
        pivot = case["cycle"].get("pivot_height")
        where = "cycle.pivot_height" if pivot is not None else "cycle.tip_column_height"
        fix = ("raise the pivot (the centre of mass is above it already)" if height <= 0.0 else
               "lower the pivot or add mass low down") if pivot is not None else "shorten the column"
        raise CaseError(f"{where}: the device would tip at a column of {height:.4g} m, expected one between 0 and "
                        f"{tip.max_column:.4g} m (from the pool's level to the head); {fix}")


@dataclass(frozen=True)
class Setup:
    """Everything a run needs, built from a case."""

    mesh: Mesh
    problem: object
    options: StepperOptions
    initial: np.ndarray
    end_time: float
    field_times: np.ndarray
    device: object = None

    @property
    def conduction(self) -> ConductionProblem:
        return getattr(self.problem, "conduction", self.problem)


def build(case: Case) -> Setup:
    mesh = build_mesh(case)
    sources = tuple(VolumetricSource(s["power_density"], s["material"]) for s in case["sources"])
    materials = build_materials(case)
    stops = field_times(case)
    if "fluid" not in case.data:
        problem = ConductionProblem(mesh, materials, build_conditions(case), sources)
        initial = np.full(mesh.n_cells, case["initial"]["temperature"])
        return Setup(mesh, problem, build_options(case), initial, case["time"]["end"], stops)
    from fvsolver.device.cap import PorousCap
    from fvsolver.device.problem import DeviceProblem

    c = case["cap"]
    materials["cap"] = PorousCap("cap", c["porosity"], c["fibre_density"], c["fibre_conductivity"],
                                 c["fibre_heat_capacity"], c["conductivity_model"])
    spec = build_device_spec(case, mesh)
    problem = DeviceProblem(mesh, materials, build_conditions(case), spec, sources)
    initial = problem.initial_state(case["initial"]["temperature"])
    if spec.cycle is not None:
        _check_tip(case, problem, initial)
    rewet = [w[0] for w in spec.cap_water.rewettings]
    stops = distinct(np.concatenate([stops, rewet]))
    return Setup(mesh, problem, build_options(case), initial, case["time"]["end"], stops, spec)
