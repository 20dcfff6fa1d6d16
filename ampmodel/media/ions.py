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

    def upper_fraction(self, gain_per_m: np.ndarray) -> np.ndarray | None:
        """N2/Nt from g, or None where Nt is not known."""
        if not self.nt_per_m3:
            return None
        return self.n2_per_m3(gain_per_m) / self.nt_per_m3
