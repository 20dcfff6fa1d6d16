"""The cw figure of each medium: the steady-state gain along z and the intensity of every pass.

In cw every pass of a medium is present at once and all of them see the same saturated gain, so
the figure shows (1) a z–x cut of that saturated gain coefficient, (2) the on-axis gain coefficient
along z, small-signal (the pump alone, no signal) and saturated (the gain every pass sees), and
(3) the on-axis intensity of each pass along z with its direction, and the pump's on-axis intensity
when the medium is end-pumped. Units as a laser engineer reads them: mm, 1/cm, W/cm² (kW/cm²).
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.common import (
    MAP_CMAP,
    OUTPUT_COLOUR,
    SEED_COLOUR,
    block_mean,
    centre_index,
    finite_max,
    finite_min,
    new_figure,
    pixel_extent,
    save_png,
    title_suffix,
)
from ampmodel.plots.gain import gain_colour_scale, gain_maps_per_cm, limit_to_medium
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result

PASS_COLOURS = ["#c8432b", "#1f5fa8", "#2b8c3e", "#8a4fb0", "#d08a1a", "#3a9aa8", "#7a6a55", "#b03a78"]
PUMP_COLOUR = "0.45"


def _intensity_unit(peak_W_cm2: float) -> tuple[float, str]:
    return (1e3, "kW/cm²") if peak_W_cm2 >= 1e3 else (1.0, "W/cm²")


def plot_cw_gain(result: Result, name: str, path: Path) -> Path:
    """The steady-state gain of medium ``name`` and the on-axis intensity of each of its passes.

    Parameters
    ----------
    result : a cw run; gain coefficients (Nz, Ny, Nx) in 1/m, intensities in W/m², z in m
    name : the medium's name (a key of ``result.media``)
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    med = result.media[name]
    g0, g1, dz_mm, length_mm = gain_maps_per_cm(med)
    nz = g0.shape[0]
    # the on-axis pixel of the solver (the one at index N//2) for the profiles along z
    ay, ax = g0.shape[1] // 2, g0.shape[2] // 2
    passes = [r for r in result.steps if r.kind == "pass" and r.medium == name]

    fig = new_figure(9.0, 10.0)
    gs = fig.add_gridspec(3, 1, height_ratios=[1.0, 1.0, 1.2])
    ax0 = fig.add_subplot(gs[0])
    ax1 = fig.add_subplot(gs[1], sharex=ax0)
    ax2 = fig.add_subplot(gs[2], sharex=ax0)
    _plot_gain_cut(fig, ax0, result, name, g1, length_mm)
    _plot_axis_gain(ax1, g0[:, ay, ax], g1[:, ay, ax], dz_mm)
    handles = _plot_pass_intensities(ax2, result, passes)
    pump = _plot_pump_along_z(ax2, result, name, (ay, ax), nz, dz_mm)
    if pump is not None:
        handles.append(pump)
    legend_above(ax2, "on-axis intensity of each pass (arrow: direction of travel)", handles=handles)
    ax2.set_xlim(0.0, length_mm if length_mm > 0 else 1.0)

    material = getattr(med, "material", "")
    fig.suptitle(f"Steady-state gain in medium '{name}'" + (f" ({material})" if material else "")
                 + f": {len(passes)} pass{'es' if len(passes) != 1 else ''} saturating together"
                 + title_suffix(result))
    return save_png(fig, path)


def _plot_gain_cut(fig, ax0, result: Result, name: str, g1: np.ndarray, length_mm: float) -> None:
    """Draw the z–x cut at y = 0 of the saturated gain coefficient ``g1`` (Nz, Ny, Nx) in 1/cm, and its scale."""
    x_m, y_m = np.asarray(result.x_m, dtype=float), np.asarray(result.y_m, dtype=float)
    iy = centre_index(y_m)
    cut = block_mean(block_mean(g1[:, iy, :].T, 0), 1)
    xs = block_mean(x_m, 0) * 1e3
    x0, x1 = pixel_extent(xs)
    cmap, vmin, vmax = gain_colour_scale(finite_min(cut), finite_max(cut))
    im = ax0.imshow(cut, origin="lower", extent=(0.0, length_mm, x0, x1), aspect="auto", cmap=cmap,
                    vmin=vmin, vmax=vmax, interpolation="nearest")
    limit_to_medium(ax0, result, name, x0, x1)
    ax0.set_ylabel("x (mm)")
    ax0.set_title("saturated gain coefficient in the steady state, all passes present (cut at y = 0)")
    ax0.tick_params(axis="x", labelbottom=False)
    fig.colorbar(im, ax=ax0, shrink=0.95).set_label("g (1/cm)")


def _plot_axis_gain(ax1, g0_axis: np.ndarray, g1_axis: np.ndarray, dz_mm: float) -> None:
    """Draw the on-axis gain coefficient (Nz,) in 1/cm along z, small-signal ``g0_axis`` and saturated ``g1_axis``."""
    edges = np.arange(g0_axis.shape[0] + 1) * dz_mm
    for g, colour, ls, what in ((g0_axis, SEED_COLOUR, "-", "small-signal (pump alone, no signal)"),
                                (g1_axis, OUTPUT_COLOUR, "--", "saturated (seen by every pass)")):
        single = math.exp(min(float(np.nansum(g) * dz_mm / 10.0), 700.0))
        ax1.plot(edges, np.append(g, g[-1:]), drawstyle="steps-post", color=colour, linestyle=ls, linewidth=1.6,
                 label=f"{what}: single pass exp(∫g dz) = {single:.3g}")
    ax1.axhline(0.0, color="0.5", linewidth=0.8)
    ghi = max(finite_max(g0_axis), finite_max(g1_axis), 0.0)
    glo = min(finite_min(g0_axis), finite_min(g1_axis), 0.0)
    ax1.set_ylim(glo * 1.15, ghi * 1.08 if ghi > 0 else 1.0)
    ax1.set_ylabel("on-axis g (1/cm)")
    ax1.grid(True, alpha=0.3)
    legend_above(ax1, "on-axis gain coefficient along z")
    ax1.tick_params(axis="x", labelbottom=False)


def _plot_pass_intensities(ax2, result: Result, passes: list) -> list:
    """Draw each pass's on-axis intensity (W/m², in W/cm² or kW/cm²) along z; return the lines for the legend."""
    steps = {s.index: s for s in getattr(result.config, "steps", ())}
    peak = max([finite_max(r.axis_intensity_W_m2) for r in passes if r.axis_intensity_W_m2 is not None] + [0.0]) / 1e4
    factor, unit = _intensity_unit(peak)
    handles = []
    for n, rec in enumerate(passes):
        if rec.axis_intensity_W_m2 is None:
            continue
        step = steps.get(rec.index)
        reverse = bool(getattr(step, "reverse", False))
        h, = ax2.plot(np.asarray(rec.axis_z_m) * 1e3, np.asarray(rec.axis_intensity_W_m2) / 1e4 / factor,
                      color=PASS_COLOURS[n % len(PASS_COLOURS)], marker="<" if reverse else ">", markevery=4,
                      markersize=5, label=f"step {rec.index}: pass {'←' if reverse else '→'}")
        handles.append(h)
    ax2.set_ylim(0.0, peak / factor * 1.08 if peak > 0 else 1.0)
    ax2.set_ylabel(f"on-axis signal intensity ({unit})")
    ax2.set_xlabel("z along the medium (mm)")
    ax2.grid(True, alpha=0.3)
    return handles


def _plot_pump_along_z(ax2, result: Result, name: str, pixel: tuple[int, int], nz: int, dz_mm: float):
    """Draw an end pump's intensity (W/m², in kW/cm²) at ``pixel`` (y, x) along z; its line, or None if none."""
    med = result.media[name]
    try:
        pump_cfg = result.config.medium(name).pump
    except (KeyError, AttributeError):
        pump_cfg = None
    # Side pumping enters across the rod, uniform along z: only an end pump has a profile along z.
    if med.pump_intensity_W_m2 is None or getattr(pump_cfg, "geometry", "end") != "end":
        return None
    ay, ax = pixel
    pump_axis = np.asarray(med.pump_intensity_W_m2, dtype=float)[:, ay, ax] / 1e7      # kW/cm²
    twin = ax2.twinx()
    centres = (np.arange(nz) + 0.5) * dz_mm
    h, = twin.plot(centres, pump_axis, color=PUMP_COLOUR, linestyle=":", linewidth=1.8,
                   label="pump, mean over each slice (right axis)")
    twin.set_ylabel("on-axis pump intensity (kW/cm²)", color=PUMP_COLOUR)
    twin.tick_params(axis="y", colors=PUMP_COLOUR)
    twin.set_ylim(bottom=0.0, top=max(finite_max(pump_axis), 1e-30) * 1.45)
    return h


__all__ = ["plot_cw_gain", "MAP_CMAP"]
