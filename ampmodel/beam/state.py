"""The beam on the fluence path and what each step reports.

The beam is held as ``fluence`` (Nt, Ny, Nx): the fluence (J/m²) carried by each time slice, so that
the power of slice t at a pixel is fluence[t]/dt. The field path's beam (``field.FieldBeam``) offers
the same ``fluence`` (|E|²), so diagnostics read both alike. Each step changes the beam in place and
returns a :class:`StepOutcome` with its energy bookkeeping.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from ampmodel.kernels.beam_figures import aperture_figures, d4sigma
from ampmodel.kernels.pulse_shape import slice_factors, true_peak


@dataclass
class BeamState:
    """The pulsed beam on the grid.

    fluence : (Nt, Ny, Nx) J/m² per time slice
    b_integral : (Nt, Ny, Nx) accumulated B-integral (rad) per pixel and time slice
    peak_factor : (Nt,) the largest power inside each time slice over its mean
        (kernels/beam_shapes.slice_peak_factors); None: 1 (a beam without a pulse shape, cw)
    """

    fluence: np.ndarray
    b_integral: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    dt_s: float
    wavelength_m: float
    peak_factor: np.ndarray | None = None

    def peak_factors(self) -> np.ndarray:
        """(Nt,) the factor from a time slice's mean to its peak (ones where the beam has none)."""
        return slice_factors(self.peak_factor, self.fluence.shape[0])

    @property
    def pixel_area_m2(self) -> float:
        return float((self.x_m[1] - self.x_m[0]) * (self.y_m[1] - self.y_m[0]))

    def energy_J(self) -> float:
        return float(self.fluence.sum() * self.pixel_area_m2)


@dataclass(frozen=True)
class BeamFigures:
    """The beam's shape over a clear aperture, from its fluence map (definitions in
    kernels/beam_figures.py and the README): D4σ diameters (mm), peak-to-mean modulation and fill
    factor. Its fields are summary.json keys of the seed and of each step."""

    d4sigma_x_mm: float
    d4sigma_y_mm: float
    modulation_peak_to_mean: float
    fill_factor: float

    @classmethod
    def of(cls, fluence_map: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, aperture: np.ndarray | None,
           pixel_area_m2: float) -> BeamFigures:
        """The figures of ``fluence_map`` (Ny, Nx) in J/m² over ``aperture`` (Ny, Nx) bool (None: all)."""
        dx4, dy4 = d4sigma(fluence_map, x_m, y_m)
        inside = aperture if aperture is not None else np.ones(fluence_map.shape, dtype=bool)
        modulation, fill = aperture_figures(fluence_map, inside, pixel_area_m2)
        return cls(dx4 * 1e3, dy4 * 1e3, modulation, fill)

    def as_dict(self) -> dict[str, float]:
        return dataclasses.asdict(self)


@dataclass
class RepeatOutcome:
    """A repeat's round trips: the energy after each round trip run (the discarded one of
    ``until = "peak"`` included, J), the round trips kept (the dump after the last of them), the
    round-trip time (s), whether the energy fell before ``max_count`` (until = "peak"), the
    outcome of each inner step in the dump round trip, and the beam's figures after each round trip
    run (``pulsed.cavity_mode.RoundTripBeam``: D4σ, peak fluence, energy)."""

    round_trip_energies_J: list[float]
    dump_round_trip: int
    round_trip_s: float
    peak_found: bool
    inner: list[StepOutcome]
    round_trip_beams: list = field(default_factory=list)


@dataclass
class StepOutcome:
    """Energy bookkeeping and peaks of one step (J, J/m², W/m², rad), and what else the step reports.

    edge_absorbed_J : field path: the energy the window's absorbing edge took
    substeps : field path: diffraction sub-steps of a free-space step or of each medium slice
    pinhole_transmission : spatial filter: the fraction of the energy through the pinhole
    warnings : the step's own warnings (an undersampled lens phase, a pinhole wider than the grid)
    beam : the beam figures after the step; peak_power_W : the largest power (W) entering or
        leaving it, at the pulse's true peak; duration_s : the FWHM of the pulse leaving it (s) (these
        three set by the pulsed layout loop)
    repeat : a repeat step's round trips
    """

    energy_in_J: float
    energy_out_J: float
    clipped_J: float = 0.0
    passive_loss_J: float = 0.0
    extracted_J: float = 0.0          # energy the gain gave the beam (negative where it absorbed)
    peak_fluence_J_m2: float = 0.0    # after the step (a pass: the largest in the medium or leaving it)
    peak_intensity_W_m2: float = 0.0  # the largest entering, inside or leaving, at the pulse's true peak
    peak_fluence_in_J_m2: float = 0.0  # the beam reaching the step (its first surface)
    b_integral_step_rad: float = 0.0
    edge_absorbed_J: float = 0.0
    substeps: int | None = None
    pinhole_transmission: float | None = None
    warnings: list[str] = field(default_factory=list)
    beam: BeamFigures | None = None
    peak_power_W: float | None = None
    duration_s: float | None = None
    repeat: RepeatOutcome | None = None


def fluence_peaks(fluence: np.ndarray, dt_s: float, factor: np.ndarray | None = None) -> tuple[float, float]:
    """Largest fluence (J/m², summed over the time slices) and intensity (W/m², at the pulse's true peak
    inside each slice: ``factor``, see :func:`true_peak`) of a (Nt, Ny, Nx) beam."""
    if fluence.size == 0:
        return 0.0, 0.0
    per_slice = fluence.reshape(fluence.shape[0], -1).max(axis=1)
    return float(fluence.sum(axis=0).max()), true_peak(per_slice, factor) / dt_s


def peaks(beam) -> tuple[float, float]:
    """Largest fluence (J/m²) and true peak intensity (W/m²) of the beam as it is now."""
    return fluence_peaks(beam.fluence, beam.dt_s, beam.peak_factor)
