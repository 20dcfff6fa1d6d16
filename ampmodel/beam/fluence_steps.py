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
    beam.fluence *= step.transmission
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, passive_loss_J=e_in - e_out)


def apply_aperture(beam: BeamState, step: Step) -> StepOutcome:
    """A hard-edged centred aperture (round or square): the beam outside it is removed."""
    e_in = beam.energy_J()
    mask = beam_shapes.aperture_mask(beam.x_m, beam.y_m, step.shape, step.diameter_m)
    clipped = _clip(beam, mask)
    return StepOutcome(e_in, beam.energy_J(), clipped_J=clipped)


def apply_unchanged(beam: BeamState, step: Step) -> StepOutcome:
    """Free space and thin lenses: without diffraction the fluence map is unchanged."""
    e = beam.energy_J()
    return StepOutcome(e, e)


def fluence_aperture(beam: BeamState, step: Step) -> StepOutcome:
    """Aperture on the fluence path: a hard edge as :func:`apply_aperture`; a soft edge (``order``)
    multiplies the fluence by its transmission T."""
    if step.order is None:
        return apply_aperture(beam, step)
    e_in = beam.energy_J()
    beam.fluence *= kd.aperture_amplitude(beam.x_m, beam.y_m, step.shape, step.diameter_m, step.order) ** 2
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, clipped_J=e_in - e_out)


def fluence_relay(beam: BeamState, step: Step) -> StepOutcome:
    """Relay on the fluence path: the inverted image at magnification M, F_out(x) = F_in(−x/M)/M²
    (geometrical imaging; linear interpolation keeps it non-negative), energy conserved as in
    ``field_steps.field_relay``."""
    e_in = beam.energy_J()
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
    return StepOutcome(e_in, e_out, clipped_J=e_in - e_out)


def with_peaks(action: Callable[[BeamState, Step], StepOutcome]) -> Callable[[BeamState, Step], StepOutcome]:
    """``action`` with the peaks of the beam reaching the step and leaving it in its outcome: the peak
    fluence entering (``peak_fluence_in_J_m2``), the peak fluence after it (``peak_fluence_J_m2``: a relay
    or an aperture changes it) and the larger peak intensity of the two, at the pulse's true peak."""
    def run(beam: BeamState, step: Step) -> StepOutcome:
        f_in, i_in = peaks(beam)
        outcome = action(beam, step)
        f_out, i_out = peaks(beam)
        outcome.peak_fluence_in_J_m2 = f_in
        outcome.peak_fluence_J_m2 = f_out
        outcome.peak_intensity_W_m2 = max(i_in, i_out)
        return outcome
    run.__name__ = action.__name__
    run.__doc__ = action.__doc__
    return run


# Step kinds other than "pass" (which needs the media) and the function that applies each to a
# fluence beam (the pulsed fluence path, and the cw intensity map as a one-slice beam of 1 s).
FLUENCE_STEP_ACTIONS: dict[str, Callable[[BeamState, Step], StepOutcome]] = {
    kind: with_peaks(action) for kind, action in (
        ("loss", apply_loss), ("aperture", fluence_aperture), ("space", apply_unchanged),
        ("lens", apply_unchanged), ("relay", fluence_relay))
}
