"""The seed's wavelength and spectrum: each time slice meets the medium with the cross-sections at its
own wavelength.

References
----------
Small signal, per wavelength: S_out(λ) = S_in(λ)·exp(∫ g(λ) dz), g(λ) = σe(λ)·N2 − σa(λ)·N1
(Beer–Lambert; A. E. Siegman, Lasers, University Science Books (1986), gain narrowing). A Gaussian
line and a Gaussian spectrum give, to second order about the line's peak,
1/Δλ_out² ≈ 1/Δλ_s² + ln G0/Δλ_g²; the tests compute the exact width of the product numerically.
Saturation: Frantz–Nodvik per time slice with its own Fsat = hν/(σe + σa) (L. M. Frantz and
J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963)), the ions it takes out ΔN2 = −ΔJ/(hν·L).
"""
from __future__ import annotations

import copy
import math

import numpy as np
import pytest
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK

from ampmodel import load_config, simulate

LINE_NM, LINE_FWHM_NM, SIGMA0_CM2 = 800.0, 30.0, 3.0e-19
TABLE_NM = np.linspace(650.0, 950.0, 601)


def line(nm: np.ndarray, centre: float = LINE_NM, peak: float = SIGMA0_CM2) -> np.ndarray:
    """A Gaussian emission line (cm²)."""
    return peak * np.exp(-4.0 * math.log(2.0) * ((np.asarray(nm) - centre) / LINE_FWHM_NM) ** 2)


def config(seed: dict, gain: float = 1000.0, points: int = 8, slices: int = 4, time_slices: int = 64,
           absorption: np.ndarray | None = None, doping: float | None = None, steps: list | None = None) -> dict:
    """A flat beam through one crystal whose material carries a Gaussian line as its spectrum."""
    material = {"wavelength_nm": LINE_NM, "emission_cross_section_cm2": SIGMA0_CM2, "upper_lifetime_us": 3.2,
                "refractive_index": 1.76,
                "spectrum": {"wavelength_nm": TABLE_NM.tolist(), "emission_cm2": line(TABLE_NM).tolist(),
                             "absorption_cm2": (absorption if absorption is not None else 0.0 * TABLE_NM).tolist()}}
    if absorption is not None:
        material["absorption_cross_section_cm2"] = float(np.interp(LINE_NM, TABLE_NM, absorption))
    medium = {"name": "xtal", "length_mm": 10.0, "diameter_mm": 3.9, "slices": slices, "small_signal_gain": gain,
              "material": material}
    if doping is not None:
        medium["doping_per_m3"] = doping
    base = {"energy_J": 1e-15, "duration_ns": 1.0, "shape": "gaussian", "profile": "flat", "diameter_mm": 2.0}
    base.update(seed)
    return {"title": "spectral test", "grid": {"points": points, "width_mm": 4.0, "time_slices": time_slices},
            "medium": [medium], "seed": base, "step": steps or [{"kind": "pass", "medium": "xtal"}]}


def run(raw: dict):
    return simulate(load_config(raw))


def gaussian_fwhm(nm: np.ndarray, values: np.ndarray) -> float:
    half = values.max() / 2
    above = nm[values >= half]
    return float(above[-1] - above[0])


def test_a_seed_at_half_the_peak_cross_section_gets_the_square_root_of_the_gain():
    """Four-level, small signal: ln G(λ) = (σe(λ)/σe(λ0))·ln G0, so at half the peak G = sqrt(G0)."""
    half_nm = LINE_NM + LINE_FWHM_NM / 2                    # σe = σ0/2 there (a table point)
    result = run(config({"wavelength_nm": half_nm}))
    assert result.summary["gain"] == pytest.approx(math.sqrt(1000.0), rel=1e-9)


def test_a_seed_off_the_line_is_not_amplified():
    result = run(config({"wavelength_nm": 940.0}))        # σe ≈ 1e-13 of the peak there
    assert result.summary["gain"] == pytest.approx(1.0, abs=1e-9)
    assert result.summary["energy_balance_error"] == pytest.approx(0.0, abs=1e-12)


def test_small_signal_spectrum_follows_beer_lambert_per_wavelength():
    """A chirped seed (20 nm FWHM) through the 30 nm line at G0 = 1000: each slice's output is its
    input times G0 raised to σ(λ)/σ0 (the table interpolated), and the output's FWHM is the exact
    Beer–Lambert width within 3 %."""
    result = run(config({"wavelength_nm": LINE_NM, "bandwidth_nm": 20.0}, time_slices=256))
    wl_nm = result.wavelength_m * 1e9
    s_in = result.seed_spectrum_J_m
    s_out = result.steps[-1].datasets["spectrum"][0]
    sigma = np.interp(wl_nm, TABLE_NM, line(TABLE_NM))
    expected = s_in * 1000.0 ** (sigma / SIGMA0_CM2)
    lit = s_in > 1e-12 * s_in.max()
    np.testing.assert_allclose(s_out[lit], expected[lit], rtol=1e-9)
    fine = np.linspace(700.0, 900.0, 400_001)
    exact = np.exp(-4 * math.log(2) * ((fine - LINE_NM) / 20.0) ** 2) * 1000.0 ** (line(fine) / SIGMA0_CM2)
    width = gaussian_fwhm(fine, exact)
    assert result.summary["output_bandwidth_nm"] == pytest.approx(width, rel=0.03)
    assert width < 20.0 * 0.6                                       # narrowed, not a vacuous check
    second_order = 1.0 / math.sqrt(1 / 20.0 ** 2 + math.log(1000.0) / LINE_FWHM_NM ** 2)
    assert width == pytest.approx(second_order, rel=0.03)
    assert result.summary["output_centre_nm"] == pytest.approx(LINE_NM, abs=0.01)


def test_an_off_centre_seed_is_pulled_towards_the_line_centre():
    result = run(config({"wavelength_nm": 815.0, "bandwidth_nm": 20.0}, time_slices=256))
    centre = result.summary["output_centre_nm"]
    assert LINE_NM < centre < 815.0 - 5.0


def test_a_saturated_chirped_pulse_against_frantz_nodvik_slice_by_slice():
    """One slab (one z-slice, flat beam), a chirped pulse that saturates it: every time slice against
    Frantz–Nodvik evaluated here with that slice's own cross-section, Fsat and the ions the slices
    before it left (written out independently of the code)."""
    raw = config({"wavelength_nm": 805.0, "bandwidth_nm": 25.0, "energy_J": 5e-3}, gain=50.0, slices=1,
                 time_slices=40)
    result = run(raw)
    nm = result.wavelength_m * 1e9
    area = (4e-3 / 8) ** 2
    lit = int((np.hypot(*np.meshgrid(*(2 * [(np.arange(8) + 0.5) * 0.5e-3 - 2e-3]))) <= 1.0e-3).sum())
    fluence_in = result.seed_power_W * (result.t_s[1] - result.t_s[0]) / (lit * area)      # J/m² per slice
    length = 0.01
    n2 = math.log(50.0) / length / (SIGMA0_CM2 * 1e-4)                # N2 from G0 at the line (four-level)
    out = []
    for f, wl in zip(fluence_in, nm, strict=True):
        sigma = float(np.interp(wl, TABLE_NM, line(TABLE_NM))) * 1e-4
        hnu = PLANCK * LIGHT_SPEED / (wl * 1e-9)
        fsat = hnu / sigma
        j = fsat * math.log1p(math.exp(sigma * n2 * length) * math.expm1(f / fsat))
        n2 -= (j - f) / (hnu * length)
        out.append(j)
    got = result.steps[0].power_W * (result.t_s[1] - result.t_s[0]) / (lit * area)
    np.testing.assert_allclose(got, np.array(out), rtol=1e-10)
    assert result.summary["gain"] < 0.5 * 50.0                        # saturated, not a small-signal case
    assert abs(result.summary["energy_balance_error"]) < 1e-12


def test_quasi_three_level_absorption_per_wavelength():
    """A medium that absorbs on the short side of its line: each slice sees
    ln G(λ) = ((σe + σa)(λ)·N2 − σa(λ)·Nt)·L with N2 from G0 at the line."""
    absorption = line(TABLE_NM, centre=760.0, peak=1.0e-19)
    doping = 1.0e26
    raw = config({"wavelength_nm": 790.0, "bandwidth_nm": 40.0}, gain=20.0, absorption=absorption, doping=doping,
                 time_slices=64)
    result = run(raw)
    nm = result.wavelength_m * 1e9
    se0, sa0 = SIGMA0_CM2 * 1e-4, float(np.interp(LINE_NM, TABLE_NM, absorption)) * 1e-4
    n2 = (math.log(20.0) / 0.01 + sa0 * doping) / (se0 + sa0)
    se = np.interp(nm, TABLE_NM, line(TABLE_NM)) * 1e-4
    sa = np.interp(nm, TABLE_NM, absorption) * 1e-4
    expected = result.seed_spectrum_J_m * np.exp(((se + sa) * n2 - sa * doping) * 0.01)
    lit = result.seed_spectrum_J_m > 1e-12 * result.seed_spectrum_J_m.max()
    np.testing.assert_allclose(result.steps[0].datasets["spectrum"][0][lit], expected[lit], rtol=1e-9)
    assert np.any(expected[lit] < result.seed_spectrum_J_m[lit])      # some wavelengths are absorbed


def test_round_trips_narrow_the_spectrum_as_beer_lambert_says():
    """A repeat of 6 round trips through the line (small signal, a 20 % loss per round trip): the output
    spectrum is the seed's times (T·G0^φ(λ))^6, narrower than after one pass."""
    steps = [{"kind": "repeat", "count": 6, "steps": [{"kind": "pass", "medium": "xtal"},
                                                      {"kind": "loss", "transmission": 0.8}]}]
    result = run(config({"wavelength_nm": LINE_NM, "bandwidth_nm": 40.0}, gain=5.0, steps=steps, time_slices=256))
    nm = result.wavelength_m * 1e9
    phi = np.interp(nm, TABLE_NM, line(TABLE_NM)) / SIGMA0_CM2
    expected = result.seed_spectrum_J_m * (0.8 * 5.0 ** phi) ** 6
    lit = result.seed_spectrum_J_m > 1e-12 * result.seed_spectrum_J_m.max()
    np.testing.assert_allclose(result.steps[0].datasets["spectrum"][0][lit], expected[lit], rtol=1e-9)
    fine = np.linspace(650.0, 950.0, 300_001)
    exact = np.exp(-4 * math.log(2) * ((fine - LINE_NM) / 40.0) ** 2) * 5.0 ** (6 * line(fine) / SIGMA0_CM2)
    assert result.summary["output_bandwidth_nm"] == pytest.approx(gaussian_fwhm(fine, exact), rel=0.03)


def test_the_field_path_matches_the_fluence_path_for_a_chirped_pulse():
    """With diffraction on, a wide beam through a short crystal: the same energies and spectrum."""
    raw = config({"wavelength_nm": 805.0, "bandwidth_nm": 20.0, "energy_J": 2e-3, "profile": "supergaussian",
                  "diameter_mm": 2.4}, gain=20.0, points=32, time_slices=24)
    plain = run(raw)
    field = copy.deepcopy(raw)
    field["grid"]["diffraction"] = True
    waves = run(field)
    assert waves.summary["output_energy_J"] == pytest.approx(plain.summary["output_energy_J"], rel=2e-3)
    assert abs(waves.summary["energy_balance_error"]) < 1e-9
    np.testing.assert_allclose(waves.steps[0].datasets["spectrum"][0], plain.steps[0].datasets["spectrum"][0],
                               rtol=5e-3, atol=1e-6 * plain.steps[0].datasets["spectrum"][0].max())


def test_a_narrowband_seed_reports_its_transform_limit():
    """Without bandwidth_nm the spectrum is not resolved: its centre is the seed's wavelength and its
    width the transform limit of a 1 ns Gaussian, Δλ = λ²·0.441/(c·τ)."""
    result = run(config({"wavelength_nm": LINE_NM}))
    assert result.summary["output_centre_nm"] == pytest.approx(LINE_NM)
    expected = (LINE_NM * 1e-9) ** 2 * 2 * math.log(2) / math.pi / 1e-9 / LIGHT_SPEED * 1e9
    assert result.summary["output_bandwidth_nm"] == pytest.approx(expected, rel=1e-12)
    assert result.wavelength_m is None and result.seed_spectrum_J_m is None


def test_a_cw_seed_away_from_the_line_sees_the_cross_section_there():
    """cw mode, small signal: a seed at half the peak cross-section gets sqrt(G0), as a pulse does."""
    raw = config({"wavelength_nm": LINE_NM + LINE_FWHM_NM / 2})
    raw["mode"] = "cw"
    raw["seed"] = {"power_W": 1e-9, "profile": "flat", "diameter_mm": 2.0,
                   "wavelength_nm": LINE_NM + LINE_FWHM_NM / 2}
    raw["grid"].pop("time_slices")
    result = run(raw)
    assert result.summary["gain"] == pytest.approx(math.sqrt(1000.0), rel=1e-8)
