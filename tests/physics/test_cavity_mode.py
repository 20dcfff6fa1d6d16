"""The cavity mode of a regenerative amplifier on the fluence path (a repeat's mode_diameter_mm), and the
warning of a repeat without one.

The reference is written here, independently of the code: per round trip, each pixel's time slices go
through the medium's z-slices by the Frantz–Nodvik update (L. M. Frantz and J. S. Nodvik, J. Appl.
Phys. 34, 2346 (1963)),

    J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)],   ln G -> ln G − (J_out − J_in)/Fsat,

then the cavity's losses and aperture, and the re-forming: every time slice's energy spread over a
Gaussian exp(−2r²/w²) of the mode's 1/e² diameter 2w on the pixel centres. A Gaussian of 1/e²
diameter d has a second-moment (D4σ) diameter d (ISO 11146-1); sampled at w/4 and cut at ±3w by the
window, the grid's sum misses about exp(−18) ~ 1e-8 of the second moment.
"""
from __future__ import annotations

import copy
import math

import numpy as np
import pytest
from timing_reference import FSAT, material, side_pump

from ampmodel import load_config, simulate
from ampmodel.beam.fluence_steps import FLUENCE_STEP_ACTIONS
from ampmodel.beam.state import BeamState
from ampmodel.description import Step
from ampmodel.pulsed import repeats
from ampmodel.pulsed.clocks import Timeline

POINTS, WIDTH_MM = 24, 6.0
MODE_MM, SEED_MM, APERTURE_MM = 2.0, 3.0, 3.0
G0, SLICES, TIME_SLICES = 3.0, 4, 3
T1, T2 = 0.9, 0.95
SEED_J = 1e-3            # a third of the saturation energy Fsat·(pi·w²/2) of the mode: the round trips saturate


def cavity(rule: dict, mode: bool = True) -> list:
    repeat = {"kind": "repeat", "name": "cavity", **rule, "steps": [
        {"kind": "pass", "medium": "xtal"}, {"kind": "loss", "transmission": T1},
        {"kind": "aperture", "diameter_mm": APERTURE_MM},
        {"kind": "pass", "medium": "xtal", "reverse": True}, {"kind": "loss", "transmission": T2}]}
    if mode:
        repeat["mode_diameter_mm"] = MODE_MM
    return [repeat]


def config(steps: list, *, profile: str = "gaussian", seed_mm: float = SEED_MM, seed_J: float = SEED_J,
           gain: dict | None = None, rate_Hz: float | None = None) -> dict:
    """One medium filling the window (its clear aperture holds every pixel), uniform small-signal gain."""
    medium = {"name": "xtal", "length_mm": 10.0, "diameter_mm": 9.0, "slices": SLICES, "material": material()}
    medium.update(gain if gain is not None else {"small_signal_gain": G0})
    seed = {"energy_J": seed_J, "duration_ns": 1.0, "shape": "flat", "profile": profile, "diameter_mm": seed_mm}
    if rate_Hz is not None:
        seed["repetition_rate_Hz"] = rate_Hz
    return {"title": "cavity mode test", "grid": {"points": POINTS, "width_mm": WIDTH_MM, "time_slices": TIME_SLICES},
            "medium": [medium], "seed": seed, "step": copy.deepcopy(steps)}


def grid() -> tuple[np.ndarray, np.ndarray, float]:
    """Pixel centres (m), their radius map (m) and the pixel area (m²), from their definition."""
    dx = WIDTH_MM * 1e-3 / POINTS
    x = dx * (np.arange(POINTS) + 0.5) - WIDTH_MM * 1e-3 / 2
    return x, np.hypot(x[None, :], x[:, None]), dx * dx


def gaussian(r: np.ndarray, diameter_mm: float) -> np.ndarray:
    return np.exp(-2.0 * (r / (diameter_mm * 1e-3 / 2)) ** 2)


def fn_pass(fluence: np.ndarray, ln_gain: np.ndarray, reverse: bool) -> None:
    """One pass, in place: each time slice in turn through the z-slices (Frantz–Nodvik)."""
    order = range(ln_gain.shape[0] - 1, -1, -1) if reverse else range(ln_gain.shape[0])
    for t in range(fluence.shape[0]):
        for z in order:
            out = FSAT * np.log1p(np.exp(ln_gain[z]) * np.expm1(fluence[t] / FSAT))
            ln_gain[z] -= (out - fluence[t]) / FSAT
            fluence[t] = out


def reference(round_trips: int) -> tuple[list[float], float, np.ndarray]:
    """Energy after each round trip, the energy the aperture clipped, the fluence (Nt, Ny, Nx) after."""
    _, r, area = grid()
    seed = gaussian(r, SEED_MM)
    fluence = np.repeat((seed * (SEED_J / (seed.sum() * area)) / TIME_SLICES)[None], TIME_SLICES, axis=0)
    ln_gain = np.full((SLICES, POINTS, POINTS), math.log(G0) / SLICES)
    mode = gaussian(r, MODE_MM)
    outside = r > APERTURE_MM * 1e-3 / 2
    energies, clipped = [], 0.0
    for _ in range(round_trips):
        fn_pass(fluence, ln_gain, reverse=False)
        fluence *= T1
        clipped += fluence[:, outside].sum() * area
        fluence[:, outside] = 0.0
        fn_pass(fluence, ln_gain, reverse=True)
        fluence *= T2
        slice_energy = fluence.sum(axis=(1, 2))
        fluence = slice_energy[:, None, None] * mode[None] / mode.sum()
        energies.append(fluence.sum() * area)
    return energies, clipped, fluence


@pytest.fixture(scope="module")
def fixed():
    return simulate(load_config(config(cavity({"count": 5}))))


def test_round_trip_energies_equal_the_reference(fixed):
    entry = fixed.summary["steps"][0]
    ref, clipped, _ = reference(5)
    np.testing.assert_allclose(entry["energy_per_round_trip_J"], ref, rtol=1e-12)
    assert ref[-1] > 20 * SEED_J                                    # a real build-up ...
    assert ref[-1] / ref[-2] < 0.8 * ref[1] / ref[0]                # ... that saturates
    assert entry["clipped_energy_J"] == pytest.approx(clipped, rel=1e-12)   # lost before the re-forming
    assert clipped > 1e-3 * ref[-1]


def test_the_beam_after_each_round_trip_is_the_mode(fixed):
    d4 = fixed.steps[0].datasets["round_trip_d4sigma"][0]
    assert d4.shape == (5, 2) and fixed.steps[0].datasets["round_trip_d4sigma"][1] == "m"
    np.testing.assert_allclose(d4, MODE_MM * 1e-3, rtol=1e-6)       # D4σ of a Gaussian = its 1/e² diameter
    entry = fixed.summary["steps"][0]
    assert entry["d4sigma_x_mm"] == pytest.approx(MODE_MM, rel=1e-6)
    _, _, fluence = reference(5)
    np.testing.assert_allclose(fixed.steps[0].fluence_J_m2, fluence.sum(axis=0), rtol=1e-12)
    _, r, _ = grid()
    peak = fixed.steps[0].datasets["round_trip_peak_fluence"][0]
    mode = gaussian(r, MODE_MM)
    assert peak[-1] == pytest.approx(entry["energy_out_J"] * mode.max() / (mode.sum() * grid()[2]), rel=1e-12)


def test_the_re_forming_conserves_energy(fixed):
    s = fixed.summary
    assert abs(s["energy_balance_error"]) < 1e-13
    assert s["media"][0]["extracted_energy_J"] == pytest.approx(s["extracted_energy_J"], rel=1e-12)
    assert not any("cavity mode" in w for w in s["warnings"])


def test_the_dump_at_the_peak_keeps_the_re_formed_beam():
    peak = simulate(load_config(config(cavity({"until": "peak", "max_count": 60}))))
    entry = peak.summary["steps"][0]
    dump = entry["round_trip_count"]
    assert entry["peak_found"] and dump > 3
    ref, _, fluence = reference(dump)
    np.testing.assert_allclose(entry["energy_per_round_trip_J"][:dump], ref, rtol=1e-12)
    np.testing.assert_allclose(peak.steps[0].fluence_J_m2, fluence.sum(axis=0), rtol=1e-12)
    fixed = simulate(load_config(config(cavity({"count": dump}))))
    np.testing.assert_array_equal(peak.steps[0].fluence_J_m2, fixed.steps[0].fluence_J_m2)
    np.testing.assert_array_equal(peak.media["xtal"].gain_final_per_m, fixed.media["xtal"].gain_final_per_m)


def test_the_b_integral_is_kept_as_accumulated_through_the_re_forming():
    # a round trip that only passes through a lossless step: the fluence is re-formed, the B-integral
    # array (per pixel and time slice) is left exactly as it was
    x, r, _ = grid()
    fluence = np.stack([gaussian(r, 1.0) * k for k in (1.0, 2.0, 3.0)])
    b = np.random.default_rng(1).random(fluence.shape)
    beam = BeamState(fluence=fluence.copy(), b_integral=b.copy(), x_m=x, y_m=x, dt_s=1e-9, wavelength_m=1e-6)
    inner = Step(kind="loss", index=0, transmission=1.0, parent=0)
    step = Step(kind="repeat", index=0, steps=(inner,), count=2, mode_diameter_m=MODE_MM * 1e-3)
    outcome = repeats.run_repeat(step, beam, {}, Timeline({}), lambda s, bm, tick: FLUENCE_STEP_ACTIONS[s.kind](bm, s))
    np.testing.assert_array_equal(beam.b_integral, b)
    assert outcome.b_integral_step_rad == 0.0
    mode = gaussian(r, MODE_MM)
    for t in range(3):
        np.testing.assert_allclose(beam.fluence[t], fluence[t].sum() * mode / mode.sum(), rtol=1e-13)


def test_a_pulse_train_re_forms_every_pulse():
    raw = config(cavity({"count": 4}), gain=side_pump(3000.0), rate_Hz=20e3)
    result = simulate(load_config(raw))
    train = result.summary["train"]
    assert train["direct_solution"].startswith("not applicable: a repeat re-forms the cavity mode")
    assert abs(train["energy_balance_error"]) < 1e-6
    np.testing.assert_allclose(result.steps[0].datasets["round_trip_d4sigma"][0], MODE_MM * 1e-3, rtol=1e-6)


# --- without the mode: the warning ------------------------------------------------------------------

def _no_mode_warnings(result) -> list[str]:
    return [w for w in result.summary["warnings"] if "no cavity mode" in w]


def gaussian_pumped(rule: dict, limits: dict | None = None) -> dict:
    """A Gaussian seed in a medium side-pumped with a Gaussian profile: the centre has the most gain."""
    pump = {"pump": {"geometry": "side", "wavelength_nm": 800.0, "profile": "gaussian", "diameter_mm": 2.5,
                     "absorbed_fraction": 1.0, "energy_J": 0.02, "duration_us": 0.1}}
    raw = config(cavity(rule, mode=False), seed_mm=MODE_MM, gain=pump, seed_J=1e-6)
    if limits is not None:
        raw["limits"] = limits
    return raw


def test_a_gaussian_beam_without_a_mode_narrows_and_the_run_says_so():
    result = simulate(load_config(gaussian_pumped({"until": "peak", "max_count": 60})))
    entry = result.summary["steps"][0]
    dump = entry["round_trip_count"]
    d4 = result.steps[0].datasets["round_trip_d4sigma"][0].mean(axis=1)[:dump] * 1e3
    narrowest = int(np.argmin(d4))
    assert d4[narrowest] < 0.7 * d4[0] and 0 < narrowest < dump - 1     # it narrows, then saturation widens it
    warnings = _no_mode_warnings(result)
    assert len(warnings) == 1 and "\n" not in warnings[0]
    text = warnings[0]
    assert text.startswith("step 0 (repeat): no cavity mode")
    assert (f"from {d4[0]:.3g} mm (round trip 1) to {d4[-1]:.3g} mm (round trip {dump}, the dump), "
            f"through {d4[narrowest]:.3g} mm (round trip {narrowest + 1})") in text
    assert f"{100 * (d4[narrowest] / d4[0] - 1):+.0f} %" in text
    peaks = result.steps[0].datasets["round_trip_peak_fluence"][0]
    assert f"its peak fluence grows {peaks[dump - 1] / peaks[0]:.3g}×" in text
    assert "mode_diameter_mm" in text and "grid.diffraction = true" in text
    # the threshold is the [limits] table's
    raw = gaussian_pumped({"until": "peak", "max_count": 60}, limits={"cavity_beam_change_fraction": 0.9})
    assert not _no_mode_warnings(simulate(load_config(raw)))


def test_a_flat_beam_in_a_uniform_gain_keeps_its_size_and_no_warning():
    # a flat-top beam inside the aperture, every pixel of it alike in a uniform gain: it keeps its shape
    steps = cavity({"count": 5}, mode=False)
    result = simulate(load_config(config(steps, profile="flat", seed_mm=2.8)))
    d4 = result.steps[0].datasets["round_trip_d4sigma"][0]
    np.testing.assert_allclose(d4, d4[0, 0], rtol=1e-12)
    assert result.summary["steps"][0]["energy_out_J"] > 20 * SEED_J
    assert not _no_mode_warnings(result)


@pytest.mark.parametrize("mode_mm, words", [(0.5, "only 2.0 pixels across the cavity mode"),
                                            (5.0, "the cavity mode (mode_diameter_mm = 5) reaches the edge of the "
                                                  "6 mm window")])
def test_a_mode_the_grid_cannot_hold_well_is_warned_of(mode_mm, words):
    steps = cavity({"count": 1})
    steps[0]["mode_diameter_mm"] = mode_mm
    result = simulate(load_config(config(steps)))
    assert [w for w in result.summary["warnings"] if words in w]
    assert abs(result.summary["energy_balance_error"]) < 1e-13
