"""Repeats: a regenerative amplifier with a flat beam against the Frantz–Nodvik map iterated round trip
by round trip with the cavity loss and the decay (and pumping) of the inversion between round trips.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): the output fluence of a slab and the
gain it leaves; a flat beam is the same at every pixel, so each round trip is the scalar map
J -> FN(J, ln G), ln G -> ln G − ΔJ/Fsat, J -> T·J, ... iterated here by hand. Between round trips
ln G relaxes by the exact solution of dN2/dt = R − N2/tau (timing_reference.relax).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from timing_reference import (
    APERTURE_MM,
    BEAM_MM,
    FSAT,
    TAU_SHORT,
    disc_count,
    flat_config,
    fn,
    pixels,
    pump_ln_gain_inf,
    relax,
    side_pump,
)

from ampmodel import load_config, simulate

T1, T2 = 0.9, 0.97
G0 = 2.0
ROUND_TRIP_NS = 10.0
SEED_J = 1e-9


def cavity(rule: dict) -> list:
    return [{"kind": "repeat", **rule, "round_trip_ns": ROUND_TRIP_NS, "steps": [
        {"kind": "pass", "medium": "xtal"}, {"kind": "loss", "transmission": T1},
        {"kind": "pass", "medium": "xtal", "reverse": True}, {"kind": "loss", "transmission": T2}]},
        {"kind": "loss", "transmission": 0.95}]


def reference(n: int, ln_gain0: float, ln_gain_inf: float) -> tuple[list[float], list[float]]:
    """Energy after each of n round trips and ln G after each (iterated FN map, by hand)."""
    _, area = pixels()
    beam_area = disc_count(BEAM_MM) * area
    j = SEED_J / beam_area
    ln_g = ln_gain0
    energies, gains = [], []
    for _ in range(n):
        for transmission in (T1, T2):
            out = fn(j, ln_g)
            ln_g -= (out - j) / FSAT
            j = out * transmission
        ln_g = relax(ln_g, ln_gain_inf, ROUND_TRIP_NS * 1e-9, TAU_SHORT)
        energies.append(j * beam_area)
        gains.append(ln_g)
    return energies, gains


CASES = {
    "decay only": ({"small_signal_gain": G0}, math.log(G0), 0.0),
    # a test value: a pump strong enough to hold ln G = 0.6 against the 3.2 us lifetime
    "continuous pump": (side_pump(8000.0), pump_ln_gain_inf(8000.0, TAU_SHORT), pump_ln_gain_inf(8000.0, TAU_SHORT)),
}


@pytest.fixture(scope="module", params=sorted(CASES))
def regen(request):
    gain, ln_g0, ln_g_inf = CASES[request.param]
    result = simulate(load_config(flat_config(cavity({"until": "peak", "max_count": 200}), gain=gain,
                                              seed_J=SEED_J)))
    return result, ln_g0, ln_g_inf


def test_round_trip_energies_equal_the_iterated_map(regen):
    result, ln_g0, ln_g_inf = regen
    entry = result.summary["steps"][0]
    got = entry["energy_per_round_trip_J"]
    ref, _ = reference(len(got), ln_g0, ln_g_inf)
    assert len(got) > 10                                   # a real build-up, over many round trips
    rel = np.abs(np.array(got) / np.array(ref) - 1.0)
    assert rel.max() < 1e-6, rel.max()                     # the requirement
    assert rel.max() < 1e-11                               # what the exact maps give


def test_the_dump_round_trip_is_the_true_maximum(regen):
    result, ln_g0, ln_g_inf = regen
    entry = result.summary["steps"][0]
    dump = entry["round_trip_count"]
    ref, _ = reference(3 * dump + 10, ln_g0, ln_g_inf)
    assert int(np.argmax(ref)) + 1 == dump
    assert entry["peak_found"] is True
    assert len(entry["energy_per_round_trip_J"]) == dump + 1          # one more run, and discarded
    assert entry["energy_per_round_trip_J"][dump] < entry["energy_per_round_trip_J"][dump - 1]
    assert entry["energy_out_J"] == pytest.approx(ref[dump - 1], rel=1e-11)
    assert result.summary["output_energy_J"] == pytest.approx(0.95 * ref[dump - 1], rel=1e-11)
    assert entry["build_up_time_ns"] == pytest.approx(dump * ROUND_TRIP_NS, rel=1e-12)
    assert [r["dumped"] for r in entry["round_trips"]].count(True) == 1


def test_the_state_kept_is_that_of_the_dump_round_trip(regen):
    # the gain left in the beam's pixels is the reference ln G after the dump round trip, not after
    # the discarded one; pixels outside the beam only relaxed
    result, ln_g0, ln_g_inf = regen
    dump = result.summary["steps"][0]["round_trip_count"]
    _, gains = reference(dump + 1, ln_g0, ln_g_inf)
    rec = result.media["xtal"]
    column = rec.gain_final_per_m.sum(axis=0) * rec.slice_length_m
    x, _ = pixels()
    r = np.hypot(x[None, :], x[:, None])
    in_beam = r <= BEAM_MM * 1e-3 / 2
    outside = (r <= APERTURE_MM * 1e-3 / 2) & ~in_beam
    np.testing.assert_allclose(column[in_beam], gains[dump - 1], rtol=1e-11)
    untouched = relax(ln_g0, ln_g_inf, dump * ROUND_TRIP_NS * 1e-9, TAU_SHORT)
    np.testing.assert_allclose(column[outside], untouched, rtol=1e-11)


def test_energy_balance_and_bookkeeping(regen):
    result, *_ = regen
    s = result.summary
    assert abs(s["energy_balance_error"]) < 1e-12
    medium = s["media"][0]
    # the beam's extraction equals what the gain map lost plus what the pump added minus decay
    assert medium["extracted_energy_J"] == pytest.approx(s["extracted_energy_J"], rel=1e-9)
    assert s["layout_time_ns"] == pytest.approx(s["steps"][0]["build_up_time_ns"], rel=1e-12)


def test_a_fixed_count_gives_the_same_round_trips():
    result = simulate(load_config(flat_config(cavity({"count": 7}), seed_J=SEED_J)))
    entry = result.summary["steps"][0]
    ref, _ = reference(7, math.log(G0), 0.0)
    np.testing.assert_allclose(entry["energy_per_round_trip_J"], ref, rtol=1e-11)
    assert entry["round_trip_count"] == 7 and "peak_found" not in entry
    assert all(r["kept"] for r in entry["round_trips"])


def test_max_count_stops_a_build_up_that_still_rises():
    result = simulate(load_config(flat_config(cavity({"until": "peak", "max_count": 4}), seed_J=SEED_J)))
    entry = result.summary["steps"][0]
    assert entry["round_trip_count"] == 4 and entry["peak_found"] is False
    assert any("still rose after max_count = 4" in w for w in result.summary["warnings"])


def test_on_the_field_path_the_dump_keeps_the_state_of_the_peak_round_trip():
    # grid.diffraction = true: the beam is a complex field; the copy kept each round trip must give
    # back exactly the state of a run that stops there by count
    def field_run(rule):
        raw = flat_config(cavity(rule), seed_J=SEED_J, profile="gaussian")
        raw["grid"].update(diffraction=True, points=32, width_mm=8.0, time_slices=2)
        raw["seed"]["diameter_mm"] = 3.0
        raw["medium"][0]["diameter_mm"] = 6.0
        return simulate(load_config(raw))
    peak = field_run({"until": "peak", "max_count": 200})
    dump = peak.summary["steps"][0]["round_trip_count"]
    fixed = field_run({"count": dump})
    assert peak.summary["steps"][0]["peak_found"]
    np.testing.assert_array_equal(peak.output_field, fixed.output_field)
    np.testing.assert_array_equal(peak.media["xtal"].gain_final_per_m, fixed.media["xtal"].gain_final_per_m)
    assert abs(peak.summary["energy_balance_error"]) < 1e-12
