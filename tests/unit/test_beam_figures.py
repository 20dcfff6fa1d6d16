"""Beam figures (kernels/beam_figures.py) against closed forms, and their place in the run's files.

References
----------
ISO 11146-1 second-moment diameters: D4σ = 2w for a Gaussian beam I ~ exp(−2r²/w²), the diameter D
for a uniform disc (⟨x²⟩ = R²/4). Modulation ∫F²/∫F of a Gaussian: F0/2. Fill factor of a Gaussian
in an aperture of radius R: (πw²/2)·(1 − exp(−2R²/w²)) / (π·R²) (integral of the Gaussian).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from ampmodel.kernels import diffraction as kd
from ampmodel.kernels.beam_figures import aperture_figures, d4sigma, m_squared

N, WIDTH = 256, 12e-3
X = (np.arange(N) - (N - 1) / 2) * (WIDTH / N)
R = np.hypot(X[None, :], X[:, None])
AREA = (WIDTH / N) ** 2


def test_d4sigma_of_a_gaussian_and_a_disc():
    w = 1.5e-3
    assert d4sigma(np.exp(-2 * R ** 2 / w ** 2), X, X) == pytest.approx((2 * w, 2 * w), rel=1e-9)
    disc = kd.disc_fraction(X, X, 2e-3)
    assert d4sigma(disc, X, X) == pytest.approx((4e-3, 4e-3), rel=2e-3)
    assert d4sigma(np.zeros((N, N)), X, X) == (0.0, 0.0)


def test_modulation_and_fill_factor():
    inside = R <= 3e-3
    mod, fill = aperture_figures(inside.astype(float), inside, AREA)
    assert (mod, fill) == pytest.approx((1.0, 1.0), rel=1e-12)
    w, radius = 2e-3, 3e-3
    gauss = np.exp(-2 * R ** 2 / w ** 2)
    mod, fill = aperture_figures(gauss, inside, AREA)
    peak = gauss[inside].max()
    expected_fill = (math.pi * w ** 2 / 2) * (1 - math.exp(-2 * radius ** 2 / w ** 2)) / (math.pi * radius ** 2) / peak
    assert fill == pytest.approx(expected_fill, rel=2e-2)          # the disc of pixels vs π·R²
    mean = (gauss[inside] ** 2).sum() / gauss[inside].sum()
    assert mod == pytest.approx(peak / mean, rel=1e-12)
    assert mod == pytest.approx(2.0 / (1 + math.exp(-2 * radius ** 2 / w ** 2)), rel=2e-3)


def test_m_squared_of_a_gaussian_is_one_anywhere_along_it():
    for z in (0.0, 0.5, 2.0):
        field = kd.gaussian_beam(X, X, 0.8e-3, 1e-6, z)
        assert m_squared(field, X, X) == pytest.approx((1.0, 1.0), abs=1e-6)
