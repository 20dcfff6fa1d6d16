"""What every figure module shares: one figure on its own Agg canvas, the atomic PNG writer, the
colours, and small helpers for pixel grids and for the unit prefix that suits a value.

No pyplot and no global state: each figure is a :class:`matplotlib.figure.Figure` drawn on its own
canvas, so figures can be made in threads and worker processes, with no display.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ampmodel.output.atomic import target

DPI = 110
MAX_IMAGE_PIXELS = 512          # larger maps are block-averaged down to at most this many pixels per axis
SEED_COLOUR = "#1f5fa8"
OUTPUT_COLOUR = "#c8432b"
LOSS_COLOUR = "0.6"
MAP_CMAP = "inferno"

ENERGY_UNITS = [(1e-12, "pJ"), (1e-9, "nJ"), (1e-6, "µJ"), (1e-3, "mJ"), (1.0, "J"), (1e3, "kJ")]
POWER_UNITS = [(1e-6, "µW"), (1e-3, "mW"), (1.0, "W"), (1e3, "kW"), (1e6, "MW"), (1e9, "GW"),
                (1e12, "TW")]
TIME_UNITS = [(1e-15, "fs"), (1e-12, "ps"), (1e-9, "ns"), (1e-6, "µs"), (1e-3, "ms"), (1.0, "s")]


def new_figure(width_in: float, height_in: float) -> Figure:
    """A new figure with its own Agg canvas and constrained layout."""
    fig = Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def save_png(fig: Figure, path: Path) -> Path:
    """Write ``fig`` as PNG to ``path`` atomically (temporary name, then rename) and release it."""
    try:
        with target(path) as tmp:
            fig.savefig(tmp, format="png", dpi=DPI)
    finally:
        fig.clear()
    return path


def finite_max(a: np.ndarray, default: float = 0.0) -> float:
    """Largest finite value of ``a``, or ``default`` when it has none (no warning)."""
    a = np.asarray(a, dtype=float)
    ok = np.isfinite(a)
    return float(a[ok].max()) if ok.any() else default


def finite_min(a: np.ndarray, default: float = 0.0) -> float:
    """Smallest finite value of ``a``, or ``default`` when it has none (no warning)."""
    a = np.asarray(a, dtype=float)
    ok = np.isfinite(a)
    return float(a[ok].min()) if ok.any() else default


def unit_prefix(value: float, table: list[tuple[float, str]]) -> tuple[float, str]:
    """The (factor, unit) of ``table`` whose factor is the largest not above ``|value|``.

    Falls back to the smallest entry for tiny values and to the base unit (factor 1) for zero or
    non-finite values.
    """
    value = abs(value)
    if not np.isfinite(value) or value == 0.0:
        return next((f, u) for f, u in table if f == 1.0)
    chosen = table[0]
    for f, u in table:
        if f <= value * (1 + 1e-9):
            chosen = (f, u)
    return chosen


def block_mean(a: np.ndarray, axis: int, limit: int = MAX_IMAGE_PIXELS) -> np.ndarray:
    """Average ``a`` over blocks of neighbouring pixels along ``axis`` until it has at most ``limit``."""
    n = a.shape[axis]
    k = math.ceil(n / limit)
    if k <= 1:
        return a
    m = (n // k) * k
    a = np.moveaxis(np.take(a, np.arange(m), axis=axis), axis, 0)
    a = a.reshape((m // k, k) + a.shape[1:]).mean(axis=1)
    return np.moveaxis(a, 0, axis)


def pixel_extent(centres: np.ndarray) -> tuple[float, float]:
    """Outer edges (first - d/2, last + d/2) of uniformly spaced pixel ``centres``."""
    c = np.asarray(centres, dtype=float)
    d = float(c[1] - c[0]) if c.size > 1 else 1.0
    return float(c[0] - d / 2), float(c[-1] + d / 2)


def pixel_pitch(coords: np.ndarray) -> float:
    """Pixel pitch of uniformly spaced ``coords`` (m); 1 for a single point."""
    c = np.asarray(coords, dtype=float)
    return float(abs(c[1] - c[0])) if c.size > 1 else 1.0


def centre_index(coords: np.ndarray) -> int:
    """Index of the pixel centre closest to 0 (the optical axis)."""
    c = np.asarray(coords, dtype=float)
    return int(np.argmin(np.abs(c))) if c.size else 0
