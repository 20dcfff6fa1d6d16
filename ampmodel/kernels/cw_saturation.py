"""Steady-state (CW) saturated gain of one z-slice, per pixel: the slice's ln gain from the intensity
entering it.

A slice of length dz holds a gain medium with small-signal gain coefficient g0 and saturation
intensity Isat. In steady state every beam crossing the slice (any number of passes, in either
direction) sees the same local gain g(z), saturated by the sum S(z) of their intensities:

    homogeneous line:    g = g0 / (1 + S/Isat)
    inhomogeneous line:  g = g0 / sqrt(1 + S/Isat)

Each beam grows as dI/dz = ±g·I, so across the slice every beam is multiplied by the same factor
exp(x), x = ∫ g dz (the slice's ln gain, passive loss excluded). The functions here return x.

Homogeneous line. Integrating g·(1 + S/Isat) = g0 over the slice, with ∫ g·S dz = Σ (I_out − I_in)
= T·(exp(x) − 1) and T the sum of the intensities entering the slice (from both sides), gives the
exact scalar equation

    x + (T/Isat)·(exp(x) − 1) = g0·dz,

whose solution is the Lambert-W form T·exp(x) = Isat·W((T/Isat)·exp(T/Isat + g0·dz)) (textbook
implicit form ln(I_out/I_in) + (I_out − I_in)/Isat = g0·L, e.g. A. E. Siegman, Lasers, University
Science Books (1986)). It is exact for one pass and for passes that saturate together, with no
error from the slice length. It is solved for x directly by Newton's method started from an upper
bound (the function is convex and increasing), using expm1: no overflow for any T/Isat and g0·dz,
where the Lambert-W argument exp(T/Isat + g0·dz) overflows above about 709.

Inhomogeneous line. With F the forward-entering and B the backward-entering intensity sums, a beam
that has gained exp(t) meets the others at S(t) = F·exp(t) + B·exp(x − t), and dz = dt·sqrt(1 +
S/Isat)/g0, so x solves

    H(x) = ∫_0^x sqrt(1 + (F·exp(t) + B·exp(x − t))/Isat) dt = g0·dz,

evaluated by Gauss–Legendre quadrature (``QUADRATURE_NODES`` nodes, error below 1e-12 relative for
|x| <= 3 per slice) inside a safeguarded Newton iteration. For B = 0 this is the closed form
g0·L = Φ(u_out) − Φ(u_in), Φ(u) = 2·sqrt(1 + u) + ln[(sqrt(1 + u) − 1)/(sqrt(1 + u) + 1)], u = I/Isat,
given in :func:`inhomogeneous_closed_form`.

References
----------
A. E. Siegman, Lasers, University Science Books (1986): saturation of homogeneously and
inhomogeneously broadened amplifiers (steady state).
"""
from __future__ import annotations

import numpy as np

QUADRATURE_NODES = 16
_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(QUADRATURE_NODES)
_S = 0.5 * (_NODES + 1.0)          # nodes on [0, 1]
_W = 0.5 * _WEIGHTS                # weights on [0, 1]
MAX_NEWTON = 200


def homogeneous_slice_gain(entering_W_m2: np.ndarray, g0_dz: np.ndarray | float,
                           saturation_intensity_W_m2: np.ndarray | float) -> np.ndarray:
    """ln gain x of a homogeneously broadened slice saturated by the intensity entering it.

    Solves x + (T/Isat)·expm1(x) = g0·dz per pixel (exact steady state of g = g0/(1 + S/Isat)
    for any number of passes; see the module docstring).

    Parameters
    ----------
    entering_W_m2 : (...) array, T >= 0: the sum of the intensities entering the slice, all passes
        and both directions (W/m²)
    g0_dz : (...) array or float, small-signal ln gain g0·dz of the slice (may be negative:
        an absorbing quasi-three-level slice)
    saturation_intensity_W_m2 : (...) array or float, Isat > 0 (W/m²)

    Returns
    -------
    (...) array x (dimensionless): every beam crossing the slice is multiplied by exp(x).

    References
    ----------
    Implicit form ln(I_out/I_in) + (I_out − I_in)/Isat = g0·L; Siegman, Lasers (1986).
    """
    a = np.asarray(entering_W_m2, dtype=float) / saturation_intensity_W_m2
    shape = np.broadcast_shapes(a.shape, np.shape(g0_dz))
    c = np.broadcast_to(np.asarray(g0_dz, dtype=float), shape).ravel().astype(float)
    a = np.broadcast_to(a, shape).ravel().astype(float)
    # Upper bounds of the root (expm1(x) >= x, and a·expm1(x) <= c for c >= 0): Newton from the
    # right on a convex increasing function decreases monotonically to the root.
    x = c / (1.0 + a)
    pos = (c > 0.0) & (a > 0.0)
    with np.errstate(divide="ignore"):
        np.minimum(x, np.where(pos, np.log1p(np.where(pos, c, 0.0) / np.where(pos, a, 1.0)), np.inf), out=x)
    active = a > 0.0
    x[~active] = c[~active]
    for _ in range(MAX_NEWTON):
        if not active.any():
            break
        xa, aa, ca = x[active], a[active], c[active]
        em = np.expm1(xa)
        step = (xa + aa * em - ca) / (1.0 + aa * (em + 1.0))
        xa = xa - step
        x[active] = xa
        done = np.abs(step) <= 4e-16 * np.maximum(1.0, np.abs(xa))
        idx = np.flatnonzero(active)
        active[idx[done]] = False
    return x.reshape(shape)


def _h_and_slope(x, f, b, inv_isat):
    """H(x) and dH/dx of the inhomogeneous slice (Gauss–Legendre on t = x·s, s in [0, 1])."""
    h = np.zeros_like(x)
    dh = np.zeros_like(x)
    for s, w in zip(_S, _W, strict=True):
        ef = f * np.exp(x * s)
        eb = b * np.exp(x * (1.0 - s))
        root = np.sqrt(1.0 + (ef + eb) * inv_isat)
        h += w * root
        dh += w * (s * ef + (1.0 - s) * eb) * inv_isat / (2.0 * root)
    return x * h, h + x * dh


def inhomogeneous_slice_gain(forward_W_m2: np.ndarray, backward_W_m2: np.ndarray,
                             g0_dz: np.ndarray | float,
                             saturation_intensity_W_m2: np.ndarray | float) -> np.ndarray:
    """ln gain x of an inhomogeneously broadened slice, g = g0/sqrt(1 + S/Isat).

    Solves ∫_0^x sqrt(1 + (F·exp(t) + B·exp(x − t))/Isat) dt = g0·dz per pixel (module docstring).

    Parameters
    ----------
    forward_W_m2 : (...) F >= 0, sum of the intensities entering the slice at its near face (W/m²)
    backward_W_m2 : (...) B >= 0, sum of the intensities entering it at its far face (W/m²)
    g0_dz : (...) or float, small-signal ln gain of the slice
    saturation_intensity_W_m2 : (...) or float, Isat > 0 (W/m²)

    Returns
    -------
    (...) array x: every beam crossing the slice is multiplied by exp(x).

    References
    ----------
    Siegman, Lasers (1986): saturation of an inhomogeneously broadened amplifier.
    """
    f = np.asarray(forward_W_m2, dtype=float)
    b = np.asarray(backward_W_m2, dtype=float)
    shape = np.broadcast_shapes(f.shape, b.shape, np.shape(g0_dz), np.shape(saturation_intensity_W_m2))
    f = np.broadcast_to(f, shape).ravel().astype(float)
    b = np.broadcast_to(b, shape).ravel().astype(float)
    c = np.broadcast_to(np.asarray(g0_dz, dtype=float), shape).ravel().astype(float)
    inv = np.broadcast_to(1.0 / np.asarray(saturation_intensity_W_m2, dtype=float), shape).ravel().astype(float)
    # |H(x)| >= |x| and H has the sign of x: the root lies between 0 and c.
    lo = np.minimum(c, 0.0)
    hi = np.maximum(c, 0.0)
    # Start from the homogeneous solution for the same intensities (it saturates more strongly).
    x = np.clip(homogeneous_slice_gain(f + b, c, 1.0 / inv), lo, hi)
    active = (f + b > 0.0) & (c != 0.0)
    x[~active] = c[~active]
    for _ in range(MAX_NEWTON):
        if not active.any():
            break
        idx = np.flatnonzero(active)
        xa = x[idx]
        h, dh = _h_and_slope(xa, f[idx], b[idx], inv[idx])
        r = h - c[idx]
        up = r > 0.0
        hi[idx[up]] = xa[up]
        lo[idx[~up]] = xa[~up]
        new = xa - r / dh
        lo_a, hi_a = lo[idx], hi[idx]
        outside = ~((new > lo_a) & (new < hi_a)) | ~np.isfinite(new)
        new[outside] = 0.5 * (lo_a[outside] + hi_a[outside])
        x[idx] = new
        tol = 4e-16 * np.maximum(1.0, np.abs(new))
        done = (np.abs(new - xa) <= tol) | (hi_a - lo_a <= tol)
        active[idx[done]] = False
    return x.reshape(shape)


def inhomogeneous_closed_form(u: np.ndarray) -> np.ndarray:
    """Φ(u) = 2·sqrt(1 + u) + ln[(sqrt(1 + u) − 1)/(sqrt(1 + u) + 1)], u = I/Isat > 0.

    One pass through an inhomogeneously broadened amplifier without loss satisfies
    g0·L = Φ(u_out) − Φ(u_in) (from dI/dz = g0·I/sqrt(1 + I/Isat); Siegman, Lasers (1986)).
    The logarithm is written as ln(u) − 2·ln(r + 1), free of cancellation: (r − 1)/(r + 1) = u/(r + 1)².
    """
    u = np.asarray(u, dtype=float)
    r = np.sqrt(1.0 + u)
    return 2.0 * r + np.log(u) - 2.0 * np.log(r + 1.0)
