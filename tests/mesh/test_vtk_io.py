"""VTU mesh round trip, field output, PVD collections and refusal of bad files."""
from __future__ import annotations

import dataclasses
import os
import xml.etree.ElementTree as ET

import meshio
import numpy as np
import pytest

from fvsolver import vtk_io
from fvsolver.errors import MeshError
from fvsolver.mesh import builders as B
from fvsolver.mesh import head as H

from tests.mesh.test_builders import HEAD  # one set of device-head test dimensions


@pytest.fixture(scope="module")
def head():
    return H.device_head(**HEAD, n_polar=30, n_neck=6)


def assert_same_mesh(a, b):
    for f in dataclasses.fields(a):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if isinstance(x, np.ndarray):
            assert x.shape == y.shape and np.array_equal(x, y), f.name
        else:
            assert x == y, f.name


def test_device_head_round_trip(tmp_path, head):
    path = tmp_path / "head.vtu"
    vtk_io.write_mesh(head, path)
    back = vtk_io.read_mesh(path)
    assert_same_mesh(head, back)
    assert back.coordinate_system == "axisymmetric"
    assert back.material_names == ("glass", "cap")
    back.require_patches(
        ["axis", "inner_wall", "bore", "glass_outer", "cap_outer", "cap_edge", "neck_outer",
         "neck_end"]
    )
    # the file itself, as meshio sees it (the field data, VTK string arrays, read by vtk_io)
    raw, field_data = vtk_io._read_vtu(str(path))
    assert raw.points.shape == (len(head.nodes), 3) and np.all(raw.points[:, 2] == 0.0)
    assert [c.type for c in raw.cells] == ["quad", "line"]
    assert np.array_equal(raw.cell_data["material"][0], head.cell_material)
    assert np.all(raw.cell_data["material"][1] == -1)
    assert np.array_equal(raw.cell_data["patch"][1], head.boundary_patch)
    assert field_data["material_names"] == ("glass", "cap")
    assert field_data["coordinate_system"] == ("axisymmetric",)
    xml = ET.parse(path).getroot().find("UnstructuredGrid/FieldData")
    assert {a.get("Name"): a.get("type") for a in xml}["material_names"] == "String"
    assert not [p for p in os.listdir(tmp_path) if p != "head.vtu"]  # no temporary left


def test_mesh_files_with_names_as_bytes_still_read(tmp_path, head):
    """Files written before the names became VTK strings: UInt8 bytes, a zero after each name."""
    path = tmp_path / "old.vtu"
    vtk_io.write_mesh(head, path)
    tree = ET.parse(path)
    for array in tree.getroot().find("UnstructuredGrid/FieldData"):
        if array.get("type") == "String":
            codes = np.array(array.text.split(), dtype=np.int64).astype(np.uint8)
            array.tag, array.attrib["type"] = "DataArray", "UInt8"
            array.attrib["NumberOfTuples"] = str(codes.size)
            array.text = " ".join(map(str, codes.tolist()))
    tree.write(path, encoding="utf-8", xml_declaration=True)
    assert_same_mesh(head, vtk_io.read_mesh(path))


def test_planar_mesh_round_trip_and_replacement(tmp_path):
    path = tmp_path / "plate.vtu"
    vtk_io.write_mesh(B.solid_sphere(1.0, 2), path)
    plate = B.warped_rectangle(0.2, 0.1, 6, 4, 0.08, material="steel")
    vtk_io.write_mesh(plate, str(path))  # replaces the previous file
    back = vtk_io.read_mesh(str(path))
    assert_same_mesh(plate, back)
    assert back.coordinate_system == "planar" and back.material_names == ("steel",)


def test_non_ascii_names_survive(tmp_path):
    m = B.rectangle(1.0, 1.0, 2, 2, material="laine feutrée")
    vtk_io.write_mesh(m, tmp_path / "m.vtu")
    assert vtk_io.read_mesh(tmp_path / "m.vtu").material_names == ("laine feutrée",)


def test_write_fields_and_pvd(tmp_path, head):
    temperature = 300.0 + head.cell_centres[:, 1]
    flux = np.full(head.n_boundary, np.nan)
    cap = head.patch_faces("cap_outer")
    flux[cap] = 2.0 * head.boundary_centres[cap, 0]
    wall = head.boundary_centres[:, 0] + 5.0
    names = []
    for step, time in enumerate([0.0, 0.5, 2.0]):
        name = f"run_{step:04d}.vtu"
        vtk_io.write_fields(
            tmp_path / name,
            head,
            {"temperature": temperature + time, "heat_flux": head.cell_centres},
            {"evaporation": flux, "temperature": wall},
            boundary_path=tmp_path / f"faces_{step:04d}.vtu",
        )
        names.append((time, name))
    vtk_io.write_pvd(tmp_path / "run.pvd", names)

    root = ET.parse(tmp_path / "run.pvd").getroot()
    assert root.tag == "VTKFile" and root.attrib["type"] == "Collection"
    sets = root.find("Collection").findall("DataSet")
    assert [float(d.attrib["timestep"]) for d in sets] == [0.0, 0.5, 2.0]
    for step, ((time, name), entry) in enumerate(zip(names, sets)):
        # the cell file holds the quads only: no boundary value can stretch a cell field's range
        raw, fields = vtk_io._read_vtu(str(tmp_path / entry.attrib["file"]))
        assert [c.type for c in raw.cells] == ["quad"]
        (t_quad,) = raw.cell_data["temperature"]
        assert np.allclose(t_quad, temperature + time)
        (vec_quad,) = raw.cell_data["heat_flux"]
        assert vec_quad.shape == (head.n_cells, 3)
        assert np.allclose(vec_quad[:, :2], head.cell_centres) and np.all(vec_quad[:, 2] == 0)
        assert "evaporation" not in raw.cell_data and "patch" not in raw.cell_data
        (v_quad,) = raw.cell_data["cell_volume"]
        assert np.allclose(v_quad, head.cell_volumes, rtol=1e-15)
        assert np.array_equal(raw.cell_data["material"][0], head.cell_material)
        assert fields["material_names"] == head.material_names
        # the boundary file holds the faces only
        raw, fields = vtk_io._read_vtu(str(tmp_path / f"faces_{step:04d}.vtu"))
        assert [c.type for c in raw.cells] == ["line"]
        assert np.array_equal(raw.cells[0].data, head.boundary_nodes)
        (t_line,) = raw.cell_data["temperature"]
        assert np.allclose(t_line, wall)
        (e_line,) = raw.cell_data["evaporation"]
        assert np.allclose(e_line[cap], flux[cap]) and np.isnan(np.delete(e_line, cap)).all()
        assert np.allclose(raw.cell_data["face_area"][0], head.boundary_areas)
        assert np.array_equal(raw.cell_data["patch"][0], head.boundary_patch)
        assert "material" not in raw.cell_data and "heat_flux" not in raw.cell_data
        assert fields["patch_names"] == head.patch_names
    assert sorted(os.listdir(tmp_path)) == sorted([n for _, n in names] + ["run.pvd"]
                                                  + [f"faces_{k:04d}.vtu" for k in range(3)])


@pytest.mark.parametrize(
    "arrays, item",
    [
        (lambda m: ({"T": np.zeros(3)}, None), r"cell_fields\['T'\]: got shape \(3,\)"),
        (lambda m: ({"material": np.zeros(m.n_cells)}, None), "'material' is not allowed"),
        (lambda m: ({"q": np.zeros((m.n_cells, 4))}, None), r"cell_fields\['q'\]"),
        (lambda m: ({}, {"h": np.zeros((m.n_boundary, 2))}), r"boundary_fields\['h'\]"),
        (lambda m: ({"T": np.zeros(m.n_cells)}, {"T": np.zeros(m.n_boundary)}),
         "boundary_fields: given without boundary_path"),
        (lambda m: ([1.0], None), "cell_fields: got list"),
    ],
)
def test_write_fields_refuses_bad_arrays(tmp_path, head, arrays, item):
    cell_fields, boundary_fields = arrays(head)
    with pytest.raises(MeshError, match=item):
        vtk_io.write_fields(tmp_path / "bad.vtu", head, cell_fields, boundary_fields,
                            boundary_path=None if "given without" in item else tmp_path / "faces.vtu")
    assert not os.listdir(tmp_path)


@pytest.mark.parametrize(
    "entries, item",
    [
        ([(0.0, "a.vtu"), (0.0, "b.vtu")], r"entries\[1\]"),
        ([(float("nan"), "a.vtu")], r"entries\[0\]"),
        ([(0.0, "/abs/a.vtu")], r"entries\[0\]"),
        ([(0.0,)], r"entries\[0\]"),
    ],
)
def test_write_pvd_refuses_bad_entries(tmp_path, entries, item):
    with pytest.raises(MeshError, match=item):
        vtk_io.write_pvd(tmp_path / "s.pvd", entries)
    assert not os.listdir(tmp_path)


def test_write_pvd_escapes_file_names(tmp_path):
    vtk_io.write_pvd(tmp_path / "s.pvd", [(1e-3, 'odd "name" & co.vtu')])
    entry = ET.parse(tmp_path / "s.pvd").getroot().find("Collection/DataSet")
    assert entry.attrib["file"] == 'odd "name" & co.vtu'
    assert float(entry.attrib["timestep"]) == 1e-3


# ----------------------------------------------------------------------------- bad files
def square():
    return B.rectangle(1.0, 1.0, 2, 2)


def test_unknown_cell_type_is_refused(tmp_path):
    path = tmp_path / "tri.vtu"
    points = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], dtype=float)
    meshio.write(path, meshio.Mesh(points, [("triangle", np.array([[0, 1, 2]]))],
                                   cell_data={"material": [np.array([0])]}))
    with pytest.raises(MeshError, match=r"tri\.vtu.*'triangle'"):
        vtk_io.read_mesh(path)


def test_missing_material_is_refused(tmp_path):
    path = tmp_path / "bare.vtu"
    m = square()
    points = np.column_stack([m.nodes, np.zeros(len(m.nodes))])
    meshio.write(path, meshio.Mesh(points, [("quad", m.cells)]))
    with pytest.raises(MeshError, match=r"bare\.vtu.*'material' is missing"):
        vtk_io.read_mesh(path)


def test_missing_name_tables_are_refused(tmp_path):
    path = tmp_path / "nonames.vtu"
    m = square()
    points = np.column_stack([m.nodes, np.zeros(len(m.nodes))])
    meshio.write(path, meshio.Mesh(
        points, [("quad", m.cells), ("line", m.boundary_nodes)],
        cell_data={"material": [m.cell_material, -np.ones(m.n_boundary, int)],
                   "patch": [-np.ones(m.n_cells, int), m.boundary_patch]}))
    with pytest.raises(MeshError, match=r"nonames\.vtu.*'material_names' is missing"):
        vtk_io.read_mesh(path)


def test_inverted_quads_are_refused(tmp_path):
    m = square()
    path = tmp_path / "inverted.vtu"
    vtk_io.write_mesh(dataclasses.replace(m, cells=m.cells[:, ::-1].copy()), path)
    with pytest.raises(MeshError, match=r"inverted\.vtu: cells \[0, 1, 2, 3\]: inverted"):
        vtk_io.read_mesh(path)


def test_line_cells_off_the_boundary_are_refused(tmp_path):
    m = square()
    lines = m.boundary_nodes.copy()
    lines[0] = m.face_nodes[0]  # an interior face tagged as a boundary face
    path = tmp_path / "inside.vtu"
    vtk_io.write_mesh(dataclasses.replace(m, boundary_nodes=lines), path)
    with pytest.raises(MeshError, match=r"inside\.vtu: patch '\w+': a face .* not on the boundary"):
        vtk_io.read_mesh(path)


def test_off_plane_points_and_garbage_are_refused(tmp_path):
    path = tmp_path / "bent.vtu"
    m = square()
    points = np.column_stack([m.nodes, np.linspace(0, 1, len(m.nodes))])
    meshio.write(path, meshio.Mesh(points, [("quad", m.cells)],
                                   cell_data={"material": [m.cell_material]}))
    with pytest.raises(MeshError, match=r"bent\.vtu.*z = 0 plane"):
        vtk_io.read_mesh(path)
    (tmp_path / "junk.vtu").write_text("not xml at all")
    with pytest.raises(MeshError, match=r"junk\.vtu: cannot be read"):
        vtk_io.read_mesh(tmp_path / "junk.vtu")
    with pytest.raises(MeshError, match=r"missing\.vtu: cannot be read"):
        vtk_io.read_mesh(tmp_path / "missing.vtu")


def test_unknown_format_version_is_refused(tmp_path):
    path = tmp_path / "future.vtu"
    vtk_io.write_mesh(square(), path)
    text = path.read_text(encoding="utf-8")
    marker = 'Name="mesh_format" NumberOfTuples="1" format="ascii">1<'
    assert marker in text
    path.write_text(text.replace(marker, marker.replace(">1<", ">99<")), encoding="utf-8")
    with pytest.raises(MeshError, match=r"future\.vtu: mesh_format \[99\]"):
        vtk_io.read_mesh(path)


def test_a_failed_write_keeps_the_previous_file(tmp_path, monkeypatch):
    path = tmp_path / "keep.vtu"
    vtk_io.write_mesh(square(), path)
    before = path.read_bytes()

    def broken(filename, *args, **kwargs):
        with open(filename, "w") as handle:
            handle.write("half a file")
        raise OSError("disk full")

    monkeypatch.setattr(vtk_io.meshio, "write", broken)
    with pytest.raises(OSError, match="disk full"):
        vtk_io.write_mesh(B.rectangle(2.0, 1.0, 3, 3), path)
    assert path.read_bytes() == before
    assert os.listdir(tmp_path) == ["keep.vtu"]


def test_written_files_get_the_usual_permissions(tmp_path):
    reference = tmp_path / "plain.txt"
    reference.write_text("x")
    vtk_io.write_mesh(square(), tmp_path / "m.vtu")
    vtk_io.write_pvd(tmp_path / "s.pvd", [(0.0, "m.vtu")])
    mode = reference.stat().st_mode & 0o777
    assert (tmp_path / "m.vtu").stat().st_mode & 0o777 == mode
    assert (tmp_path / "s.pvd").stat().st_mode & 0o777 == mode
