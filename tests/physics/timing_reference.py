"""Configs and reference maps shared by the tests of delays, repeats and pulse trains.

The configs are plain dicts read by ``load_config`` (so that the keys themselves are exercised). The
references are written out here from the published closed forms, independently of the code:

- Frantz–Nodvik output fluence of a slab, J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)], and the gain
  left, ln G − (J_out − J_in)/Fsat (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963));
- the exact N2(t) of dN2/dt = R − N2/tau, N2(t) = R·tau + (N2(0) − R·tau)·exp(−t/tau), applied to
  ln G = sigma_e·∫N2 dz of a four-level medium (textbook, e.g. Koechner, Solid-State Laser
  Engineering).
"""
from __future__ import annotations

import copy
import math

import numpy as np
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK

WAVELENGTH = 1000e-9
SIGMA_E = 3.0e-23          # m² (3e-19 cm²)
TAU_SHORT = 3.2e-6         # s, a Ti:sapphire-like lifetime
PUMP_WAVELENGTH = 800e-9
FSAT = PLANCK * LIGHT_SPEED / WAVELENGTH / SIGMA_E
POINTS, WIDTH_MM = 24, 3.0
BEAM_MM, APERTURE_MM, LENGTH_MM = 1.6, 2.6, 10.0


def material(tau_s: float = TAU_SHORT) -> dict:
    """A four-level material table (values of this test, not of a real crystal)."""
    return {"wavelength_nm": WAVELENGTH * 1e9, "emission_cross_section_cm2": SIGMA_E * 1e4,
            "upper_lifetime_us": tau_s * 1e6, "refractive_index": 1.7}


def flat_config(steps: list, *, tau_s: float = TAU_SHORT, gain: dict | None = None, seed_J: float = 1e-6,
                rate_Hz: float | None = None, train: dict | None = None, profile: str = "flat") -> dict:
    """A flat beam (hard-edged, inside the aperture) through one medium."""
    medium = {"name": "xtal", "length_mm": LENGTH_MM, "diameter_mm": APERTURE_MM, "slices": 6,
              "material": material(tau_s)}
    medium.update(gain if gain is not None else {"small_signal_gain": 2.0})
    seed = {"energy_J": seed_J, "duration_ns": 1.0, "shape": "flat", "profile": profile, "diameter_mm": BEAM_MM}
    if rate_Hz is not None:
        seed["repetition_rate_Hz"] = rate_Hz
    raw = {"title": "timing test", "grid": {"points": POINTS, "width_mm": WIDTH_MM, "time_slices": 3},
           "medium": [medium], "seed": seed, "step": copy.deepcopy(steps)}
    if train is not None:
        raw["train"] = train
    return raw


def side_pump(power_W: float, continuous: bool = True, duration_us: float | None = None) -> dict:
    """A flat side pump absorbed completely: uniform over the clear aperture and along z."""
    pump = {"geometry": "side", "wavelength_nm": PUMP_WAVELENGTH * 1e9, "profile": "flat",
            "absorbed_fraction": 1.0}
    if continuous:
        pump.update(continuous=True, power_W=power_W)
    else:
        pump.update(power_W=power_W, duration_us=duration_us)
    return {"pump": pump}


def pixels() -> tuple[np.ndarray, float]:
    """Pixel centres (m) and the pixel area (m²) of the test grid, from their definition."""
    dx = WIDTH_MM * 1e-3 / POINTS
    return dx * (np.arange(POINTS) + 0.5) - WIDTH_MM * 1e-3 / 2, dx * dx


def disc_count(diameter_mm: float) -> int:
    """Pixels whose centre lies within a disc of this diameter."""
    x, _ = pixels()
    return int((np.hypot(x[None, :], x[:, None]) <= diameter_mm * 1e-3 / 2).sum())


def fn(fluence: float, ln_gain: float) -> float:
    """Frantz–Nodvik (1963) output fluence, evaluated in its direct form."""
    return FSAT * math.log1p(math.exp(ln_gain) * math.expm1(fluence / FSAT))


def pump_ln_gain_inf(power_W: float, tau_s: float) -> float:
    """ln G of the steady state R·tau under a flat side pump absorbed completely (four-level):
    sigma_e·R·tau·L with R = P/(h·nu_p·A·L), A the pixels of the clear aperture."""
    _, area = pixels()
    aperture = disc_count(APERTURE_MM) * area
    rate_times_length = power_W / (PLANCK * LIGHT_SPEED / PUMP_WAVELENGTH) / aperture
    return SIGMA_E * rate_times_length * tau_s


def relax(ln_gain: float, ln_gain_inf: float, t: float, tau_s: float) -> float:
    """Exact relaxation of ln G towards its pumped steady state over t."""
    return ln_gain_inf + (ln_gain - ln_gain_inf) * math.exp(-t / tau_s)
