"""The media's clocks: their pumping and decay while the steps of a layout take time.

A step may take time (``Step.delay_s``: a ``delay_ns`` in the config, or length/c for a ``space``
step); during it every medium's upper-level density evolves by the rate equations: with its pump on
(a continuous pump always; a pulsed pump only in the pump window of a pulse train) the pump crosses
the medium and bleaches it (``kernels/pump_rates.py``: the same model that built the gain map), and
with it off N2 decays exactly, N2(t) = N2(0)·exp(−t/τ). The gain map holds g = (σe + σa)·N2 − σa·Nt
at the material's wavelength, so N2 is recovered from it voxel by voxel (``media/ions.py``) and
written back in place. Outside a medium's clear aperture there is no medium and nothing changes.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ampmodel.description import Config
from ampmodel.kernels import pump_rates as pr
from ampmodel.kernels.fixed_point import anderson
from ampmodel.kernels.inversion import relax_inversion
from ampmodel.media.gain_maps import GainMap
from ampmodel.media.ions import Ions
from ampmodel.media.pumping import PumpModel
from ampmodel.pulsed.passes import MediumState

# The periodic state of a train pumped before its first pulse: to this relative change per period.
UNSEEDED_TOLERANCE = 1e-12
UNSEEDED_MAX_PERIODS = 400


@dataclass
class MediumClock:
    """What one medium needs to evolve in time, and what its pump and decay did so far.

    ions : the medium's ions; pump : its pump on the grid (None without one)
    rate_per_m3_s : (Nz, n) the small-signal pump rate at the n voxels of each slice inside the clear
        aperture (ions/m³/s, unbleached; for estimates), or None without a pump
    pumped_J, decayed_J : energy put into and lost from the upper state so far, counted at the
        signal photon energy (h·nu_s per ion, the unit of the stored energy)
    absorbed_pump_J, heat_J_m3 : the pump energy absorbed so far, and the heat it left in each voxel
        inside the aperture: h·νp·(photons absorbed) − h·νs·(ions created) (the quantum defect of
        every ion created, whether it is later extracted or decays, and the whole photon where
        η < 1: ``cw/thermal.py`` gives the same per voxel in the steady state)
    """

    name: str
    mask: np.ndarray
    slice_length_m: float
    voxel_volume_m3: float
    ions: Ions
    pump: PumpModel | None = None
    rate_per_m3_s: np.ndarray | None = None
    continuous: bool = False
    pump_duration_s: float = 0.0
    pumped_J: float = 0.0
    decayed_J: float = 0.0
    absorbed_pump_J: float = 0.0
    heat_J_m3: np.ndarray | None = None      # (Nz, n) heat left in each voxel so far (J/m³)

    @property
    def sum_cross_section_m2(self) -> float:
        """σe + σa at the signal: g = (σe + σa)·N2 − σa·Nt."""
        return self.ions.sum_cross_section_m2

    @property
    def absorption_offset_per_m(self) -> float:
        """σa·Nt (0 for a four-level line)."""
        return self.ions.ground_absorption_per_m

    @property
    def lifetime_s(self) -> float:
        return self.ions.lifetime_s

    @property
    def photon_energy_J(self) -> float:
        return self.ions.photon_energy_J

    @property
    def n2_max_per_m3(self) -> float | None:
        """The doping: no voxel holds more excited ions (None where it is not known)."""
        return self.ions.nt_per_m3

    def n2(self, ln_gain: np.ndarray) -> np.ndarray:
        """(Nz, n) upper-state density (ions/m³) of the voxels inside the aperture."""
        return (ln_gain[:, self.mask] / self.slice_length_m + self.absorption_offset_per_m) / self.sum_cross_section_m2

    def set_n2(self, ln_gain: np.ndarray, n2: np.ndarray) -> None:
        """Write the density ``n2`` (Nz, n) back into the gain map, in place."""
        ln_gain[:, self.mask] = (self.sum_cross_section_m2 * n2 - self.absorption_offset_per_m) * self.slice_length_m

    def advance(self, n2: np.ndarray, duration_s: float, pump_on: bool) -> tuple[np.ndarray, float, float]:
        """N2 (Nz, n) after ``duration_s`` with the pump on or off: (N2, ions created, ions decayed),
        the ion counts summed over the voxels per m³ (times the voxel volume: ions)."""
        if pump_on and self.pump is not None:
            p = self.pump
            out = pr.pump_interval(n2, p.flux_in[self.mask], self.slice_length_m, duration_s, p.alpha0_per_m,
                                   p.bleach_m2, p.create_b_m2, p.quantum_efficiency, self.lifetime_s,
                                   p.back_reflectance, side=p.side, direction=p.direction)
            return out.n2, float(out.created.sum()), float(out.decayed.sum())
        end, pumped, decayed = relax_inversion(n2, 0.0, self.lifetime_s, duration_s)
        return end, float(np.sum(pumped)), float(np.sum(decayed))

    def evolve(self, ln_gain: np.ndarray, duration_s: float, pump_on: bool) -> None:
        """Pump (when on) and decay for ``duration_s``, in place, with the bookkeeping."""
        if duration_s <= 0.0:
            return
        if pump_on and self.pump is not None:
            p = self.pump
            out = pr.pump_interval(self.n2(ln_gain), p.flux_in[self.mask], self.slice_length_m, duration_s,
                                   p.alpha0_per_m, p.bleach_m2, p.create_b_m2, p.quantum_efficiency,
                                   self.lifetime_s, p.back_reflectance, side=p.side, direction=p.direction)
            n2, created, decayed = out.n2, float(out.created.sum()), float(out.decayed.sum())
            heat = p.photon_energy_J * out.absorbed_voxels / self.slice_length_m - self.photon_energy_J * out.created
            self.heat_J_m3 = heat if self.heat_J_m3 is None else self.heat_J_m3 + heat
            self.absorbed_pump_J += float(out.absorbed.sum()) * p.photon_energy_J * self.voxel_volume_m3 \
                / self.slice_length_m
        else:
            n2, created, decayed = self.advance(self.n2(ln_gain), duration_s, pump_on)
        self.set_n2(ln_gain, n2)
        scale = self.photon_energy_J * self.voxel_volume_m3
        self.pumped_J += created * scale
        self.decayed_J += decayed * scale


def medium_clocks(config: Config, maps: dict[str, GainMap], pixel_area_m2: float) -> dict[str, MediumClock]:
    """The clock of every medium, from its description and initial gain map."""
    clocks = {}
    for m in config.media:
        gm = maps[m.name]
        rate = gm.pump_rate_per_m3_s[:, gm.mask] if gm.pump_rate_per_m3_s is not None else None
        clocks[m.name] = MediumClock(
            name=m.name, mask=gm.mask, slice_length_m=gm.slice_length_m,
            voxel_volume_m3=gm.slice_length_m * pixel_area_m2, ions=gm.ions or Ions.of(m), pump=gm.pump,
            rate_per_m3_s=rate, continuous=m.pump is not None and m.pump.continuous,
            pump_duration_s=(m.pump.duration_s or 0.0) if m.pump is not None else 0.0)
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
            c.pumped_J = c.decayed_J = c.absorbed_pump_J = 0.0
            c.heat_J_m3 = None


def unseeded_n2(c: MediumClock, period_s: float) -> np.ndarray:
    """(Nz, n) N2 before a pulse of a train pumped long before it without a seed (ions/m³); the
    medium needs a pump. A continuous pump: its steady state. A pulsed pump: the periodic state of its
    pump pulse (at the end of the period) and the decay until the next, by Anderson acceleration from
    the estimate without bleaching."""
    p, tau = c.pump, c.lifetime_s
    nz, n = c.rate_per_m3_s.shape
    if c.continuous:
        n2, _, _, _ = pr.steady_columns(p.flux_in[c.mask], c.slice_length_m, nz, p.alpha0_per_m, p.bleach_m2,
                                        p.create_b_m2, p.quantum_efficiency, tau, p.back_reflectance, side=p.side,
                                        direction=p.direction)
        return n2
    # the estimate without bleaching: N = R·tau·(1 − exp(−tp/tau))/(1 − exp(−T/tau))
    guess = c.rate_per_m3_s * tau * (-math.expm1(-c.pump_duration_s / tau)) / (-math.expm1(-period_s / tau))
    if c.n2_max_per_m3 is not None:
        guess = np.minimum(guess, c.n2_max_per_m3)
    if p.bleach_m2 <= 0.0:
        return guess
    rest = period_s - c.pump_duration_s
    scale = max(float(guess.max()), 1e-300)

    def period(u: np.ndarray) -> np.ndarray:
        n2 = u.reshape(nz, n) * scale
        n2 = relax_inversion(n2, 0.0, tau, rest)[0]
        n2 = c.advance(n2, c.pump_duration_s, pump_on=True)[0]
        return (n2 / scale).ravel()

    u, _, _ = anderson(period, (guess / scale).ravel(), UNSEEDED_TOLERANCE, UNSEEDED_MAX_PERIODS)
    return u.reshape(nz, n) * scale
