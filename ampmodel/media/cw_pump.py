"""Continuous pumping in cw mode: the pump's propagation through a medium and the steady-state
population of each voxel under pump and signal.

Every voxel (z-slice, y, x) holds one upper-level density N2, used alike for the pump's absorption,
the signal's gain and the spontaneous decay (so the photon balance closes exactly in the discrete
sense). Steady-state rate equation of a voxel (the rate equations of C. R. Giles and E. Desurvire,
J. Lightwave Technol. 9, 271 (1991), specialised to a bulk medium:
rate = σ·I/(h·ν) = σ·Φ, Φ the photon flux in photons/(m²·s)):

    0 = η·σa,p·Φp·N1 − σe,p·Φp·N2 + (σa·N1 − σe·N2)·Φs − N2/τ,    N1 = Nt − N2,

with Φp the pump's and Φs the signal's mean photon flux in the voxel (all passes and directions
summed), η the quantum efficiency. Writing Pa = η·α0·Φp (α0 = σa,p·Nt) and Pb = (η·σa,p + σe,p)·Φp,

    N2 = (Pa + σa·Nt·Φs)/(Pb + (σa + σe)·Φs + 1/τ),

and the gain g = σe·N2 − σa·N1 takes the homogeneous saturation form g = g0/(1 + I/Isat) with a
pump-dependent small-signal gain and saturation intensity (the pump shortens the effective lifetime):

    g0 = ((σe + σa)·Pa − σa·Nt·D0)/D0,   Isat = h·νs·D0/(σe + σa),   D0 = Pb + 1/τ.

The pump is attenuated by α = σa,p·N1 − σe,p·N2 = α0 − (σa,p + σe,p)·N2 (bleaching). End pumping:
Beer–Lambert along z through each voxel with its own α, exp(−α·dz), then an optional second pass
back from a reflector at the far face; the voxel sees the exact mean of the exponential over the
slice. Side pumping: the absorbed small-signal pump rate is spread over the clear aperture with the
transverse profile, uniform along z (as in pulsed mode), and each voxel sees the photon flux that
would give that rate unbleached; bleaching lowers what is absorbed.

Where the ion density is not known (a four-level material given only a pump absorption
coefficient), the ground state is taken as undepleted (N1 ≈ Nt): α = α0, Pb = 0. Where the pump
cross-section is unknown (side pumping of a material without pump absorption data), the absorbed
rate is the given one, without bleaching.

References
----------
C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991) (two-level rate equations with
pump and signal); Beer–Lambert absorption.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Medium
from ampmodel.kernels import beam_shapes
from ampmodel.media.gain_maps import pump_absorption_per_m
from ampmodel.units import photon_energy_J


@dataclass
class CwPump:
    """A continuous pump on a medium's internal voxel grid (SI).

    flux_in : (Ny, Nx) end: photon flux entering the face z = 0 (photons/(m²·s)); side: the flux
        every voxel sees (uniform along z)
    alpha0_per_m : small-signal pump absorption coefficient α0 = σa,p·Nt (1/m); 1.0 as a stand-in
        where it is unknown (side pumping without pump data: flux_in then holds the absorbed rate)
    bleach_m2 : σa,p + σe,p (m²), 0 without a bleaching model
    create_b_m2 : η·σa,p + σe,p (m²), 0 without a bleaching model
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


@dataclass
class PumpField:
    """The pump in a medium after a sweep (internal voxel grid).

    mean_flux : (Nz, Ny, Nx) mean photon flux of the pump in each voxel, all its passes summed
    absorbed : (Nz, Ny, Nx) absorbed pump photons per second and per m² of the pixel in each slice
    transmitted_W : pump power leaving the medium (through either face)
    """

    mean_flux: np.ndarray
    absorbed: np.ndarray
    transmitted_W: float


def _rel_mean(y: np.ndarray) -> np.ndarray:
    """expm1(y)/y, 1 at y = 0: the mean of exp over [0, y] (relative to its start)."""
    out = np.ones_like(y)
    nz = y != 0.0
    out[nz] = np.expm1(y[nz]) / y[nz]
    return out


def build_pump(medium: Medium, x_m: np.ndarray, y_m: np.ndarray, mask: np.ndarray) -> CwPump:
    """The cw pump of a medium on the transverse grid (``medium.pump`` with ``power_W``)."""
    pump, mat = medium.pump, medium.material
    assert pump is not None and pump.power_W is not None
    hnu = photon_energy_J(pump.wavelength_m)
    delivered = pump.power_W * pump.transfer_efficiency
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
    if pump.geometry == "end":
        areal = profile / (profile.sum() * pixel_area)                     # 1/m², whole profile
        flux = np.where(mask, areal, 0.0) * (delivered / hnu)
    else:
        inside = np.where(mask, profile, 0.0)
        total = inside.sum() * pixel_area
        if total <= 0.0:
            raise ValueError(f"medium {medium.name!r}: the pump profile does not reach the clear aperture")
        rate = inside / total * (delivered * pump.absorbed_fraction / hnu / medium.length_m)   # 1/(m³·s)
        flux = rate / (alpha0 if alpha0 is not None else 1.0)
    return CwPump(geometry=pump.geometry, flux_in=flux, alpha0_per_m=alpha0 if alpha0 is not None else 1.0,
                  bleach_m2=bleach, create_b_m2=create_b, quantum_efficiency=eta,
                  back_reflectance=pump.back_reflectance, photon_energy_J=hnu, power_W=pump.power_W,
                  delivered_W=delivered)


def sweep(pump: CwPump, n2_per_m3: np.ndarray, mask: np.ndarray, dz_m: float, pixel_area_m2: float) -> PumpField:
    """Propagate the pump through a medium whose voxels hold ``n2_per_m3`` (Nz, Ny, Nx).

    End pumping: each slice passes exp(−α·dz), α = α0 − (σa,p + σe,p)·N2; the voxel's mean flux
    is the exact mean of the exponential over the slice, so that the absorbed photons equal
    α·mean·dz. Side pumping: the flux is the same in every slice (absorbed α·flux per volume).
    """
    alpha = np.where(mask, pump.alpha0_per_m - pump.bleach_m2 * n2_per_m3, 0.0)
    nz = alpha.shape[0]
    if pump.geometry == "side":
        mean = np.where(mask, pump.flux_in, 0.0)[None, :, :] * np.ones((nz, 1, 1))
        absorbed = alpha * mean * dz_m
        left = pump.delivered_W - absorbed.sum() * pixel_area_m2 * pump.photon_energy_J
        return PumpField(mean, absorbed, float(left))
    mean = np.empty_like(alpha)
    absorbed = np.empty_like(alpha)
    flux = pump.flux_in.copy()
    for k in range(nz):
        y = -alpha[k] * dz_m
        mean[k] = flux * _rel_mean(y)
        out = flux * np.exp(y)
        absorbed[k] = flux - out
        flux = out
    transmitted = flux.sum() * pixel_area_m2
    if pump.back_reflectance > 0.0:
        flux = flux * pump.back_reflectance
        for k in range(nz - 1, -1, -1):
            y = -alpha[k] * dz_m
            mean[k] += flux * _rel_mean(y)
            out = flux * np.exp(y)
            absorbed[k] += flux - out
            flux = out
        transmitted = flux.sum() * pixel_area_m2 + (1.0 - pump.back_reflectance) * transmitted
    # Pump that misses the clear aperture (end pumping) leaves unabsorbed too.
    missed = pump.delivered_W - pump.flux_in.sum() * pixel_area_m2 * pump.photon_energy_J
    return PumpField(mean, absorbed, float(transmitted * pump.photon_energy_J + missed))


@dataclass(frozen=True)
class SignalLevels:
    """The signal transition of a material (SI): σe, σa, τ, h·νs and the ion density (None: unknown)."""

    sigma_e_m2: float
    sigma_a_m2: float
    lifetime_s: float
    photon_energy_J: float
    nt_per_m3: float | None

    @property
    def ground_absorption_per_m(self) -> float:
        """σa·Nt: the signal absorption of a voxel with no excited ions (0 for a four-level material)."""
        return self.sigma_a_m2 * self.nt_per_m3 if self.sigma_a_m2 > 0.0 else 0.0


def small_signal(pump: CwPump, levels: SignalLevels, mean_flux: np.ndarray,
                 mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Small-signal gain g0 (1/m) and saturation intensity Isat (W/m²) of each voxel under the pump.

    g0 = ((σe + σa)·Pa − σa·Nt·D0)/D0 and Isat = h·νs·D0/(σe + σa), D0 = Pb + 1/τ (module docstring).
    Outside the clear aperture there is no medium: g0 = 0.
    """
    sig = levels.sigma_e_m2 + levels.sigma_a_m2
    pa = pump.quantum_efficiency * pump.alpha0_per_m * mean_flux
    d0 = pump.create_b_m2 * mean_flux + 1.0 / levels.lifetime_s
    g0 = (sig * pa - levels.ground_absorption_per_m * d0) / d0
    g0 = np.where(mask, g0, 0.0)
    isat = levels.photon_energy_J * d0 / sig
    return g0, isat


def upper_population(gain_per_m: np.ndarray, levels: SignalLevels) -> np.ndarray:
    """N2 (1/m³) from the gain coefficient: g = (σe + σa)·N2 − σa·Nt."""
    return (gain_per_m + levels.ground_absorption_per_m) / (levels.sigma_e_m2 + levels.sigma_a_m2)
