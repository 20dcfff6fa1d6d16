"""The active ions of a bulk medium: its state is the upper-level density N2 of every voxel.

With the doping Nt and the cross-sections at the material's reference wavelength λ0 (its
``wavelength_nm``), the gain coefficient there is g = σe·N2 − σa·(Nt − N2) = (σe + σa)·N2 − σa·Nt,
and N2 follows back from g. The paths hold the state as g·dz at λ0 (the Frantz–Nodvik kernels'
ln G), which is the same information: N2 is recovered voxel by voxel. Every excited ion is one of
the Nt: 0 <= N2 <= Nt, so the gain at λ0 lies between −σa·Nt and σe·Nt (the ion ceiling). Where the
doping is not known (a four-level material given without it), N2 = g/σe and nothing bounds it.

References
----------
A. E. Siegman, Lasers, University Science Books (1986), chapters on the rate equations and
saturation: g = σe·N2 − σa·N1; quasi-three-level media: T. Y. Fan and R. L. Byer, IEEE J. Quantum
Electron. 23, 605 (1987) (from memory — verify).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Medium
from ampmodel.units import photon_energy_J


@dataclass(frozen=True)
class Ions:
    """The signal transition of a bulk medium at its reference wavelength (SI).

    sigma_e_m2, sigma_a_m2 : emission and absorption cross-sections at λ0 (m²)
    lifetime_s : upper-state lifetime τ; photon_energy_J : h·ν at λ0
    nt_per_m3 : the doping Nt (1/m³), None where it is not known
    """

    sigma_e_m2: float
    sigma_a_m2: float
    lifetime_s: float
    photon_energy_J: float
    nt_per_m3: float | None

    @classmethod
    def of(cls, medium: Medium) -> Ions:
        """The ions of a medium: its material's cross-sections and lifetime, its own doping if given."""
        mat = medium.material
        return cls(mat.emission_cross_section_m2, mat.absorption_cross_section_m2, mat.upper_lifetime_s,
                   mat.photon_energy_J, medium.doping_per_m3 or mat.doping_per_m3)

    @property
    def sum_cross_section_m2(self) -> float:
        return self.sigma_e_m2 + self.sigma_a_m2

    @property
    def ground_absorption_per_m(self) -> float:
        """σa·Nt: the absorption of a voxel with no excited ion (0 for a four-level line)."""
        return self.sigma_a_m2 * self.nt_per_m3 if self.sigma_a_m2 > 0.0 and self.nt_per_m3 else 0.0

    @property
    def max_gain_per_m(self) -> float | None:
        """σe·Nt: the gain coefficient with every ion excited (None where Nt is not known)."""
        return self.sigma_e_m2 * self.nt_per_m3 if self.nt_per_m3 else None

    def gain_per_m(self, n2_per_m3: np.ndarray) -> np.ndarray:
        """g = (σe + σa)·N2 − σa·Nt (1/m) from N2 (1/m³)."""
        return self.sum_cross_section_m2 * np.asarray(n2_per_m3) - self.ground_absorption_per_m

    def n2_per_m3(self, gain_per_m: np.ndarray) -> np.ndarray:
        """N2 (1/m³) from the gain coefficient g (1/m) at λ0."""
        return (np.asarray(gain_per_m) + self.ground_absorption_per_m) / self.sum_cross_section_m2

    def at_wavelength(self, medium: Medium, wavelength_m: float) -> Ions:
        """The same ions seen at another wavelength: the cross-sections there (from the material's
        spectrum) and that photon energy; itself at the material's wavelength."""
        mat = medium.material
        if abs(wavelength_m - mat.wavelength_m) <= 1e-9 * mat.wavelength_m:
            return self
        sigma_e, sigma_a = (float(v) for v in mat.spectrum.at(wavelength_m))
        return Ions(sigma_e, sigma_a, self.lifetime_s, photon_energy_J(wavelength_m), self.nt_per_m3)

    def upper_fraction(self, gain_per_m: np.ndarray) -> np.ndarray | None:
        """N2/Nt from g, or None where Nt is not known."""
        if not self.nt_per_m3:
            return None
        return self.n2_per_m3(gain_per_m) / self.nt_per_m3


@dataclass(frozen=True)
class SliceCrossSections:
    """How each time slice of a pulse meets a medium, against the material's wavelength λ0.

    With the state held as g0 = (σe + σa)_0·N2 − σa0·Nt at λ0, the slice at λ_t sees
    g_t = scale_t·g0 + offset_t and the saturation fluence Fsat_t = Fsat0/ratio_t:

    scale : (Nt,) (σe + σa)_t/(σe + σa)_0 (0 where the ions do not see λ_t)
    offset_per_m : (Nt,) (scale_t·σa0 − σa_t)·Nt (1/m)
    ratio : (Nt,) Fsat0/Fsat_t = scale_t·λ_t/λ0
    outside : (Nt,) bool, λ_t beyond the material's cross-section table (taken as unseen)
    absorption_per_m : (Nt,) σa_t·Nt, the absorption slice t meets where no ion is excited (its lowest
        gain, −σa_t·Nt)
    """

    scale: np.ndarray
    offset_per_m: np.ndarray
    ratio: np.ndarray
    outside: np.ndarray
    absorption_per_m: np.ndarray


def slice_cross_sections(medium: Medium, wavelengths_m: np.ndarray) -> SliceCrossSections | None:
    """The cross-sections each time slice meets (:class:`SliceCrossSections`), from the material's
    spectrum; None when every slice is at the material's wavelength (the plain Frantz–Nodvik pass).
    The config checks made sure that a seed away from λ0 meets a material with a spectrum."""
    mat = medium.material
    wl = np.asarray(wavelengths_m, dtype=float)
    if np.all(np.abs(wl - mat.wavelength_m) <= 1e-9 * mat.wavelength_m):
        return None
    spectrum = mat.spectrum
    lo, hi = spectrum.wavelength_m[0], spectrum.wavelength_m[-1]
    outside = (wl < lo * (1 - 1e-12)) | (wl > hi * (1 + 1e-12))
    sigma_e, sigma_a = spectrum.at(np.clip(wl, lo, hi))
    sigma_e = np.where(outside, 0.0, sigma_e)
    sigma_a = np.where(outside, 0.0, sigma_a)
    ions = Ions.of(medium)
    scale = (sigma_e + sigma_a) / ions.sum_cross_section_m2
    nt = ions.nt_per_m3 or 0.0
    offset = (scale * ions.sigma_a_m2 - sigma_a) * nt
    return SliceCrossSections(scale, offset, scale * wl / mat.wavelength_m, outside, sigma_a * nt)
