"""The media's clocks: their pumping and decay while the steps of a layout take time.

A step may take time (``Step.delay_s``: a ``delay_ns`` in the config, or length/c for a ``space``
step); during it every medium relaxes by the exact solution of dN2/dt = R − N2/tau
(:func:`ampmodel.kernels.inversion.relax_inversion`), with R the medium's pump rate when its pump is
on (a continuous pump always; a pulsed pump only in the pump window of a pulse train) and 0
otherwise. The gain map holds g = (sigma_e + sigma_a)·N2 − sigma_a·Nt, so N2 is recovered from it
voxel by voxel (four-level media: g = sigma_e·N2, no Nt needed) and written back in place. Outside a
medium's clear aperture there is no medium and nothing changes.

"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ampmodel.description import Config
from ampmodel.kernels.inversion import relax_inversion
from ampmodel.media.gain_maps import GainMap
from ampmodel.pulsed.passes import MediumState


@dataclass
class MediumClock:
    """What one medium needs to evolve in time, and what its pump and decay did so far.

    rate_per_m3_s : (Nz, n) pump rate at the n voxels of each slice inside the clear aperture
        (ions/m³/s while the pump is on), or None without a pump
    pumped_J, decayed_J : energy put into and lost from the upper state so far, counted at the
        signal photon energy (h·nu_s per ion, the unit of the stored energy)
    """

    name: str
    mask: np.ndarray
    slice_length_m: float
    voxel_volume_m3: float
    sum_cross_section_m2: float       # sigma_e + sigma_a at the signal
    absorption_offset_per_m: float    # sigma_a·Nt: g = (sigma_e + sigma_a)·N2 − sigma_a·Nt
    lifetime_s: float
    photon_energy_J: float
    rate_per_m3_s: np.ndarray | None = None
    continuous: bool = False
    pump_duration_s: float = 0.0
    n2_max_per_m3: float | None = None
    pumped_J: float = 0.0
    decayed_J: float = 0.0

    def n2(self, ln_gain: np.ndarray) -> np.ndarray:
        """(Nz, n) upper-state density (ions/m³) of the voxels inside the aperture."""
        return (ln_gain[:, self.mask] / self.slice_length_m + self.absorption_offset_per_m) / self.sum_cross_section_m2

    def set_n2(self, ln_gain: np.ndarray, n2: np.ndarray) -> None:
        """Write the density ``n2`` (Nz, n) back into the gain map, in place."""
        ln_gain[:, self.mask] = (self.sum_cross_section_m2 * n2 - self.absorption_offset_per_m) * self.slice_length_m

    def evolve(self, ln_gain: np.ndarray, duration_s: float, pump_on: bool) -> None:
        """Pump (when on) and decay for ``duration_s``: the exact N2(t), in place, with the bookkeeping."""
        if duration_s <= 0.0:
            return
        rate = self.rate_per_m3_s if (pump_on and self.rate_per_m3_s is not None) else 0.0
        n2, pumped, decayed = relax_inversion(self.n2(ln_gain), rate, self.lifetime_s, duration_s,
                                              self.n2_max_per_m3)
        self.set_n2(ln_gain, n2)
        scale = self.photon_energy_J * self.voxel_volume_m3
        self.pumped_J += float(np.sum(pumped)) * scale
        self.decayed_J += float(np.sum(decayed)) * scale


def medium_clocks(config: Config, maps: dict[str, GainMap], pixel_area_m2: float) -> dict[str, MediumClock]:
    """The clock of every medium, from its description and initial gain map."""
    clocks = {}
    for m in config.media:
        gm = maps[m.name]
        mat = m.material
        nt = m.doping_per_m3 or mat.doping_per_m3 or 0.0
        rate = gm.pump_rate_per_m3_s[:, gm.mask] if gm.pump_rate_per_m3_s is not None else None
        clocks[m.name] = MediumClock(
            name=m.name, mask=gm.mask, slice_length_m=gm.slice_length_m,
            voxel_volume_m3=gm.slice_length_m * pixel_area_m2,
            sum_cross_section_m2=mat.emission_cross_section_m2 + mat.absorption_cross_section_m2,
            absorption_offset_per_m=mat.absorption_cross_section_m2 * nt, lifetime_s=mat.upper_lifetime_s,
            photon_energy_J=mat.photon_energy_J, rate_per_m3_s=rate,
            continuous=m.pump is not None and m.pump.continuous,
            pump_duration_s=(m.pump.duration_s or 0.0) if m.pump is not None else 0.0,
            n2_max_per_m3=gm.n2_max_per_m3 if mat.quasi_three_level else None)
    return clocks


@dataclass
class Timeline:
    """The time since the seed entered the layout, and the clocks of the media."""

    clocks: dict[str, MediumClock]
    elapsed_s: float = 0.0

    def wait(self, states: dict[str, MediumState], duration_s: float, pulsed_pumps_on: bool = False) -> None:
        """Let ``duration_s`` pass for every medium: continuous pumps on, pulsed pumps only when
        ``pulsed_pumps_on`` (the pump window before a pulse of a train)."""
        if duration_s <= 0.0:
            return
        for name, clock in self.clocks.items():
            clock.evolve(states[name].ln_gain, duration_s, clock.continuous or pulsed_pumps_on)
        self.elapsed_s += duration_s

    def totals(self) -> tuple[float, float]:
        """(pumped, decayed) energy of all media so far (J, at the signal photon energy)."""
        return (sum(c.pumped_J for c in self.clocks.values()), sum(c.decayed_J for c in self.clocks.values()))

    def reset(self) -> None:
        """Start a new pulse: time and bookkeeping from zero."""
        self.elapsed_s = 0.0
        for c in self.clocks.values():
            c.pumped_J = c.decayed_J = 0.0


def unseeded_n2(c: MediumClock, period_s: float) -> np.ndarray:
    """(Nz, n) N2 before a pulse of a train pumped long before it without a seed (ions/m³); the
    medium needs a pump."""
    tau = c.lifetime_s
    if c.continuous:
        n2 = c.rate_per_m3_s * tau
    else:
        # pump pulse tp then decay for T − tp, periodic: N = R·tau·(1 − exp(−tp/tau))/(1 − exp(−T/tau))
        n2 = c.rate_per_m3_s * tau * (-math.expm1(-c.pump_duration_s / tau)) / (-math.expm1(-period_s / tau))
    return np.minimum(n2, c.n2_max_per_m3) if c.n2_max_per_m3 is not None else n2
