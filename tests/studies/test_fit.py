"""Calibration: known parameters recovered from a synthetic history with noise.

The "measured" histories here are SYNTHETIC: made by the solver itself with chosen values,
plus seeded Gaussian noise, and say so in their CSV's first line. They test that the fit
finds the chosen values again and that its intervals hold them; they are not measurements.
"""
from __future__ import annotations

import copy
import json

import numpy as np
import pytest

from fvsolver.case.loader import validate_data
from fvsolver.cli import main
from fvsolver.errors import CaseError
from fvsolver.studies.fit import FitKey, Measured, Model, confidence, parse_fit, read_measured
from tests.device.helpers import BASE, device_case

TINY = {"glass_cells": 2, "cap_cells": 2, "polar_cells": 8, "neck_cells": 2}


def _synthetic(case, truth: dict, columns: dict, times, rng, path):
    """Write a synthetic history: the fit's own model at ``truth`` (same steps and sampling as its
    trials) plus noise of ``columns[name]`` (standard deviation)."""
    keys = [FitKey(k, 0.5 * v, 2.0 * v, v) for k, v in truth.items()]
    model = Model(case, keys, Measured(np.asarray(times, float), {n: np.zeros(len(times)) for n in columns}))
    clean = model.computed(np.array(list(truth.values())))
    lines = ["# SYNTHETIC data for a test, made by fvsolver with " + ", ".join(f"{k} = {v}" for k, v in truth.items())
             + " plus seeded Gaussian noise; not a measurement", "time_s," + ",".join(columns)]
    for i, t in enumerate(times):
        values = [clean[n][i] + rng.normal(0.0, s) for n, s in columns.items()]
        lines.append(f"{float(t)!r}," + ",".join(repr(float(v)) for v in values))
    path.write_text("\n".join(lines) + "\n")
    return path


def test_fit_recovers_a_known_air_speed_within_its_interval(tmp_path, rng, capsys):
    data = copy.deepcopy(BASE)
    data.update(mesh=TINY, time={"end": 12.0})
    case_path = tmp_path / "head.toml"
    from fvsolver.case.writer import dumps

    case_path.write_text(dumps(data))
    from fvsolver.case import load_case

    case = load_case(case_path)
    times = np.linspace(1.0, 12.0, 12)
    measured = _synthetic(case, {"room.air_speed": 0.35}, {"pressure_drop_pa": 1.0}, times, rng,
                          tmp_path / "measured.csv")
    out = tmp_path / "fit"
    code = main(["fit", str(case_path), "--data", str(measured), "--fit", "room.air_speed=0.05:1.5", "--out", str(out)])
    captured = capsys.readouterr()
    printed = captured.out
    assert code == 0, captured.err
    info = json.loads((out / "fit.json").read_text())
    (key,) = info["keys"]
    assert key["low_95"] < 0.35 < key["high_95"]  # the chosen value lies inside the interval
    assert key["value"] == pytest.approx(0.35, rel=0.05) and key["start"] == 0.2
    assert key["high_95"] - key["low_95"] < 0.1  # and the interval is informative
    assert info["rms_residual"]["pressure_drop_pa"] == pytest.approx(1.0, rel=0.5)  # about the noise added
    assert (out / "fit.png").stat().st_size > 20_000 and "95 % interval" in (out / "fit.md").read_text()
    assert "room.air_speed = 0.3" in printed


@pytest.mark.slow
def test_fit_recovers_two_known_values_from_two_columns(tmp_path, rng):
    from fvsolver.studies.fit import fit

    case = device_case(mesh=TINY, time={"end": 15.0})
    truth = {"room.air_speed": 0.3, "cap.fibre_conductivity": 0.3}
    times = np.linspace(1.0, 15.0, 15)
    path = _synthetic(case, truth, {"pressure_drop_pa": 0.5, "mean_cap_temperature_k": 0.002}, times, rng,
                      tmp_path / "m.csv")
    keys = [parse_fit("room.air_speed=0.05:1.5", case), parse_fit("cap.fibre_conductivity=0.05:1.0", case)]
    res = fit(case, read_measured(path), keys)
    for (lo, hi), true in zip(res.intervals, truth.values()):
        assert lo < true < hi


def test_fit_keys_and_data_are_checked(tmp_path):
    case = device_case()
    assert parse_fit("room.air_speed", case).low == pytest.approx(0.02)  # a tenth of 0.2
    with pytest.raises(CaseError, match="has no value at 'room.air_sped'"):
        parse_fit("room.air_sped=0:1", case)
    with pytest.raises(CaseError, match="expected a number to fit"):
        parse_fit("room.convection", case)
    with pytest.raises(CaseError, match="LOW 2 must be below HIGH 1"):
        parse_fit("room.air_speed=2:1", case)
    with pytest.raises(CaseError, match="the bound 1.5 is not a valid value"):
        parse_fit("room.relative_humidity=0.1:1.5", case)
    bad = tmp_path / "bad.csv"
    bad.write_text("t,p\n0,1\n")
    with pytest.raises(CaseError, match="no time_s column"):
        read_measured(bad)
    bad.write_text("time_s,pressure_drop_pa\n1,2\n0.5,3\n")
    with pytest.raises(CaseError, match="increase"):
        read_measured(bad)


def test_intervals_of_a_straight_line_fit_match_the_textbook_formula(rng):
    """For y = a + b x the linearised interval is exact: the standard error of the slope is
    s / sqrt(sum (x - mean x)^2) (any regression text, e.g. Montgomery & Runger)."""
    x = np.linspace(0.0, 1.0, 30)
    y = 1.0 + 2.0 * x + rng.normal(0.0, 0.1, x.size)
    jac = np.column_stack([np.ones_like(x), x])
    coef, *_ = np.linalg.lstsq(jac, y, rcond=None)
    r = jac @ coef - y
    se, corr, t = confidence(jac, r)
    s = np.sqrt(r @ r / (x.size - 2))
    assert se[1] == pytest.approx(s / np.sqrt(((x - x.mean()) ** 2).sum()), rel=1e-10)
    assert t == pytest.approx(2.048, abs=1e-3)  # Student t, 28 degrees of freedom, 97.5 % (tables)
    assert corr[0, 0] == pytest.approx(1.0)


def test_validate_data_helper_is_unchanged():
    assert validate_data(copy.deepcopy(BASE))[1] == []
