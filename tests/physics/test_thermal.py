"""Heat, temperature, thermal lens and depolarisation against closed forms and conservation.

References
----------
W. Koechner, Solid-State Laser Engineering, 6th ed., Springer (2006), ch. 7 (thermal effects): the
temperature of a uniformly heated rod cooled on its barrel ΔT(r) = Q·(r0² − r²)/(4K); the thermal
lens of such a rod f = K·A/P_h·(½·dn/dT + ...)⁻¹ (dn/dT term alone here; the ½ comes from the
parabola's r²/(4K) and the thin-lens phase r²/(2f)); the depolarisation of a uniformly pumped rod
D = ¼·[1 − sin(C_T·P_h)/(C_T·P_h)] (from memory — verify the equation numbers).
H. Kogelnik and T. Li, Laser beams and resonators, Appl. Opt. 5, 1550 (1966): the q-parameter of a
Gaussian beam through ABCD optics, 1/q' = 1/q − 1/f for a thin lens, q' = q + d/n for a length d in
index n, and w² = −λ0/(π·Im(1/q)).
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import scipy.integrate

from ampmodel.beam import field as field_path
from ampmodel.beam.field import start_beam
from ampmodel.config.load import load_config
from ampmodel.description import Medium
from ampmodel.kernels import thermal as th
from ampmodel.kernels.beam_shapes import aperture_mask
from ampmodel.materials import registry
from ampmodel.media import thermal
from ampmodel.pulsed.field_pass import pass_medium_field
from ampmodel.pulsed.passes import MediumState
from ampmodel.simulation import simulate

ROOT = Path(__file__).resolve().parents[2]


def _grid(n, width):
    return (np.arange(n) - (n - 1) / 2) * (width / n)


def _rod(diameter=4e-3, length=20e-3, slices=1, cooling="barrel", material="Nd:YAG"):
    return Medium(name="rod", material=registry.get(material), length_m=length, diameter_m=diameter,
                  slices=slices, small_signal_gain=1.0, cooling=cooling)


@pytest.mark.parametrize("pixels", [24, 65])
def test_uniformly_heated_rod_is_the_textbook_parabola(pixels):
    """ΔT(r) = Q·(r0² − r²)/(4K) (Koechner, ch. 7) within 1 % of ΔT(0), on grids of 24 and 65 pixels
    across a 5 mm window holding a 4 mm rod: the Shortley–Weller edge makes the 5-point scheme exact for
    a parabola, so only round-off remains (a stair-step edge at the pixel centres would be off by about
    a pixel in r0, several per cent here)."""
    x = _grid(pixels, 5e-3)
    rod = _rod()
    q, k, r0 = 3.0e8, rod.material.thermal_conductivity_W_mK, rod.diameter_m / 2
    mask = aperture_mask(x, x, "round", rod.diameter_m)
    heat = np.where(mask, q, 0.0)[None]
    rise = thermal.temperature_rise_K(rod, heat, x, x)[0]
    r2 = x[None, :] ** 2 + x[:, None] ** 2
    expected = q * (r0 ** 2 - r2) / (4 * k)
    assert np.max(np.abs(rise - expected)[mask]) < 0.01 * q * r0 ** 2 / (4 * k)
    assert np.all(rise[~mask] == 0.0)


def test_face_cooled_disc_is_the_one_dimensional_parabola():
    """A disc cooled on its back face z = L, front insulated, uniform heat: T(z) − T(L) = Q·(L² − z²)/(2K)
    (1-D conduction); the slice means of the exact profile, to round-off."""
    q, k, length, nz = 2e8, 13.0, 2e-3, 8
    dz = length / nz
    rise = th.face_cooled_rise(np.full((nz, 1, 1), q), dz, k)[:, 0, 0]
    edges = np.arange(nz + 1) * dz
    # mean over each slice of Q(L² − z²)/(2K)
    expected = q / (2 * k) * (length ** 2 - (edges[1:] ** 3 - edges[:-1] ** 3) / (3 * dz))
    np.testing.assert_allclose(rise, expected, rtol=1e-12)


def test_thermal_focal_length_of_a_uniformly_pumped_rod():
    """f = K·A/(P_h·½·dn/dT) (Koechner, ch. 7, the dn/dT term) within 2 %: the OPD's parabolic fit over
    the heated rod."""
    x = _grid(65, 5e-3)
    rod = _rod(slices=4)
    mask = aperture_mask(x, x, "round", rod.diameter_m)
    heat = np.where(mask, 5.0e7, 0.0)[None].repeat(4, axis=0)
    area = math.pi * (rod.diameter_m / 2) ** 2
    p_h = 5.0e7 * area * rod.length_m
    mat = rod.material
    koechner = mat.thermal_conductivity_W_mK * area / (p_h * 0.5 * mat.dn_dT_per_K)
    entry, rise, opd = thermal.thermal_figures(rod, heat, x, x, mask, 1.064e-6)
    assert entry["thermal_focal_length_m"] == pytest.approx(koechner, rel=0.02)
    assert opd.shape == mask.shape and rise.shape == heat.shape


def test_depolarisation_closed_form_against_the_integral_over_the_face():
    """D = ¼·[1 − sin(x)/x] is the face average of sin²(2φ)·sin²(δ/2), δ = x·(r/r0)² (scipy dblquad);
    and Koechner's C_B of YAG ≈ −0.0099 from the photo-elastic data of the Nd:YAG file."""
    mat = registry.get("Nd:YAG")
    c_b = th.birefringence_constant(mat.poisson_ratio, mat.photoelastic_p11, mat.photoelastic_p12,
                                    mat.photoelastic_p44)
    assert c_b == pytest.approx(-0.0099, abs=0.0003)
    lam, heat = 1.064e-6, 40.0
    x = 2 * mat.refractive_index ** 3 * mat.thermal_expansion_per_K * abs(c_b) / (lam * mat.thermal_conductivity_W_mK) * heat
    value, _ = scipy.integrate.dblquad(lambda r, phi: math.sin(2 * phi) ** 2 * math.sin(x * r * r / 2) ** 2 * r,
                                       0, 2 * math.pi, 0, 1)
    integral = value / math.pi
    assert th.depolarisation(heat, lam, mat.refractive_index, mat.thermal_expansion_per_K,
                             mat.thermal_conductivity_W_mK, c_b) == pytest.approx(integral, rel=1e-8)
    rod = _rod()
    assert thermal.depolarisation_estimate(rod, heat, lam) == pytest.approx(integral, rel=1e-8)
    assert thermal.depolarisation_estimate(_rod(material="Nd:YVO4"), heat, lam) == "not available"


def test_cw_heat_balance_and_the_quantum_defect():
    """A cw end-pumped Nd:YAG rod (four-level, no pump emission, η = 0.95): absorbed pump = extracted +
    heat + fluorescence to round-off (energy conservation); every created ion leaves h·νs (as signal or
    fluorescence), so heat / absorbed = 1 − η·λp/λs exactly."""
    config = load_config(ROOT / "configs" / "cw_double_pass_single_frequency.toml")
    result = simulate(config)
    entry = result.summary["media"][0]
    assert abs(entry["heat_balance_error"]) < 1e-12
    pump = config.media[0].pump
    expected = 1 - pump.quantum_efficiency * pump.wavelength_m / config.seed.wavelength_m
    assert entry["heat_fraction"] == pytest.approx(expected, rel=1e-9)
    assert entry["extracted_power_W"] + entry["heat_W"] + entry["fluorescence_power_W"] == pytest.approx(
        entry["absorbed_pump_power_W"], rel=1e-12)
    rec = result.media[entry["name"]]
    dv = config.media[0].length_m / config.media[0].slices * float((result.x_m[1] - result.x_m[0]) ** 2)
    assert float(rec.heat_W_m3.sum() * dv) == pytest.approx(entry["heat_W"], rel=1e-12)


def _w2(beam):
    f = np.abs(beam.field[0]) ** 2
    xx = beam.x_m[None, :] ** 2 + 0 * beam.y_m[:, None]
    return 4 * float((f * xx).sum() / f.sum())      # w² = 4·⟨x²⟩ for |E|² ∝ exp(−2r²/w²)


def test_gaussian_beam_through_a_heated_rod_focuses_as_its_thin_lens():
    """A Gaussian beam (waist at the rod's entrance) through a short, uniformly heated rod on the field
    path, then free space: its width follows the Kogelnik–Li q-law with the rod's computed thermal focal
    length (within 2 %)."""
    n, width, lam = 128, 8e-3, 1.064e-6
    x = _grid(n, width)
    rod = _rod(diameter=4e-3, length=2e-3, slices=1)
    mask = aperture_mask(x, x, "round", rod.diameter_m)
    heat = np.where(mask, 4.0e9, 0.0)[None]
    phase = thermal.thermal_phase_rad(rod, heat, x, x, lam)
    entry, _, _ = thermal.thermal_figures(rod, heat, x, x, mask, lam)
    f = entry["thermal_focal_length_m"]
    assert 0.2 < f < 0.4
    w0 = 0.6e-3
    r2 = x[None, :] ** 2 + x[:, None] ** 2
    beam = start_beam(np.exp(-r2 / w0 ** 2).astype(complex), np.ones(1), x, x, 1e-9, lam, width, 1)
    medium = MediumState(name="rod", ln_gain=np.zeros((1, n, n)), mask=mask, saturation_fluence_J_m2=1e4,
                         slice_length_m=rod.length_m, loss_per_m=0.0, n2_m2_W=0.0, thermal_phase_rad=phase)
    index = rod.material.refractive_index
    pass_medium_field(beam, medium, index)
    d = 0.5 * f
    field_path.advance(beam, d, 1.0, steps=1)
    q = 1j * math.pi * w0 ** 2 / lam + rod.length_m / (2 * index)
    q = 1 / (1 / q - 1 / f) + rod.length_m / (2 * index) + d
    w2 = -lam / (math.pi * (1 / q).imag)
    assert _w2(beam) == pytest.approx(w2, rel=0.02)
    # without the lens the beam would have grown instead
    assert w2 < w0 ** 2


def test_pulse_train_heat_over_the_period():
    """A 10 kHz train of an end-pumped Nd:YVO4 crystal (four-level, η = 1): over the steady state's period
    absorbed pump = extracted + heat + fluorescence (the upper-state energy is periodic), to the
    train's tolerance; every ion the pump creates leaves h·νs, so heat / absorbed = 1 − λp/λs, here to
    1e-4: the pump interval's time steps count the photons absorbed and the ions created a little apart
    (kernels/pump_rates.py: pump_interval, second order in its step; measured 5e-6)."""
    config = load_config(ROOT / "configs" / "khz_end_pumped_train.toml")
    result = simulate(config)
    entry = result.summary["media"][0]
    assert abs(result.summary["train"]["heat_balance_error"]) < 1e-9
    pump = config.media[0].pump
    assert entry["heat_fraction"] == pytest.approx(1 - pump.wavelength_m / config.seed.wavelength_m, rel=1e-4)
    assert entry["heat_W"] == pytest.approx(entry["heat_fraction"] * entry["absorbed_pump_average_power_W"], rel=1e-12)
    assert result.media[entry["name"]].heat_W_m3.shape == result.media[entry["name"]].gain_final_per_m.shape
    assert entry["depolarisation_estimate"] == "not available"


def test_a_train_with_diffraction_applies_its_lens_and_the_switch_turns_it_off():
    """grid.diffraction = true: the train's second solve carries each medium's lens (a focusing lens makes
    the output beam differ from the run without it); thermal_lens = false gives the run without a lens,
    whose heat is the same to the pump's bleaching (four-level: heat = h·νp·absorbed − h·νs·created)."""
    base = ["grid.diffraction=true", "grid.time_slices=4", "grid.points=48"]
    on = simulate(load_config(ROOT / "configs" / "khz_end_pumped_train.toml", base))
    off = simulate(load_config(ROOT / "configs" / "khz_end_pumped_train.toml",
                               base + ["medium.crystal.thermal_lens=false"]))
    m_on, m_off = on.summary["media"][0], off.summary["media"][0]
    assert m_on["thermal_lens_applied"] and not m_off["thermal_lens_applied"]
    assert m_on["heat_W"] == pytest.approx(m_off["heat_W"], rel=1e-3)
    assert abs(on.summary["output_energy_J"] / off.summary["output_energy_J"] - 1) > 1e-3


def test_uniformly_heated_square_rod_against_the_fourier_series():
    """A square rod (side a) with uniform heat, its faces at the coolant: the double sine series of the
    Poisson problem, ΔT(x, y) = 16·Q·a²/(π⁴·K)·Σ_odd m,n sin(mπx/a)·sin(nπy/a)/(m·n·(m² + n²)) (separation
    of variables, e.g. H. S. Carslaw and J. C. Jaeger, Conduction of Heat in Solids, 2nd ed., Oxford
    (1959) (from memory — verify the section)), within 0.1 % of its centre value on 49 pixels across."""
    a, q = 4e-3, 3e8
    x = _grid(49, 4.4e-3)
    rod = Medium(name="rod", material=registry.get("Nd:YAG"), length_m=0.02, diameter_m=a, aperture="square",
                 slices=1, small_signal_gain=1.0)
    mask = aperture_mask(x, x, "square", a)
    rise = thermal.temperature_rise_K(rod, np.where(mask, q, 0.0)[None], x, x)[0]
    k = rod.material.thermal_conductivity_W_mK
    m = np.arange(1, 400, 2)[:, None, None]
    n = np.arange(1, 400, 2)[None, :, None]
    xs, ys = x[None, None, :] + a / 2, x[None, None, :] + a / 2
    sx = np.sin(m * np.pi * xs / a)[:, 0, :]                     # (M, Nx)
    sy = np.sin(n * np.pi * ys / a)[0, :, :]                     # (N, Ny)
    coef = 1.0 / (m * n * (m ** 2 + n ** 2))[:, :, 0]            # (M, N)
    series = 16 * q * a * a / (np.pi ** 4 * k) * np.einsum("mn,mx,ny->yx", coef, sx, sy)
    scale = float(series.max())
    error = np.max(np.abs(rise - series)[mask]) / scale
    assert 0.0 <= error < 1e-3, error
