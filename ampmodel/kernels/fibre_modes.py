"""Mode field and overlap factors of a step-index doped fibre (pure numpy, SI units).

The fundamental mode is approximated by a Gaussian, I(r) = (2/(π·w²))·exp(−2r²/w²) per watt, with the
mode-field radius w from D. Marcuse, "Loss analysis of single-mode fiber splices", Bell Syst. Tech. J.
56, 703 (1977):

    w/a = 0.65 + 1.619·V^−1.5 + 2.879·V^−6,    V = 2π·a·NA/λ,

a the core radius (Marcuse quotes it as accurate to about 1 % for 1.2 < V < 2.4, from memory — verify).
The fraction of the mode's power inside the doped core is Γ = 1 − exp(−2a²/w²); a pump launched into
the inner cladding fills it uniformly, Γp = A_core/A_clad. For the radially resolved model the core is
cut into rings of equal width, and each channel's power splits over them by the same profiles.
"""
from __future__ import annotations

import math

import numpy as np

SINGLE_MODE_CUTOFF_V = 2.405
"""First zero of J0: a step-index fibre guides only the fundamental (LP01) mode below this V."""
MARCUSE_VALID_V = (1.2, 2.4)
"""The V range over which Marcuse quotes his fit as accurate to about 1 % (from memory — verify)."""


def v_number(core_radius_m: float, core_na: float, wavelength_m: float | np.ndarray) -> np.ndarray:
    """Normalised frequency V = 2π·a·NA/λ (dimensionless)."""
    return 2.0 * np.pi * core_radius_m * core_na / np.asarray(wavelength_m, dtype=float)


def marcuse_mode_radius(core_radius_m: float, v: float | np.ndarray) -> np.ndarray:
    """Gaussian mode-field radius w (1/e² intensity) of the fundamental mode (m).

    References
    ----------
    D. Marcuse, Bell Syst. Tech. J. 56, 703 (1977): w/a = 0.65 + 1.619·V^−1.5 + 2.879·V^−6.
    """
    v = np.asarray(v, dtype=float)
    return core_radius_m * (0.65 + 1.619 * v ** -1.5 + 2.879 * v ** -6)


def mode_radius(core_radius_m: float, wavelength_m: float | np.ndarray, core_na: float | None = None,
                mode_field_diameter_m: float | None = None) -> np.ndarray:
    """The mode-field radius at each wavelength: half the given mode-field diameter (the same at every
    wavelength), else Marcuse's formula from the core NA."""
    wl = np.asarray(wavelength_m, dtype=float)
    if mode_field_diameter_m is not None:
        return np.full(wl.shape, 0.5 * mode_field_diameter_m)
    if core_na is None:
        raise ValueError("give the core NA or the mode-field diameter")
    return marcuse_mode_radius(core_radius_m, v_number(core_radius_m, core_na, wl))


def core_overlap(core_radius_m: float, mode_radius_m: float | np.ndarray) -> np.ndarray:
    """Fraction of a Gaussian mode's power inside the core, Γ = 1 − exp(−2a²/w²)."""
    w = np.asarray(mode_radius_m, dtype=float)
    return -np.expm1(-2.0 * core_radius_m ** 2 / w ** 2)


def cladding_overlap(core_radius_m: float, cladding_radius_m: float) -> float:
    """Overlap of a cladding-launched pump with the core, Γp = A_core/A_clad (uniform filling)."""
    return (core_radius_m / cladding_radius_m) ** 2


def ring_edges(core_radius_m: float, rings: int) -> np.ndarray:
    """(rings + 1,) radii of ring boundaries, equal widths from the axis to the core edge (m)."""
    return np.linspace(0.0, core_radius_m, rings + 1)


def ring_areas(edges_m: np.ndarray) -> np.ndarray:
    """(R,) areas π·(r_j² − r_{j−1}²) of the rings (m²)."""
    return np.pi * np.diff(np.asarray(edges_m, dtype=float) ** 2)


def gaussian_ring_overlaps(edges_m: np.ndarray, mode_radius_m: float | np.ndarray) -> np.ndarray:
    """Fraction of a Gaussian mode's power in each ring: exp(−2r_{j−1}²/w²) − exp(−2r_j²/w²).

    Parameters
    ----------
    edges_m : (R + 1,) ring boundaries (m)
    mode_radius_m : scalar or (K,) mode-field radii (m)

    Returns
    -------
    (R,) for a scalar radius, (K, R) for an array of radii. The sum over the rings is the core overlap
    1 − exp(−2a²/w²).
    """
    w = np.atleast_1d(np.asarray(mode_radius_m, dtype=float))
    inside = -np.expm1(-2.0 * np.asarray(edges_m)[None, :] ** 2 / w[:, None] ** 2)   # power within r
    out = np.diff(inside, axis=1)
    return out[0] if np.ndim(mode_radius_m) == 0 else out


def uniform_ring_overlaps(edges_m: np.ndarray, cladding_radius_m: float) -> np.ndarray:
    """(R,) fraction of a pump filling the inner cladding uniformly that lies in each ring."""
    return ring_areas(edges_m) / (math.pi * cladding_radius_m ** 2)


def effective_area(mode_radius_m: float) -> float:
    """Effective area (∫I dA)²/∫I² dA of a Gaussian mode, π·w² (m²); the nonlinear coefficient of the
    guided mode is k0·n2/A_eff (G. P. Agrawal, Nonlinear Fiber Optics, ch. 2)."""
    return math.pi * mode_radius_m ** 2
