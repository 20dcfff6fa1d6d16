"""The temporal shape of a pulse held as time slices: the power inside each slice, its peak and FWHM.

A time slice carries the mean power of its interval. Inside a slice the pulse keeps the seed's own shape
scaled by the slice's gain: P(t) = P̄_t·p(t)/p̄_t for t in slice t, with p the seed's shape
(kernels/beam_shapes) and p̄_t its mean over the slice. This is exact in the small-signal limit (the
shape is only scaled) and follows the reshaping by saturation at the resolution of the slices. Its
largest value is max_t(P̄_t·factor_t) (beam_shapes.slice_peak_factors): the true peak.

References: the pulse shapes' closed-form integrals (Gaussian: erf; sech²: tanh); the FWHM by linear
interpolation between samples of a finely resampled shape.
"""
from __future__ import annotations

import numpy as np

from ampmodel.kernels.beam_shapes import _cumulative, _density, window_edges

SAMPLES_PER_SLICE = 32


def resampled(mean_power: np.ndarray, shape: str, duration_s: float, samples: int = SAMPLES_PER_SLICE,
              trace: tuple | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(t_s, power) of a sliced pulse on a fine grid: ``samples`` points across each of the Nt slices of
    ``mean_power`` (W, the slices of beam_shapes.time_slices for ``shape`` and ``duration_s``), both ends
    included (a slice boundary appears twice, once with each slice's value: the jump between slices is
    kept), the seed's shape inside each slice scaled to the slice's mean. Times from the seed's peak (s).
    ``trace``: shape "file", the measured trace (kernels/beam_shapes)."""
    mean_power = np.asarray(mean_power, dtype=float)
    n = mean_power.size
    edges = window_edges(shape, n, trace)
    width = edges[1] - edges[0]
    mean_shape = np.diff(_cumulative(shape, edges, trace)) / width     # p̄_t, per unit of t/FWHM
    offsets = np.linspace(0.0, width, samples)
    t = (edges[:-1, None] + offsets[None, :])                          # (n, samples), units of the FWHM
    p = _density(shape, t, trace)
    scale = np.zeros(n)
    np.divide(mean_power, mean_shape, out=scale, where=mean_shape > 0.0)
    return (t * duration_s).ravel(), (p * scale[:, None]).ravel()


def fwhm_s(t_s: np.ndarray, power: np.ndarray) -> float:
    """Full width at half maximum (s) of a sampled pulse: from the first to the last crossing of half
    the peak, each by linear interpolation between the samples either side (the whole window where the
    pulse does not fall to half at an end)."""
    power = np.asarray(power, dtype=float)
    if power.size < 2 or not power.max() > 0.0:
        return 0.0
    half = 0.5 * float(power.max())
    above = np.flatnonzero(power >= half)
    i, j = int(above[0]), int(above[-1])
    left = float(t_s[i])
    if i > 0:
        left = float(t_s[i - 1] + (half - power[i - 1]) / (power[i] - power[i - 1]) * (t_s[i] - t_s[i - 1]))
    right = float(t_s[j])
    if j < power.size - 1:
        right = float(t_s[j] + (power[j] - half) / (power[j] - power[j + 1]) * (t_s[j + 1] - t_s[j]))
    return right - left


def slice_factors(factor: np.ndarray | None, nt: int) -> np.ndarray:
    """(Nt,) a beam's peak factors, ones where it has none."""
    return np.ones(nt) if factor is None else np.asarray(factor, dtype=float)


def true_peak(per_slice: np.ndarray, factor: np.ndarray | None) -> float:
    """The largest of a per-time-slice quantity at each slice's true peak: max_t(value_t·factor_t)
    (power, intensity and B-integral scale alike inside a slice; exact in the small-signal limit)."""
    values = np.asarray(per_slice, dtype=float)
    if values.size == 0:
        return 0.0
    return float((values * slice_factors(factor, values.shape[0])).max())


def true_peak_map(per_slice: np.ndarray, factor: np.ndarray | None) -> np.ndarray:
    """(Ny, Nx) the largest over the time slices of a (Nt, Ny, Nx) quantity at each slice's true peak
    (:func:`true_peak` per pixel), slice by slice (no (Nt, Ny, Nx) temporary)."""
    f = slice_factors(factor, per_slice.shape[0])
    out = np.zeros(per_slice.shape[1:])
    for t in range(per_slice.shape[0]):
        np.maximum(out, per_slice[t] * f[t], out=out)
    return out
