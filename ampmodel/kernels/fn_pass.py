"""One pass of a sliced pulse through a stack of gain slices, for a block of pixels: the hot loop.

A block holds C pixels (the caller gathers them from the clear aperture): the pulse as
``x[t, p] = J/Fsat`` (fluence of time slice t in units of the saturation fluence) and the medium as
``ln_gain[k, p] = g·dz``, slice k being the k-th the beam meets. For each time slice in order and each
gain slice in order, per pixel (Frantz–Nodvik, J. Appl. Phys. 34, 2346 (1963)):

    x_out = ln[1 + G·(exp(x_in) − 1)],    ln G <- ln G − (x_out − x_in).

Every (t, k) order that respects "slice t meets slice k after slice t − 1 left it and after it left slice
k − 1" performs the same operations on the same numbers; the loops here run over time slices outside and
gain slices inside, so that one time slice's rows stay in the processor cache.

Three evaluations of the same maps:

* :func:`amplify_block`, linear form (default where valid, :func:`linear_form_valid`): with
  u = exp(x) − 1 the map is u_out = G·u_in and G <- G·(1 + u_in)/(1 + u_out)
  (:func:`~ampmodel.kernels.frantz_nodvik.fn_slice_linear`), arithmetic only; one log1p per update gives
  the fluence for the gain bookkeeping, the B-integral and the peaks;
* :func:`amplify_block` with ``linear=False``: the log-domain kernel
  :func:`~ampmodel.kernels.frantz_nodvik.fn_slice`, finite for any fluence and gain (the fallback);
* :func:`amplify_block_composite`, exact composition where no result needs the inside of the medium
  (no B-integral, no passive loss, no absorbing voxel): the maps of the gain slices compose,
  FN(G1)∘FN(G2) = FN(G1·G2), so each time slice's output follows from one composite slice per pixel
  column, ln G_tot = Σ_k ln G_k, depleted time slice after time slice; and the depletion of each gain
  slice follows from the whole pulse, since the maps of the time slices compose too (a pulse leaves a
  slab with FN of its total fluence whatever its shape). Work per pixel: Nt + Nz updates instead of
  Nt·Nz; the per-slice gain left behind (a reported output) is exact.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963). B-integral B = (2π/λ0)·∫ n2·I dz with
the logarithmic mean of the intensity entering and leaving a slice (exact for exponential growth).
"""
from __future__ import annotations

from typing import Callable, NamedTuple

import numpy as np

from ampmodel.kernels.frantz_nodvik import fn_slice, fn_slice_linear

# Range of the linear form (see linear_form_valid): u = exp(x) − 1 must stay a normal float.
LINEAR_MAX_EXPONENT = 600.0       # J/Fsat + Σ ln G (G > 1) along a column: u < exp(600) = 4e260
LINEAR_MIN_LOG_FLUENCE = -640.0   # ln of the smallest non-zero u reachable: above ln(1e-278)
# Composite slices need the per-time-slice intensity to grow (or stay) along the column, so that its
# largest value is at the entrance or the exit: allow ln G below 0 only by round-off (summed along z).
COMPOSITE_MIN_LN_GAIN = -1e-12

_GUARD_ZERO = 1e-300     # keeps b/a finite where a = 0 (a fluence below 1e-284·Fsat is not changed by it)
_GUARD_EQUAL = 1e-200    # (r − 1)/ln r -> 1 at r = 1; |ln r| >= 1.1e-16 elsewhere, so no other effect


class BlockOutcome(NamedTuple):
    """Peaks and passive loss of a block's pass, in units of Fsat.

    peak_plane_fluence : largest total fluence (Σ over time slices) at any plane between gain slices,
        after the entrance (the caller has the entrance)
    peak_slice_fluence : (Nt,) the largest fluence of each time slice at any such plane (its peak over the
        block's pixels); the caller turns it into the true peak with the pulse's shape inside the slice
    passive_loss : fluence removed by passive loss, summed over the block's pixels and time slices
    gained : fluence the gain slices added (negative where they absorbed), summed likewise: the sum of
        every update's J_out − J_in, precise relative to the beam's fluence
    """

    peak_plane_fluence: float
    peak_slice_fluence: np.ndarray
    passive_loss: float
    gained: float


def log_mean_accumulate(acc: np.ndarray, a: np.ndarray, b: np.ndarray, work1: np.ndarray,
                        work2: np.ndarray, positive: bool = False) -> np.ndarray:
    """acc += (b − a)/ln(b/a), the logarithmic mean of a and b, elementwise, in place.

    Written as a·(r − 1)/ln r with r = b/a: r − 1 and ln r come from the same rounded r, so the mean is
    accurate to a few ulp even where b is within 1e-16 of a; the mean is a where b = a, and 0 where a or
    b is 0 (its limit). No branches: two guards below 1e-200 (see the module constants).

    Parameters
    ----------
    acc : (C,) accumulator, updated in place
    a, b : (C,) values >= 0 (fluence or intensity at the two ends of a slice)
    work1, work2 : (C,) work arrays
    positive : the caller knows that every a is > 0 (skips the guard against a = 0)

    References
    ----------
    The mean of a·(b/a)^s over s in [0, 1], i.e. of an exponential between a and b: (b − a)/ln(b/a).
    """
    if positive:
        np.divide(b, a, out=work1)           # r = b/a
    else:
        np.add(a, _GUARD_ZERO, out=work2)
        np.divide(b, work2, out=work1)
    np.log(work1, out=work2)                 # ln r (−inf where b = 0)
    work2 += _GUARD_EQUAL
    work1 -= 1.0
    work1 += _GUARD_EQUAL
    np.divide(work1, work2, out=work1)       # (r − 1)/ln r
    work1 *= a
    acc += work1
    return acc


def log_mean(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """(b − a)/ln(b/a) elementwise (a new array); see :func:`log_mean_accumulate`."""
    a = np.ascontiguousarray(a, dtype=float)
    b = np.ascontiguousarray(b, dtype=float)
    acc = np.zeros_like(a)
    with np.errstate(divide="ignore"):
        log_mean_accumulate(acc.ravel(), a.ravel(), b.ravel(), np.empty(a.size), np.empty(a.size))
    return acc


def linear_form_valid(x: np.ndarray, ln_gain: np.ndarray, half_loss: float = 1.0) -> bool:
    """Whether the linear form keeps every u = exp(x) − 1 of this block's pass a normal float.

    The fluence of a time slice anywhere in the medium is at most the total entering plus the stored
    energy, x <= Σ_t x_in + Σ_k max(ln G_k, 0) (energy conservation), which must stay below
    LINEAR_MAX_EXPONENT; the smallest non-zero slice fluence, attenuated by every absorbing slice and
    the passive loss, must stay above exp(LINEAR_MIN_LOG_FLUENCE).

    Parameters
    ----------
    x : (Nt, C) J/Fsat entering; ln_gain : (Nz, C); half_loss : transmission of half a slice
    """
    if x.size == 0:
        return True
    lowest = float(x.min())
    if lowest > 0.0:                 # a quicker sufficient test: every slice carries fluence
        pos = float(np.clip(ln_gain, 0.0, None).sum(axis=0).max())
        neg = float(np.clip(ln_gain, None, 0.0).sum(axis=0).min()) + 2 * ln_gain.shape[0] * float(np.log(half_loss))
        if (x.shape[0] * float(x.max()) + pos <= LINEAR_MAX_EXPONENT
                and float(np.log(lowest)) + neg > LINEAR_MIN_LOG_FLUENCE):
            return True
    gain_pos = np.clip(ln_gain, 0.0, None).sum(axis=0)
    if float((x.sum(axis=0) + gain_pos).max()) > LINEAR_MAX_EXPONENT:
        return False
    smallest = float(np.min(x, where=x > 0.0, initial=np.inf))
    if not np.isfinite(smallest):
        return True                            # no fluence at all
    attenuation = float(np.clip(ln_gain, None, 0.0).sum(axis=0).min())
    attenuation += 2 * ln_gain.shape[0] * float(np.log(half_loss))
    return float(np.log(smallest)) + attenuation > LINEAR_MIN_LOG_FLUENCE


def composite_valid(ln_gain: np.ndarray) -> bool:
    """Whether no pixel column has an absorbing slice (beyond round-off), so that the intensity of each
    time slice never falls along the column and its largest value is at the entrance or the exit."""
    if ln_gain.size == 0:
        return True
    return float(np.clip(ln_gain, None, 0.0).sum(axis=0).min()) >= COMPOSITE_MIN_LN_GAIN


def amplify_block(x: np.ndarray, ln_gain: np.ndarray, half_loss: float = 1.0, b_sum: np.ndarray | None = None,
                  linear: bool = True, tick: Callable[[float], None] | None = None) -> BlockOutcome:
    """Pass a block of pixels through the gain slices, time slice after time slice, in place.

    Per gain slice: half the passive loss, Frantz–Nodvik, half the passive loss (symmetric splitting).

    Parameters
    ----------
    x : (Nt, C) float64, J/Fsat of each time slice entering; becomes the fluence leaving
    ln_gain : (Nz, C) float64, g·dz of each gain slice in the order the beam meets them (a reversed view
        for a reverse pass); depleted in place by the fluence each update adds (exact energy bookkeeping)
    half_loss : transmission of half a slice, exp(−α·dz/2) (1 without passive loss)
    b_sum : (Nt, C) or None; += Σ_k of the logarithmic mean of the slice's fluence entering and leaving
        gain slice k (units of Fsat; the caller scales it to the B-integral)
    linear : use the linear form (check :func:`linear_form_valid` first) or the log-domain kernel
    tick : called with the fraction of the block done after each time slice (progress)

    Returns
    -------
    BlockOutcome (units of Fsat). Without passive loss and without absorbing slices the fluence of every
    time slice grows along the column, so the peaks are those at the exit and are not tracked per slice.

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963).

    Notes
    -----
    One long function on purpose (a fused hot kernel): the loops over time slices and gain slices
    keep every array of the block in cache and in place; split into calls, each would pass over the
    block again (docs/performance.md, the hot loop in detail).
    """
    nt, c = x.shape
    nz = ln_gain.shape[0]
    lossy = half_loss != 1.0
    monotone = not lossy and composite_valid(ln_gain)
    positive = linear and c > 0 and float(x.min()) > 0.0   # no zero fluence anywhere, ever (linear range)
    total_in = float(x.sum())
    plane = None if monotone else np.zeros((nz, c))      # Σ_t x after each gain slice (peak per plane)
    slice_max = None if monotone else np.zeros(c)
    slice_peak = np.zeros(nt)                            # the largest fluence of each time slice
    passive = np.zeros(c) if lossy else None
    gained = np.zeros(c) if lossy else None
    gain = np.exp(ln_gain) if linear else None           # G of each slice; ln_gain keeps the bookkeeping
    xb, xo, xh = np.empty(c), np.empty(c), np.empty(c)
    u, v, w1, w2 = np.empty(c), np.empty(c), np.empty(c), np.empty(c)
    with np.errstate(divide="ignore"):
        for t in range(nt):
            xb[...] = x[t]                               # fluence at the plane before gain slice k
            if not monotone:
                slice_max.fill(0.0)
            if linear and not lossy:
                np.expm1(xb, out=u)
            for k in range(nz):
                if lossy:
                    passive += xb
                    np.multiply(xb, half_loss, out=xh)
                    slice_in = xh
                else:
                    slice_in = xb
                if linear:
                    if lossy:
                        np.expm1(slice_in, out=u)
                    fn_slice_linear(u, gain[k], v, w1)
                    np.log1p(v, out=xo)
                    np.subtract(xo, slice_in, out=w1)
                    ln_gain[k] -= w1                     # Fsat·Δln G = −ΔJ
                    u, v = v, u
                else:
                    fn_slice(slice_in, ln_gain[k], 1.0, out=xo)
                    np.subtract(xo, slice_in, out=w1)
                if lossy:
                    gained += w1
                    passive += xo
                    xo *= half_loss
                if b_sum is not None:
                    log_mean_accumulate(b_sum[t], xb, xo, w1, w2, positive=positive)
                if not monotone:
                    plane[k] += xo
                    np.maximum(slice_max, xo, out=slice_max)
                xb, xo = xo, xb
            x[t] = xb
            if not monotone and c:
                slice_peak[t] = slice_max.max()
            if tick is not None:
                tick(1.0 / nt)
    loss = float(passive.sum()) * (1.0 - half_loss) if lossy else 0.0
    if c == 0:
        return BlockOutcome(0.0, slice_peak, loss, 0.0)
    if monotone:
        peak_plane, peak_slice = float(x.sum(axis=0).max()), x.max(axis=1)
    else:
        peak_plane, peak_slice = float(plane.max()), slice_peak
    # without loss the beam's gain is its own change (the per-update sum telescopes)
    added = float(gained.sum()) if lossy else float(x.sum()) - total_in
    return BlockOutcome(peak_plane, peak_slice, loss, added)


def amplify_block_composite(x: np.ndarray, ln_gain: np.ndarray,
                            tick: Callable[[float], None] | None = None) -> BlockOutcome:
    """The same pass by exact composition, for a medium without passive loss whose B-integral is not
    needed and whose columns do not absorb (check :func:`composite_valid`). In place, as
    :func:`amplify_block`.

    1. Each time slice, in order, through one composite slice per pixel, ln G_tot = Σ_k ln G_k, depleted
       by each (Frantz–Nodvik composition along z): the fluence leaving, per time slice.
    2. The whole pulse, X = Σ_t x, through each gain slice in order: X_{k+1} = FN(X_k, G_k) and
       ln G_k <- ln G_k − (X_{k+1} − X_k) (composition in time): the gain each slice is left with,
       and the total fluence at every plane.
    The largest slice fluence is at the exit: with G >= 1 the intensity never falls along a column.

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963). The maps compose exactly: in u = exp(J/Fsat) − 1
    a slice is u -> G·u (kernels/frantz_nodvik.py), so two slices are u -> G1·G2·u.
    """
    nt, c = x.shape
    if c == 0:
        return BlockOutcome(0.0, np.zeros(nt), 0.0, 0.0)
    total = x.sum(axis=0)
    total_in = float(total.sum())
    ln_total = ln_gain.sum(axis=0)
    for t in range(nt):
        fn_slice(x[t], ln_total, 1.0, out=x[t])
        if tick is not None:
            tick(1.0 / (nt + 1))
    peak_plane = 0.0
    for k in range(ln_gain.shape[0]):
        fn_slice(total, ln_gain[k], 1.0, out=total)
        peak_plane = max(peak_plane, float(total.max()))
    if tick is not None:
        tick(1.0 / (nt + 1))
    return BlockOutcome(peak_plane, x.max(axis=1), 0.0, float(x.sum() - total_in))
