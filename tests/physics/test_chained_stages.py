"""Chained stages (seed.from): a stage seeded by an earlier run's result equals the one-config layout
of both stages.

The reference is the model itself, by conservation of the beam: the second stage of a layout sees
only the beam the first one leaves (given small-signal gains, no pump and no time between the
stages), so running stage 2 from stage 1's stored beam must give the two-stage run's figures to
round-off (output energy, the fluence map, the media's stored and extracted energies, the
B-integral). result.h5 stores the beam losslessly (float64, complex128), so the match is exact up to
the order of sums. From an earlier step the separable beam F(y, x)·P_t/ΣP keeps the stored step's
fluence map and energy (Σ_t P_t/ΣP = 1 to round-off).
"""
from __future__ import annotations

import copy

import h5py
import numpy as np
import pytest

from ampmodel import load_config, simulate
from ampmodel.output.summary import compare_summaries

RTOL = 1e-12

MATERIAL = {"wavelength_nm": 1064.0, "emission_cross_section_cm2": 2.8e-19, "upper_lifetime_us": 230.0,
            "refractive_index": 1.82, "n2_m2_W": 7.0e-20}    # an Nd:YAG-like rod, n2 so that B grows
PRE = {"name": "pre", "length_mm": 80.0, "diameter_mm": 5.0, "slices": 5, "loss_per_cm": 0.01,
       "small_signal_gain": 8.0, "material": MATERIAL}
POWER = {"name": "power", "length_mm": 100.0, "diameter_mm": 7.0, "slices": 6, "loss_per_cm": 0.005,
         "small_signal_gain": 5.0, "material": MATERIAL}
STAGE1_STEPS = [{"kind": "pass", "medium": "pre"}, {"kind": "loss", "transmission": 0.9},
                {"kind": "aperture", "diameter_mm": 6.0}]
STAGE2_STEPS = [{"kind": "pass", "medium": "power"}, {"kind": "loss", "transmission": 0.97},
                {"kind": "pass", "medium": "power", "reverse": True}]
SEED = {"energy_J": 0.02, "duration_ns": 6.0, "diameter_mm": 3.5, "shape": "sech2"}


def config(media, steps, seed, diffraction=False) -> dict:
    grid = {"points": 32, "width_mm": 10.0, "time_slices": 10, "diffraction": diffraction, "fft_workers": 1}
    return {"title": "chain", "mode": "pulsed", "grid": grid, "medium": copy.deepcopy(media),
            "step": copy.deepcopy(steps), "seed": dict(seed)}


def run_stage1(tmp_path, diffraction=False, seed=SEED):
    result = simulate(load_config(config([PRE], STAGE1_STEPS, seed, diffraction)))
    result.save(tmp_path / "stage1", plots=False)
    return result


def stage2(tmp_path, diffraction=False, **more):
    return load_config(config([POWER], STAGE2_STEPS, {"from": "stage1/result.h5", **more}, diffraction),
                       folder=tmp_path)


def assert_same_stage(both, chained, first_step: int):
    """The figures of the second stage in the two-stage run (steps from ``first_step``) equal the chained run's."""
    s, c = both.summary, chained.summary
    for key in ("output_energy_J", "b_integral_rad", "output_peak_power_W", "output_duration_ns"):
        assert c[key] == pytest.approx(s[key], rel=RTOL, abs=0.0), key
    assert c["input_energy_J"] == pytest.approx(s["steps"][first_step - 1]["energy_out_J"], rel=RTOL)
    _, differences = compare_summaries(s["media"][1], c["media"][0], rtol=RTOL)   # stored, extracted energies
    assert not differences, [d.text() for d in differences]
    for mine, theirs in zip(c["steps"], s["steps"][first_step:], strict=True):   # every figure of each step
        compared, differences = compare_summaries({**theirs, "index": 0}, {**mine, "index": 0}, rtol=RTOL)
        assert compared > 15 and not differences, [d.text() for d in differences]
    f_both, f_chain = both.steps[-1].fluence_J_m2, chained.steps[-1].fluence_J_m2
    np.testing.assert_allclose(f_chain, f_both, rtol=RTOL, atol=RTOL * f_both.max())
    np.testing.assert_allclose(chained.steps[-1].b_integral_rad, both.steps[-1].b_integral_rad, rtol=RTOL,
                               atol=RTOL * both.steps[-1].b_integral_rad.max())


def test_chained_stage_equals_the_two_stage_layout(tmp_path):
    both = simulate(load_config(config([PRE, POWER], STAGE1_STEPS + STAGE2_STEPS, SEED)))
    run_stage1(tmp_path)
    chained = simulate(stage2(tmp_path))
    assert_same_stage(both, chained, first_step=3)
    # the B-integral goes on from stage 1's: more than stage 2's own steps give
    assert chained.summary["b_integral_rad"] > 1.05 * sum(s["b_integral_rad"] for s in chained.summary["steps"])
    assert chained.summary["seed_from"]["beam"] == "full"
    assert chained.summary["pulse_duration_ns"] == both.summary["pulse_duration_ns"]


def test_chained_stage_with_diffraction_equals_the_two_stage_layout(tmp_path):
    both = simulate(load_config(config([PRE, POWER], STAGE1_STEPS + STAGE2_STEPS, SEED, diffraction=True)))
    run_stage1(tmp_path, diffraction=True)
    chained = simulate(stage2(tmp_path, diffraction=True))
    assert_same_stage(both, chained, first_step=3)
    assert chained.summary["seed_from"]["beam"] == "full, with its field"
    np.testing.assert_array_equal(chained.output_field.shape, both.output_field.shape)
    np.testing.assert_allclose(chained.output_field, both.output_field, rtol=0,
                               atol=RTOL * np.abs(both.output_field).max())


def test_a_chirped_seed_carries_its_slice_wavelengths(tmp_path):
    """A stretched, chirped seed in media with a cross-section spectrum (built-in Ti:sapphire): each time
    slice keeps its wavelength in the chained stage, which still equals the layout."""
    media = [{**m, "material": "Ti:sapphire"} for m in (PRE, POWER)]
    seed = {"energy_J": 0.002, "duration_ps": 200.0, "diameter_mm": 3.5, "wavelength_nm": 800.0,
            "bandwidth_nm": 30.0, "chirp": "down"}
    both = simulate(load_config(config(media, STAGE1_STEPS + STAGE2_STEPS, seed)))
    simulate(load_config(config(media[:1], STAGE1_STEPS, seed))).save(tmp_path / "stage1", plots=False)
    chained = simulate(load_config(config(media[1:], STAGE2_STEPS, {"from": "stage1/result.h5"}), folder=tmp_path))
    assert_same_stage(both, chained, first_step=3)
    assert np.ptp(chained.wavelength_m) > 50e-9          # ±2.5 FWHM of the pulse: ±2.5 x 30 nm
    np.testing.assert_array_equal(chained.wavelength_m, both.wavelength_m)
    assert chained.summary["output_bandwidth_nm"] == pytest.approx(both.summary["output_bandwidth_nm"], rel=RTOL)


def test_from_an_earlier_step_the_separable_seed_keeps_the_step(tmp_path):
    stage1 = run_stage1(tmp_path)
    chained = simulate(stage2(tmp_path, from_step=0))
    record = stage1.steps[0]
    np.testing.assert_allclose(chained.seed_fluence_J_m2, record.fluence_J_m2, rtol=1e-14,
                               atol=1e-14 * record.fluence_J_m2.max())
    assert chained.summary["input_energy_J"] == pytest.approx(stage1.summary["steps"][0]["energy_out_J"], rel=1e-14)
    # the pulse shape: the stored power per time slice, normalised to the step's energy
    np.testing.assert_allclose(chained.seed_power_W, record.power_W, rtol=1e-13)
    assert chained.summary["seed_from"]["beam"] == "separable"
    assert any("separable" in n for n in chained.summary["notes"])
    assert any(n["code"] == "seed-from" for n in chained.summary["notices"])
    # the B-integral carried is bounded by the stored map (largest over the slices at the true peak)
    with h5py.File(tmp_path / "stage1" / "result.h5") as f:
        b_map = f["steps/000/b_integral"][()]
    assert chained.summary["b_integral_rad"] >= b_map.max()


def test_the_full_beam_is_stored_after_the_last_step(tmp_path):
    stage1 = run_stage1(tmp_path)
    with h5py.File(tmp_path / "stage1" / "result.h5") as f:
        fluence, b = f["output/fluence"], f["output/b_integral"]
        assert fluence.attrs["units"] == "J/m^2" and b.attrs["units"] == "rad"
        area = float(np.diff(f["grid/x"][()])[0] ** 2)
        assert fluence.shape == (10, 32, 32)
        energy = fluence[()].sum() * area
        np.testing.assert_allclose(fluence[()].sum(axis=0), f["steps/002/fluence"][()], rtol=1e-13)
    assert energy == pytest.approx(stage1.summary["output_energy_J"], rel=1e-13)


def test_a_field_stage_from_a_fluence_run_takes_a_flat_phase(tmp_path):
    """No field stored (stage 1 without diffraction): the field is sqrt(fluence), flat phase, with a note;
    the energy and the fluence of every time slice are the stored ones."""
    run_stage1(tmp_path)
    taken = stage2(tmp_path, diffraction=True).seed.beam
    with h5py.File(tmp_path / "stage1" / "result.h5") as f:
        stored = f["output/fluence"][()]
    np.testing.assert_array_equal(taken.complex_field.imag, 0.0)
    np.testing.assert_allclose(np.abs(taken.complex_field) ** 2, stored, rtol=1e-15, atol=1e-300)
    chained = simulate(stage2(tmp_path, diffraction=True))
    assert chained.summary["input_energy_J"] == pytest.approx(stored.sum() * (10e-3 / 32) ** 2, rel=1e-13)
    assert any("flat phase" in n for n in chained.summary["notes"])


@pytest.mark.parametrize("from_step", [None, 0])
def test_chained_flat_top_stages_follow_frantz_nodvik(tmp_path, from_step):
    """Two loss-free stages of given small-signal gains G1, G2 (no n2) on a flat-top seed: every pixel
    of the beam leaves stage 2 with J2 = FN(G2, FN(G1, J0)), FN(G, J) = Fsat·ln[1 + G·(exp(J/Fsat) − 1)]
    (Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963)). The total fluence of a pixel does not depend on
    its pulse shape, so the separable beam of an earlier step (from_step = 0, before a loss step that
    stage 2 does not take) gives it too."""
    from physics_reference import fn_closed, photon_energy
    material = {**MATERIAL, "n2_m2_W": 0.0}
    one = {**PRE, "loss_per_cm": 0.0, "material": material, "small_signal_gain": 6.0}
    two = {**POWER, "loss_per_cm": 0.0, "material": material, "small_signal_gain": 3.0}
    seed = {"energy_J": 0.05, "duration_ns": 6.0, "diameter_mm": 3.0, "profile": "flat", "shape": "gaussian"}
    steps1 = STAGE1_STEPS[:1] + ([{"kind": "loss", "transmission": 0.5}] if from_step is not None else [])
    first = simulate(load_config(config([one], steps1, seed)))
    first.save(tmp_path / "stage1", plots=False)
    more = {} if from_step is None else {"from_step": from_step}
    chained = simulate(load_config(config([two], STAGE2_STEPS[:1], {"from": "stage1/result.h5", **more}),
                                   folder=tmp_path))
    fsat = photon_energy(1064e-9) / 2.8e-23
    j0 = first.seed_fluence_J_m2
    lit = j0 > 0.5 * j0.max()
    assert lit.sum() > 50 and j0[lit].max() / fsat > 0.5                  # saturated: far from the linear gain
    expected = fn_closed(fn_closed(j0[lit], np.log(6.0), fsat), np.log(3.0), fsat)
    np.testing.assert_allclose(chained.steps[-1].fluence_J_m2[lit], expected, rtol=1e-10)
    assert expected.max() / j0[lit].max() < 0.6 * 18.0                    # and far below the product of the gains


def test_a_chained_cw_stage_equals_the_two_stage_layout_to_the_solver_tolerance(tmp_path):
    """cw: the steady state of both stages in one config, against stage 2 seeded by stage 1's intensity
    map. Nothing couples stage 2 back to stage 1, so they agree to the iteration's tolerance (the
    gain converged to 1e-9 of the largest small-signal gain; tolerance here 1e-6)."""
    media = [{k: v for k, v in m.items() if k != "material"} | {"material": "Nd:YAG"} for m in (PRE, POWER)]

    def cw(media_, steps, seed):
        return {"title": "cw chain", "mode": "cw", "grid": {"points": 24, "width_mm": 10.0},
                "medium": copy.deepcopy(media_), "step": copy.deepcopy(steps), "seed": dict(seed)}
    seed = {"power_W": 20.0, "diameter_mm": 3.0}
    both = simulate(load_config(cw(media, STAGE1_STEPS + STAGE2_STEPS, seed)))
    simulate(load_config(cw(media[:1], STAGE1_STEPS, seed))).save(tmp_path / "stage1", plots=False)
    chained = simulate(load_config(cw(media[1:], STAGE2_STEPS, {"from": "stage1/result.h5"}), folder=tmp_path))
    assert chained.summary["input_power_W"] == pytest.approx(both.summary["steps"][2]["power_out_W"], rel=1e-6)
    assert chained.summary["output_power_W"] == pytest.approx(both.summary["output_power_W"], rel=1e-6)
    assert chained.summary["output_power_W"] > 1.5 * chained.summary["input_power_W"]
    final = both.steps[-1].intensity_W_m2
    np.testing.assert_allclose(chained.steps[-1].intensity_W_m2, final, rtol=1e-6, atol=1e-6 * final.max())


def test_a_measured_pulse_and_spectrum_carry_over(tmp_path):
    """Stage 1 with a measured pulse trace (fast rise, slow tail) and a measured spectrum (two peaks):
    the chained stage rebuilds the same time slices, slice wavelengths and true-peak factors from the
    traces stored with stage 1's seed, and equals the layout to round-off."""
    t = np.linspace(-4e-9, 20e-9, 241)
    power = np.where(t < 0, np.exp(-(t / 1.5e-9) ** 2), np.exp(-t / 4e-9))
    wl = np.linspace(770e-9, 830e-9, 121)
    density = np.exp(-((wl - 792e-9) / 6e-9) ** 2) + 0.7 * np.exp(-((wl - 810e-9) / 5e-9) ** 2)
    seed = {"energy_J": 0.002, "diameter_mm": 3.5, "shape": "file", "chirp": "up",
            "measured_pulse": {"time_s": t.tolist(), "power": power.tolist()},
            "measured_spectrum": {"wavelength_m": wl.tolist(), "power": density.tolist()}}
    media = [{**m, "material": "Ti:sapphire"} for m in (PRE, POWER)]
    both = simulate(load_config(config(media, STAGE1_STEPS + STAGE2_STEPS, seed)))
    simulate(load_config(config(media[:1], STAGE1_STEPS, seed))).save(tmp_path / "stage1", plots=False)
    chained = simulate(load_config(config(media[1:], STAGE2_STEPS, {"from": "stage1/result.h5"}), folder=tmp_path))
    assert chained.config.seed.shape == "file" and chained.config.seed.pulse_trace == both.config.seed.pulse_trace
    assert chained.config.seed.spectrum_trace == both.config.seed.spectrum_trace
    np.testing.assert_array_equal(chained.t_s, both.t_s)
    np.testing.assert_array_equal(chained.wavelength_m, both.wavelength_m)
    assert_same_stage(both, chained, first_step=3)
