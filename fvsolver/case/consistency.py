"""Physical and cross-key consistency of a case, checked before any work starts."""
from __future__ import annotations

import math
from pathlib import Path

from fvsolver.case.schema import SHAPES

GLASS, CAP, AXIS = "glass", "cap", "axis"


def shape_tags(geometry: dict) -> tuple[tuple, tuple]:
    """(patch names, material tags) a parametric shape produces."""
    shape = geometry["shape"]
    one = (geometry.get("material", GLASS),)
    return {
        "device_head": (("axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge", "neck_outer",
                         "neck_end"), (GLASS, CAP)),
        "two_layer_shell": (("axis", "inner_wall", "glass_outer", "cap_outer", "cap_edge"), (GLASS, CAP)),
        "spherical_shell": (("axis", "inner", "outer"), one),
        "solid_sphere": (("axis", "surface"), one),
        "solid_cylinder": (("axis", "outer", "bottom", "top"), one),
        "hollow_cylinder": (("inner", "outer", "bottom", "top"), one),
        "slab": ((("axis",) if geometry.get("coordinate_system") == "axisymmetric" else ("left",))
                 + ("right", "bottom", "top"), one),
    }[shape]


def resolve_mesh_file(name: str, folder: Path) -> Path:
    """A mesh path: absolute as given, else in the case's folder, else in the project's meshes/."""
    p = Path(name)
    if p.is_absolute():
        return p
    for base in (folder, Path(__file__).resolve().parents[2] / "meshes"):
        candidate = (base / p).resolve()
        if candidate.is_file():
            return candidate
    return (folder / p).resolve()


def check_consistency(data: dict, v) -> None:
    """Append every consistency problem of ``data`` to the validator ``v``."""
    geo = data["geometry"]
    shape = geo["shape"]
    needed = SHAPES[shape]
    for name in needed:
        if name not in geo:
            v.error(f"geometry.{name}", f"missing (shape {shape!r} needs {', '.join(needed)}); add it",
                    line_path="geometry")
    for name in geo:
        if name not in needed and name not in ("shape", "coordinate_system", "material"):
            v.error(f"geometry.{name}", f"not used by shape {shape!r} (it takes {', '.join(needed)}); remove it")
    if v.problems:
        return
    if shape in ("device_head", "two_layer_shell"):
        if not geo["cap_from_deg"] < geo["cap_to_deg"]:
            v.error("geometry.cap_to_deg", f"got {geo['cap_to_deg']!r}, expected more than cap_from_deg "
                    f"({geo['cap_from_deg']!r}): the cap covers the polar range from cap_from_deg to cap_to_deg")
    if shape == "device_head":
        ri, ro = geo["bulb_inner_radius"], geo["bulb_inner_radius"] + geo["glass_thickness"]
        a, b = geo["neck_inner_radius"], geo["neck_outer_radius"]
        if not a < b:
            v.error("geometry.neck_outer_radius", f"got {b!r}, expected more than neck_inner_radius ({a!r})")
        elif not b < ri:
            v.error("geometry.neck_outer_radius", f"got {b!r}, expected less than bulb_inner_radius ({ri!r}): "
                    "the neck must enter the bulb")
        else:
            limit = 180.0 - math.degrees(math.asin(b / ro))
            if geo["cap_to_deg"] >= limit:
                v.error("geometry.cap_to_deg", f"got {geo['cap_to_deg']!r}, expected less than {limit:.2f} deg, "
                        "where the neck tube meets the bulb; the cap must fit the bulb")
    if shape == "two_layer_shell" and geo["cap_to_deg"] >= 180.0:
        v.error("geometry.cap_to_deg", f"got {geo['cap_to_deg']!r}, expected less than 180 (a rim is needed)")
    if shape in ("spherical_shell", "hollow_cylinder") and not geo["inner_radius"] < geo["outer_radius"]:
        v.error("geometry.outer_radius", f"got {geo['outer_radius']!r}, expected more than inner_radius "
                f"({geo['inner_radius']!r})")
    if v.problems:
        return
    if shape == "mesh_file":
        from fvsolver.errors import MeshError
        from fvsolver.vtk_io import read_mesh

        path = resolve_mesh_file(geo["file"], Path(data.get("_folder", ".")))
        if not path.is_file():
            v.error("geometry.file", f"got {geo['file']!r}, expected a VTU file in the case's folder or meshes/ "
                    f"(looked for {path}); write one with `fvsolver mesh`")
            return
        try:
            mesh = read_mesh(path)
        except MeshError as exc:
            v.error("geometry.file", f"the mesh {str(path)!r} is not usable: {exc}")
            return
        geo["file"] = str(path)
        patches, materials = mesh.patch_names, mesh.material_names
    else:
        patches, materials = shape_tags(geo)
    for name in data["materials"]:
        if name not in materials:
            v.error(f"materials.{name}", f"no such material tag on the mesh (expected {', '.join(materials)})")
    for name in materials:
        if name not in data["materials"]:
            v.error(f"materials.{name}", f"missing: the mesh has material tag {name!r}; add [materials.{name}]",
                    line_path="materials")
    for name, cond in data["boundary"].items():
        path = f"boundary.{name}"
        if name not in patches:
            import difflib
            close = difflib.get_close_matches(name, patches, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            v.error(path, f"no such patch on the mesh (expected one of {', '.join(patches)}){hint}")
            continue
        alone = [k for k in ("fixed_temperature", "symmetry", "insulated") if k in cond]
        fluxes = [k for k in ("heat_flux", "convection", "radiation") if k in cond]
        if len(alone) > 1 or (alone and fluxes):
            v.error(path, f"got {sorted(cond)}, expected one of fixed_temperature, symmetry or insulated alone, "
                    "or a sum of heat_flux, convection and radiation")
        for k in ("symmetry", "insulated"):
            if cond.get(k) is False:
                v.error(f"{path}.{k}", "got false, expected true (leave the key out instead)")
        if name == AXIS and (fluxes or "fixed_temperature" in cond):
            v.error(path, "the axis r = 0 allows symmetry only (it carries no heat); remove this condition")
    for name in patches:
        if name != AXIS and name not in data["boundary"]:
            v.error(f"boundary.{name}", f"missing: patch {name!r} needs a condition (insulated = true if no heat "
                    "crosses it)", line_path="boundary")
    for i, src in enumerate(data["sources"]):
        if src["material"] not in materials:
            v.error(f"sources[{i}].material", f"got {src['material']!r}, expected one of {', '.join(materials)}")
    num, end = data["numerics"], data["time"]["end"]
    if not num["min_step"] <= num["initial_step"] <= num["max_step"]:
        v.error("numerics.initial_step", f"got {num['initial_step']!r}, expected min_step ({num['min_step']!r}) "
                f"<= initial_step <= max_step ({num['max_step']!r})")
    bad = [t for t in data["output"]["field_times"] if not 0.0 <= t <= end]
    if bad:
        v.error("output.field_times", f"got {bad}, expected times in [0, time.end = {end!r}] s")
