"""Builders and reference formulas shared by the physics tests (imported as ``physics_reference``).

Configurations are built directly from the dataclasses of ``ampmodel.description`` with a
``Material`` constructed in place, so that these tests depend only on the solver. The reference
formulas below are written out independently of the code under test: the grid, the seed maps and
the time slicing are recomputed here from their definitions, and the Frantz–Nodvik closed form is
evaluated in its direct form.

References
----------
L. M. Frantz and J. S. Nodvik, "Theory of pulse propagation in a laser amplifier",
J. Appl. Phys. 34, 2346 (1963): output fluence J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)] and,
for a square input pulse, P_out(t) = P_in / (1 − (1 − 1/G0)·exp(−J_in(t)/Fsat)).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK
from scipy.special import ndtr

from ampmodel.description import Config, Grid, Medium, Seed, Step
from ampmodel.materials.material import Material

# --------------------------------------------------------------------------------------------------
# Builders
# --------------------------------------------------------------------------------------------------

def make_material(name: str = "four-level test medium", wavelength_m: float = 1064e-9,
                  emission_cross_section_m2: float = 2.8e-23, absorption_cross_section_m2: float = 0.0,
                  upper_lifetime_s: float = 230e-6, refractive_index: float = 1.82, n2_m2_W: float = 0.0,
                  **extra) -> Material:
    """A material with Nd:YAG-like defaults (σe = 2.8e-19 cm², 1064 nm, τ = 230 µs)."""
    return Material(name=name, wavelength_m=wavelength_m, emission_cross_section_m2=emission_cross_section_m2,
                    absorption_cross_section_m2=absorption_cross_section_m2, upper_lifetime_s=upper_lifetime_s,
                    refractive_index=refractive_index, n2_m2_W=n2_m2_W, **extra)


def make_medium(material: Material, name: str = "rod", length_m: float = 0.05, diameter_m: float = 4e-3,
                slices: int = 12, **kw) -> Medium:
    return Medium(name=name, material=material, length_m=length_m, diameter_m=diameter_m, slices=slices, **kw)


def pass_step(index: int, medium: str = "rod", reverse: bool = False) -> Step:
    return Step(kind="pass", index=index, medium=medium, reverse=reverse)


def loss_step(index: int, transmission: float) -> Step:
    return Step(kind="loss", index=index, transmission=transmission)


def aperture_step(index: int, diameter_m: float, shape: str = "round") -> Step:
    return Step(kind="aperture", index=index, shape=shape, diameter_m=diameter_m)


def make_config(media, seed: Seed, steps, points: int = 48, width_m: float = 6e-3,
                time_slices: int = 32, title: str = "physics test") -> Config:
    if isinstance(media, Medium):
        media = (media,)
    return Config(title=title, mode="pulsed", grid=Grid(points=points, width_m=width_m, time_slices=time_slices),
                  media=tuple(media), seed=seed, steps=tuple(steps))


# --------------------------------------------------------------------------------------------------
# Independent recomputation of the grid, seed and time slicing (from their definitions)
# --------------------------------------------------------------------------------------------------

def photon_energy(wavelength_m: float) -> float:
    """h·c/λ with the CODATA constants of scipy.constants."""
    return PLANCK * LIGHT_SPEED / wavelength_m


def grid_axes(points: int, width_m: float) -> tuple[np.ndarray, float]:
    """Pixel centres of ``points`` equal pixels across a window of width ``width_m`` centred on 0."""
    dx = width_m / points
    return dx * (np.arange(points) + 0.5) - width_m / 2.0, dx


def radius(points: int, width_m: float) -> tuple[np.ndarray, float]:
    """(Ny, Nx) radius of each pixel centre and the pixel area."""
    x, dx = grid_axes(points, width_m)
    return np.sqrt(x[None, :] ** 2 + x[:, None] ** 2), dx * dx


def disc(points: int, width_m: float, diameter_m: float) -> np.ndarray:
    """Pixels whose centre lies inside a centred disc of the given diameter."""
    r, _ = radius(points, width_m)
    return r <= diameter_m / 2.0


def seed_map(points: int, width_m: float, seed: Seed) -> np.ndarray:
    """(Ny, Nx) seed fluence (J/m²): the profile normalised to the seed energy over the grid."""
    r, area = radius(points, width_m)
    w = seed.diameter_m / 2.0
    if seed.profile == "gaussian":
        shape = np.exp(-2.0 * (r / w) ** 2)
    elif seed.profile == "flat":
        shape = (r <= w).astype(float)
    else:
        raise ValueError(seed.profile)
    return shape * seed.energy_J / (shape.sum() * area)


def pulse_weights(shape: str, n: int) -> np.ndarray:
    """Fraction of the pulse energy in each of ``n`` equal slices of the time window.

    The window is ±2.5 FWHM for a Gaussian pulse and exactly the pulse for a flat one (the window
    rule of the README); the Gaussian is integrated through the normal distribution's cdf
    (σ = FWHM / (2·sqrt(2 ln 2))), and the slices are normalised to the window.
    """
    if shape == "flat":
        return np.full(n, 1.0 / n)
    if shape == "gaussian":
        sigma = 1.0 / (2.0 * math.sqrt(2.0 * math.log(2.0)))
        edges = np.linspace(-2.5, 2.5, n + 1)
        w = np.diff(ndtr(edges / sigma))
        return w / w.sum()
    raise ValueError(shape)


# --------------------------------------------------------------------------------------------------
# Frantz–Nodvik references
# --------------------------------------------------------------------------------------------------

def fn_closed(fluence_in, ln_gain, fsat):
    """Frantz & Nodvik (1963), output fluence of a slab: Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)].

    Evaluated directly as Fsat·log1p(G·expm1(x)); the callers keep G·expm1(x) well inside the
    float range (asserted).
    """
    x = np.asarray(fluence_in, dtype=float) / fsat
    arg = np.exp(np.asarray(ln_gain, dtype=float)) * np.expm1(x)
    assert np.all(np.isfinite(arg)) and np.all(arg < 1e300)
    return fsat * np.log1p(arg)


def fn_slices(slice_fluence_in, ln_gain, fsat):
    """Per-time-slice output of Frantz & Nodvik (1963): slice t leaves with
    FN(C_t) − FN(C_{t−1}), C_t the cumulative input fluence up to the end of slice t.

    The difference is written without cancellation:
    FN(C_t) − FN(C_{t−1}) = Fsat·log1p(G·exp(x_{t−1})·expm1(s_t) / (1 + G·expm1(x_{t−1}))),
    x = C/Fsat, s_t = slice fluence/Fsat (algebraically identical; exact even for the 1e-9 slices in
    the wings of a Gaussian pulse).

    slice_fluence_in : (Nt, ...) input fluence of each slice
    """
    s = np.asarray(slice_fluence_in, dtype=float) / fsat
    x_before = np.concatenate([np.zeros_like(s[:1]), np.cumsum(s, axis=0)[:-1]])
    g = np.exp(np.asarray(ln_gain, dtype=float))
    return fsat * np.log1p(g * np.exp(x_before) * np.expm1(s) / (1.0 + g * np.expm1(x_before)))


def fn_remaining_ln_gain(fluence_in, ln_gain0, fsat):
    """ln G left after a pulse (Frantz & Nodvik 1963): ln G0 − (J_out − J_in)/Fsat
    = −ln[1 − (1 − 1/G0)·exp(−J_in/Fsat)] (the gain seen by the end of the pulse)."""
    x = np.asarray(fluence_in, dtype=float) / fsat
    return -np.log1p(-(1.0 - np.exp(-np.asarray(ln_gain0, dtype=float))) * np.exp(-x))


def max_rel(a, b, where=None) -> float:
    """Largest |a − b| / |b| (over ``where``)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if where is not None:
        a, b = a[..., where], b[..., where]
    return float(np.max(np.abs(a - b) / np.abs(b)))

