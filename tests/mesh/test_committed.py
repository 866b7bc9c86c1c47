"""The committed mesh in meshes/: it matches its builder and a case can use it by name."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fvsolver.case import CaseErrors, load_case
from fvsolver.case.build import build_mesh
from fvsolver.vtk_io import read_mesh

ROOT = Path(__file__).resolve().parents[2]


def test_committed_device_head_matches_the_demo_geometry():
    committed = read_mesh(ROOT / "meshes" / "device_head.vtu")
    fresh = build_mesh(load_case(ROOT / "cases" / "demo.toml"))
    assert committed.patch_names == fresh.patch_names and committed.material_names == fresh.material_names
    np.testing.assert_allclose(committed.nodes, fresh.nodes, rtol=0, atol=1e-15)
    np.testing.assert_array_equal(committed.cells, fresh.cells)
    np.testing.assert_allclose(committed.cell_volumes, fresh.cell_volumes, rtol=1e-14)


def _with_mesh_file(tmp_path, name):
    text = (ROOT / "cases" / "demo.toml").read_text()
    start, end = text.index("[geometry]"), text.index("[mesh]")
    case = tmp_path / "from_file.toml"
    case.write_text(text[:start] + f'[geometry]\nshape = "mesh_file"\nfile = "{name}"\n\n' + text[end:])
    return case


def test_a_case_finds_the_committed_mesh_in_meshes(tmp_path):
    case = load_case(_with_mesh_file(tmp_path, "device_head.vtu"))
    assert Path(case["geometry"]["file"]).resolve() == (ROOT / "meshes" / "device_head.vtu").resolve()


def test_a_relative_mesh_path_may_not_climb_out(tmp_path):
    with pytest.raises(CaseErrors, match="may not climb out"):
        load_case(_with_mesh_file(tmp_path, "../../etc/passwd"))
