"""The fluence maps of a run: the seed and the output side by side, with lineouts through the peak
(intensity maps in a cw run)."""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from matplotlib.figure import Figure

from ampmodel.plots.common import (
    MAP_CMAP,
    OUTPUT_COLOUR,
    SEED_COLOUR,
    block_mean,
    centre_index,
    finite_max,
    length_unit,
    map_quantity,
    new_figure,
    pixel_extent,
    save_png,
    seed_map,
    step_map,
    title_suffix,
)
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def _draw_map(fig: Figure, ax, image_J_m2: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
              title: str, quantity: str, unit: str) -> None:
    """Draw one transverse map (SI per m², shown per cm²) with its own colour bar."""
    img = np.nan_to_num(np.asarray(image_J_m2, dtype=float)) / 1e4
    x, y = np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float)
    img = block_mean(block_mean(img, 0), 1)
    x = block_mean(x, 0)
    y = block_mean(y, 0)
    peak = finite_max(img)
    scale, unit_x = length_unit(x)
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
    scale, unit_x = length_unit(np.asarray(coord_m, dtype=float))
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
    ax.grid(True, alpha=0.3)
    legend_above(ax, f"lineout along {axis_name} at {other_name} = 0", handles=[h1, h2])


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
    quantity, unit = map_quantity(result)
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
    fig.suptitle(f"Transverse {quantity}: seed and output" + title_suffix(result))
    return save_png(fig, path)
