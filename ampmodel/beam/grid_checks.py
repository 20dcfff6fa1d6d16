"""Whether the transverse grid holds the field: the part of the power near the window's edge and the
angular spectrum near the sampling limit, checked after each step, and the warnings (with the grid
that would do) they give.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy

from ampmodel.beam.field import FieldBeam, fluence_of, tail_reach
from ampmodel.description import Limits
from ampmodel.kernels import diffraction as kd
from ampmodel.notices import warning


def fast_even_points(n: int) -> int:
    """The next FFT-friendly even number of points >= n."""
    m = scipy.fft.next_fast_len(max(int(n), 2))
    while m % 2:
        m = scipy.fft.next_fast_len(m + 1)
    return m


def _outside_fraction(power_x: np.ndarray, power_y: np.ndarray, coord_x: np.ndarray, coord_y: np.ndarray,
                      bound: float) -> float:
    total = power_x.sum()
    if not total > 0:
        return 0.0
    return float((power_x[np.abs(coord_x) > bound].sum() + power_y[np.abs(coord_y) > bound].sum()) / total)


@dataclass
class GridCheck:
    """How close the beam comes to the window and to the sampling limit after a step.

    edge_fraction : energy fraction beyond the clear central 80 % of the window (x or y)
    spectrum_fraction : energy fraction of the angular spectrum beyond 80 % of the sampling limit
    width_needed_m, points_for_width : a window that holds the beam (at the same pixel size)
    points_for_spectrum : points that resolve the angular spectrum at this width
    saturated_width, saturated_spectrum : the beam (its spectrum) fills the whole window (band), so
        the suggestion is a lower bound
    """

    edge_fraction: float
    spectrum_fraction: float
    width_needed_m: float
    points_for_width: int
    points_for_spectrum: int
    saturated_width: bool = False
    saturated_spectrum: bool = False


def check_grid(beam: FieldBeam, tail: float = 1e-5, fluence: np.ndarray | None = None) -> GridCheck:
    """Measure where the beam and its angular spectrum are against the window and the sampling limit.

    The window figure uses the time-integrated fluence; the spectrum that of the most energetic time
    slice (one 2-D FFT). The suggested grid holds all but ``tail`` of the energy inside its clear
    region (80 % of the window, of the sampling limit). ``fluence``: the beam's |E|², if the caller
    has it.
    """
    n = len(beam.x_m)
    dx = float(beam.x_m[1] - beam.x_m[0])
    f = fluence_of(beam.field) if fluence is None else fluence
    ft = f.sum(axis=0)
    px, py = ft.sum(axis=0), ft.sum(axis=1)
    half_clear = kd.CLEAR_FRACTION * beam.width_m / 2.0
    edge = _outside_fraction(px, py, beam.x_m, beam.y_m, half_clear)
    reach_x = max(tail_reach(px, beam.x_m, tail), tail_reach(py, beam.y_m, tail))
    saturated_width = reach_x >= 0.9 * beam.width_m / 2.0
    width_needed = max(beam.width_m, 2.0 * reach_x / kd.CLEAR_FRACTION * 1.05)
    if saturated_width:
        width_needed = max(width_needed, 2.0 * beam.width_m)
    t = int(np.argmax(f.sum(axis=(1, 2))))
    spec = fluence_of(scipy.fft.fft2(beam.field[t], workers=beam.workers))
    sx, sy = spec.sum(axis=0), spec.sum(axis=1)
    k_clear = kd.CLEAR_FRACTION * math.pi / dx
    spectrum = _outside_fraction(sx, sy, beam.kx, beam.ky, k_clear)
    reach_k = max(tail_reach(sx, beam.kx, tail), tail_reach(sy, beam.ky, tail))
    saturated_spectrum = reach_k >= 0.9 * math.pi / dx
    points_k = fast_even_points(math.ceil(n * max(2.0 if saturated_spectrum else 1.0, 1.05 * reach_k / k_clear)))
    return GridCheck(edge, spectrum, width_needed, fast_even_points(math.ceil(width_needed / dx)), points_k,
                     saturated_width, saturated_spectrum)


def grid_warnings(checks: list[tuple[str, GridCheck]], limits: Limits, width_m: float, points: int) -> list[str]:
    """One warning per kind of grid trouble (the worst step named), with a grid that would do."""
    out = []
    worst = max(checks, key=lambda c: c[1].edge_fraction, default=None)
    if worst is not None and worst[1].edge_fraction > limits.window_edge_fraction:
        label, c = worst
        need_w = max(x[1].width_needed_m for x in checks)
        need_p = max(x[1].points_for_width for x in checks)
        bound = "at least " if any(x[1].saturated_width for x in checks) else ""
        out.append(warning("window-edge", f"grid: the beam reaches the absorbing edge of the {width_m * 1e3:g} mm window ({c.edge_fraction:.1e} "
                   f"of its energy beyond the clear central {100 * kd.CLEAR_FRACTION:g} % after {label}); "
                   f"{bound}grid.width_mm = {need_w * 1e3:.3g} with grid.points = {need_p} (the same pixel size) "
                   "would hold it"))
    worst = max(checks, key=lambda c: c[1].spectrum_fraction, default=None)
    if worst is not None and worst[1].spectrum_fraction > limits.sampling_limit_fraction:
        label, c = worst
        need_p = max(x[1].points_for_spectrum for x in checks)
        out.append(warning("grid-sampling", f"grid: the beam's angular spectrum reaches the sampling limit of {points} points over "
                   f"{width_m * 1e3:g} mm ({c.spectrum_fraction:.1e} of its energy beyond 80 % of it after {label}); "
                   f"{'at least ' if any(x[1].saturated_spectrum for x in checks) else ''}grid.points = {need_p} at "
                   f"grid.width_mm = {width_m * 1e3:g} would resolve it"))
    return out
