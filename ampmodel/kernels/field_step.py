"""The split-step field pass on a chunk of time slices: pure numpy/scipy, in place, single-threaded.

A chunk is a few consecutive time slices of the field, ``e`` (c, Ny, Nx) complex128 (|E|² the fluence of
each slice, J/m²), small enough that its transforms and the gain and Kerr step run in the processor
cache. The caller (pulsed.field_pass.pass_medium_field) takes each chunk through the medium's slices, and runs
several chunks at once in threads; everything here writes only into the chunk, the gain row it is
given and the scratch arrays of its :class:`ChunkWork`.

* :func:`propagate_chunk`: the angular-spectrum step, FFT2, times the transfer function, inverse FFT2,
  in the chunk's own memory, then the absorbing window edge;
* :func:`gain_kerr_chunk`: the gain and Kerr step of one z-slice, fused: |E|² once, Frantz–Nodvik in
  its linear form inside the clear aperture (the time slices in order, the gain row depleted in place),
  one ratio J_out/J_in giving both the amplitude factor sqrt(J_out/J_in) and the logarithmic mean of
  the entering and leaving fluence (the Kerr phase and the B-integral increment), the phase factor from
  its Taylor series, one complex product.

References
----------
Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963); J. W. Goodman, Introduction to Fourier Optics,
section 3.10 (angular spectrum); B = (2π/λ0)·∫ n2·I dz (e.g. W. Koechner, Solid-State Laser
Engineering) with the logarithmic mean of the intensity entering and leaving a slice.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
import scipy.fft

from ampmodel.kernels import fn_pass, fn_spectral
from ampmodel.kernels.diffraction import phase_factor_into

_GUARD_EQUAL = 1e-200     # (r − 1)/ln r -> 1 at r = 1 (as fn_pass.log_mean_accumulate)


# Time slices per chunk: about this many pixel values, so that a chunk (16 bytes a value) and its
# scratch stay in the processor's cache and each numpy call of the gain step is long enough to leave
# the interpreter lock to the other thread most of its time (docs/performance.md, the field path).
CHUNK_VALUES = 65536


def chunk_rows(time_slices: int, pixels: int) -> int:
    """Time slices per chunk: CHUNK_VALUES // pixels, at least 1, at most all of them."""
    return int(max(1, min(time_slices, CHUNK_VALUES // max(pixels, 1))))


class ChunkWork:
    """Scratch arrays of one thread for chunks of up to ``rows`` time slices of ``pixels`` pixels, of
    which ``inside`` lie in the clear aperture: made once per pass, reused for every chunk and slice."""

    def __init__(self, rows: int, pixels: int, inside: int):
        self.f = np.empty((rows, pixels))            # |E|² entering the step
        self.phase = np.empty((rows, pixels))        # Kerr phase of the step (rad)
        self.p2 = np.empty((rows, pixels))
        self.acc = np.empty((rows, pixels))          # Taylor sums
        self.factor = np.empty((rows, pixels), dtype=np.complex128)
        self.b_increment = np.empty((rows, pixels))  # B-integral gathered over the pass (rad)
        self.x = np.empty((rows, inside))            # J/Fsat entering, inside the aperture
        self.u = np.empty((rows, inside))
        self.v = np.empty((rows, inside))
        self.r = np.empty((rows, inside))
        self.w = np.empty((rows, inside))
        self.gain = np.empty(inside)
        self.ln_gain = np.empty(inside)
        self.one = np.empty(inside)
        self.plane = np.empty(pixels)
        self.amp = np.empty((rows, pixels))           # the amplitude factor of the step
        self.amp_outside = None                       # the outside values amp holds (set by a step)
        self.selected = np.empty((rows, pixels), dtype=bool)    # the inside pixels of every row
        self.selected_of = None                       # the inside indices it marks (set by a step)


class ChunkSums(NamedTuple):
    """What a gain and Kerr step of one chunk adds up (fluences in J/m², summed over pixels and slices).

    energy_in, energy_out : Σ|E|² entering and leaving the step
    gained : fluence the gain added (negative where it absorbed); passive : removed by passive loss
    peak_slice_fluence : (rows,) the largest fluence of each time slice of the chunk leaving the step (J/m²)
    """

    energy_in: float
    energy_out: float
    gained: float
    passive: float
    peak_slice_fluence: np.ndarray


def fluence_into(e: np.ndarray, out: np.ndarray, scratch: np.ndarray) -> np.ndarray:
    """out = |E|² = Re² + Im² of a complex (c, P) array (out real (c, P); scratch real (c, 2P))."""
    parts = e.view(np.float64)
    np.square(parts, out=scratch)
    np.add(scratch[:, 0::2], scratch[:, 1::2], out=out)
    return out


def propagate_chunk(e: np.ndarray, transfer: np.ndarray, edge: np.ndarray | None, steps: int = 1,
                    last_edge: bool = True) -> None:
    """``steps`` angular-spectrum steps of a chunk, each IFFT2[FFT2[E]·H] then the edge mask, in place.

    Parameters
    ----------
    e : (c, Ny, Nx) complex128, C-contiguous (a slice of the field along its first axis)
    transfer : (Ny, Nx) complex transfer function of one step (kernels.diffraction.transfer_function)
    edge : (Ny, Nx) real amplitude mask of the absorbing window edge, or None
    steps : number of steps
    last_edge : False leaves the edge of the last step to the caller (:func:`gain_kerr_chunk` folds it
        into its factor)

    References
    ----------
    Goodman, Introduction to Fourier Optics, section 3.10 (angular spectrum propagation).
    """
    for i in range(steps):
        out = scipy.fft.fft2(e, axes=(-2, -1), workers=1, overwrite_x=True)
        if out.ctypes.data != e.ctypes.data:          # not transformed in place: copy back
            e[...] = out
        e *= transfer
        out = scipy.fft.ifft2(e, axes=(-2, -1), workers=1, overwrite_x=True)
        if out.ctypes.data != e.ctypes.data:
            e[...] = out
        if edge is not None and (last_edge or i < steps - 1):
            e *= edge


class SliceConstants(NamedTuple):
    """What the gain and Kerr step of a medium needs besides the field (made once per pass).

    inside, outside : flat pixel indices inside and outside the clear aperture
    fsat : saturation fluence (J/m²); half_loss : transmission of half a slice, exp(−α·dz/2)
    b_coef : k0·n2·dz/dt (rad per J/m² of fluence); 0 without n2
    edge : (P,) amplitude mask of the absorbing window edge that the step applies first (the
        propagation before it left it out), or None
    edge2, edge_inside : edge², edge at the inside pixels
    amp_outside : (P,) the amplitude factor outside the aperture, edge·half_loss
    """

    inside: np.ndarray
    outside: np.ndarray
    fsat: float
    half_loss: float
    b_coef: float
    edge: np.ndarray | None
    edge2: np.ndarray | None
    edge_inside: np.ndarray | None
    amp_outside: np.ndarray


def slice_constants(mask: np.ndarray, fsat: float, half_loss: float, b_coef: float,
                    edge: np.ndarray | None) -> SliceConstants:
    """SliceConstants from the clear aperture (Ny, Nx) bool and the edge mask (Ny, Nx) (or None)."""
    flat = mask.ravel()
    inside, outside = np.flatnonzero(flat), np.flatnonzero(~flat)
    if edge is None:
        return SliceConstants(inside, outside, fsat, half_loss, b_coef, None, None, None,
                              np.full(flat.size, half_loss))
    edge = np.ascontiguousarray(edge, dtype=float).ravel()
    return SliceConstants(inside, outside, fsat, half_loss, b_coef, edge, edge * edge, edge[inside],
                          edge * half_loss)


def gain_kerr_chunk(e: np.ndarray, ln_gain: np.ndarray, k: SliceConstants, work: ChunkWork, plane: np.ndarray,
                    b_increment: np.ndarray | None,
                    spectral: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None) -> ChunkSums:
    """The gain and Kerr step of one z-slice on a chunk of time slices, in place.

    First the absorbing edge (``k.edge``, if the propagation left it to this step). Then half the
    passive loss, Frantz–Nodvik on |E|² of each time slice in order, half the loss: inside the clear
    aperture (``k.inside``) with the gain row ``ln_gain`` depleted in place; outside it the loss alone
    (no gain medium). The amplitude is scaled by sqrt(J_out/J_in) and, with n2 (``k.b_coef`` > 0), the
    phase advanced by b_coef·J_mean, J_mean the logarithmic mean of the entering and leaving fluence,
    which is also the B-integral increment. The edge, the amplitude and the phase are one factor, and
    the field is multiplied once.

    Parameters
    ----------
    e : (c, P) complex128 field of the chunk's time slices (P = Ny·Nx pixels); changed in place
    ln_gain : (P,) g·dz of the gain slice, depleted in place inside the aperture
    k : SliceConstants of the medium
    work : the thread's scratch arrays (:class:`ChunkWork`, at least c rows)
    plane : (P,) += Σ over the chunk's time slices of the fluence leaving (the peak fluence per plane)
    b_increment : (c, P) += the Kerr phase (rad), or None without n2
    spectral : for time slices that are not all at the material's wavelength, the chunk's rows of
        (Fsat0/Fsat_t, a_t, c_t, floor_t) of :func:`~ampmodel.kernels.fn_spectral.amplify_block_spectral`,
        else None

    Returns
    -------
    ChunkSums (the energy entering is counted after the edge)

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963): the linear form u = exp(J/Fsat) − 1, u_out = G·u,
    G <- (G + u_out)/(1 + u_out) (kernels/frantz_nodvik.py); the logarithmic mean (b − a)/ln(b/a) =
    a·(r − 1)/ln r, r = b/a (kernels/fn_pass.py).

    Notes
    -----
    One long function on purpose (a fused hot kernel): the edge, loss, gain, amplitude and Kerr
    phase are computed in one pass over the chunk's scratch arrays while they are in cache, and the
    field is multiplied once; split into calls, each would read the chunk again (docs/performance.md,
    the field path).
    """
    rows = e.shape[0]
    inside, fsat, half_loss, b_coef = k.inside, k.fsat, k.half_loss, k.b_coef
    lossy = half_loss != 1.0
    loss2 = half_loss * half_loss
    kerr = b_coef > 0.0
    f = fluence_into(e, work.f[:rows], work.factor[:rows].view(float))
    if k.edge2 is not None:
        f *= k.edge2
    row = f.sum(axis=0, out=work.plane)                    # Σ_t |E|² per pixel
    energy_in = float(row.sum())
    f_row = f.max(axis=1) if f.size else np.zeros(rows)     # the largest fluence of each time slice
    f_max = float(f_row.max()) if f_row.size else 0.0
    gained = passive = 0.0
    n_in = inside.size
    amp = None                                              # the amplitude factor, where not 1
    if lossy or n_in or k.edge is not None:
        if work.amp_outside is not k.amp_outside:           # the outside values: once per pass
            work.amp[...] = k.amp_outside
            work.amp_outside = k.amp_outside
        amp = work.amp[:rows]                               # inside values: set below, every step
    phase = None
    if kerr:
        psi = (loss2 - 1.0) / math.log(loss2) if lossy else 1.0     # (r − 1)/ln r at r = loss²
        phase = np.multiply(f, b_coef * psi, out=work.phase[:rows])   # outside: the loss alone
    largest = f_max * psi if kerr else 0.0                  # bounds the phase, over b_coef
    peak = f_row * loss2
    if n_in:
        if work.selected_of is not inside:                  # a boolean mask of the (rows, P) block: a
            work.selected[...] = False                      # scatter into it costs less than row by row
            work.selected[:, inside] = True
            work.selected_of = inside
        selected = work.selected[:rows]
        x = np.take(f, inside, axis=1, out=work.x[:rows], mode="clip")
        x /= fsat
        lit_in = float(x.sum()) if lossy else 0.0
        g = np.take(ln_gain, inside, out=work.ln_gain, mode="clip")
        lowest = float(x.min())
        mean = None
        linear = spectral is None and _linear_valid(x, g, half_loss, lowest, f_max / fsat)
        if linear:
            xo = _fn_linear(x, g, half_loss, work, rows)   # J_out/Fsat before the second half loss
            d = work.u[:rows]                               # with loss: J_in·half_loss (the map's input)
            np.subtract(xo, d if lossy else x, out=d)       # J_out − J_in of each update
            spent = d.sum(axis=0, out=work.gain)
            g -= spent                                      # Fsat·Δln G = −ΔJ
            gained = float(spent.sum()) * fsat
            if lossy:
                passive = (lit_in + float(xo.sum())) * (1.0 - half_loss) * fsat
                xo *= half_loss
        else:                                               # the log-domain kernel (any fluence and gain)
            xo = work.v[:rows]
            xo[...] = x
            if kerr:
                mean = work.w[:rows]
                mean[...] = 0.0
            if spectral is None:
                oc = fn_pass.amplify_block(xo, g[None, :], half_loss, mean, linear=False)
            else:
                ratio, scale, offset, floor = spectral
                oc = fn_spectral.amplify_block_spectral(xo, g[None, :], ratio, scale, offset, half_loss, mean, floor)
            if lossy:
                gained, passive = oc.gained * fsat, oc.passive_loss * fsat
        ln_gain[inside] = g
        out_sum = xo.sum(axis=0, out=work.one)
        if not (linear or lossy):                           # the log-domain kernel
            gained = (float(out_sum.sum()) - float(x.sum())) * fsat
        x_row = xo.max(axis=1)
        x_high = float(x_row.max())
        r = work.r[:rows]                                   # J_out/J_in (0 where nothing entered)
        if lowest > 0.0:
            np.divide(xo, x, out=r)
        else:
            r[...] = 0.0
            np.divide(xo, x, out=r, where=x > 0.0)
        rooted = False
        if kerr:
            if mean is None:                                # r <- sqrt(r) from the mean's ln r
                mean = _log_mean_root(x, r, work.u[:rows], work.w[:rows])
                rooted = True
            mean *= b_coef * fsat
            phase[selected] = mean.reshape(-1)
            # the logarithmic mean lies between J_in and J_out
            largest = max(largest, x_high * fsat, f_max)
        if not rooted:
            np.sqrt(r, out=r)                               # the amplitude factor inside
        if k.edge_inside is not None:
            r *= k.edge_inside
        amp[selected] = r.reshape(-1)
        if lossy:
            passive += (energy_in - lit_in * fsat) * (1.0 - loss2)
        # what leaves, per pixel Σ_t, and the largest slice fluence (outside: the entering times loss²)
        if lossy:
            row *= loss2
        out_sum *= fsat
        row[inside] = out_sum
        peak_in = x_row * fsat
        if np.any(peak > peak_in):                          # the largest may be outside the aperture
            peak = (np.take(f, k.outside, axis=1, mode="clip").max(axis=1) * loss2 if k.outside.size
                    else np.zeros(rows))
        peak = np.maximum(peak, peak_in)
    else:
        if lossy:
            passive = energy_in * (1.0 - loss2)
        row *= loss2
    # one factor: amplitude·exp(i·phase)
    if kerr:
        b_increment += phase
        factor = phase_factor_into(phase, work.factor[:rows], work.p2[:rows], work.acc[:rows], f, amp,
                                   largest * b_coef)
        e *= factor
    elif amp is not None:
        e *= amp
    plane += row
    return ChunkSums(energy_in, float(row.sum()), gained, passive, peak)


def _linear_valid(x: np.ndarray, ln_gain: np.ndarray, half_loss: float, lowest: float, highest: float) -> bool:
    """fn_pass.linear_form_valid for one gain slice, its quick sufficient test first (every slice
    carries fluence: the largest possible x and the smallest attenuated one stay in range; ``highest``
    bounds x from above)."""
    if x.size == 0:
        return True
    if lowest > 0.0:
        pos = max(float(ln_gain.max()), 0.0)
        neg = min(float(ln_gain.min()), 0.0) + 2.0 * math.log(half_loss)
        if x.shape[0] * highest + pos <= fn_pass.LINEAR_MAX_EXPONENT \
                and math.log(lowest) + neg > fn_pass.LINEAR_MIN_LOG_FLUENCE:
            return True
    return fn_pass.linear_form_valid(x, ln_gain[None, :], half_loss)


def _fn_linear(x: np.ndarray, ln_gain: np.ndarray, half_loss: float, work: ChunkWork, rows: int) -> np.ndarray:
    """Frantz–Nodvik in the linear form, the time slices of the chunk in order, for one gain slice.

    x : (c, C) J/Fsat entering; ln_gain : (C,) (not changed here: the caller books the energy).
    Returns J_out/Fsat before the second half loss (work.v); with loss, work.u holds x·half_loss."""
    u, v, out = work.u[:rows], work.v[:rows], work.r[:rows]
    if half_loss != 1.0:
        np.multiply(x, half_loss, out=u)
        np.expm1(u, out=v)
    else:
        np.expm1(x, out=v)
    gain, one = work.gain, work.one
    np.exp(ln_gain, out=gain)
    for t in range(rows):                                   # u_out = G·u, G <- (G + u_out)/(1 + u_out)
        np.multiply(gain, v[t], out=out[t])
        if t == rows - 1:                                   # the caller depletes ln G from the energy
            break
        gain += out[t]
        np.add(out[t], 1.0, out=one)
        gain /= one
    return np.log1p(out, out=v)


def _log_mean_root(x: np.ndarray, r: np.ndarray, work1: np.ndarray, work2: np.ndarray) -> np.ndarray:
    """x·(r − 1)/ln r, the logarithmic mean of x and r·x (x where r = 1, 0 where r = 0), into work2; and
    r replaced by sqrt(r), computed as exp(ln r / 2) from the mean's ln r (an exp and a product cost
    less than numpy's sqrt; within about |ln r|·1e-16 relative of it; r = 0 gives 0).

    r − 1 and ln r come from the same rounded r (accurate to a few ulp even where r is within 1e-16
    of 1); the guard makes r = 1 give x (fn_pass.log_mean_accumulate)."""
    with np.errstate(divide="ignore"):
        np.log(r, out=work1)
    np.subtract(r, 1.0, out=work2)
    work2 += _GUARD_EQUAL
    np.multiply(work1, 0.5, out=r)
    np.exp(r, out=r)
    work1 += _GUARD_EQUAL
    np.divide(work2, work1, out=work2)
    work2 *= x
    return work2
