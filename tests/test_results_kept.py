"""A run that computed keeps its result; a result out of range is never reported as a clean one.

- plots and reports cannot lose a result (titles are plain text of bounded length; a drawing
  failure is a warning in summary.json),
- perfectly dry air (relative humidity 0) runs to its summary,
- the resolved case round-trips any character, emoji included,
- a property used outside its data is a warning; a state below 0 K or a vapour-space wall above
  the fluid's critical temperature stops the run with exit 3 and the last good fields,
- the balance error of a run where next to nothing moves is measured against a scale that
  cannot vanish.
"""
from __future__ import annotations

import json
import re
import time
from pathlib import Path

import numpy as np
import pytest

import fvsolver
from fvsolver.cli import main
from fvsolver.pipeline import run
from fvsolver.safeguards import TITLE_LIMIT, plain_title

ROOT = Path(__file__).resolve().parents[1]
GLASS = (ROOT / "cases" / "glass_bulb_cooling.toml").read_text()
DEMO = (ROOT / "cases" / "demo.toml").read_text()


def write(tmp_path: Path, text: str, name: str = "case.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def short_demo(seconds: float = 5.0) -> str:
    """The demo cut to ``seconds``, with its earlier coarser settings (4 cap cells, tolerance 0.02 K)."""
    return DEMO.replace("cap_cells = 8", "cap_cells = 4").replace("tolerance = 0.001", "tolerance = 0.02").replace("end = 1800.0", f"end = {seconds}").replace("field_times = [30.0, 120.0, 600.0]",
                                                                    f"field_times = [{seconds / 2}]")


# ----------------------------------------------------------------------------- plots and titles
def test_plain_title_shows_math_as_typed_and_is_cut():
    assert plain_title("cost $x^2$ \\alpha") == r"cost \$x^2\$ \alpha"
    cut = plain_title("a" * 100_000)
    assert len(cut) == TITLE_LIMIT and cut.endswith("\u2026")
    assert plain_title("two\nlines\x00") == "two lines "


def test_bad_math_in_a_long_title_neither_fails_nor_stalls_the_plots(tmp_path):
    title = r"$\notacommand{x}$ " + "very long title " * 6_000  # ~100,000 characters
    text = GLASS.replace('title = "Glass bulb cooling under a cold cap (conduction only)"', f'title = "{title}"')
    start = time.perf_counter()
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 0
    assert time.perf_counter() - start < 60  # 215 s and 10 GB when the whole title was laid out
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "complete" and summary["warnings"] == []
    assert (tmp_path / "o" / "temperature_field.png").is_file()


def test_a_plot_failure_keeps_the_summary_with_a_warning(tmp_path, monkeypatch):
    import fvsolver.plotting

    def broken(*args, **kwargs):
        raise RuntimeError("the drawing library gave up")

    monkeypatch.setattr(fvsolver.plotting, "temperature_field_plot", broken)
    case = fvsolver.load_case(write(tmp_path, GLASS.replace("end = 600.0", "end = 20.0").replace(
        "field_times = [10.0, 60.0, 300.0]", "field_times = [10.0]")))
    result = run(case, tmp_path / "o")
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "complete" == result.summary["status"]
    assert any("could not be written" in w and "gave up" in w for w in summary["warnings"])
    assert (tmp_path / "o" / "history.csv").is_file() and (tmp_path / "o" / "fields.pvd").is_file()


def test_a_perfectly_dry_room_runs_to_its_summary(tmp_path):
    text = short_demo().replace("relative_humidity = 0.45", "relative_humidity = 0.0")
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 0
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "complete"
    assert summary["room"]["dew_point_k"] is None  # dry air has no dew point


# the figures' font has no thermometer glyph: matplotlib draws a box there and says so
@pytest.mark.filterwarnings("ignore:Glyph 127777.*missing from font:UserWarning")
def test_an_emoji_title_comes_back_from_case_resolved(tmp_path, capsys):
    title = "Bulb \U0001F321\ufe0f test \u00b0C \"quoted\" back\\slash tab\tend"
    text = GLASS.replace('"Glass bulb cooling under a cold cap (conduction only)"',
                         json.dumps(title, ensure_ascii=False)).replace("end = 600.0", "end = 20.0").replace(
        "field_times = [10.0, 60.0, 300.0]", "field_times = [10.0]")
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 0
    resolved = tmp_path / "o" / "case_resolved.toml"
    assert main(["check", str(resolved)]) == 0, capsys.readouterr().err
    assert fvsolver.load_case(resolved)["title"] == title
    assert fvsolver.load_case(resolved).sha256 == fvsolver.load_case(tmp_path / "case.toml").sha256


# ----------------------------------------------------------------------------- out of range
def test_a_table_property_used_beyond_its_temperatures_is_a_warning(tmp_path):
    """The glass next to the 289 K cap falls below the table's 290 K: the run completes, and says so."""
    text = GLASS.replace("conductivity = 1.14", "conductivity = {temperatures = [290.0, 300.0], values = [1.1, 1.2]}")
    text = text.replace("end = 600.0", "end = 60.0").replace("field_times = [10.0, 60.0, 300.0]", "field_times = []")
    result = run(fvsolver.load_case(write(tmp_path, text)), tmp_path / "o", plots=False)
    assert result.summary["status"] == "complete"
    [warning] = [w for w in result.summary["warnings"] if "property used out of range" in w]
    assert "glass conductivity" in warning and "290-300 K" in warning


def test_a_state_below_absolute_zero_stops_with_exit_3_and_the_last_good_fields(tmp_path, capsys):
    from fvsolver.vtk_io import read_cell_field

    text = GLASS.replace("fixed_temperature = 289.0", "heat_flux = -1e6")  # a heat sink no body can feed
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 3
    assert "below absolute zero" in capsys.readouterr().err
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "failed" and "below absolute zero" in summary["reason"]
    pvd = (tmp_path / "o" / "fields.pvd").read_text()
    last = re.findall(r'file="([^"]+)"', pvd)[-1]
    temperature = read_cell_field(tmp_path / "o" / last, "temperature")
    assert temperature.min() > 0.0  # the last good state, not the bad one


def test_a_wall_above_the_critical_temperature_stops_the_device_run(tmp_path):
    """Dichloromethane's critical temperature 510 K (NIST WebBook; from memory): a 10 MW/m2 lamp
    on the bare glass would put a supercritical fluid in the head (a coarse mesh: it gets there sooner)."""
    text = short_demo(30.0).replace("[time]", '[[heat_sources]]\npatch = "glass_outer"\nheat_flux = 1e7\n\n[time]')
    for old, new in (("polar_cells = 40", "polar_cells = 12"), ("neck_cells = 12", "neck_cells = 3"),
                     ("glass_cells = 4", "glass_cells = 2"), ("cap_cells = 4", "cap_cells = 2")):
        assert old in text
        text = text.replace(old, new)
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 3
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "failed" and "critical temperature" in summary["reason"]
    assert any("dichloromethane's data" in w for w in summary["warnings"])


def test_a_run_past_its_step_limit_stops_and_says_how_far_it_got(tmp_path):
    text = GLASS.replace("max_step = 30.0", "max_step = 30.0\nmax_steps = 25")  # the run takes 67
    assert main(["run", str(write(tmp_path, text)), "--out", str(tmp_path / "o"), "-q"]) == 3
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["status"] == "failed" and "numerics.max_steps = 25" in summary["reason"]
    assert summary["n_steps"] == 25


def test_a_saturated_room_where_nothing_moves_has_a_small_balance_error(tmp_path):
    """Air at 100 % relative humidity: the wet-bulb depression is zero (ASHRAE Handbook
    Fundamentals 2017, ch. 1), so next to no heat moves; the errors were 0.08-1.4 when divided
    by that near-zero exchange."""
    text = short_demo(60.0).replace("relative_humidity = 0.45", "relative_humidity = 1.0")
    result = run(fvsolver.load_case(write(tmp_path, text)), None)
    assert result.summary["status"] == "complete"
    assert result.summary["energy_balance_relative_error"] < 1e-5
    assert all(e < 1e-5 for e in result.summary["mass_balance_relative_error"].values())
    assert np.ptp(result.temperature) < 1e-6
