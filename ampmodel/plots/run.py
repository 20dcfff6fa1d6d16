"""Figures of a run: fluence maps, energy per step, pulse power, gain cuts, B-integral.

Each figure is a :class:`matplotlib.figure.Figure` drawn on its own Agg canvas (no pyplot, no global
state, no display needed) and written as a PNG, atomically, into the plot folder of a run.

Arrays in a :class:`~ampmodel.results.Result` are SI; the figures show them in the units a laser
engineer reads: mm across the beam and along the medium, J/cm² for fluence, 1/cm for the gain
coefficient, and time, power and energy in the prefix that suits their size (ps/ns/µs, W/kW/MW/GW,
µJ/mJ/J). In a cw run the transverse maps hold intensity (W/m², shown in W/cm²), the step figure
shows power, and there is no pulse figure.
"""
from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Sequence

import numpy as np
from matplotlib.figure import Figure

from ampmodel.plots.common import ENERGY_UNITS, LOSS_COLOUR, MAP_CMAP, OUTPUT_COLOUR, POWER_UNITS, SEED_COLOUR, TIME_UNITS, block_mean, centre_index, finite_max, finite_min, new_figure, pixel_extent, pixel_pitch, save_png, unit_prefix
from ampmodel.output.result import Result, StepRecord

def _safe_name(name: str) -> str:
    """``name`` reduced to characters that are safe in a file name."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("._") or "medium"


def _is_cw(result: Result) -> bool:
    return getattr(result.config, "mode", "pulsed") == "cw"


def seed_map(result: Result) -> np.ndarray:
    """The seed's transverse map: fluence (J/m²), or intensity (W/m²) in a cw run."""
    cw_map = getattr(result, "seed_intensity_W_m2", None)
    return np.asarray(cw_map if _is_cw(result) and cw_map is not None else result.seed_fluence_J_m2, dtype=float)


def step_map(result: Result, rec: StepRecord) -> np.ndarray:
    """The beam's transverse map after a step: fluence (J/m²), or intensity (W/m²) in a cw run."""
    cw_map = getattr(rec, "intensity_W_m2", None)
    return np.asarray(cw_map if _is_cw(result) and cw_map is not None else rec.fluence_J_m2, dtype=float)


def _length_unit(coords_m: np.ndarray) -> tuple[float, str]:
    """(factor from m, label) for transverse coordinates: µm for a window narrower than 1 mm (fibres)."""
    extent = float(np.max(np.abs(coords_m))) if np.size(coords_m) else 1.0
    return (1e6, "µm") if extent < 0.5e-3 else (1e3, "mm")


def _map_quantity(result: Result) -> tuple[str, str]:
    """(name, display unit) of the transverse maps: fluence in J/cm², or intensity in W/cm² (cw)."""
    return ("intensity", "W/cm²") if _is_cw(result) else ("fluence", "J/cm²")


def step_label(result: Result, rec: StepRecord) -> str:
    """Short label of a step, such as ``"0 pass rod"``, ``"1 loss"``, ``"2 pass rod (rev)"``.

    Parameters
    ----------
    result : the run, whose config tells whether a pass is reversed
    rec : the step
    """
    label = f"{rec.index} {rec.kind}"
    if rec.medium:
        label += f" {rec.medium}"
    steps = getattr(result.config, "steps", ())
    step = next((s for s in steps if getattr(s, "index", None) == rec.index), None)
    if step is not None and rec.kind == "pass" and getattr(step, "reverse", False):
        label += " (rev)"
    return label


def _energies(result: Result) -> tuple[float, np.ndarray]:
    """Seed energy and energy after each step, in J (cw: power in W).

    Taken from the summary's ``steps`` entries when they are complete, else integrated from the
    fluence (intensity) maps over the pixel area.
    """
    cw = _is_cw(result)
    in_key, out_key = ("power_in_W", "power_out_W") if cw else ("energy_in_J", "energy_out_J")
    area = pixel_pitch(result.x_m) * pixel_pitch(result.y_m)
    seed = float(np.sum(np.nan_to_num(seed_map(result))) * area)
    after = np.array([float(np.sum(np.nan_to_num(step_map(result, r))) * area) for r in result.steps])
    summary = result.summary or {}
    seed_key = "input_power_W" if cw else "input_energy_J"
    if isinstance(summary.get(seed_key), (int, float)):
        seed = float(summary[seed_key])
    entries = summary.get("steps")
    if isinstance(entries, list) and len(entries) == len(result.steps):
        values = [e.get(out_key) if isinstance(e, dict) else None for e in entries]
        if all(isinstance(v, (int, float)) for v in values):
            after = np.array(values, dtype=float)
        if entries and isinstance(entries[0], dict) and isinstance(entries[0].get(in_key), (int, float)):
            seed = float(entries[0][in_key])
    return seed, after


def _gains(result: Result, seed: float, after: np.ndarray) -> np.ndarray:
    """Gain of each step (energy out / energy in); NaN where the input is zero."""
    entries = (result.summary or {}).get("steps")
    if isinstance(entries, list) and len(entries) == len(result.steps):
        values = [e.get("gain") if isinstance(e, dict) else None for e in entries]
        if all(isinstance(v, (int, float)) for v in values):
            return np.array(values, dtype=float)
    before = np.concatenate(([seed], after[:-1]))
    out = np.full(after.shape, np.nan)
    np.divide(after, before, out=out, where=before > 0)
    return out


def _step_ticks(ax, labels: Sequence[str], positions: Sequence[float], width_in: float) -> None:
    """Put step labels on the x axis of ``ax``, rotated when they would crowd each other.

    ``width_in`` is the figure width in inches; a character of a tick label takes about 0.065 in.
    """
    ax.set_xticks(list(positions))
    room_in = (width_in - 1.2) / max(len(labels), 1)
    crowded = max((len(s) for s in labels), default=0) * 0.065 > 0.9 * room_in
    if crowded:
        ax.set_xticklabels(labels, rotation=40, ha="right", rotation_mode="anchor")
    else:
        ax.set_xticklabels(labels)
    ax.set_xlim(min(positions) - 0.6, max(positions) + 0.6)


# ----------------------------------------------------------------------------------------------
# 1. fluence maps


def _draw_map(fig: Figure, ax, image_J_m2: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
              title: str, quantity: str, unit: str) -> None:
    """Draw one transverse map (SI per m², shown per cm²) with its own colour bar."""
    img = np.nan_to_num(np.asarray(image_J_m2, dtype=float)) / 1e4
    x, y = np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float)
    img = block_mean(block_mean(img, 0), 1)
    x = block_mean(x, 0)
    y = block_mean(y, 0)
    peak = finite_max(img)
    scale, unit_x = _length_unit(x)
    x0, x1 = pixel_extent(x * scale)
    y0, y1 = pixel_extent(y * scale)
    im = ax.imshow(img, origin="lower", extent=(x0, x1, y0, y1), cmap=MAP_CMAP,
                   vmin=0.0, vmax=peak if peak > 0 else 1.0, interpolation="nearest")
    ax.set_xlabel(f"x ({unit_x})")
    ax.set_ylabel(f"y ({unit_x})")
    ax.set_title(title)
    cb = fig.colorbar(im, ax=ax, shrink=0.9)
    cb.set_label(f"{quantity} ({unit})")
    if peak <= 0:
        ax.text(0.5, 0.5, f"zero {quantity} everywhere", transform=ax.transAxes, ha="center",
                va="center", color="white", fontsize="large")


def _lineout_axis(ax, coord_m: np.ndarray, seed: np.ndarray, out: np.ndarray, axis_name: str,
                  other_name: str, out_label: str, quantity: str, unit: str) -> None:
    """Seed and output lineouts on ``ax``; the output gets its own right axis when the peaks differ > 10x."""
    scale, unit_x = _length_unit(np.asarray(coord_m, dtype=float))
    c = np.asarray(coord_m, dtype=float) * scale
    s = np.nan_to_num(seed) / 1e4
    o = np.nan_to_num(out) / 1e4
    ps, po = finite_max(s), finite_max(o)
    ratio = po / ps if ps > 0 and po > 0 else 1.0
    twin = ratio > 10 or ratio < 0.1
    kw = dict(marker=".", markersize=3) if c.size <= 48 else {}
    h1, = ax.plot(c, s, color=SEED_COLOUR, label="seed", **kw)
    if twin:
        ax2 = ax.twinx()
        h2, = ax2.plot(c, o, color=OUTPUT_COLOUR, linestyle="--", label=f"{out_label} (right axis)", **kw)
        ax.set_ylabel(f"seed {quantity} ({unit})", color=SEED_COLOUR)
        ax2.set_ylabel(f"output {quantity} ({unit})", color=OUTPUT_COLOUR)
        ax.tick_params(axis="y", colors=SEED_COLOUR)
        ax2.tick_params(axis="y", colors=OUTPUT_COLOUR)
        ax2.set_ylim(bottom=0)
        ax2.spines["left"].set_visible(False)
    else:
        h2, = ax.plot(c, o, color=OUTPUT_COLOUR, linestyle="--", label=out_label, **kw)
        ax.set_ylabel(f"{quantity} ({unit})")
    ax.set_ylim(bottom=0)
    ax.set_xlabel(f"{axis_name} ({unit_x})")
    ax.set_title(f"lineout along {axis_name} at {other_name} = 0")
    ax.grid(True, alpha=0.3)
    (ax2 if twin else ax).legend(handles=[h1, h2], loc="best", fontsize="small", framealpha=0.9)


def plot_fluence_maps(result: Result, path: Path) -> Path:
    """Seed and output fluence maps side by side, with x and y lineouts through the centre.

    Parameters
    ----------
    result : the run (maps in J/m², grid in m); shown in J/cm² over mm
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    quantity, unit = _map_quantity(result)
    seed = seed_map(result)
    if result.steps:
        out = step_map(result, result.steps[-1])
        out_label = f"output after step {result.steps[-1].index}"
    else:
        out, out_label = seed, "output (no steps)"
    fig = new_figure(11.0, 8.2)
    gs = fig.add_gridspec(2, 2, height_ratios=[1.35, 1.0])
    ax_s, ax_o = fig.add_subplot(gs[0, 0]), fig.add_subplot(gs[0, 1])
    ps, po = finite_max(seed) / 1e4, finite_max(out) / 1e4
    _draw_map(fig, ax_s, seed, result.x_m, result.y_m, f"seed: peak {ps:.3g} {unit}", quantity, unit)
    _draw_map(fig, ax_o, out, result.x_m, result.y_m, f"{out_label}: peak {po:.3g} {unit}", quantity, unit)
    iy, ix = centre_index(result.y_m), centre_index(result.x_m)
    _lineout_axis(fig.add_subplot(gs[1, 0]), result.x_m, seed[iy, :], out[iy, :], "x", "y",
                  out_label, quantity, unit)
    _lineout_axis(fig.add_subplot(gs[1, 1]), result.y_m, seed[:, ix], out[:, ix], "y", "x",
                  out_label, quantity, unit)
    fig.suptitle(f"Transverse {quantity}: seed and output" + _title_suffix(result))
    return save_png(fig, path)


def _title_suffix(result: Result) -> str:
    title = getattr(result.config, "title", "")
    return f"\n{title}" if title else ""


# ----------------------------------------------------------------------------------------------
# 2. energy per step


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
    cw = _is_cw(result)
    seed, after = _energies(result)
    gains = _gains(result, seed, after)
    values = np.concatenate(([seed], after))
    labels = ["seed"] + [step_label(result, r) for r in result.steps]
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
        ax_e.set_yscale("log")
    else:
        ax_e.set_ylim(bottom=0, top=max(finite_max(shown) * 1.15, 1e-30) if finite_max(shown) > 0 else 1.0)
    if n <= 14:
        for p, v in zip(pos, shown):
            if np.isfinite(v) and (v > 0 or not log_e):
                ax_e.annotate(f"{v:.3g}", (p, v), textcoords="offset points", xytext=(0, 7),
                              ha="center", fontsize="small")
    what = "power" if cw else "energy"
    ax_e.set_ylabel(f"{what} ({unit})")
    ax_e.set_title(f"{what.capitalize()} after each step")
    ax_e.grid(True, alpha=0.3)
    ax_e.legend(loc="best", fontsize="small")
    ax_e.tick_params(axis="x", labelbottom=False)

    gpos, gval = pos[1:], gains
    ok = np.isfinite(gval)
    colours = [OUTPUT_COLOUR if g >= 1 else LOSS_COLOUR for g in gval[ok]]
    gpos_ok, gval_ok = gpos[ok], gval[ok]
    gp = gval_ok[gval_ok > 0]
    log_g = gp.size >= 2 and gp.max() / gp.min() > 30
    if log_g:
        ax_g.set_yscale("log")
        keep = gval_ok > 0
        ax_g.bar(gpos_ok[keep], gval_ok[keep], width=0.6,
                 color=[c for c, k in zip(colours, keep) if k])
    elif gval_ok.size:
        ax_g.bar(gpos_ok, gval_ok, width=0.6, color=colours)
        ax_g.set_ylim(bottom=0, top=max(1.0, finite_max(gval_ok)) * 1.18)
    else:
        ax_g.set_ylim(0, 2)
    ax_g.axhline(1.0, color="0.3", linestyle=":", linewidth=1.0)
    if n <= 14:
        for p, g in zip(gpos, gval):
            text = f"{g:.3g}" if np.isfinite(g) else "n/a"
            y = g if (np.isfinite(g) and (g > 0 or not log_g)) else (1.0 if log_g else 0.0)
            ax_g.annotate(text, (p, y), textcoords="offset points", xytext=(0, 3), ha="center",
                          va="bottom", fontsize="small")
    ax_g.set_ylabel(f"gain ({what} out / in)")
    ax_g.set_title("Gain of each step (red: gain > 1, grey: loss; dotted line: 1)")
    ax_g.grid(True, axis="y", alpha=0.3)
    ax_g.set_xlabel("step")
    _step_ticks(ax_g, labels, pos, width_in)
    fig.suptitle(f"{what.capitalize()} through the layout" + _title_suffix(result))
    return save_png(fig, path)


# ----------------------------------------------------------------------------------------------
# 3. pulse power


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
    seed_e, after = _energies(result)
    eu = unit_prefix(max(seed_e, finite_max(after)), ENERGY_UNITS)
    out_e = after[-1] if after.size else seed_e
    out_name = f"output after step {result.steps[-1].index}" if result.steps else "output"
    ax.plot(t / tf, seed / pf, color=SEED_COLOUR, label=f"seed, {seed_e / eu[0]:.3g} {eu[1]}", **kw)
    ax.plot(t / tf, out / pf, color=OUTPUT_COLOUR, linestyle="--",
            label=f"{out_name}, {out_e / eu[0]:.3g} {eu[1]}", **kw)
    ax.set_ylabel(f"power ({pu})")
    ax.set_ylim(bottom=0, top=max(ps, po) / pf * 1.1 if max(ps, po) > 0 else 1.0)
    ax.set_title("Pulse power of the whole beam (mean over each time slice)")
    ax.grid(True, alpha=0.3)
    ax.legend(loc="upper right", fontsize="small")
    if shapes:
        axn = axes[1]
        for p, peak, colour, ls, name in ((seed, ps, SEED_COLOUR, "-", "seed"),
                                          (out, po, OUTPUT_COLOUR, "--", out_name)):
            axn.plot(t / tf, p / peak if peak > 0 else p, color=colour, linestyle=ls, label=name, **kw)
        axn.set_ylabel("power / own peak")
        axn.set_ylim(0, 1.1)
        axn.set_title("Normalised pulse shapes (each divided by its own peak)")
        axn.grid(True, alpha=0.3)
        axn.legend(loc="upper right", fontsize="small")
    axes[-1].set_xlabel(f"time ({tu})")
    if t.size == 1:
        axes[-1].set_xlim(t[0] / tf - 1.0, t[0] / tf + 1.0)
    fig.suptitle("Seed and output pulses" + _title_suffix(result))
    return save_png(fig, path)


# ----------------------------------------------------------------------------------------------
# 4. gain cuts of each medium


def _pass_count(result: Result, name: str) -> int:
    """Passes through medium ``name``: the layout's pass steps, and those inside a repeat times the
    round trips it kept (from the summary)."""
    count = sum(1 for r in result.steps if r.kind == "pass" and r.medium == name)
    entries = {e.get("index"): e for e in (result.summary or {}).get("steps", []) if isinstance(e, dict)}
    for step in getattr(result.config, "steps", ()):
        if getattr(step, "kind", None) == "repeat":
            inner = sum(1 for s in step.steps if s.kind == "pass" and s.medium == name)
            count += inner * int(entries.get(step.index, {}).get("round_trip_count", 0))
    return count


def gain_maps_per_cm(med) -> tuple[np.ndarray, np.ndarray, float, float]:
    """A medium's gain coefficient maps in 1/cm, (Nz, Ny, Nx): before the first and after the last pass
    (cw: small-signal and saturated); and its slice length and length in mm."""
    g0 = np.asarray(med.gain_initial_per_m, dtype=float) / 100.0
    g1 = np.asarray(med.gain_final_per_m, dtype=float) / 100.0
    if g0.ndim == 1:
        g0, g1 = g0[:, None, None], g1[:, None, None]
    dz_mm = med.slice_length_m * 1e3
    return g0, g1, dz_mm, g0.shape[0] * dz_mm


def gain_colour_scale(lo: float, hi: float) -> tuple[str, float, float]:
    """(colour map, vmin, vmax) of a gain cut spanning [lo, hi]: diverging around 0 when the medium
    absorbs somewhere (quasi-three-level), not by round-off; else from 0 up."""
    if lo < -1e-3 * max(abs(hi), 1e-30):
        m = max(abs(lo), abs(hi), 1e-30)
        return "RdBu_r", -m, m
    return "viridis", min(lo, 0.0), hi if hi > 0 else 1.0


def limit_to_medium(ax, result: Result, name: str, x0: float, x1: float) -> None:
    """Narrow the transverse axis (mm) of a gain cut to 1.2 medium diameters when the window is wider."""
    try:
        diameter_m = getattr(result.config.medium(name), "diameter_m", None)
    except (KeyError, AttributeError):
        return
    if diameter_m:
        half = 0.6 * diameter_m * 1e3
        if half < (x1 - x0) / 2:
            ax.set_ylim(max(x0, -half), min(x1, half))


def plot_medium_gain(result: Result, name: str, path: Path) -> Path:
    """z–x cuts of a medium's gain coefficient before and after, and the on-axis gain along z.

    Parameters
    ----------
    result : the run; gain coefficients (Nz, Ny, Nx) in 1/m, shown in 1/cm over z and x in mm
    name : the medium's name (a key of ``result.media``)
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    med = result.media[name]
    g0, g1, dz_mm, length_mm = gain_maps_per_cm(med)
    nz, ny, nx = g0.shape
    x_m = np.asarray(result.x_m, dtype=float)
    y_m = np.asarray(result.y_m, dtype=float)
    if x_m.size != nx:  # a medium on its own grid: spread its pixels over the window
        width = getattr(getattr(result.config, "grid", None), "width_m", None) or pixel_pitch(result.x_m) * nx
        x_m = (np.arange(nx) - (nx - 1) / 2) * (width / nx)
    if y_m.size != ny:
        y_m = np.zeros(ny)
    iy, ix = centre_index(y_m), centre_index(x_m)
    cut0, cut1 = g0[:, iy, :].T, g1[:, iy, :].T       # (Nx, Nz): x vertical, z horizontal
    cut0, cut1 = (block_mean(block_mean(c, 0), 1) for c in (cut0, cut1))
    xs = block_mean(x_m, 0) * 1e3
    x0, x1 = pixel_extent(xs)
    cmap, vmin, vmax = gain_colour_scale(min(finite_min(cut0), finite_min(cut1)),
                                         max(finite_max(cut0), finite_max(cut1)))
    passes = _pass_count(result, name)

    fig = new_figure(9.0, 8.6)
    gs = fig.add_gridspec(3, 1, height_ratios=[1.0, 1.0, 1.1])
    ax0 = fig.add_subplot(gs[0])
    ax1 = fig.add_subplot(gs[1], sharex=ax0, sharey=ax0)
    ax2 = fig.add_subplot(gs[2], sharex=ax0)
    for ax, cut, when in ((ax0, cut0, "before the first pass"), (ax1, cut1, "after the last pass")):
        im = ax.imshow(cut, origin="lower", extent=(0.0, length_mm, x0, x1), aspect="auto",
                       cmap=cmap, vmin=vmin, vmax=vmax, interpolation="nearest")
        ax.set_ylabel("x (mm)")
        ax.set_title(f"gain coefficient {when} (cut at y = 0)")
        ax.tick_params(axis="x", labelbottom=False)
    limit_to_medium(ax0, result, name, x0, x1)
    cb = fig.colorbar(im, ax=[ax0, ax1], shrink=0.95)
    cb.set_label("gain coefficient g (1/cm)")

    edges = np.arange(nz + 1) * dz_mm
    on0, on1 = g0[:, iy, ix], g1[:, iy, ix]
    for g, colour, ls, when in ((on0, SEED_COLOUR, "-", "before"), (on1, OUTPUT_COLOUR, "--", "after")):
        exponent = float(np.nansum(g) * dz_mm / 10.0)        # ∫g dz with g in 1/cm, dz in cm
        single = math.exp(min(exponent, 700.0))
        ax2.plot(edges, np.append(np.nan_to_num(g), np.nan_to_num(g[-1:])), drawstyle="steps-post",
                 color=colour, linestyle=ls, linewidth=1.6,
                 label=f"{when}: single-pass exp(∫g dz) = {single:.3g}")
    ax2.axhline(0.0, color="0.5", linewidth=0.8)
    ax2.set_xlabel("z along the medium (mm)")
    ax2.set_ylabel("on-axis g (1/cm)")
    ax2.set_title("on-axis gain coefficient along z")
    ax2.set_xlim(0.0, length_mm if length_mm > 0 else 1.0)
    glo = min(finite_min(on0), finite_min(on1), 0.0)
    ghi = max(finite_max(on0), finite_max(on1))
    ax2.set_ylim(glo * 1.1, ghi * 1.2 if ghi > 0 else 1.0)
    ax2.grid(True, alpha=0.3)
    ax2.legend(loc="best", fontsize="small", framealpha=0.9)

    material = getattr(med, "material", "")
    note = f"{passes} pass{'es' if passes != 1 else ''}" if passes else "not passed in this layout"
    fig.suptitle(f"Gain in medium '{name}'" + (f" ({material})" if material else "") + f": {note}"
                 + _title_suffix(result))
    return save_png(fig, path)


# ----------------------------------------------------------------------------------------------
# 5. B-integral


def _b_integrals(result: Result) -> tuple[np.ndarray, np.ndarray]:
    """(accumulated, per-step) B-integral in rad: the largest over the beam after / within each step."""
    total, step = [], []
    prev = np.zeros_like(np.asarray(result.seed_fluence_J_m2, dtype=float))
    for r in result.steps:
        b = np.nan_to_num(np.asarray(r.b_integral_rad, dtype=float))
        total.append(finite_max(b))
        step.append(finite_max(b - prev) if b.shape == prev.shape else finite_max(b))
        prev = b
    return np.array(total), np.maximum(np.array(step), 0.0)


def plot_b_integral(result: Result, path: Path) -> Path:
    """Accumulated B-integral after each step, with the per-step and total limits as dashed lines.

    Parameters
    ----------
    result : the run; ``b_integral_rad`` maps in rad; limits from ``result.config.limits``
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    total, per_step = _b_integrals(result)
    labels = [step_label(result, r) for r in result.steps]
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
    ax.set_title("B-integral through the layout" + _title_suffix(result))
    ax.grid(True, axis="y", alpha=0.3)
    ax.legend(loc="upper left", fontsize="small", framealpha=0.9)
    _step_ticks(ax, labels, pos, width_in)
    return save_png(fig, path)


# ----------------------------------------------------------------------------------------------


def make_plots(result: Result, directory: Path) -> list[Path]:
    """Write the figures of a run as PNG files into ``directory`` (created if needed).

    Files: ``fluence_maps.png``, ``energy_per_step.png``, ``pulse_power.png`` (pulsed runs),
    ``gain_<medium>.png`` for each medium, ``b_integral.png`` when any step has a non-zero
    B-integral, ``beam_steps.png`` and ``beam_size.png`` when the summary holds the beam figures
    (``plots_beam.py``), ``round_trips.png`` for a repeat step (``round_trips_step<N>.png`` when
    there are several) and ``train.png`` for a pulse train (``plots_time.py``). A cw run writes
    ``intensity_maps.png``, ``power_per_step.png`` and ``gain_<medium>.png`` (the steady-state gain
    along z and the intensity of each pass; plots_cw.py).
    A layout of fibres writes the maps (``intensity_maps.png`` and ``power_per_step.png``
    in cw) and the pulse, then per fibre ``fibre_<name>_powers.png``, ``gain_<name>.png`` (gain and
    inversion along it) and ``fibre_<name>_ase.png`` (plots_fibre.py).

    Parameters
    ----------
    result : the run (all arrays SI: m, s, J/m², W, 1/m, rad)
    directory : folder for the PNG files

    Returns
    -------
    list of Path : the files written, in the order above
    """
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    cw = _is_cw(result)
    paths = [plot_fluence_maps(result, out / ("intensity_maps.png" if cw else "fluence_maps.png")),
             plot_energy_per_step(result, out / ("power_per_step.png" if cw else "energy_per_step.png"))]
    if not cw and np.asarray(result.t_s).size:
        paths.append(plot_pulse_power(result, out / "pulse_power.png"))
    if getattr(result, "fibres", None):
        from ampmodel.plots.fibre import make_fibre_plots
        return paths + make_fibre_plots(result, out, set())
    used: set[str] = set()
    for name in result.media:
        stem = _safe_name(name)
        while stem in used:
            stem += "_"
        used.add(stem)
        if cw:
            from ampmodel.plots.cw import plot_cw_gain
            paths.append(plot_cw_gain(result, name, out / f"gain_{stem}.png"))
        else:
            paths.append(plot_medium_gain(result, name, out / f"gain_{stem}.png"))
    if not cw and result.steps and finite_max(_b_integrals(result)[0]) > 0:
        paths.append(plot_b_integral(result, out / "b_integral.png"))
    from ampmodel.plots.beam import has_beam_figures, plot_beam_size, plot_beam_steps
    if result.steps and has_beam_figures(result):
        paths.append(plot_beam_steps(result, out / "beam_steps.png"))
        paths.append(plot_beam_size(result, out / "beam_size.png"))
    from ampmodel.plots.trains import plot_round_trips, plot_train
    repeats = [e for e in (result.summary or {}).get("steps", []) if isinstance(e, dict) and e.get("kind") == "repeat"]
    for entry in repeats:
        name = "round_trips.png" if len(repeats) == 1 else f"round_trips_step{entry.get('index')}.png"
        paths.append(plot_round_trips(result, entry, out / name))
    if isinstance((result.summary or {}).get("train"), dict):
        paths.append(plot_train(result, out / "train.png"))
    return paths
