"""The Frantz–Nodvik kernel and the small numerical helpers beside it.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)],
ln G <- ln G − (J_out − J_in)/Fsat; square pulse P_out(t) = P_in/(1 − (1 − 1/G0)·exp(−J_in(t)/Fsat)).
Oracles: Python's ``decimal`` module at 50 digits (an independent high-precision evaluation of the
closed form), the direct float formula Fsat·log1p(G·expm1(x)) where it is safe, and scipy.integrate.quad.
"""
from __future__ import annotations

import math
from decimal import Decimal, localcontext

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from ampmodel.kernels import beam_shapes
from ampmodel.kernels.fn_pass import log_mean
from ampmodel.kernels.frantz_nodvik import fn_slice, fn_total, square_pulse_power

EPS = np.finfo(float).eps
X_GRID = np.array([1e-12, 1e-9, 1e-6, 1e-3, 0.1, 0.5, 1.0, 2.0, 10.0, 36.0, 50.0, 100.0, 700.0, 1e3, 5e3, 1e4])
LN_G_GRID = np.log(np.array([1e-30, 1e-20, 1e-6, 0.01, 0.5, 1.0, 1.5, 8.0, 100.0, 1e6, 1e20, 1e30]))


def _slice(fluence, ln_gain, fsat=1.0):
    """fn_slice on copies: (output fluence, updated ln G)."""
    f = np.array(fluence, dtype=float, ndmin=1)
    g = np.array(ln_gain, dtype=float, ndmin=1) * np.ones_like(f)
    out = fn_slice(f.copy(), g, fsat)
    return out, g


def _fn_decimal(x: float, ln_gain: float) -> float:
    """ln[1 + G·(exp(x) − 1)] from the exact binary values of x and ln G, at 120 significant digits
    (enough to keep 60 digits of G·(exp(x) − 1) >= 1e-43 next to the 1)."""
    with localcontext() as ctx:
        ctx.prec = 120
        g = Decimal(ln_gain).exp()
        return float((1 + g * (Decimal(x).exp() - 1)).ln())


def _roundoff(x, ln_gain, y):
    """Bound on the float error of y = J_out/Fsat. The kernel works in the log domain,
    y = ln(1 + exp(a)) with a = ln G + x + ln(1 − exp(−x)): rounding a costs a few ulp of the sum of the
    magnitudes of its terms, and an error δa moves y by δa·dy/da = δa·(1 − exp(−y)); plus the final
    rounding of y. This is the conditioning of the problem itself, not a tolerance on the physics."""
    x, ln_gain, y = (np.asarray(v, dtype=float) for v in (x, ln_gain, y))
    terms = 1.0 + np.abs(ln_gain) + x + np.abs(np.log(-np.expm1(-x)))
    return 8 * EPS * terms * -np.expm1(-y) + 4 * EPS * y


def test_fn_slice_equals_fn_total_random():
    rng = np.random.default_rng(1)
    fsat = 6.7e3
    fluence = fsat * 10 ** rng.uniform(-8, 2, size=(40, 40))
    ln_gain = rng.uniform(-5, 5, size=(40, 40))
    out, _ = _slice(fluence, ln_gain, fsat)
    bound = fsat * _roundoff(fluence / fsat, ln_gain, out / fsat)
    assert np.all(np.abs(out - fn_total(fluence, ln_gain, fsat)) <= bound)


def test_zero_fluence_returns_zero_and_keeps_gain():
    ln_gain = np.array([-3.0, 0.0, 0.7, 2.1, 60.0])
    out, g = _slice(np.zeros(5), ln_gain, 1.0)
    assert np.all(out == 0.0)
    assert np.all(g == ln_gain)


def test_zero_gain_returns_input():
    # ln G = 0: J_out = Fsat·ln(exp(x)) = J_in; the gain stays 0 up to the round-off of x.
    fluence = np.array([1e-9, 1e-3, 0.5, 1.0, 7.0, 300.0, 1e4])
    out, g = _slice(fluence, 0.0, 1.0)
    bound = _roundoff(fluence, 0.0, fluence)
    assert np.all(np.abs(out - fluence) <= bound)
    assert np.all(np.abs(g) <= bound)


@pytest.mark.parametrize("fsat", [1.0, 6.7e3, 5e4])
def test_energy_transfer_is_exact(fsat):
    # Frantz & Nodvik (1963): Fsat·Δln G = −ΔJ; the update is built from the same y, so it holds to
    # round-off of the operands (a few ulp of the larger of J and Fsat·|ln G|).
    rng = np.random.default_rng(2)
    fluence = fsat * 10 ** rng.uniform(-6, 2, size=500)
    ln_gain = rng.uniform(-10, 10, size=500)
    out, g = _slice(fluence, ln_gain, fsat)
    scale = np.maximum(np.maximum(fluence, out), fsat * np.abs(ln_gain))
    assert np.all(np.abs((ln_gain - g) * fsat + (fluence - out)) <= 8 * EPS * scale)


def test_finite_on_extreme_grid():
    x, ln_g = np.meshgrid(X_GRID, LN_G_GRID)
    out, g = _slice(x, ln_g, 1.0)
    assert np.all(np.isfinite(out)) and np.all(np.isfinite(g))
    assert np.all(out >= 0.0)
    # against the high-precision evaluation of the closed form, to the round-off bound of the
    # log-domain form (at most ~2e-13 relative, at the corners x = 1e4 or |ln G| = 69)
    for xi, gi, yi in zip(x.ravel(), ln_g.ravel(), out.ravel(), strict=True):
        exact = _fn_decimal(xi, gi)
        assert abs(yi - exact) <= _roundoff(xi, gi, exact), (xi, gi, yi, exact)


def test_against_direct_formula_where_safe():
    # Fsat·log1p(G·expm1(x)) is accurate whenever G·expm1(x) neither overflows nor underflows.
    fsat = 2.5
    x, ln_g = np.meshgrid(X_GRID[X_GRID < 600], LN_G_GRID)
    direct_arg = np.exp(ln_g) * np.expm1(x)
    safe = (direct_arg < 1e300) & (direct_arg > 1e-300)
    out, _ = _slice(fsat * x[safe], ln_g[safe], fsat)
    direct = fsat * np.log1p(direct_arg[safe])
    assert safe.sum() > 100
    np.testing.assert_allclose(out, direct, rtol=1e-13, atol=0)


@settings(max_examples=300, deadline=None)
@given(x=st.floats(1e-12, 1e4), dx=st.floats(1e-6, 1e2), ln_g=st.floats(-69.1, 69.1))
def test_property_finite_bounded_monotone(x, dx, ln_g):
    x2 = x + dx * x
    out, g = _slice([x, x2], ln_g, 1.0)
    y1, y2 = out
    r1, r2 = _roundoff(x, ln_g, y1), _roundoff(x2, ln_g, y2)     # slack: float round-off only
    assert np.all(np.isfinite(out)) and np.all(np.isfinite(g))
    assert y1 >= 0.0
    assert y2 >= y1 - r1 - r2                                    # monotone in J_in
    if ln_g > 0:
        # at most all the stored energy is extracted: J_out <= J_in + Fsat·ln G
        assert y1 <= x + ln_g + r1
        assert y1 >= x - r1                                      # and it amplifies
    elif ln_g < 0:
        assert y1 <= x + r1                                      # an absorber never amplifies


def test_square_pulse_power_integrates_to_fn():
    # ∫0^T P_out dt = Fsat·ln[1 + G0·(exp(P_in·T/Fsat) − 1)] (Frantz & Nodvik 1963), by quad.
    fsat, p_in, g0 = 6.7e3, 2e11, 8.0                 # W/m² and J/m²: fluence P_in·T/Fsat = 3 at T = 1e-7
    for t_end in (1e-9, 3e-8, 1e-7):
        total, _ = quad(lambda t: square_pulse_power(p_in, p_in * t, g0, fsat), 0.0, t_end,
                        epsabs=0.0, epsrel=1e-13)
        expected = fsat * math.log1p(g0 * math.expm1(p_in * t_end / fsat))
        assert total == pytest.approx(expected, rel=1e-11)
    # at t = 0 the pulse sees the small-signal gain
    assert float(square_pulse_power(p_in, 0.0, g0, fsat)) == pytest.approx(g0 * p_in, rel=1e-15)


def _pulse(shape: str, tau: float):
    if shape == "gaussian":
        return lambda t: math.exp(-4.0 * math.log(2.0) * (t / tau) ** 2)          # FWHM tau
    if shape == "sech2":
        width = tau / (2.0 * math.acosh(math.sqrt(2.0)))                           # FWHM 1.7627·T
        return lambda t: 1.0 / math.cosh(t / width) ** 2
    return lambda t: 1.0 if abs(t) <= tau / 2 else 0.0


@pytest.mark.parametrize("shape", ["gaussian", "sech2", "flat"])
@pytest.mark.parametrize("n", [1, 7, 32])
def test_time_slices_match_quad(shape, n):
    tau = 5e-9
    t, weights, dt = beam_shapes.time_slices(shape, tau, n)
    assert weights.sum() == pytest.approx(1.0, abs=1e-14)
    window_fwhm = {"gaussian": 5.0, "sech2": 10.0, "flat": 1.0}[shape]    # README window rule
    assert dt * n == pytest.approx(window_fwhm * tau, rel=1e-14)
    np.testing.assert_allclose(np.diff(t), dt, rtol=1e-9)
    p = _pulse(shape, tau)
    window = (t[0] - dt / 2, t[-1] + dt / 2)
    in_window = quad(p, *window, epsabs=0.0, epsrel=1e-13, limit=200)[0]
    per_slice = np.array([quad(p, c - dt / 2, c + dt / 2, epsabs=0.0, epsrel=1e-13)[0] for c in t])
    np.testing.assert_allclose(weights, per_slice / in_window, rtol=1e-9, atol=1e-15)
    # the window holds all but 1e-7 of the pulse energy (README window rule)
    everything = quad(p, -50 * tau, 50 * tau, epsabs=0.0, epsrel=1e-13, limit=500,
                      points=[-tau, 0.0, tau])[0]
    assert in_window >= (1 - 1e-7) * everything
    assert abs(t.mean()) < 1e-9 * tau                            # centred on the pulse peak


@pytest.mark.parametrize("profile", ["gaussian", "flat", "supergaussian"])
def test_seed_fluence_sums_to_energy(profile):
    x = beam_shapes.pixel_centres(40, 8e-3)
    f = beam_shapes.seed_fluence(x, x, profile, 3e-3, 6.0, 0.25)
    assert f.sum() * (x[1] - x[0]) ** 2 == pytest.approx(0.25, rel=1e-13)
    assert np.all(f >= 0.0)


def test_aperture_mask_area_converges():
    # Pixels whose centre lies in the disc of radius r: the difference from π r² comes only from the
    # pixels the circle crosses, all within dx/√2 of it, so |A − π r²| <= 2√2·π·r·dx.
    r = 2e-3
    errors = []
    for n in (32, 128, 512, 2048):
        x = beam_shapes.pixel_centres(n, 6e-3)
        dx = x[1] - x[0]
        area = beam_shapes.aperture_mask(x, x, "round", 2 * r).sum() * dx * dx
        assert abs(area - math.pi * r * r) <= 2 * math.sqrt(2) * math.pi * r * dx
        errors.append(abs(area / (math.pi * r * r) - 1))
    assert errors[-1] < 1e-3 and errors[-1] < errors[0]
    # a square aperture aligned with the pixels is exact
    x = beam_shapes.pixel_centres(60, 6e-3)
    assert beam_shapes.aperture_mask(x, x, "square", 3e-3).sum() == 30 * 30


def test_log_mean():
    # (b − a)/ln(b/a) is the mean of a·(b/a)^s over s in [0, 1]: the exact mean of an exponential.
    rng = np.random.default_rng(3)
    a = 10 ** rng.uniform(-5, 5, 200)
    b = a * 10 ** rng.uniform(-3, 3, 200)
    lm = log_mean(a, b)
    for ai, bi, li in zip(a, b, lm, strict=True):
        ref = quad(lambda s, ai=ai, bi=bi: ai * (bi / ai) ** s, 0.0, 1.0, epsabs=0.0, epsrel=1e-13)[0]
        assert li == pytest.approx(ref, rel=1e-12)
    np.testing.assert_allclose(log_mean(b, a), lm, rtol=1e-14)         # symmetric
    # equal and nearly equal values: the arithmetic mean, continuous across the switch-over
    a1 = np.array([1.0, 2.0, 3.0])
    assert np.all(log_mean(a1, a1.copy()) == a1)
    for rel in (1e-7, 1e-6 * (1 - 1e-9), 1e-6 * (1 + 1e-9), 1e-5):
        b1 = a1 * (1 + rel)
        exact = a1 * rel / np.log1p(rel)
        np.testing.assert_allclose(log_mean(a1, b1), exact, rtol=1e-12)
    # a zero end: the limit 0 (no intensity, no B-integral), never NaN
    assert np.all(log_mean(np.array([0.0, 0.0, 2.0]), np.array([0.0, 3.0, 0.0])) == 0.0)
