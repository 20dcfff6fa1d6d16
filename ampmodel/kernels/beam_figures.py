"""Figures of merit of a transverse beam map: second-moment diameters, modulation, fill factor, M².

Definitions (stated in the README):

- D4σ diameter along x: 4·σx, σx² = ∫(x − x̄)²·F dA / ∫F dA over the whole window (F the fluence or
  intensity); for a Gaussian beam it is the 1/e² diameter 2w, for a flat disc its diameter
  (ISO 11146-1 second-moment width).
- Peak-to-mean modulation over a clear aperture: F_peak / F_mean, with F_mean = ∫F² dA / ∫F dA the
  energy-weighted mean fluence inside the aperture (the fluence the average photon sees): 1 for a
  flat beam, 2 for a Gaussian, above 1 by the depth of any hot spot.
- Fill factor of a clear aperture of area A: ∫F dA / (F_peak·A) over the aperture, the energy it
  holds against what it would hold filled uniformly at the peak fluence (1: a flat beam filling the
  aperture; smaller for a smaller, peaked or modulated beam).
- Beam quality M² from the second moments of a field at one plane: M²x = (4π/λ)·sqrt(σx²·σθx² −
  c²), σθx the rms angle from the angular spectrum and c = ⟨(x − x̄)(θx − θ̄x)⟩ (ISO 11146 /
  A. E. Siegman, "New developments in laser resonators", Proc. SPIE 1224, 2 (1990), from memory —
  verify).
"""
from __future__ import annotations

import math

import numpy as np
import scipy.fft


def d4sigma(fluence: np.ndarray, x_m: np.ndarray, y_m: np.ndarray) -> tuple[float, float]:
    """Second-moment (D4σ) diameters (m) in x and y of a (Ny, Nx) map; (0, 0) for an empty map."""
    f = np.asarray(fluence, dtype=float)
    total = f.sum()
    if not total > 0:
        return 0.0, 0.0
    px = f.sum(axis=0) / total
    py = f.sum(axis=1) / total
    xc, yc = float(px @ x_m), float(py @ y_m)
    sx2 = float(px @ (x_m - xc) ** 2)
    sy2 = float(py @ (y_m - yc) ** 2)
    return 4.0 * math.sqrt(max(sx2, 0.0)), 4.0 * math.sqrt(max(sy2, 0.0))


def aperture_figures(fluence: np.ndarray, inside: np.ndarray, pixel_area_m2: float) -> tuple[float, float]:
    """(peak-to-mean modulation, fill factor) of a (Ny, Nx) map over a clear aperture ``inside``
    (bool, same shape); (0, 0) when the aperture holds no energy. Definitions in the module docstring."""
    f = np.asarray(fluence, dtype=float)[inside]
    total = f.sum()
    if f.size == 0 or not total > 0:
        return 0.0, 0.0
    peak = float(f.max())
    g = f / peak                      # scale-free: a beam of 1e-250 J/m² gives the same figures
    fill = float(g.sum() / f.size)
    return float(g.sum() / (g * g).sum()), fill


def m_squared(field: np.ndarray, x_m: np.ndarray, y_m: np.ndarray) -> tuple[float, float]:
    """Second-moment beam quality (M²x, M²y) of one (Ny, Nx) complex field at one plane.

    With θ = kx/k, M² = (4π/λ)·sqrt(σx²σθ² − c²) = 2·sqrt(σx²·σk² − c_k²), σk² the variance of kx
    over the angular spectrum and c_k the position–wavenumber correlation, from
    ⟨x·kx⟩ = Re ∫E*·x·(−i ∂E/∂x) dA / ∫|E|² dA (derivative taken spectrally).
    """
    e = np.asarray(field, dtype=complex)
    ny, nx = e.shape
    kx = 2.0 * math.pi * scipy.fft.fftfreq(nx, d=float(x_m[1] - x_m[0]))
    ky = 2.0 * math.pi * scipy.fft.fftfreq(ny, d=float(y_m[1] - y_m[0]))
    spec = scipy.fft.fft2(e)
    p = np.abs(e) ** 2
    total = p.sum()
    ps = np.abs(spec) ** 2
    ps_total = ps.sum()
    out = []
    for axis, coord, kk in ((1, x_m, kx), (0, y_m, ky)):
        shape = [1, 1]
        shape[axis] = -1
        c = coord.reshape(shape)
        kq = kk.reshape(shape)
        mean_x = float((p * c).sum() / total)
        var_x = float((p * (c - mean_x) ** 2).sum() / total)
        mean_k = float((ps * kq).sum() / ps_total)
        var_k = float((ps * (kq - mean_k) ** 2).sum() / ps_total)
        deriv = scipy.fft.ifft2(1j * kq * spec)
        xk = float(np.real(np.conj(e) * c * (-1j) * deriv).sum() / total)
        cov = xk - mean_x * mean_k
        out.append(2.0 * math.sqrt(max(var_x * var_k - cov * cov, 0.0)))
    return out[0], out[1]
