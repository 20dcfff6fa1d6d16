"""The inversion kernel: exact N2(t) of dN2/dt = R − N2/tau with the pump and decay bookkeeping.

References
----------
Exact solution of the linear rate equation dN/dt = R − N/tau: N(t) = R·tau + (N0 − R·tau)·exp(−t/tau)
(textbook, e.g. W. Koechner, Solid-State Laser Engineering); checked here against that formula
written out directly and against scipy.integrate.solve_ivp.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from ampmodel.kernels.inversion import relax_inversion

TAU = 230e-6


def exact(n0, rate, tau, t):
    """N(t) = R·tau + (N0 − R·tau)·exp(−t/tau), written out independently of the kernel."""
    return rate * tau + (n0 - rate * tau) * math.exp(-t / tau)


@pytest.mark.parametrize("n0, rate, t", [
    (0.0, 4e26 / TAU, 100e-6),          # pumping from empty
    (3e26, 0.0, 500e-6),                # free decay
    (5e26, 1e30, 37e-6),                # above the steady state: decays towards it
    (1e25, 2e30, 1e-9),                 # a few ns: the short-interval limit
    (2e26, 1e30, 50 * TAU),             # long: the steady state R·tau
])
def test_against_the_exact_formula_and_solve_ivp(n0, rate, t):
    n_end, pumped, decayed = relax_inversion(np.array([n0]), rate, TAU, t)
    ref = exact(n0, rate, TAU, t)
    assert n_end[0] == pytest.approx(ref, rel=1e-13, abs=1e-13 * max(n0, rate * TAU))
    # scipy reference with the pump and decay integrals as extra states
    sol = solve_ivp(lambda _, y: [rate - y[0] / TAU, rate, y[0] / TAU], (0.0, t), [n0, 0.0, 0.0],
                    method="DOP853", rtol=1e-12, atol=1e-13 * max(n0, rate * TAU, rate * t))
    scale = max(n0, rate * TAU, rate * t)
    assert n_end[0] == pytest.approx(sol.y[0, -1], abs=1e-9 * scale)
    assert pumped[0] == pytest.approx(sol.y[1, -1], abs=1e-9 * scale)
    assert decayed[0] == pytest.approx(sol.y[2, -1], abs=1e-9 * scale)
    # conservation: the change is what the pump put in minus what decayed
    assert n_end[0] - n0 == pytest.approx(pumped[0] - decayed[0], abs=1e-13 * scale)


def test_intervals_compose():
    rng = np.random.default_rng(3)
    n0 = rng.uniform(0, 5e26, 100)
    rate = rng.uniform(0, 3e30, 100)
    one, p1, d1 = relax_inversion(n0, rate, TAU, 300e-6)
    half, p_a, d_a = relax_inversion(n0, rate, TAU, 120e-6)
    two, p_b, d_b = relax_inversion(half, rate, TAU, 180e-6)
    np.testing.assert_allclose(two, one, rtol=1e-13)
    np.testing.assert_allclose(p_a + p_b, p1, rtol=1e-13)
    np.testing.assert_allclose(d_a + d_b, d1, rtol=1e-12)


def test_zero_time_changes_nothing_and_input_is_not_changed():
    n0 = np.array([1e26, 2e26])
    keep = n0.copy()
    n_end, pumped, decayed = relax_inversion(n0, 1e30, TAU, 0.0)
    np.testing.assert_array_equal(n_end, n0)
    np.testing.assert_array_equal(pumped, 0.0)
    np.testing.assert_array_equal(decayed, 0.0)
    np.testing.assert_array_equal(n0, keep)


@pytest.mark.parametrize("n0, t", [(0.0, 20e-6), (0.0, 400e-6), (1.5e26, 3e-3), (1.9e26, 10e-6)])
def test_bleaching_cap_against_solve_ivp(n0, t):
    # dN/dt = R − N/tau below the cap; at the cap N stays and the pump only replaces the decays.
    rate, cap = 3e30, 2e26                   # R·tau = 6.9e26 > cap
    n_end, pumped, decayed = relax_inversion(np.array([n0]), rate, TAU, t, n2_max=cap)
    t_hit = TAU * math.log((rate * TAU - n0) / (rate * TAU - cap))

    # scipy reference: integrate until an event finds the cap, then hold N at the cap
    def rhs(_, y):
        return [rate - y[0] / TAU, rate, y[0] / TAU]

    def reaches_cap(_, y):
        return y[0] - cap
    reaches_cap.terminal = True
    sol = solve_ivp(rhs, (0.0, t), [n0, 0.0, 0.0], method="DOP853", rtol=1e-12, atol=1e-13 * rate * TAU,
                    events=reaches_cap)
    n_ref, p_ref, d_ref = sol.y[:, -1]
    if sol.status == 1:                      # the cap was reached at sol.t[-1]: the pump replaces the decays
        rest = t - sol.t[-1]
        n_ref, p_ref, d_ref = cap, p_ref + cap / TAU * rest, d_ref + cap / TAU * rest
        assert sol.t[-1] == pytest.approx(t_hit, rel=1e-8)
    assert n_end[0] == pytest.approx(min(exact(n0, rate, TAU, t), cap), rel=1e-13)
    assert n_end[0] == pytest.approx(n_ref, rel=1e-9)
    assert pumped[0] == pytest.approx(p_ref, rel=1e-9)
    assert decayed[0] == pytest.approx(d_ref, rel=1e-9)
    assert n_end[0] - n0 == pytest.approx(pumped[0] - decayed[0], rel=1e-12, abs=1.0)


def test_linear_so_columns_follow_the_same_law():
    # the sum over a column of voxels obeys the same solution with the summed pump rate
    rng = np.random.default_rng(5)
    n0 = rng.uniform(0, 4e26, (20, 7))
    rate = rng.uniform(0, 2e30, (20, 7))
    n_end = relax_inversion(n0, rate, TAU, 80e-6)[0]
    col = relax_inversion(n0.sum(axis=0), rate.sum(axis=0), TAU, 80e-6)[0]
    np.testing.assert_allclose(n_end.sum(axis=0), col, rtol=1e-13)
