"""The demo run's outputs, read back by VTK's own XML reader and the csv module.

fvsolver writes its VTU files through meshio and adds the field data itself; these
tests check that an independent reader (VTK, the format's reference implementation)
sees what the run's summary and mesh say it should.
"""
from __future__ import annotations

import csv
import json
import math
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from vtkmodules.util.numpy_support import vtk_to_numpy
from vtkmodules.vtkCommonDataModel import VTK_LINE, VTK_QUAD
from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridReader  # the class vtk.vtkXMLUnstructuredGridReader

from fvsolver.case import load_case
from fvsolver.case.build import build_mesh
from fvsolver import run  # the public interface (fvsolver.pipeline.run)

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "demo.toml"


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo case run once: (case, mesh, output folder, summary)."""
    case = load_case(DEMO)
    out = tmp_path_factory.mktemp("vtk_readback") / "demo"
    with np.errstate(all="raise", under="ignore"):  # the suite's floating-point rules (conftest)
        run(case, out=out)
    summary = json.loads((out / "summary.json").read_text())
    return case, build_mesh(case), out, summary


def read_vtu(path: Path):
    reader = vtkXMLUnstructuredGridReader()
    errors = []
    reader.AddObserver("ErrorEvent", lambda obj, event: errors.append(event))
    assert reader.CanReadFile(str(path)), path
    reader.SetFileName(str(path))
    reader.Update()
    assert reader.GetErrorCode() == 0 and not errors, path
    grid = reader.GetOutput()
    assert grid.GetNumberOfCells() > 0, path
    return grid


def cell_array(grid, name: str) -> np.ndarray:
    array = grid.GetCellData().GetArray(name)
    assert array is not None, f"cell data {name!r} missing"
    return vtk_to_numpy(array)


def field_names(grid, name: str) -> tuple:
    """A field-data name table: a VTK string array, which ParaView shows as text."""
    array = grid.GetFieldData().GetAbstractArray(name)
    assert array is not None, f"field data {name!r} missing"
    assert array.GetClassName() == "vtkStringArray", array.GetClassName()
    return tuple(array.GetValue(i) for i in range(array.GetNumberOfValues()))


def collection(out: Path, name: str = "fields.pvd") -> list[tuple[float, str]]:
    root = ET.parse(out / name).getroot()
    assert root.tag == "VTKFile" and root.get("type") == "Collection"
    return [(float(d.get("timestep")), d.get("file")) for d in root.iter("DataSet")]


@pytest.fixture(scope="module")
def grids(demo):
    """(time, cell grid, boundary grid) per output time."""
    _, _, out, _ = demo
    faces = dict(collection(out, "boundary.pvd"))
    return [(t, read_vtu(out / name), read_vtu(out / faces[t])) for t, name in collection(out)]


def split(grid, mesh, kind=VTK_QUAD):
    """Check that a file holds one kind of cell only, in the mesh's order."""
    types = np.array([grid.GetCellType(i) for i in range(grid.GetNumberOfCells())])
    assert np.all(types == kind), set(types.tolist())
    assert len(types) == (mesh.n_cells if kind == VTK_QUAD else mesh.n_boundary)
    return np.ones(len(types), bool)


def test_collection_times_increase_to_the_end_time(demo):
    _, _, out, summary = demo
    entries = collection(out)
    times = [t for t, _ in entries]
    assert len(entries) >= 2 and times[0] == 0.0
    assert all(b > a for a, b in zip(times, times[1:])), times
    assert times[-1] == summary["end_time_s"]
    for _, name in entries:
        assert (out / name).is_file(), name
    # the boundary faces' collection has the same times, in files of their own
    faces = collection(out, "boundary.pvd")
    assert [t for t, _ in faces] == times
    assert not {n for _, n in faces} & {n for _, n in entries}
    for _, name in faces:
        assert (out / name).is_file(), name


def test_cell_counts_match_the_summary_and_the_mesh(demo, grids):
    _, mesh, _, summary = demo
    for t, grid, faces in grids:
        quads = split(grid, mesh, VTK_QUAD)
        assert quads.sum() == summary["n_cells"] == mesh.n_cells, t
        lines = split(faces, mesh, VTK_LINE)
        assert lines.sum() == mesh.n_boundary, t


def test_cell_fields_hold_only_cell_values(demo, grids):
    """ParaView's automatic colour range of a cell field is the range of the values in the file:
    with the boundary faces in their own files, the temperature's range is the body's."""
    _, _, _, summary = demo
    _, grid, faces = grids[-1]
    low, high = grid.GetCellData().GetArray("temperature").GetRange()
    assert (low, high) == pytest.approx((summary["min_temperature_k"], summary["max_temperature_k"]), rel=1e-12)
    for name in ("surface_temperature", "surface_heat_flux", "evaporative_mass_flux", "patch"):
        assert grid.GetCellData().GetArray(name) is None, name
    for name in ("temperature", "heat_flux", "water_saturation", "material", "cell_volume"):
        assert faces.GetCellData().GetArray(name) is None, name
    s_low, s_high = faces.GetCellData().GetArray("surface_temperature").GetRange()
    assert 250.0 < s_low <= s_high < 320.0  # real surface temperatures only, no zero filler


def test_temperature_lies_in_the_summary_range(demo, grids):
    case, mesh, _, summary = demo
    t_last, last, _ = grids[-1]
    quads = split(last, mesh)
    temperature = cell_array(last, "temperature")[quads]
    low, high = summary["min_temperature_k"], summary["max_temperature_k"]
    assert np.all((temperature >= low) & (temperature <= high))
    assert temperature.min() == pytest.approx(low, rel=1e-12)
    assert temperature.max() == pytest.approx(high, rel=1e-12)
    assert high - low > 0.1  # the head has cooled unevenly: the range is not trivially met
    # at t = 0 the head is at the room's air temperature (the schema's default initial state)
    t0, first, _ = grids[0]
    assert t0 == 0.0
    np.testing.assert_array_equal(cell_array(first, "temperature")[quads], case["room"]["air_temperature"])


def test_cell_volumes_add_up_to_the_head(demo, grids):
    case, mesh, _, _ = demo
    reference = mesh.cell_volumes.sum()
    g = case["geometry"]
    r1 = g["bulb_inner_radius"] + g["glass_thickness"]
    r2 = r1 + g["cap_thickness"]
    # volume of a spherical shell sector from the pole to polar angle a: (2 pi / 3)(r2^3 - r1^3)(1 - cos a)
    # (standard solid geometry); the meshed cap is its polygonal (inscribed) approximation
    cap_exact = 2.0 * math.pi / 3.0 * (r2**3 - r1**3) * (math.cos(math.radians(g["cap_from_deg"]))
                                                        - math.cos(math.radians(g["cap_to_deg"])))
    for t, grid, _ in grids:
        quads = split(grid, mesh)
        volume = cell_array(grid, "cell_volume")
        assert volume[quads].sum() == pytest.approx(reference, rel=1e-10), t
        assert np.all(volume[quads] > 0), t
        material = cell_array(grid, "material")
        cap = material == field_names(grid, "material_names").index("cap")
        assert volume[cap].sum() == pytest.approx(cap_exact, rel=1e-2), t


def test_cell_volumes_and_face_areas_follow_pappus(demo, grids):
    """Each quad's volume is 2 pi r_c A and each face's area pi (r1 + r2) L, from the points VTK read
    (Pappus's centroid theorems; the lateral area of a cone frustum)."""
    _, mesh, _, _ = demo
    _, grid, faces = grids[-1]
    quads = split(grid, mesh)
    points = vtk_to_numpy(grid.GetPoints().GetData())
    assert np.all(points[:, 2] == 0.0)
    cells = grid.GetCells()
    conn, offsets = vtk_to_numpy(cells.GetConnectivityArray()), vtk_to_numpy(cells.GetOffsetsArray())
    quad_nodes = np.array([conn[offsets[i]:offsets[i + 1]] for i in np.flatnonzero(quads)])
    r, z = points[quad_nodes, 0], points[quad_nodes, 1]
    r_next, z_next = np.roll(r, -1, axis=1), np.roll(z, -1, axis=1)
    cross = r * z_next - r_next * z
    area = cross.sum(axis=1) / 2.0
    assert np.all(area > 0)  # counter-clockwise quads
    centroid_r = ((r + r_next) * cross).sum(axis=1) / (6.0 * area)
    np.testing.assert_allclose(cell_array(grid, "cell_volume")[quads], 2.0 * math.pi * centroid_r * area,
                               rtol=1e-10)
    lines = split(faces, mesh, VTK_LINE)
    points = vtk_to_numpy(faces.GetPoints().GetData())
    cells = faces.GetCells()
    conn, offsets = vtk_to_numpy(cells.GetConnectivityArray()), vtk_to_numpy(cells.GetOffsetsArray())
    line_nodes = np.array([conn[offsets[i]:offsets[i + 1]] for i in np.flatnonzero(lines)])
    a, b = points[line_nodes[:, 0], :2], points[line_nodes[:, 1], :2]
    length = np.hypot(*(b - a).T)
    face_area = cell_array(faces, "face_area")
    np.testing.assert_allclose(face_area[lines], math.pi * (a[:, 0] + b[:, 0]) * length, rtol=1e-10, atol=0)


def test_material_takes_exactly_glass_and_cap(demo, grids):
    _, mesh, _, _ = demo
    for t, grid, faces in grids:
        quads = split(grid, mesh)
        material = cell_array(grid, "material")
        assert set(np.unique(material[quads]).tolist()) == {0, 1}, t
        names = field_names(grid, "material_names")
        assert sorted(names) == ["cap", "glass"], names
        assert names == mesh.material_names
        np.testing.assert_array_equal(material[quads], mesh.cell_material)
        for g in (grid, faces):
            assert field_names(g, "patch_names") == mesh.patch_names
            assert field_names(g, "coordinate_system") == ("axisymmetric",)


def test_evaporation_only_from_the_wet_cap(demo, grids):
    """The felt's outer surface and its rim (cap_edge) evaporate; every other face is 0."""
    _, mesh, _, _ = demo
    for t, grid, faces in grids:
        lines = split(faces, mesh, VTK_LINE)
        patch_names = field_names(faces, "patch_names")
        patch = cell_array(faces, "patch")
        assert np.all((patch[lines] >= 0) & (patch[lines] < len(patch_names)))
        np.testing.assert_array_equal(patch, mesh.boundary_patch)
        flux = cell_array(faces, "evaporative_mass_flux")
        outer = patch == patch_names.index("cap_outer")
        edge = patch == patch_names.index("cap_edge")
        assert outer.sum() > 0 and edge.sum() > 0
        assert np.all(flux[outer] > 0), t
        assert np.all(flux[edge] > 0), t
        assert np.all(flux[~(outer | edge)] == 0), t
        # reservoir mode: the cap stays at its initial saturation (1), the glass holds no water
        saturation = cell_array(grid, "water_saturation")
        material = cell_array(grid, "material")
        cap = material == field_names(grid, "material_names").index("cap")
        np.testing.assert_allclose(saturation[cap], 1.0, rtol=1e-12)
        assert np.all(saturation[~cap] == 0)


def test_history_has_one_row_per_accepted_step(demo):
    _, _, out, summary = demo
    with open(out / "history.csv", newline="") as handle:
        reader = csv.DictReader(handle)
        columns = reader.fieldnames
        rows = list(reader)
    assert "time_s" in columns and "pressure_drop_pa" in columns
    # the initial state, then one row per accepted step
    assert len(rows) == summary["n_steps"] + 1
    times = [float(r["time_s"]) for r in rows]
    assert times[0] == 0.0 and all(b > a for a, b in zip(times, times[1:]))
    assert times[-1] == pytest.approx(summary["end_time_s"], rel=1e-9)  # written with 10 digits
    drops = [float(r["pressure_drop_pa"]) for r in rows]
    assert all(math.isfinite(d) for d in drops)
    assert summary["target_reached"] is True  # the demo lifts its column (recorded result)
    assert drops[-1] >= summary["target_pressure_drop_pa"]
    assert max(drops) == pytest.approx(summary["max_pressure_drop_pa"], rel=1e-9)


@pytest.mark.skipif(shutil.which("pvpython") is None, reason="ParaView (pvpython) is not installed")
def test_paraview_reads_the_collections(demo):
    """ParaView's own PVD reader (pvpython): both collections load as time series, the cell fields'
    automatic ranges are the body's values only, and the name tables are text."""
    _, mesh, out, summary = demo
    script = Path(__file__).with_name("paraview_read.py")
    done = subprocess.run(["pvpython", str(script), str(out)], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    seen = json.loads(done.stdout.strip().splitlines()[-1])
    fields, faces = seen["fields"], seen["boundary"]
    assert fields["times"] == faces["times"] and fields["times"][-1] == pytest.approx(summary["end_time_s"])
    assert fields["n_cells"] == mesh.n_cells and faces["n_cells"] == mesh.n_boundary
    assert fields["ranges"]["temperature"] == pytest.approx([summary["min_temperature_k"],
                                                             summary["max_temperature_k"]], rel=1e-12)
    assert "surface_temperature" not in fields["ranges"] and "temperature" not in faces["ranges"]
    low, high = faces["ranges"]["surface_temperature"]
    assert 250.0 < low <= high < 320.0
    assert fields["names"]["material_names"] == list(mesh.material_names)
    assert faces["names"]["patch_names"] == list(mesh.patch_names)
    assert fields["names"]["coordinate_system"] == ["axisymmetric"]
