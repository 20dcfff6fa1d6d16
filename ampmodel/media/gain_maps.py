"""Gain maps of the media: from a small-signal gain, a stored energy, or a pump description.

The map is the gain coefficient g = sigma_e·N2 − sigma_a·N1 (1/m) in every voxel (z-slice, y, x);
outside the medium's clear aperture there is no gain medium (g = 0).

References
----------
Storage efficiency of a square pump pulse of length tp, eta = (tau/tp)·(1 − exp(−tp/tau)): the exact
solution of dN/dt = R − N/tau (textbook, e.g. W. Koechner, Solid-State Laser Engineering, Springer).
Quasi-three-level bleaching limit N2/Nt <= sigma_a,p/(sigma_a,p + sigma_e,p) at the pump wavelength.
A continuous (CW) pump holds the steady state of the same equation, N2 = R·tau (capped at the
bleaching limit): the state of a medium pumped long before the seed arrives.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Medium, Pump
from ampmodel.kernels import beam_shapes
from ampmodel.units import photon_energy_J


@dataclass
class GainMap:
    """A medium's initial state on the grid.

    gain_per_m : (Nz, Ny, Nx) gain coefficient g (1/m)
    mask : (Ny, Nx) bool, inside the clear aperture
    slice_length_m : dz
    absorbed_pump_J : pump energy absorbed in the medium (0 without a pump or with a continuous pump)
    absorbed_pump_W : pump power absorbed in the medium (continuous pumps)
    pump_rate_per_m3_s : (Nz, Ny, Nx) upper-state ions created per m³ and s while the pump is on
        (None without a pump)
    n2_max_per_m3 : quasi-three-level bleaching limit of N2 (None: no limit)
    """

    gain_per_m: np.ndarray
    mask: np.ndarray
    slice_length_m: float
    absorbed_pump_J: float = 0.0
    pump_limited_voxels: int = 0
    absorbed_pump_W: float = 0.0
    pump_rate_per_m3_s: np.ndarray | None = None
    n2_max_per_m3: float | None = None


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


def pump_absorption_per_m(pump: Pump, medium: Medium) -> float:
    """Small-signal pump absorption coefficient (1/m) of an end-pumped medium.

    In order: the pump's own ``absorption_per_m``; sigma_a,p·Nt when the medium overrides the doping
    and the material gives the pump cross-section; the material's coefficient at its typical doping,
    scaled to the medium's doping when that is given.
    """
    mat = medium.material
    if pump.absorption_per_m is not None:
        return pump.absorption_per_m
    if medium.doping_per_m3 is not None and mat.pump_absorption_cross_section_m2:
        return mat.pump_absorption_cross_section_m2 * medium.doping_per_m3
    if mat.pump_absorption_per_m is not None:
        if medium.doping_per_m3 is not None and mat.doping_per_m3:
            return mat.pump_absorption_per_m * medium.doping_per_m3 / mat.doping_per_m3
        return mat.pump_absorption_per_m
    if mat.pump_absorption_cross_section_m2 and mat.doping_per_m3:
        return mat.pump_absorption_cross_section_m2 * mat.doping_per_m3
    raise ValueError(f"medium {medium.name!r}: no pump absorption coefficient is known")


def _pump_absorbed_density(pump: Pump, medium: Medium, x_m: np.ndarray, y_m: np.ndarray,
                           mask: np.ndarray, z_edges_m: np.ndarray) -> np.ndarray:
    """(Nz, Ny, Nx) absorbed pump energy density (J/m³), slice-integrated exactly; for a continuous
    pump the absorbed power density (W/m³)."""
    dz = np.diff(z_edges_m)
    pixel_area = (x_m[1] - x_m[0]) * (y_m[1] - y_m[0])
    delivered = (pump.power_W if pump.continuous else pump.energy_J) * pump.transfer_efficiency
    diameter = pump.diameter_m if pump.diameter_m is not None else medium.diameter_m
    profile = beam_shapes.transverse_profile(x_m, y_m, pump.profile, diameter, pump.order)
    if pump.geometry == "end":
        # Pump profile normalised on the grid (pump outside the clear aperture is lost).
        areal = profile / (profile.sum() * pixel_area)            # 1/m²
        areal = np.where(mask, areal, 0.0)
        alpha = pump_absorption_per_m(pump, medium)
        length = medium.length_m
        forward = np.exp(-alpha * z_edges_m)
        frac = forward[:-1] - forward[1:]                          # absorbed on the first pass
        if pump.back_reflectance > 0.0:
            back = pump.back_reflectance * np.exp(-alpha * length) * np.exp(-alpha * (length - z_edges_m))
            frac = frac + (back[1:] - back[:-1])                    # absorbed on the way back
        return delivered * (frac / dz)[:, None, None] * areal[None, :, :]
    # Side pumping: the absorbed pump is spread over the clear aperture with the profile, uniform along z.
    inside = np.where(mask, profile, 0.0)
    total = inside.sum() * pixel_area
    if total <= 0.0:
        raise ValueError(f"medium {medium.name!r}: the pump profile does not reach the clear aperture")
    areal = inside / total
    absorbed = delivered * pump.absorbed_fraction
    return np.broadcast_to(absorbed * areal / medium.length_m, (len(dz),) + areal.shape).copy()


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
        return GainMap(gain, mask, dz)
    if medium.stored_energy_J is not None:
        area = mask.sum() * pixel_area
        ln_g0 = medium.stored_energy_J / (mat.saturation_fluence_J_m2 * area)
        gain = np.where(mask, ln_g0 / medium.length_m, 0.0)[None, :, :] * np.ones((nz, 1, 1))
        return GainMap(gain, mask, dz)
    pump = medium.pump
    assert pump is not None
    z_edges = np.linspace(0.0, medium.length_m, nz + 1)
    absorbed = _pump_absorbed_density(pump, medium, x_m, y_m, mask, z_edges)       # J/m³ (cw: W/m³)
    absorbed_total = float(absorbed.sum() * pixel_area * dz)
    ions_per_J = pump.quantum_efficiency / photon_energy_J(pump.wavelength_m)
    if pump.continuous:
        rate = absorbed * ions_per_J                                                # ions/m³/s
        n2 = rate * mat.upper_lifetime_s                                            # steady state R·tau
    else:
        rate = absorbed * (ions_per_J / pump.duration_s)
        n2 = absorbed * (ions_per_J * storage_efficiency(mat.upper_lifetime_s, pump.duration_s))
    limited = 0
    n2_max = bleaching_limit_per_m3(medium)
    if mat.quasi_three_level:
        nt = medium.doping_per_m3 or mat.doping_per_m3
        if n2_max is not None:
            limited = int((n2 > n2_max).sum())
            np.minimum(n2, n2_max, out=n2)
        sa = mat.absorption_cross_section_m2
        gain = (mat.emission_cross_section_m2 + sa) * n2 - sa * nt
        gain = np.where(mask[None, :, :], gain, 0.0)
    else:
        gain = mat.emission_cross_section_m2 * n2
    return GainMap(gain, mask, dz, absorbed_pump_J=0.0 if pump.continuous else absorbed_total,
                   pump_limited_voxels=limited, absorbed_pump_W=absorbed_total if pump.continuous else 0.0,
                   pump_rate_per_m3_s=rate, n2_max_per_m3=n2_max)


def bleaching_limit_per_m3(medium: Medium) -> float | None:
    """Quasi-three-level bleaching limit N2 <= Nt·sigma_a,p/(sigma_a,p + sigma_e,p) at the pump
    wavelength (ions/m³); None for four-level media or when the pump cross-section is not known."""
    mat = medium.material
    nt = medium.doping_per_m3 or mat.doping_per_m3
    sap = mat.pump_absorption_cross_section_m2
    if not mat.quasi_three_level or not sap or not nt:
        return None
    sep = mat.pump_emission_cross_section_m2 or 0.0
    return nt * sap / (sap + sep)
