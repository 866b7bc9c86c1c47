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
from fvsolver.mesh.core import Mesh
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
    return np.unique(np.array([0.0, *listed, end]))


@dataclass(frozen=True)
class Setup:
    """Everything a run needs, built from a case."""

    mesh: Mesh
    problem: ConductionProblem
    options: StepperOptions
    initial: np.ndarray
    end_time: float
    field_times: np.ndarray


def build(case: Case) -> Setup:
    mesh = build_mesh(case)
    sources = tuple(VolumetricSource(s["power_density"], s["material"]) for s in case["sources"])
    problem = ConductionProblem(mesh, build_materials(case), build_conditions(case), sources)
    initial = np.full(mesh.n_cells, case["initial"]["temperature"])
    return Setup(mesh, problem, build_options(case), initial, case["time"]["end"], field_times(case))
