"""A pass through a medium on the fluence path: the medium's state (ln G per voxel, depleted pass
after pass) and the Frantz–Nodvik slices through it, in blocks of the pixels that carry fluence.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ampmodel.beam.state import BeamState, StepOutcome
from ampmodel.kernels import fn_pass, fn_spectral
from ampmodel.kernels.pulse_shape import true_peak
from ampmodel.media.ions import SliceCrossSections


@dataclass
class MediumState:
    """A medium as the beam meets it: ln G per voxel (depleted pass after pass) and its constants.

    ln_gain : (Nz, Ny, Nx) g·dz per voxel at the material's wavelength; mask : (Ny, Nx) clear aperture
    spectral : how each time slice of the pulse meets the medium when they are not all at the
        material's wavelength (None: the plain pass at its Fsat)
    thermal_phase_rad : (Ny, Nx) phase of the thermal lens of one trip (``media/thermal.py:
        thermal_phase_rad``), applied by the field path at the middle of each pass (None: no lens)
    """

    name: str
    ln_gain: np.ndarray
    mask: np.ndarray
    saturation_fluence_J_m2: float
    slice_length_m: float
    loss_per_m: float
    n2_m2_W: float
    spectral: SliceCrossSections | None = None
    thermal_phase_rad: np.ndarray | None = None


def _scatter(full: np.ndarray, idx: np.ndarray, block: np.ndarray) -> None:
    """full[:, idx] = block, row by row (several times faster than one fancy assignment)."""
    for row, values in zip(full, block, strict=True):
        row[idx] = values


def block_pixels(nt: int, nz: int) -> int:
    """Pixels per block of a pass: about 32 MB of gathered rows ((2·Nt + 2·Nz) per pixel, float64),
    between 1024 and 16384 (measured fastest on a 2 MiB L2 cache; docs/performance.md)."""
    return int(min(16384, max(1024, 32 * 2**20 // (8 * (2 * nt + 2 * nz)))))


def pass_medium(beam: BeamState, medium: MediumState, reverse: bool = False,
                tick: Callable[[float], None] | None = None) -> StepOutcome:
    """One trip through a medium: clip at the clear aperture, then for each z-slice (in the order the
    beam meets them) half the passive loss, Frantz–Nodvik for every time slice in order, half the loss.

    The medium's ln G is depleted in place, so a later pass sees what this one left. The B-integral
    of each pixel and time slice grows by k0·n2·dz·I_mean with I_mean the logarithmic mean of the
    slice's entering and leaving intensity (exact for exponential growth within a slice).

    Only pixels that carry fluence after the clipping are computed (elsewhere nothing changes), in
    blocks gathered from the (Nt, Ny, Nx) arrays; kernels/fn_pass.py chooses the evaluation (composite
    slices where no result needs the inside of the medium, else the linear or log-domain form).

    tick : called as the work goes on with the z-slices' worth of it done (fractions; a pass adds up
        to its number of z-slices, as a progress bar over z-slice passes counts)

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963); B = (2 pi/lambda0)·∫ n2·I dz.
    """
    fsat = medium.saturation_fluence_J_m2
    dz = medium.slice_length_m
    area = beam.pixel_area_m2
    half_loss = float(np.exp(-0.5 * medium.loss_per_m * dz))
    b_coef = 2.0 * np.pi / beam.wavelength_m * medium.n2_m2_W * dz / beam.dt_s
    nt, nz = beam.fluence.shape[0], medium.ln_gain.shape[0]
    beam.fluence = np.ascontiguousarray(beam.fluence)        # no copy unless a caller made a view
    beam.b_integral = np.ascontiguousarray(beam.b_integral)
    medium.ln_gain = np.ascontiguousarray(medium.ln_gain)
    fluence = beam.fluence.reshape(nt, -1)                     # views: the blocks are written back here
    ln_gain_all = medium.ln_gain.reshape(nz, -1)
    b_all = beam.b_integral.reshape(nt, -1)

    # One sum over the time slices gives the energy in, the clipped energy, the peak fluence entering
    # and the pixels that carry fluence (a sum of fluences >= 0 is > 0 where any of them is).
    total = fluence.sum(axis=0)
    e_in = float(total.sum()) * area
    outside = np.flatnonzero(~medium.mask.ravel())
    clipped = float(total[outside].sum()) * area
    if clipped > 0.0:
        for row in fluence:
            row[outside] = 0.0
        total[outside] = 0.0
    peak_f = float(total.max()) if total.size else 0.0
    peak_in = peak_f                                           # at the entrance face, after the clipping
    active = np.flatnonzero(total > 0.0)
    del total

    factor = beam.peak_factors()                                # true peak over mean, per time slice
    peak_slice = np.zeros(nt)                                  # the largest fluence of each time slice
    passive = b_step = gained = e_out = 0.0
    blocks = -(-len(active) // block_pixels(nt, nz))             # equal blocks, none larger than that
    for idx in (np.array_split(active, blocks) if blocks else []):
        x = np.take(fluence, idx, axis=1)                       # (Nt, C), C-contiguous rows
        np.maximum(peak_slice, x.max(axis=1), out=peak_slice)   # entering
        x /= fsat
        ln_gain = np.take(ln_gain_all, idx, axis=1)
        order = ln_gain[::-1] if reverse else ln_gain
        share = nz * len(idx) / len(active)                    # z-slices of work in this block
        part = tick and (lambda f, share=share: tick(f * share))
        oc, b_sum = _amplify(x, order, medium.spectral, half_loss, b_coef > 0.0, dz, part)
        x *= fsat
        e_out += float(x.sum())
        _scatter(fluence, idx, x)
        _scatter(ln_gain_all, idx, ln_gain)
        if b_sum is not None:
            b_sum *= b_coef * fsat
            b_step = max(b_step, true_peak(b_sum.max(axis=1), factor))
            b_sum += np.take(b_all, idx, axis=1)
            _scatter(b_all, idx, b_sum)
        peak_f = max(peak_f, oc.peak_plane_fluence * fsat)
        np.maximum(peak_slice, oc.peak_slice_fluence * fsat, out=peak_slice)
        passive += oc.passive_loss * fsat
        gained += oc.gained * fsat
    peak_i = true_peak(peak_slice, factor) / beam.dt_s           # at the pulse's true peak in each slice
    return StepOutcome(e_in, e_out * area, clipped_J=clipped, passive_loss_J=passive * area,
                       extracted_J=gained * area, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i,
                       b_integral_step_rad=b_step, peak_fluence_in_J_m2=peak_in)


def _amplify(x: np.ndarray, order: np.ndarray, spectral: SliceCrossSections | None, half_loss: float,
             b_needed: bool, dz_m: float, part) -> tuple[fn_pass.BlockOutcome, np.ndarray | None]:
    """A block through the gain slices by the evaluation that suits it: per time slice's own
    cross-sections (a pulse away from the material's wavelength), composite slices (no result needs
    the inside of the medium), or the linear or log-domain form; and the B-integral sums (or None)."""
    if spectral is not None:
        b_sum = np.zeros_like(x) if b_needed else None
        oc = fn_spectral.amplify_block_spectral(x, order, spectral.ratio, spectral.scale,
                                                spectral.offset_per_m * dz_m, half_loss, b_sum,
                                                floor=-spectral.absorption_per_m * dz_m)
        if part:
            part(1.0)
        return oc, b_sum
    if not b_needed and half_loss == 1.0 and fn_pass.composite_valid(order):
        return fn_pass.amplify_block_composite(x, order, tick=part), None
    b_sum = np.zeros_like(x) if b_needed else None
    return fn_pass.amplify_block(x, order, half_loss, b_sum, linear=fn_pass.linear_form_valid(x, order, half_loss),
                                 tick=part), b_sum
