"""Pure diffraction kernels (kernels/diffraction.py) and the optics on the fluence path.

References
----------
J. W. Goodman, Introduction to Fourier Optics: section 3.10, the angular-spectrum transfer function
H = exp(i·dz·(kz − k)), |H| = 1 for propagating waves, evanescent waves damped, and its paraxial limit
kz − k ≈ −kt²/(2k); sections 5.2 and 8.3, the 4f system images the input inverted, (x, y) -> (−x, −y),
so a pinhole that passes the whole angular spectrum returns the inverted field. The phase factor
against numpy's complex exponential; the soft aperture against its defining transmission
exp(−ln 2·(2r/D)^order); the relay against energy conservation (a magnified image spreads the same
energy over M² times the area: geometrical imaging).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from ampmodel.beam.fluence_steps import fluence_aperture, fluence_relay
from ampmodel.beam.state import BeamState
from ampmodel.description import Step
from ampmodel.kernels import diffraction as kd

N, WIDTH, WAVELENGTH = 64, 8e-3, 1e-6
X = (np.arange(N) - (N - 1) / 2) * (WIDTH / N)


def test_phase_factor_matches_the_complex_exponential():
    """amplitude·exp(iφ) from the Taylor sums (|φ| <= 0.1) and from cos/sin, against numpy's exp."""
    rng = np.random.default_rng(1)
    amp = rng.random(5000) + 0.5
    for scale in (1e-6, 0.1, 3.0):
        phase = (rng.random(5000) - 0.5) * 2 * scale
        assert np.max(np.abs(kd.amplitude_phase(amp, phase) - amp * np.exp(1j * phase))) < 1e-15 * 4


def test_phase_factor_with_a_scalar_amplitude_and_a_map_of_phases():
    """amplitude_phase broadcasts a scalar amplitude over a 2-D map of phases (every series length and
    cos/sin), against numpy's complex exponential."""
    rng = np.random.default_rng(4)
    for scale in (1e-9, 1e-3, 0.05, 2.0):
        phase = (rng.random((7, 9)) - 0.5) * 2 * scale
        got = kd.amplitude_phase(1.5, phase)
        assert got.shape == phase.shape and got.dtype == np.complex128
        assert np.max(np.abs(got - 1.5 * np.exp(1j * phase))) < 1.5 * 4e-16 * 2


def test_transfer_function_is_unitary_for_propagating_waves_and_damps_evanescent_ones():
    kx = kd.angular_frequencies(N, 40e-6 * N)          # 40 µm pixels at 20 µm wavelength: evanescent band
    h = kd.transfer_function(kx, kx, 20e-6, 1.0, 1e-3)
    k = 2 * math.pi / 20e-6
    kt = np.hypot(kx[None, :], kx[:, None])
    assert np.allclose(np.abs(h[kt <= k]), 1.0, rtol=0, atol=1e-15)
    assert np.all(np.abs(h[kt > 1.01 * k]) < 1.0)
    # kz − k = −kt²/(k + kz): the paraxial limit −kt²/(2k) for small angles
    small = kd.transfer_function(np.array([1e3]), np.array([0.0]), WAVELENGTH, 1.0, 1.0)
    assert np.angle(small[0, 0]) == pytest.approx(-(1e3) ** 2 / (2 * 2 * math.pi / WAVELENGTH), rel=1e-6)


def test_edge_mask_is_clear_in_the_middle_and_absorbs_at_the_edge():
    x = np.array([0.0, 0.8, 1.0]) * WIDTH / 2
    m = kd.edge_mask(x, np.array([0.0]), WIDTH)[0]
    assert m[0] == 1.0 and m[1] == pytest.approx(1.0, abs=7e-4) and m[2] == pytest.approx(1e-2, rel=1e-12)


def test_a_wide_pinhole_returns_the_inverted_field():
    rng = np.random.default_rng(2)
    x = X
    field = np.exp(-((x[None, :] - 1e-3) ** 2 + x[:, None] ** 2) / (0.8e-3) ** 2) * np.exp(1j * rng.random((N, N)) * 0.01)
    out, pad, passed = kd.pinhole_filter(field[None], WIDTH, WAVELENGTH, 0.1, 0.1)   # far beyond the band
    assert pad == 1 and passed == pytest.approx(1.0, abs=1e-15)
    assert np.allclose(out[0], field[::-1, ::-1], atol=1e-13)


def _fluence_beam(fluence):
    return BeamState(fluence=fluence[None].copy(), b_integral=np.zeros((1, N, N)), x_m=X, y_m=X, dt_s=1e-9,
                     wavelength_m=WAVELENGTH)


def test_soft_aperture_and_relay_on_the_fluence_path():
    """Without diffraction a soft aperture multiplies the fluence by exp(−ln 2·(2r/D)^order); a relay of
    M = 1 turns the map through 180°, of M = 2 spreads the energy (less what leaves the window) over
    four times the area."""
    r = np.hypot(X[None, :], X[:, None])
    flat = np.ones((N, N))
    beam = _fluence_beam(flat)
    out = fluence_aperture(beam, Step(kind="aperture", index=0, shape="round", diameter_m=4e-3, order=12))
    assert np.allclose(beam.fluence[0], np.exp(-math.log(2) * (r / 2e-3) ** 12), rtol=1e-12)
    assert out.clipped_J == pytest.approx(out.energy_in_J - out.energy_out_J)
    spot = np.exp(-2 * ((X[None, :] - 1e-3) ** 2 + X[:, None] ** 2) / (0.5e-3) ** 2)
    beam = _fluence_beam(spot)
    fluence_relay(beam, Step(kind="relay", index=0, magnification=1.0))
    assert np.array_equal(beam.fluence[0], spot[::-1, ::-1])
    beam = _fluence_beam(spot)
    e0 = beam.energy_J()
    out = fluence_relay(beam, Step(kind="relay", index=0, magnification=2.0))
    assert beam.energy_J() + out.clipped_J == pytest.approx(e0, rel=1e-12)
    assert out.clipped_J < 1e-4 * e0          # only the far wing falls outside the window
    assert beam.fluence[0].max() == pytest.approx(spot.max() / 4, rel=3e-2)


def test_cw_mode_takes_diffraction_and_the_seed_field_keys_with_it():
    """A cw config takes grid.diffraction = true and, with it, the seed's waist, curvature and M²;
    without diffraction a seed waist is refused with the key and the fix named."""
    from pathlib import Path

    from ampmodel.config.checks import ConfigError
    from ampmodel.config.load import load_config
    from ampmodel.config.text import tomllib

    root = Path(__file__).resolve().parents[2]
    raw = tomllib.loads((root / "configs" / "cw_double_pass_single_frequency.toml").read_text())
    raw["grid"]["diffraction"] = True
    raw["seed"]["waist_mm"] = 100.0
    config = load_config(raw)
    assert config.grid.diffraction and config.seed.waist_m == pytest.approx(0.1)
    raw["grid"]["diffraction"] = False
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    text = "\n".join(info.value.problems)
    assert "seed.waist_mm = 100.0: shapes the seed's optical field" in text
    assert "set grid.diffraction = true or remove it" in text
