"""The steps of a layout and how each acts on the pulsed beam.

The beam is held as ``fluence`` (Nt, Ny, Nx): the fluence (J/m²) carried by each time slice, so that
the power of slice t at a pixel is fluence[t]/dt. Each step function changes the beam in place and
returns a :class:`StepOutcome` with its energy bookkeeping. New step kinds are added here and in
:data:`STEP_ACTIONS`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from . import beams
from .description import Step
from .kernels.frantz_nodvik import fn_slice


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
class MediumState:
    """A medium as the beam meets it: ln G per voxel (depleted pass after pass) and its constants.

    ln_gain : (Nz, Ny, Nx) g·dz per voxel; mask : (Ny, Nx) clear aperture
    """

    name: str
    ln_gain: np.ndarray
    mask: np.ndarray
    saturation_fluence_J_m2: float
    slice_length_m: float
    loss_per_m: float
    n2_m2_W: float


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


def _peaks(beam: BeamState) -> tuple[float, float]:
    """Largest fluence (J/m²) and intensity (W/m²) of the beam as it is now."""
    if beam.fluence.size == 0:
        return 0.0, 0.0
    return float(beam.fluence.sum(axis=0).max()), float(beam.fluence.max() / beam.dt_s)


def _clip(beam: BeamState, mask: np.ndarray) -> float:
    """Zero the beam outside ``mask``; return the clipped energy (J)."""
    outside = ~mask
    clipped = float(beam.fluence[:, outside].sum() * beam.pixel_area_m2)
    beam.fluence[:, outside] = 0.0
    return clipped


def _log_mean(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Logarithmic mean (b − a)/ln(b/a), elementwise; exact mean of an exponential between a and b."""
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = b / a
        lm = (b - a) / np.log(ratio)
    close = ~np.isfinite(lm) | (np.abs(ratio - 1.0) < 1e-6)
    lm[close] = 0.5 * (a[close] + b[close])
    return lm


def pass_medium(beam: BeamState, medium: MediumState, reverse: bool = False,
                tick: Callable[[], None] | None = None) -> StepOutcome:
    """One trip through a medium: clip at the clear aperture, then for each z-slice (in the order the
    beam meets them) half the passive loss, Frantz–Nodvik for every time slice in order, half the loss.

    The medium's ln G is depleted in place, so a later pass sees what this one left. The B-integral
    of each pixel and time slice grows by k0·n2·dz·I_mean with I_mean the logarithmic mean of the
    slice's entering and leaving intensity (exact for exponential growth within a slice).

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963); B = (2 pi/lambda0)·∫ n2·I dz.
    """
    e_in = beam.energy_J()
    clipped = _clip(beam, medium.mask)
    fluence = beam.fluence
    fsat = medium.saturation_fluence_J_m2
    dz = medium.slice_length_m
    half_loss = float(np.exp(-0.5 * medium.loss_per_m * dz))
    b_coef = 2.0 * np.pi / beam.wavelength_m * medium.n2_m2_W * dz / beam.dt_s
    b_start = beam.b_integral.copy() if b_coef > 0.0 else None
    passive = 0.0
    peak_f, peak_i = _peaks(beam)
    order = range(medium.ln_gain.shape[0] - 1, -1, -1) if reverse else range(medium.ln_gain.shape[0])
    gained = 0.0
    for k in order:
        before = fluence.copy() if b_coef > 0.0 else None
        if half_loss != 1.0:
            fluence *= half_loss
        e_a = fluence.sum()
        ln_gain = medium.ln_gain[k]
        for t in range(fluence.shape[0]):
            fn_slice(fluence[t], ln_gain, fsat, out=fluence[t])
        e_b = fluence.sum()
        gained += e_b - e_a        # what the gain gave (or, absorbing, took): exact FN bookkeeping
        if half_loss != 1.0:
            passive += e_a * (1.0 / half_loss - 1.0) + e_b * (1.0 - half_loss)
            fluence *= half_loss
        if before is not None:
            beam.b_integral += b_coef * _log_mean(before, fluence)
        f, i = _peaks(beam)
        peak_f, peak_i = max(peak_f, f), max(peak_i, i)
        if tick is not None:
            tick()
    b_step = float((beam.b_integral - b_start).max()) if b_start is not None else 0.0
    area = beam.pixel_area_m2
    return StepOutcome(e_in, beam.energy_J(), clipped_J=clipped, passive_loss_J=passive * area,
                       extracted_J=gained * area, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i,
                       b_integral_step_rad=b_step)


def apply_loss(beam: BeamState, step: Step) -> StepOutcome:
    """A lumped loss: every pixel and time slice multiplied by the transmission."""
    e_in = beam.energy_J()
    peak_f, peak_i = _peaks(beam)
    beam.fluence *= step.transmission
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, passive_loss_J=e_in - e_out, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=peak_i)


def apply_aperture(beam: BeamState, step: Step) -> StepOutcome:
    """A hard-edged centred aperture (round or square): the beam outside it is removed."""
    e_in = beam.energy_J()
    peak_f, peak_i = _peaks(beam)
    mask = beams.aperture_mask(beam.x_m, beam.y_m, step.shape, step.diameter_m)
    clipped = _clip(beam, mask)
    return StepOutcome(e_in, beam.energy_J(), clipped_J=clipped, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=peak_i)


def apply_unchanged(beam: BeamState, step: Step) -> StepOutcome:
    """Free space and thin lenses: without diffraction the fluence map is unchanged."""
    e = beam.energy_J()
    peak_f, peak_i = _peaks(beam)
    return StepOutcome(e, e, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i)


# Step kinds other than "pass" (which needs the media) and the function that applies each.
STEP_ACTIONS: dict[str, Callable[[BeamState, Step], StepOutcome]] = {
    "loss": apply_loss,
    "aperture": apply_aperture,
    "space": apply_unchanged,
    "lens": apply_unchanged,
}
