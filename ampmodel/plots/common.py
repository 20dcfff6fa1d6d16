"""What every figure module shares: one figure on its own Agg canvas, the atomic PNG writer, the
colours, and small helpers for pixel grids and for the unit prefix that suits a value.

No pyplot and no global state: each figure is a :class:`matplotlib.figure.Figure` drawn on its own
canvas, so figures can be made in threads and worker processes, with no display.
"""
from __future__ import annotations

import math
import re
from contextvars import ContextVar
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Sequence

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ampmodel.output.atomic import target

if TYPE_CHECKING:
    from ampmodel.output.result import Result, StepRecord

DPI = 110
MAX_IMAGE_PIXELS = 512          # larger maps are block-averaged down to at most this many pixels per axis
SEED_COLOUR = "#1f5fa8"
OUTPUT_COLOUR = "#c8432b"
LOSS_COLOUR = "0.6"
MAP_CMAP = "inferno"
PNG_COMPRESSION = 1             # zlib level: about a tenth larger files than the default 6, written faster



@dataclass(frozen=True)
class PngWriting:
    """How :func:`save_png` writes: the zlib level, and whether the figure is cleared after writing.
    Figures are written at level 1 and left to the garbage collector; the benchmark writes them as
    they were before it measured the difference (level 6, matplotlib's default, each figure cleared)."""

    level: int = PNG_COMPRESSION
    clear: bool = False


AS_NOW = PngWriting()
AS_BEFORE = PngWriting(level=6, clear=True)
# How PNG files are written in this context (drawing.draw_all sets it for the jobs it runs).
png_writing: ContextVar[PngWriting] = ContextVar("png_writing", default=AS_NOW)

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
    """Write ``fig`` as PNG to ``path`` atomically (temporary name, then rename), as :data:`png_writing`
    says (the figure is left to the garbage collector: clearing it costs about a twentieth of the time)."""
    how = png_writing.get()
    try:
        with target(path) as tmp:
            fig.savefig(tmp, format="png", dpi=DPI, pil_kwargs={"compress_level": how.level})
    finally:
        if how.clear:
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


def safe_name(name: str) -> str:
    """``name`` reduced to characters that are safe in a file name."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("._") or "medium"


def is_cw(result: Result) -> bool:
    return getattr(result.config, "mode", "pulsed") == "cw"


def seed_map(result: Result) -> np.ndarray:
    """The seed's transverse map: fluence (J/m²), or intensity (W/m²) in a cw run."""
    cw_map = getattr(result, "seed_intensity_W_m2", None)
    return np.asarray(cw_map if is_cw(result) and cw_map is not None else result.seed_fluence_J_m2, dtype=float)


def step_map(result: Result, rec: StepRecord) -> np.ndarray:
    """The beam's transverse map after a step: fluence (J/m²), or intensity (W/m²) in a cw run."""
    cw_map = getattr(rec, "intensity_W_m2", None)
    return np.asarray(cw_map if is_cw(result) and cw_map is not None else rec.fluence_J_m2, dtype=float)


def length_unit(coords_m: np.ndarray) -> tuple[float, str]:
    """(factor from m, label) for transverse coordinates: µm for a window narrower than 1 mm (fibres)."""
    extent = float(np.max(np.abs(coords_m))) if np.size(coords_m) else 1.0
    return (1e6, "µm") if extent < 0.5e-3 else (1e3, "mm")


def map_quantity(result: Result) -> tuple[str, str]:
    """(name, display unit) of the transverse maps: fluence in J/cm², or intensity in W/cm² (cw)."""
    return ("intensity", "W/cm²") if is_cw(result) else ("fluence", "J/cm²")


def step_energies(result: Result) -> tuple[float, np.ndarray]:
    """Seed energy and energy after each step, in J (cw: power in W).

    Taken from the summary's ``steps`` entries when they are complete, else integrated from the
    fluence (intensity) maps over the pixel area.
    """
    cw = is_cw(result)
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


def step_gains(result: Result, seed: float, after: np.ndarray) -> np.ndarray:
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


def step_ticks(ax, labels: Sequence[str], positions: Sequence[float], width_in: float) -> None:
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


def title_suffix(result: Result) -> str:
    title = getattr(result.config, "title", "")
    return f"\n{title}" if title else ""
