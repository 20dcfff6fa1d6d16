"""The heat of a pumped medium: its heat density and its temperature (plots/heat_<medium>.png)."""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.common import MAP_CMAP, length_unit, new_figure, pixel_extent, save_png

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def has_heat(result: Result, name: str) -> bool:
    """True when the medium ``name`` carries a heat density (cw runs with a pump)."""
    return getattr(result.media[name], "heat_W_m3", None) is not None


def plot_heat(result: Result, name: str, path: Path) -> Path:
    """Left: the heat density averaged along z (W/cm³); right: the temperature of the hottest slice
    (°C: the coolant's plus the rise), or its absence when the material has no thermal data."""
    rec = result.media[name]
    x, y = np.asarray(result.x_m, dtype=float), np.asarray(result.y_m, dtype=float)
    scale, unit = length_unit(x)
    x0, x1 = pixel_extent(x * scale)
    y0, y1 = pixel_extent(y * scale)
    fig = new_figure(10.0, 4.2)
    ax_q, ax_t = fig.subplots(1, 2)
    heat = np.asarray(rec.heat_W_m3, dtype=float).mean(axis=0) * 1e-6
    im = ax_q.imshow(heat, origin="lower", extent=(x0, x1, y0, y1), cmap=MAP_CMAP, interpolation="nearest")
    fig.colorbar(im, ax=ax_q, shrink=0.9).set_label("heat density, mean along z (W/cm³)")
    ax_q.set_title(f"{name}: heat density")
    entry = next((m for m in (result.summary or {}).get("media", []) if m.get("name") == name), {})
    if rec.temperature_rise_K is not None:
        rise = np.asarray(rec.temperature_rise_K, dtype=float)
        hottest = int(np.argmax(rise.max(axis=(1, 2))))
        temp = np.where(rec.mask if rec.mask is not None else True, rise[hottest] + entry.get("coolant_C", 0.0), np.nan)
        im = ax_t.imshow(temp, origin="lower", extent=(x0, x1, y0, y1), cmap="inferno", interpolation="nearest")
        fig.colorbar(im, ax=ax_t, shrink=0.9).set_label("temperature (°C)")
        focal = entry.get("thermal_focal_length_m")
        lens = f", thermal lens f = {focal:.3g} m" if isinstance(focal, float) else ""
        ax_t.set_title(f"hottest slice ({hottest + 1} of {rise.shape[0]}){lens}", fontsize="medium")
    else:
        ax_t.text(0.5, 0.5, "no thermal data for this material", transform=ax_t.transAxes, ha="center", va="center")
    for ax in (ax_q, ax_t):
        ax.set_xlabel(f"x ({unit})")
        ax.set_ylabel(f"y ({unit})")
    return save_png(fig, path)
