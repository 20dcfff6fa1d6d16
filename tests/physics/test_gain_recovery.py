"""Gain recovery during a step's delay, through the whole solver: every voxel of the gain map against the
exact N2(t) of the rate equation (and scipy.integrate.solve_ivp), four-level and quasi-three-level.

References
----------
Four-level, doping not given (the ground state undepleted): dN2/dt = R − N2/tau, N2(t) = R·tau +
(N2(0) − R·tau)·exp(−t/tau) (textbook, e.g. W. Koechner, Solid-State Laser Engineering).
Quasi-three-level with its doping, side pump of flux Φ uniform in every voxel (no propagation, so
the closed form holds per voxel): dN2/dt = σa,p·Φ·(Nt − N2) − σe,p·Φ·N2 − N2/tau, i.e. N2(t) = N∞ +
(N2(0) − N∞)·exp(−t/τeff), 1/τeff = 1/tau + (σa,p + σe,p)·Φ, N∞ = σa,p·Φ·Nt·τeff (T. Y. Fan and
R. L. Byer, IEEE J. Quantum Electron. 23, 605 (1987), from memory — verify); the side pump's Φ is the
flux whose unbleached absorption σa,p·Nt·Φ is the delivered rate R. Gain coefficient
g = sigma_e·N2 − sigma_a·(Nt − N2), absorption from the lower level (Koechner, as above).
"""
from __future__ import annotations

import copy
import math

import numpy as np
import pytest
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK
from scipy.integrate import solve_ivp
from timing_reference import APERTURE_MM, LENGTH_MM, PUMP_WAVELENGTH, disc_count, flat_config, pixels, side_pump

from ampmodel import load_config, simulate

TAU = 250e-6
DELAY_NS = 60_000.0          # 60 us, a quarter of the lifetime
POWER_W = 300.0
QUASI = {"absorption_cross_section_cm2": 0.4e-19, "doping_per_m3": 1.4e27,
         "pump_absorption_cross_section_cm2": 0.8e-20, "pump_emission_cross_section_cm2": 0.1e-20}


def runs(gain: dict, quasi: bool):
    """The same pass without and with a delay after it."""
    base = flat_config([{"kind": "pass", "medium": "xtal"}], tau_s=TAU, gain=gain, seed_J=2e-3)
    if quasi:
        base["medium"][0]["material"].update(QUASI)
    delayed = copy.deepcopy(base)
    delayed["step"][0]["delay_ns"] = DELAY_NS
    return simulate(load_config(base)), simulate(load_config(delayed))


def n2_of(g, quasi):
    """N2 (1/m³) from the gain coefficient g (1/m): g = (sigma_e + sigma_a)·N2 − sigma_a·Nt."""
    sigma_e = 3.0e-23
    if not quasi:
        return g / sigma_e
    sigma_a, nt = QUASI["absorption_cross_section_cm2"] * 1e-4, QUASI["doping_per_m3"]
    return (g + sigma_a * nt) / (sigma_e + sigma_a)


def g_of(n2, quasi):
    sigma_e = 3.0e-23
    if not quasi:
        return sigma_e * n2
    sigma_a, nt = QUASI["absorption_cross_section_cm2"] * 1e-4, QUASI["doping_per_m3"]
    return (sigma_e + sigma_a) * n2 - sigma_a * nt


def rates(rate: float, quasi: bool) -> tuple[float, float]:
    """(A, B) of dN2/dt = A − B·N2 under the side pump delivering ``rate`` (module docstring)."""
    if not quasi:
        return rate, 1.0 / TAU
    sap, sep = QUASI["pump_absorption_cross_section_cm2"] * 1e-4, QUASI["pump_emission_cross_section_cm2"] * 1e-4
    flux = rate / (sap * QUASI["doping_per_m3"])
    return rate, (sap + sep) * flux + 1.0 / TAU


def pump_rate():
    """R (ions/m³/s) of the flat side pump absorbed completely over the clear aperture."""
    _, area = pixels()
    volume = disc_count(APERTURE_MM) * area * LENGTH_MM * 1e-3
    return POWER_W / (PLANCK * LIGHT_SPEED / PUMP_WAVELENGTH) / volume


@pytest.mark.parametrize("quasi", [False, True], ids=["four-level", "quasi-three-level"])
@pytest.mark.parametrize("pumped", [True, False], ids=["continuous pump", "decay only"])
def test_every_voxel_recovers_as_the_exact_solution(pumped, quasi):
    gain = side_pump(POWER_W) if pumped else {"small_signal_gain": 3.0}
    plain, delayed = runs(gain, quasi)
    after_pass = plain.media["xtal"].gain_final_per_m
    got = delayed.media["xtal"].gain_final_per_m
    x, _ = pixels()
    inside = np.hypot(x[None, :], x[:, None]) <= APERTURE_MM * 1e-3 / 2
    rate = pump_rate() if pumped else 0.0
    a, b = rates(rate, quasi)
    n0 = n2_of(after_pass[:, inside], quasi)
    t = DELAY_NS * 1e-9
    expected = g_of(a / b + (n0 - a / b) * math.exp(-b * t), quasi)
    scale = np.abs(expected).max()
    assert np.max(np.abs(got[:, inside] - expected)) < 1e-12 * scale
    assert np.all(got[:, ~inside] == 0.0)                      # no medium outside the aperture
    # scipy reference for the most depleted voxel
    k = np.unravel_index(np.argmin(n0), n0.shape)
    sol = solve_ivp(lambda _, y: [a - b * y[0]], (0.0, t), [n0[k]], method="DOP853", rtol=1e-12,
                    atol=1e-6 * max(n0[k], a / b))
    assert got[:, inside][k] == pytest.approx(g_of(sol.y[0, -1], quasi), rel=1e-9, abs=1e-12 * scale)
    # the pump and decay bookkeeping closes: what they did is the change of the gain map
    medium = delayed.summary["media"][0]
    fsat = medium["saturation_fluence_J_cm2"] * 1e4
    _, area = pixels()
    rec = delayed.media["xtal"]
    change = fsat * area * rec.slice_length_m * float((got - after_pass).sum())
    assert medium["pump_stored_energy_J"] - medium["decayed_energy_J"] == pytest.approx(change, rel=1e-9)
    if pumped:
        # the pump stores ∫(A − (B − 1/tau)·N2) dt per voxel at h·nu_s (R·t without bleaching)
        integral = (a / b) * t + (n0 - a / b) * (-math.expm1(-b * t)) / b        # ∫ N2 dt per voxel
        created = float(np.sum(a * t - (b - 1.0 / TAU) * integral))
        pumped_ref = created * (PLANCK * LIGHT_SPEED / 1000e-9) * area * rec.slice_length_m
        assert medium["pump_stored_energy_J"] == pytest.approx(pumped_ref, rel=1e-11)


def test_a_space_takes_its_length_over_c():
    steps = [{"kind": "pass", "medium": "xtal"}, {"kind": "space", "length_mm": 3000.0},
             {"kind": "space", "length_mm": 3000.0, "delay_ns": 0.0}]
    result = simulate(load_config(flat_config(steps, tau_s=TAU)))
    assert result.summary["layout_time_ns"] == pytest.approx(3.0 / LIGHT_SPEED * 1e9, rel=1e-12)
    assert result.summary["steps"][1]["delay_ns"] == pytest.approx(3.0 / LIGHT_SPEED * 1e9, rel=1e-12)
    assert result.summary["steps"][2]["delay_ns"] == 0.0
    plain = simulate(load_config(flat_config(steps[:1], tau_s=TAU)))
    np.testing.assert_allclose(result.media["xtal"].gain_final_per_m,
                               plain.media["xtal"].gain_final_per_m * math.exp(-3.0 / LIGHT_SPEED / TAU),
                               rtol=1e-13)


def test_a_continuous_pump_starts_at_its_steady_state():
    result = simulate(load_config(flat_config([{"kind": "pass", "medium": "xtal"}], tau_s=TAU,
                                              gain=side_pump(POWER_W))))
    g = result.media["xtal"].gain_initial_per_m
    x, _ = pixels()
    inside = np.hypot(x[None, :], x[:, None]) <= APERTURE_MM * 1e-3 / 2
    np.testing.assert_allclose(g[:, inside], 3.0e-23 * pump_rate() * TAU, rtol=1e-12)      # R·tau, four-level
    assert result.summary["media"][0]["absorbed_pump_power_W"] == pytest.approx(POWER_W, rel=1e-12)
