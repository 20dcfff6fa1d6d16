"""The sensitivity figure of a tolerance run (``plots/sensitivity.png``): for a few key figures, a bar
per spread value giving Spearman's rank correlation rho of the figure with that value, strongest at
the top (studies/tolerances.py says how rho is computed and what it means).

Bars to the right: the figure rises with the value; to the left: it falls. The grey band is
|rho| < 2/sqrt(n), about where a correlation of n independent samples is indistinguishable from
none (the 95 % range of rho under no association is about ±1.96/sqrt(n − 1)); a bar inside it says
that tolerance does not measurably move the figure with these samples.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Mapping, Sequence

from ampmodel.plots.common import OUTPUT_COLOUR, SEED_COLOUR, new_figure, save_png
from ampmodel.plots.sweep import _human, _wrapped, path_label

MAX_PANELS = 6


def plot_sensitivity(sensitivity: Mapping[str, Sequence[Mapping[str, Any]]], figures: Sequence[str], folder: Path,
                     title: str = "", samples: int = 0) -> list[Path]:
    """Write ``sensitivity.png`` for ``figures`` (the first MAX_PANELS that have a ranking); return [its path]
    or [] when none has one.

    Parameters
    ----------
    sensitivity : figure -> [{"path", "rho", ...}, ...], strongest first (``tolerances.sensitivity``)
    figures : the figures to show, in order
    folder : where the PNG goes (created)
    title : the config's title; samples : the samples that ran (for the noise band)
    """
    shown = [f for f in figures if sensitivity.get(f)][:MAX_PANELS]
    if not shown:
        return []
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    bars = max(len(sensitivity[f]) for f in shown)
    cols = 1 if len(shown) == 1 else 2
    rows = math.ceil(len(shown) / cols)
    fig = new_figure(6.4 * cols, rows * (1.5 + 0.42 * bars) + 0.5)
    noise = 2.0 / math.sqrt(samples) if samples > 3 else None
    for n, figure in enumerate(shown):
        ax = fig.add_subplot(rows, cols, n + 1)
        _panel(ax, figure, list(sensitivity[figure])[::-1], noise)
    band = f"; grey: |ρ| < 2/√n = {noise:.2f}, within the noise" if noise is not None else ""
    fig.suptitle(_wrapped("sensitivity: which tolerance moves each figure (Spearman's rank correlation"
                 + (f", {samples} samples" if samples else "") + f"{band})" + (f"\n{title}" if title else ""), fig),
                 fontsize=10)
    return [save_png(fig, folder / "sensitivity.png")]


def _panel(ax, figure: str, rows: Sequence[Mapping[str, Any]], noise: float | None) -> None:
    """One figure's bars, bottom to top (so the strongest, last, is at the top)."""
    values = [r["rho"] if r["rho"] is not None else 0.0 for r in rows]
    colours = [SEED_COLOUR if v >= 0 else OUTPUT_COLOUR for v in values]
    positions = list(range(len(rows)))
    if noise is not None:
        ax.axvspan(-noise, noise, color="0.88", zorder=0)
    ax.barh(positions, values, color=colours, height=0.6, zorder=2)
    ax.axvline(0.0, color="0.3", lw=0.8, zorder=3)
    for y, (v, r) in enumerate(zip(values, rows, strict=True)):
        text = "undefined" if r["rho"] is None else f"{v:+.2f}"
        ax.text(v + (0.03 if v >= 0 else -0.03), y, text, va="center", ha="left" if v >= 0 else "right",
                fontsize=8, zorder=4)
    ax.set_yticks(positions, [path_label(r["path"]) for r in rows], fontsize=8)
    ax.set_xlim(-1.15, 1.15)
    ax.set_xlabel("rank correlation ρ (− falls, + rises with the value)", fontsize=8)
    ax.set_title(_human(figure), fontsize=9)
    ax.grid(True, axis="x", alpha=0.3)
