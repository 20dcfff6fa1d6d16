"""The field path (grid.diffraction = true): the beam as a complex field, and free-space propagation.

The beam is ``field`` (Nt, Ny, Nx) complex128, one transverse field per time slice, normalised so
that |E|² is the fluence (J/m²) the slice carries: the fluence bookkeeping is the same as on the
fluence path (``state.BeamState.fluence`` = |E|²), the power of slice t at a pixel is |E|²/dt and
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
from dataclasses import dataclass
from dataclasses import field as dataclass_field

import numpy as np
import scipy.fft

from ampmodel.beam import chunks
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels import field_step as fs
from ampmodel.kernels.pulse_shape import slice_factors

# Energy fraction of the angular spectrum ignored when sizing the sub-steps of a propagation.
ANGULAR_TAIL = 1e-6
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
    peak_factor: np.ndarray | None = None     # (Nt,) peak over mean power inside each time slice (BeamState)
    _transfer: dict = dataclass_field(default_factory=dict)

    def peak_factors(self) -> np.ndarray:
        """(Nt,) the factor from a time slice's mean to its peak (ones where the beam has none)."""
        return slice_factors(self.peak_factor, self.field.shape[0])

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

def tail_reach(power: np.ndarray, k: np.ndarray, tail: float) -> float:
    """Smallest |k| such that the power at larger |k| is below ``tail`` of the whole (1-D marginal)."""
    order = np.argsort(np.abs(k))
    cum = np.cumsum(power[order])
    total = cum[-1]
    if not total > 0:
        return 0.0
    i = int(np.searchsorted(cum, (1.0 - tail) * total))
    return float(np.abs(k[order][min(i, len(k) - 1)]))


def spectral_reach(beam: FieldBeam, tail: float = ANGULAR_TAIL, energies: np.ndarray | None = None) -> float:
    """Largest of |kx|, |ky| (rad/m) outside which lies less than ``tail`` of the power of the most
    energetic time slice (one 2-D FFT); ``energies``: each slice's Σ|E|², if the caller has them."""
    if energies is None:
        energies = fluence_of(beam.field).sum(axis=(1, 2))
    t = int(np.argmax(energies))
    spec = fluence_of(scipy.fft.fft2(beam.field[t], workers=beam.workers))
    return max(tail_reach(spec.sum(axis=0), beam.kx, tail), tail_reach(spec.sum(axis=1), beam.ky, tail))


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


# ----------------------------------------------------------------------------------------------
# the same optics on the fluence path (no diffraction)
# ----------------------------------------------------------------------------------------------


# ----------------------------------------------------------------------------------------------
# grid checks
# ----------------------------------------------------------------------------------------------


def start_field(seed, x_m: np.ndarray, y_m: np.ndarray, total: float, source: str) -> np.ndarray:
    """The seed's field (Ny, Nx) at the start plane holding ``total`` (J, or W in cw) as |E|² summed over
    the pixels (``beam_shapes.seed_start_field``: waist, curvature, M², a measured profile and
    wavefront); a seed that cannot be formed on the grid is bad input (ConfigError naming ``source``)."""
    from ampmodel.config.checks import ConfigError
    from ampmodel.kernels import beam_shapes
    shape, phase = seed.measured.on_grid(x_m, y_m) if seed.measured is not None else (None, None)
    try:
        return beam_shapes.seed_start_field(x_m, y_m, seed.profile, seed.diameter_m, seed.order, total,
                                            seed.wavelength_m, waist_m=seed.waist_m, curvature_m=seed.curvature_m,
                                            m_squared=seed.m_squared, screen_seed=seed.phase_screen_seed,
                                            shape=shape, phase=phase)
    except ValueError as exc:
        raise ConfigError([f"{source}: seed: {exc}"]) from None
