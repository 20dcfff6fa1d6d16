"""Pulse trains that settle to a cycle of pulses (period doubling in a continuously pumped regenerative
amplifier): the orbit the run reports against the brute-force train, the flat-beam map applied pulse
after pulse hundreds of times until its tail repeats, and the energy balance over the whole cycle.

References
----------
Frantz–Nodvik (J. Appl. Phys. 34, 2346 (1963)) for every pass of the flat beam and the exact N2(t) of
dN2/dt = R − N2/tau between round trips and pulses (timing_reference); the unstable single-pulse
steady state is the root of Φ(ln G) − ln G found with scipy.optimize.brentq. The period-2 orbit of the
logistic map x -> r·x·(1 − x), x± = (r + 1 ± sqrt((r − 3)(r + 1)))/(2r) for 3 < r < 1 + sqrt(6)
(R. M. May, Nature 261, 459 (1976)), checks the orbit finder on its own.
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
from ampmodel.pulsed import train_cycles

SEED_J = 1e-9
T1, T2, T_OUT = 0.9, 0.97, 0.95
ROUND_TRIP_S = 10e-9
TOLERANCE = 1e-6
BRUTE_FORCE_PULSES = 600

# name: (upper-state lifetime, absorbed cw pump power, round trips, repetition rate): test values of a
# regenerative amplifier run at about one lifetime per period (a cycle of 2) and faster (a cycle of 4)
CASES = {
    "two": (100e-6, 200.0, 30, 10e3),
    "four": (100e-6, 400.0, 20, 50e3),
}


def cavity(count: int) -> list:
    return [{"kind": "repeat", "count": count, "round_trip_ns": ROUND_TRIP_S * 1e9, "steps": [
        {"kind": "pass", "medium": "xtal"}, {"kind": "loss", "transmission": T1},
        {"kind": "pass", "medium": "xtal", "reverse": True}, {"kind": "loss", "transmission": T2}]},
        {"kind": "loss", "transmission": T_OUT}]


def run(case: str, max_pulses: int = 200, output_damage_J_cm2: float | None = None):
    tau, power, count, rate = CASES[case]
    raw = flat_config(cavity(count), tau_s=tau, gain=side_pump(power), seed_J=SEED_J, rate_Hz=rate,
                      train={"tolerance": TOLERANCE, "max_pulses": max_pulses})
    if output_damage_J_cm2 is not None:           # the output coupler's damage fluence, quoted at the seed's 1 ns
        raw["step"][-1].update(damage_fluence_J_cm2=output_damage_J_cm2, damage_pulse_ns=1.0)
    return simulate(load_config(raw))


def decayed(ln_g: float, ln_inf: float, t: float, tau: float) -> float:
    """∫N2/tau dt over t in ln G units (h·nu·∫N2 dz = Fsat·ln G): N_inf·t/tau + (N0 − N_inf)(1 − exp(−t/tau))."""
    return ln_inf * t / tau + (ln_g - ln_inf) * -math.expm1(-t / tau)


def pulse_map(case: str, ln_g: float) -> tuple[float, float, float, float]:
    """One pulse through the cavity at a beam pixel and the recovery until the next: (ln G before the
    next pulse, output energy of the beam (J), fluence extracted (J/m²), decay (ln G units))."""
    tau, power, count, rate = CASES[case]
    ln_inf = pump_ln_gain_inf(power, tau)
    _, area = pixels()
    beam_area = disc_count(BEAM_MM) * area
    j = SEED_J / beam_area
    extracted = lost = 0.0
    for _ in range(count):
        for transmission in (T1, T2):
            out = fn(j, ln_g)
            ln_g -= (out - j) / FSAT
            extracted += out - j
            j = out * transmission
        lost += decayed(ln_g, ln_inf, ROUND_TRIP_S, tau)
        ln_g = relax(ln_g, ln_inf, ROUND_TRIP_S, tau)
    rest = 1.0 / rate - count * ROUND_TRIP_S
    lost += decayed(ln_g, ln_inf, rest, tau)
    return relax(ln_g, ln_inf, rest, tau), T_OUT * j * beam_area, extracted, lost


def brute_force(case: str, pulses: int = BRUTE_FORCE_PULSES) -> tuple[list[float], list[float]]:
    """The flat-beam train from its start (the pump's steady state) pulse after pulse: the output energy
    of each pulse and ln G before each."""
    tau, power, *_ = CASES[case]
    ln_g = pump_ln_gain_inf(power, tau)
    energies, gains = [], []
    for _ in range(pulses):
        gains.append(ln_g)
        ln_g, e, _, _ = pulse_map(case, ln_g)
        energies.append(e)
    return energies, gains


def tail_cycle(case: str, k: int) -> tuple[list[float], list[float], int]:
    """The brute-force train's last k pulses turned to start with the largest: energies, ln G before
    each, and the number of a pulse in the phase of the largest."""
    energies, gains = brute_force(case)
    e, g = np.asarray(energies[-k:]), np.asarray(gains[-k:])
    previous = np.asarray(energies[-2 * k:-k])
    assert np.all(np.abs(e - previous) <= 1e-12 * e.max())           # the tail repeats: a cycle of k ...
    assert np.ptp(e) > 0.1 * e.max()                                 # ... of pulses that differ
    first = int(np.argmax(e))
    return list(np.roll(e, -first)), list(np.roll(g, -first)), BRUTE_FORCE_PULSES - k + 1 + first


def stored(case: str, ln_g: float) -> float:
    """Extractable stored energy: the beam's pixels at ln_g, the other pixels of the aperture at the
    pump's steady state."""
    tau, power, *_ = CASES[case]
    _, area = pixels()
    n_beam, n_aperture = disc_count(BEAM_MM), disc_count(APERTURE_MM)
    return FSAT * area * (n_beam * ln_g + (n_aperture - n_beam) * pump_ln_gain_inf(power, tau))


@pytest.fixture(scope="module")
def two():
    """A train cut short (34 pulses) where it repeats to within 1e-5 but not yet 1e-6: the orbit has to
    be found, not read off the train."""
    return run("two", max_pulses=34)


def test_the_cycle_is_the_brute_force_tail(two):
    s = two.summary
    train = s["train"]
    ref, ref_gains, phase_of_largest = tail_cycle("two", 2)
    rate = CASES["two"][3]
    assert train["cycle_length"] == 2
    np.testing.assert_allclose(train["cycle_pulse_energies_J"], ref, rtol=1e-6)      # the requirement
    np.testing.assert_allclose(train["cycle_pulse_energies_J"], ref, rtol=1e-9)      # what it reaches
    # the train as run had not reached it to that precision: the orbit is found, not read off the train
    last = len(train["pulse_energies_J"])
    assert max(abs(train["pulse_energies_J"][n - 1] - ref[(n - phase_of_largest) % 2])
               for n in (last - 1, last)) > 1e-6 * ref[0]
    assert train["pulse_energy_J"] == pytest.approx(ref[0], rel=1e-9)
    assert train["pulse_energy_mean_J"] == pytest.approx(np.mean(ref), rel=1e-9)
    assert train["average_power_W"] == pytest.approx(np.mean(ref) * rate, rel=1e-9)
    assert s["average_power_W"] == train["average_power_W"]
    np.testing.assert_allclose(train["cycle_stored_energy_before_pulse_J"], [stored("two", g) for g in ref_gains],
                               rtol=1e-9)
    assert train["cycle_fixed_point_residual"] <= 1e-10


def test_the_orbit_repeats_after_two_pulses_and_not_after_one(two):
    # the gain before the reported (largest) pulse, in the beam's pixels, through the reference map
    rec = two.media["xtal"]
    column = rec.gain_initial_per_m.sum(axis=0) * rec.slice_length_m
    x, _ = pixels()
    in_beam = np.hypot(x[None, :], x[:, None]) <= BEAM_MM * 1e-3 / 2
    ln_g = float(column[in_beam].mean())
    assert np.ptp(column[in_beam]) <= 1e-12 * ln_g                    # a flat beam: one column
    once = pulse_map("two", ln_g)[0]
    twice = pulse_map("two", once)[0]
    assert abs(twice - ln_g) <= 1e-9 * ln_g                           # Φ²(x) = x
    assert abs(once - ln_g) > 1e-2 * ln_g                             # Φ(x) != x


def test_the_single_pulse_steady_state_is_unstable_and_not_reported(two):
    train = two.summary["train"]
    tau, power, _, rate = CASES["two"]
    ln_inf = pump_ln_gain_inf(power, tau)
    root = brentq(lambda g: pulse_map("two", g)[0] - g, 0.0, ln_inf, xtol=1e-15, rtol=1e-15)
    assert train["fixed_point_pulse_energy_J"] == pytest.approx(pulse_map("two", root)[1], rel=1e-9)
    h = 1e-6 * root
    slope = (pulse_map("two", root + h)[0] - pulse_map("two", root - h)[0]) / (2 * h)
    assert slope < -1.0                                               # unstable: period doubling
    ref, _, _ = tail_cycle("two", 2)
    assert min(ref) < train["fixed_point_pulse_energy_J"] < max(ref)
    assert train["average_power_W"] != pytest.approx(train["fixed_point_pulse_energy_J"] * rate, rel=1e-3)


def test_energy_balance_over_the_cycle(two):
    train = two.summary["train"]
    tau, power, _, rate = CASES["two"]
    # every absorbed pump photon makes an ion (quantum efficiency 1), stored at the signal photon energy
    assert train["pump_stored_power_W"] == pytest.approx(power * PUMP_WAVELENGTH / WAVELENGTH, rel=1e-12)
    _, gains, _ = tail_cycle("two", 2)
    _, area = pixels()
    n_beam, n_aperture = disc_count(BEAM_MM), disc_count(APERTURE_MM)
    ln_inf = pump_ln_gain_inf(power, tau)
    extracted = sum(pulse_map("two", g)[2] for g in gains) * n_beam * area
    lost = FSAT * area * (n_beam * sum(pulse_map("two", g)[3] for g in gains)
                          + (n_aperture - n_beam) * 2 * decayed(ln_inf, ln_inf, 1.0 / rate, tau))
    assert train["extracted_power_W"] == pytest.approx(extracted / 2 * rate, rel=1e-9)
    assert train["decay_power_W"] == pytest.approx(lost / 2 * rate, rel=1e-9)
    # over a true cycle the stored energy comes back: pumped = decayed + extracted
    assert train["pump_stored_power_W"] == pytest.approx(train["decay_power_W"] + train["extracted_power_W"],
                                                         rel=1e-9)
    assert abs(train["energy_balance_error"]) <= 1e-10


def test_the_largest_pulse_is_the_one_described(two):
    s = two.summary
    train = s["train"]
    largest = max(train["cycle_pulse_energies_J"])
    assert train["cycle_pulse_energies_J"][0] == largest == train["pulse_energy_J"]
    assert s["output_energy_J"] == largest
    assert s["steps"][0]["energy_out_J"] == pytest.approx(largest / T_OUT, rel=1e-12)
    assert s["stored_energy_J"] == pytest.approx(train["cycle_stored_energy_before_pulse_J"][0], rel=1e-12)
    assert list(two.train["cycle_pulse_energy"][0]) == train["cycle_pulse_energies_J"]
    cycle_warnings = [w for w in s["warnings"] if w.startswith("train:")]
    assert len(cycle_warnings) == 1 and "cycle of 2" in cycle_warnings[0] and "unstable" in cycle_warnings[0]


def test_damage_is_checked_on_the_largest_pulse(two):
    # a damage level that the largest pulse of the cycle passes and the unstable single-pulse steady
    # state would not: the run warns (a flat beam: the peak fluence is proportional to the energy)
    s = two.summary
    largest = s["steps"][-1]["peak_fluence_J_cm2"]
    single = largest * s["train"]["fixed_point_pulse_energy_J"] / s["train"]["pulse_energy_J"]
    fraction = two.config.limits.damage_fraction
    damage = (largest + single) / 2 / fraction
    assert not any("damage fluence" in w for w in s["warnings"])
    warned = run("two", max_pulses=34, output_damage_J_cm2=damage).summary["warnings"]
    assert any("damage fluence" in w for w in warned), warned


def test_pulses_to_the_cycle_against_the_brute_force_train(two):
    energies, _ = brute_force("two")
    ref, _, phase_of_largest = tail_cycle("two", 2)
    distance = [abs(e - ref[(n - phase_of_largest) % 2]) for n, e in enumerate(energies, start=1)]
    within = np.asarray(distance) <= TOLERANCE * max(ref)
    first = next(n for n in range(1, len(within) + 1) if within[n - 1:].all())
    # cut short: estimated from the contraction per cycle, to within a cycle
    short = two.summary["train"]
    np.testing.assert_allclose(short["pulse_energies_J"], energies[:34], rtol=1e-10)
    assert short["pulses_to_steady_state_estimated"]
    assert abs(short["pulses_to_steady_state"] - first) <= 2
    # run long enough: the first pulse from which every pulse is within the tolerance
    full = run("two", max_pulses=60).summary["train"]
    assert full["pulses_to_steady_state"] == first and not full["pulses_to_steady_state_estimated"]
    assert full["cycle_pulse_energies_J"] == pytest.approx(short["cycle_pulse_energies_J"], rel=1e-9)


def test_a_cycle_of_four_in_the_order_the_pulses_occur():
    result = run("four")
    train = result.summary["train"]
    ref, ref_gains, _ = tail_cycle("four", 4)
    assert train["cycle_length"] == 4
    np.testing.assert_allclose(train["cycle_pulse_energies_J"], ref, rtol=1e-9)
    assert train["average_power_W"] == pytest.approx(np.mean(ref) * CASES["four"][3], rel=1e-9)
    np.testing.assert_allclose(train["cycle_stored_energy_before_pulse_J"], [stored("four", g) for g in ref_gains],
                               rtol=1e-9)
    assert abs(train["energy_balance_error"]) <= 1e-10
    assert result.summary["output_energy_J"] == train["pulse_energy_J"] == pytest.approx(max(ref), rel=1e-9)


# ----------------------------------------------------------------------------------------------
# The pieces on their own
# ----------------------------------------------------------------------------------------------

def _figures(phi):
    def period(u):
        v = phi(u)
        return train_cycles.PeriodFigures(u_next=v, energy_J=float(u[0]), stored_before_J=0.0, upper_before_J=0.0,
                                          upper_after_J=0.0, pumped_J=1.0, decayed_J=0.5, extracted_J=0.5)
    return period


def test_the_orbit_finder_finds_the_period_two_orbit_of_the_logistic_map():
    r = 3.2
    phi = lambda u: r * u * (1.0 - u)                                  # noqa: E731
    x_high = (r + 1 + math.sqrt((r - 3) * (r + 1))) / (2 * r)
    x_low = (r + 1 - math.sqrt((r - 3) * (r + 1))) / (2 * r)
    orbit = train_cycles.find_orbit(phi, _figures(phi), np.array([0.5]), 11, 2, 1e-6, 1e-13, None, 6, 300, 40)
    assert orbit.length == 2
    assert orbit.energies_J == pytest.approx([x_high, x_low], rel=1e-12)
    assert orbit.phase(orbit.start_pulse) == 0 and orbit.phase(orbit.start_pulse + 3) == 1
    assert orbit.residual <= 1e-13


def test_an_orbit_that_is_the_fixed_point_is_not_a_cycle():
    # x -> 1 − 0.999·(x − 1): an alternation that dies away slowly; Φ² has only the fixed point 1
    phi = lambda u: 1.0 - 0.999 * (u - 1.0)                            # noqa: E731
    orbit = train_cycles.find_orbit(phi, _figures(phi), np.array([1.01]), 1, 2, 1e-6, 1e-13, None, 6, 300, 40)
    assert orbit.length == 1 and orbit.energies_J == pytest.approx([1.0], rel=1e-10)
    # a cycle of 4 found that repeats every 2 is the cycle of 2
    assert train_cycles.shortest_period([1.0, 2.0, 1.0, 2.0], 1e-6) == 2
    assert train_cycles.shortest_period([1.0, 2.0, 1.0, 2.5], 1e-6) == 4
    assert train_cycles.shortest_period([1.0, 1.0 + 1e-9], 1e-6) == 1


def test_settling_estimate_and_cycle_detection():
    steady = 1.0
    decaying = [steady + 0.1 * 0.5 ** k * (-1) ** k for k in range(12)]
    # |E_k − E*| = 0.1·0.5^k: within 1e-6 once 0.5^k <= 1e-5, k >= 17, i.e. pulse 18
    assert train_cycles.estimate_settling(decaying, steady, 1e-6) == 18
    assert train_cycles.repeating_cycle(decaying, 1e-6) == []
    three = [0.9, 1.1, 1.0] * 10
    assert train_cycles.repeating_cycle(three, 1e-6) == [0.9, 1.1, 1.0]
    assert train_cycles.estimate_settling(three, 1.0, 1e-6) is None
    two = [1.0 + 0.01 * 0.3 ** k for k in range(5)] + [0.8, 1.2] * 8
    assert train_cycles.repeating_cycle(two, 1e-6) == [0.8, 1.2]


def test_an_observed_cycle_that_is_the_steady_state_says_so():
    warnings: list[str] = []
    energies = [1.0, 1.5] * 20
    settled, estimated = train_cycles.settling(energies, 1.25, 1e-6, None, 1e3, warnings)
    assert settled is None and not estimated
    assert len(warnings) == 1 and "the single-pulse steady state" in warnings[0] and "repeat every 2" in warnings[0]
