"""Builders and reference solutions shared by the fibre physics tests (imported as ``fibre_reference``).

The fibre media are built directly from the dataclasses of ``ampmodel.description``, with a material
whose cross-section spectrum is given here (round numbers in the range of Yb-doped silica), so that
these tests depend only on the fibre solver. The reference formulas are written out independently of
the code under test.

References
----------
A. A. M. Saleh, R. M. Jopson, J. D. Evankow, J. Aspell, "Modeling of gain in erbium-doped fiber
amplifiers", IEEE Photon. Technol. Lett. 2, 714 (1990): without ASE and background loss, every beam k
obeys Φ_k,out = Φ_k,in·exp(−α_k·L + (Φ_in,tot − Φ_out,tot)/Φ_k,IS), α_k = Γ_k·σa,k·Nt,
Φ_k,IS = A/(Γ_k·(σe,k + σa,k)·τ), whatever the direction of each beam.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK
from scipy.optimize import brentq

from ampmodel.description import Fibre, FibrePump, Medium
from ampmodel.materials.material import Material, Spectrum

# A Yb-like spectrum (nm, cm²): absorption peak at 976 nm, emission band 1000-1100 nm.
TABLE_NM = [900.0, 940.0, 960.0, 976.0, 990.0, 1000.0, 1020.0, 1030.0, 1040.0, 1060.0, 1080.0, 1100.0]
EMISSION_CM2 = [0.0, 5e-22, 2e-21, 2.5e-20, 7e-21, 5e-21, 6e-21, 6e-21, 5e-21, 3e-21, 1.7e-21, 9e-22]
ABSORPTION_CM2 = [3e-21, 3.5e-21, 4.5e-21, 2.5e-20, 3e-21, 1.4e-21, 7e-22, 4e-22, 2e-22, 5e-23, 1.3e-23, 3e-24]


def make_material(lifetime_s: float = 0.9e-3, wavelength_m: float = 1030e-9) -> Material:
    spectrum = Spectrum(wavelength_m=tuple(v * 1e-9 for v in TABLE_NM),
                        emission_m2=tuple(v * 1e-4 for v in EMISSION_CM2),
                        absorption_m2=tuple(v * 1e-4 for v in ABSORPTION_CM2), source="test table")
    se, sa = spectrum.at(wavelength_m)
    pe, pa = spectrum.at(976e-9)
    return Material(name="test Yb fibre", wavelength_m=wavelength_m, emission_cross_section_m2=float(se),
                    absorption_cross_section_m2=float(sa), upper_lifetime_s=lifetime_s, refractive_index=1.45,
                    n2_m2_W=2.6e-20, pump_wavelength_m=976e-9, pump_absorption_cross_section_m2=float(pa),
                    pump_emission_cross_section_m2=float(pe), spectrum=spectrum, doping_per_m3=6e25,
                    raman_gain_m_W=1e-13)


def make_fibre(name: str = "f1", length_m: float = 3.0, slices: int = 100, pump_W: float | None = 5.0,
               direction: str = "forward", cladding: bool = True, ase: bool = False, ase_bins: int = 8,
               ase_band_m: tuple[float, float] | None = (1000e-9, 1100e-9), rings: int = 1,
               loss_per_m: float = 0.0, doping_per_m3: float = 6e25, core_diameter_m: float = 10e-6,
               cladding_diameter_m: float = 125e-6, core_na: float | None = 0.07,
               mode_field_diameter_m: float | None = None, signal_overlap: float | None = None,
               pump_overlap: float | None = None, material: Material | None = None,
               pump_wavelength_m: float = 976e-9) -> Medium:
    pump = None if pump_W is None else FibrePump(wavelength_m=pump_wavelength_m, power_W=pump_W,
                                                 direction=direction, cladding=cladding)
    fib = Fibre(core_diameter_m=core_diameter_m, cladding_diameter_m=cladding_diameter_m, core_na=core_na,
                mode_field_diameter_m=mode_field_diameter_m, ase=ase, ase_band_m=ase_band_m, ase_bins=ase_bins,
                signal_overlap=signal_overlap, pump_overlap=pump_overlap, rings=rings, pump=pump)
    return Medium(name=name, material=material or make_material(), length_m=length_m, diameter_m=core_diameter_m,
                  slices=slices, loss_per_m=loss_per_m, doping_per_m3=doping_per_m3, kind="fibre", fibre=fib)


def photon_energy(wavelength_m: float) -> float:
    return PLANCK * LIGHT_SPEED / wavelength_m


def saleh_outputs(beams: list[dict], area_m2: float, doping_per_m3: float, lifetime_s: float,
                  length_m: float) -> list[float]:
    """Output powers of the beams (W) by Saleh et al. (1990).

    Each beam: {"power_W", "wavelength_m", "overlap", "sigma_e", "sigma_a"} (cross-sections in m²).
    The total output photon flux solves Φ_out,tot = Σ_k Φ_k,in·exp(−α_k·L + (Φ_in,tot − Φ_out,tot)/Φ_k,IS),
    found with scipy.optimize.brentq.
    """
    q = np.array([photon_energy(b["wavelength_m"]) for b in beams])
    phi_in = np.array([b["power_W"] for b in beams]) / q
    gam = np.array([b["overlap"] for b in beams])
    se = np.array([b["sigma_e"] for b in beams])
    sa = np.array([b["sigma_a"] for b in beams])
    alpha = gam * sa * doping_per_m3
    phi_is = area_m2 / (gam * (se + sa) * lifetime_s)
    total_in = phi_in.sum()

    def each(total_out):
        return phi_in * np.exp(-alpha * length_m + (total_in - total_out) / phi_is)

    total_out = brentq(lambda t: each(t).sum() - t, 0.0, total_in, xtol=1e-30, rtol=1e-15, maxiter=500)
    return list(each(total_out) * q)


def marcuse_w_over_a(v: float) -> float:
    """Marcuse (1977): w/a = 0.65 + 1.619·V^−1.5 + 2.879·V^−6."""
    return 0.65 + 1.619 * v ** -1.5 + 2.879 * v ** -6


def core_fraction(core_radius_m: float, mode_radius_m: float) -> float:
    return 1.0 - math.exp(-2.0 * core_radius_m ** 2 / mode_radius_m ** 2)
