"""Gain maps of the media: from a small-signal gain, a stored energy, or a pump.

The map is the gain coefficient g = σe·N2 − σa·N1 (1/m) at the material's wavelength in every voxel
(z-slice, y, x); outside the medium's clear aperture there is no gain medium (g = 0). A given
small-signal gain or stored energy is spread uniformly over the aperture; a pump builds N2 by the
rate equations with bleaching (``pumping.py``): a pump pulse from a medium with no excited ion, or a
continuous pump's steady state (a medium pumped long before the seed arrives). N2 never exceeds the
doping (``ions.py``).

References
----------
Storage efficiency of a square pump pulse without bleaching, η = (τ/tp)·(1 − exp(−tp/τ)): the exact
solution of dN/dt = R − N/τ (textbook, e.g. W. Koechner, Solid-State Laser Engineering, Springer);
the rate equations with bleaching: ``kernels/pump_rates.py``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Medium
from ampmodel.kernels import beam_shapes
from ampmodel.media import pumping
from ampmodel.media.ions import Ions
from ampmodel.media.pumping import PumpModel


@dataclass
class GainMap:
    """A medium's initial state on the grid.

    gain_per_m : (Nz, Ny, Nx) gain coefficient g at the material's wavelength (1/m)
    mask : (Ny, Nx) bool, inside the clear aperture
    slice_length_m : dz
    ions : the medium's ions (N2 from g, the doping)
    pump : the pump on the grid (None without one): the pulse trains pump with it between pulses
    absorbed_pump_J, transmitted_pump_J : a pump pulse's energy absorbed in the medium, and leaving it
        (or missing its aperture)
    absorbed_pump_W, transmitted_pump_W : the same in power for a continuous pump's steady state
    pumped_ions, decayed_ions : a pump pulse's ions created and lost by decay during it (counts)
    pump_rate_per_m3_s : (Nz, Ny, Nx) the small-signal pump rate (ions/m³/s, unbleached: the start
        of the estimates a pulse train makes), None without a pump
    """

    gain_per_m: np.ndarray
    mask: np.ndarray
    slice_length_m: float
    ions: Ions | None = None
    pump: PumpModel | None = None
    absorbed_pump_J: float = 0.0
    transmitted_pump_J: float = 0.0
    absorbed_pump_W: float = 0.0
    transmitted_pump_W: float = 0.0
    pumped_ions: float = 0.0
    decayed_ions: float = 0.0
    pump_rate_per_m3_s: np.ndarray | None = None


def storage_efficiency(upper_lifetime_s: float, pump_duration_s: float) -> float:
    """eta = (tau/tp)·(1 − exp(−tp/tau)): the fraction of pumped ions still excited at the end of a
    square pump pulse of length tp (exact solution of dN/dt = R − N/tau; Koechner, Solid-State Laser
    Engineering)."""
    ratio = pump_duration_s / upper_lifetime_s
    return float(-np.expm1(-ratio) / ratio) if ratio > 0 else 1.0


def stored_energy_J(gain_per_m: np.ndarray, saturation_fluence_J_m2: float, voxel_volume_m3: float) -> float:
    """Extractable stored energy down to transparency: Fsat·∫ g dV over the voxels where g > 0."""
    gain = np.asarray(gain_per_m)
    slices = gain if gain.ndim >= 3 else (gain,)       # slice by slice: no temporary of the whole map
    positive = sum(float(np.clip(g, 0.0, None).sum()) for g in slices)
    return float(saturation_fluence_J_m2 * voxel_volume_m3 * positive)


def on_axis_gain(gain_per_m: np.ndarray, slice_length_m: float) -> float:
    """Single-pass small-signal gain exp(∫ g dz) on the axis (mean of the central pixels' ln G)."""
    ln_g = gain_per_m.sum(axis=0) * slice_length_m
    ny, nx = ln_g.shape
    ys = [ny // 2] if ny % 2 else [ny // 2 - 1, ny // 2]
    xs = [nx // 2] if nx % 2 else [nx // 2 - 1, nx // 2]
    return float(np.exp(ln_g[np.ix_(ys, xs)].mean()))


def gain_map(medium: Medium, x_m: np.ndarray, y_m: np.ndarray) -> GainMap:
    """Build a medium's initial gain map on the transverse grid.

    Parameters
    ----------
    medium : the validated medium (one of small_signal_gain, stored_energy_J, pump is set)
    x_m, y_m : (Nx,), (Ny,) pixel centres (m)

    Returns
    -------
    GainMap with gain_per_m of shape (Nz, Ny, Nx) in 1/m.
    """
    mat = medium.material
    nz = medium.slices
    dz = medium.length_m / nz
    mask = beam_shapes.aperture_mask(x_m, y_m, medium.aperture, medium.diameter_m)
    pixel_area = (x_m[1] - x_m[0]) * (y_m[1] - y_m[0])
    if medium.small_signal_gain is not None:
        g0 = np.log(medium.small_signal_gain) / medium.length_m
        gain = np.where(mask, g0, 0.0)[None, :, :] * np.ones((nz, 1, 1))
        return GainMap(gain, mask, dz, Ions.of(medium))
    if medium.stored_energy_J is not None:
        area = mask.sum() * pixel_area
        ln_g0 = medium.stored_energy_J / (mat.saturation_fluence_J_m2 * area)
        gain = np.where(mask, ln_g0 / medium.length_m, 0.0)[None, :, :] * np.ones((nz, 1, 1))
        return GainMap(gain, mask, dz, Ions.of(medium))
    pump = medium.pump
    assert pump is not None
    ions = Ions.of(medium)
    try:
        model = pumping.build_pump(medium, x_m, y_m, mask)
    except pumping.PumpProfileError as exc:
        raise GainMapError(str(exc)) from None
    pumped = (pumping.pump_steady if pump.continuous else pumping.pump_pulse)(medium, model, mask, pixel_area)
    gain = np.where(mask[None, :, :], ions.gain_per_m(pumped.n2_per_m3), 0.0)
    _check_finite(medium, gain, dz)
    z_mean = pumping.sweep(model, np.zeros_like(gain), mask, dz, pixel_area).mean_flux
    rate = np.where(mask, model.quantum_efficiency * model.alpha0_per_m * z_mean, 0.0)
    if pump.continuous:
        return GainMap(gain, mask, dz, ions, model, absorbed_pump_W=pumped.absorbed,
                       transmitted_pump_W=pumped.transmitted, pump_rate_per_m3_s=rate)
    voxel = dz * pixel_area
    return GainMap(gain, mask, dz, ions, model, absorbed_pump_J=pumped.absorbed, transmitted_pump_J=pumped.transmitted,
                   pumped_ions=pumped.created * voxel, decayed_ions=pumped.decayed * voxel, pump_rate_per_m3_s=rate)


# ln G of a column beyond this cannot be represented as a gain (exp overflows near 709).
MAX_LN_GAIN = 700.0


class GainMapError(ValueError):
    """A medium whose gain map cannot be built from its input (a bad input: the message says why)."""


def _check_finite(medium: Medium, gain_per_m: np.ndarray, dz_m: float) -> None:
    """Refuse a pump that would give a column a gain beyond exp(MAX_LN_GAIN): a bad input, not a result."""
    ln_g = float(gain_per_m.sum(axis=0).max()) * dz_m if gain_per_m.size else 0.0
    if ln_g > MAX_LN_GAIN:
        raise GainMapError(f"medium {medium.name}: the pump raises the single-pass small-signal gain to "
                         f"exp({ln_g:.0f}), beyond what can be represented (amplified spontaneous emission "
                         f"and parasitic lasing would clamp it long before); lower the pump or the length")
