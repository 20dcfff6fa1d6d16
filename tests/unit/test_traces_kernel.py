"""kernels/traces.py: a trace as straight lines between its points, against scipy and brute force.

References: scipy.integrate.quad of numpy.interp (the integral of the straight-line trace),
scipy.optimize.brentq on it (the inverse of the cumulative integral), the maximum of numpy.interp on a
dense grid (the largest value over an interval), and the Gaussian's time-bandwidth product
2·ln2/π = 0.4413 (a transform-limited Gaussian pulse: Fourier transform of a Gaussian).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from ampmodel.kernels import traces

RNG = np.random.default_rng(3)
X = np.cumsum(RNG.uniform(0.05, 0.4, 40))
P = np.abs(RNG.normal(1.0, 0.6, 40))
P[5:8] = 0.0                                   # a stretch of zero power inside


def interp(v):
    return np.interp(v, X, P)


def test_cumulative_is_the_integral_of_the_straight_lines():
    total = quad(interp, X[0], X[-1], points=X[1:-1], limit=200)[0]
    at = np.linspace(X[0] - 0.5, X[-1] + 0.5, 37)
    expected = [quad(interp, X[0], min(max(a, X[0]), X[-1]), points=X[(X > X[0]) & (X < a)], limit=200)[0] / total
                for a in at]
    assert np.allclose(traces.cumulative(X, P, at), expected, rtol=1e-10, atol=1e-13)
    assert traces.node_integrals(X, P)[-1] == pytest.approx(total, rel=1e-12)


def test_inverse_cumulative_inverts_it():
    fractions = np.linspace(0.001, 0.999, 51)
    found = traces.inverse_cumulative(X, P, fractions)
    for f, x in zip(fractions, found, strict=True):
        reference = brentq(lambda v, f=f: float(traces.cumulative(X, P, v)) - f, X[0], X[-1], xtol=1e-14)
        assert x == pytest.approx(reference, abs=1e-10)
    assert traces.inverse_cumulative(X, P, 1.0) == pytest.approx(X[-1])


def test_interval_maxima_match_a_dense_search():
    edges = np.linspace(X[0], X[-1], 23)
    # the dense grid holds the trace's own points inside each interval (where a maximum may sit)
    dense = [np.interp(np.union1d(np.linspace(a, b, 2001), X[(X > a) & (X < b)]), X, P).max()
             for a, b in zip(edges[:-1], edges[1:], strict=True)]
    assert np.allclose(traces.interval_maxima(X, P, edges), dense, rtol=0, atol=1e-12)


def test_the_time_bandwidth_product_of_a_gaussian():
    x = np.linspace(-4.0, 4.0, 801)                  # in units of the FWHM
    product = traces.time_bandwidth_product(x, np.exp(-4 * math.log(2) * x ** 2))
    assert product == pytest.approx(2 * math.log(2) / math.pi, rel=2e-3)


def test_support_is_where_the_trace_is_above_zero():
    p = np.array([0.0, 0.0, 1.0, 2.0, 0.0, 0.0])
    assert traces.support(np.arange(6.0), p) == (1.0, 4.0)
