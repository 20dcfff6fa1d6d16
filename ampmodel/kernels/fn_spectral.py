"""One pass of a pulse whose time slices differ in wavelength (a chirped pulse, or a seed away from the
material's wavelength) through a stack of gain slices, for a block of pixels.

The medium's state is held as ln G0 = g0·dz at the material's wavelength λ0, which is the upper-state
density N2 in other units: g0 = (σe + σa)_0·N2 − σa0·Nt. Time slice t, at λ_t, sees

    ln G_t = a_t·ln G0 + c_t,   a_t = (σe + σa)_t/(σe + σa)_0,   c_t = (a_t·σa0 − σa_t)·Nt·dz,

and its own saturation fluence Fsat_t = Fsat0/r_t (r_t = a_t·λ_t/λ0). Its Frantz–Nodvik update is exact,
and the ions it takes out change ln G0 by Δln G0 = Δln G_t/a_t (ΔN2 = −ΔJ/(h·ν_t·dz): one ion per photon
gained). A slice whose wavelength the ions do not see (a_t = 0) crosses with the passive loss alone.

Two evaluations of the same maps, as for a narrowband pulse (kernels/fn_pass.py):

* the linear form (where :func:`linear_form_valid`): u = exp(J/Fsat_t) − 1, u_out = G_t·u_in with
  G_t = exp(a_t·ln G0 + c_t), one exp and one log1p per update;
* the log-domain form (kernels/frantz_nodvik.fn_slice): finite for any fluence and gain (the fallback).

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963), per time slice with its own Fsat; the
gain at any wavelength from the populations, g(λ) = σe(λ)·N2 − σa(λ)·N1 (A. E. Siegman, Lasers (1986)).
"""
from __future__ import annotations

import math

import numpy as np

from ampmodel.kernels.fn_pass import (
    LINEAR_MAX_EXPONENT,
    LINEAR_MIN_LOG_FLUENCE,
    BlockOutcome,
    log_mean_accumulate,
)
from ampmodel.kernels.frantz_nodvik import fn_slice


def linear_form_valid(x: np.ndarray, ln_gain: np.ndarray, ratio: np.ndarray, scale: np.ndarray,
                      offset: np.ndarray, floor: np.ndarray, half_loss: float = 1.0) -> bool:
    """Whether every u = exp(x_t) − 1 of this block's pass stays a normal float (x_t = J/Fsat_t).

    Depletion only lowers N2, so the gain each time slice meets is at most that of the gain slices
    before the pass: x_t <= r_t·x_in + Σ_k max(a_t·ln G0_k + c_t, 0), bounded by
    r_t·x_in + a_t·Σ_k max(ln G0_k, 0) + Nz·max(c_t, 0), must stay below LINEAR_MAX_EXPONENT; and it is
    at least that of a slice with no excited ion, ``floor`` (ln G_t at N2 = 0, −σa_t·Nt·dz), so the
    smallest non-zero slice fluence, attenuated by Nz such slices and the passive loss, must stay above
    exp(LINEAR_MIN_LOG_FLUENCE).

    Parameters
    ----------
    x : (Nt, C) J/Fsat0 entering; ln_gain : (Nz, C) ln G0; ratio, scale, offset, floor : (Nt,) r_t, a_t,
    c_t and the lowest ln G_t of a gain slice; half_loss : transmission of half a slice
    """
    nt, c = x.shape
    if c == 0:
        return True
    nz = ln_gain.shape[0]
    seen = np.asarray(scale) > 0.0
    if not seen.any():
        return True
    stack = float(np.clip(ln_gain, 0.0, None).sum(axis=0).max())
    highest = x.max(axis=1) * ratio + scale * stack + nz * np.clip(offset, 0.0, None)
    if float(highest[seen].max()) > LINEAR_MAX_EXPONENT:
        return False
    lowest = np.min(x, axis=1, where=x > 0.0, initial=np.inf)
    lit = seen & np.isfinite(lowest)
    if not lit.any():
        return True
    with np.errstate(divide="ignore"):
        low = np.log(lowest[lit] * ratio[lit]) + nz * np.minimum(floor[lit], 0.0) + 2 * nz * math.log(half_loss)
    return bool(float(low.min()) > LINEAR_MIN_LOG_FLUENCE)


def amplify_block_spectral(x: np.ndarray, ln_gain: np.ndarray, ratio: np.ndarray, scale: np.ndarray,
                           offset: np.ndarray, half_loss: float = 1.0, b_sum: np.ndarray | None = None,
                           floor: np.ndarray | None = None) -> BlockOutcome:
    """Pass a block of pixels through the gain slices, each time slice at its own wavelength, in place.

    Per gain slice: half the passive loss, Frantz–Nodvik at the slice's wavelength, half the passive loss.

    Parameters
    ----------
    x : (Nt, C) float64, J/Fsat0 of each time slice entering (Fsat0 at λ0); becomes the fluence leaving
    ln_gain : (Nz, C) g0·dz at λ0 of each gain slice in the order the beam meets them; depleted in place
    ratio : (Nt,) Fsat0/Fsat_t; scale : (Nt,) a_t = (σe + σa)_t/(σe + σa)_0; offset : (Nt,) c_t, the
        ln G of slice t at zero ln G0, (a_t·σa0 − σa_t)·Nt·dz
    half_loss : transmission of half a slice; b_sum : (Nt, C) or None, += the logarithmic mean of each
        slice's fluence entering and leaving each gain slice (units of Fsat0)
    floor : (Nt,) ln G_t of a gain slice with no excited ion (−σa_t·Nt·dz): with it the linear form is
        used where :func:`linear_form_valid`; without it the log-domain form

    Returns
    -------
    BlockOutcome in units of Fsat0.
    """
    ratio = np.asarray(ratio, dtype=float)
    scale = np.asarray(scale, dtype=float)
    offset = np.asarray(offset, dtype=float)
    linear = floor is not None and linear_form_valid(x, ln_gain, ratio, scale, offset,
                                                     np.asarray(floor, dtype=float), half_loss)
    return _pass(x, ln_gain, ratio, scale, offset, half_loss, b_sum, linear)


def _pass(x: np.ndarray, ln_gain: np.ndarray, ratio: np.ndarray, scale: np.ndarray, offset: np.ndarray,
          half_loss: float, b_sum: np.ndarray | None, linear: bool) -> BlockOutcome:
    """The pass of :func:`amplify_block_spectral` in the linear or the log-domain form.

    Notes
    -----
    One long function on purpose (a fused hot kernel): the loops over time slices and gain slices
    keep every array of the block in cache and in place; split into calls, each would pass over the
    block again (docs/performance.md, the hot loop in detail).
    """
    nt, c = x.shape
    nz = ln_gain.shape[0]
    lossy = half_loss != 1.0
    plane = np.zeros((nz, c))
    slice_max = np.zeros(c)
    slice_peak = np.zeros(nt)                                # the largest fluence of each time slice
    passive = gained = 0.0
    total_in = float(x.sum())
    xb, xh, xo, u, v, g, w1, w2, bt = (np.empty(c) for _ in range(9))
    with np.errstate(divide="ignore"):
        for t in range(nt):
            a = float(scale[t])
            seen = a > 0.0
            r = float(ratio[t]) if seen else 1.0             # a slice the ions do not see: units of Fsat0
            inv_r, off = 1.0 / r, float(offset[t])
            np.multiply(x[t], r, out=xb)                     # units of Fsat_t
            slice_max.fill(0.0)
            if b_sum is not None:
                bt[...] = 0.0
            if linear and seen and not lossy:
                np.expm1(xb, out=u)
            for k in range(nz):
                if lossy:
                    np.multiply(xb, half_loss, out=xh)
                    slice_in = xh
                else:
                    slice_in = xb
                if not seen:
                    xo[...] = slice_in
                elif linear:
                    if lossy:
                        np.expm1(slice_in, out=u)
                    np.multiply(ln_gain[k], a, out=g)
                    g += off
                    np.exp(g, out=g)                         # G_t of this gain slice
                    np.multiply(u, g, out=v)
                    np.log1p(v, out=xo)
                    u, v = v, u
                else:
                    np.multiply(ln_gain[k], a, out=g)
                    g += off
                    fn_slice(slice_in, g, 1.0, out=xo)
                if seen:
                    np.subtract(xo, slice_in, out=w1)        # ΔJ/Fsat_t of each update
                    if lossy:
                        gained += float(w1.sum()) * inv_r
                    w1 *= 1.0 / a
                    ln_gain[k] -= w1                         # Δln G0 = Δln G_t/a_t
                if lossy:
                    passive += (float(xb.sum()) + float(xo.sum())) * (1.0 - half_loss) * inv_r
                    xo *= half_loss
                if b_sum is not None:
                    log_mean_accumulate(bt, xb, xo, w1, w2)  # units of Fsat_t (the mean is homogeneous)
                np.multiply(xo, inv_r, out=w1)
                plane[k] += w1
                np.maximum(slice_max, w1, out=slice_max)
                xb, xo = xo, xb
            np.multiply(xb, inv_r, out=x[t])
            if b_sum is not None:
                bt *= inv_r
                b_sum[t] += bt
            if c:
                slice_peak[t] = slice_max.max()
    if c == 0:
        return BlockOutcome(0.0, slice_peak, passive, 0.0)
    if not lossy:
        gained = float(x.sum()) - total_in                  # the per-update sum telescopes
    return BlockOutcome(float(plane.max()), slice_peak, passive, gained)
