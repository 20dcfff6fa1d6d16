"""What the steps between media do to the field (grid.diffraction = true): losses, apertures (hard
or soft-edged), free space (angular spectrum, in sub-steps), thin lenses, spatial filters (lens,
pinhole, lens) and relays (4f imaging: inversion and magnification). Passes are the pulsed path's
(``pulsed.field_pass``).
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np

from ampmodel.beam.field import FieldBeam, advance, fluence_of, substeps
from ampmodel.beam.grid_checks import fast_even_points
from ampmodel.beam.state import StepOutcome, fluence_peaks
from ampmodel.description import Step
from ampmodel.kernels import beam_shapes
from ampmodel.kernels import diffraction as kd
from ampmodel.notices import warning


def _simple(beam: FieldBeam, change: Callable[[StepOutcome], str]) -> StepOutcome:
    """Run ``change`` on the field; it may fill in the outcome's other fields and returns where the
    energy difference went: "passive" (a loss), "clipped" (an aperture) or "edge" (the window's
    absorbing edge). The outcome has the peak fluence entering (``peak_fluence_in_J_m2``) and after the
    step (``peak_fluence_J_m2``), and the larger peak intensity of the two."""
    fluence = fluence_of(beam.field)
    e_in = float(fluence.sum() * beam.pixel_area_m2)
    peak_f, peak_i = fluence_peaks(fluence, beam.dt_s, beam.peak_factor)
    del fluence
    outcome = StepOutcome(e_in, e_in, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i,
                          peak_fluence_in_J_m2=peak_f)
    lost_to = change(outcome)
    after = fluence_of(beam.field)                     # the peaks leaving the step (a focus, a relay)
    outcome.energy_out_J = float(after.sum() * beam.pixel_area_m2)
    outcome.peak_fluence_J_m2, peak_out = fluence_peaks(after, beam.dt_s, beam.peak_factor)
    outcome.peak_intensity_W_m2 = max(peak_i, peak_out)
    del after
    lost = e_in - outcome.energy_out_J
    if lost_to == "clipped":
        outcome.clipped_J = lost
    elif lost_to == "edge":
        outcome.edge_absorbed_J = lost
    else:
        outcome.passive_loss_J = lost
    return outcome


def field_loss(beam: FieldBeam, step: Step) -> StepOutcome:
    """A lumped loss: the amplitude times sqrt(transmission)."""
    def change(outcome: StepOutcome) -> str:
        beam.field *= math.sqrt(step.transmission)
        return "passive"
    return _simple(beam, change)


def field_aperture(beam: FieldBeam, step: Step) -> StepOutcome:
    """A centred aperture, hard (grey rim pixels) or soft (super-Gaussian ``order``): the field times
    the amplitude transmission of :func:`~ampmodel.kernels.diffraction.aperture_amplitude`."""
    def change(outcome: StepOutcome) -> str:
        beam.field *= kd.aperture_amplitude(beam.x_m, beam.y_m, step.shape, step.diameter_m, step.order)
        return "clipped"
    return _simple(beam, change)


def field_space(beam: FieldBeam, step: Step) -> StepOutcome:
    """Free space of ``length_m`` in air, in sub-steps with the absorbing edge (module docstring)."""
    def change(outcome: StepOutcome) -> str:
        outcome.substeps = substeps(beam, step.length_m, 1.0)
        advance(beam, step.length_m, 1.0, outcome.substeps)
        return "edge"
    return _simple(beam, change)


def _beam_radius(beam: FieldBeam, tail: float = 1e-6) -> float:
    """Radius (m) outside which lies less than ``tail`` of the energy (time-integrated)."""
    f = fluence_of(beam.field).sum(axis=0)
    r = beam_shapes.radius_map(beam.x_m, beam.y_m).ravel()
    order = np.argsort(r)
    cum = np.cumsum(f.ravel()[order])
    if not cum[-1] > 0:
        return 0.0
    i = int(np.searchsorted(cum, (1.0 - tail) * cum[-1]))
    return float(r[order][min(i, len(r) - 1)])


def field_lens(beam: FieldBeam, step: Step) -> StepOutcome:
    """A thin lens in air: the phase exp(−i·k·r²/(2f)). Warns when the lens phase is undersampled
    over the beam (its local spatial frequency k·r/|f| beyond 80 % of the sampling limit π/dx)."""
    def change(outcome: StepOutcome) -> str:
        beam.field *= kd.lens_phase(beam.x_m, beam.y_m, beam.wavelength_m, step.focal_m)
        dx = float(beam.x_m[1] - beam.x_m[0])
        r = _beam_radius(beam, tail=1e-4)
        k = 2.0 * math.pi / beam.wavelength_m
        local = k * r / abs(step.focal_m)
        limit = kd.CLEAR_FRACTION * math.pi / dx
        if local > limit:
            points = fast_even_points(math.ceil(beam.width_m * local / (kd.CLEAR_FRACTION * math.pi)))
            outcome.warnings = [warning("lens-sampling", f"the lens phase is undersampled at the beam's edge (r = {r * 1e3:.3g} mm): its "
                                f"local spatial frequency is {local / limit:.2g} times 80 % of the grid's "
                                f"sampling limit; grid.points = {points} (at this width) would resolve it")]
        return "passive"
    return _simple(beam, change)


def field_filter(beam: FieldBeam, step: Step) -> StepOutcome:
    """A spatial filter (lens, pinhole in the focal plane, lens; a 4f system): the pinhole is a mask on
    the angular spectrum, |k_t| <= k·a/f, and the image is inverted
    (:func:`~ampmodel.kernels.diffraction.pinhole_filter`, which explains the method)."""
    def change(outcome: StepOutcome) -> str:
        radius = step.pinhole_diameter_m / 2.0
        beam.field, _, outcome.pinhole_transmission = kd.pinhole_filter(beam.field, beam.width_m, beam.wavelength_m, step.focal_m,
                                                    radius, beam.workers)
        beam.fft_count += 2 * beam.field.shape[0]
        dx = float(beam.x_m[1] - beam.x_m[0])
        focal_half_width = beam.wavelength_m * step.focal_m / (2.0 * dx)   # the grid's reach in the focal plane
        if radius >= focal_half_width:
            outcome.warnings = [warning("pinhole", f"the pinhole (radius {radius * 1e6:.3g} µm) is wider than the focal plane the grid "
                                f"reaches (half-width λf/(2dx) = {focal_half_width * 1e6:.3g} µm): it removes "
                                "nothing on this grid; raise grid.points or narrow the pinhole")]
        return "clipped"
    return _simple(beam, change)


def field_relay(beam: FieldBeam, step: Step) -> StepOutcome:
    """An ideal 4f relay (afocal telescope) of magnification M: the inverted, scaled image
    E_out(x, y) = E_in(−x/M, −y/M)/M, without added wavefront curvature (a 4f relay has none; its
    ray matrix is [[−M, 0], [0, −1/M]]). M = 1 flips the pixels exactly; otherwise the field is
    interpolated (cubic splines on the real and imaginary parts) and each time slice is rescaled to
    the energy of the part of the input that the image keeps inside the window (energy conserved;
    the rest is counted as clipped by the window). Relay lenses and their apertures are ideal."""
    def change(outcome: StepOutcome) -> str:
        m = step.magnification
        image = kd.image_scaled(beam.field, beam.x_m, m)
        if m != 1.0:
            keep = fluence_of(beam.field)
            if m > 1.0:
                inside = (np.abs(beam.y_m)[:, None] * m <= beam.width_m / 2.0) & \
                         (np.abs(beam.x_m)[None, :] * m <= beam.width_m / 2.0)
                keep = keep * inside
            target = keep.sum(axis=(1, 2))
            have = fluence_of(image).sum(axis=(1, 2))
            scale = np.zeros_like(have)
            np.divide(target, have, out=scale, where=have > 0.0)
            image *= np.sqrt(scale)[:, None, None]
            beam.b_integral = kd.image_scaled(beam.b_integral, beam.x_m, m, order=1)
        else:
            beam.b_integral = beam.b_integral[:, ::-1, ::-1].copy()
        beam.field = image
        return "clipped"
    return _simple(beam, change)


FIELD_STEP_ACTIONS: dict[str, Callable[[FieldBeam, Step], StepOutcome]] = {
    "loss": field_loss,
    "aperture": field_aperture,
    "space": field_space,
    "lens": field_lens,
    "filter": field_filter,
    "relay": field_relay,
}
