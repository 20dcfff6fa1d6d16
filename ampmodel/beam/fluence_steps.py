"""What the steps between media do to a fluence beam (no diffraction): losses, apertures (hard or
soft-edged), free space and thin lenses (which leave a fluence map as it is), and relays (the inverted,
magnified image). Each action changes the beam in place and returns its StepOutcome.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from ampmodel.beam.state import BeamState, StepOutcome, peaks
from ampmodel.description import Step
from ampmodel.kernels import beam_shapes
from ampmodel.kernels import diffraction as kd


def _clip(beam: BeamState, mask: np.ndarray) -> float:
    """Zero the beam outside ``mask``; return the clipped energy (J)."""
    outside = np.flatnonzero(~mask)
    rows = beam.fluence.reshape(beam.fluence.shape[0], -1)
    if not np.shares_memory(rows, beam.fluence):          # not contiguous: the plain (slower) way
        clipped = float(beam.fluence[:, ~mask].sum() * beam.pixel_area_m2)
        beam.fluence[:, ~mask] = 0.0
        return clipped
    clipped = 0.0
    for row in rows:                                    # row by row: no (Nt, outside) temporary
        clipped += float(row[outside].sum())
        row[outside] = 0.0
    return clipped * beam.pixel_area_m2


def apply_loss(beam: BeamState, step: Step) -> StepOutcome:
    """A lumped loss: every pixel and time slice multiplied by the transmission."""
    e_in = beam.energy_J()
    peak_f, peak_i = peaks(beam)
    beam.fluence *= step.transmission
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, passive_loss_J=e_in - e_out, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=peak_i)


def apply_aperture(beam: BeamState, step: Step) -> StepOutcome:
    """A hard-edged centred aperture (round or square): the beam outside it is removed."""
    e_in = beam.energy_J()
    peak_f, peak_i = peaks(beam)
    mask = beam_shapes.aperture_mask(beam.x_m, beam.y_m, step.shape, step.diameter_m)
    clipped = _clip(beam, mask)
    return StepOutcome(e_in, beam.energy_J(), clipped_J=clipped, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=peak_i)


def apply_unchanged(beam: BeamState, step: Step) -> StepOutcome:
    """Free space and thin lenses: without diffraction the fluence map is unchanged."""
    e = beam.energy_J()
    peak_f, peak_i = peaks(beam)
    return StepOutcome(e, e, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i)


def fluence_aperture(beam: BeamState, step: Step) -> StepOutcome:
    """Aperture on the fluence path: a hard edge as :func:`apply_aperture`; a soft edge (``order``)
    multiplies the fluence by its transmission T."""
    if step.order is None:
        return apply_aperture(beam, step)
    e_in = beam.energy_J()
    peak_f, peak_i = peaks(beam)
    beam.fluence *= kd.aperture_amplitude(beam.x_m, beam.y_m, step.shape, step.diameter_m, step.order) ** 2
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, clipped_J=e_in - e_out, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i)


def fluence_relay(beam: BeamState, step: Step) -> StepOutcome:
    """Relay on the fluence path: the inverted image at magnification M, F_out(x) = F_in(−x/M)/M²
    (geometrical imaging; linear interpolation keeps it non-negative), energy conserved as in
    ``field_steps.field_relay``."""
    e_in = beam.energy_J()
    peak_f, peak_i = peaks(beam)
    m = step.magnification
    if m == 1.0:
        beam.fluence = beam.fluence[:, ::-1, ::-1].copy()
        beam.b_integral = beam.b_integral[:, ::-1, ::-1].copy()
    else:
        half = (beam.x_m[-1] - beam.x_m[0] + (beam.x_m[1] - beam.x_m[0])) / 2.0
        keep = beam.fluence
        if m > 1.0:
            inside = (np.abs(beam.y_m)[:, None] * m <= half) & (np.abs(beam.x_m)[None, :] * m <= half)
            keep = keep * inside
        target = keep.sum(axis=(1, 2))
        image = np.clip(kd.image_scaled(beam.fluence, beam.x_m, m, order=1), 0.0, None)
        have = image.sum(axis=(1, 2))
        scale = np.zeros_like(have)
        np.divide(target, have, out=scale, where=have > 0.0)
        beam.fluence = image * scale[:, None, None]
        beam.b_integral = kd.image_scaled(beam.b_integral, beam.x_m, m, order=1)
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, clipped_J=e_in - e_out, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i)


# Step kinds other than "pass" (which needs the media) and the function that applies each to a
# fluence beam (the pulsed fluence path, and the cw intensity map as a one-slice beam of 1 s).
FLUENCE_STEP_ACTIONS: dict[str, Callable[[BeamState, Step], StepOutcome]] = {
    "loss": apply_loss,
    "aperture": fluence_aperture,
    "space": apply_unchanged,
    "lens": apply_unchanged,
    "relay": fluence_relay,
}
