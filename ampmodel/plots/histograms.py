"""Histograms of a tolerance run (``plots/hist_<key>.png``): one per summary figure that varies, its 5, 50
and 95 % percentiles marked, with the limit lines of that figure (limits.py)."""
from __future__ import annotations

import textwrap
from functools import partial
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from ampmodel.output.summary import scalar_keys
from ampmodel.plots.common import SEED_COLOUR, new_figure, save_png
from ampmodel.plots.drawing import FigureJob, draw_all
from ampmodel.plots.limits import LimitLine, limit_lines
from ampmodel.plots.sweep import NOT_PLOTTED, _human, _lines, _scalar_view, _varying, _wrapped


def plot_histograms(summaries: Sequence[Mapping | None], percentiles: Mapping[str, Mapping[str, float]],
                    folder: Path, title: str = "", limits: Any = None, bounds: Sequence[Any] = (),
                    workers: int | None = None) -> list[Path]:
    """One histogram per varying summary scalar, with its 5, 50 and 95 % percentiles marked, and the
    damage, B-integral and bound lines of that figure (limits.py).

    Parameters
    ----------
    summaries : one summary.json dict per sample (None for a sample that failed)
    percentiles : key -> {"p5", "p50", "p95"} in the unit the key carries
    folder : where ``hist_<key>.png`` go (created)
    title : the config's title; limits : its Limits; bounds : the run's bounds (FIGURE<=VALUE ...)
    workers : processes that draw the figures (drawing.py)
    """
    return draw_all(histogram_jobs(summaries, percentiles, Path(folder), title, limits, bounds), workers)


def histogram_jobs(summaries: Sequence[Mapping | None], percentiles: Mapping[str, Mapping[str, float]],
                   folder: Path, title: str = "", limits: Any = None, bounds: Sequence[Any] = ()) -> list[FigureJob]:
    """The histograms of :func:`plot_histograms` as jobs (drawing.py)."""
    folder.mkdir(parents=True, exist_ok=True)
    jobs = []
    for key in scalar_keys(summaries):
        if key in NOT_PLOTTED or key not in percentiles:
            continue
        y = _varying(key, summaries)
        if y is not None:
            lines = limit_lines(key, summaries, limits, bounds)
            jobs.append(FigureJob(folder / f"hist_{key}.png",
                                  partial(_histogram, key, y, percentiles[key], lines, folder, title)))
    return jobs


def _histogram(key: str, y: np.ndarray, p: Mapping[str, float], lines: Sequence[LimitLine], folder: Path,
               title: str) -> Path:
    shown, label, scale, shown_unit = _scalar_view(key, y)
    data = shown[np.isfinite(shown)]
    fig = new_figure(8.2, 4.2)
    ax = fig.add_subplot(1, 1, 1)
    bins = int(np.clip(np.sqrt(data.size) * 1.5, 8, 60))
    ax.hist(data, bins=bins, color=SEED_COLOUR, alpha=0.8, edgecolor="white", linewidth=0.5)
    unit = "%" if shown_unit == "%" else "" if shown_unit in ("1", "") else f" {shown_unit}"
    for name, style in (("p5", ":"), ("p50", "-"), ("p95", ":")):
        value = p[name] * scale
        ax.axvline(value, color="0.2", ls=style, lw=1.4, label=f"{name[1:]} %: {value:.4g}{unit}")
    _lines(ax, lines, scale, data, "x", shown_unit)
    ax.set_xlabel(label)
    ax.set_ylabel(f"samples (of {data.size})")
    handles, labels = ax.get_legend_handles_labels()
    ax.legend(handles, [textwrap.fill(lb, 34, subsequent_indent="  ") for lb in labels], fontsize=8, frameon=False,
              title="percentiles, limits", title_fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0),
              borderaxespad=0.0)
    ax.grid(True, alpha=0.3)
    fig.suptitle(_wrapped(f"{_human(key)}: spread over {data.size} samples" + (f" ({title})" if title else ""),
                          fig), fontsize=10)
    return save_png(fig, folder / f"hist_{key}.png")
