"""A medium's pump on the grid, and the upper-level density it builds by the rate equations with
bleaching (``kernels/pump_rates.py``): a pump pulse, a continuous pump's steady state, or the pump
windows of a pulse train. The same pump model serves the pulsed, train and cw paths.

End pumping: the pump enters at z = 0 (``direction = "forward"``), at z = L ("backward") or half at
each face ("both") with its transverse profile (what falls outside the clear aperture is lost) and
crosses the slices, absorbed by α = σa,p·N1 − σe,p·N2 of each voxel, with an optional second pass
back from a reflector at the far face (one pumped face only). Side pumping: the small-signal absorbed rate
(the delivered pump times ``absorbed_fraction``) is spread over the clear aperture with the transverse
profile, uniform along z, and each voxel sees the photon flux that gives that rate unbleached;
bleaching then lowers what it absorbs.

The pump's absorption cross-section is α0/Nt, α0 the unbleached absorption coefficient (the pump's
``absorption_per_cm``, or the material's at the medium's doping). Where the doping is not known the
ground state is taken as undepleted (no bleaching).

References
----------
Rate equations with a propagating pump: T. Y. Fan and R. L. Byer, IEEE J. Quantum Electron. 23, 605
(1987) (from memory — verify); C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Medium, Pump
from ampmodel.kernels import beam_shapes
from ampmodel.kernels import pump_rates as pr
from ampmodel.units import photon_energy_J


def pump_absorption_per_m(pump: Pump, medium: Medium) -> float:
    """Small-signal pump absorption coefficient α0 (1/m) of a medium.

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


@dataclass
class PumpModel:
    """A medium's pump on the transverse grid (SI), at its power while it is on.

    flux_in : (Ny, Nx) end: photon flux entering the face z = 0 (photons/(m²·s)); side: the flux
        every voxel sees (uniform along z); 0 outside the clear aperture
    alpha0_per_m : unbleached absorption α0 = σa,p·Nt (1/m); 1.0 as a stand-in where it is unknown
        (side pumping without pump data: flux_in then holds the absorbed rate, without bleaching)
    bleach_m2 : σa,p + σe,p (0 without a bleaching model); create_b_m2 : η·σa,p + σe,p (0 likewise)
    power_W : the pump's power while on (pulsed: energy over duration); delivered_W : into the medium
    """

    geometry: str
    flux_in: np.ndarray
    alpha0_per_m: float
    bleach_m2: float
    create_b_m2: float
    quantum_efficiency: float
    back_reflectance: float
    photon_energy_J: float
    power_W: float
    delivered_W: float
    direction: str = "forward"

    @property
    def side(self) -> bool:
        return self.geometry == "side"

    @property
    def ends(self) -> int:
        """Pumped faces: 2 for a pump entering at both ends (``flux_in`` at each), else 1."""
        return 2 if self.direction == "both" and not self.side else 1

    def missed_W(self, pixel_area_m2: float) -> float:
        """End pumping: the delivered power that falls outside the clear aperture (0 for side pumps)."""
        if self.side:
            return 0.0
        return self.delivered_W - self.ends * float(self.flux_in.sum()) * pixel_area_m2 * self.photon_energy_J


class PumpProfileError(ValueError):
    """A pump whose profile lights no pixel of the medium's clear aperture (bad input)."""


def build_pump(medium: Medium, x_m: np.ndarray, y_m: np.ndarray, mask: np.ndarray) -> PumpModel:
    """The pump of a medium on the transverse grid: its power while on is ``power_W`` (continuous)
    or ``energy_J/duration_s`` (a square pump pulse)."""
    pump, mat = medium.pump, medium.material
    assert pump is not None
    power = pump.power_W if pump.power_W is not None else pump.energy_J / pump.duration_s
    hnu = photon_energy_J(pump.wavelength_m)
    delivered = power * pump.transfer_efficiency
    pixel_area = (x_m[1] - x_m[0]) * (y_m[1] - y_m[0])
    nt = medium.doping_per_m3 or mat.doping_per_m3
    try:
        alpha0 = pump_absorption_per_m(pump, medium)
    except ValueError:
        alpha0 = None
    diameter = pump.diameter_m if pump.diameter_m is not None else medium.diameter_m
    profile = beam_shapes.transverse_profile(x_m, y_m, pump.profile, diameter, pump.order)
    eta = pump.quantum_efficiency
    bleach = create_b = 0.0
    if alpha0 is not None and nt:
        sap = alpha0 / nt
        sep = mat.pump_emission_cross_section_m2 or 0.0
        bleach, create_b = sap + sep, eta * sap + sep
    if not np.any(np.where(mask, profile, 0.0) > 0.0):
        raise PumpProfileError(f"medium {medium.name!r}: the pump's profile covers no pixel of the clear aperture; "
                               f"widen medium.{medium.name}.pump.diameter_mm or make the pixels finer")
    if pump.geometry == "end":
        areal = profile / (profile.sum() * pixel_area)                     # 1/m², whole profile
        ends = 2 if pump.direction == "both" else 1
        flux = np.where(mask, areal, 0.0) * (delivered / ends / hnu)       # entering at each pumped face
    else:
        inside = np.where(mask, profile, 0.0)
        total = inside.sum() * pixel_area
        rate = inside / total * (delivered * pump.absorbed_fraction / hnu / medium.length_m)   # 1/(m³·s)
        flux = rate / (alpha0 if alpha0 is not None else 1.0)
    return PumpModel(geometry=pump.geometry, flux_in=flux, alpha0_per_m=alpha0 if alpha0 is not None else 1.0,
                     bleach_m2=bleach, create_b_m2=create_b, quantum_efficiency=eta,
                     back_reflectance=pump.back_reflectance, photon_energy_J=hnu, power_W=power,
                     delivered_W=delivered, direction=pump.direction)


@dataclass
class PumpField:
    """The pump in a medium for given populations (internal voxel grid).

    mean_flux : (Nz, Ny, Nx) mean photon flux of the pump in each voxel, all its passes summed
    absorbed : (Nz, Ny, Nx) absorbed pump photons per second and per m² of the pixel in each slice
    transmitted_W : pump power leaving the medium (through either face, or missing its aperture)
    """

    mean_flux: np.ndarray
    absorbed: np.ndarray
    transmitted_W: float


def sweep(pump: PumpModel, n2_per_m3: np.ndarray, mask: np.ndarray, dz_m: float, pixel_area_m2: float) -> PumpField:
    """Propagate the pump through a medium whose voxels hold ``n2_per_m3`` (Nz, Ny, Nx).

    End pumping: each slice passes exp(−α·dz), α = α0 − (σa,p + σe,p)·N2 (:func:`kernels.pump_rates.march`).
    Side pumping: the flux is the same in every slice (absorbed α·flux per volume).
    """
    alpha = np.where(mask, pump.alpha0_per_m - pump.bleach_m2 * n2_per_m3, 0.0)
    nz = alpha.shape[0]
    if pump.side:
        mean = np.where(mask, pump.flux_in, 0.0)[None, :, :] * np.ones((nz, 1, 1))
        absorbed = alpha * mean * dz_m
        left = pump.delivered_W - absorbed.sum() * pixel_area_m2 * pump.photon_energy_J
        return PumpField(mean, absorbed, float(left))
    cols = alpha.reshape(nz, -1)
    mean, absorbed, out = pr.march(cols, pump.flux_in.ravel(), dz_m, pump.back_reflectance, pump.direction)
    transmitted = float(out.sum()) * pixel_area_m2 * pump.photon_energy_J + pump.missed_W(pixel_area_m2)
    return PumpField(mean.reshape(alpha.shape), absorbed.reshape(alpha.shape), transmitted)


@dataclass
class PumpedMap:
    """The upper-level density a pump builds, with its bookkeeping (SI).

    n2_per_m3 : (Nz, Ny, Nx) upper-level density (0 outside the clear aperture)
    absorbed : pump energy absorbed (J; a continuous pump: power, W)
    transmitted : pump energy (or power) leaving the medium or missing its aperture
    created, decayed : ions created by the pump and lost by decay over the pump pulse (summed over
        the voxels, per m³ of voxel times the voxel volume is the caller's: here ion counts per m³
        summed, i.e. Σ over voxels); 0 for a continuous pump's steady state
    """

    n2_per_m3: np.ndarray
    absorbed: float
    transmitted: float
    created: float = 0.0
    decayed: float = 0.0


def _columns(model: PumpModel, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct entering fluxes of the aperture's columns and, per column, which one it is (the
    columns with the same flux evolve alike from the same start)."""
    return np.unique(model.flux_in[mask], return_inverse=True)


def pump_pulse(medium: Medium, model: PumpModel, mask: np.ndarray, pixel_area_m2: float) -> PumpedMap:
    """A pump pulse of ``medium.pump.duration_s`` on a medium with no excited ion before it."""
    pump, mat = medium.pump, medium.material
    nz = medium.slices
    dz = medium.length_m / nz
    distinct, which = _columns(model, mask)
    out = pr.pump_interval(np.zeros((nz, distinct.size)), distinct, dz, pump.duration_s, model.alpha0_per_m,
                           model.bleach_m2, model.create_b_m2, model.quantum_efficiency, mat.upper_lifetime_s,
                           model.back_reflectance, side=model.side, direction=model.direction)
    n2 = np.zeros((nz,) + mask.shape)
    n2[:, mask] = out.n2[:, which]
    hnu = model.photon_energy_J
    absorbed = float(out.absorbed[which].sum()) * pixel_area_m2 * hnu
    if model.side:
        transmitted = model.delivered_W * pump.duration_s - absorbed
    else:
        transmitted = (float(out.transmitted[which].sum()) * pixel_area_m2 * hnu
                       + model.missed_W(pixel_area_m2) * pump.duration_s)
    return PumpedMap(n2, absorbed, transmitted, float(out.created[:, which].sum()), float(out.decayed[:, which].sum()))


def pump_steady(medium: Medium, model: PumpModel, mask: np.ndarray, pixel_area_m2: float) -> PumpedMap:
    """The steady state under a continuous pump, without signal (powers, W)."""
    mat = medium.material
    nz = medium.slices
    dz = medium.length_m / nz
    distinct, which = _columns(model, mask)
    n2c, _, absorbed_c, _ = pr.steady_columns(distinct, dz, nz, model.alpha0_per_m, model.bleach_m2,
                                              model.create_b_m2, model.quantum_efficiency, mat.upper_lifetime_s,
                                              model.back_reflectance, side=model.side,
                                              direction=model.direction)
    n2 = np.zeros((nz,) + mask.shape)
    n2[:, mask] = n2c[:, which]
    absorbed = float(absorbed_c[:, which].sum()) * pixel_area_m2 * model.photon_energy_J
    left = model.delivered_W - absorbed
    return PumpedMap(n2, absorbed, left)
