"""Measured traces held as piecewise-linear functions (pure numpy): a pulse's power against time, a
spectrum's density against wavelength.

A trace is two arrays ``x`` (strictly increasing) and ``p`` (≥ 0), the function being the straight
lines between the points and zero outside them. Its integrals are exact (the trapezoid rule is exact
for a piecewise-linear function; inside a segment the integral is a quadratic in the position), so
resampling keeps the energy to round-off.
"""
from __future__ import annotations

import numpy as np


def node_integrals(x: np.ndarray, p: np.ndarray) -> np.ndarray:
    """(N,) the integral of the trace from x[0] up to each point (trapezoids, exact)."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    out = np.zeros(x.size)
    out[1:] = np.cumsum(0.5 * (p[1:] + p[:-1]) * np.diff(x))
    return out


def cumulative(x: np.ndarray, p: np.ndarray, at: np.ndarray) -> np.ndarray:
    """The fraction of the trace's integral below each ``at``: 0 before x[0], 1 after x[-1]; exact
    (inside segment i: ∫ = C_i + p_i·d + s·d²/2, d = at − x_i, s the segment's slope)."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    nodes = node_integrals(x, p)
    total = nodes[-1]
    at = np.asarray(at, dtype=float)
    i = np.clip(np.searchsorted(x, at, side="right") - 1, 0, x.size - 2)
    d = np.clip(at - x[i], 0.0, x[i + 1] - x[i])
    slope = (p[i + 1] - p[i]) / (x[i + 1] - x[i])
    part = nodes[i] + p[i] * d + 0.5 * slope * d * d
    return np.clip(part / total, 0.0, 1.0)


def density(x: np.ndarray, p: np.ndarray, at: np.ndarray) -> np.ndarray:
    """The trace at ``at`` over its integral (zero outside the trace): the derivative of
    :func:`cumulative`."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    return np.interp(at, x, p, left=0.0, right=0.0) / node_integrals(x, p)[-1]


def inverse_cumulative(x: np.ndarray, p: np.ndarray, fraction: np.ndarray) -> np.ndarray:
    """The position at which the fraction ``fraction`` (0 to 1) of the trace's integral lies below:
    the inverse of :func:`cumulative`, exact (the root of the segment's quadratic, in the form
    d = 2r/(p_i + sqrt(p_i² + 2·s·r)), which holds for a flat segment too)."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    nodes = node_integrals(x, p)
    target = np.clip(np.asarray(fraction, dtype=float), 0.0, 1.0) * nodes[-1]
    i = np.clip(np.searchsorted(nodes, target, side="left") - 1, 0, x.size - 2)
    r = np.maximum(target - nodes[i], 0.0)
    slope = (p[i + 1] - p[i]) / (x[i + 1] - x[i])
    root = np.sqrt(np.maximum(p[i] ** 2 + 2.0 * slope * r, 0.0))
    denominator = p[i] + root
    d = np.zeros_like(r)
    np.divide(2.0 * r, denominator, out=d, where=denominator > 0.0)
    return x[i] + np.clip(d, 0.0, x[i + 1] - x[i])


def interval_maxima(x: np.ndarray, p: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """(len(edges) − 1,) the largest value of the trace over each interval [edges_k, edges_k+1]: at
    one of the interval's ends or at a point of the trace inside it (the trace is straight between)."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    edges = np.asarray(edges, dtype=float)
    at_edges = np.interp(edges, x, p, left=0.0, right=0.0)
    out = np.maximum(at_edges[:-1], at_edges[1:])
    index = np.searchsorted(x, edges, side="right")
    for k in range(edges.size - 1):
        if index[k + 1] > index[k]:
            out[k] = max(out[k], float(p[index[k]:index[k + 1]].max()))
    return out


def support(x: np.ndarray, p: np.ndarray) -> tuple[float, float]:
    """The span of the trace outside which it is zero: from the point before its first positive value
    to the point after its last."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    positive = np.flatnonzero(p > 0.0)
    first = max(int(positive[0]) - 1, 0)
    last = min(int(positive[-1]) + 1, x.size - 1)
    return float(x[first]), float(x[last])


def time_bandwidth_product(x: np.ndarray, p: np.ndarray, samples: int = 4096, padding: int = 16) -> float:
    """Δν·Δx of a transform-limited pulse of power trace p(x) (x in units of its FWHM, so that the
    product is Δν·FWHM): the FWHM of |FFT(sqrt p)|², the field of a flat-phase pulse, sampled at
    ``samples`` points across the trace and padded with zeros to ``padding`` times that length (the
    FWHM by linear interpolation between the frequency samples). A Gaussian gives 2·ln2/π = 0.4413."""
    x, p = np.asarray(x, dtype=float), np.asarray(p, dtype=float)
    grid = np.linspace(x[0], x[-1], samples)
    field = np.sqrt(np.interp(grid, x, p))
    n = samples * padding
    spectrum = np.fft.fftshift(np.abs(np.fft.fft(field, n)) ** 2)
    freq = np.fft.fftshift(np.fft.fftfreq(n, d=grid[1] - grid[0]))
    half = 0.5 * float(spectrum.max())
    above = np.flatnonzero(spectrum >= half)
    i, j = int(above[0]), int(above[-1])
    left = freq[i] - (spectrum[i] - half) / (spectrum[i] - spectrum[i - 1]) * (freq[i] - freq[i - 1])
    right = freq[j] + (spectrum[j] - half) / (spectrum[j] - spectrum[j + 1]) * (freq[j + 1] - freq[j])
    return float(right - left)
