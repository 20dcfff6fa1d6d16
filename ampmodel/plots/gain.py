"""The gain of each medium: cuts of the gain coefficient along z and across the aperture, before the
first and after the last pass; the helpers the cw gain figure shares."""
from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.common import (
    OUTPUT_COLOUR,
    SEED_COLOUR,
    block_mean,
    centre_index,
    finite_max,
    finite_min,
    new_figure,
    pixel_extent,
    pixel_pitch,
    save_png,
    title_suffix,
)
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result


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
    ax2.set_xlim(0.0, length_mm if length_mm > 0 else 1.0)
    glo = min(finite_min(on0), finite_min(on1), 0.0)
    ghi = max(finite_max(on0), finite_max(on1))
    ax2.set_ylim(glo * 1.1, ghi * 1.08 if ghi > 0 else 1.0)
    ax2.grid(True, alpha=0.3)
    legend_above(ax2, "on-axis gain coefficient along z")

    material = getattr(med, "material", "")
    note = f"{passes} pass{'es' if passes != 1 else ''}" if passes else "not passed in this layout"
    fig.suptitle(f"Gain in medium '{name}'" + (f" ({material})" if material else "") + f": {note}"
                 + title_suffix(result))
    return save_png(fig, path)
