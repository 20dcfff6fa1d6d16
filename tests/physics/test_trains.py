"""Pulse trains: the periodic steady state against the fixed point found with scipy.optimize.brentq for
a flat beam, the train from its start against the same map iterated pulse by pulse, and the energy
balance over a period (pump input = decay + extraction).

References
----------
Frantz–Nodvik (J. Appl. Phys. 34, 2346 (1963)) for each pass of the flat beam, and the exact N2(t) of
dN2/dt = R − N2/tau for the recovery between pulses (timing_reference); the fixed point of the
resulting scalar map ln G_before -> ln G_next is found with scipy.optimize.brentq.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from timing_reference import (
    APERTURE_MM,
    BEAM_MM,
    FSAT,
    PUMP_WAVELENGTH,
    WAVELENGTH,
    disc_count,
    flat_config,
    fn,
    pixels,
    pump_ln_gain_inf,
    relax,
    side_pump,
)

from ampmodel import load_config, simulate

TAU = 100e-6
T = 0.85
SEED_J = 20e-6
STEPS = [{"kind": "pass", "medium": "xtal"}, {"kind": "loss", "transmission": T},
         {"kind": "pass", "medium": "xtal", "reverse": True}]


def pulse_map(ln_g: float, ln_g_pump: float, recover) -> tuple[float, float, float]:
    """One pulse through the layout at one beam pixel, then the recovery: (ln G before the next pulse,
    output fluence, ln G right after the pulse)."""
    _, area = pixels()
    j = SEED_J / (disc_count(BEAM_MM) * area)
    out = fn(j, ln_g)
    ln_g -= (out - j) / FSAT
    j = T * out
    out = fn(j, ln_g)
    ln_g -= (out - j) / FSAT
    return recover(ln_g, ln_g_pump), out, ln_g


def cw_recovery(period):
    return lambda ln_g, ln_inf: relax(ln_g, ln_inf, period, TAU)


def pulsed_recovery(period, tp):
    # off for period − tp, then the pump pulse of length tp (its steady state ln_inf)
    return lambda ln_g, ln_inf: relax(ln_g * math.exp(-(period - tp) / TAU), ln_inf, tp, TAU)


CASES = {
    # name: (pump, rate, ln G the pump would hold (R·tau), recovery, unseeded ln G before pulse 1)
    "cw 20 kHz": (side_pump(600.0), 20e3, pump_ln_gain_inf(600.0, TAU), cw_recovery(50e-6), None),
    "cw 3 kHz": (side_pump(600.0), 3e3, pump_ln_gain_inf(600.0, TAU), cw_recovery(1 / 3e3), None),
    "pulsed pump 5 kHz": (side_pump(900.0, continuous=False, duration_us=80.0), 5e3,
                          pump_ln_gain_inf(900.0, TAU), pulsed_recovery(200e-6, 80e-6),
                          pump_ln_gain_inf(900.0, TAU) * (-math.expm1(-0.8)) / (-math.expm1(-2.0))),
}


def brentq_steady_state(case) -> tuple[float, float]:
    _, _, ln_inf, recover, _ = CASES[case]
    root = brentq(lambda g: pulse_map(g, ln_inf, recover)[0] - g, 0.0, ln_inf, xtol=1e-15, rtol=1e-15)
    return root, pulse_map(root, ln_inf, recover)[1]


def run(case, method="auto", profile="flat"):
    pump, rate, *_ = CASES[case]
    raw = flat_config(STEPS, tau_s=TAU, gain=pump, seed_J=SEED_J, rate_Hz=rate,
                      train={"method": method, "tolerance": 1e-8, "max_pulses": 300}, profile=profile)
    return simulate(load_config(raw))


@pytest.fixture(scope="module", params=[(c, m) for c in sorted(CASES) for m in ("auto", "iterate")],
                ids=lambda p: f"{p[0]}-{p[1]}")
def steady(request):
    case, method = request.param
    return case, method, run(case, method)


def test_steady_state_equals_the_brentq_fixed_point(steady):
    case, method, result = steady
    ln_before, j_out = brentq_steady_state(case)
    _, area = pixels()
    n_beam, n_aperture = disc_count(BEAM_MM), disc_count(APERTURE_MM)
    train = result.summary["train"]
    e_ref = j_out * n_beam * area
    assert train["pulse_energy_J"] == pytest.approx(e_ref, rel=1e-6)          # the requirement
    assert train["pulse_energy_J"] == pytest.approx(e_ref, rel=1e-9)          # what it reaches
    # stored energy before each pulse: the beam's pixels at the fixed point, the others unextracted
    _, _, ln_inf, recover, unseeded = CASES[case]
    ln_idle = unseeded if unseeded is not None else ln_inf
    stored_ref = FSAT * area * (n_beam * ln_before + (n_aperture - n_beam) * ln_idle)
    assert train["stored_energy_before_pulse_J"] == pytest.approx(stored_ref, rel=1e-9)
    assert result.summary["stored_energy_J"] == pytest.approx(stored_ref, rel=1e-9)
    assert train["average_power_W"] == pytest.approx(e_ref * CASES[case][1], rel=1e-9)
    assert train["direct_solution"] == ("applied" if method == "auto" else 'not applicable: not used '
                                        '(train.method = "iterate")')


def test_the_train_from_its_start_follows_the_map_pulse_by_pulse(steady):
    case, _, result = steady
    _, _, ln_inf, recover, unseeded = CASES[case]
    train = result.summary["train"]
    _, area = pixels()
    n_beam, n_aperture = disc_count(BEAM_MM), disc_count(APERTURE_MM)
    ln_idle = unseeded if unseeded is not None else ln_inf
    ln_g = ln_idle
    energies, stored = [], []
    for _ in train["pulse_energies_J"]:
        stored.append(FSAT * area * (n_beam * ln_g + (n_aperture - n_beam) * ln_idle))
        ln_g, j_out, _ = pulse_map(ln_g, ln_inf, recover)
        energies.append(j_out * n_beam * area)
    np.testing.assert_allclose(train["pulse_energies_J"], energies, rtol=1e-10)
    np.testing.assert_allclose(train["stored_energy_before_each_pulse_J"], stored, rtol=1e-10)
    e_star = train["pulse_energy_J"]
    k = train["pulses_to_steady_state"]
    assert not train["pulses_to_steady_state_estimated"]
    assert abs(energies[k - 1] - e_star) <= 1e-8 * e_star
    assert k == 1 or abs(energies[k - 2] - e_star) > 1e-8 * e_star          # the first such pulse


def test_energy_balance_over_a_period(steady):
    case, _, result = steady
    pump, rate, ln_inf, recover, unseeded = CASES[case]
    train = result.summary["train"]
    s = result.summary
    _, area = pixels()
    power = pump["pump"]["power_W"]
    # pump input to the upper state, at the signal photon energy: every absorbed pump photon makes an
    # ion (quantum efficiency 1), stored at h·nu_s (exact: four-level, no cap); pulsed: for tp each period
    on_fraction = 1.0 if pump["pump"].get("continuous") else pump["pump"]["duration_us"] * 1e-6 * rate
    pump_stored_W = power * on_fraction * PUMP_WAVELENGTH / WAVELENGTH
    assert train["pump_stored_power_W"] == pytest.approx(pump_stored_W, rel=1e-12)
    # extraction from the beam: output − input + the loss between the passes
    losses = s["steps"][1]["passive_loss_J"]
    assert train["extracted_power_W"] == pytest.approx(
        (s["output_energy_J"] - s["input_energy_J"] + losses) * rate, rel=1e-10)
    # steady state: pump input = spontaneous decay + extraction
    assert train["pump_stored_power_W"] == pytest.approx(train["decay_power_W"] + train["extracted_power_W"],
                                                         rel=1e-9)
    assert abs(train["energy_balance_error"]) < 1e-12
    if pump["pump"].get("continuous"):
        # decay over the period from the exact relaxation (per pixel, in ions): beam pixels start from
        # what the pulse left, the others sit at the steady state R·tau
        ln_before, _ = brentq_steady_state(case)
        _, _, after_pulse = pulse_map(ln_before, ln_inf, recover)
        period = 1.0 / rate
        n_beam, n_aperture = disc_count(BEAM_MM), disc_count(APERTURE_MM)

        def decayed(ln_g):
            # h·nu·∫N2/tau dt over the period per pixel area, in ln G units (h·nu·∫N2 dz = Fsat·ln G):
            # N_inf·T/tau + (N0 − N_inf)(1 − exp(−T/tau))
            return ln_inf * period / TAU + (ln_g - ln_inf) * -math.expm1(-period / TAU)
        decay_J = FSAT * area * (n_beam * decayed(after_pulse) + (n_aperture - n_beam) * decayed(ln_inf))
        assert train["decay_power_W"] == pytest.approx(decay_J * rate, rel=1e-9)


@pytest.mark.parametrize("profile", ["gaussian"])
def test_direct_and_iterated_fixed_points_agree_for_a_gaussian_beam(profile):
    a = run("cw 20 kHz", "auto", profile)
    b = run("cw 20 kHz", "iterate", profile)
    assert a.summary["train"]["direct_solution"] == "applied"
    assert a.summary["train"]["direct_pulse_energy_J"] == pytest.approx(b.summary["output_energy_J"], rel=1e-10)
    assert a.summary["output_energy_J"] == pytest.approx(b.summary["output_energy_J"], rel=1e-10)
    np.testing.assert_allclose(a.media["xtal"].gain_initial_per_m, b.media["xtal"].gain_initial_per_m,
                               rtol=1e-8, atol=1e-9 * np.abs(b.media["xtal"].gain_initial_per_m).max())


def test_passive_loss_inside_rules_out_the_direct_solution_but_the_train_still_settles():
    pump, rate, *_ = CASES["cw 20 kHz"]
    raw = flat_config(STEPS, tau_s=TAU, gain=pump, seed_J=SEED_J, rate_Hz=rate, train={"tolerance": 1e-8})
    raw["medium"][0]["loss_per_cm"] = 0.05
    train = simulate(load_config(raw)).summary["train"]
    assert train["direct_solution"].startswith("not applicable: medium xtal has passive loss inside")
    assert train["fixed_point_residual"] <= 1e-10
    energies = train["pulse_energies_J"]
    assert abs(energies[-1] - train["pulse_energy_J"]) <= 1e-8 * train["pulse_energy_J"]


def test_a_multipass_cell_in_a_train_direct_and_iterated_agree():
    # a repeat with a count is per pixel too: the direct solution runs its round trips
    pump, rate, *_ = CASES["cw 20 kHz"]
    steps = [{"kind": "repeat", "count": 3, "round_trip_ns": 4.0,
              "steps": [{"kind": "pass", "medium": "xtal"}, {"kind": "loss", "transmission": 0.9},
                        {"kind": "pass", "medium": "xtal", "reverse": True}]}]
    results = {}
    for method in ("auto", "iterate"):
        raw = flat_config(steps, tau_s=TAU, gain=pump, seed_J=SEED_J, rate_Hz=rate, train={"method": method},
                          profile="gaussian")
        results[method] = simulate(load_config(raw)).summary
    auto, iterate = results["auto"]["train"], results["iterate"]["train"]
    assert auto["direct_solution"] == "applied"
    assert auto["direct_pulse_energy_J"] == pytest.approx(iterate["pulse_energy_J"], rel=1e-10)
    assert auto["layout_time_s"] == pytest.approx(12e-9, rel=1e-12)
    assert results["auto"]["steps"][0]["round_trip_count"] == 3

