"""Every figure fvsolver draws (the only module that imports matplotlib)."""
from __future__ import annotations

import io
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import matplotlib
import matplotlib.cm
import matplotlib.colors
import matplotlib.ticker
import numpy as np
from matplotlib.collections import LineCollection, PolyCollection
from matplotlib.colors import Normalize
# Figures are made without pyplot: no GUI backend is ever chosen or imported, no figure manager
# keeps them alive, and PNGs are written by the Agg canvas (files only; never a window).
from matplotlib.figure import Figure

from fvsolver.outputs.files import atomic_write_bytes
from fvsolver.outputs.report import format_duration, format_pressure

if TYPE_CHECKING:  # pragma: no cover
    from fvsolver.mesh.core import Mesh


_FIGURE_KEYS = ("figsize", "layout", "constrained_layout")


def _subplots(nrows: int = 1, ncols: int = 1, **options):
    """``(figure, axes)`` as ``pyplot.subplots`` gives them, on a figure pyplot never sees (with the
    Agg canvas its PNG is drawn by, so that text can be measured before it is saved)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = Figure(**{k: options.pop(k) for k in _FIGURE_KEYS if k in options})
    FigureCanvasAgg(fig)
    return fig, fig.subplots(nrows, ncols, **options)


def _save(fig, path: Path, tight: bool = True) -> None:
    """Write ``fig`` as a PNG (atomically).  ``tight`` crops to what was drawn, which costs a second
    draw; a constrained-layout figure whose titles :func:`_titles` wrapped to its width already fits
    its frame and is drawn once (``tight=False``: 0.5 s of a run's history figure).  A fast PNG
    compression: the figures are flat colours, where it costs little size."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=130, bbox_inches="tight" if tight else None,
                pil_kwargs={"compress_level": 1})
    atomic_write_bytes(Path(path), buf.getvalue())


def convergence_plot(reports, path: Path) -> None:
    """Log-log error against mesh size (or step) for every case and norm, with slope guides."""
    n = len(reports)
    cols = min(4, n)
    rows = int(np.ceil(n / cols))
    fig, axes = _subplots(rows, cols, figsize=(3.6 * cols, 3.0 * rows), squeeze=False)
    for ax, rep in zip(axes.ravel(), reports):
        h = np.asarray(rep.h)
        for norm, errors in rep.errors.items():
            e = np.asarray(errors, dtype=float)
            if np.all(e > 0) and e.max() > 1e-11:  # round-off checks have no slope to show
                ax.loglog(h, e, marker="o", lw=1.2, label=norm)
        for slope, style in ((1, ":"), (2, "--")):
            ref = np.asarray(rep.errors[next(iter(rep.errors))], dtype=float)
            if np.all(ref > 0):
                ax.loglog(h, ref[-1] * (h / h[-1]) ** slope, "k" + style, lw=0.8, label=f"slope {slope}")
        ax.set_title(rep.case.replace("_", " "), fontsize=8)
        ax.set_xlabel("h (m) or step (s)", fontsize=7)
        ax.set_ylabel("relative error", fontsize=7)
        ax.tick_params(labelsize=6)
        ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        ax.legend(fontsize=5)
    for ax in axes.ravel()[n:]:
        ax.axis("off")
    fig.suptitle("fvsolver verification: observed convergence", fontsize=10)
    fig.tight_layout()
    _save(fig, path)


# ------------------------------------------------------------------ temperature fields
ZERO_CELSIUS = 273.15
#: Perceptually uniform and readable by colour-blind viewers; never a rainbow.
FIELD_COLOURMAP = "cividis"
OUTLINE_COLOUR = "#1c1c1c"
_AXIS_PATCH = "axis"


def _kelvin_to_celsius(t):
    return np.asarray(t, dtype=float) - ZERO_CELSIUS


def _celsius_to_kelvin(t):
    return np.asarray(t, dtype=float) + ZERO_CELSIUS


def mirrored_polygons(mesh: Mesh) -> np.ndarray:
    """The cells as polygons over the full cross-section.

    In the axisymmetric system the meridional half-plane (r >= 0) is copied to r -> -r,
    so the picture shows the whole section through the axis; each mirrored quad keeps
    the counter-clockwise order (its corners are reversed).  Planar meshes are returned
    as they are.

    Parameters
    ----------
    mesh : Mesh

    Returns
    -------
    (2 n_cells, 4, 2) float, m, for an axisymmetric mesh: rows ``0 .. n_cells - 1`` are
    the cells, rows ``n_cells .. 2 n_cells - 1`` their mirror images in the same order
    (so the field to draw is ``np.tile(T, 2)``); (n_cells, 4, 2) for a planar mesh.
    """
    poly = np.asarray(mesh.nodes, dtype=float)[np.asarray(mesh.cells)]
    if mesh.coordinate_system != "axisymmetric":
        return poly.copy()
    mirror = poly[:, ::-1, :].copy()
    mirror[..., 0] = -mirror[..., 0]
    return np.concatenate([poly, mirror], axis=0)


def outline_segments(mesh: Mesh) -> np.ndarray:
    """Edges to outline: faces between cells of different materials and the outer boundary.

    The symmetry axis is not a boundary of the full cross-section and is left out; in
    the axisymmetric system every segment is returned with its mirror image (r -> -r).

    Parameters
    ----------
    mesh : Mesh

    Returns
    -------
    (n_segments, 2, 2) float, m
        Segment end points in (r, z) (or (x, y)).
    """
    material = np.asarray(mesh.cell_material)
    between = material[mesh.owner] != material[mesh.neighbour]
    boundary = np.asarray(mesh.boundary_nodes)
    axisymmetric = mesh.coordinate_system == "axisymmetric"
    if axisymmetric and _AXIS_PATCH in mesh.patch_names:
        boundary = boundary[np.asarray(mesh.boundary_patch) != mesh.patch_names.index(_AXIS_PATCH)]
    pairs = np.concatenate([np.asarray(mesh.face_nodes)[between], boundary]).reshape(-1, 2)
    seg = np.asarray(mesh.nodes, dtype=float)[pairs]
    if axisymmetric:
        mirror = seg.copy()
        mirror[..., 0] = -mirror[..., 0]
        seg = np.concatenate([seg, mirror], axis=0)
    return seg


def _field_list(temperature, n_cells: int) -> list[np.ndarray]:
    if isinstance(temperature, np.ndarray) and temperature.ndim == 1:
        fields = [temperature]
    elif isinstance(temperature, np.ndarray) and temperature.ndim == 2:
        fields = list(temperature)
    else:
        fields = list(temperature)
    if not fields:
        raise ValueError("temperature: got no field, expected a (n_cells,) array or a list of them")
    out = []
    for k, f in enumerate(fields):
        a = np.asarray(f, dtype=float)
        if a.shape != (n_cells,):
            raise ValueError(
                f"temperature[{k}]: got shape {a.shape}, expected ({n_cells},), one value per "
                "cell of the mesh; pass the cell-centre field of this mesh"
            )
        out.append(a)
    return out


def temperature_field_plot(
    mesh: Mesh,
    temperature: np.ndarray | Sequence[np.ndarray],
    path: Path,
    times: Sequence[float] | float | None = None,
    title: str = "",
    subtitle: str = "",
    notes: Sequence[str] | None = None,
) -> None:
    """Draw one or more cell temperature fields on the mesh and write a PNG.

    Axisymmetric fields are mirrored to the full cross-section (see
    :func:`mirrored_polygons`); planar meshes are drawn as they are.  The cells are
    filled quads on a shared colour scale in K, with degrees C on the colour bar's other
    side; material interfaces and the outer boundary are outlined; lengths are in mm.

    Parameters
    ----------
    mesh : Mesh
    temperature : (n_cells,) float array, K, or a sequence of them
        One field, or several drawn side by side (e.g. snapshots in time).
    path : path
        The PNG to write (atomically).
    times : float or sequence of float, s, optional
        The time of each field, shown as its panel's title in s, min or h.
    title : str
        Figure title (the user's words).
    subtitle : str
        The computed scenario, shown under the title.
    notes : sequence of str, optional
        One line per field added under its time (e.g. "target reached").

    More than four fields are drawn in rows of four.

    Raises
    ------
    ValueError
        For a field of the wrong shape, with no finite value, or a ``times`` of a
        different length.
    """
    fields = _field_list(temperature, mesh.n_cells)
    if times is None:
        labels = [None] * len(fields)
    else:
        t = np.atleast_1d(np.asarray(times, dtype=float))
        if t.shape != (len(fields),):
            raise ValueError(
                f"times: got {t.size} value(s) for {len(fields)} field(s); pass one time (s) per field"
            )
        labels = [f"t = {format_duration(v)}" for v in t]
    if notes is not None:
        labels = [f"{a}, {b}" if a and b else (a or b) for a, b in zip(labels, notes)]
    finite = np.concatenate([f[np.isfinite(f)] for f in fields])
    if finite.size == 0:
        raise ValueError("temperature: no finite value to draw; check the solution for NaN")
    lo, hi = float(finite.min()), float(finite.max())
    if hi - lo < 1e-6:  # a uniform field still needs a colour scale
        lo, hi = lo - 0.5, hi + 0.5
    norm = Normalize(vmin=lo, vmax=hi)
    cmap = matplotlib.colormaps[FIELD_COLOURMAP].with_extremes(bad="#e7298a")

    polys = mirrored_polygons(mesh) * 1e3
    copies = len(polys) // mesh.n_cells
    segs = outline_segments(mesh) * 1e3
    x0, x1 = float(polys[..., 0].min()), float(polys[..., 0].max())
    y0, y1 = float(polys[..., 1].min()), float(polys[..., 1].max())
    pad = 0.04 * max(x1 - x0, y1 - y0)
    aspect = (x1 - x0 + 2 * pad) / (y1 - y0 + 2 * pad)
    panel_w = float(np.clip(4.2 * aspect, 2.6, 7.0))
    panel_h = float(np.clip(panel_w / aspect, 2.4, 4.2))  # wide meshes get low panels
    n = len(fields)
    n_cols = min(n, 4)
    n_rows = -(-n // n_cols)
    fig, grid = _subplots(
        n_rows, n_cols, figsize=(panel_w * n_cols + 1.9, (panel_h + 0.5) * n_rows + (0.9 if title else 0.4)),
        squeeze=False, sharex=True, sharey=True, layout="constrained",
    )
    for ax in grid.ravel()[n:]:
        ax.axis("off")
    axes = grid.ravel()[:n][None, :]
    axisymmetric = mesh.coordinate_system == "axisymmetric"
    xname, yname = ("r", "z") if axisymmetric else ("x", "y")
    collection = None
    for ax, field, label in zip(axes[0], fields, labels):
        collection = PolyCollection(
            polys, array=np.ma.masked_invalid(np.tile(field, copies)), cmap=cmap, norm=norm,
            edgecolors="face", linewidths=0.3,
        )
        ax.add_collection(collection)
        ax.add_collection(LineCollection(segs, colors=OUTLINE_COLOUR, linewidths=0.8, zorder=3))
        if axisymmetric:
            ax.axvline(0.0, color="0.45", lw=0.6, ls=(0, (8, 3, 2, 3)), zorder=4)
        ax.set_xlim(x0 - pad, x1 + pad)
        ax.set_ylim(y0 - pad, y1 + pad)
        ax.set_aspect("equal")
        ax.set_xlabel(f"{xname} (mm)")
        ax.tick_params(labelsize=8)
        ok = field[np.isfinite(field)]
        if not ok.size:
            span = "no finite value"
        elif ok.max() - ok.min() < 5e-3:
            span = f"uniform {ok.mean():.2f} K"
        else:
            span = f"{ok.min():.2f} to {ok.max():.2f} K"
        heading = f"{label}\n{span}" if label else span
        ax.set_title(heading, fontsize=9)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
    for row in grid:
        row[0].set_ylabel(f"{yname} (mm)")
    cbar = fig.colorbar(collection, ax=list(grid.ravel()), shrink=0.85, aspect=28, pad=0.02)
    cbar.set_label("temperature (K)")
    cbar.ax.tick_params(labelsize=8)
    celsius = cbar.ax.secondary_yaxis("left", functions=(_kelvin_to_celsius, _celsius_to_kelvin))
    celsius.set_ylabel("temperature (°C)")
    celsius.tick_params(labelsize=8)
    _titles(fig, title, subtitle, widest=0.0)
    _save(fig, path, tight=False)


# ----------------------------------------------------------------------------- history
#: Optional temperature columns: key, legend text, colour.
_TEMPERATURE_COLUMNS = (
    ("mean_cap_temperature_k", "wet cap (mean)", "#2c7fb8"),
    ("mean_inner_wall_temperature_k", "inner glass wall (mean)", "#7a0177"),
    ("second_bulb_temperature_k", "second bulb", "#d95f02"),
)
_RATE_COLUMNS = (
    ("evaporation_rate_kg_s", "evaporation from the cap", "#1b9e77"),
    ("condensation_rate_kg_s", "condensation in the head", "#6a51a3"),
)
_SPLIT_COLUMNS = (
    ("condensing_rate_kg_s", "condensing on cold inner faces", "#9e9ac8"),
    ("re_evaporation_rate_kg_s", "re-evaporating from warm inner faces", "#cb181d"),
)
_PRESSURE_COLUMNS = (
    ("head_pressure_pa", "head vapour space", "#807dba"),
    ("second_bulb_pressure_pa", "second bulb", "#e6550d"),
)
_DROP_COLOUR = "#01665e"
_TARGET_COLOUR = "#8c2d04"
_WATER_COLOUR = "#525252"


def _history_columns(history: Mapping) -> dict[str, np.ndarray]:
    if not isinstance(history, Mapping):
        raise ValueError(f"history: got {type(history).__name__}, expected a dict of 1D arrays")
    for key in ("time_s", "pressure_drop_pa"):
        if key not in history:
            raise ValueError(
                f"history: column {key!r} missing (got {sorted(history)}); it is required"
            )
    cols = {}
    n = None
    for key, value in history.items():
        a = np.asarray(value, dtype=float)
        if a.ndim != 1 or a.size == 0:
            raise ValueError(f"history[{key!r}]: got shape {a.shape}, expected a non-empty 1D array")
        if n is None:
            n = a.size
        elif a.size != n:
            raise ValueError(
                f"history[{key!r}]: got {a.size} rows, expected {n} like the other columns"
            )
        cols[key] = a
    return cols


#: Spans below which a history series is drawn flat: its changes are round-off, not physics.
FLAT_RESOLUTION = {"pressure_pa": 1e-3, "temperature_k": 1e-5, "rate_mg_s": 1e-9, "water_g": 1e-9, "power_w": 1e-9}


def _is_flat(values: np.ndarray, resolution: float) -> bool:
    """True when the finite values span no more than ``resolution`` plus their round-off."""
    v = values[np.isfinite(values)]
    return v.size == 0 or float(v.max() - v.min()) <= resolution + 1e-9 * float(np.abs(v).max())


def _plain_axis(ax, series: list, resolution: float) -> None:
    """Plain tick labels (never matplotlib's offset text such as ``1e-11+6.427``); when every
    series on ``ax`` is flat to within ``resolution``, limits around the value, so round-off
    is not drawn as an oscillation."""
    ax.yaxis.get_major_formatter().set_useOffset(False)
    values = np.concatenate([np.asarray(v, dtype=float).ravel() for v in series]) if series else np.zeros(0)
    values = values[np.isfinite(values)]
    if values.size and all(_is_flat(np.asarray(v, dtype=float), resolution) for v in series):
        centre = float(np.median(values))
        half = max(abs(centre) * 0.05, 1000.0 * resolution)
        ax.set_ylim(centre - half, centre + half)


# the share of a stacked figure's width its panels keep once their axis labels are laid out: a
# legend row above a panel is kept narrower than this
_PANEL_WIDTH_SHARE = 0.74


def _legend(ax, handles) -> None:
    """A legend in rows above the panel, clear of every curve, and no wider than the panel: the
    most columns (up to 3) that fit. (A row wider than its panel makes the constrained layout
    shrink the panel to make room for it, down to a sliver.)"""
    if not handles:
        return
    fig = ax.figure
    available = _PANEL_WIDTH_SHARE * fig.get_figwidth() * fig.dpi
    renderer = fig.canvas.get_renderer()
    for ncols in range(min(3, len(handles)), 0, -1):
        legend = ax.legend(handles=handles, fontsize=7.5, frameon=False, loc="lower left",
                           bbox_to_anchor=(0.0, 1.0), ncols=ncols, borderaxespad=0.2,
                           handlelength=2.6, columnspacing=1.4)
        if ncols == 1 or legend.get_window_extent(renderer).width <= available:
            return


def history_plot(
    history: Mapping[str, np.ndarray],
    path: Path,
    target_pressure_drop_pa: float | None = None,
    time_to_target_s: float | None = None,
    title: str = "",
    subtitle: str = "",
    max_pressure_drop_pa: float | None = None,
    device: bool = False,
) -> None:
    """Plot a run's history in stacked panels on a shared time axis and write a PNG.

    ``device``: a running device, whose "target" is the difference that tips it (labelled so).

    Panels, top to bottom (a panel whose columns are all missing is left out):

    1. the pressure difference that lifts the liquid column, with the target as a
       dashed line and the time to target marked (or "target not reached"); absolute
       pressures of the head and the second bulb on a twin axis in kPa when given;
    2. temperatures in K with degrees C on the right;
    3. evaporation and condensation rates in mg/s (the condensing and re-evaporating parts
       apart when given: the net rate steps up whenever a warm inner face runs dry), the cap's
       water in g on a twin axis;
    4. the evaporative cooling power in W, when given.

    Time is shown in min when the run is longer than 10 min, else in s.  A series that does
    not change beyond round-off is drawn flat, and no axis uses an offset.

    Parameters
    ----------
    history : mapping of str to (n_rows,) float arrays
        Required ``"time_s"`` (s) and ``"pressure_drop_pa"`` (Pa); optional
        ``"head_pressure_pa"``, ``"second_bulb_pressure_pa"`` (Pa),
        ``"mean_cap_temperature_k"``, ``"mean_inner_wall_temperature_k"``,
        ``"second_bulb_temperature_k"`` (K), ``"evaporation_rate_kg_s"``,
        ``"condensation_rate_kg_s"`` (kg/s), ``"cap_water_kg"`` (kg).  Other columns
        are ignored.
    path : path
        The PNG to write (atomically).
    target_pressure_drop_pa : float, optional, Pa
    time_to_target_s : float, optional, s
        When the target was reached (None: not reached).
    title : str
        Figure title (the user's words).
    subtitle : str
        The computed scenario, shown under the title.
    max_pressure_drop_pa : float, optional, Pa
        The run's largest pressure difference, quoted when the target was not reached (the
        same number as the summary's); default: the largest value in the history.

    Raises
    ------
    ValueError
        For a missing required column, or columns that are not 1D or differ in length.
    """
    cols = _history_columns(history)
    second = "body" if device else "second bulb"  # a running device's second bulb is its body
    t = cols["time_s"]
    dp = cols["pressure_drop_pa"]
    finite_t = t[np.isfinite(t)]
    span = float(finite_t.max() - min(finite_t.min(), 0.0)) if finite_t.size else 0.0
    minutes = span > 600.0
    tscale, tunit = (60.0, "min") if minutes else (1.0, "s")
    ts = t / tscale
    marker = "o" if t.size < 3 else None

    temps = [c for c in _TEMPERATURE_COLUMNS if c[0] in cols]
    rates = [c for c in _RATE_COLUMNS if c[0] in cols]
    water = "cap_water_kg" in cols
    power = "evaporative_cooling_w" in cols
    kinds = (["pressure"] + (["temperature"] if temps else []) + (["rates"] if rates or water else [])
             + (["power"] if power else []))
    ratios = [1.35] + [1.0] * (len(kinds) - 1)
    fig, axes = _subplots(
        len(kinds), 1, sharex=True, squeeze=False, layout="constrained",
        figsize=(8.0, 1.2 + 2.5 * sum(ratios)), gridspec_kw={"height_ratios": ratios},
    )
    axes = axes[:, 0]
    for ax in axes:
        ax.grid(True, lw=0.4, alpha=0.45)
        ax.tick_params(labelsize=8)

    # (1) pressure difference
    ax = axes[0]
    finite_dp = dp[np.isfinite(dp)]
    largest = float(np.abs(finite_dp).max()) if finite_dp.size else 0.0
    peak = (float(max_pressure_drop_pa) if max_pressure_drop_pa is not None
            else float(finite_dp.max()) if finite_dp.size else 0.0)
    target = None if target_pressure_drop_pa is None else float(target_pressure_drop_pa)
    scale_ref = max(largest, abs(target) if target is not None else 0.0)
    pscale, punit = (1e3, "kPa") if scale_ref >= 5e3 else (1.0, "Pa")
    handles = ax.plot(ts, dp / pscale, color=_DROP_COLOUR, lw=1.8, marker=marker,
                      label=f"pressure difference, {second} - head")
    if target is not None:
        handles += [ax.axhline(target / pscale, color=_TARGET_COLOUR, lw=1.1, ls=(0, (5, 3)),
                               label=(f"tips at {target / pscale:.4g} {punit}" if device
                                      else f"target {target / pscale:.4g} {punit}"))]
    top = max(float(finite_dp.max()) if finite_dp.size else 0.0, target if target is not None else 0.0)
    bottom = min(float(finite_dp.min()) if finite_dp.size else 0.0, 0.0)
    if top > bottom:
        ax.set_ylim(bottom / pscale, (top + 0.18 * (top - bottom)) / pscale)
    t_lo = float(ts[np.isfinite(ts)].min()) if finite_t.size else 0.0
    t_hi = float(ts[np.isfinite(ts)].max()) if finite_t.size else 1.0
    if time_to_target_s is not None and np.isfinite(time_to_target_s):
        tt = float(time_to_target_s) / tscale
        order = np.argsort(t)
        y = target if target is not None else float(np.interp(float(time_to_target_s), t[order], dp[order]))
        # drawn over the frame: a crossing on the last step sits on the right edge
        ax.plot([tt], [y / pscale], marker="o", ms=7, mfc="white", mec=_TARGET_COLOUR, mew=1.8, zorder=5,
                clip_on=False)
        right = t_hi > t_lo and (tt - t_lo) / (t_hi - t_lo) > 0.6
        ax.annotate(
            (f"first tip at {time_to_target_s:.2f} s" if device and time_to_target_s < 60.0 else
             f"first tip at {format_duration(time_to_target_s)}" if device else
             f"target reached at {format_duration(time_to_target_s)}"), xy=(tt, y / pscale),
            xytext=(-14 if right else 14, -26), textcoords="offset points",
            ha="right" if right else "left", va="top", fontsize=8.5, color=_TARGET_COLOUR,
            arrowprops={"arrowstyle": "-", "color": _TARGET_COLOUR, "lw": 0.8},
            bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": "none", "alpha": 0.85},
        )
    elif target is not None:
        ax.text(
            0.015, 0.96, (f"never tipped (largest {format_pressure(peak)})" if device
                          else f"target not reached (largest {format_pressure(peak)})"),
            transform=ax.transAxes, ha="left", va="top", fontsize=8.5, color=_TARGET_COLOUR,
            bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": _TARGET_COLOUR, "lw": 0.6},
        )
    ax.set_ylabel(f"pressure difference ({punit})", fontsize=9)
    ax.yaxis.get_major_formatter().set_useOffset(False)
    pressures = [c for c in _PRESSURE_COLUMNS if c[0] in cols]
    if pressures:
        twin = ax.twinx()
        for key, label, colour in pressures:
            label = label.replace("second bulb", second)
            handles += twin.plot(ts, cols[key] / 1e3, color=colour, lw=1.3, ls=(0, (1, 1.2)),
                                 marker=marker, label=f"{label}, absolute (right)")
        twin.margins(y=0.1)
        twin.set_ylabel("absolute pressure (kPa)", fontsize=9)
        twin.tick_params(labelsize=8)
        _plain_axis(twin, [cols[c[0]] / 1e3 for c in pressures], FLAT_RESOLUTION["pressure_pa"] / 1e3)
    _legend(ax, handles)

    # (2) temperatures
    if temps:
        ax = axes[kinds.index("temperature")]
        handles = []
        for key, label, colour in temps:
            label = label.replace("second bulb", second + (" (its pool)" if device else ""))
            handles += ax.plot(ts, cols[key], color=colour, lw=1.5, marker=marker, label=label)
        ax.set_ylabel("temperature (K)", fontsize=9)
        _plain_axis(ax, [cols[c[0]] for c in temps], FLAT_RESOLUTION["temperature_k"])
        celsius = ax.secondary_yaxis("right", functions=(_kelvin_to_celsius, _celsius_to_kelvin))
        celsius.set_ylabel("temperature (°C)", fontsize=9)
        celsius.tick_params(labelsize=8)
        _legend(ax, handles)

    # (3) rates and cap water
    if rates or water:
        ax = axes[kinds.index("rates")]
        handles = []
        split = [c for c in _SPLIT_COLUMNS if c[0] in cols]
        grams = cols["cap_water_kg"] * 1e3 if water else None
        constant_water = water and rates and _is_flat(grams, FLAT_RESOLUTION["water_g"])
        for key, label, colour in rates:
            if split and key == "condensation_rate_kg_s":
                label = "net condensation in the head"
            if constant_water and key == "evaporation_rate_kg_s":
                # a cap kept full (a reservoir) needs no line of its own
                label += f" (its water stays at {np.nanmedian(grams):.3g} g)"
            handles += ax.plot(ts, cols[key] * 1e6, color=colour, lw=1.5, marker=marker, label=label)
        steps = split and np.any(np.diff(cols["re_evaporation_rate_kg_s"]) < -0.05 * np.nanmax(
            np.abs(cols["re_evaporation_rate_kg_s"]) + 1e-30))
        for key, label, colour in split:
            if steps and key == "re_evaporation_rate_kg_s":
                label += " (drops as faces run dry)"
            handles += ax.plot(ts, cols[key] * 1e6, color=colour, lw=1.0, ls=(0, (4, 2)), marker=marker, label=label)
        if rates:
            ax.set_ylabel("rate (mg/s)", fontsize=9)
            _plain_axis(ax, [cols[c[0]] * 1e6 for c in rates + split], FLAT_RESOLUTION["rate_mg_s"])
        if water and not constant_water:
            wax = ax.twinx() if rates else ax
            handles += wax.plot(ts, grams, color=_WATER_COLOUR, lw=1.3,
                                ls=(0, (6, 2, 1, 2)), marker=marker,
                                label="water held by the cap" + (" (right)" if rates else ""))
            wax.set_ylabel("cap water (g)", fontsize=9)
            wax.tick_params(labelsize=8)
            _plain_axis(wax, [grams], FLAT_RESOLUTION["water_g"])
        _legend(ax, handles)

    # (4) the evaporative cooling power
    if power:
        ax = axes[kinds.index("power")]
        handles = ax.plot(ts, cols["evaporative_cooling_w"], color="#1b9e77", lw=1.5, marker=marker,
                          label="evaporative cooling of the cap (latent heat carried off)")
        if "heat_in_w" in cols:
            handles += ax.plot(ts, -cols["heat_in_w"], color="#636363", lw=1.2, ls=(0, (3, 1.5)), marker=marker,
                               label="net heat leaving the head")
        ax.set_ylabel("power (W)", fontsize=9)
        _plain_axis(ax, [cols["evaporative_cooling_w"]], FLAT_RESOLUTION["power_w"])
        _legend(ax, handles)

    axes[-1].set_xlabel(f"time ({tunit})", fontsize=9)
    if t_hi > t_lo:
        axes[-1].set_xlim(t_lo, t_hi)
    _titles(fig, title, subtitle)
    _save(fig, path, tight=False)


def _titles(fig, title: str, subtitle: str, widest: float = 9.0) -> None:
    """The user's title, and under it the scenario computed from the inputs.  A narrow figure is
    widened to its longest line, up to ``widest`` inches (``widest=0``: never widened, for panels
    whose aspect is fixed, which would float in the extra width); a line still too long is wrapped
    at word breaks to the figure's width (measured as drawn), so nothing is cut off at its edges."""
    if not (title or subtitle):
        return
    size = 10.5 if title and subtitle else 11.0
    lines = [line for line in (title, subtitle) if line]
    need = max(_text_width(fig, line, size) for line in lines) / fig.dpi / _TITLE_ROOM
    if need > fig.get_figwidth():
        fig.set_figwidth(min(need, max(widest, fig.get_figwidth())))
    fig.suptitle("\n".join(_wrapped(fig, line, size) for line in lines), fontsize=size)


_TITLE_ROOM = 0.96  # the share of a figure's width its title lines may take


def _text_width(fig, text: str, fontsize: float) -> float:
    """``text``'s width in pixels at ``fontsize``, as ``fig``'s canvas draws it."""
    from matplotlib.text import Text

    return Text(0, 0, text, fontsize=fontsize, figure=fig).get_window_extent(fig.canvas.get_renderer()).width


# a number and the short unit after it ("24 C", "45 %", "0.2 m/s") stay on one line
_NUMBER_AND_UNIT = re.compile(r"(?<=\d) (?=(?:%|°\w?|[A-Za-z]{1,3}(?:/\w{1,2})?)(?![\w/]))")


def _wrapped(fig, text: str, fontsize: float) -> str:
    """``text`` broken at spaces into lines that each fit the title's share of ``fig``'s width
    (never between a number and its unit)."""
    import textwrap

    room = _TITLE_ROOM * fig.get_figwidth() * fig.dpi
    if _text_width(fig, text, fontsize) <= room:
        return text
    glued = _NUMBER_AND_UNIT.sub("\u00a0", text.replace("\u00a0", " "))  # (textwrap never breaks at U+00A0)
    chars = len(text)  # the most characters a line may hold: shrink until every line fits
    while chars > 8:
        chars = max(8, int(chars * 0.9))
        lines = [line.replace("\u00a0", " ") for line in textwrap.wrap(glued, chars, break_long_words=True)]
        if all(_text_width(fig, line, fontsize) <= room for line in lines):
            return "\n".join(lines)
    return "\n".join(textwrap.wrap(text, 8))


def _with_unit(key: str, units: Mapping | None) -> str:
    unit = (units or {}).get(key, "")
    return f"{key} ({unit})" if unit else key


def sweep_plot(rows: Sequence[Mapping], keys: Sequence[str], path: Path, title: str = "",
               units: Mapping[str, str] | None = None, result: str = "time_to_target_s",
               result_label: str = "time to target (s)", missing_label: str = "not reached") -> None:
    """Time to target (or ``result``, e.g. a running device's last period) against the first
    swept key, one line per combination of the others.

    Runs that did not reach the target are drawn as open markers on the top edge of the panel
    (labelled "not reached"), so a stalled climate stands out instead of vanishing.

    Parameters
    ----------
    rows : the sweep's rows (``time_to_target_s`` in s or None, and one entry per key)
    keys : the swept key paths, the first one on the horizontal axis (numeric values)
    path : the PNG to write (atomically)
    units : key path -> unit, shown with the axis label and the legend
    """
    first, others = keys[0], list(keys[1:])
    groups: dict[tuple, list[Mapping]] = {}
    for r in rows:
        groups.setdefault(tuple(r[k] for k in others), []).append(r)
    reached = [r.get(result) for r in rows if r.get(result) is not None]
    top = 1.08 * max(reached) if reached else 1.0
    fig, ax = _subplots(figsize=(7.0, 4.2), layout="constrained")
    ax.grid(True, lw=0.4, alpha=0.45)
    for label, members in groups.items():
        members = sorted(members, key=lambda r: r[first])
        x = np.array([float(r[first]) for r in members])
        y = np.array([np.nan if r.get(result) is None else float(r.get(result)) for r in members])
        name = ", ".join(f"{k.split('.')[-1]} = {v:g}" + (f" {units[k]}" if units and units.get(k) else "")
                         if isinstance(v, int | float) else f"{k.split('.')[-1]} = {v}"
                         for k, v in zip(others, label)) or None
        (line,) = ax.plot(x, y, marker="s", ms=4.5, lw=1.3, label=name)
        missed = np.isnan(y)
        if missed.any():
            ax.plot(x[missed], np.full(missed.sum(), top), ls="none", marker="s", ms=6, mfc="none",
                    mec=line.get_color())
    if len(reached) < len(rows):
        ax.axhline(top, color="0.5", lw=0.6, ls=":")
        ax.annotate(missing_label, (0.01, top), xycoords=("axes fraction", "data"), va="bottom",
                    fontsize=7.5, color="0.35")
    ax.set_ylim(0.0, 1.12 * top)
    ax.set_xlabel(_with_unit(first, units))
    ax.set_ylabel(result_label)
    if title:
        ax.set_title(title, fontsize=9.5)
    if others:
        ax.legend(fontsize=7.5, frameon=False)
    _save(fig, path)


# one marker per outcome, in order of first appearance (filled for the first: the device runs)
_OUTCOME_MARKERS = ("o", "X", "^", "s", "D", "v", "P", "*")


def envelope_plot(temperatures: np.ndarray, humidities: np.ndarray, values: np.ndarray, outcomes: np.ndarray,
                  completed: np.ndarray, path: Path, label: str, offset: float = 0.0, title: str = "") -> None:
    """The operating map: a headline result over room temperature and relative humidity.

    Filled contours of ``values`` where the device runs (finite values), the boundary where it
    stops (drawn and labelled), and each run's outcome as its own marker.

    Parameters
    ----------
    temperatures : (n_t,) K, room air temperatures (drawn in °C)
    humidities : (n_h,) relative humidities (drawn in %)
    values : (n_t, n_h) the headline result, NaN where the device does not run
    outcomes : (n_t, n_h) the outcome of each run, in words
    completed : (n_t, n_h) bool, False for a run that failed (it neither runs nor stops: the
        boundary is not drawn through it)
    label : the headline's name and unit, for the colour bar
    offset : added to ``values`` for display (-273.15 for kelvin shown in °C)
    """
    t_c = np.asarray(temperatures, float) - 273.15
    rh = 100.0 * np.asarray(humidities, float)
    V = np.asarray(values, float).T + offset  # (n_h, n_t): rows along humidity
    runs = np.isfinite(V)
    fig, ax = _subplots(figsize=(7.4, 5.0), layout="constrained")
    cmap = matplotlib.colormaps["viridis"]
    norm = None
    if runs.any():
        low, high = np.nanmin(V), np.nanmax(V)
        if high > low:
            if low > 0 and high / low > 10:  # over a decade or more (seconds to minutes): log-spaced levels
                decades = np.arange(np.floor(np.log10(low)), np.ceil(np.log10(high)) + 1)
                ladder = (10.0 ** decades[:, None] * np.array([1.0, 2.0, 5.0])).ravel()
                # the ladder's steps from the last at or below the lowest value to the first at or above the highest
                levels = ladder[np.searchsorted(ladder, low, "right") - 1: np.searchsorted(ladder, high, "left") + 1]
            else:
                levels = matplotlib.ticker.MaxNLocator(nbins=10).tick_values(low, high)
            norm = matplotlib.colors.BoundaryNorm(levels, cmap.N)
            # contours fill the cells whose four corners all run; the markers carry every value
            ax.contourf(t_c, rh, np.ma.masked_invalid(V), levels=levels, cmap=cmap, norm=norm)
        else:
            norm = Normalize(low - 0.5 * max(abs(low), 1.0), high + 0.5 * max(abs(high), 1.0))
        fig.colorbar(matplotlib.cm.ScalarMappable(norm=norm, cmap=cmap), ax=ax, label=label)
    stops = ~runs & np.asarray(completed, bool).T
    if runs.any() and stops.any():
        indicator = np.ma.masked_array(runs.astype(float), mask=~(runs | stops))
        boundary = ax.contour(t_c, rh, indicator, levels=[0.5], colors="black", linewidths=2.0)
        ax.clabel(boundary, fmt={0.5: "stop boundary"}, fontsize=8.5, inline=True)
    kinds = list(dict.fromkeys(str(o) for o in np.asarray(outcomes).T.ravel()))
    TT, HH = np.meshgrid(t_c, rh)
    O = np.asarray(outcomes).T.astype(str)
    for k, kind in enumerate(kinds):
        sel = O == kind
        marker = _OUTCOME_MARKERS[k % len(_OUTCOME_MARKERS)]
        ran = sel & runs
        if ran.any():  # filled with the run's own value
            ax.scatter(TT[ran], HH[ran], c=V[ran], cmap=cmap, norm=norm, marker=marker, s=46, edgecolors="black",
                       linewidths=0.9, label=kind, zorder=3)
        other = sel & ~runs
        if other.any():
            ax.scatter(TT[other], HH[other], c="#c0392b", marker=marker, s=58, edgecolors="black", linewidths=0.8,
                       label=None if ran.any() else kind, zorder=3)
    ax.set_xlabel("room air temperature (°C)")
    ax.set_ylabel("relative humidity (%)")
    ax.set_xlim(t_c.min() - 0.03 * np.ptp(t_c), t_c.max() + 0.03 * np.ptp(t_c))
    ax.set_ylim(rh.min() - 0.03 * np.ptp(rh), rh.max() + 0.03 * np.ptp(rh))
    ax.legend(title="outcome", fontsize=8, title_fontsize=8.5, loc="upper center", bbox_to_anchor=(0.5, -0.12),
              ncol=min(4, len(kinds)), frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    _save(fig, path)


def cycle_plot(history: Mapping[str, np.ndarray], cycles: Sequence[Mapping], path: Path, title: str = "",
               subtitle: str = "") -> None:
    """A running device: the pressure difference over the run with its tips marked, and the
    period of each cycle; write a PNG.

    Parameters
    ----------
    history : mapping with ``"time_s"`` (s), ``"pressure_drop_pa"`` and ``"target_pressure_drop_pa"`` (Pa)
    cycles : rows of cycles.csv (``"tip_time_s"``, ``"period_s"``, ``"pressure_drop_at_tip_pa"``)
    path : the PNG to write (atomically)
    title : shown above the panels
    subtitle : the computed scenario, shown under the title
    """
    t = np.asarray(history["time_s"], dtype=float)
    fig, (top, bottom) = _subplots(2, 1, figsize=(8.0, 6.0), height_ratios=(2.0, 1.0), constrained_layout=True)
    top.plot(t, np.asarray(history["pressure_drop_pa"], dtype=float), color="#1b6a8f", lw=1.2,
             label="pressure difference body - head")
    if "target_pressure_drop_pa" in history:
        top.plot(t, np.asarray(history["target_pressure_drop_pa"], dtype=float), color="#8f5a1b", lw=1.0, ls="--",
                 label="difference that tips it (centre of mass at the pivot)")
    tips = np.array([c["tip_time_s"] for c in cycles], dtype=float)
    if tips.size:
        top.plot(tips, [c["pressure_drop_at_tip_pa"] for c in cycles], ls="none", marker="v", ms=7,
                 color="#a3123a", label=f"tips ({tips.size})")
    top.set_ylabel("pressure difference (Pa)")
    top.set_xlabel("time (s)")
    top.grid(alpha=0.3)
    # above the panel: inside it, any corner covers some cycle's rise or fall
    top.legend(loc="lower left", bbox_to_anchor=(0.0, 1.01), ncol=3, fontsize=8, frameon=False)
    periods = [(c["tip_time_s"], c["period_s"]) for c in cycles if c.get("period_s")]
    if periods:
        n = np.arange(2, len(periods) + 2)
        bottom.plot(n, [p for _, p in periods], marker="o", color="#2d7a3a", lw=1.0)
        bottom.set_xticks(n if len(n) <= 20 else n[:: max(len(n) // 10, 1)])
    else:
        bottom.text(0.5, 0.5, "fewer than two tips: no period", ha="center", va="center",
                    transform=bottom.transAxes)
    bottom.set_xlabel("cycle (tip number)")
    bottom.set_ylabel("period (s)")
    bottom.grid(alpha=0.3)
    bottom.yaxis.set_major_formatter(matplotlib.ticker.ScalarFormatter(useOffset=False))
    _titles(fig, title, subtitle)
    _save(fig, path, tight=False)


def fit_plot(time: np.ndarray, measured: Mapping[str, np.ndarray], computed: Mapping[str, np.ndarray], path: Path,
             title: str = "") -> None:
    """Measured (markers) and computed (line) against time, one column per quantity, with the
    residuals (computed - measured) below.

    Parameters
    ----------
    time : (m,) s, the measured times
    measured, computed : name -> (m,) values at those times (same names)
    """
    names = list(measured)
    fig, axes = _subplots(2, len(names), figsize=(5.2 * len(names), 5.4), squeeze=False, sharex="col",
                             height_ratios=(2.2, 1.0), layout="constrained")
    for k, name in enumerate(names):
        top, bottom = axes[0, k], axes[1, k]
        m = np.asarray(measured[name], float)
        c = np.asarray(computed[name], float)
        top.plot(time, m, ls="none", marker="o", ms=3.5, mfc="none", mec="0.25", label="measured")
        top.plot(time, c, lw=1.6, color="#1f77b4", label="computed (fitted)")
        top.set_ylabel(name)
        top.grid(True, lw=0.4, alpha=0.45)
        top.legend(fontsize=8, frameon=False)
        bottom.axhline(0.0, color="0.5", lw=0.8)
        bottom.plot(time, c - m, ls="none", marker=".", ms=4, color="#c0392b")
        bottom.set_ylabel("computed - measured")
        bottom.set_xlabel("time (s)")
        bottom.grid(True, lw=0.4, alpha=0.45)
    if title:
        fig.suptitle(title, fontsize=10)
    _save(fig, path)
