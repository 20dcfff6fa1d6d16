"""A doped fibre as the solvers see it: its channels (signal, noise probe, pumps, ASE bins), rings and
overlaps.

A fibre of length L is cut into ``slices`` slices of length h; in each slice every ring has one
upper-state fraction n2, set by the slice-mean powers of all channels (kernels/fibre_rates.py).
Through a slice of uniform populations each channel's power is propagated exactly (exponential with a
spontaneous source), so the scheme is stable however strongly a channel is absorbed or amplified per
slice, and it conserves photons exactly slice by slice; the discretisation error is that of the
populations being uniform within a slice (second order in h).

The steady state of these equations is solved in ``steady_state.py``, pulses in ``pulsed.py``.

References
----------
C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991): rate and propagation equations.
D. Marcuse, Bell Syst. Tech. J. 56, 703 (1977): the Gaussian mode-field radius (fibre_modes.py).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ampmodel.description import Medium
from ampmodel.kernels import fibre_modes as fm
from ampmodel.kernels import fibre_rates as fr
from ampmodel.units import LIGHT_SPEED_M_S, PLANCK_J_S

PROBE_BANDWIDTH_HZ = 1e9
"""Bandwidth of the noise probe at the signal wavelength (the noise figure does not depend on it)."""
"""The relaxation hands over to Newton's method once its change is below this."""


@dataclass
class FibreModel:
    """One fibre as the solver sees it: its channels (K) and rings (R), every array SI.

    Channel order: signal, noise probe, forward pump, backward pump (where pumped that way), forward
    ASE bins, backward ASE bins. The probe is a forward channel at the signal wavelength that carries
    the spontaneous emission the signal meets (for the noise figure) but does not act on the
    populations (``feeds`` False).
    """

    name: str
    length_m: float
    slices: int
    lifetime_s: float
    ring_edges_m: np.ndarray          # (R + 1,)
    ring_area_m2: np.ndarray          # (R,)
    doping_per_m3: np.ndarray         # (R,)
    wavelength_m: np.ndarray          # (K,)
    sigma_e_m2: np.ndarray            # (K,)
    sigma_a_m2: np.ndarray            # (K,)
    overlap: np.ndarray               # (K, R)
    direction: np.ndarray             # (K,) +1 / −1
    bandwidth_Hz: np.ndarray          # (K,) ASE bins and probe; 0 for signal and pump
    loss_per_m: np.ndarray            # (K,)
    feeds: np.ndarray                 # (K,) bool
    launch_W: np.ndarray              # (K,) power launched at the channel's entry end (signal: 0 here)
    labels: list[str]
    signal: int = 0
    probe: int = 1
    pump_forward: int | None = None
    pump_backward: int | None = None
    ase_forward: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    ase_backward: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    ase_bin_edges_m: np.ndarray = field(default_factory=lambda: np.zeros(0))
    mode_radius_m: float = 0.0        # of the signal
    v_number: float | None = None     # of the signal (None when the mode-field diameter is given)
    core_radius_m: float = 0.0
    cladding_radius_m: float | None = None

    def __post_init__(self) -> None:
        self.photon_energy_J = PLANCK_J_S * LIGHT_SPEED_M_S / self.wavelength_m
        self.rate_up, self.rate_total = fr.transition_rates(
            self.overlap, self.sigma_e_m2, self.sigma_a_m2, self.photon_energy_J, self.ring_area_m2, self.feeds)
        weighted = self.overlap * self.doping_per_m3[None, :]
        self.gain_weight = (self.sigma_e_m2 + self.sigma_a_m2)[:, None] * weighted      # (K, R) 1/m
        self.absorption_per_m = self.sigma_a_m2 * weighted.sum(axis=1)                 # (K,) Γσa·Nt
        self.source_weight = (2.0 * self.photon_energy_J * self.bandwidth_Hz * self.sigma_e_m2)[:, None] * weighted

    @property
    def slice_length_m(self) -> float:
        return self.length_m / self.slices

    @property
    def rings(self) -> int:
        return self.ring_area_m2.size

    @property
    def doped_area_m2(self) -> float:
        return float(self.ring_area_m2.sum())

    def growth(self, n2: np.ndarray, channels: np.ndarray | slice = slice(None)) -> np.ndarray:
        """a = g − l (1/m) of the given channels for populations n2 (R,) or (R, Nz)."""
        g = np.tensordot(self.gain_weight[channels], n2, axes=(1, 0))
        shape = (-1,) + (1,) * (np.ndim(n2) - 1)
        return g - (self.absorption_per_m[channels] + self.loss_per_m[channels]).reshape(shape)

    def source(self, n2: np.ndarray, channels: np.ndarray | slice = slice(None)) -> np.ndarray:
        """Spontaneous emission into the given channels (W/m) for populations n2."""
        return np.tensordot(self.source_weight[channels], n2, axes=(1, 0))

    def signal_gain_dB(self, n2: np.ndarray) -> float:
        """Small-signal gain of the signal through the whole fibre for populations n2 (R, Nz), in dB
        (10·log10 e · Σ (g − l)·h)."""
        return float(10.0 / np.log(10.0) * np.sum(self.growth(n2, [self.signal])) * self.slice_length_m)

    def modal_saturation_energy_J(self, channel: int = 0) -> float:
        """Saturation energy of the overlap model, hν·A/(Γ·(σe + σa)), Γ the channel's overlap with the
        whole doped core (J)."""
        k = channel
        return float(self.photon_energy_J[k] * self.doped_area_m2
                     / (self.overlap[k].sum() * (self.sigma_e_m2[k] + self.sigma_a_m2[k])))

    def saturation_energy_J(self, channel: int = 0) -> np.ndarray:
        """(R,) saturation energy hν·A_j/(Γ_kj·(σe + σa)) of each ring for a pulse in channel k
        (inf for a ring the channel does not reach)."""
        with np.errstate(divide="ignore"):
            return (self.photon_energy_J[channel] * self.ring_area_m2
                    / (self.overlap[channel] * (self.sigma_e_m2[channel] + self.sigma_a_m2[channel])))


def _pump_overlaps(medium: Medium, edges: np.ndarray, wavelength_m: float) -> np.ndarray:
    fib = medium.fibre
    a = fib.core_diameter_m / 2
    if fib.pump.cladding:
        ov = fm.uniform_ring_overlaps(edges, fib.cladding_diameter_m / 2)
    else:
        w = float(fm.mode_radius(a, wavelength_m, fib.core_na, fib.mode_field_diameter_m))
        ov = np.atleast_1d(fm.gaussian_ring_overlaps(edges, w))
    if fib.pump_overlap is not None:
        ov = ov * (fib.pump_overlap / ov.sum())
    return ov


def build_model(medium: Medium, signal_wavelength_m: float, ase: bool | None = None,
                pumped: bool = True) -> FibreModel:
    """The channels and rings of a fibre medium for a signal at ``signal_wavelength_m``.

    Parameters
    ----------
    medium : a Medium with ``kind == "fibre"``
    signal_wavelength_m : the seed's wavelength (m), inside the material's cross-section table
    ase : include the ASE bins (default: the medium's ``fibre.ase``)
    pumped : False leaves the pump out (an unpumped fibre)
    """
    fib, mat = medium.fibre, medium.material
    a = fib.core_diameter_m / 2
    edges = fm.ring_edges(a, fib.rings)
    areas = fm.ring_areas(edges)
    nt = medium.doping_per_m3 if medium.doping_per_m3 is not None else mat.doping_per_m3
    doping = np.full(fib.rings, float(nt))

    def sections(wl):
        return mat.cross_sections_m2(wl)

    def core_overlaps(wl):
        w = fm.mode_radius(a, wl, fib.core_na, fib.mode_field_diameter_m)
        ov = np.atleast_2d(fm.gaussian_ring_overlaps(edges, np.atleast_1d(w)))
        if fib.signal_overlap is not None:
            ov = ov * (fib.signal_overlap / ov.sum(axis=1, keepdims=True))
        return ov

    rows = []   # (label, wavelength, sigma_e, sigma_a, overlap row, direction, bandwidth, feeds, launch)
    se, sa = sections(signal_wavelength_m)
    ov_s = core_overlaps(signal_wavelength_m)[0]
    rows.append(("signal", signal_wavelength_m, se, sa, ov_s, 1, 0.0, True, 0.0))
    rows.append(("noise probe", signal_wavelength_m, se, sa, ov_s, 1, PROBE_BANDWIDTH_HZ, False, 0.0))
    pump = fib.pump if pumped else None
    if pump is not None:
        if mat.spectrum is not None:
            pe, pa = sections(pump.wavelength_m)
        else:
            pe, pa = mat.pump_emission_cross_section_m2 or 0.0, mat.pump_absorption_cross_section_m2
        ov_p = _pump_overlaps(medium, edges, pump.wavelength_m)
        if pump.direction in ("forward", "both"):
            rows.append(("pump forward", pump.wavelength_m, pe, pa, ov_p, 1, 0.0, True, pump.power_W))
        if pump.direction in ("backward", "both"):
            rows.append(("pump backward", pump.wavelength_m, pe, pa, ov_p, -1, 0.0, True, pump.power_W))
    use_ase = fib.ase if ase is None else ase
    bin_edges = np.zeros(0)
    if use_ase:
        lo, hi = fib.ase_band_m if fib.ase_band_m is not None else default_ase_band(mat.spectrum)
        bin_edges = np.linspace(lo, hi, fib.ase_bins + 1)
        centres = 0.5 * (bin_edges[1:] + bin_edges[:-1])
        widths_Hz = LIGHT_SPEED_M_S / bin_edges[:-1] - LIGHT_SPEED_M_S / bin_edges[1:]
        be, ba = sections(centres)
        ov_b = core_overlaps(centres)
        for direction, name in ((1, "ASE forward"), (-1, "ASE backward")):
            for i, wl in enumerate(centres):
                rows.append((f"{name} {wl * 1e9:.2f} nm", wl, be[i], ba[i], ov_b[i], direction, widths_Hz[i],
                             True, 0.0))
    labels = [r[0] for r in rows]
    col = lambda i, dtype=float: np.array([r[i] for r in rows], dtype=dtype)  # noqa: E731
    model = FibreModel(
        name=medium.name, length_m=medium.length_m, slices=medium.slices, lifetime_s=mat.upper_lifetime_s,
        ring_edges_m=edges, ring_area_m2=areas, doping_per_m3=doping, wavelength_m=col(1),
        sigma_e_m2=col(2), sigma_a_m2=col(3), overlap=np.array([r[4] for r in rows], dtype=float),
        direction=col(5, int), bandwidth_Hz=col(6), loss_per_m=np.full(len(rows), medium.loss_per_m),
        feeds=col(7, bool), launch_W=col(8), labels=labels,
        pump_forward=labels.index("pump forward") if "pump forward" in labels else None,
        pump_backward=labels.index("pump backward") if "pump backward" in labels else None,
        ase_forward=np.array([i for i, n in enumerate(labels) if n.startswith("ASE forward")], dtype=int),
        ase_backward=np.array([i for i, n in enumerate(labels) if n.startswith("ASE backward")], dtype=int),
        ase_bin_edges_m=bin_edges,
        mode_radius_m=float(fm.mode_radius(a, signal_wavelength_m, fib.core_na, fib.mode_field_diameter_m)),
        v_number=(float(fm.v_number(a, fib.core_na, signal_wavelength_m))
                  if fib.core_na is not None and fib.mode_field_diameter_m is None else None),
        core_radius_m=a,
        cladding_radius_m=fib.cladding_diameter_m / 2 if fib.cladding_diameter_m else None)
    return model


def default_ase_band(spectrum) -> tuple[float, float]:
    """The ASE band when none is given: where the emission cross-section is at least 1 % of its peak,
    within the material's table (m)."""
    wl = np.asarray(spectrum.wavelength_m)
    em = np.asarray(spectrum.emission_m2)
    inside = np.flatnonzero(em >= 0.01 * em.max())
    return float(wl[inside[0]]), float(wl[inside[-1]])


# ----------------------------------------------------------------------------------------------
# Figures of a steady state
# ----------------------------------------------------------------------------------------------


