"""Config of fibre media and fibre layouts: SI values, defaults, the checks across keys."""
from __future__ import annotations

import math

import pytest
from config_cases import FIBRE as GOOD
from config_cases import good as _good
from config_cases import one_problem

from ampmodel.config.load import load_config


def good() -> dict:
    return _good(GOOD)


def test_good_fibre_values_and_defaults():
    config = load_config(GOOD)
    assert config.mode == "cw"
    (f1,) = config.media
    fib = f1.fibre
    assert f1.kind == "fibre" and f1.length_m == 3.0 and f1.slices == 200 and f1.loss_per_m == 0.0
    assert fib.core_diameter_m == pytest.approx(10e-6) and fib.cladding_diameter_m == pytest.approx(125e-6)
    assert fib.core_na == 0.07 and fib.mode_field_diameter_m is None
    assert (fib.rings, fib.ase, fib.ase_bins, fib.ase_band_m) == (1, False, 40, None)
    assert fib.pump.wavelength_m == pytest.approx(976e-9)          # the material's pump wavelength
    assert (fib.pump.power_W, fib.pump.direction, fib.pump.cladding) == (5.0, "forward", True)
    assert config.seed.wavelength_m == pytest.approx(1030e-9) and config.seed.power_W == 0.1
    # [grid] absent: 64 points over three core diameters or six mode-field radii, whichever is wider
    v = 2 * math.pi * 5e-6 * 0.07 / 1030e-9
    w = 5e-6 * (0.65 + 1.619 * v ** -1.5 + 2.879 * v ** -6)
    assert config.grid.points == 64 and config.grid.width_m == pytest.approx(max(30e-6, 6 * w))


def test_pulsed_fibre_with_repetition_rate():
    raw = good()
    raw["mode"] = "pulsed"
    raw["seed"] = {"energy_J": 1e-6, "duration_ns": 5.0, "repetition_rate_kHz": 20.0}
    raw["grid"] = {"time_slices": 16}
    config = load_config(raw)
    assert config.seed.repetition_rate_Hz == pytest.approx(2e4)
    assert config.grid.time_slices == 16 and config.grid.points == 64


def test_set_reaches_fibre_keys():
    config = load_config(GOOD, ["medium.f1.length_m=2.0", "medium.f1.pump.power_W=7", "medium.f1.rings=5",
                                "medium.f1.pump.direction=both"])
    fib = config.media[0].fibre
    assert config.media[0].length_m == 2.0 and fib.pump.power_W == 7.0 and fib.rings == 5
    assert fib.pump.direction == "both"


def test_sweep_of_a_fibre_key():
    raw = good()
    raw["sweep"] = {"medium.f1.rings": [1, 4], "medium.f1.pump.power_W": [2.0, 4.0]}
    load_config(raw)
    raw["sweep"] = {"medium.f1.length_mm": [1000.0]}
    assert "did you mean 'medium.f1.length_m'" in one_problem(raw)


@pytest.mark.parametrize("change, message", [
    ({"ase": True, "ase_band_nm": [1100.0, 1000.0]}, "ase_band_nm = [1100.0, 1000.0]: give [shortest, longest]"),
    ({"ase": True, "ase_band_nm": [800.0, 1000.0]}, "ase_band_nm = [800.0, 1000.0]: outside the material's spectrum"),
    ({"ase_band_nm": [1000.0]}, "ase_band_nm = [1000.0]: must be an array of 2 numbers"),
    ({"rings": 4, "signal_overlap": 0.8}, "signal_overlap = 0.8: overrides the overlap model only"),
    ({"cladding_diameter_um": 8.0}, "cladding_diameter_um = 8.0: must be larger than the core diameter"),
    ({"small_signal_gain": 5.0}, "small_signal_gain = 5.0: is a key of bulk media"),
    ({"slice": 10}, "slice = 10: unknown key; did you mean 'slices'?"),
])
def test_fibre_medium_problems(change, message):
    raw = good()
    raw["medium"][0].update(change)
    assert message in one_problem(raw)


@pytest.mark.parametrize("change, message", [
    ({"geometry": "end"}, 'pump.geometry = "end": is a key of a bulk medium\'s pump'),
    ({"wavelength_nm": 800.0}, "pump.wavelength_nm = 800.0: outside the material's cross-section spectrum"),
    ({"power_W": -1.0}, "pump.power_W = -1.0: out of range"),
])
def test_fibre_pump_problems(change, message):
    raw = good()
    raw["medium"][0]["pump"].update(change)
    assert message in one_problem(raw)


def test_scalar_material_pumped_at_another_wavelength():
    raw = good()
    raw["medium"][0]["material"] = {"wavelength_nm": 1030.0, "emission_cross_section_cm2": 6e-21,
                                    "absorption_cross_section_cm2": 4e-22, "upper_lifetime_us": 850.0,
                                    "refractive_index": 1.45, "doping_per_m3": 6e25, "pump_wavelength_nm": 976.0,
                                    "pump_absorption_cross_section_cm2": 2.6e-20}
    load_config(raw)
    raw["medium"][0]["pump"]["wavelength_nm"] = 915.0
    assert "the material's pump cross-sections hold at 976 nm only" in one_problem(raw)


def test_a_new_spectrum_on_a_built_in_base():
    raw = good()
    raw["medium"][0]["material"] = {"base": "Yb:silica fibre", "spectrum": {
        "wavelength_nm": [900.0, 976.0, 1030.0, 1100.0], "emission_cm2": [1e-22, 2.5e-20, 5e-21, 1e-21],
        "absorption_cm2": [7e-21, 2.5e-20, 3e-22, 1e-24]}}
    material = load_config(raw).media[0].material
    assert material.emission_cross_section_m2 == pytest.approx(5e-25)            # read from the new table
    assert material.pump_absorption_cross_section_m2 == pytest.approx(2.5e-24)
    assert material.upper_lifetime_s == pytest.approx(850e-6)                    # kept from the base
    assert "spectrum" in material.sources["emission_cross_section_cm2"]


def test_mode_field_diameter_instead_of_na():
    raw = good()
    del raw["medium"][0]["core_na"]
    raw["medium"][0]["mode_field_diameter_um"] = 11.0
    assert load_config(raw).media[0].fibre.mode_field_diameter_m == pytest.approx(11e-6)


def test_fibre_passed_twice_or_reversed():
    raw = good()
    raw["step"].append({"kind": "pass", "medium": "f1"})
    assert "fibre 'f1' is already passed in step[0]" in one_problem(raw)
    raw = good()
    raw["step"][0]["reverse"] = True
    assert "step[0].reverse = true: a fibre is passed from z = 0" in one_problem(raw)


def test_cw_seed_rejects_a_repetition_rate():
    raw = good()
    raw["seed"]["repetition_rate_Hz"] = 1e4
    assert "seed.repetition_rate_Hz = 10000.0: applies to pulses" in one_problem(raw)
