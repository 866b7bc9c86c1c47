"""Physical and cross-key consistency of a case, checked before any work starts."""
from __future__ import annotations

import math
from pathlib import Path

from fvsolver.case.loader import excerpt
from fvsolver.case.schema import SHAPES

GLASS, CAP, AXIS = "glass", "cap", "axis"
WHOLE_DEVICE_PATCHES = ("axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge", "neck_outer",
                        "body_inner", "body_outer", "dip_tube_outer", "tube_end")
BODY_PATCHES = ("body_inner", "dip_tube_outer", "tube_end")  # in the pool or the body's vapour
OUTER_PATCHES = ("cap_outer", "cap_edge", "glass_outer", "neck_outer", "body_outer")


def shape_tags(geometry: dict) -> tuple[tuple, tuple]:
    """(patch names, material tags) a parametric shape produces."""
    shape = geometry["shape"]
    one = (geometry.get("material", GLASS),)
    return {
        "device_head": (("axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge", "neck_outer",
                         "neck_end"), (GLASS, CAP)),
        "whole_device": (WHOLE_DEVICE_PATCHES, (GLASS, CAP)),
        "two_layer_shell": (("axis", "inner_wall", "glass_outer", "cap_outer", "cap_edge"), (GLASS, CAP)),
        "spherical_shell": (("axis", "inner", "outer"), one),
        "solid_sphere": (("axis", "surface"), one),
        "solid_cylinder": (("axis", "outer", "bottom", "top"), one),
        "hollow_cylinder": (("inner", "outer", "bottom", "top"), one),
        "slab": ((("axis",) if geometry.get("coordinate_system") == "axisymmetric" else ("left",))
                 + ("right", "bottom", "top"), one),
    }[shape]


def resolve_mesh_file(name: str, folder: Path) -> Path | None:
    """A mesh path: absolute as given, else inside the case's folder, else inside the project's
    meshes/; a relative path that climbs out of both (``../``) gives None."""
    p = Path(name)
    if p.is_absolute():
        return p
    inside = []
    for base in (folder.resolve(), Path(__file__).resolve().parents[2] / "meshes"):
        candidate = (base / p).resolve()
        if candidate.is_relative_to(base):
            inside.append(candidate)
            if candidate.is_file():
                return candidate
    return inside[0] if inside else None


def check_consistency(data: dict, v) -> None:
    """Append every consistency problem of ``data`` to the validator ``v``."""
    start = len(v.problems)  # gate the dependent checks on this stage's own problems
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
    if len(v.problems) > start:
        return
    if shape in ("device_head", "two_layer_shell", "whole_device"):
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
    if shape == "whole_device":
        _check_whole_device_geometry(geo, v)
    if shape == "two_layer_shell" and geo["cap_to_deg"] >= 180.0:
        v.error("geometry.cap_to_deg", f"got {geo['cap_to_deg']!r}, expected less than 180 (a rim is needed)")
    if shape in ("spherical_shell", "hollow_cylinder") and not geo["inner_radius"] < geo["outer_radius"]:
        v.error("geometry.outer_radius", f"got {geo['outer_radius']!r}, expected more than inner_radius "
                f"({geo['inner_radius']!r})")
    if len(v.problems) > start:
        return
    if shape == "mesh_file":
        from fvsolver.case.limits import vtu_counts
        from fvsolver.errors import MeshError
        from fvsolver.vtk_io import read_mesh

        if "\x00" in geo["file"]:
            v.error("geometry.file", f"got {excerpt(geo['file'])}, which holds a NUL character; expected a "
                    "file name")
            return
        path = resolve_mesh_file(geo["file"], Path(data.get("_folder", ".")))
        if path is None:
            v.error("geometry.file", f"got {excerpt(geo['file'])}, expected a path inside the case's folder or meshes/ "
                    "(or an absolute path); relative paths may not climb out with '..'")
            return
        if not path.is_file():
            v.error("geometry.file", f"got {excerpt(geo['file'])}, expected a VTU file in the case's folder or meshes/ "
                    f"(looked for {path}); write one with `fvsolver mesh`")
            return
        points, cells = vtu_counts(path)
        limit = data["numerics"]["max_cells"]
        if cells > limit or points > 4 * limit:
            v.error("geometry.file", f"the mesh {excerpt(str(path))} declares {cells:,} cells and {points:,} points, "
                    f"more than numerics.max_cells = {limit:,} allows; use a coarser mesh or raise "
                    "numerics.max_cells")
            return
        try:
            mesh = read_mesh(path)
        except MeshError as exc:
            v.error("geometry.file", f"the mesh {excerpt(str(path))} is not usable: {exc}")
            return
        geo["file"] = str(path)
        patches, materials = mesh.patch_names, mesh.material_names
    else:
        patches, materials = shape_tags(geo)
    device = "fluid" in data
    if device and not _check_device(data, v, patches, len(v.problems)):
        return
    controlled = device_patches(data, patches) if device else ()
    if not device and "temperature" not in data["initial"]:
        v.error("initial.temperature", "missing (expected a number > 0 in K); add [initial] temperature = ...",
                line_path="initial")
    if device:
        materials = tuple(m for m in materials if m != CAP)
    for name in data["materials"]:
        if device and name == CAP:
            v.error("materials.cap", "with a [fluid] the cap's properties come from [cap] and its water; remove "
                    "[materials.cap]")
            continue
        if name not in materials:
            v.error(f"materials.{name}", f"no such material tag on the mesh (expected {', '.join(materials)})")
    for name in materials:
        if name not in data["materials"]:
            v.error(f"materials.{name}", f"missing: the mesh has material tag {name!r}; add [materials.{name}]",
                    line_path="materials")
    for name, cond in data["boundary"].items():
        path = f"boundary.{name}"
        if name in controlled:
            v.error(path, f"patch {name!r} is set by the device model (cap, vapour space or room); remove it "
                    "from [boundary]")
            continue
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
        if name != AXIS and name not in data["boundary"] and name not in controlled:
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
        v.error("output.field_times", f"got {excerpt(bad)}, expected times in [0, time.end = {end!r}] s")
    if len(v.problems) == start:  # the size of the run, before anything is allocated
        from fvsolver.case.limits import limit_problems

        for key, message in limit_problems(data):
            v.error(key, message)


DEFAULT_CONDENSING_PATCHES = ("inner_wall", "bore")


def device_patches(data: dict, patches) -> tuple:
    """Patches the device model sets: the cap, the vapour-space walls, the bare outer glass."""
    fixed = OUTER_PATCHES + (BODY_PATCHES + ("bore",) if data["geometry"]["shape"] == "whole_device" else ())
    return tuple(p for p in patches if p in fixed or p in data["fluid"]["condensing_patches"])


def _check_device(data: dict, v, patches, start: int) -> bool:
    """Device-model checks; fills the device tables' defaults.  False when later checks are moot."""
    from fvsolver.case.schema import CAP as CAP_KEY, CAP_WATER, SECOND_BULB
    from fvsolver.errors import PropertyError
    from fvsolver.properties.fluids import FLUIDS, get_fluid

    shape = data["geometry"]["shape"]
    if shape not in ("device_head", "two_layer_shell", "whole_device", "mesh_file"):
        v.error("geometry.shape", f"got {shape!r}, expected 'device_head', 'whole_device' or 'two_layer_shell' "
                "with a [fluid] "
                "(the device needs a cap and a vapour space)")
        return False
    for needed in ("cap_outer", "inner_wall"):
        if needed not in patches:
            v.error("geometry", f"the mesh has no {needed!r} patch, which the device model needs")
            return False
    for name, key in (("cap", CAP_KEY), ("cap_water", CAP_WATER), ("second_bulb", SECOND_BULB)):
        if name not in data:
            data[name] = v.check(key, {}, name)
    whole = shape == "whole_device"
    if whole and data["fluid"]["condensing_patches"] == list(DEFAULT_CONDENSING_PATCHES):
        data["fluid"]["condensing_patches"] = ["inner_wall"]  # the whole device's bore holds the column
    for name in ("room",) + (("pool",) if whole else ("target",)):
        if name not in data:
            v.error(name, f"missing: a case with a [fluid] needs a [{name}] table", line_path="fluid")
    if len(v.problems) > start:
        return False
    try:
        fluid = get_fluid(data["fluid"]["name"])
    except PropertyError:
        v.error("fluid.name", f"got {data['fluid']['name']!r}, expected one of {', '.join(FLUIDS)}")
        return False
    room, target, water = data["room"], data.get("target", {}), data["cap_water"]
    t_air = room["air_temperature"]
    eq = fluid.vapour_pressure
    if not eq.t_min <= t_air <= eq.t_max:
        v.error("room.air_temperature", f"got {t_air!r} K, expected a temperature inside {fluid.name}'s "
                f"saturation-pressure data range ({eq.t_min:g}-{eq.t_max:g} K)")
    _check_wet_bulb(room, v)
    if room["convection"] == "given" and "heat_transfer_coefficient" not in room:
        v.error("room.heat_transfer_coefficient", "missing: convection = 'given' needs it", line_path="room")
    if room["convection"] == "forced" and room["air_speed"] <= 0.0:
        v.error("room.air_speed", "got 0, expected a positive air speed for convection = 'forced' (or use 'mixed')")
    data["initial"].setdefault("temperature", t_air)
    room.setdefault("surroundings_temperature", t_air)
    water.setdefault("reservoir_temperature", t_air)
    data["second_bulb"].setdefault("initial_temperature", t_air)
    if whole:
        _check_cycle(data, v, t_air)
    elif ("column_height" in target) == ("pressure_drop" in target):
        v.error("target", "expected exactly one of column_height (m) or pressure_drop (Pa)")
    if not water["residual_saturation"] < water["critical_saturation"] <= 1.0:
        v.error("cap_water.critical_saturation", f"got {water['critical_saturation']!r}, expected more than "
                f"residual_saturation ({water['residual_saturation']!r})")
    if water["rewettings"] and water["mode"] != "charge":
        v.error("cap_water.rewettings", "rewettings need mode = 'charge' (a reservoir keeps the cap wet anyway)")
    end = data["time"]["end"]
    for i, w in enumerate(water["rewettings"]):
        if not 0.0 < w["time"] < end:
            v.error(f"cap_water.rewettings[{i}].time", f"got {w['time']!r}, expected a time in (0, {end!r}) s")
    fluid_table = data["fluid"]
    if fluid_table["condensing_patches"] == list(DEFAULT_CONDENSING_PATCHES):
        # the default names the device head's walls; a two-layer shell has no bore
        fluid_table["condensing_patches"] = [p for p in DEFAULT_CONDENSING_PATCHES if p in patches]
    dry = OUTER_PATCHES + ("axis", "neck_end") + (BODY_PATCHES if whole else ())
    inner = [p for p in patches if p not in dry]
    for p in fluid_table["condensing_patches"]:
        if p not in patches or p in dry:
            what = "an outer, axis or body patch, where no head vapour is" if p in patches else "no such patch"
            v.error("fluid.condensing_patches", f"got {p!r} ({what}), expected patches of the vapour space "
                    f"(one of {', '.join(inner)})")
    outer = ", ".join(p for p in OUTER_PATCHES if p in patches)
    for i, hs in enumerate(data["heat_sources"]):
        if hs["patch"] not in OUTER_PATCHES or hs["patch"] not in patches:
            v.error(f"heat_sources[{i}].patch", f"got {hs['patch']!r}, expected an outer patch ({outer})")
    for i, hs in enumerate(data["hot_air"]):
        if not whole:
            v.error(f"hot_air[{i}]", "warm air streams act on a whole device's bulbs; use shape = 'whole_device'")
        elif hs["patch"] not in OUTER_PATCHES:
            v.error(f"hot_air[{i}].patch", f"got {hs['patch']!r}, expected an outer patch ({outer})")
    return len(v.problems) == start


def _check_wet_bulb(room: dict, v) -> None:
    """The wet cap sits near the room's wet-bulb temperature; below freezing it would ice over,
    which the model does not cover. Refused here, before a run starts."""
    from fvsolver.errors import PropertyError
    from fvsolver.properties import moist_air

    t, rh, p = room["air_temperature"], room["relative_humidity"], room["pressure"]
    try:
        moist_air.wet_bulb_temperature(t, rh, p)
    except PropertyError as exc:
        if "below 273.15 K" not in str(exc):
            return  # other range problems are reported by the checks of those keys
        v.error("room.relative_humidity", f"got {rh!r} at air_temperature {t!r} K: the wet-bulb temperature "
                "is below 0 C, so the wet cap would freeze (not modelled); use a warmer or more humid room")


def _check_whole_device_geometry(geo: dict, v) -> None:
    """The whole device's dimensions, with the mesh builder's own checks (same messages)."""
    from fvsolver.errors import MeshError
    from fvsolver.mesh.device import device_layout

    try:
        layout = device_layout(geo["bulb_inner_radius"], geo["glass_thickness"], geo["neck_inner_radius"],
                               geo["neck_outer_radius"], geo["tube_length"], geo["body_inner_radius"],
                               geo["body_glass_thickness"], geo["tube_end_gap"])
    except MeshError as exc:
        v.error("geometry", str(exc))
        return
    limit = 180.0 - math.degrees(math.asin(layout.tube_outer_radius / layout.head_outer_radius))
    if geo["cap_to_deg"] >= limit:
        v.error("geometry.cap_to_deg", f"got {geo['cap_to_deg']!r}, expected less than {limit:.2f} deg, where the "
                "tube meets the head; the cap must fit the bulb")


def _check_cycle(data: dict, v, t_air: float) -> None:
    """The pool and the tipping of a whole device; fills their defaults."""
    from fvsolver.case.schema import CYCLE

    if "cycle" not in data:
        data["cycle"] = v.check(CYCLE, {}, "cycle")
    cycle, pool = data["cycle"], data["pool"]
    pool.setdefault("fill_temperature", t_air)
    pool.setdefault("initial_temperature", t_air)
    cycle.setdefault("water_temperature", t_air)
    if ("pivot_height" in cycle) == ("tip_column_height" in cycle):
        v.error("cycle", "expected exactly one of pivot_height (m, the device tips when its centre of mass rises to "
                "it) or tip_column_height (m)", line_path="cycle")
    if "target" in data:
        v.error("target", "a whole device tips where its centre of mass reaches the pivot: give [cycle] "
                "pivot_height or tip_column_height instead of [target]")
    if data["cap_water"]["rewettings"] and cycle["water_glass"]:
        v.error("cap_water.rewettings", "a water glass wets the cap at every dip; leave out the rewettings or set "
                "cycle.water_glass = false")
