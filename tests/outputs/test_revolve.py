"""The revolved 3D export, read back by VTK's own reader: every cell has a positive volume, and the
volumes add up to the swept fraction of the axisymmetric volume (Pappus's theorem)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from vtkmodules.util.numpy_support import vtk_to_numpy
from vtkmodules.vtkFiltersVerdict import vtkCellSizeFilter
from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridReader

from fvsolver.cli import main
from fvsolver.mesh import head as H
from fvsolver.revolve import revolve
from fvsolver.vtk_io import write_fields, write_pvd

from tests.mesh.test_builders import HEAD


def read(path):
    reader = vtkXMLUnstructuredGridReader()
    reader.SetFileName(str(path))
    reader.Update()
    return reader.GetOutput()


@pytest.mark.parametrize("angle, sectors", [(360.0, 72), (270.0, 54), (90.0, 1)])
def test_revolved_cells_have_the_swept_volume(tmp_path, angle, sectors):
    mesh = H.device_head(**HEAD, n_polar=30, n_neck=6)
    temperature = 290.0 + mesh.cell_centres[:, 1]
    folder = tmp_path / "run"
    folder.mkdir()
    write_fields(folder / "fields_0000.vtu", mesh, {"temperature": temperature,
                                                     "heat_flux": np.tile([1.0, 2.0], (mesh.n_cells, 1))})
    write_pvd(folder / "fields.pvd", [(5.0, "fields_0000.vtu")])
    assert main(["revolve", str(folder), "--sectors", str(sectors), "--angle", str(angle)]) == 0
    grid = read(folder / "revolved_0000.vtu")
    size = vtkCellSizeFilter()
    size.SetInputData(grid)
    size.Update()
    volume = vtk_to_numpy(size.GetOutput().GetCellData().GetArray("Volume"))
    assert grid.GetNumberOfCells() == mesh.n_cells * sectors
    assert volume.min() > 0.0  # no inverted hexahedron or wedge
    # the polygon of `sectors` chords is inscribed in the circle: its area factor sin(d)/d per sector
    d = math.radians(angle) / sectors
    expected = mesh.cell_volumes.sum() * angle / 360.0 * math.sin(d) / d
    assert volume.sum() == pytest.approx(expected, rel=2e-3)
    exported = vtk_to_numpy(grid.GetCellData().GetArray("cell_volume"))
    assert exported.sum() == pytest.approx(mesh.cell_volumes.sum() * angle / 360.0, rel=1e-12)
    t = vtk_to_numpy(grid.GetCellData().GetArray("temperature"))
    assert t.min() == pytest.approx(temperature.min()) and t.max() == pytest.approx(temperature.max())
    # a radial vector turns with its sector; the axial component stays
    q = vtk_to_numpy(grid.GetCellData().GetArray("heat_flux"))
    np.testing.assert_allclose(np.hypot(q[:, 0], q[:, 2]), 1.0, rtol=1e-12)
    np.testing.assert_allclose(q[:, 1], 2.0)
    names = grid.GetFieldData().GetAbstractArray("material_names")
    assert [names.GetValue(i) for i in range(names.GetNumberOfValues())] == list(mesh.material_names)


def test_revolve_refuses_bad_input(tmp_path, capsys):
    assert main(["revolve", str(tmp_path)]) == 2
    assert "no fields.pvd" in capsys.readouterr().err
    mesh = H.device_head(**HEAD, n_polar=8, n_neck=2)
    with pytest.raises(Exception, match="--sectors: got 0"):
        revolve(mesh.nodes, mesh.cells, {}, sectors=0)
    with pytest.raises(Exception, match="--angle: got 400"):
        revolve(mesh.nodes, mesh.cells, {}, angle_deg=400.0)
