"""The beam on the fluence path and what each step reports.

The beam is held as ``fluence`` (Nt, Ny, Nx): the fluence (J/m²) carried by each time slice, so that
the power of slice t at a pixel is fluence[t]/dt. The field path's beam (``field.FieldBeam``) offers
the same ``fluence`` (|E|²), so diagnostics read both alike. Each step changes the beam in place and
returns a :class:`StepOutcome` with its energy bookkeeping.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class BeamState:
    """The pulsed beam on the grid.

    fluence : (Nt, Ny, Nx) J/m² per time slice
    b_integral : (Nt, Ny, Nx) accumulated B-integral (rad) per pixel and time slice
    """

    fluence: np.ndarray
    b_integral: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    dt_s: float
    wavelength_m: float

    @property
    def pixel_area_m2(self) -> float:
        return float((self.x_m[1] - self.x_m[0]) * (self.y_m[1] - self.y_m[0]))

    def energy_J(self) -> float:
        return float(self.fluence.sum() * self.pixel_area_m2)


@dataclass
class StepOutcome:
    """Energy bookkeeping and peaks of one step (J, J/m², W/m², rad)."""

    energy_in_J: float
    energy_out_J: float
    clipped_J: float = 0.0
    passive_loss_J: float = 0.0
    extracted_J: float = 0.0          # energy the gain gave the beam (negative where it absorbed)
    peak_fluence_J_m2: float = 0.0
    peak_intensity_W_m2: float = 0.0
    b_integral_step_rad: float = 0.0
    extras: dict = field(default_factory=dict)


def fluence_peaks(fluence: np.ndarray, dt_s: float) -> tuple[float, float]:
    """Largest fluence (J/m², summed over the time slices) and intensity (W/m²) of a (Nt, Ny, Nx) beam."""
    if fluence.size == 0:
        return 0.0, 0.0
    return float(fluence.sum(axis=0).max()), float(fluence.max() / dt_s)


def peaks(beam: BeamState) -> tuple[float, float]:
    """Largest fluence (J/m²) and intensity (W/m²) of the beam as it is now."""
    return fluence_peaks(beam.fluence, beam.dt_s)
