"""Refinement studies: the plan of runs, the analysis of each quantity, and a small study."""
from __future__ import annotations

import json
import math

import pytest

from fvsolver.cli import main
from fvsolver.errors import CaseError
from fvsolver.studies.converge import analyse, plan
from fvsolver.studies.gci import grid_convergence
from tests.device.helpers import device_case


def test_the_plan_scales_cell_counts_and_tolerance_and_shares_the_case_as_level_0():
    case = device_case()
    runs = plan(case, levels=3, ratio=1.5)
    both, mesh, time = runs["both"], runs["mesh"], runs["time"]
    assert [r.name for r in both] == ["mesh0_time0", "mesh1_time1", "mesh2_time2"]
    assert both[0].changes == {} and mesh[0].name == time[0].name == "mesh0_time0"
    # BASE has glass 2, cap 2, polar 20, neck 4 cells: times 1.5 and 2.25, rounded
    assert mesh[1].changes["mesh.polar_cells"] == 30 and mesh[2].changes["mesh.polar_cells"] == 45
    assert mesh[2].changes["mesh.glass_cells"] == round(2 * 2.25)
    assert "numerics.tolerance" not in mesh[2].changes
    assert time[2].changes == {"numerics.tolerance": pytest.approx(0.02 / 1.5 ** 6)}  # steps / 1.5 per level
    assert both[1].changes["numerics.tolerance"] == pytest.approx(0.02 / 1.5 ** 3)


@pytest.mark.parametrize("kwargs, message", [
    ({"levels": 2}, "--levels: got 2"), ({"ratio": 1.0}, "--ratio: got 1.0"), ({"studies": ("space",)}, "--study"),
])
def test_a_bad_plan_is_refused(kwargs, message):
    with pytest.raises(CaseError, match=message):
        plan(device_case(), **kwargs)


def _summaries(cells, values):
    return [{"n_cells": n, "status": "complete", "time_to_target_s": v} for n, v in zip(cells, values)]


def test_a_second_order_sequence_is_asymptotic():
    """phi = 10 + 50 h^2 with h = N^(-1/2) (a manufactured second-order sequence, four levels)."""
    cells = [100, 225, 506, 1139]
    values = [10 + 50 / n for n in cells]
    r = analyse("mesh", "time_to_target_s", _summaries(cells, values), [0.02] * 4)
    assert r.index.order == pytest.approx(2.0, rel=1e-6)
    assert r.index.extrapolated == pytest.approx(10.0, rel=1e-9)
    assert r.asymptotic is True and r.note == ""
    assert len(r.orders) == 2 and all(o == pytest.approx(2.0, rel=1e-6) for o in r.orders)
    # the finest three, as the index function gives them
    assert r.index == grid_convergence(values[-3:], cells=cells[-3:])


def test_an_order_that_keeps_changing_is_not_asymptotic():
    cells = [100, 225, 506, 1139]
    h = [n ** -0.5 for n in cells]
    values = [10.3] + [10 + 50 * x ** 2 for x in h[1:]]  # second order but for a coarsest level off the trend
    r = analyse("mesh", "time_to_target_s", _summaries(cells, values), [0.02] * 4)
    assert r.asymptotic is False and "asymptotic" in r.note


def test_a_missing_result_is_said_not_guessed():
    r = analyse("time", "time_to_target_s", _summaries([100, 100, 100], [20.0, None, 19.0]), [0.02, 0.01, 0.005])
    assert r.index is None and "no value at level(s) [1]" in r.note


def test_converge_command_line(tmp_path, capsys):
    """The mesh study of a small head: three runs, the table, and the index computed from the
    values the runs wrote."""
    from fvsolver.case.writer import dumps
    from tests.device.helpers import BASE

    case = tmp_path / "head.toml"
    case.write_text(dumps({**BASE, "time": {"end": 30.0}}))
    out = tmp_path / "conv"
    code = main(["converge", str(case), "--study", "mesh", "--result", "time_to_target_s", "--out", str(out)])
    printed = capsys.readouterr().out
    assert code == 0, printed
    assert "[3/3 done]" in printed and "mesh   time_to_target_s" in printed
    info = json.loads((out / "converge.json").read_text())
    runs = info["runs"]
    assert [r["run"] for r in runs] == ["mesh0_time0", "mesh1_time0", "mesh2_time0"]
    assert runs[0]["n_cells"] < runs[1]["n_cells"] < runs[2]["n_cells"]
    (result,) = info["results"]
    again = grid_convergence([r["time_to_target_s"] for r in runs], cells=[r["n_cells"] for r in runs])
    assert result["index"]["order"] == pytest.approx(again.order) and math.isfinite(again.order)
    assert (out / "runs" / "mesh2_time0" / "summary.json").exists()
    assert "Celik et al." in (out / "converge.md").read_text()
