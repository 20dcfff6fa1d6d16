"""Layouts of fibres through ampmodel.simulate: stages chained through losses, the noise figure of the
chain by Friis' cascade (H. T. Friis, Proc. IRE 32, 419 (1944), from memory — verify), the energy and
power bookkeeping, and the warnings of the optics between stages."""
from __future__ import annotations

import math

import pytest

import ampmodel
from ampmodel.fibre import model as F
from ampmodel.fibre import steady_state


def two_stage(mode: str, **seed) -> dict:
    fibre = {"kind": "fibre", "material": "Yb:silica fibre", "core_diameter_um": 10.0,
             "cladding_diameter_um": 125.0, "core_na": 0.07, "slices": 40, "ase": True, "ase_bins": 6}
    return {
        "title": "two stages", "mode": mode,
        "medium": [dict(fibre, name="a", length_m=2.0, pump={"power_W": 2.0, "cladding": True}),
                   dict(fibre, name="b", length_m=3.0, pump={"power_W": 6.0, "cladding": True, "direction": "both"})],
        "seed": seed,
        "step": [{"kind": "pass", "medium": "a"}, {"kind": "loss", "transmission": 0.6},
                 {"kind": "pass", "medium": "b"}],
    }


def test_cw_stages_chain_and_noise_figure_cascade():
    config = ampmodel.load_config(two_stage("cw", power_W=0.01))
    s = ampmodel.simulate(config).summary
    # each stage again on its own, with the signal the layout hands it
    fa = steady_state.output_figures(steady_state.solve_cw(F.build_model(config.media[0], 1030e-9), 0.01))
    fb = steady_state.output_figures(steady_state.solve_cw(F.build_model(config.media[1], 1030e-9), 0.6 * fa["signal_out_W"]))
    assert s["output_power_W"] == pytest.approx(fb["signal_out_W"], rel=1e-9)
    friis = fa["noise_figure"] + (1 / 0.6 - 1) / fa["gain"] + (fb["noise_figure"] - 1) / (0.6 * fa["gain"])
    assert s["noise_figure_dB"] == pytest.approx(10 * math.log10(friis), rel=1e-9)
    assert s["ase_backward_W"] == pytest.approx(fa["ase_backward_W"], rel=1e-9)    # out of the first fibre
    assert s["ase_forward_W"] == pytest.approx(fb["ase_forward_W"], rel=1e-9)      # out of the last one
    assert s["pump_power_out_W"] == pytest.approx(fa["pump_out_W"] + fb["pump_out_W"], rel=1e-9)
    assert abs(s["power_balance_error"]) < 1e-12 and s["photon_balance_error"] < 1e-9


def test_pulsed_stages_bookkeeping_and_optic_damage():
    raw = two_stage("pulsed", energy_J=5e-7, duration_ns=1.0, repetition_rate_kHz=20.0)
    raw["grid"] = {"time_slices": 12}
    raw["step"][1].update(damage_fluence_J_cm2=0.5, damage_pulse_ns=10.0)
    s = ampmodel.simulate(ampmodel.load_config(raw)).summary
    assert abs(s["energy_balance_error"]) < 1e-12
    steps = s["steps"]
    assert steps[1]["energy_in_J"] == pytest.approx(steps[0]["energy_out_J"], rel=1e-15)
    assert steps[1]["passive_loss_J"] == pytest.approx(0.4 * steps[0]["energy_out_J"], rel=1e-12)
    assert s["output_energy_J"] == pytest.approx(steps[2]["energy_out_J"], rel=1e-15)
    assert s["output_power_W"] == pytest.approx(2e4 * s["output_energy_J"], rel=1e-12)
    assert any(w.startswith("step 1 (loss): peak fluence") for w in s["warnings"]), s["warnings"]
    # the B-integral of the layout adds the stages' phases slice by slice: at most their sum
    assert s["b_integral_rad"] <= steps[0]["b_integral_rad"] + steps[2]["b_integral_rad"] + 1e-12
    assert s["b_integral_rad"] >= max(steps[0]["b_integral_rad"], steps[2]["b_integral_rad"])
