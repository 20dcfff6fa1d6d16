"""Figures along the layout: energy (cw: power) and gain after each step, the pulse's power in time
before and after, and the B-integral accumulated step by step."""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.description import step_label
from ampmodel.plots.common import (
    ENERGY_UNITS,
    LOSS_COLOUR,
    OUTPUT_COLOUR,
    POWER_UNITS,
    SEED_COLOUR,
    TIME_UNITS,
    finite_max,
    is_cw,
    new_figure,
    save_png,
    step_energies,
    step_gains,
    step_ticks,
    title_suffix,
    unit_prefix,
)
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def plot_energy_per_step(result: Result, path: Path) -> Path:
    """Energy after each step (seed first) and the gain of each step.

    Parameters
    ----------
    result : the run; energies in J (cw: power in W), shown with a prefix chosen by size
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    cw = is_cw(result)
    seed, after = step_energies(result)
    gains = step_gains(result, seed, after)
    values = np.concatenate(([seed], after))
    labels = ["seed"] + [step_label(result.config.steps, r.index, short=True) for r in result.steps]
    pos = np.arange(values.size, dtype=float)
    factor, unit = unit_prefix(finite_max(values), POWER_UNITS if cw else ENERGY_UNITS)
    shown = values / factor
    n = values.size
    width_in = max(6.8, 0.5 * n + 3.0)
    fig = new_figure(width_in, 7.0)
    gs = fig.add_gridspec(2, 1, height_ratios=[1.3, 1.0])
    ax_e = fig.add_subplot(gs[0])
    ax_g = fig.add_subplot(gs[1], sharex=ax_e)

    positive = shown[shown > 0]
    log_e = positive.size >= 2 and positive.max() / positive.min() > 50
    plot_e = np.where(shown > 0, shown, np.nan) if log_e else shown
    ax_e.plot(pos, plot_e, color="0.55", linewidth=1.0, zorder=1)
    ax_e.scatter(pos[:1], plot_e[:1], color=SEED_COLOUR, s=40, zorder=3, label="seed")
    ax_e.scatter(pos[1:], plot_e[1:], color=OUTPUT_COLOUR, s=40, zorder=3, label="after step")
    if log_e:
        _log_axis_with_room(ax_e, positive)
    else:
        ax_e.set_ylim(bottom=0, top=max(finite_max(shown) * 1.15, 1e-30) if finite_max(shown) > 0 else 1.0)
    if n <= 14:
        for p, v in zip(pos, shown, strict=True):
            if np.isfinite(v) and (v > 0 or not log_e):
                ax_e.annotate(f"{v:.3g}", (p, v), textcoords="offset points", xytext=(0, 7),
                              ha="center", fontsize="small")
    what = "power" if cw else "energy"
    ax_e.set_ylabel(f"{what} ({unit})")
    ax_e.grid(True, alpha=0.3)
    legend_above(ax_e, f"{what.capitalize()} after each step")
    ax_e.tick_params(axis="x", labelbottom=False)

    gpos, gval = pos[1:], gains
    ok = np.isfinite(gval)
    colours = [OUTPUT_COLOUR if g >= 1 else LOSS_COLOUR for g in gval[ok]]
    gpos_ok, gval_ok = gpos[ok], gval[ok]
    gp = gval_ok[gval_ok > 0]
    log_g = gp.size >= 2 and gp.max() / gp.min() > 30
    if log_g:
        keep = gval_ok > 0
        ax_g.bar(gpos_ok[keep], gval_ok[keep], width=0.6,
                 color=[c for c, k in zip(colours, keep, strict=True) if k])
        _log_axis_with_room(ax_g, np.append(gp, 1.0))
    elif gval_ok.size:
        ax_g.bar(gpos_ok, gval_ok, width=0.6, color=colours)
        ax_g.set_ylim(bottom=0, top=max(1.0, finite_max(gval_ok)) * 1.18)
    else:
        ax_g.set_ylim(0, 2)
    ax_g.axhline(1.0, color="0.3", linestyle=":", linewidth=1.0)
    if n <= 14:
        for p, g in zip(gpos, gval, strict=True):
            text = f"{g:.3g}" if np.isfinite(g) else "n/a"
            y = g if (np.isfinite(g) and (g > 0 or not log_g)) else (1.0 if log_g else 0.0)
            ax_g.annotate(text, (p, y), textcoords="offset points", xytext=(0, 3), ha="center",
                          va="bottom", fontsize="small")
    ax_g.set_ylabel(f"gain ({what} out / in)")
    ax_g.set_title("Gain of each step (red: gain > 1, grey: loss; dotted line: 1)")
    ax_g.grid(True, axis="y", alpha=0.3)
    ax_g.set_xlabel("step")
    step_ticks(ax_g, labels, pos, width_in)
    fig.suptitle(f"{what.capitalize()} through the layout" + title_suffix(result))
    return save_png(fig, path)


def _log_axis_with_room(ax, positive: np.ndarray) -> None:
    """A log y axis whose top leaves 15 % of the decades of ``positive`` (> 0) above the largest value,
    room for the values written above the points or bars."""
    ax.set_yscale("log")
    ax.set_ylim(top=positive.max() * (positive.max() / positive.min()) ** 0.15)


def plot_pulse_power(result: Result, path: Path) -> Path:
    """Seed and output power against time, plus normalised shapes when the peaks differ > 5x.

    Parameters
    ----------
    result : the run; ``t_s`` in s and power in W, shown with prefixes chosen by span and peak
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    t = np.asarray(result.t_s, dtype=float).ravel()
    seed = np.nan_to_num(np.asarray(result.seed_power_W, dtype=float).ravel())
    out = np.nan_to_num(np.asarray(result.steps[-1].power_W, dtype=float).ravel()) if result.steps else seed
    span = float(t.max() - t.min()) if t.size > 1 else (abs(float(t[0])) if t.size else 0.0)
    tf, tu = unit_prefix(span if span > 0 else 1e-9, TIME_UNITS)
    ps, po = finite_max(seed), finite_max(out)
    pf, pu = unit_prefix(max(ps, po), POWER_UNITS)
    ratio = po / ps if ps > 0 and po > 0 else 1.0
    shapes = ratio > 5 or ratio < 0.2
    fig = new_figure(8.0, 7.0 if shapes else 4.6)
    axes = fig.subplots(2, 1, sharex=True) if shapes else [fig.subplots(1, 1)]
    ax = axes[0]
    kw = dict(marker="o", markersize=4) if t.size <= 24 else {}
    seed_e, after = step_energies(result)
    eu = unit_prefix(max(seed_e, finite_max(after)), ENERGY_UNITS)
    out_e = after[-1] if after.size else seed_e
    out_name = f"output after step {result.steps[-1].index}" if result.steps else "output"
    ax.plot(t / tf, seed / pf, color=SEED_COLOUR, label=f"seed, {seed_e / eu[0]:.3g} {eu[1]}", **kw)
    figures = ""
    if result.summary.get("output_duration_ns") is not None and result.summary.get("output_peak_power_W"):
        peak = result.summary["output_peak_power_W"]
        figures = (f"; FWHM {result.summary['output_duration_ns'] * 1e-9 / tf:.3g} {tu}, true peak "
                   f"{peak / unit_prefix(peak, POWER_UNITS)[0]:.3g} {unit_prefix(peak, POWER_UNITS)[1]}")
    ax.plot(t / tf, out / pf, color=OUTPUT_COLOUR, linestyle="--",
            label=f"{out_name}, {out_e / eu[0]:.3g} {eu[1]}{figures}", **kw)
    ax.set_ylabel(f"power ({pu})")
    ax.set_ylim(bottom=0, top=max(ps, po) / pf * 1.08 if max(ps, po) > 0 else 1.0)
    ax.grid(True, alpha=0.3)
    legend_above(ax, "Pulse power of the whole beam (mean over each time slice)")
    if shapes:
        axn = axes[1]
        for p, peak, colour, ls, name in ((seed, ps, SEED_COLOUR, "-", "seed"),
                                          (out, po, OUTPUT_COLOUR, "--", out_name)):
            axn.plot(t / tf, p / peak if peak > 0 else p, color=colour, linestyle=ls, label=name, **kw)
        axn.set_ylabel("power / own peak")
        axn.set_ylim(0, 1.1)
        axn.grid(True, alpha=0.3)
        legend_above(axn, "Normalised pulse shapes (each divided by its own peak)")
    axes[-1].set_xlabel(f"time ({tu})")
    if t.size == 1:
        axes[-1].set_xlim(t[0] / tf - 1.0, t[0] / tf + 1.0)
    fig.suptitle("Seed and output pulses" + title_suffix(result))
    return save_png(fig, path)


def b_integrals(result: Result) -> tuple[np.ndarray, np.ndarray]:
    """(accumulated, per-step) B-integral in rad: the largest over the beam after / within each step.

    The accumulated value is the largest of each step's B-integral map. The value added in a step is
    the summary's ``b_integral_rad`` of that step when the summary has it for every step (exactly 0
    for a step that adds none, such as a relay, which only moves or rescales the map); only a Result
    without it falls back to the largest increase of the map over the step before.
    """
    total, step = [], []
    prev = np.zeros_like(np.asarray(result.seed_fluence_J_m2, dtype=float))
    for r in result.steps:
        b = np.nan_to_num(np.asarray(r.b_integral_rad, dtype=float))
        total.append(finite_max(b))
        step.append(finite_max(b - prev) if b.shape == prev.shape else finite_max(b))
        prev = b
    entries = (result.summary or {}).get("steps")
    if isinstance(entries, list) and len(entries) == len(result.steps):
        added = [e.get("b_integral_rad") if isinstance(e, dict) else None for e in entries]
        if all(isinstance(v, (int, float)) for v in added):
            step = [float(v) for v in added]
    return np.array(total), np.maximum(np.array(step, dtype=float), 0.0)


def plot_b_integral(result: Result, path: Path) -> Path:
    """Accumulated B-integral after each step, the B-integral each step adds (bars, from the summary),
    and the per-step and total limits as dashed lines.

    Parameters
    ----------
    result : the run; ``b_integral_rad`` maps in rad; limits from ``result.config.limits``
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    total, per_step = b_integrals(result)
    labels = [step_label(result.config.steps, r.index, short=True) for r in result.steps]
    pos = np.arange(len(labels), dtype=float)
    limits = getattr(result.config, "limits", None)
    lim_step = getattr(limits, "b_integral_step_rad", None)
    lim_total = getattr(limits, "b_integral_total_rad", None)
    width_in = max(6.8, 0.5 * len(labels) + 3.0)
    fig = new_figure(width_in, 5.0)
    ax = fig.add_subplot()
    ax.bar(pos, per_step, width=0.6, color="#9ab8d8", label="added in the step")
    ax.plot(pos, total, color=OUTPUT_COLOUR, marker="o", label="accumulated after the step")
    if lim_step is not None:
        ax.axhline(lim_step, color=SEED_COLOUR, linestyle="--", linewidth=1.2,
                   label=f"per-step limit {lim_step:g} rad")
    if lim_total is not None:
        ax.axhline(lim_total, color=OUTPUT_COLOUR, linestyle="--", linewidth=1.2,
                   label=f"total limit {lim_total:g} rad")
    top = max(finite_max(total), lim_step or 0.0, lim_total or 0.0)
    ax.set_ylim(0, top * 1.15 if top > 0 else 1.0)
    ax.set_ylabel("B-integral, largest over the beam (rad)")
    ax.set_xlabel("step")
    ax.grid(True, axis="y", alpha=0.3)
    legend_above(ax, "B-integral through the layout" + title_suffix(result))
    step_ticks(ax, labels, pos, width_in)
    return save_png(fig, path)
