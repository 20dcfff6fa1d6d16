"""Spatial filter, relay, apertures and whole runs on the field path, against closed forms and the
fluence path.

References
----------
Power of a Gaussian spot of radius w through a centred circular opening of radius a:
T = 1 − exp(−2a²/w²) (integral of the Gaussian; e.g. A. E. Siegman, Lasers (1986), section 17.1).
Focal spot of a collimated Gaussian beam of radius w behind a lens f: w_f = λf/(πw) (Kogelnik & Li,
Appl. Opt. 5, 1550 (1966), the q-law in the far field).
Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963) for the amplification both paths share.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from physics_reference import make_config, make_material, make_medium, pass_step
from test_diffraction import WAVELENGTH, axes, field_beam

from ampmodel.beam.field_steps import field_aperture, field_filter, field_relay
from ampmodel.description import Grid, Seed, Step
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels.beam_figures import aperture_figures, d4sigma
from ampmodel.simulation import simulate


def gaussian_spot(x, x0, y0, w):
    return np.exp(-((x[None, :] - x0) ** 2 + (x[:, None] - y0) ** 2) / w ** 2)


# ------------------------------------------------------------------------------------------------
# spatial filter
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("a_over_wf", [0.6, 1.0, 1.5])
def test_pinhole_passes_the_gaussian_fraction(a_over_wf):
    """A Gaussian beam (w = 1 mm) through a filter of f = 0.5 m: the pinhole of radius a passes
    T = 1 − exp(−2a²/w_f²) of the power, w_f = λf/(πw) (Siegman; Kogelnik & Li), within 0.5 %.
    What reaches the output window is that, less the pinhole's diffraction rings that fall outside
    the window (counted as clipped by the step)."""
    w, focal, width, points = 1e-3, 0.5, 8e-3, 128
    x = axes(points, width)
    beam = field_beam(kd.gaussian_beam(x, x, w, WAVELENGTH, 0.0), width)
    wf = WAVELENGTH * focal / (math.pi * w)
    e_in = beam.energy_J()
    out = field_filter(beam, Step(kind="filter", index=0, focal_m=focal,
                                         pinhole_diameter_m=2 * a_over_wf * wf))
    expected = 1.0 - math.exp(-2.0 * a_over_wf ** 2)
    assert out.pinhole_transmission == pytest.approx(expected, rel=5e-3)
    assert beam.energy_J() / e_in <= out.pinhole_transmission * (1 + 1e-12)
    assert out.clipped_J == pytest.approx(e_in - beam.energy_J(), rel=1e-12)


def test_filter_removes_ripple_and_inverts_the_image():
    """An off-centre Gaussian beam carrying a fine ripple (period 0.25 mm, far outside the pinhole's
    passband) comes out of the filter as the smooth, inverted beam: the ripple is gone (peak-to-mean
    modulation back to the Gaussian's 2 within 2 %) and the centroid is mirrored through the axis."""
    w, focal, width, points = 1.2e-3, 0.5, 10e-3, 128
    x = axes(points, width)
    smooth = gaussian_spot(x, 0.6e-3, -0.4e-3, w)
    rippled = smooth * (1.0 + 0.3 * np.cos(2 * math.pi * x / 0.25e-3))[None, :]
    beam = field_beam(rippled, width)
    area = beam.pixel_area_m2
    everything = np.ones((points, points), bool)
    before, _ = aperture_figures(beam.fluence[0], everything, area)
    wf = WAVELENGTH * focal / (math.pi * w)
    field_filter(beam, Step(kind="filter", index=0, focal_m=focal, pinhole_diameter_m=6 * wf))
    after, _ = aperture_figures(beam.fluence[0], everything, area)
    assert before > 2.3
    assert after == pytest.approx(2.0, rel=2e-2)
    f = beam.fluence[0]
    xc = float((f.sum(axis=0) * x).sum() / f.sum())
    yc = float((f.sum(axis=1) * x).sum() / f.sum())
    assert xc == pytest.approx(-0.6e-3, abs=2e-6) and yc == pytest.approx(0.4e-3, abs=2e-6)


# ------------------------------------------------------------------------------------------------
# relay
# ------------------------------------------------------------------------------------------------

def test_relay_of_unit_magnification_inverts_a_test_pattern_exactly():
    """M = 1: the image of an asymmetric pattern (a bar and a spot) is the pattern turned through 180°."""
    width, points = 8e-3, 64
    x = axes(points, width)
    pattern = gaussian_spot(x, 1.5e-3, 0.8e-3, 0.4e-3) + ((np.abs(x[None, :] + 1e-3) < 0.3e-3)
                                                           & (np.abs(x[:, None]) < 2e-3))
    phase = np.exp(1j * 3e3 * x)[None, :]
    beam = field_beam(pattern * phase, width)
    before = beam.field.copy()
    out = field_relay(beam, Step(kind="relay", index=0, magnification=1.0))
    assert np.array_equal(beam.field, before[:, ::-1, ::-1])
    assert out.energy_out_J == pytest.approx(out.energy_in_J, rel=1e-14)


def test_relay_magnifies_and_inverts_a_spot():
    """M = 2: a spot at (0.5, −0.3) mm of D4σ 0.8 mm is imaged to (−1.0, 0.6) mm with D4σ 1.6 mm, a
    quarter of the peak fluence, and the same energy."""
    width, points, m = 10e-3, 128, 2.0
    x = axes(points, width)
    beam = field_beam(gaussian_spot(x, 0.5e-3, -0.3e-3, 0.4e-3), width)
    f0 = beam.fluence[0]
    e0, peak0 = beam.energy_J(), f0.max()
    dx0, dy0 = d4sigma(f0, x, x)
    field_relay(beam, Step(kind="relay", index=0, magnification=m))
    f = beam.fluence[0]
    dx1, dy1 = d4sigma(f, x, x)
    xc = float((f.sum(axis=0) * x).sum() / f.sum())
    yc = float((f.sum(axis=1) * x).sum() / f.sum())
    assert beam.energy_J() == pytest.approx(e0, rel=1e-12)
    assert (dx1, dy1) == pytest.approx((m * dx0, m * dy0), rel=5e-3)
    assert (xc, yc) == pytest.approx((-1.0e-3, 0.6e-3), abs=5e-6)
    assert f.max() == pytest.approx(peak0 / m ** 2, rel=1e-2)


# ------------------------------------------------------------------------------------------------
# apertures
# ------------------------------------------------------------------------------------------------

def test_soft_aperture_transmits_half_on_its_diameter_and_the_gaussian_integral():
    """Soft (super-Gaussian) aperture: intensity transmission 1/2 on the given diameter; a hard round
    aperture passes 1 − exp(−2a²/w²) of a Gaussian beam (within 2e-3 on a 256 grid: the grey rim
    pixels, whose amplitude is their area fraction inside, transmit that fraction squared)."""
    width, points = 8e-3, 256
    x = axes(points, width)
    amp = kd.aperture_amplitude(np.array([-2e-3, 0.0, 2e-3]), np.array([0.0]), "round", 4e-3, order=10)
    assert amp[0] ** 2 == pytest.approx([0.5, 1.0, 0.5], rel=1e-12)
    w, a = 1e-3, 1.2e-3
    beam = field_beam(kd.gaussian_beam(x, x, w, WAVELENGTH, 0.0), width)
    e0 = beam.energy_J()
    field_aperture(beam, Step(kind="aperture", index=0, shape="round", diameter_m=2 * a))
    assert beam.energy_J() / e0 == pytest.approx(1 - math.exp(-2 * a * a / w / w), abs=2e-3)


# ------------------------------------------------------------------------------------------------
# whole runs: the field path against the fluence path
# ------------------------------------------------------------------------------------------------

def _run(diffraction: bool, **grid):
    """A saturated single pass (J_in ≈ Fsat on the axis, G0 = 5) of a wide Gaussian beam (w = 2 mm)
    through a short medium (10 mm, n = 1.82) with a 12 mm clear aperture."""
    material = make_material(emission_cross_section_m2=2.8e-23)
    medium = make_medium(material, length_m=0.01, diameter_m=12e-3, slices=6, small_signal_gain=5.0)
    seed = Seed(wavelength_m=1064e-9, energy_J=0.03, duration_s=10e-9, shape="gaussian", profile="gaussian",
                diameter_m=4e-3)
    config = make_config(medium, seed, [pass_step(0)], points=64, width_m=16e-3, time_slices=12)
    config = dataclasses.replace(config, grid=Grid(points=64, width_m=16e-3, time_slices=12,
                                                   diffraction=diffraction, **grid))
    return simulate(config)


def test_frantz_nodvik_unchanged_with_diffraction_on_a_wide_beam_in_a_short_medium():
    """With zR = π·w²·n/λ0 = 21 m against a 10 mm medium, diffraction changes the beam by about
    (L/zR)² ~ 2e-7 (Kogelnik & Li): the field path must give the fluence path's Frantz–Nodvik output
    (energy within 1e-6, fluence within 1e-4 of the peak everywhere, gain map within 1e-6 of ln G0),
    and it saturates (gain below 80 % of G0 = 5)."""
    on, off = _run(True), _run(False)
    e_on, e_off = on.summary["output_energy_J"], off.summary["output_energy_J"]
    assert 2.0 < e_off / off.summary["input_energy_J"] < 4.0
    assert e_on == pytest.approx(e_off, rel=1e-6)
    f_on, f_off = on.steps[-1].fluence_J_m2, off.steps[-1].fluence_J_m2
    assert np.max(np.abs(f_on - f_off)) < 1e-4 * f_off.max()
    g_on = on.media["rod"].gain_final_per_m * on.media["rod"].slice_length_m
    g_off = off.media["rod"].gain_final_per_m * off.media["rod"].slice_length_m
    assert np.max(np.abs(g_on - g_off)) < 1e-6 * math.log(5.0)
    assert abs(on.summary["energy_balance_error"]) < 1e-12


def test_field_run_reports_beam_figures_and_keeps_the_balance():
    """A field run's summary holds the beam figures of the seed and of every step; D4σ of the Gaussian
    seed equals its 1/e² diameter (ISO 11146 second moments) and its peak-to-mean modulation is 2
    (∫F²/∫F = F0/2), taken with the peak on the grid, whose centre pixels lie dx/2 off the axis in x
    and y; the energy balance closes with the absorbing edge counted."""
    result = _run(True)
    s = result.summary
    assert s["diffraction"] is True
    assert s["seed_beam"]["d4sigma_x_mm"] == pytest.approx(4.0, rel=1e-4)
    dx, w = 16e-3 / 64, 2e-3
    sampled_peak = math.exp(-2 * 2 * (dx / 2) ** 2 / w ** 2)
    assert s["seed_beam"]["modulation_peak_to_mean"] == pytest.approx(2.0 * sampled_peak, rel=1e-4)
    for step in s["steps"]:
        for key in ("d4sigma_x_mm", "d4sigma_y_mm", "modulation_peak_to_mean", "fill_factor",
                    "edge_absorbed_energy_J", "peak_power_W"):
            assert key in step
    assert result.output_field is not None and result.output_field.shape == (12, 64, 64)
    assert np.allclose((np.abs(result.output_field) ** 2).sum(axis=0), result.steps[-1].fluence_J_m2, rtol=1e-12)


def test_self_focusing_warning_against_the_critical_power():
    """A medium of large n2 at MW peak power: the warning quotes P_cr = 3.77·λ²/(8π·n0·n2)
    (J. H. Marburger, Prog. Quantum Electron. 4, 35 (1975)), recomputed here."""
    material = make_material(emission_cross_section_m2=2.8e-23, n2_m2_W=5e-19)
    medium = make_medium(material, length_m=0.01, diameter_m=12e-3, slices=4, small_signal_gain=2.0)
    seed = Seed(wavelength_m=1064e-9, energy_J=0.05, duration_s=10e-9, diameter_m=4e-3)
    config = make_config(medium, seed, [pass_step(0)], points=32, width_m=16e-3, time_slices=8)
    summary = simulate(config).summary
    p_cr = 3.77 * 1064e-9 ** 2 / (8 * math.pi * 1.82 * 5e-19)
    text = " ".join(summary["warnings"] + summary["notes"])
    assert "critical power for self-focusing" in text and f"{p_cr:.3g} W" in text
    assert summary["media"][0]["critical_power_W"] == pytest.approx(p_cr, rel=1e-12)


def test_grid_warnings_name_a_grid_that_would_do():
    """A beam that spreads to the window's edge, and a lens whose phase the grid cannot sample, are
    reported with the grid keys and values that would hold them."""
    material = make_material(emission_cross_section_m2=2.8e-23)
    medium = make_medium(material, length_m=0.01, diameter_m=6e-3, slices=2, small_signal_gain=1.5)
    seed = Seed(wavelength_m=1064e-9, energy_J=1e-3, duration_s=10e-9, diameter_m=1e-3)
    steps = [pass_step(0), Step(kind="space", index=1, length_m=4.0),
             Step(kind="lens", index=2, focal_m=0.02)]
    config = make_config(medium, seed, steps, points=48, width_m=8e-3, time_slices=2)
    config = dataclasses.replace(config, grid=Grid(points=48, width_m=8e-3, time_slices=2, diffraction=True))
    warnings = simulate(config).summary["warnings"]
    text = "\n".join(warnings)
    assert "reaches the absorbing edge of the 8 mm window" in text and "grid.width_mm = " in text
    assert "step 2 (lens): the lens phase is undersampled" in text
    assert "angular spectrum reaches the sampling limit of 48 points" in text and "grid.points = " in text


def test_field_run_files_hold_the_beam_figures_and_the_output_field(tmp_path):
    """result.h5 of a field run: /beam rows (seed, then each step) equal the summary's figures, and
    /output/field squares to the last step's fluence."""
    from ampmodel.output.hdf5 import read_hdf5

    result = _run(True)
    result.save(tmp_path / "run", plots=False)
    data = read_hdf5(tmp_path / "run" / "result.h5")
    rows = [result.summary["seed_beam"]] + result.summary["steps"]
    assert np.allclose(data["beam"]["d4sigma_x"], [r["d4sigma_x_mm"] * 1e-3 for r in rows], rtol=1e-15)
    assert np.allclose(data["beam"]["fill_factor"], [r["fill_factor"] for r in rows], rtol=1e-15)
    field = data["output"]["field"]
    assert np.allclose((np.abs(field) ** 2).sum(axis=0), result.steps[-1].fluence_J_m2, rtol=1e-12)
