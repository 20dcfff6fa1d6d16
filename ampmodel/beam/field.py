"""The field path (grid.diffraction = true): the beam as a complex field, and what each step does to it.

The beam is ``field`` (Nt, Ny, Nx) complex128, one transverse field per time slice, normalised so
that |E|² is the fluence (J/m²) the slice carries: the fluence bookkeeping is the same as on the
fluence path (``layout.BeamState.fluence`` = |E|²), the power of slice t at a pixel is |E|²/dt and
the phase is the optical phase (convention E·exp(i(kz − ωt)), see ``kernels/diffraction.py``).

Split-step propagation (symmetric, second order in the slice length): in a medium each z-slice is
half a diffraction step, the gain and Kerr step, half a diffraction step; the half steps of
neighbouring slices are merged, so a pass of Nz slices takes Nz + 1 diffraction steps. Each
diffraction step is one batched angular-spectrum transform of all time slices (scipy.fft over the
last two axes) in the medium's index, followed by the absorbing window edge.

Free space (`space`): one angular-spectrum step is exact for the periodic window, but light that
leaves one side of the window during a long step would come back in on the other side (the FFT is
periodic) before the absorbing edge could take it. So a `space` step is cut into sub-steps short
enough that the steepest significant ray (the angle within which all but 1e-6 of the power lies, in
x and in y, from the angular spectrum at the start of the step) crosses at most half the absorbing
zone (a tenth of the window) per sub-step, with the edge applied after each: it meets the edge at
least twice before it could wrap. A beam whose angular spectrum stays narrow takes one step.
Medium slices use the same rule.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field as dataclass_field
from typing import Callable

import numpy as np
import scipy.fft

from ampmodel.kernels import beam_shapes
from ampmodel.pulsed import chunks
from ampmodel.description import Limits, Step
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels import field_step as fs
from ampmodel.pulsed.passes import MediumState, StepOutcome, fluence_peaks

# Energy fraction of the angular spectrum ignored when sizing the sub-steps of a propagation.
SPECTRAL_TAIL = 1e-6
MAX_SUBSTEPS = 512
EDGE_ZONE = (1.0 - kd.CLEAR_FRACTION) / 2.0     # absorbing zone, as a fraction of the window width


@dataclass
class FieldBeam:
    """The pulsed beam as a field on the grid, and what its propagation needs.

    field : (Nt, Ny, Nx) complex128, |E|² = fluence of each time slice (J/m²)
    b_integral : (Nt, Ny, Nx) accumulated B-integral (rad)
    edge : (Ny, Nx) amplitude mask of the absorbing window edge
    kx, ky : angular spatial frequencies (rad/m), FFT order
    """

    field: np.ndarray
    b_integral: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    dt_s: float
    wavelength_m: float
    width_m: float
    workers: int = -1
    edge: np.ndarray | None = None
    kx: np.ndarray | None = None
    ky: np.ndarray | None = None
    fft_count: int = 0                        # 2-D transforms of one time slice each, for the benchmark
    _transfer: dict = dataclass_field(default_factory=dict)

    def __post_init__(self):
        if self.edge is None:
            self.edge = kd.edge_mask(self.x_m, self.y_m, self.width_m)
        if self.kx is None:
            self.kx = kd.angular_frequencies(len(self.x_m), self.width_m)
            self.ky = kd.angular_frequencies(len(self.y_m), self.width_m)

    @property
    def fluence(self) -> np.ndarray:
        """(Nt, Ny, Nx) |E|², the fluence of each time slice (J/m²); a new array."""
        return fluence_of(self.field)

    @property
    def pixel_area_m2(self) -> float:
        return float((self.x_m[1] - self.x_m[0]) * (self.y_m[1] - self.y_m[0]))

    def energy_J(self) -> float:
        return float(fluence_of(self.field).sum() * self.pixel_area_m2)

    def transfer(self, dz_m: float, index: float) -> np.ndarray:
        """The transfer function of a step dz in index n (cached)."""
        key = (float(dz_m), float(index))
        if key not in self._transfer:
            self._transfer[key] = kd.transfer_function(self.kx, self.ky, self.wavelength_m, index, dz_m)
        return self._transfer[key]


def fluence_of(field: np.ndarray) -> np.ndarray:
    """|E|² = Re² + Im² of a complex field (real array of the same shape; a C-contiguous complex128 field
    a few rows at a time, without whole-field temporaries)."""
    if field.dtype != np.complex128 or field.ndim < 2 or not field.flags.c_contiguous:
        return field.real ** 2 + field.imag ** 2
    flat = field.reshape(-1, field.shape[-1])
    out = np.empty(flat.shape)
    rows = fs.chunk_rows(len(flat), flat.shape[1])
    scratch = np.empty((min(rows, len(flat)), 2 * flat.shape[1]))
    for r0 in range(0, len(flat), rows):
        part = flat[r0:r0 + rows]
        fs.fluence_into(part, out[r0:r0 + rows], scratch[:len(part)])
    return out.reshape(field.shape)


def start_beam(seed_field: np.ndarray, weights: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, dt_s: float,
               wavelength_m: float, width_m: float, workers: int = -1) -> FieldBeam:
    """The beam at the start: slice t carries sqrt(weight_t)·E_seed, so that |E_t|² = weight_t·F_seed."""
    field = np.sqrt(weights)[:, None, None] * seed_field[None, :, :]
    return FieldBeam(field=field.astype(np.complex128), b_integral=np.zeros(field.shape), x_m=x_m, y_m=y_m,
                     dt_s=dt_s, wavelength_m=wavelength_m, width_m=width_m, workers=workers)


# ----------------------------------------------------------------------------------------------
# propagation
# ----------------------------------------------------------------------------------------------

def _tail_wavenumber(power: np.ndarray, k: np.ndarray, tail: float) -> float:
    """Smallest |k| such that the power at larger |k| is below ``tail`` of the whole (1-D marginal)."""
    order = np.argsort(np.abs(k))
    cum = np.cumsum(power[order])
    total = cum[-1]
    if not total > 0:
        return 0.0
    i = int(np.searchsorted(cum, (1.0 - tail) * total))
    return float(np.abs(k[order][min(i, len(k) - 1)]))


def spectral_reach(beam: FieldBeam, tail: float = SPECTRAL_TAIL, energies: np.ndarray | None = None) -> float:
    """Largest of |kx|, |ky| (rad/m) outside which lies less than ``tail`` of the power of the most
    energetic time slice (one 2-D FFT); ``energies``: each slice's Σ|E|², if the caller has them."""
    if energies is None:
        energies = fluence_of(beam.field).sum(axis=(1, 2))
    t = int(np.argmax(energies))
    spec = fluence_of(scipy.fft.fft2(beam.field[t], workers=beam.workers))
    return max(_tail_wavenumber(spec.sum(axis=0), beam.kx, tail), _tail_wavenumber(spec.sum(axis=1), beam.ky, tail))


def substeps(beam: FieldBeam, length_m: float, index: float, reach: float | None = None) -> int:
    """Sub-steps for a propagation of ``length_m`` in index n: the steepest significant ray crosses
    at most half the absorbing zone per sub-step (module docstring)."""
    if length_m == 0.0:
        return 1
    reach = spectral_reach(beam) if reach is None else reach
    k = 2.0 * math.pi * index / beam.wavelength_m
    if reach >= k:
        return MAX_SUBSTEPS
    tan_angle = reach / math.sqrt(k * k - reach * reach)
    allowed = 0.5 * EDGE_ZONE * beam.width_m
    return int(min(MAX_SUBSTEPS, max(1, math.ceil(abs(length_m) * tan_angle / allowed))))


def advance(beam: FieldBeam, length_m: float, index: float, steps: int = 1) -> None:
    """Propagate the whole field by ``length_m`` in index n, in ``steps`` equal angular-spectrum steps,
    each followed by the absorbing window edge (in place, a chunk of time slices at a time, in
    ``beam.workers`` threads: the time slices diffract independently)."""
    transfer = beam.transfer(length_m / steps, index)
    beam.field = np.ascontiguousarray(beam.field)
    nt = beam.field.shape[0]
    rows = fs.chunk_rows(nt, beam.field.shape[1] * beam.field.shape[2])
    starts = list(range(0, nt, rows))

    def stage(thread: int, c: int, j: int) -> None:
        fs.propagate_chunk(beam.field[starts[c]:starts[c] + rows], transfer, beam.edge, steps)

    chunks.run_chunks(len(starts), 1, stage, chunks.thread_count(beam.workers), ordered=False)
    beam.fft_count += 2 * nt * steps


# ----------------------------------------------------------------------------------------------
# step actions
# ----------------------------------------------------------------------------------------------

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

    The time slices go through the medium a chunk at a time (kernels.field_step.chunk_rows slices,
    which stay in the processor cache through the transforms and the gain step), in ``beam.workers``
    threads as a wavefront (ampmodel/chunks.py): a chunk's gain step in a z-slice follows the chunk
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
    pixels = beam.field.shape[1] * beam.field.shape[2]
    field = beam.field.reshape(nt, pixels)
    mask = medium.mask.ravel()
    outside = np.flatnonzero(~mask)
    rows = fs.chunk_rows(nt, pixels)
    starts = list(range(0, nt, rows))

    # entering: energy and peaks, then the clipping, chunk by chunk; each slice's energy after it
    entry = np.zeros(pixels)                                 # Σ_t |E|² per pixel
    slice_energy = np.empty(nt)
    f_work, scratch = np.empty((rows, pixels)), np.empty((rows, 2 * pixels))
    peak_i = 0.0
    for t0 in starts:
        e = field[t0:t0 + rows]
        f = fs.fluence_into(e, f_work[:len(e)], scratch[:len(e)])
        entry += f.sum(axis=0)
        peak_i = max(peak_i, float(f.max()) if f.size else 0.0)
        if outside.size:
            np.copyto(e, 0.0, where=~mask)
            np.copyto(f, 0.0, where=~mask)
        f.sum(axis=1, out=slice_energy[t0:t0 + len(e)])
    del f_work, scratch
    e_in = float(entry.sum())
    clipped = float(entry[outside].sum())
    peak_f = float(entry.max()) if entry.size else 0.0

    fsat = medium.saturation_fluence_J_m2
    dz = medium.slice_length_m
    half_loss = float(np.exp(-0.5 * medium.loss_per_m * dz))
    b_coef = 2.0 * np.pi / beam.wavelength_m * medium.n2_m2_W * dz / beam.dt_s
    kerr = b_coef > 0.0
    nz = medium.ln_gain.shape[0]
    order = list(range(nz - 1, -1, -1)) if reverse else list(range(nz))
    gain_rows = medium.ln_gain.reshape(nz, pixels)
    n_sub = substeps(beam, dz, index, spectral_reach(beam, energies=slice_energy))
    half, full = beam.transfer(0.5 * dz / n_sub, index), beam.transfer(dz / n_sub, index)
    threads = chunks.thread_count(beam.workers)
    constants = fs.slice_constants(medium.mask, fsat, half_loss, b_coef, beam.edge)
    works = [fs.ChunkWork(rows, pixels, constants.inside.size) for _ in range(min(threads, len(starts)))]
    plane = np.zeros((nz, pixels))                           # Σ_t of the fluence leaving each gain step
    sums = np.zeros((len(starts), nz, 5))                    # ChunkSums of each chunk and z-slice
    final = np.zeros(len(starts))                            # Σ|E|² of each chunk at the exit
    b_step = np.zeros(len(starts))
    b_all = beam.b_integral.reshape(nt, pixels)

    def stage(thread: int, c: int, s: int) -> None:
        """Stage 2j: the diffraction step before gain step j (or the last half step, j = nz);
        stage 2j + 1: gain step j (the ordered one)."""
        j = s // 2
        t0 = starts[c]
        e = beam.field[t0:t0 + rows]
        work = works[thread]
        inc = work.b_increment[:len(e)] if kerr else None
        if s % 2:
            sums[c, j] = fs.gain_kerr_chunk(e.reshape(len(e), pixels), gain_rows[order[j]], constants, work,
                                            plane[j], inc)
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
            b_step[c] = float(inc.max()) if inc.size else 0.0

    done = [0]

    def progress(s: int) -> None:                            # a z-slice's worth: every chunk through one
        if s % 2:
            done[0] += 1
            if done[0] % len(starts) == 0:
                tick()

    chunks.run_chunks(len(starts), 2 * nz + 1, stage, threads, ordered=lambda s: s % 2 == 1,
                      after_stage=progress if tick is not None else None)
    beam.fft_count += 2 * nt * n_sub * (nz + 1)

    edge_lost = gained = passive = 0.0
    for c, t0 in enumerate(starts):                         # in order: the same sums whatever the threads
        energy = float(slice_energy[t0:t0 + rows].sum())
        for j in range(nz):
            s_in, s_out, s_gained, s_passive, s_peak = sums[c, j]
            edge_lost += energy - s_in
            energy = s_out
            gained += s_gained
            passive += s_passive
            peak_i = max(peak_i, s_peak)
        edge_lost += energy - final[c]
    if nz:
        peak_f = max(peak_f, float(plane.max()) if plane.size else 0.0)
    return StepOutcome(e_in * area, float(final.sum()) * area, clipped_J=clipped * area,
                       passive_loss_J=passive * area, extracted_J=gained * area, peak_fluence_J_m2=peak_f,
                       peak_intensity_W_m2=peak_i / beam.dt_s, b_integral_step_rad=float(b_step.max()),
                       extras={"edge_absorbed_J": edge_lost * area, "substeps": n_sub})


def _simple(beam: FieldBeam, change: Callable[[], dict | None]) -> StepOutcome:
    """Run ``change`` on the field; the energy difference is returned as passive loss by default,
    or as the keys ``change`` returns."""
    fluence = fluence_of(beam.field)
    e_in = float(fluence.sum() * beam.pixel_area_m2)
    peak_f, peak_i = fluence_peaks(fluence, beam.dt_s)
    extras = change() or {}
    e_out = beam.energy_J()
    kind = extras.pop("_loss", "passive")
    outcome = StepOutcome(e_in, e_out, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i, extras=extras)
    lost = e_in - e_out
    if kind == "clipped":
        outcome.clipped_J = lost
    elif kind == "edge":
        outcome.extras["edge_absorbed_J"] = lost
    else:
        outcome.passive_loss_J = lost
    return outcome


def field_loss(beam: FieldBeam, step: Step) -> StepOutcome:
    """A lumped loss: the amplitude times sqrt(transmission)."""
    def change():
        beam.field *= math.sqrt(step.transmission)
    return _simple(beam, change)


def field_aperture(beam: FieldBeam, step: Step) -> StepOutcome:
    """A centred aperture, hard (grey rim pixels) or soft (super-Gaussian ``order``): the field times
    the amplitude transmission of :func:`~ampmodel.kernels.diffraction.aperture_amplitude`."""
    def change():
        beam.field *= kd.aperture_amplitude(beam.x_m, beam.y_m, step.shape, step.diameter_m, step.order)
        return {"_loss": "clipped"}
    return _simple(beam, change)


def field_space(beam: FieldBeam, step: Step) -> StepOutcome:
    """Free space of ``length_m`` in air, in sub-steps with the absorbing edge (module docstring)."""
    def change():
        n = substeps(beam, step.length_m, 1.0)
        advance(beam, step.length_m, 1.0, n)
        return {"_loss": "edge", "substeps": n}
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
    def change():
        beam.field *= kd.lens_phase(beam.x_m, beam.y_m, beam.wavelength_m, step.focal_m)
        dx = float(beam.x_m[1] - beam.x_m[0])
        r = _beam_radius(beam, tail=1e-4)
        k = 2.0 * math.pi / beam.wavelength_m
        local = k * r / abs(step.focal_m)
        limit = kd.CLEAR_FRACTION * math.pi / dx
        out = {"_loss": "passive"}
        if local > limit:
            points = _fast_even(math.ceil(beam.width_m * local / (kd.CLEAR_FRACTION * math.pi)))
            out["warnings"] = [f"the lens phase is undersampled at the beam's edge (r = {r * 1e3:.3g} mm): its "
                               f"local spatial frequency is {local / limit:.2g} times 80 % of the grid's "
                               f"sampling limit; grid.points = {points} (at this width) would resolve it"]
        return out
    return _simple(beam, change)


def field_filter(beam: FieldBeam, step: Step) -> StepOutcome:
    """A spatial filter (lens, pinhole in the focal plane, lens; a 4f system): the pinhole is a mask on
    the angular spectrum, |k_t| <= k·a/f, and the image is inverted
    (:func:`~ampmodel.kernels.diffraction.pinhole_filter`, which explains the method)."""
    def change():
        radius = step.pinhole_diameter_m / 2.0
        beam.field, pad, passed = kd.pinhole_filter(beam.field, beam.width_m, beam.wavelength_m, step.focal_m,
                                                    radius, beam.workers)
        beam.fft_count += 2 * beam.field.shape[0]
        dx = float(beam.x_m[1] - beam.x_m[0])
        focal_half_width = beam.wavelength_m * step.focal_m / (2.0 * dx)   # the grid's reach in the focal plane
        out = {"_loss": "clipped", "padding": pad, "pinhole_transmission": passed}
        if radius >= focal_half_width:
            out["warnings"] = [f"the pinhole (radius {radius * 1e6:.3g} µm) is wider than the focal plane the grid "
                               f"reaches (half-width λf/(2dx) = {focal_half_width * 1e6:.3g} µm): it removes "
                               "nothing on this grid; raise grid.points or narrow the pinhole"]
        return out
    return _simple(beam, change)


def field_relay(beam: FieldBeam, step: Step) -> StepOutcome:
    """An ideal 4f relay (afocal telescope) of magnification M: the inverted, scaled image
    E_out(x, y) = E_in(−x/M, −y/M)/M, without added wavefront curvature (a 4f relay has none; its
    ray matrix is [[−M, 0], [0, −1/M]]). M = 1 flips the pixels exactly; otherwise the field is
    interpolated (cubic splines on the real and imaginary parts) and each time slice is rescaled to
    the energy of the part of the input that the image keeps inside the window (energy conserved;
    the rest is counted as clipped by the window). Relay lenses and their apertures are ideal."""
    def change():
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
        return {"_loss": "clipped"}
    return _simple(beam, change)


FIELD_STEP_ACTIONS: dict[str, Callable[[FieldBeam, Step], StepOutcome]] = {
    "loss": field_loss,
    "aperture": field_aperture,
    "space": field_space,
    "lens": field_lens,
    "filter": field_filter,
    "relay": field_relay,
}


# ----------------------------------------------------------------------------------------------
# the same optics on the fluence path (no diffraction)
# ----------------------------------------------------------------------------------------------

def fluence_aperture(beam, step: Step) -> StepOutcome:
    """Aperture on the fluence path: a hard edge as ``layout.apply_aperture``; a soft edge (``order``)
    multiplies the fluence by its transmission T."""
    from ampmodel.pulsed.passes import apply_aperture
    if step.order is None:
        return apply_aperture(beam, step)
    e_in = beam.energy_J()
    peak_f, peak_i = fluence_peaks(beam.fluence, beam.dt_s)
    beam.fluence *= kd.aperture_amplitude(beam.x_m, beam.y_m, step.shape, step.diameter_m, step.order) ** 2
    e_out = beam.energy_J()
    return StepOutcome(e_in, e_out, clipped_J=e_in - e_out, peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i)


def fluence_relay(beam, step: Step) -> StepOutcome:
    """Relay on the fluence path: the inverted image at magnification M, F_out(x) = F_in(−x/M)/M²
    (geometrical imaging; linear interpolation keeps it non-negative), energy conserved as in
    :func:`field_relay`."""
    e_in = beam.energy_J()
    peak_f, peak_i = fluence_peaks(beam.fluence, beam.dt_s)
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


FLUENCE_STEP_ACTIONS = {"aperture": fluence_aperture, "relay": fluence_relay}


# ----------------------------------------------------------------------------------------------
# grid checks
# ----------------------------------------------------------------------------------------------

def _fast_even(n: int) -> int:
    """The next FFT-friendly even number of points >= n."""
    m = scipy.fft.next_fast_len(max(int(n), 2))
    while m % 2:
        m = scipy.fft.next_fast_len(m + 1)
    return m


def _outside_fraction(power_x: np.ndarray, power_y: np.ndarray, coord_x: np.ndarray, coord_y: np.ndarray,
                      bound: float) -> float:
    total = power_x.sum()
    if not total > 0:
        return 0.0
    return float((power_x[np.abs(coord_x) > bound].sum() + power_y[np.abs(coord_y) > bound].sum()) / total)


@dataclass
class GridCheck:
    """How close the beam comes to the window and to the sampling limit after a step.

    edge_fraction : energy fraction beyond the clear central 80 % of the window (x or y)
    spectrum_fraction : energy fraction of the angular spectrum beyond 80 % of the sampling limit
    width_needed_m, points_for_width : a window that holds the beam (at the same pixel size)
    points_for_spectrum : points that resolve the angular spectrum at this width
    saturated_width, saturated_spectrum : the beam (its spectrum) fills the whole window (band), so
        the suggestion is a lower bound
    """

    edge_fraction: float
    spectrum_fraction: float
    width_needed_m: float
    points_for_width: int
    points_for_spectrum: int
    saturated_width: bool = False
    saturated_spectrum: bool = False


def check_grid(beam: FieldBeam, tail: float = 1e-5, fluence: np.ndarray | None = None) -> GridCheck:
    """Measure where the beam and its angular spectrum are against the window and the sampling limit.

    The window figure uses the time-integrated fluence; the spectrum that of the most energetic time
    slice (one 2-D FFT). The suggested grid holds all but ``tail`` of the energy inside its clear
    region (80 % of the window, of the sampling limit). ``fluence``: the beam's |E|², if the caller
    has it.
    """
    n = len(beam.x_m)
    dx = float(beam.x_m[1] - beam.x_m[0])
    f = fluence_of(beam.field) if fluence is None else fluence
    ft = f.sum(axis=0)
    px, py = ft.sum(axis=0), ft.sum(axis=1)
    half_clear = kd.CLEAR_FRACTION * beam.width_m / 2.0
    edge = _outside_fraction(px, py, beam.x_m, beam.y_m, half_clear)
    reach_x = max(_tail_wavenumber(px, beam.x_m, tail), _tail_wavenumber(py, beam.y_m, tail))
    saturated_width = reach_x >= 0.9 * beam.width_m / 2.0
    width_needed = max(beam.width_m, 2.0 * reach_x / kd.CLEAR_FRACTION * 1.05)
    if saturated_width:
        width_needed = max(width_needed, 2.0 * beam.width_m)
    t = int(np.argmax(f.sum(axis=(1, 2))))
    spec = fluence_of(scipy.fft.fft2(beam.field[t], workers=beam.workers))
    sx, sy = spec.sum(axis=0), spec.sum(axis=1)
    k_clear = kd.CLEAR_FRACTION * math.pi / dx
    spectrum = _outside_fraction(sx, sy, beam.kx, beam.ky, k_clear)
    reach_k = max(_tail_wavenumber(sx, beam.kx, tail), _tail_wavenumber(sy, beam.ky, tail))
    saturated_spectrum = reach_k >= 0.9 * math.pi / dx
    points_k = _fast_even(math.ceil(n * max(2.0 if saturated_spectrum else 1.0, 1.05 * reach_k / k_clear)))
    return GridCheck(edge, spectrum, width_needed, _fast_even(math.ceil(width_needed / dx)), points_k,
                     saturated_width, saturated_spectrum)


def grid_warnings(checks: list[tuple[str, GridCheck]], limits: Limits, width_m: float, points: int) -> list[str]:
    """One warning per kind of grid trouble (the worst step named), with a grid that would do."""
    out = []
    worst = max(checks, key=lambda c: c[1].edge_fraction, default=None)
    if worst is not None and worst[1].edge_fraction > limits.window_edge_fraction:
        label, c = worst
        need_w = max(x[1].width_needed_m for x in checks)
        need_p = max(x[1].points_for_width for x in checks)
        bound = "at least " if any(x[1].saturated_width for x in checks) else ""
        out.append(f"grid: the beam reaches the absorbing edge of the {width_m * 1e3:g} mm window ({c.edge_fraction:.1e} "
                   f"of its energy beyond the clear central {100 * kd.CLEAR_FRACTION:g} % after {label}); "
                   f"{bound}grid.width_mm = {need_w * 1e3:.3g} with grid.points = {need_p} (the same pixel size) "
                   "would hold it")
    worst = max(checks, key=lambda c: c[1].spectrum_fraction, default=None)
    if worst is not None and worst[1].spectrum_fraction > limits.sampling_limit_fraction:
        label, c = worst
        need_p = max(x[1].points_for_spectrum for x in checks)
        out.append(f"grid: the beam's angular spectrum reaches the sampling limit of {points} points over "
                   f"{width_m * 1e3:g} mm ({c.spectrum_fraction:.1e} of its energy beyond 80 % of it after {label}); "
                   f"{'at least ' if any(x[1].saturated_spectrum for x in checks) else ''}grid.points = {need_p} at "
                   f"grid.width_mm = {width_m * 1e3:g} would resolve it")
    return out
