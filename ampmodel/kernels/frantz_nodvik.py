"""Frantz–Nodvik saturated amplification of one time slice through one z-slice, per pixel.

References
----------
L. M. Frantz and J. S. Nodvik, "Theory of pulse propagation in a laser amplifier",
J. Appl. Phys. 34, 2346 (1963).

For a slice of fluence J_in (J/m²) through a slab of gain ln G (= g·dz) and saturation fluence Fsat:

    J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)],    ln G <- ln G − (J_out − J_in)/Fsat.

Evaluated in the log domain, y = J_out/Fsat = log(1 + exp(a)) with a = ln G + x + log(1 − exp(−x)),
x = J_in/Fsat: finite for x from 0 to beyond 1e4 and ln G from −70 to +70 (G from 1e-30 to 1e30), and
exact energy bookkeeping, since the gain update is the fluence change itself.

The same map is linear in u = exp(J/Fsat) − 1: 1 + u_out = 1 + G·(exp(x) − 1) gives u_out = G·u_in, and
the gain left behind is G·exp(x_in − x_out) = G·(1 + u_in)/(1 + u_out). :func:`fn_slice_linear` evaluates
this form: arithmetic only, no exponential or logarithm, for the hot loop of a pass (kernels/fn_pass.py,
where its range of validity is checked before it is used).
"""
from __future__ import annotations

import numpy as np


def fn_slice(fluence_J_m2: np.ndarray, ln_gain: np.ndarray, saturation_fluence_J_m2: float,
             out: np.ndarray | None = None) -> np.ndarray:
    """Amplify one time slice through one gain slice and deplete the gain, in place.

    Parameters
    ----------
    fluence_J_m2 : (Ny, Nx) float64, the slice's fluence entering the gain slice (J/m², >= 0)
    ln_gain : (Ny, Nx) float64, ln G of the gain slice (= g·dz, dimensionless); updated in place
    saturation_fluence_J_m2 : Fsat = h·nu/(sigma_e + sigma_a) in J/m²
    out : optional (Ny, Nx) array for the output fluence (may be ``fluence_J_m2`` itself)

    Returns
    -------
    (Ny, Nx) output fluence in J/m².

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963), eq. for the output fluence of a slab.
    """
    inv_fsat = 1.0 / saturation_fluence_J_m2
    x = fluence_J_m2 * inv_fsat                    # new array: x = J_in/Fsat
    with np.errstate(divide="ignore"):
        a = np.negative(x)
        np.expm1(a, out=a)                          # exp(−x) − 1
        np.negative(a, out=a)                       # 1 − exp(−x)
        np.log(a, out=a)                            # log(1 − exp(−x)); −inf where x = 0
    a += x
    a += ln_gain                                    # a = ln G + log(exp(x) − 1)
    np.logaddexp(0.0, a, out=a)                     # y = log(1 + G·(exp(x) − 1))
    # gain update: ln G -= y − x  (exact energy transfer)
    ln_gain -= a
    ln_gain += x
    if out is None:
        out = a
    np.multiply(a, saturation_fluence_J_m2, out=out)
    return out


def fn_slice_linear(u: np.ndarray, gain: np.ndarray, out: np.ndarray, scratch: np.ndarray) -> np.ndarray:
    """Frantz–Nodvik for one time slice through one gain slice in the linear variable u = exp(J/Fsat) − 1.

    u_out = G·u_in and G <- G·(1 + u_in)/(1 + u_out) = (G + u_out)/(1 + u_out), arithmetic only. Exact in exact
    arithmetic; in floating point each call costs a few ulp of G and u. Valid while G·u stays a normal
    float: u_in below ~1e300 (J/Fsat < ~690) and above ~1e-290 where it is not zero.

    Parameters
    ----------
    u : (C,) float64, exp(J_in/Fsat) − 1 of the slice entering (>= 0); not changed
    gain : (C,) float64, G = exp(g·dz) of the gain slice (> 0); updated in place
    out : (C,) float64, receives u_out (must not be ``u``)
    scratch : (C,) float64 work array

    Returns
    -------
    ``out``: u_out = exp(J_out/Fsat) − 1.

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963): J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)] and the
    energy transfer Fsat·Δln G = −(J_out − J_in).
    """
    np.multiply(gain, u, out=out)
    gain += out                     # G·(1 + u_in) = G + u_out
    np.add(out, 1.0, out=scratch)
    gain /= scratch
    return out


def fn_total(fluence_in_J_m2: np.ndarray, ln_gain: np.ndarray | float,
             saturation_fluence_J_m2: float) -> np.ndarray:
    """Closed-form Frantz–Nodvik output fluence of a whole pulse through gain G (no state update).

    Used as the reference for the sliced solver: J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)].

    Parameters
    ----------
    fluence_in_J_m2 : array of input fluences (J/m²)
    ln_gain : ln G (array broadcastable to the fluence, or a scalar)
    saturation_fluence_J_m2 : Fsat (J/m²)
    """
    x = np.asarray(fluence_in_J_m2, dtype=float) / saturation_fluence_J_m2
    with np.errstate(divide="ignore"):
        a = np.asarray(ln_gain, dtype=float) + x + np.log(-np.expm1(-x))
    return saturation_fluence_J_m2 * np.logaddexp(0.0, a)


def square_pulse_power(power_in_W: float, fluence_passed_J_m2: np.ndarray, small_signal_gain: float,
                       saturation_fluence_J_m2: float) -> np.ndarray:
    """Output power of a square input pulse, P_out(t) = P_in / (1 − (1 − 1/G0)·exp(−J_in(t)/Fsat)).

    Parameters
    ----------
    power_in_W : input power of the square pulse (or intensity, any consistent unit)
    fluence_passed_J_m2 : input fluence that has passed by time t (J/m²)
    small_signal_gain : G0 (dimensionless)
    saturation_fluence_J_m2 : Fsat (J/m²)

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963).
    """
    x = np.asarray(fluence_passed_J_m2, dtype=float) / saturation_fluence_J_m2
    return power_in_W / (1.0 - (1.0 - 1.0 / small_signal_gain) * np.exp(-x))
