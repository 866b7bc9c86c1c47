"""What the run's plots show a user: flat series drawn flat without offset text, the computed
scenario under the title, the target marker over the frame, the condensation split and its note,
the evaporative cooling power, all requested field panels."""
from __future__ import annotations

import numpy as np
import pytest

from fvsolver import plotting
from fvsolver.mesh import head as H

from tests.mesh.test_builders import HEAD


@pytest.fixture
def figures(monkeypatch):
    """The figures the plotting functions would have saved, kept open for inspection."""
    kept = []
    monkeypatch.setattr(plotting, "_save", lambda fig, path, **kw: kept.append(fig))
    yield kept
    for fig in kept:
        fig.clear()


def _history(n: int = 30, end: float = 23.0) -> dict:
    t = np.linspace(0.0, end, n)
    re_evaporation = np.where(t < 20.0, 0.28e-6 * t / 20.0, 0.20e-6)  # a face runs dry at 20 s
    return {
        "time_s": t, "pressure_drop_pa": 30.0 * t,
        "mean_cap_temperature_k": 297.15 - 0.03 * t,
        "second_bulb_temperature_k": np.full(n, 297.15) + 1e-13 * np.sin(t),   # round-off only
        "evaporation_rate_kg_s": np.full(n, 0.4e-6),
        "condensation_rate_kg_s": 0.05e-6 * np.ones(n),
        "condensing_rate_kg_s": re_evaporation + 0.05e-6, "re_evaporation_rate_kg_s": re_evaporation,
        "cap_water_kg": 6.427006829e-3 + 1e-14 * np.sin(t),                   # a reservoir keeps it full
        "evaporative_cooling_w": np.full(n, 0.98), "heat_in_w": np.full(n, -0.9),
    }


def test_history_plot_reads_as_a_user_needs(figures):
    h = _history()
    plotting.history_plot(h, "unused.png", 690.0, 23.0, title="My head, 24 C, 45 %",
                          subtitle="room 25.0 °C, 60 % RH, air 0.20 m/s; dichloromethane")
    (fig,) = figures
    fig.canvas.draw()
    assert "room 25.0 °C, 60 % RH" in fig._suptitle.get_text() and "My head" in fig._suptitle.get_text()
    axes = fig.get_axes()
    # no axis uses an offset ("1e-11+6.427006829") and flat series get sane limits
    for ax in axes:
        assert ax.yaxis.get_offset_text().get_text() == "", ax.get_ylabel()
    temperature = next(ax for ax in axes if ax.get_ylabel() == "temperature (K)")
    low, high = temperature.get_ylim()
    assert high - low > 0.1
    # the reservoir's constant cap water is said in the legend, not drawn as a line of round-off
    labels = [t.get_text() for ax in axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert any("its water stays at 6.43 g" in text for text in labels)
    assert not any(text.startswith("water held by the cap") for text in labels)
    assert any("re-evaporating from warm inner faces (drops as faces run dry)" in text for text in labels)
    assert any(ax.get_ylabel() == "power (W)" for ax in axes)
    # the crossing on the last step is drawn over the frame, not clipped away
    marker = [line for line in axes[0].get_lines() if line.get_marker() == "o"]
    assert marker and not marker[0].get_clip_on()


def test_a_stalled_run_quotes_the_summary_largest_difference(figures):
    h = _history()
    plotting.history_plot(h, "unused.png", 1000.0, None, max_pressure_drop_pa=-3.2)
    texts = [t.get_text() for t in figures[0].get_axes()[0].texts]
    assert any("largest -3.2 Pa" in t for t in texts), texts


def test_a_running_device_history_names_its_tip_not_a_target(figures):
    plotting.history_plot(_history(), "unused.png", 647.4, 21.42, device=True)
    plotting.history_plot(_history(), "unused.png", 1000.0, None, max_pressure_drop_pa=690.0, device=True)
    tipped, never = (fig.get_axes()[0] for fig in figures)
    labels = [t.get_text() for t in tipped.get_legend().get_texts()] if tipped.get_legend() else []
    labels += [t.get_text() for ax in figures[0].get_axes() if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert any(text.startswith("tips at 647.4") for text in labels), labels
    assert any("first tip at 21.42 s" in t.get_text() for t in tipped.texts)
    assert any("never tipped (largest 690 Pa)" in t.get_text() for t in never.texts)
    assert not any("target" in t.get_text() for ax in (tipped, never) for t in ax.texts)


def test_all_requested_fields_get_a_panel(figures):
    mesh = H.device_head(**HEAD, n_polar=12, n_neck=3)
    fields = [290.0 + k + mesh.cell_centres[:, 1] for k in range(6)]
    plotting.temperature_field_plot(mesh, fields, "unused.png", times=[30, 120, 600, 1800, 3600, 7200],
                                    notes=["", "", "", "target reached", "", "end"])
    titles = [ax.get_title() for ax in figures[0].get_axes() if ax.get_title()]
    assert [t.split("\n")[0] for t in titles] == ["t = 30 s", "t = 2 min", "t = 10 min",
                                                  "t = 30 min, target reached", "t = 1 h", "t = 2 h, end"]
