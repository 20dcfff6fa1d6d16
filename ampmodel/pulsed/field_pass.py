"""A pass through a medium on the field path (grid.diffraction = true): split-step diffraction with
the gain and Kerr step, a chunk of time slices at a time, in threads as a wavefront."""
from __future__ import annotations

from typing import Callable

import numpy as np

from ampmodel.beam import chunks
from ampmodel.beam import field as field_path
from ampmodel.beam.field import FieldBeam
from ampmodel.beam.state import StepOutcome
from ampmodel.kernels import field_step as fs
from ampmodel.kernels.pulse_shape import true_peak
from ampmodel.pulsed.passes import MediumState


def pass_medium_field(beam: FieldBeam, medium: MediumState, index: float, reverse: bool = False,
                      tick: Callable[[], None] | None = None) -> StepOutcome:
    """One trip through a medium with diffraction: clip at the clear aperture, then for each z-slice
    (in the order the beam meets them) half a diffraction step, the gain and Kerr step, half a
    diffraction step (neighbouring half steps merged).

    The gain step is Frantz–Nodvik on |E|² of each time slice in order (the linear form of the fluence
    path's kernel, inside the clear aperture, with the passive loss split around it; outside it the
    loss alone); the amplitude is scaled by sqrt(J_out/J_in) and the phase kept. The Kerr step adds
    the phase k0·n2·I·dz, I the logarithmic mean of the slice's entering and leaving intensity, which
    is also the B-integral increment (kernels.field_step.gain_kerr_chunk). Light diffracted outside the
    clear aperture inside the medium travels on without gain.

    A thermal lens (``medium.thermal_phase_rad``, (Ny, Nx) rad) multiplies the field by exp(i·φ) right
    after the gain step of the middle slice in the order the beam meets them (index (Nz − 1)//2: the
    medium's middle for an odd Nz, half a slice before it for an even Nz), as a thin lens there.

    The time slices go through the medium a chunk at a time (kernels.field_step.chunk_rows slices,
    which stay in the processor cache through the transforms and the gain step), in ``beam.workers``
    threads as a wavefront (ampmodel/beam/chunks.py): a chunk's gain step in a z-slice follows the chunk
    before it, so the gain is depleted in time order, as by the whole field slice after slice.

    Parameters
    ----------
    beam : FieldBeam, changed in place
    medium : MediumState; its ln G is depleted in place
    index : the medium's refractive index n (diffraction in the medium: k = 2π·n/λ0)
    reverse : traverse the slices from the far end
    tick : called after each z-slice's worth of work (progress)

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963); split-step (Strang) splitting, e.g. G. P. Agrawal,
    Nonlinear Fiber Optics, section 2.4 (split-step Fourier method).
    """
    area = beam.pixel_area_m2
    beam.field = np.ascontiguousarray(beam.field)            # chunks below are views into it
    beam.b_integral = np.ascontiguousarray(beam.b_integral)
    medium.ln_gain = np.ascontiguousarray(medium.ln_gain)
    nt = beam.field.shape[0]
    rows = fs.chunk_rows(nt, beam.field.shape[1] * beam.field.shape[2])
    starts = list(range(0, nt, rows))
    e_in, clipped, peak_f, peak_i, slice_energy = _clip_entering(beam, medium.mask, rows, starts)
    peak_in = peak_f
    n_sub = field_path.substeps(beam, medium.slice_length_m, index,
                                field_path.spectral_reach(beam, energies=slice_energy))
    sums, plane, final, b_step, peak_slice = _through_the_slices(beam, medium, index, reverse, n_sub, rows,
                                                                 starts, tick)
    np.maximum(peak_slice, peak_i, out=peak_slice)            # entering
    nz = medium.ln_gain.shape[0]
    edge_lost = gained = passive = 0.0
    for c, t0 in enumerate(starts):                         # in order: the same sums whatever the threads
        energy = float(slice_energy[t0:t0 + rows].sum())
        for j in range(nz):
            s_in, s_out, s_gained, s_passive = sums[c, j]
            edge_lost += energy - s_in
            energy = s_out
            gained += s_gained
            passive += s_passive
        edge_lost += energy - final[c]
    if nz:
        peak_f = max(peak_f, float(plane.max()) if plane.size else 0.0)
    factor = beam.peak_factors()
    return StepOutcome(e_in * area, float(final.sum()) * area, clipped_J=clipped * area,
                       passive_loss_J=passive * area, extracted_J=gained * area, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=true_peak(peak_slice, factor) / beam.dt_s,
                       b_integral_step_rad=true_peak(b_step, factor), edge_absorbed_J=edge_lost * area,
                       substeps=n_sub, peak_fluence_in_J_m2=peak_in)


def _clip_entering(beam: FieldBeam, mask: np.ndarray, rows: int, starts: list[int],
                   ) -> tuple[float, float, float, np.ndarray, np.ndarray]:
    """The beam entering a medium, chunk by chunk: its energy, the part outside the clear aperture
    ``mask`` (Ny, Nx) (removed from the field), the peak fluence and the peak |E|² of each time slice
    ((Nt,); each per pixel area, J/m²), and each time slice's energy after the clipping, (Nt,)."""
    nt = beam.field.shape[0]
    pixels = beam.field.shape[1] * beam.field.shape[2]
    field = beam.field.reshape(nt, pixels)
    flat_mask = mask.ravel()
    outside = np.flatnonzero(~flat_mask)
    entry = np.zeros(pixels)                                 # Σ_t |E|² per pixel
    slice_energy = np.empty(nt)
    f_work, scratch = np.empty((rows, pixels)), np.empty((rows, 2 * pixels))
    peak_i = np.zeros(nt)
    for t0 in starts:
        e = field[t0:t0 + rows]
        f = fs.fluence_into(e, f_work[:len(e)], scratch[:len(e)])
        entry += f.sum(axis=0)
        if f.size:
            peak_i[t0:t0 + len(e)] = f.max(axis=1)
        if outside.size:
            np.copyto(e, 0.0, where=~flat_mask)
            np.copyto(f, 0.0, where=~flat_mask)
        f.sum(axis=1, out=slice_energy[t0:t0 + len(e)])
    peak_f = float(entry.max()) if entry.size else 0.0
    return float(entry.sum()), float(entry[outside].sum()), peak_f, peak_i, slice_energy


def _through_the_slices(beam: FieldBeam, medium: MediumState, index: float, reverse: bool, n_sub: int,
                        rows: int, starts: list[int], tick: Callable[[], None] | None):
    """Every chunk of time slices through every z-slice, in threads as a wavefront: diffraction steps
    (``n_sub`` sub-steps each) and the gain and Kerr steps in time order.

    Returns (sums, plane, final, b_step, peak_slice): the energy sums of each chunk and z-slice (chunks,
    Nz, 4: ChunkSums without its peaks), the fluence leaving each gain step summed over time (Nz, pixels),
    Σ|E|² of each chunk at the exit, the largest B-integral increment of each time slice (Nt,) and the
    largest fluence of each time slice leaving any gain step (Nt,)."""
    nt = beam.field.shape[0]
    pixels = beam.field.shape[1] * beam.field.shape[2]
    dz = medium.slice_length_m
    b_coef = 2.0 * np.pi / beam.wavelength_m * medium.n2_m2_W * dz / beam.dt_s
    kerr = b_coef > 0.0
    nz = medium.ln_gain.shape[0]
    order = list(range(nz - 1, -1, -1)) if reverse else list(range(nz))
    gain_rows = medium.ln_gain.reshape(nz, pixels)
    half, full = beam.transfer(0.5 * dz / n_sub, index), beam.transfer(dz / n_sub, index)
    threads = chunks.thread_count(beam.workers)
    constants = fs.slice_constants(medium.mask, medium.saturation_fluence_J_m2,
                                   float(np.exp(-0.5 * medium.loss_per_m * dz)), b_coef, beam.edge)
    works = [fs.ChunkWork(rows, pixels, constants.inside.size) for _ in range(min(threads, len(starts)))]
    plane = np.zeros((nz, pixels))                           # Σ_t of the fluence leaving each gain step
    sums = np.zeros((len(starts), nz, 4))                    # ChunkSums of each chunk and z-slice
    final = np.zeros(len(starts))                            # Σ|E|² of each chunk at the exit
    b_step = np.zeros(nt)                                    # per time slice (chunks write their own rows)
    peak_slice = np.zeros(nt)
    b_all = beam.b_integral.reshape(nt, pixels)
    lens = None if medium.thermal_phase_rad is None else np.exp(1j * medium.thermal_phase_rad)
    middle = (nz - 1) // 2
    sp = medium.spectral
    spectral = None if sp is None else (sp.ratio, sp.scale, sp.offset_per_m * dz, -sp.absorption_per_m * dz)

    def stage(thread: int, c: int, s: int) -> None:
        """Stage 2j: the diffraction step before gain step j (or the last half step, j = nz);
        stage 2j + 1: gain step j (the ordered one)."""
        j = s // 2
        t0 = starts[c]
        e = beam.field[t0:t0 + rows]
        work = works[thread]
        inc = work.b_increment[:len(e)] if kerr else None
        if s % 2:
            rows_spectral = None if spectral is None else tuple(a[t0:t0 + len(e)] for a in spectral)
            out = fs.gain_kerr_chunk(e.reshape(len(e), pixels), gain_rows[order[j]], constants, work,
                                     plane[j], inc, rows_spectral)
            sums[c, j] = out[:4]
            np.maximum(peak_slice[t0:t0 + len(e)], out.peak_slice_fluence, out=peak_slice[t0:t0 + len(e)])
            if lens is not None and j == middle:
                e *= lens
            return
        if s == 0 and kerr:
            inc[...] = 0.0
        # the edge of the last sub-step before a gain step is applied by the gain step
        fs.propagate_chunk(e, half if j in (0, nz) else full, beam.edge, n_sub, last_edge=j == nz)
        if j < nz:
            return
        f = fs.fluence_into(e.reshape(len(e), pixels), work.f[:len(e)], work.factor[:len(e)].view(np.float64))
        final[c] = float(f.sum())
        if kerr:
            b_all[t0:t0 + len(e)] += inc
            b_step[t0:t0 + len(e)] = inc.max(axis=1) if inc.size else 0.0

    done = [0]

    def progress(s: int) -> None:                            # a z-slice's worth: every chunk through one
        if s % 2:
            done[0] += 1
            if done[0] % len(starts) == 0:
                tick()

    chunks.run_chunks(len(starts), 2 * nz + 1, stage, threads, ordered=lambda s: s % 2 == 1,
                      after_stage=progress if tick is not None else None)
    beam.fft_count += 2 * nt * n_sub * (nz + 1)
    return sums, plane, final, b_step, peak_slice
