"""Figures of a sweep and of a tolerance run (matplotlib, Agg canvases, no pyplot, no global state).

Sweep: one PNG per summary scalar that changes over the sweep (``plots/<key>.png``), against the
swept value with the most values; a second swept path gives a family of curves and, for a grid of
two paths, a colour map beside it; further paths give one curve per combination. ``overview.png``
puts output energy, extraction efficiency, peak fluence and B-integral side by side. Points whose
run gave warnings (damage fluence, B-integral, clipping, ...) are ringed.

Tolerance run: one histogram per summary scalar that varies (``plots/hist_<key>.png``) with its 5,
50 and 95 % percentiles marked.

A figure named by its path in a [sweep] or [spread] table's ``figures`` (``steps.3.peak_fluence_J_cm2``)
comes as a top-level entry of the summaries under that path, and is plotted like the others, its
label saying where it is ("step 3: peak fluence").

Axes carry units from the key suffixes (``_J``, ``_J_cm2``, ``_mm``, ...); energies, powers and
intensities are shown with the SI prefix that suits their size (mJ, MW/cm², ...), an axis spanning
more than a factor of 20 (swept values) or 100 (results) of positive values is logarithmic.
"""
from __future__ import annotations

import math
import os
import textwrap
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
from matplotlib.axes import Axes

from ampmodel.output.summary import is_number, scalar_keys
from ampmodel.plots.common import MAP_CMAP, SEED_COLOUR, new_figure, save_png, unit_prefix
from ampmodel.plots.drawing import LIGHT, PANELS, FigureJob, draw_all
from ampmodel.plots.limits import LimitLine, _echoes, limit_lines
from ampmodel.units import shown_unit, unit_of

CMAP_LINES = "viridis"
WARN_COLOUR = "#d62728"
# Numerical checks and counts of the solver: in the table, not plotted.
NOT_PLOTTED = ("energy_balance_error", "power_balance_error", "photon_balance_error", "cw_residual",
               "cw_iterations", "cw_damping_final", "warning_count")
# The overview's four panels: the first figure of each group that the summaries hold (pulsed, cw).
OVERVIEW = (("output_energy_J", "output_power_W"), ("extraction_efficiency", "optical_efficiency"),
            ("peak_fluence_J_cm2", "peak_intensity_W_cm2"), ("b_integral_rad",))

LABELS = {
    "input_energy_J": "input energy (inside the grid)", "output_energy_J": "output energy",
    "gain": "gain (output / input)", "stored_energy_J": "stored energy before the pulse",
    "stored_energy_final_J": "stored energy after the pulse", "extracted_energy_J": "extracted energy",
    "extraction_efficiency": "extraction efficiency", "lost_energy_J": "energy lost (clipping, passive loss)",
    "peak_fluence_J_cm2": "peak fluence", "peak_intensity_W_cm2": "peak intensity",
    "b_integral_rad": "B-integral", "pulse_duration_ns": "seed pulse duration", "time_slice_ns": "time slice",
    "input_power_W": "input power (inside the grid)", "output_power_W": "output power",
    "extracted_power_W": "extracted power", "lost_power_W": "power lost (clipping, passive loss)",
    "absorbed_pump_power_W": "absorbed pump power", "pump_power_W": "pump power",
    "optical_efficiency": "optical efficiency (extracted / pump)",
    "small_signal_gain": "small-signal gain G0", "loss_per_cm": "passive loss",
    "b_integral_margin": "B-integral over its limit", "damage_margin": "fluence over the damage fluence",
    "worst_damage_margin": "worst step's fluence over its damage fluence",
    "output_peak_power_W": "output peak power", "output_duration_ns": "output pulse duration (FWHM)",
}
_PREFIXES = [(1e-12, "p"), (1e-9, "n"), (1e-6, "µ"), (1e-3, "m"), (1.0, ""), (1e3, "k"), (1e6, "M"),
             (1e9, "G"), (1e12, "T")]
_PREFIXED = ("J", "W", "W/cm^2")


# ----------------------------------------------------------------------------------------------
# Names, units and scales
# ----------------------------------------------------------------------------------------------

def _human(key: str) -> str:
    """"small_signal_gain" -> "small-signal gain G0"; a key's words without its unit suffix; a figure
    path says where: "steps.3.peak_fluence_J_cm2" -> "step 3: peak fluence"."""
    if key in LABELS:
        return LABELS[key]
    if "." in key:
        return figure_label(key)
    from ampmodel.units import split_unit
    stem = split_unit(key)[0]
    return LABELS.get(stem, stem.replace("_", " "))


def figure_label(path: str) -> str:
    """Words for a figure path of summary.json: "steps.0.steps.2.gain" -> "step 0.2: gain (output /
    input)", "media.rod.stored_energy_J" -> "rod: stored energy before the pulse", "train.average_power_W"
    -> "train: average power"."""
    parts = path.split(".")
    leaf = _human(parts[-1])
    if parts[0] == "steps":
        return f"step {'.'.join(p for p in parts[1:-1] if p.isdigit())}: {leaf}"
    if parts[0] == "media":
        return f"{'.'.join(parts[1:-1])}: {leaf}"
    return f"{' '.join(parts[:-1]).replace('_', ' ')}: {leaf}"


def path_label(path: str) -> str:
    """Words for a value path: "seed.energy_J" -> "seed energy", "medium.rod.length_mm" -> "rod: length"."""
    parts = path.split(".")
    leaf = _human(parts[-1])
    if parts[0] == "medium" and len(parts) >= 3:
        return f"{parts[1]}: " + (f"{parts[2]} " if len(parts) > 3 else "") + leaf
    if parts[0] == "step" and len(parts) >= 3:
        return f"step {parts[1]}: {leaf}"
    if len(parts) == 2:
        return f"{parts[0]} {leaf}"
    return path


def scale_for(unit: str, values: Sequence[float]) -> tuple[float, str]:
    """(divisor, shown unit) for ``values`` in ``unit``: J -> mJ etc.; "%" for a dimensionless fraction."""
    finite = [abs(v) for v in values if isinstance(v, (int, float)) and math.isfinite(v) and v != 0]
    if unit in _PREFIXED and finite:
        factor, prefix = unit_prefix(max(finite), _PREFIXES)
        return factor, prefix + shown_unit(unit)
    return 1.0, shown_unit(unit)


def axis_label(words: str, unit: str) -> str:
    return words if unit in ("1", "") else f"{words} ({unit})"


def _log_axis(values: Sequence[float], ratio: float) -> bool:
    v = np.asarray([x for x in values if math.isfinite(x)], dtype=float)
    return v.size > 1 and bool(np.all(v > 0)) and v.max() / v.min() >= ratio


def _text(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


# ----------------------------------------------------------------------------------------------
# Figures
# ----------------------------------------------------------------------------------------------

class _Axis:
    """A swept path as an axis: its values (scaled), label, positions and ticks."""

    def __init__(self, path: str, raw_values: Sequence[Any], ratio: float = 20.0):
        self.path = path
        distinct = list(dict.fromkeys(_text(v) if not is_number(v) else v for v in raw_values))
        self.numeric = all(is_number(v) for v in distinct)
        unit = unit_of(path.rsplit(".", 1)[-1])
        if self.numeric:
            self.factor, shown = scale_for(unit, distinct)
            self.levels = sorted(distinct)
            self.log = _log_axis(self.levels, ratio)
        else:
            self.factor, shown = 1.0, ""
            self.levels = distinct
            self.log = False
        self.label = axis_label(path_label(path), shown)
        self.unit = shown

    def position(self, value: Any) -> float:
        if self.numeric:
            return float(value) / self.factor
        return float(self.levels.index(_text(value)))

    def legend(self, value: Any) -> str:
        if self.numeric:
            return f"{float(value) / self.factor:.4g}" + (f" {self.unit}" if self.unit not in ("", "1") else "")
        return _text(value)

    def edges(self) -> np.ndarray:
        """Cell edges around the levels for a colour map: midpoints (geometric on a log axis)."""
        c = np.array([self.position(v) for v in self.levels], dtype=float)
        if c.size == 1:
            return np.array([c[0] * 0.9, c[0] * 1.1]) if self.log else np.array([c[0] - 0.5, c[0] + 0.5])
        if self.log:
            lc = np.log(c)
            mid = 0.5 * (lc[1:] + lc[:-1])
            return np.exp(np.concatenate([[lc[0] - (mid[0] - lc[0])], mid, [lc[-1] + (lc[-1] - mid[-1])]]))
        mid = 0.5 * (c[1:] + c[:-1])
        return np.concatenate([[c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]])

    def apply(self, ax, which: str = "x") -> None:
        """Label, scale and ticks: at the swept values themselves when they are few (plain numbers)."""
        from matplotlib import ticker
        axis = ax.xaxis if which == "x" else ax.yaxis
        axis.set_label_text(self.label)
        if self.log:
            (ax.set_xscale if which == "x" else ax.set_yscale)("log")
        if not self.numeric:
            axis.set_major_locator(ticker.FixedLocator(range(len(self.levels))))
            axis.set_major_formatter(ticker.FixedFormatter([str(v) for v in self.levels]))
        elif len(self.levels) <= 12:
            spots = [self.position(v) for v in self.levels]
            axis.set_major_locator(ticker.FixedLocator(spots))
            axis.set_major_formatter(ticker.FixedFormatter([f"{v:.4g}" for v in spots]))
            axis.set_minor_locator(ticker.NullLocator())
        elif self.log:
            axis.set_major_formatter(ticker.LogFormatter(labelOnlyBase=False))


def _scalar_view(key: str, data: Sequence[float]) -> tuple[np.ndarray, str, float, str]:
    """Values of a summary scalar as plotted, the axis label, the factor (plotted = value * factor)
    and the unit shown ("1" or "" for a plain number)."""
    unit = unit_of(key)
    y = np.asarray(data, dtype=float)
    if key.rsplit(".", 1)[-1] in ("extraction_efficiency", "optical_efficiency"):
        return 100 * y, f"{_human(key)} (%)", 100.0, "%"
    factor, shown = scale_for(unit, y.tolist())
    return y / factor, axis_label(_human(key), shown), 1.0 / factor, shown


def _curves(ax, key: str, x_axis: _Axis, groups: list[tuple[str, list[int]]], values: list[dict],
            y: np.ndarray, warned: np.ndarray) -> None:
    """One line per group of point indices, ordered along x; points with warnings ringed."""
    import matplotlib
    cmap = matplotlib.colormaps[CMAP_LINES]
    for g, (label, idx) in enumerate(groups):
        colour = cmap(0.85 * g / max(1, len(groups) - 1)) if len(groups) > 1 else SEED_COLOUR
        idx = sorted(idx, key=lambda i: x_axis.position(values[i][x_axis.path]))
        xs = [x_axis.position(values[i][x_axis.path]) for i in idx]
        ax.plot(xs, y[idx], "-o" if x_axis.numeric else ":o", color=colour, ms=4.5, lw=1.6, label=label or None)
        bad = [k for k, i in enumerate(idx) if warned[i]]
        if bad:
            ax.plot([xs[k] for k in bad], y[[idx[k] for k in bad]], "o", ms=11, mfc="none", mec=WARN_COLOUR,
                    mew=1.4, label="_warn")
    x_axis.apply(ax)
    ax.grid(True, which="major", alpha=0.3)


def _groups(paths: Sequence[str], values: list[dict], x_path: str, axes: dict[str, _Axis],
            combine: str) -> list[tuple[str, list[int]]]:
    """Points grouped by the values of the paths other than ``x_path`` (zip: one group)."""
    others = [p for p in paths if p != x_path]
    if combine == "zip" or not others:
        return [("", list(range(len(values))))]
    groups: dict[tuple, list[int]] = {}
    for i, v in enumerate(values):
        groups.setdefault(tuple(_text(v[p]) for p in others), []).append(i)
    out = []
    for i_list in groups.values():
        v = values[i_list[0]]
        label = ", ".join((f"{path_label(p)} " if len(others) > 1 else "") + axes[p].legend(v[p]) for p in others)
        out.append((label, i_list))
    return out


class _HeatMap:
    """A colour map of a figure over the grid of two swept paths: one cell of equal size per pair of
    values (ticks name the values, so uneven or logarithmic steps never squeeze a cell), cells annotated
    when few. Built once (mesh, colour bar, cell labels); :meth:`show` puts a figure's values in."""

    def __init__(self, fig, ax, x_axis: _Axis, y_axis: _Axis):
        self.x_axis, self.y_axis = x_axis, y_axis
        ny, nx = len(y_axis.levels), len(x_axis.levels)
        self.mesh = ax.pcolormesh(np.arange(nx + 1) - 0.5, np.arange(ny + 1) - 0.5, np.zeros((ny, nx)),
                                  shading="flat", cmap=MAP_CMAP)
        self.bar = fig.colorbar(self.mesh, ax=ax)
        size = 8 if nx <= 6 else 7 if nx <= 8 else 6
        self.cells = [[ax.text(cx, cy, "", ha="center", va="center", fontsize=size) for cx in range(nx)]
                      for cy in range(ny)] if nx * ny <= 48 else []
        for axis, swept, n in ((ax.xaxis, x_axis, nx), (ax.yaxis, y_axis, ny)):
            axis.set_label_text(swept.label)
            axis.set_ticks(range(n), [_level_text(swept, lv) for lv in swept.levels])
        ax.set_xlim(-0.5, nx - 0.5)
        ax.set_ylim(-0.5, ny - 0.5)
        if nx > 6:
            ax.tick_params(axis="x", labelrotation=40)

    def show(self, values: list[dict], y: np.ndarray, label: str) -> None:
        xa, ya = self.x_axis, self.y_axis
        z = np.full((len(ya.levels), len(xa.levels)), np.nan)
        for i, v in enumerate(values):
            cx = xa.levels.index(v[xa.path] if xa.numeric else _text(v[xa.path]))
            cy = ya.levels.index(v[ya.path] if ya.numeric else _text(v[ya.path]))
            z[cy, cx] = y[i]
        finite = z[np.isfinite(z)]
        self.mesh.set_array(np.ma.masked_invalid(z))
        self.mesh.set_clim(float(finite.min()), float(finite.max())) if finite.size else None
        self.bar.set_label(label)
        mid = 0.5 * (finite.min() + finite.max()) if finite.size else 0.0
        for cy, row in enumerate(self.cells):
            for cx, text in enumerate(row):
                ok = bool(np.isfinite(z[cy, cx]))
                text.set_visible(ok)
                text.set_text(f"{z[cy, cx]:.3g}" if ok else "")
                text.set_color("black" if ok and z[cy, cx] > mid else "white")


def _level_text(axis: _Axis, level: Any) -> str:
    return f"{axis.position(level):.4g}" if axis.numeric else str(level)


def _choose_x(paths: Sequence[str], axes: Mapping[str, _Axis], combine: str) -> str:
    """The path on the x axis: the first (zip), else the one with the most distinct values."""
    if combine == "zip":
        return paths[0]
    return max(paths, key=lambda p: (axes[p].numeric, len(axes[p].levels), -list(paths).index(p)))


def _varying(key: str, summaries: Sequence[Mapping | None]) -> np.ndarray | None:
    y = np.array([float(s[key]) if s and isinstance(s.get(key), (int, float)) else np.nan for s in summaries])
    finite = y[np.isfinite(y)]
    if finite.size == 0 or np.all(np.abs(finite - finite[0]) <= 1e-12 * max(1e-300, abs(finite[0]))):
        return None
    return y


def plot_sweep(result, combine: str, folder: Path, limits: Any = None, workers: int | None = None) -> list[Path]:
    """Write the figures of a sweep (see the module docstring); return their paths.

    Parameters
    ----------
    result : sweeps.SweepResult (paths, values, summaries)
    combine : "grid" or "zip"
    folder : where the PNG files go (created)
    limits : the config's Limits: damage-fluence and B-integral lines on those figures (limits.py)
    workers : processes that draw the figures (drawing.py; default: the cores this process may use)
    """
    return draw_all(sweep_jobs(result, combine, Path(folder), limits), workers)


@dataclass
class _SweepView:
    """What every figure of one sweep shares: the swept axes, the groups of points, the figures' values."""

    result: Any
    combine: str
    limits: Any
    axes: dict[str, _Axis]
    x_path: str
    others: list[str]
    groups: list[tuple[str, list[int]]]
    warned: np.ndarray
    views: dict[str, tuple[np.ndarray, str, float, str]]

    @property
    def two_grid(self) -> bool:
        return self.combine == "grid" and len(self.result.paths) == 2

    @property
    def along(self) -> str:
        return f" ({_listing(self.others)} varying with it)" if self.combine == "zip" and self.others else ""

    def panel(self, ax, key: str) -> None:
        """One figure's curves, scale, label and limit lines on ``ax``."""
        shown, label, scale, unit = self.views[key]
        _curves(ax, key, self.axes[self.x_path], self.groups, self.result.values, shown, self.warned)
        ax.set_ylabel(label)
        if _log_axis(shown.tolist(), 100.0):
            ax.set_yscale("log")
        _lines(ax, limit_lines(key, self.result.summaries, self.limits), scale, shown, "y", unit)


REUSABLE = hasattr(Axes, "_set_position")     # this matplotlib lets a canvas be shown again (_KeyCanvas)


class _KeyCanvas:
    """The figure of one summary figure against the swept values: built once (figure, axes, curves,
    colour map, ticks) and shown again for each figure of the sweep, only what differs replaced (a
    shared canvas). Every show draws the same image as a canvas built for that figure alone."""

    def __init__(self, view: _SweepView):
        self.view = view
        self.fig = new_figure(12.0 if view.two_grid else 8.2, 4.4)      # room for the legend beside the axes
        self.ax = self.fig.add_subplot(1, 2, 1) if view.two_grid else self.fig.add_subplot(1, 1, 1)
        self.heat = _HeatMap(self.fig, self.fig.add_subplot(1, 2, 2), view.axes[view.x_path],
                             view.axes[view.others[0]]) if view.two_grid else None
        self.places = [(ax, ax.get_position(original=True), ax.get_position()) for ax in self.fig.axes]
        self.shown = 0

    def _clean(self) -> None:
        """Back to the figure as built: the curves, limit lines and legend of the last figure removed, the
        axes at their places before the layout (the colour map is updated in place)."""
        for artist in (*self.ax.lines, *self.ax.texts):
            artist.remove()
        if self.ax.get_legend() is not None:
            self.ax.get_legend().remove()
        self.ax.set_yscale("linear")
        self.ax.relim()
        self.ax.set_autoscale_on(True)
        for ax, original, active in self.places:       # where the layout started from when built (the public
            ax._set_position(original, which="original")   # set_position would take the axes out of the layout)
            ax._set_position(active, which="active")

    def show(self, key: str, path: Path) -> Path:
        v = self.view
        if self.shown:
            self._clean()
        self.shown += 1
        shown, label, _, _ = v.views[key]
        v.panel(self.ax, key)
        _legend(self.ax, v.groups, v.warned, v.axes, v.others, v.combine)
        if self.heat is not None:
            self.heat.show(v.result.values, shown, label)
        title = f"{_human(key)} against {_listing([v.x_path] + v.others) if v.combine != 'zip' else v.x_path}"
        self.fig.suptitle(_wrapped(title + v.along, self.fig), fontsize=10)
        return save_png(self.fig, path)


def sweep_jobs(result, combine: str, folder: Path, limits: Any = None, shared: bool = True) -> list[FigureJob]:
    """The figures of a sweep as jobs (drawing.py), in the order :func:`plot_sweep` returns them.

    ``shared``: the figures of single summary figures are drawn on one canvas per process, built once
    (:class:`_KeyCanvas`); False builds a canvas for each (the benchmark's way of drawing as before)."""
    folder.mkdir(parents=True, exist_ok=True)
    paths, values, summaries = list(result.paths), result.values, result.summaries
    if not values:
        return []
    axes = {p: _Axis(p, [v[p] for v in values]) for p in paths}
    x_path = _choose_x(paths, axes, combine)
    views: dict[str, tuple[np.ndarray, str, float, str]] = {}
    for key in scalar_keys(summaries):
        if key in NOT_PLOTTED:
            continue
        y = _varying(key, summaries)
        if y is None or _echoes(key, y, values, paths):
            continue
        views[key] = _scalar_view(key, y)
    view = _SweepView(result, combine, limits, axes, x_path, [p for p in paths if p != x_path],
                      _groups(paths, values, x_path, axes, combine),
                      np.array([bool(s and s.get("warnings")) for s in summaries]), views)
    canvases: dict[int, _KeyCanvas] = {}        # one per process: a forked worker builds its own

    def one(key: str) -> Path:
        if not shared or not REUSABLE:
            return _KeyCanvas(view).show(key, folder / f"{key}.png")
        canvas = canvases.get(os.getpid())
        if canvas is None:
            canvas = canvases[os.getpid()] = _KeyCanvas(view)
        return canvas.show(key, folder / f"{key}.png")

    def overview(panels: list[str]) -> Path:
        rows, cols = (2, 2) if len(panels) == 4 else (1, len(panels))
        fig = new_figure((11.0 if cols == 2 else 5.2 * cols) + 3.0, 3.8 * rows + 0.4)   # the legend beside
        grid = [fig.add_subplot(rows, cols, n + 1) for n in range(len(panels))]
        for ax, key in zip(grid, panels, strict=True):
            view.panel(ax, key)
        _legend(grid[0], view.groups, view.warned, axes, view.others, combine, figure=fig, more=grid[1:])
        fig.suptitle(_wrapped(f"{result.title or result.out.name}: sweep overview{view.along}", fig), fontsize=10)
        return save_png(fig, folder / "overview.png")

    jobs = [FigureJob(folder / f"{key}.png", partial(one, key), PANELS if view.two_grid else LIGHT) for key in views]
    panels = [next(k for k in group if k in views) for group in OVERVIEW if any(k in views for k in group)]
    if len(panels) >= 2:
        jobs.append(FigureJob(folder / "overview.png", partial(overview, panels), float(len(panels))))
    return jobs


def _wrapped(text: str, fig, points: float = 10.0) -> str:
    """``text`` broken into lines that fit the figure's width (a character of ``points`` size takes
    about 0.55 of it), each line of a multi-line text wrapped on its own."""
    width = max(20, int(fig.get_figwidth() * 72 / (0.55 * points)) - 4)
    return "\n".join(textwrap.fill(line, width) for line in text.split("\n"))


def _lines(ax, lines: Sequence[LimitLine], scale: float, shown: np.ndarray, which: str, unit: str) -> None:
    """Draw limit lines across the axis (``which``: "y" for horizontal lines, "x" for vertical) where
    they fall near the data; a line far beyond it (the data would shrink to a sliver) gets a legend entry
    with an arrow and its value instead. Every one carries the gid "limit" (for the legend)."""
    finite = shown[np.isfinite(shown)]
    top = float(finite.max()) if finite.size else 0.0
    log = (ax.get_yscale() if which == "y" else ax.get_xscale()) == "log"
    for line in lines:
        v = line.value * scale
        text = f"{line.label}: {v:.3g}" + ("" if unit in ("", "1") else "%" if unit == "%" else f" {unit}")
        if top > 0 and v > (10.0 if log else 2.5) * top:
            ax.plot([], [], ls="none", marker=r"$\uparrow$" if which == "y" else r"$\rightarrow$", ms=8,
                    color=line.colour, label=f"{text}, off the axis", gid="limit")
            continue
        draw = ax.axhline if which == "y" else ax.axvline
        draw(v, color=line.colour, ls=line.style, lw=1.3, label=text, zorder=1.5, gid="limit")


def _listing(names: Sequence[str]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def _legend(ax, groups, warned, axes, others, combine, figure=None, more=()) -> None:
    """The curves' legend, the warning ring and the limit lines, beside the axes (for the whole figure,
    at its right, when ``figure`` is given; ``more``: further axes whose limit lines it names), never over
    the data."""
    from matplotlib.lines import Line2D
    keep, seen = [], set()
    for a in (ax, *more):
        for h, lb in zip(*a.get_legend_handles_labels(), strict=True):
            if lb != "_warn" and lb not in seen:
                seen.add(lb)
                keep.append((h, lb))
    curves = [k for k in keep if k[0].get_gid() != "limit"]
    lines = [k for k in keep if k[0].get_gid() == "limit"]
    if len(curves) > 12:
        curves = curves[:11] + [(Line2D([], [], ls="none"), f"... {len(curves) - 11} more")]
    keep = curves + lines
    if warned.any():
        keep.append((Line2D([], [], ls="none", marker="o", ms=9, mfc="none", mec=WARN_COLOUR, mew=1.4),
                     "run with warnings"))
    if not keep:
        return
    title = axis_label(path_label(others[0]), axes[others[0]].unit) if len(others) == 1 and combine == "grid" \
        and len(groups) > 1 else None
    args = ([h for h, _ in keep], [textwrap.fill(lb, 34, subsequent_indent="  ") for _, lb in keep])
    style = dict(title=title, fontsize=8, title_fontsize=8, frameon=False)
    if figure is not None:
        figure.legend(*args, loc="outside right upper", **style)
    else:
        ax.legend(*args, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0, **style)
