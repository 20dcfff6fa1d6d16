"""What the summaries of every path share: unit factors, the damage fluence scaled
to the pulse, and the warnings about the grid and the transverse gain.

Warning thresholds are common practice; each can be changed in the config's [limits] table
(``description.Limits``).
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from ampmodel.description import step_label
from ampmodel.kernels import traces
from ampmodel.notices import warning

J_CM2 = 1e-4   # J/m² -> J/cm²
W_CM2 = 1e-4   # W/m² -> W/cm²


def scaled_damage_fluence(damage_J_m2: float, quoted_pulse_s: float | None, pulse_s: float,
                          exponent: float) -> float:
    """Damage fluence scaled from the quoted pulse length: F·(tau/tau_ref)^exponent (common practice)."""
    if not quoted_pulse_s:
        return damage_J_m2
    return damage_J_m2 * (pulse_s / quoted_pulse_s) ** exponent


def transverse_gain_warnings(name: str, gain_per_m: np.ndarray, diameter_m: float, limits) -> list[str]:
    """A warning when the transverse gain-length product g0·D of a medium is above the limit (the
    risk of parasitic oscillation across the rod; common practice)."""
    g_peak = float(np.max(gain_per_m)) if np.size(gain_per_m) else 0.0
    if g_peak * diameter_m > limits.transverse_gain_length:
        return [warning("parasitic-gain", f"medium {name}: transverse gain-length product g0·D = "
                        f"{g_peak * diameter_m:.2g} above {limits.transverse_gain_length:g} (common practice): risk "
                        f"of parasitic oscillation; consider edge cladding or a lower gain")]
    return []


def seed_grid_warnings(diameter_m: float, dx_m: float, seed_map: np.ndarray, width_m: float, limits) -> list[str]:
    """The grid's two warnings about the seed: too few pixels across its diameter, and a seed map
    (fluence or intensity, (Ny, Nx)) with more than 1e-3 of its peak at the window's edge."""
    warnings = []
    pixels = diameter_m / dx_m
    if pixels < limits.pixels_across_beam:
        warnings.append(warning("grid-coarse", f"grid: only {pixels:.1f} pixels across the seed diameter (fewer "
                                f"than {limits.pixels_across_beam:g}); raise grid.points or narrow grid.width_mm"))
    edge = max(seed_map[0, :].max(), seed_map[-1, :].max(), seed_map[:, 0].max(), seed_map[:, -1].max())
    if edge > 1e-3 * seed_map.max():
        warnings.append(warning("grid-coarse", f"grid: the seed reaches the edge of the {width_m * 1e3:g} mm "
                                f"window ({edge / seed_map.max():.1e} of its peak there) and is cut by it; widen "
                                f"grid.width_mm"))
    return warnings


# Time-bandwidth products Δν·Δt (FWHM) of transform-limited pulses of each shape (Gaussian 2·ln2/π;
# sech² 0.315; the flat pulse's sinc² spectrum 0.886): textbook values (e.g. J.-C. Diels and
# W. Rudolph, Ultrashort Laser Pulse Phenomena, Academic Press, table 1.1; from memory — verify).
TIME_BANDWIDTH = {"gaussian": 2.0 * math.log(2.0) / math.pi, "sech2": 0.315, "flat": 0.886}
LIGHT_SPEED_M_S = 299_792_458.0


def transform_limit_bandwidth_m(shape: str, duration_s: float, wavelength_m: float,
                                trace: tuple | None = None) -> float:
    """FWHM (m) of the spectrum of a transform-limited pulse of this shape and duration (FWHM; flat:
    full width): Δλ = λ²·Δν/c with Δν = TIME_BANDWIDTH/duration; a measured pulse (shape "file")
    takes the product of its own trace (kernels/traces.time_bandwidth_product)."""
    product = traces.time_bandwidth_product(*trace) if shape == "file" else TIME_BANDWIDTH[shape]
    return wavelength_m ** 2 * product / duration_s / LIGHT_SPEED_M_S


def transform_limit_duration_s(bandwidth_m: float, wavelength_m: float) -> float:
    """The shortest Gaussian pulse (FWHM, s) a spectrum of FWHM ``bandwidth_m`` at ``wavelength_m``
    supports: Δt = 2·ln2/π · λ²/(c·Δλ) (an estimate: the spectrum taken as Gaussian)."""
    return TIME_BANDWIDTH["gaussian"] * wavelength_m ** 2 / (LIGHT_SPEED_M_S * bandwidth_m)


def spectrum_J_m(energies_J: np.ndarray, wavelength_step_m: float) -> np.ndarray:
    """(Nt,) spectral energy density (J/m) of a chirped pulse whose time slice t carries
    ``energies_J[t]`` over a wavelength interval ``wavelength_step_m`` (all alike: a linear chirp)."""
    return np.asarray(energies_J, dtype=float) / abs(wavelength_step_m)


def spectral_centre_and_width(energies_J: np.ndarray, wavelengths_m: np.ndarray,
                              widths_m: np.ndarray | None = None) -> tuple[float, float]:
    """The energy-weighted centre wavelength (m) of a pulse's slices and the full width at half
    maximum of its spectrum (m; linear interpolation between the slices, whose wavelengths are evenly
    spaced). (nan, nan) for a pulse without energy. ``widths_m``: the wavelength interval of each
    slice when they are not evenly spaced (a measured spectrum): the FWHM is then that of the
    spectral density, energy over width, interpolated between the slices' wavelengths."""
    e = np.asarray(energies_J, dtype=float)
    wl = np.asarray(wavelengths_m, dtype=float)
    total = float(e.sum())
    if total <= 0.0 or e.size < 2:
        return float("nan"), float("nan")
    order = np.argsort(wl)
    e, wl = e[order], wl[order]
    centre = float((e * wl).sum() / total)
    if widths_m is not None:
        w = np.asarray(widths_m, dtype=float)[order]
        density = np.zeros_like(e)
        np.divide(e, w, out=density, where=w > 0.0)
        return centre, _fwhm(wl, density)
    half = 0.5 * float(e.max())
    above = np.flatnonzero(e >= half)
    i, j = above[0], above[-1]
    step = float(wl[1] - wl[0])
    left = wl[i] - (e[i] - half) / (e[i] - e[i - 1]) * step if i > 0 else wl[0]
    right = wl[j] + (e[j] - half) / (e[j] - e[j + 1]) * step if j < e.size - 1 else wl[-1]
    return centre, float(right - left)


def _fwhm(x: np.ndarray, y: np.ndarray) -> float:
    """Full width at half maximum of samples y(x) (x increasing): first to last crossing of half the
    largest value, each by linear interpolation between the samples either side."""
    half = 0.5 * float(y.max())
    above = np.flatnonzero(y >= half)
    i, j = int(above[0]), int(above[-1])
    left = x[i] - (y[i] - half) / (y[i] - y[i - 1]) * (x[i] - x[i - 1]) if i > 0 else x[0]
    right = x[j] + (y[j] - half) / (y[j] - y[j + 1]) * (x[j + 1] - x[j]) if j < y.size - 1 else x[-1]
    return float(right - left)


def worst_damage(config: Any, steps: list[dict[str, Any]]) -> dict[str, Any]:
    """``worst_damage_margin`` (the largest ``damage_margin`` of any step, a repeat's inner steps
    included; None where no surface has damage data; ``config`` a Config) and ``worst_damage_step`` (its label)."""
    worst, where = None, None
    for entry in steps:
        inner = [(entry, None)] + [(e, entry["index"]) for e in entry.get("steps", [])]
        for e, outer in inner:
            margin = e.get("damage_margin")
            if margin is not None and (worst is None or margin > worst):
                index = (outer, e["index"]) if outer is not None else (e["index"],)
                worst, where = margin, step_label(config.steps, *index)
    return {"worst_damage_margin": worst, "worst_damage_step": where}
