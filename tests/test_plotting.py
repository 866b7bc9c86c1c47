"""Figures: the mirrored geometry, the material outline, and the PNGs the plot functions write."""
from __future__ import annotations

import io
import math

import numpy as np
import pytest

from fvsolver import plotting
from fvsolver.mesh import builders as B
from fvsolver.mesh import head as H
from fvsolver.mesh.core import polygon_metrics

RI, TG, TC = 0.020, 0.0015, 0.003
MIN_PNG_BYTES = 5_000


def _png_ok(path) -> None:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(data) > MIN_PNG_BYTES, len(data)


@pytest.fixture
def shell():
    return B.spherical_shell(0.02, 0.022, 4, 16)


@pytest.fixture
def capped():
    return H.two_layer_shell(RI, TG, TC, (0.0, math.radians(100.0)), 3, 3, 24)


def _field(mesh) -> np.ndarray:
    r, z = mesh.cell_centres.T
    return 288.0 + 4.0 * (z - z.min()) / np.ptp(z) + 100.0 * r


def test_mirrored_polygons_cover_the_full_section(shell):
    poly = plotting.mirrored_polygons(shell)
    n = shell.n_cells
    assert poly.shape == (2 * n, 4, 2)
    assert poly[..., 0].min() == pytest.approx(-0.022, rel=1e-12)
    assert poly[..., 0].max() == pytest.approx(0.022, rel=1e-12)
    np.testing.assert_array_equal(poly[:n], shell.nodes[shell.cells])
    # the mirror image of cell k is row n + k: same z values, r -> -r
    np.testing.assert_allclose(np.sort(poly[n:, :, 0], axis=1), np.sort(-poly[:n, :, 0], axis=1))
    np.testing.assert_allclose(np.sort(poly[n:, :, 1], axis=1), np.sort(poly[:n, :, 1], axis=1))
    # both halves stay counter-clockwise with the same areas
    flat = poly.reshape(-1, 2)
    areas, _ = polygon_metrics(flat, np.arange(flat.shape[0]).reshape(-1, 4))
    assert np.all(areas > 0.0)
    np.testing.assert_allclose(areas[n:], areas[:n], rtol=1e-12)
    np.testing.assert_allclose(areas.sum(), 2.0 * shell.cell_areas.sum(), rtol=1e-12)


def test_planar_meshes_are_not_mirrored():
    mesh = B.rectangle(0.03, 0.01, 6, 2, "planar", origin=(0.01, 0.0))
    poly = plotting.mirrored_polygons(mesh)
    assert poly.shape == (mesh.n_cells, 4, 2)
    assert poly[..., 0].min() == pytest.approx(0.01)
    seg = plotting.outline_segments(mesh)
    assert seg.shape == (2 * (6 + 2), 2, 2)  # the perimeter only


def test_outline_has_the_material_interface_and_no_axis(capped):
    seg = plotting.outline_segments(capped)
    assert seg.ndim == 3 and seg.shape[1:] == (2, 2)
    radius = np.hypot(seg[..., 0], seg[..., 1])
    on_interface = np.all(np.abs(radius - (RI + TG)) < 1e-9, axis=1)
    glass = capped.material_names.index("glass")
    between = (capped.cell_material[capped.owner] == glass) != (
        capped.cell_material[capped.neighbour] == glass
    )
    n_interface = int(between.sum())
    assert n_interface > 0
    # the interface and its mirror image; the rest of r = Ro is the bare glass outside the cap
    bare = capped.patch_faces("glass_outer").size
    assert on_interface.sum() == 2 * (n_interface + bare)
    # mirrored: every segment has an image at r -> -r
    half = seg.shape[0] // 2
    np.testing.assert_allclose(seg[half:, :, 0], -seg[:half, :, 0])
    # nothing lies along the axis, which is inside the full cross-section
    assert not np.any(np.all(np.abs(seg[..., 0]) < 1e-12, axis=1))
    # the inner wall and the cap's outer face are outlined
    assert np.any(np.all(np.abs(radius - RI) < 1e-9, axis=1))
    assert np.any(np.all(np.abs(radius - (RI + TG + TC)) < 1e-9, axis=1))


def test_single_material_outline_is_the_boundary_only(shell):
    seg = plotting.outline_segments(shell)
    n_boundary = shell.patch_faces("inner").size + shell.patch_faces("outer").size
    assert seg.shape[0] == 2 * n_boundary


def test_temperature_field_plot_single_and_panels(tmp_path, capped):
    T = _field(capped)
    one = tmp_path / "field.png"
    plotting.temperature_field_plot(capped, T, one, title="capped shell")
    _png_ok(one)
    panels = tmp_path / "panels.png"
    plotting.temperature_field_plot(capped, [T - 2.0, T, T + 1.0], panels, times=[45.0, 300.0, 7200.0])
    _png_ok(panels)
    assert panels.stat().st_size > one.stat().st_size  # three panels hold more picture
    assert not list(tmp_path.glob("*.part"))  # written atomically, no leftovers


def test_temperature_field_plot_on_a_plain_shell_and_a_uniform_field(tmp_path, shell):
    path = tmp_path / "uniform.png"
    plotting.temperature_field_plot(shell, np.full(shell.n_cells, 293.15), path, times=12.0)
    _png_ok(path)


def test_temperature_field_plot_rejects_bad_input(tmp_path, shell):
    with pytest.raises(ValueError, match="expected"):
        plotting.temperature_field_plot(shell, np.zeros(shell.n_cells + 1), tmp_path / "a.png")
    with pytest.raises(ValueError, match="one time"):
        plotting.temperature_field_plot(
            shell, [np.zeros(shell.n_cells)] * 2, tmp_path / "b.png", times=[1.0]
        )
    with pytest.raises(ValueError, match="finite"):
        plotting.temperature_field_plot(shell, np.full(shell.n_cells, np.nan), tmp_path / "c.png")
    assert not list(tmp_path.iterdir())


def _history(n: int = 120, end: float = 3600.0) -> dict:
    t = np.linspace(0.0, end, n)
    dp = 1500.0 * (1.0 - np.exp(-t / 900.0))
    return {
        "time_s": t,
        "pressure_drop_pa": dp,
        "head_pressure_pa": 46_000.0 - dp,
        "second_bulb_pressure_pa": np.full(n, 46_000.0),
        "mean_cap_temperature_k": 293.15 - 6.0 * (1.0 - np.exp(-t / 400.0)),
        "mean_inner_wall_temperature_k": 293.15 - 4.5 * (1.0 - np.exp(-t / 500.0)),
        "second_bulb_temperature_k": np.full(n, 293.15),
        "evaporation_rate_kg_s": 1e-6 + 2e-6 * np.exp(-t / 3000.0),
        "condensation_rate_kg_s": 1.5e-6 * (1.0 - np.exp(-t / 300.0)),
        "cap_water_kg": 0.004 - 1e-6 * t,
    }


def test_history_plot_full(tmp_path):
    path = tmp_path / "history.png"
    plotting.history_plot(_history(), path, 1200.0, 900.0 * math.log(5.0), title="run")
    _png_ok(path)


def test_history_plot_panels_keep_the_figure_width_whatever_their_legends(tmp_path, monkeypatch):
    """Every column the solver writes, with its longest labels (a running head's split rates and
    cooling): each panel keeps most of the figure's width, its legend rows above it no wider than
    it. (A legend row wider than its panel once made the constrained layout shrink every panel to
    a quarter of the figure.)"""
    h = _history()
    n = h["time_s"].size
    h.update({"condensing_rate_kg_s": 2e-6 * np.ones(n), "re_evaporation_rate_kg_s": 5e-7 * np.ones(n),
              "evaporative_cooling_w": np.linspace(0.99, 0.92, n), "net_heat_out_w": np.linspace(0.98, 0.85, n)})
    saved = []
    monkeypatch.setattr(plotting, "_save", lambda fig, path, **kw: (fig.savefig(io.BytesIO(), format="png"),
                                                                     saved.append(fig)))
    plotting.history_plot(h, tmp_path / "history.png", 1200.0, 900.0 * math.log(5.0), title="run")
    (fig,) = saved
    renderer = fig.canvas.get_renderer()
    width = fig.get_figwidth() * fig.dpi
    panels = [ax for ax in fig.axes if ax.get_legend() is not None]
    assert len(panels) >= 3
    for ax in panels:
        box = ax.get_window_extent(renderer)
        assert box.width >= 0.6 * width, (box.width, width)
        assert ax.get_legend().get_window_extent(renderer).width <= box.width * 1.02


@pytest.mark.parametrize("figure", ["history", "field"])
def test_a_long_title_and_scenario_wrap_inside_a_figure_drawn_once(tmp_path, monkeypatch, capped, figure):
    """The run's figures are saved without a second, cropping draw: their titles must then fit the
    figure's width by themselves, however long (a title is cut at 100 characters; a scenario line
    is longer)."""
    title = "Wide-mouth bulb, 1.5 mm borosilicate wall, thick cotton cap, " * 2
    subtitle = ("room 24.0 C, 45 % relative humidity, still air (0.1 m/s); wet-bulb 16.4 C; cap fed by a "
                "water glass at 20.0 C; dichloromethane fill")
    drawn = []
    original = plotting._save

    def save(fig, path, tight=True):
        drawn.append((fig, tight))
        original(fig, path, tight=tight)

    monkeypatch.setattr(plotting, "_save", save)
    if figure == "history":
        plotting.history_plot(_history(), tmp_path / "h.png", 1200.0, 900.0, title=title, subtitle=subtitle)
    else:
        plotting.temperature_field_plot(capped, [_field(capped)], tmp_path / "f.png", title=title,
                                        subtitle=subtitle)
    ((fig, tight),) = drawn
    assert not tight
    box = fig._suptitle.get_window_extent(fig.canvas.get_renderer())
    width = fig.get_figwidth() * fig.dpi
    assert box.x0 >= 0 and box.x1 <= width, (box, width)
    assert fig._suptitle.get_text().count("\n") >= 3  # each of the two lines wrapped at least once
    assert "dichloromethane fill" in fig._suptitle.get_text()


def test_history_plot_with_only_the_required_columns(tmp_path):
    h = _history(40, 90.0)
    path = tmp_path / "short.png"
    plotting.history_plot({"time_s": h["time_s"], "pressure_drop_pa": h["pressure_drop_pa"]}, path, 1200.0)
    _png_ok(path)
    no_target = tmp_path / "no_target.png"
    plotting.history_plot({"time_s": h["time_s"], "pressure_drop_pa": h["pressure_drop_pa"]}, no_target)
    _png_ok(no_target)


def test_history_plot_with_some_optional_columns(tmp_path):
    h = _history()
    keep = {k: h[k] for k in ("time_s", "pressure_drop_pa", "mean_cap_temperature_k", "cap_water_kg")}
    path = tmp_path / "some.png"
    plotting.history_plot(keep, path, 2000.0, None)
    _png_ok(path)


def test_history_plot_rejects_bad_columns(tmp_path):
    h = _history(10)
    with pytest.raises(ValueError, match="pressure_drop_pa"):
        plotting.history_plot({"time_s": h["time_s"]}, tmp_path / "a.png")
    with pytest.raises(ValueError, match="rows"):
        plotting.history_plot(
            {"time_s": h["time_s"], "pressure_drop_pa": h["pressure_drop_pa"][:-1]}, tmp_path / "b.png"
        )
    assert not list(tmp_path.iterdir())


def test_a_wrapped_title_keeps_each_number_with_its_unit():
    """The demo's title used to break as "... in a 24" / "C, 45 % room": a line break never falls
    between a number and the short unit after it, and the text is otherwise unchanged."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    text = "Demo: dichloromethane head with a wet felt cap in a 24 C, 45 % room, air 0.20 m/s, 647 Pa"
    wrapped = 0
    for width in np.arange(2.5, 6.01, 0.25):
        fig = Figure(figsize=(width, 3.0), dpi=100)
        FigureCanvasAgg(fig)
        for size in (10.0, 12.0, 14.0):
            lines = plotting._wrapped(fig, text, size).split("\n")
            wrapped += len(lines) > 1
            assert " ".join(lines) == text
            for before, after in zip(lines, lines[1:]):
                assert not (before[-1].isdigit() and after.split()[0].rstrip(",") in ("C", "%", "m/s", "Pa")), lines
    assert wrapped >= 30
