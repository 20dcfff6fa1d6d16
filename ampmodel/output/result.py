"""The Result of a run: data only (arrays in SI, the summary dict, the config it ran).

The paths (pulsed, cw, fibre) build it; :mod:`ampmodel.output.save` writes it (result.h5 by
:mod:`ampmodel.output.hdf5`, summary.json) and :mod:`ampmodel.plots` draws it.
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ampmodel.description import Config


@dataclass
class StepRecord:
    """The beam after one step.

    pulsed: fluence_J_m2 (Ny, Nx) fluence after the step; power_W (Nt,) mean power in each time slice
    after the step; b_integral_rad (Ny, Nx) largest accumulated B-integral over the time slices.
    cw: intensity_W_m2 (Ny, Nx) after the step; for passes, axis_intensity_W_m2 (Nz + 1,) the on-axis
    intensity at the medium's slice faces, at positions axis_z_m (m, from the face z = 0).
    datasets : more datasets of the step (pulsed), name -> (array, units), e.g. a repeat's energy
    after each round trip
    """

    index: int
    kind: str
    medium: str | None
    fluence_J_m2: np.ndarray | None = None
    power_W: np.ndarray | None = None
    b_integral_rad: np.ndarray | None = None
    intensity_W_m2: np.ndarray | None = None
    axis_z_m: np.ndarray | None = None
    axis_intensity_W_m2: np.ndarray | None = None
    datasets: dict[str, tuple[np.ndarray, str]] = field(default_factory=dict)


@dataclass
class FibreRecord:
    """A fibre along its length (SI; z from the end where the signal enters).

    z_m : (Nz + 1,) slice boundaries; ring_edges_m : (R + 1,) radii of the rings of the doped core
    cw: signal_W (Nz + 1,) the signal; pump_forward_W, pump_backward_W (Nz + 1,) or None; ase_forward_W,
    ase_backward_W (B, Nz + 1) the ASE in each spectral bin; inversion (R, Nz) N2/Nt of each ring and
    slice; inversion_pump_only (R, Nz) with the pump alone (no signal; ASE as configured).
    pulsed: pulse_energy_J (Nz + 1,); the pump and ASE just before a pulse; inversion (R, Nz) just before
    and inversion_after (R, Nz) just after a pulse; output_power_W (Nt,) the pulse leaving the fibre;
    recovery_t_s, recovery_mean_inversion the fibre-averaged N2/Nt over the period after a pulse.
    modal_gain_per_m : (Nz,) the signal's net gain coefficient Γ·(σe·N2 − σa·N1) − loss
    ase_wavelength_m, ase_bin_width_m : (B,) the ASE bins; attrs : scalars (mode-field radius, overlaps,
    saturation energy, solver figures)
    """

    name: str
    mode: str
    z_m: np.ndarray
    ring_edges_m: np.ndarray
    ase_wavelength_m: np.ndarray
    ase_bin_width_m: np.ndarray
    ase_forward_W: np.ndarray
    ase_backward_W: np.ndarray
    inversion: np.ndarray
    modal_gain_per_m: np.ndarray
    attrs: dict[str, Any] = field(default_factory=dict)
    signal_W: np.ndarray | None = None
    pulse_energy_J: np.ndarray | None = None
    pump_forward_W: np.ndarray | None = None
    pump_backward_W: np.ndarray | None = None
    inversion_pump_only: np.ndarray | None = None
    inversion_after: np.ndarray | None = None
    output_power_W: np.ndarray | None = None
    recovery_t_s: np.ndarray | None = None
    recovery_mean_inversion: np.ndarray | None = None


@dataclass
class MediumRecord:
    """A medium's gain coefficient before the first and after the last pass.

    gain_initial_per_m, gain_final_per_m : (Nz, Ny, Nx), g = sigma_e·N2 − sigma_a·N1 in 1/m
    (cw: the small-signal gain with the pump alone, and the saturated gain of the steady state)
    pump_intensity_W_m2 : cw with a pump: (Nz, Ny, Nx) mean pump intensity in each voxel (W/m²)
    """

    name: str
    gain_initial_per_m: np.ndarray
    gain_final_per_m: np.ndarray
    slice_length_m: float
    saturation_fluence_J_m2: float
    saturation_intensity_W_m2: float
    material: str
    sources: dict[str, str] = field(default_factory=dict)
    pump_intensity_W_m2: np.ndarray | None = None
    pumped_J: float = 0.0             # put into the upper state by the pump during the layout (h·nu_s per ion)
    decayed_J: float = 0.0            # lost by spontaneous decay during the layout
    # g = (σe + σa)·N2 − σa·Nt at the wavelength of the gain maps: N2/Nt follows from g (None: Nt unknown)
    ions: Any = None
    mask: np.ndarray | None = None     # (Ny, Nx) the clear aperture (outside it there is no medium)
    heat_W_m3: np.ndarray | None = None           # (Nz, Ny, Nx) heat density (cw with a pump)
    temperature_rise_K: np.ndarray | None = None  # (Nz, Ny, Nx) above the coolant (with thermal data)
    opd_m: np.ndarray | None = None               # (Ny, Nx) thermal optical path difference of one trip


@dataclass
class Result:
    """Everything a run produced.

    x_m, y_m : (Nx,), (Ny,) pixel centres; t_s : (Nt,) time-slice centres (cw: empty)
    seed_fluence_J_m2 : (Ny, Nx); seed_power_W : (Nt,) (pulsed; None in cw)
    seed_intensity_W_m2 : (Ny, Nx) (cw; None in pulsed)
    steps : one StepRecord per step, in order; media : name -> MediumRecord
    summary : the summary.json dict
    output_field : (Nt, Ny, Nx) complex field after the last step (diffraction runs; |E|² in J/m²)
    output_fluence : (Nt, Ny, Nx) fluence of each time slice after the last step (J/m², pulsed runs on the
        fluence path: the run's own beam, not a copy; with diffraction it is |output_field|²)
    output_b_integral : (Nt, Ny, Nx) the B-integral each time slice has accumulated (rad, pulsed)
    fibres : name -> FibreRecord, for layouts of fibres
    train : pulse trains: datasets of the train, name -> (array, units), e.g. the energy of each
        pulse from the start of the train (empty for a single pulse)
    field_transforms : diffraction runs: the 2-D transforms (of one time slice each) the field path
        made, for the benchmark (0 otherwise; not written to the files)
    wavelength_m : (Nt,) the wavelength of each time slice of a chirped seed (None: narrowband)
    seed_spectrum_J_m : (Nt,) the chirped seed's spectral energy density at those wavelengths (J/m)
    """

    config: Config
    x_m: np.ndarray
    y_m: np.ndarray
    t_s: np.ndarray
    seed_fluence_J_m2: np.ndarray
    seed_power_W: np.ndarray
    steps: list[StepRecord]
    media: dict[str, MediumRecord]
    summary: dict[str, Any]
    seed_intensity_W_m2: np.ndarray | None = None
    output_field: np.ndarray | None = None
    output_fluence: np.ndarray | None = None
    output_b_integral: np.ndarray | None = None
    fibres: dict[str, FibreRecord] = field(default_factory=dict)
    train: dict[str, tuple[np.ndarray, str]] = field(default_factory=dict)
    field_transforms: int = 0
    wavelength_m: np.ndarray | None = None
    seed_spectrum_J_m: np.ndarray | None = None

    def save(self, directory: str | os.PathLike, plots: bool = True) -> Path:
        """Write result.h5, summary.json and (optionally) plots/*.png into ``directory``: the public
        API's shorthand for :func:`ampmodel.output.save.save_run` (which see)."""
        from ampmodel.output.save import save_run
        return save_run(self, directory, plots=plots)


