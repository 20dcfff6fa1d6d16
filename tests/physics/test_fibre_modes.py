"""The mode field of a step-index fibre: Marcuse's Gaussian fit against the exact fundamental mode.

D. Marcuse, Bell Syst. Tech. J. 56, 703 (1977): w/a = 0.65 + 1.619·V^−1.5 + 2.879·V^−6, the Gaussian
that best launches the LP01 mode, quoted as accurate to about 1 % for 1.2 < V < 2.4 (from memory —
verify). The reference here is independent of the formula: the exact LP01 mode from the eigenvalue
equation u·J1(u)/J0(u) = w·K1(w)/K0(w), u² + w² = V² (D. Gloge, Appl. Opt. 10, 2252 (1971)), solved with
scipy.special Bessel functions and scipy.optimize.brentq, and the Gaussian width that maximises its
overlap with it (scipy.optimize.minimize_scalar, scipy.integrate.quad).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq, minimize_scalar
from scipy.special import j0, j1, k0, k1

from ampmodel.kernels import fibre_modes as fm


def exact_best_gaussian(v: float) -> float:
    """w/a of the Gaussian with the largest overlap with the exact LP01 mode of a step-index core."""
    def eigen(u):
        w = math.sqrt(v * v - u * u)
        return u * j1(u) / j0(u) - w * k1(w) / k0(w)
    u = brentq(eigen, 1e-9, min(v, 2.404825) - 1e-12, xtol=1e-15)
    w = math.sqrt(v * v - u * u)

    def field(r):
        return j0(u * r) / j0(u) if r < 1.0 else k0(w * r) / k0(w)

    def integral(f):
        return quad(f, 0.0, 1.0, epsabs=0, epsrel=1e-12)[0] + quad(f, 1.0, np.inf, epsabs=0, epsrel=1e-12)[0]

    norm = integral(lambda r: field(r) ** 2 * r)

    def minus_overlap(s):
        cross = integral(lambda r: field(r) * math.exp(-r * r / (s * s)) * r)
        return -cross ** 2 / (norm * s * s / 4.0)
    return minimize_scalar(minus_overlap, bounds=(0.5, 4.0), method="bounded", options={"xatol": 1e-9}).x


@pytest.mark.parametrize("v", [1.2, 1.6, 2.0, 2.4])
def test_marcuse_fit_against_the_exact_fundamental_mode(v):
    a = 5e-6
    ours = float(fm.marcuse_mode_radius(a, v)) / a
    assert ours == pytest.approx(exact_best_gaussian(v), rel=0.01)


def test_marcuse_formula_at_cut_off():
    # at V = 2.405 the formula gives w/a = 0.65 + 1.619/2.405^1.5 + 2.879/2.405^6 = 1.0989
    a = 4.1e-6
    wavelength = 2 * math.pi * a * 0.12 / 2.405
    assert float(fm.v_number(a, 0.12, wavelength)) == pytest.approx(2.405, rel=1e-12)
    assert float(fm.mode_radius(a, wavelength, core_na=0.12)) / a == pytest.approx(1.0989, abs=1e-4)
    v = float(fm.v_number(a, 0.12, wavelength))
    assert float(fm.mode_radius(a, wavelength, core_na=0.12)) / a == pytest.approx(
        0.65 + 1.619 * v ** -1.5 + 2.879 * v ** -6, rel=1e-12)


def test_overlaps():
    # the core overlap is the Gaussian's power inside r = a (its integral), a uniform cladding pump's the
    # ratio of the areas
    a, w = 5e-6, 5.6e-6
    gamma = 1 - math.exp(-2 * a * a / (w * w))
    assert float(fm.core_overlap(a, w)) == pytest.approx(gamma, rel=1e-14)
    for rings in (1, 3, 10):
        edges = fm.ring_edges(a, rings)
        assert fm.gaussian_ring_overlaps(edges, w).sum() == pytest.approx(gamma, rel=1e-13)
        assert fm.ring_areas(edges).sum() == pytest.approx(math.pi * a * a, rel=1e-13)
        assert fm.uniform_ring_overlaps(edges, 62.5e-6).sum() == pytest.approx((a / 62.5e-6) ** 2, rel=1e-13)
    assert fm.cladding_overlap(a, 62.5e-6) == pytest.approx(0.0064, rel=1e-12)
    # the effective area of a Gaussian mode, (∫I dA)²/∫I² dA = π w²
    num = quad(lambda r: math.exp(-2 * r * r / (w * w)) * 2 * math.pi * r, 0, 20 * w)[0] ** 2
    den = quad(lambda r: math.exp(-4 * r * r / (w * w)) * 2 * math.pi * r, 0, 20 * w)[0]
    assert num / den == pytest.approx(fm.effective_area(w), rel=1e-10)
