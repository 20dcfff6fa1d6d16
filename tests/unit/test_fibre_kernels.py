"""The fibre rate-equation kernel: populations, growth, exact slice passage, chained slices.

References
----------
Steady-state populations and dP/dz of C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991),
written out here; the slice passage of dP/dz = a·P + s against scipy.integrate.solve_ivp and quad; the
small-argument forms of φ1 = expm1(x)/x and φ2 = (expm1(x) − x)/x² are their Taylor series.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp

from ampmodel.kernels import fibre_rates as fr

RNG = np.random.default_rng(7)


def test_phi_functions_near_zero_and_far():
    for x in (-800.0, -30.0, -1.0, -1e-4, 0.0, 1e-9, 1e-4, 0.5, 40.0):
        if abs(x) > 1e-3:
            assert fr.phi1(x) == pytest.approx(np.expm1(x) / x, rel=1e-13)
            assert fr.phi2(x) == pytest.approx((np.expm1(x) - x) / x ** 2, rel=1e-9)
        else:
            assert fr.phi1(x) == pytest.approx(1 + x / 2 + x * x / 6, rel=1e-12)
            assert fr.phi2(x) == pytest.approx(0.5 + x / 6 + x * x / 24, rel=1e-12)


@pytest.mark.parametrize("a, s", [(3.0, 0.0), (-250.0, 1e-3), (1e-7, 2e-4), (-0.7, 5e-3)])
def test_slice_transfer_is_the_exact_solution(a, s):
    """dP/dz = a·P + s with constant a and s, integrated by scipy.integrate.solve_ivp."""
    h, p0 = 0.05, 0.3
    ref = solve_ivp(lambda z, p: a * p + s, (0, h), [p0], method="Radau", rtol=1e-12, atol=1e-16,
                    dense_output=True)
    out, mean = fr.slice_transfer(np.array([p0]), np.array([a]), np.array([s]), h)
    avg = quad(lambda z: ref.sol(z)[0], 0, h, epsabs=0, epsrel=1e-11, limit=200)[0] / h
    assert out[0] == pytest.approx(ref.y[0, -1], rel=1e-8, abs=1e-18)
    assert mean[0] == pytest.approx(avg, rel=1e-6)


def test_chained_slices_vectorised_equal_one_by_one():
    k, nz, h = 5, 30, 0.02
    a = RNG.normal(0, 20, (k, nz))
    s = RNG.uniform(0, 1e-3, (k, nz))
    s[0] = 0.0
    p_in = np.array([1.0, 0.0, 1e-12, 3.0, 0.5])
    nodes, means = fr.propagate_frozen(p_in, a, s, h)
    p = p_in.copy()
    for j in range(nz):
        p, m = fr.slice_transfer(p, a[:, j], s[:, j], h)
        assert nodes[:, j + 1] == pytest.approx(p, rel=1e-11, abs=1e-300)
        assert means[:, j] == pytest.approx(m, rel=1e-11, abs=1e-300)


def test_populations_and_derivative():
    """Two channels, one ring: n2 from the rates, dP/dz from Giles & Desurvire written out."""
    overlap = np.array([[0.8], [0.01]])
    se, sa = np.array([6e-25, 2.5e-24]), np.array([4e-26, 2.5e-24])
    hnu = np.array([1.93e-19, 2.04e-19])
    area, nt, tau = np.array([7.85e-11]), np.array([6e25]), 9e-4
    p = np.array([0.2, 4.0])
    up, tot = fr.transition_rates(overlap, se, sa, hnu, area)
    n2 = fr.upper_fraction(p, up, tot, tau)
    flux = overlap[:, 0] * p / (hnu * area[0])
    expected = np.sum(sa * flux) / (1 / tau + np.sum((sa + se) * flux))
    assert n2[0] == pytest.approx(expected, rel=1e-14)
    deriv = fr.power_derivative(p, np.array([1, -1]), overlap, se, sa, hnu, np.zeros(2), np.full(2, 0.01),
                                area, nt, tau)
    g = overlap[:, 0] * ((se + sa) * expected - sa) * nt[0]
    assert deriv == pytest.approx(np.array([1, -1]) * (g - 0.01) * p, rel=1e-13)


def test_interpolation_refuses_to_extrapolate():
    wl = np.array([1.0e-6, 1.1e-6])
    se, sa = fr.interpolate_cross_sections(wl, np.array([1.0, 3.0]), np.array([2.0, 0.0]), 1.05e-6)
    assert (float(se), float(sa)) == pytest.approx((2.0, 1.0))
    with pytest.raises(ValueError, match="outside the cross-section table"):
        fr.interpolate_cross_sections(wl, np.ones(2), np.ones(2), 1.2e-6)
