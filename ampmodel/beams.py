"""Transverse grid, beam profiles, apertures and temporal pulse shapes (pure numpy).

Time-window rule (stated in the README): the window holds all but about 1e-7 of the pulse energy:
±2.5 FWHM for a Gaussian pulse (power at the edge 3e-8 of the peak), ±5 FWHM for sech² (edge power
1e-7 of the peak), and exactly the pulse for a flat (square) pulse. The window is cut into
``time_slices`` equal slices; each slice carries the exact integral of the pulse shape over its
interval, and the slices are normalised so that their sum is the seed energy.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

# Half-width of the time window in units of the FWHM (see the module docstring).
HALF_WINDOW_FWHM = {"gaussian": 2.5, "sech2": 5.0, "flat": 0.5}
SECH2_FWHM_FACTOR = 2.0 * math.acosh(math.sqrt(2.0))   # sech²(t/T) has FWHM = 1.7627·T


def pixel_centres(points: int, width_m: float) -> np.ndarray:
    """Pixel centres (m) of ``points`` pixels across a window of full width ``width_m``, centred on 0."""
    dx = width_m / points
    return (np.arange(points) - (points - 1) / 2.0) * dx


def radius_map(x_m: np.ndarray, y_m: np.ndarray) -> np.ndarray:
    """(Ny, Nx) distance of each pixel centre from the axis (m)."""
    return np.hypot(x_m[np.newaxis, :], y_m[:, np.newaxis])


def aperture_mask(x_m: np.ndarray, y_m: np.ndarray, shape: str, size_m: float) -> np.ndarray:
    """(Ny, Nx) bool, True inside a hard-edged centred aperture.

    shape : "round" (size = diameter) or "square" (size = side)
    """
    if shape == "square":
        half = size_m / 2.0
        return (np.abs(x_m)[np.newaxis, :] <= half) & (np.abs(y_m)[:, np.newaxis] <= half)
    return radius_map(x_m, y_m) <= size_m / 2.0


def transverse_profile(x_m: np.ndarray, y_m: np.ndarray, profile: str, diameter_m: float,
                       order: float = 8.0) -> np.ndarray:
    """(Ny, Nx) relative transverse fluence (or intensity) profile, peak 1.

    profile : "gaussian" I ~ exp(−2 r²/w²); "supergaussian" I ~ exp(−2 (r/w)^order);
              "flat" 1 inside the diameter, 0 outside; "parabolic" 1 − (r/R)² inside, 0 outside
    diameter_m : 2w (1/e² diameter) for gaussian and supergaussian; the hard-edged diameter otherwise
    """
    r = radius_map(x_m, y_m)
    half = diameter_m / 2.0
    if profile == "gaussian":
        return np.exp(-2.0 * (r / half) ** 2)
    if profile == "supergaussian":
        return np.exp(-2.0 * (r / half) ** order)
    if profile == "flat":
        return (r <= half).astype(float)
    if profile == "parabolic":
        return np.clip(1.0 - (r / half) ** 2, 0.0, None)
    raise ValueError(f"unknown transverse profile {profile!r}")


def _cumulative(shape: str, t_over_fwhm: np.ndarray) -> np.ndarray:
    """Fraction of the pulse energy before time t (t in units of the FWHM, pulse centred on 0)."""
    if shape == "gaussian":
        # P ~ exp(−4 ln2 t²/τ²): cumulative = (1 + erf(2·sqrt(ln 2)·t/τ))/2
        return 0.5 * (1.0 + erf(2.0 * math.sqrt(math.log(2.0)) * t_over_fwhm))
    if shape == "sech2":
        # P ~ sech²(t/T), T = τ/1.7627: cumulative = (1 + tanh(t/T))/2
        return 0.5 * (1.0 + np.tanh(SECH2_FWHM_FACTOR * t_over_fwhm))
    if shape == "flat":
        return np.clip(t_over_fwhm + 0.5, 0.0, 1.0)
    raise ValueError(f"unknown temporal shape {shape!r}")


def time_slices(shape: str, duration_s: float, n: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Cut a pulse into ``n`` equal time slices covering the window rule of this module.

    Parameters
    ----------
    shape : "gaussian" | "sech2" (duration = FWHM) | "flat" (duration = full width)
    duration_s : pulse duration (s)
    n : number of slices

    Returns
    -------
    t_s : (n,) slice centres (s), centred on the pulse peak
    weights : (n,) fraction of the energy in each slice, summing to 1
    dt_s : slice width (s)
    """
    half = HALF_WINDOW_FWHM[shape]
    edges = np.linspace(-half, half, n + 1)
    cum = _cumulative(shape, edges)
    weights = np.diff(cum)
    weights /= weights.sum()
    dt = 2.0 * half * duration_s / n
    t = 0.5 * (edges[:-1] + edges[1:]) * duration_s
    return t, weights, dt


def seed_fluence(x_m: np.ndarray, y_m: np.ndarray, profile: str, diameter_m: float, order: float,
                 energy_J: float) -> np.ndarray:
    """(Ny, Nx) seed fluence (J/m²) whose sum over the grid times the pixel area equals ``energy_J``."""
    shape = transverse_profile(x_m, y_m, profile, diameter_m, order)
    pixel_area = abs(x_m[1] - x_m[0]) * abs(y_m[1] - y_m[0]) if len(x_m) > 1 else 1.0
    total = shape.sum() * pixel_area
    if total <= 0.0:
        raise ValueError("the seed profile has no energy on the grid: the beam is smaller than one pixel")
    return shape * (energy_J / total)
