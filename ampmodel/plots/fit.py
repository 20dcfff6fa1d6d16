"""Figures of a fit (``plots/fit_<figure>.png``): each measured figure against the condition that varies
between the rows, with the fitted model, and the weighted residuals below.

Top panel: the measured values (with ±1 sigma bars where the table gives sigmas), the fitted model at
each row (open markers) and, when one condition varies, the fitted config run along it between the
least and the largest measured condition (a line). Without a varying condition the rows are plotted
against their line in the file. Bottom panel: the weighted residual (model − measured)/sigma, or
relative, (model − measured)/|measured|, as the fit weighed it. Reads only the plain data of fit.json.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Mapping

from ampmodel.plots.common import OUTPUT_COLOUR, SEED_COLOUR, new_figure, safe_name, save_png
from ampmodel.plots.sweep import _human, axis_label, path_label, scale_for
from ampmodel.units import unit_of


def _scaled(name: str, values: list[float], words: str) -> tuple[float, str]:
    """(divisor, axis label) for values of the key or figure ``name`` (its unit from its name's suffix)."""
    unit = unit_of(name.rsplit(".", 1)[-1])
    k, shown = scale_for(unit, values)
    return k, axis_label(words, shown)


def _x_of(fit: Mapping[str, Any]) -> tuple[str, list[float]]:
    """The x axis: the curve's condition, else the first condition that varies, else the line numbers."""
    points = fit["points"]
    curve = fit.get("curve")
    names = [curve["condition"]] if curve else []
    names += [c for c in (points[0]["conditions"] if points else {}) if c not in names]
    for name in names:
        values = [p["conditions"].get(name) for p in points]
        if all(isinstance(v, (int, float)) for v in values) and len(set(values)) > 1:
            return name, [float(v) for v in values]
    return "", [float(p["line"]) for p in points]


def _plot_one(fit: Mapping[str, Any], figure: str, folder: Path) -> Path | None:
    name, xs = _x_of(fit)
    rows = [(x, p) for x, p in zip(xs, fit["points"], strict=True) if figure in p["measured"]]
    if not rows:
        return None
    kx, xlabel = _scaled(name, xs, path_label(name)) if name else (1.0, "line in the data file")
    ky, ylabel = _scaled(figure, [p["measured"][figure] for _, p in rows], _human(figure))
    xs = [x / kx for x in xs]
    rows = [(x / kx, p) for x, p in rows]
    fig = new_figure(6.4, 5.6)
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1.3))
    mx = [x for x, _ in rows]
    my = [p["measured"][figure] / ky for _, p in rows]
    err = [p["sigma"].get(figure, 0.0) / ky for _, p in rows]
    top.errorbar(mx, my, yerr=err if any(err) else None, fmt="o", color=OUTPUT_COLOUR, label="measured",
                 capsize=3, zorder=3)
    model = [(x, p["modelled"].get(figure)) for x, p in zip(xs, fit["points"], strict=True)]
    model = [(x, y) for x, y in model if isinstance(y, (int, float)) and math.isfinite(y)]
    if model:
        top.plot([x for x, _ in model], [y / ky for _, y in model], "s", mfc="none", color=SEED_COLOUR,
                 label="fitted model at each row")
    curve = fit.get("curve")
    if curve and figure in curve["figures"]:
        top.plot([v / kx for v in curve["values"]], [y / ky for y in curve["figures"][figure]], "-", color=SEED_COLOUR, lw=1.2, label="fitted model")
    top.set_ylabel(ylabel)
    fitted = ", ".join(f"{path_label(p)} = {v:.5g}" for p, v in fit["values"].items())
    top.set_title(f"{fitted}\n{fit['status']}, residual rms {fit['residual_rms']:.3g}", fontsize=9)
    top.legend(fontsize=8)
    top.grid(alpha=0.3)
    res = [p["residual"][figure] for _, p in rows]
    bottom.axhline(0.0, color="0.5", lw=0.8)
    bottom.plot(mx, res, "o", color=OUTPUT_COLOUR)
    weighted = all(p["sigma"].get(figure) for _, p in rows)
    bottom.set_ylabel("(model − meas.)/σ" if weighted else "(model − meas.)/|meas.|", fontsize=8)
    bottom.set_xlabel(xlabel)
    bottom.grid(alpha=0.3)
    return save_png(fig, folder / f"fit_{safe_name(figure)}.png")


def plot_fit(fit: Mapping[str, Any], folder: Path) -> list[Path]:
    """Write one PNG per measured figure of a fit (``fit`` as in fit.json); return their paths."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for figure in fit["figures"]:
        path = _plot_one(fit, figure, folder)
        if path is not None:
            out.append(path)
    return out
