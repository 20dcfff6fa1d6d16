"""Warnings on a measured pulse shape (seed.shape = "file"): how well the run's time slices hold it.

- ``pulse-clipped``: the time window (``window_ns``) leaves more than ``limits.pulse_clipped_fraction``
  of the trace's energy outside.
- ``pulse-ends``: the trace (cut to the window) ends above ``limits.pulse_end_fraction`` of its peak at
  either end: the pulse goes on beyond it, and that energy is missing from the seed.
- ``pulse-coarse``: the trace has fewer points across its FWHM than the run has slices there (the slices
  then interpolate straight lines between its points), or the slices are too coarse for its fastest
  edge: fewer than :data:`SLICES_PER_EDGE` slices across its 10–90 % rise or fall time.
"""
from __future__ import annotations

import math

import numpy as np

from ampmodel.description import Config
from ampmodel.notices import Notice, warning

SLICES_PER_EDGE = 2.0      # slices across the fastest 10–90 % edge (common practice for a sampled edge)


def _crossing(x: np.ndarray, p: np.ndarray, i: int, level: float) -> float:
    """Where the straight line between points i and i + 1 crosses ``level``."""
    return float(x[i] + (level - p[i]) / (p[i + 1] - p[i]) * (x[i + 1] - x[i]))


def edge_times(x: np.ndarray, p: np.ndarray) -> tuple[float, float]:
    """The 10–90 % rise time of the leading edge and the 90–10 % fall time of the trailing edge of a
    trace whose peak is 1 (in the unit of x); the last crossings of 10 % before the first of 90 %, and
    the first of 10 % after the last of 90 % (inf where the trace does not reach 10 % at that end)."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    high = np.flatnonzero(p >= 0.9)
    first, last = int(high[0]), int(high[-1])
    rise = fall = math.inf
    low_before = np.flatnonzero(p[:first] < 0.1)
    if first > 0 and low_before.size:
        i = int(low_before[-1])
        rise = _crossing(x, p, first - 1, 0.9) - _crossing(x, p, i, 0.1)
    low_after = np.flatnonzero(p[last + 1:] < 0.1)
    if low_after.size:
        j = last + 1 + int(low_after[0])
        fall = _crossing(x, p, j - 1, 0.1) - _crossing(x, p, last, 0.9)
    return rise, fall


def trace_warnings(config: Config) -> list[Notice]:
    """The warnings of a measured pulse (none for an analytic shape)."""
    seed, limits, n = config.seed, config.limits, config.grid.time_slices
    if seed.shape != "file" or seed.pulse_trace is None:
        return []
    x, p = (np.asarray(a, dtype=float) for a in seed.pulse_trace)
    tau_ns = seed.duration_s * 1e9
    out: list[Notice] = []
    if seed.pulse_trace_outside > limits.pulse_clipped_fraction:
        out.append(warning("pulse-clipped", f"seed: the time window (window_ns) leaves {seed.pulse_trace_outside:.1%} "
                           f"of the measured pulse's energy outside (more than {limits.pulse_clipped_fraction:.1%}); "
                           "widen window_ns"))
    for end, value in (("start", p[0]), ("end", p[-1])):
        if value > limits.pulse_end_fraction:
            out.append(warning("pulse-ends", f"seed: the measured pulse is still at {value:.1%} of its peak at the "
                               f"{end} of its {'window' if seed.pulse_trace_outside else 'trace'} (more than "
                               f"{limits.pulse_end_fraction:.1%}): the pulse goes on beyond it and that energy is "
                               "missing; record a longer trace, widen window_ns or check background"))
    slice_fwhm = (x[-1] - x[0]) / n                      # one slice, in units of the FWHM
    points = int(np.count_nonzero(p >= 0.5))
    if points < 1.0 / slice_fwhm:
        out.append(warning("pulse-coarse", f"seed: the measured pulse has {points} points across its FWHM "
                           f"({tau_ns:.4g} ns) and the run {1.0 / slice_fwhm:.1f} time slices: the slices "
                           "interpolate straight lines between the trace's points; a finer trace resolves its "
                           "shape"))
    edge = min(edge_times(x, p))
    if edge < SLICES_PER_EDGE * slice_fwhm:
        need = math.ceil(SLICES_PER_EDGE * (x[-1] - x[0]) / edge)
        out.append(warning("pulse-coarse", f"grid: time slices of {slice_fwhm * tau_ns:.3g} ns are too coarse for "
                           f"the measured pulse's fastest edge ({edge * tau_ns:.3g} ns from 10 to 90 %); give "
                           f"time_slices = {need} or more, or a narrower window_ns"))
    return out


def describe(config: Config) -> list[str]:
    """What `check` says of a measured pulse and spectrum: the FWHM, window and slicing the run takes
    from them, and the trace's warnings."""
    seed, n = config.seed, config.grid.time_slices
    lines: list[str] = []
    if seed.shape == "file" and seed.pulse_trace is not None:
        x = np.asarray(seed.pulse_trace[0])
        tau_ns = seed.duration_s * 1e9
        lines.append(f"  seed: measured pulse, FWHM {tau_ns:.4g} ns (the duration), window {x[0] * tau_ns:.4g} to "
                     f"{x[-1] * tau_ns:.4g} ns from its peak ({x.size} points), {n} slices of "
                     f"{(x[-1] - x[0]) * tau_ns / n:.3g} ns")
    if seed.spectrum_trace is not None:
        wl = np.asarray(seed.spectrum_trace[0]) * 1e9
        lines.append(f"  seed: measured spectrum, centroid {seed.wavelength_m * 1e9:.6g} nm, FWHM "
                     f"{seed.bandwidth_m * 1e9:.4g} nm, {wl[0]:.6g} to {wl[-1]:.6g} nm ({wl.size} points), "
                     f"chirp {seed.chirp}")
    lines.extend(f"  warning: {w}" for w in trace_warnings(config))
    return lines
