"""Beam figures of a run: the fluence map and lineouts at every step (small multiples), and the D4σ
diameters, peak-to-mean modulation and fill factor along the layout.

Drawn from the Result's step records and summary (no physics recomputed), on their own Agg canvas
like the other figures of a run; made for runs whose summary carries the beam figures.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.description import step_label
from ampmodel.plots.common import (
    MAP_CMAP,
    OUTPUT_COLOUR,
    SEED_COLOUR,
    block_mean,
    centre_index,
    finite_max,
    is_cw,
    new_figure,
    pixel_extent,
    save_png,
    seed_map,
    step_map,
    step_ticks,
    title_suffix,
)
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result

BEAM_KEYS = ("d4sigma_x_mm", "d4sigma_y_mm", "modulation_peak_to_mean", "fill_factor")
FILL_COLOUR = "#c9dcc9"     # pale: a figure of the layout, not an alarm
FILL_AXIS_LABEL = "fill factor of the next medium's aperture"
FILL_CAPTION = ("fill factor: the beam's energy over its peak fluence times the clear aperture of the medium "
                "it meets next;\nlow before the beam is expanded to fill that aperture, which is expected, "
                "not a fault")
MAX_PANELS_PER_ROW = 5


def has_beam_figures(result: Result) -> bool:
    """True when the summary holds the beam figures of the seed and of every step."""
    summary = result.summary or {}
    steps = summary.get("steps")
    seed = summary.get("seed_beam") or {}
    return (isinstance(steps, list) and len(steps) == len(result.steps) and all(k in seed for k in BEAM_KEYS)
            and all(isinstance(s, dict) and all(k in s for k in BEAM_KEYS) for s in steps))


def plot_beam_steps(result: Result, path: Path) -> Path:
    """Small multiples: for the seed and after each step, the fluence map (top) and its x and y
    lineouts through the axis (below), each on its own scale (peak in the title).

    Parameters
    ----------
    result : the run (maps in J/m², a cw run's in W/m², grid in m), shown in J/cm² (W/cm²) over mm
    path : PNG file to write
    """
    maps = [seed_map(result)] + [step_map(result, r) for r in result.steps]
    unit, what = ("W/cm²", "Intensity") if is_cw(result) else ("J/cm²", "Fluence")
    labels = ["seed"] + [step_label(result.config.steps, r.index, short=True) for r in result.steps]
    n = len(maps)
    cols = min(n, MAX_PANELS_PER_ROW)
    rows = math.ceil(n / cols)
    fig = new_figure(2.7 * cols + 0.6, 4.3 * rows + 0.5)
    gs = fig.add_gridspec(2 * rows, cols, height_ratios=[1.0, 0.62] * rows)
    x_mm = np.asarray(result.x_m, dtype=float) * 1e3
    y_mm = np.asarray(result.y_m, dtype=float) * 1e3
    xs, ys = block_mean(x_mm, 0), block_mean(y_mm, 0)
    x0, x1 = pixel_extent(xs)
    y0, y1 = pixel_extent(ys)
    iy, ix = centre_index(result.y_m), centre_index(result.x_m)
    summary_steps = (result.summary or {}).get("steps", [])
    figures = [(result.summary or {}).get("seed_beam", {})] + list(summary_steps)
    for i, (img, label) in enumerate(zip(maps, labels, strict=True)):
        r, c = divmod(i, cols)
        ax = fig.add_subplot(gs[2 * r, c])
        shown = np.nan_to_num(img) / 1e4
        peak = finite_max(shown)
        ax.imshow(block_mean(block_mean(shown, 0), 1), origin="lower", extent=(x0, x1, y0, y1),
                  cmap=MAP_CMAP, vmin=0.0, vmax=peak if peak > 0 else 1.0, interpolation="nearest")
        ax.set_title(f"{label}\npeak {peak:.3g} {unit}", fontsize="small")
        ax.tick_params(labelsize="x-small")
        if c == 0:
            ax.set_ylabel("y (mm)", fontsize="small")
        lo = fig.add_subplot(gs[2 * r + 1, c])
        lo.plot(x_mm, shown[iy, :], color=OUTPUT_COLOUR, linewidth=1.0, label="along x")
        lo.plot(y_mm, shown[:, ix], color=SEED_COLOUR, linewidth=1.0, linestyle="--", label="along y")
        lo.set_xlim(x0, x1)
        lo.set_ylim(bottom=0, top=peak * 1.08 if peak > 0 else 1.0)
        lo.tick_params(labelsize="x-small")
        lo.grid(True, alpha=0.3)
        fig_i = figures[i] if i < len(figures) and isinstance(figures[i], dict) else {}
        figures_text = (f"D4σ {fig_i['d4sigma_x_mm']:.3g} x {fig_i['d4sigma_y_mm']:.3g} mm, "
                        f"p/m {fig_i['modulation_peak_to_mean']:.2g}" if "d4sigma_x_mm" in fig_i else "")
        if figures_text:
            lo.set_title(figures_text, fontsize="x-small")
        if i == 0:          # one key for the lines of every panel, below them all
            fig.legend(handles=lo.get_lines(), loc="outside lower center", ncols=2, fontsize="small",
                       frameon=False)
        lo.set_xlabel("x or y (mm)", fontsize="small")
        if c == 0:
            lo.set_ylabel(unit, fontsize="small")
    fig.suptitle(f"{what} at each step (maps, and lineouts through the axis)" + title_suffix(result))
    return save_png(fig, path)


def plot_beam_size(result: Result, path: Path) -> Path:
    """D4σ diameters in x and y along the layout (top) and the peak-to-mean modulation and fill
    factor over the clear aperture (bottom), seed first. The fill factor of a step that is not a pass
    is over the clear aperture of the next medium the beam meets: a caption says so, and it is drawn
    as pale bars, since a low value after free space or a relay is expected, not a fault.

    Parameters
    ----------
    result : the run; its summary's ``seed_beam`` and ``steps`` carry the figures
    path : PNG file to write
    """
    summary = result.summary
    rows = [summary["seed_beam"]] + list(summary["steps"])
    labels = ["seed"] + [step_label(result.config.steps, r.index, short=True) for r in result.steps]
    pos = np.arange(len(rows), dtype=float)
    dx = np.array([r["d4sigma_x_mm"] for r in rows])
    dy = np.array([r["d4sigma_y_mm"] for r in rows])
    mod = np.array([r["modulation_peak_to_mean"] for r in rows])
    fill = np.array([r["fill_factor"] for r in rows])
    width_in = max(6.8, 0.5 * len(rows) + 3.0)
    fig = new_figure(width_in, 7.0)
    gs = fig.add_gridspec(2, 1, height_ratios=[1.2, 1.0])
    ax = fig.add_subplot(gs[0])
    ax2 = fig.add_subplot(gs[1], sharex=ax)
    ax.plot(pos, dx, color=OUTPUT_COLOUR, marker="o", label="D4σ along x")
    ax.plot(pos, dy, color=SEED_COLOUR, marker="s", linestyle="--", label="D4σ along y")
    top = max(finite_max(dx), finite_max(dy))
    ax.set_ylim(0, top * 1.15 if top > 0 else 1.0)
    ax.set_ylabel("second-moment diameter D4σ (mm)")
    ax.grid(True, alpha=0.3)
    legend_above(ax, "Beam size along the layout")
    ax.tick_params(axis="x", labelbottom=False)
    ax3 = ax2.twinx()           # the fill factor: pale bars behind, on the right axis
    ax3.bar(pos, fill, width=0.55, color=FILL_COLOUR, label="fill factor (right axis, bars)")
    ax3.set_ylabel(FILL_AXIS_LABEL)
    ax3.set_ylim(0, 1.05)
    ax2.set_zorder(ax3.get_zorder() + 1)       # the modulation line in front of the bars
    ax2.patch.set_visible(False)
    ax2.plot(pos, mod, color="#7a3f9d", marker="o", label="peak-to-mean modulation (left axis)")
    ax2.set_ylabel("peak-to-mean modulation")
    ax2.set_ylim(0, max(2.2, finite_max(mod) * 1.1))
    ax2.axhline(1.0, color="0.5", linestyle=":", linewidth=1.0)
    ax2.grid(True, alpha=0.3)
    legend_above(ax2, "Modulation over the clear aperture, and fill factor (README: beam figures)\n"
                 + FILL_CAPTION, handles=ax2.get_lines()[:1] + list(ax3.containers[:1]))
    ax2.set_xlabel("step")
    step_ticks(ax2, labels, pos, width_in)
    fig.suptitle("Beam figures through the layout" + title_suffix(result))
    return save_png(fig, path)
