"""Figures of a layout of fibres: powers, gain and inversion along each fibre, ASE spectra.

Drawn from a Result's FibreRecords (SI), shown in the units a laser engineer reads: z in m, powers in
W on an axis that follows the data (logarithmic when they span decades), ASE as spectral density in dBm/nm, inversion as N2/Nt.
Each figure has its own Agg canvas and is written atomically (the helpers of common.py).
"""
from __future__ import annotations

from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.common import (
    ENERGY_UNITS,
    OUTPUT_COLOUR,
    POWER_UNITS,
    SEED_COLOUR,
    new_figure,
    safe_name,
    save_png,
    title_suffix,
    unit_prefix,
)
from ampmodel.plots.drawing import PANELS, FigureJob
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import FibreRecord, Result

PUMP_COLOUR = "#2a9d3a"
ASE_COLOUR = "#8e44ad"
RING_CMAP = "viridis"


LOG_SPAN = 30.0             # data spanning more than this ratio get a logarithmic axis
LOG_DEPTH = 1e-6            # a log axis shows at most this far below the largest value
MARGIN = 0.05               # of the shown range (of its decades on a log axis), above and below


def power_axis(*arrays: np.ndarray) -> tuple[str, float, float]:
    """(scale, bottom, top) of a power axis that follows the data: logarithmic when the positive values
    span more than ``LOG_SPAN`` (down to the smallest, at most ``LOG_DEPTH`` below the largest, so that
    ASE tails that fall to nothing do not squash the rest), linear from 0 otherwise; with a margin of
    ``MARGIN`` of the range (of its decades on a log axis) each way."""
    values = np.concatenate([np.ravel(np.asarray(a, dtype=float)) for a in arrays if a is not None] or [np.zeros(0)])
    positive = values[np.isfinite(values) & (values > 0)]
    if not positive.size:
        return "linear", 0.0, 1.0
    hi = float(positive.max())
    lo = max(float(positive.min()), hi * LOG_DEPTH)
    if hi / lo > LOG_SPAN:
        pad = (hi / lo) ** MARGIN
        return "log", lo / pad, hi * pad
    return "linear", 0.0, hi * (1.0 + MARGIN)


def plot_fibre_powers(result: Result, rec: FibreRecord, path: Path) -> Path:
    """Signal (or pulse energy), pump in each direction and total ASE each way along the fibre."""
    z = rec.z_m
    cw = rec.mode == "cw"
    fig = new_figure(8.5, 5.2 if cw else 8.0)
    ax = fig.add_subplot(2 if not cw else 1, 1, 1)
    shown = []
    if cw:
        ax.plot(z, rec.signal_W, color=OUTPUT_COLOUR, lw=2, label="signal")
        shown.append(rec.signal_W)
    if rec.pump_forward_W is not None:
        ax.plot(z, rec.pump_forward_W, color=PUMP_COLOUR, lw=1.6, label="pump, forward (launched at z = 0)")
        shown.append(rec.pump_forward_W)
    if rec.pump_backward_W is not None:
        ax.plot(z, rec.pump_backward_W, color=PUMP_COLOUR, lw=1.6, ls="--",
                label=f"pump, backward (launched at z = {z[-1]:g} m)")
        shown.append(rec.pump_backward_W)
    if rec.ase_forward_W.size:
        fwd, bwd = rec.ase_forward_W.sum(axis=0), rec.ase_backward_W.sum(axis=0)
        ax.plot(z, fwd, color=ASE_COLOUR, lw=1.3, label="ASE forward, all bins")
        ax.plot(z, bwd, color=ASE_COLOUR, lw=1.3, ls="--", label="ASE backward, all bins")
        shown += [fwd, bwd]
    scale, bottom, top = power_axis(*shown)
    ax.set_yscale(scale)
    ax.set_ylim(bottom, top)
    ax.set_xlim(z[0], z[-1])
    ax.set_xlabel("position along the fibre z (m)")
    ax.set_ylabel("power (W)")
    ax.grid(True, which="both", alpha=0.25)
    what = "steady state" if cw else "just before a pulse"
    legend_above(ax, f"fibre {rec.name}: powers along the fibre ({what})")
    if not cw:
        ax2 = fig.add_subplot(2, 1, 2)
        energy = rec.pulse_energy_J
        scale, unit = unit_prefix(float(np.max(energy)), ENERGY_UNITS)
        ax2.plot(z, energy / scale, color=OUTPUT_COLOUR, lw=2)
        ax2.set_xlim(z[0], z[-1])
        ax2.set_ylim(bottom=0)
        ax2.set_xlabel("position along the fibre z (m)")
        ax2.set_ylabel(f"pulse energy ({unit})")
        ax2.grid(True, alpha=0.3)
        ax2.set_title(f"pulse energy along the fibre: {energy[0] / scale:.3g} {unit} in, "
                      f"{energy[-1] / scale:.3g} {unit} out")
    fig.suptitle(f"Fibre {rec.name}" + title_suffix(result))
    return save_png(fig, path)


def plot_fibre_gain(result: Result, rec: FibreRecord, path: Path) -> Path:
    """Net gain of the signal and the inversion of each ring along the fibre (and, at a repetition rate,
    the mean inversion between pulses)."""
    z = rec.z_m
    mid = 0.5 * (z[1:] + z[:-1])
    cw = rec.mode == "cw"
    recovery = rec.recovery_t_s is not None
    fig = new_figure(8.5, 9.6 if recovery else 7.4)
    rows = 3 if recovery else 2
    ax = fig.add_subplot(rows, 1, 1)
    ax.plot(mid, rec.modal_gain_per_m * 10 / np.log(10), color=OUTPUT_COLOUR, lw=2)
    ax.axhline(0.0, color="0.5", lw=0.8)
    total = float(np.sum(rec.modal_gain_per_m * np.diff(z))) * 10 / np.log(10)
    ax.set_xlim(z[0], z[-1])
    ax.set_xlabel("position along the fibre z (m)")
    ax.set_ylabel("net signal gain (dB/m)")
    ax.grid(True, alpha=0.3)
    ax.set_title(f"signal gain along the fibre ({'steady state' if cw else 'before a pulse'}): {total:.2f} dB in all")
    ax = fig.add_subplot(rows, 1, 2)
    rings = rec.inversion.shape[0]
    colours = _ring_colours(rings)
    edges_um = rec.ring_edges_m * 1e6
    for j in range(rings):
        label = "core" if rings == 1 else f"ring {edges_um[j]:.3g}-{edges_um[j + 1]:.3g} µm"
        ax.plot(mid, rec.inversion[j], color=colours[j], lw=1.8, label=label + (" (operating)" if cw else " before"))
        other = rec.inversion_pump_only if cw else rec.inversion_after
        if other is not None:
            ax.plot(mid, other[j], color=colours[j], lw=1.0, ls="--",
                    label=(label + (" (pump alone)" if cw else " after")) if rings <= 4 or j in (0, rings - 1) else None)
    ax.set_xlim(z[0], z[-1])
    ax.set_ylim(0, min(1.0, 1.1 * float(max(np.max(rec.inversion), np.max(other) if other is not None else 0))) or 1.0)
    ax.set_xlabel("position along the fibre z (m)")
    ax.set_ylabel("inversion N2/Nt")
    ax.grid(True, alpha=0.3)
    legend_above(ax, "inversion: " + ("with the signal (solid) and with the pump alone (dashed)" if cw
                                      else "just before (solid) and just after (dashed) a pulse"), font_pt=7.0)
    if recovery:
        ax = fig.add_subplot(rows, 1, 3)
        t = rec.recovery_t_s
        scale, unit = (1e-6, "µs") if t[-1] < 1e-3 else (1e-3, "ms")
        ax.plot(t / scale, rec.recovery_mean_inversion, color=SEED_COLOUR, lw=1.8)
        ax.set_xlim(0, t[-1] / scale)
        ax.set_xlabel(f"time after a pulse ({unit})")
        ax.set_ylabel("mean N2/Nt")
        ax.grid(True, alpha=0.3)
        ax.set_title("the pump restoring the inversion between pulses (fibre average)")
    fig.suptitle(f"Fibre {rec.name}: gain and inversion" + title_suffix(result))
    return save_png(fig, path)


def _ring_colours(n: int) -> list:
    from matplotlib import colormaps
    cmap = colormaps[RING_CMAP]
    return [cmap(0.15 + 0.7 * j / max(n - 1, 1)) for j in range(n)] if n > 1 else [SEED_COLOUR]


def plot_fibre_ase(result: Result, rec: FibreRecord, path: Path) -> Path:
    """ASE spectra leaving both ends (spectral density per nm), with the signal wavelength marked."""
    wl = rec.ase_wavelength_m * 1e9
    width_nm = rec.ase_bin_width_m * 1e9
    fwd = rec.ase_forward_W[:, -1] / width_nm
    bwd = rec.ase_backward_W[:, 0] / width_nm
    fig = new_figure(8.5, 5.2)
    ax = fig.add_subplot(1, 1, 1)
    with np.errstate(divide="ignore"):
        dbm = lambda w: 10 * np.log10(np.maximum(w, 1e-30) / 1e-3)  # noqa: E731
        ax.step(wl, dbm(fwd), where="mid", color=OUTPUT_COLOUR, lw=1.6,
                label=f"forward, at z = {rec.z_m[-1]:g} m: {_watts(rec.ase_forward_W[:, -1].sum())}")
        ax.step(wl, dbm(bwd), where="mid", color=ASE_COLOUR, lw=1.6, ls="--",
                label=f"backward, at z = 0: {_watts(rec.ase_backward_W[:, 0].sum())}")
    peak = max(float(np.max(dbm(fwd))), float(np.max(dbm(bwd))))
    ax.set_ylim(peak - 60, peak + 5)
    signal_nm = result.config.seed.wavelength_m * 1e9
    ax.axvline(signal_nm, color="0.3", lw=1, ls=":")
    ax.text(signal_nm, peak + 2, f" signal {signal_nm:g} nm", fontsize="small", va="bottom")
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel("ASE spectral density (dBm/nm)")
    ax.grid(True, alpha=0.3)
    what = "steady state" if rec.mode == "cw" else "between pulses, just before a pulse"
    legend_above(ax, f"ASE leaving fibre {rec.name} ({what}; {wl.size} bins of {float(np.mean(width_nm)):.3g} nm)")
    fig.suptitle("ASE spectra" + title_suffix(result))
    return save_png(fig, path)


def _watts(value: float) -> str:
    """A power with the prefix that suits its size (common.unit_prefix)."""
    scale, unit = unit_prefix(value, POWER_UNITS)
    return f"{value / scale:.3g} {unit}"


def fibre_jobs(result: Result, directory: Path) -> list[FigureJob]:
    """The fibre figures as jobs: ``fibre_<name>_powers.png``, ``gain_<name>.png`` and, with ASE,
    ``fibre_<name>_ase.png`` for each fibre."""
    jobs = []
    used: set[str] = set()
    for name, rec in result.fibres.items():
        stem = safe_name(name)
        while stem in used:
            stem += "_"
        used.add(stem)
        for fn, path in ((plot_fibre_powers, f"fibre_{stem}_powers.png"), (plot_fibre_gain, f"gain_{stem}.png"),
                         (plot_fibre_ase, f"fibre_{stem}_ase.png")):
            if fn is not plot_fibre_ase or rec.ase_wavelength_m.size:
                jobs.append(FigureJob(directory / path, partial(fn, result, rec, directory / path), PANELS))
    return jobs
