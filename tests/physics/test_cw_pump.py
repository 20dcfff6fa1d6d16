"""CW pumping: photon balance of a pumped quasi-three-level amplifier, Beer–Lambert absorption of a
weak pump, pump bleaching against solve_ivp, and the small-signal gain of a side-pumped rod.

References
----------
Steady-state rate equation with pump and signal, bulk form of C. R. Giles and E. Desurvire,
J. Lightwave Technol. 9, 271 (1991): N2/Nt = (Rp,a + Rs,a)/(Rp,a + Rp,e +
Rs,a + Rs,e + 1/τ), R = σ·I/(h·ν). Conservation: absorbed pump photons = added signal photons +
spontaneous decays ∫ N2/τ dV. Beer–Lambert: P_abs = P·(1 − exp(−α·L)).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from physics_reference import loss_step, make_material, make_medium, pass_step, photon_energy
from scipy.integrate import solve_ivp

from ampmodel.description import Config, Grid, Pump, Seed
from ampmodel.simulation import simulate

# Yb:YAG-like quasi-three-level medium (values of the built-in material, from memory — verify there).
QUASI = make_material(name="quasi-three-level test medium", wavelength_m=1030e-9, emission_cross_section_m2=2.1e-24,
                      absorption_cross_section_m2=1.1e-25, upper_lifetime_s=951e-6, doping_per_m3=2.76e26,
                      pump_absorption_cross_section_m2=8.0e-25, pump_emission_cross_section_m2=1.6e-25,
                      pump_wavelength_m=940e-9)
NT = 2.76e26


def pumped_config(material=QUASI, pump_power_W=120.0, seed_power_W=8.0, geometry="end", back_reflectance=0.9,
                  quantum_efficiency=1.0, passes=2, slices=24, points=32, pump_profile="flat", pump_wavelength_m=940e-9,
                  **pump_extra):
    pump = Pump(geometry=geometry, energy_J=None, duration_s=None, wavelength_m=pump_wavelength_m, profile=pump_profile,
                diameter_m=1.2e-3, back_reflectance=back_reflectance, quantum_efficiency=quantum_efficiency,
                power_W=pump_power_W, **pump_extra)
    medium = make_medium(material, name="crystal", length_m=6e-3, diameter_m=2.4e-3, slices=slices, pump=pump)
    seed = Seed(wavelength_m=material.wavelength_m, power_W=seed_power_W, profile="gaussian", diameter_m=1.0e-3)
    steps = [pass_step(0, "crystal")]
    for n in range(1, passes):
        steps += [loss_step(2 * n - 1, 0.97), pass_step(2 * n, "crystal", reverse=n % 2 == 1)]
    return Config(title="cw pumped", mode="cw", grid=Grid(points=points, width_m=3e-3), media=(medium,), seed=seed,
                  steps=tuple(steps))


def test_photon_balance_of_a_pumped_quasi_three_level_amplifier_closes():
    result = simulate(pumped_config())
    s, rec = result.summary, result.media["crystal"]
    dx = result.x_m[1] - result.x_m[0]
    # absorbed pump photons (the pump's own propagation)
    absorbed = s["absorbed_pump_power_W"] / photon_energy(940e-9)
    # signal photons added: from the powers of the steps (the beam's propagation)
    losses = sum(st["passive_loss_W"] + st["clipped_power_W"] for st in s["steps"])
    added = (s["output_power_W"] - s["input_power_W"] + losses) / photon_energy(1030e-9)
    # spontaneous decays: ∫ N2/τ dV from the saturated gain map, N2 = (g + σa·Nt)/(σe + σa), inside the rod
    inside = np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= 1.2e-3
    n2 = (rec.gain_final_per_m + 1.1e-25 * NT) / (2.1e-24 + 1.1e-25) * inside
    decays = n2.sum() * rec.slice_length_m * dx * dx / 951e-6
    assert abs(absorbed - added - decays) / absorbed < 1e-6
    assert abs(s["photon_balance_error"]) < 1e-6
    assert s["output_power_W"] > 1.5 * s["input_power_W"]          # it amplifies
    assert 0 < s["optical_efficiency"] == pytest.approx((s["output_power_W"] - s["input_power_W"]) / 120.0)
    # the unpumped rim absorbs the signal (quasi-three-level): negative gain there
    assert rec.gain_final_per_m[:, inside & ~(np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= 0.7e-3)].min() < 0


def test_photon_balance_with_a_quantum_efficiency_below_one():
    s = simulate(pumped_config(quantum_efficiency=0.9)).summary
    m = s["media"][0]
    assert m["pump_photons_lost_to_quantum_efficiency_per_s"] > 0.05 * m["absorbed_pump_photons_per_s"]
    assert abs(s["photon_balance_error"]) < 1e-6


def test_signal_extraction_raises_pump_absorption():
    """The signal empties the upper level, so the bleached crystal absorbs more pump with the signal on."""
    weak = simulate(pumped_config(seed_power_W=1e-6)).summary
    strong = simulate(pumped_config(seed_power_W=30.0)).summary
    assert strong["absorbed_pump_power_W"] > 1.02 * weak["absorbed_pump_power_W"]


def test_weak_pump_follows_beer_lambert_with_a_back_reflector():
    """Four-level medium with a given absorption coefficient (ground state undepleted): exactly
    P_abs = P·(1 − e^{−αL})·(1 + R·e^{−αL})."""
    four = make_material(pump_absorption_per_m=350.0, pump_wavelength_m=808e-9)
    config = pumped_config(material=four, pump_power_W=5.0, seed_power_W=1e-3, back_reflectance=0.7,
                           absorption_per_m=350.0, pump_wavelength_m=808e-9)
    s = simulate(config).summary
    t = np.exp(-350.0 * 6e-3)
    assert s["absorbed_pump_power_W"] == pytest.approx(5.0 * (1 - t) * (1 + 0.7 * t), rel=1e-12)


def test_pump_bleaching_matches_solve_ivp():
    """Pump alone (signal negligible), flat pump, one pass: dΦ/dz = −(α0 − (σa,p + σe,p)·N2)·Φ with
    N2 = Nt·σa,p·Φ/((σa,p + σe,p)·Φ + 1/τ), integrated by solve_ivp. This is the saturable form
    dΦ/dz = −α0·Φ/(1 + (σa,p + σe,p)·τ·Φ), which the voxel scheme solves exactly per slice (the same
    identity as the Lambert-W form of the signal), so even 3 slices agree to the iteration tolerance."""
    config = pumped_config(pump_power_W=150.0, seed_power_W=1e-9, back_reflectance=0.0, slices=3, points=16)
    result = simulate(config)
    m = result.summary["media"][0]
    sap, sep, tau = 8.0e-25, 1.6e-25, 951e-6
    pump = result.media["crystal"].pump_intensity_W_m2
    ix = np.argmin(np.abs(result.x_m))
    phi0 = 150.0 / photon_energy(940e-9) / (np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= 0.6e-3).sum() / \
        (result.x_m[1] - result.x_m[0]) ** 2

    def rhs(z, phi):
        n2 = NT * sap * phi / ((sap + sep) * phi + 1.0 / tau)
        return -(sap * NT - (sap + sep) * n2) * phi

    sol = solve_ivp(rhs, (0.0, 6e-3), [phi0], method="DOP853", rtol=1e-11, atol=1e-6 * phi0)
    transmitted_fraction = m["pump_power_transmitted_W"] / 150.0
    assert transmitted_fraction == pytest.approx(sol.y[0, -1] / phi0, rel=1e-6)      # measured 5e-8
    unbleached = np.exp(-sap * NT * 6e-3)
    assert transmitted_fraction > 1.3 * unbleached                  # bleaching matters at this pump
    assert pump[0, ix, ix] > pump[-1, ix, ix]


def test_side_pumped_small_signal_gain_four_level():
    """Four-level, no ground-state depletion: g0 = σe·η·R·τ, R = absorbed pump photons per volume and time
    (the steady state of dN2/dt = η·R − N2/τ; W. Koechner, Solid-State Laser Engineering, Springer)."""
    four = make_material(pump_wavelength_m=808e-9)
    config = pumped_config(material=four, geometry="side", back_reflectance=0.0, pump_power_W=40.0,
                           seed_power_W=1e-6, absorbed_fraction=0.6, quantum_efficiency=0.9, pump_wavelength_m=808e-9)
    result = simulate(config)
    m = result.summary["media"][0]
    inside = np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= 0.6e-3
    volume = inside.sum() * (result.x_m[1] - result.x_m[0]) ** 2 * 6e-3
    rate = 40.0 * 0.6 / photon_energy(808e-9) / volume
    g0 = 2.8e-23 * 0.9 * rate * 230e-6
    assert m["small_signal_gain_on_axis"] == pytest.approx(np.exp(g0 * 6e-3), rel=1e-12)
    assert m["absorbed_pump_power_W"] == pytest.approx(40.0 * 0.6, rel=1e-12)


def coupled_single_pass(slices, quantum_efficiency=1.0):
    """(output intensity, transmitted pump fraction) of the code and of solve_ivp (docstring below)."""
    eta = quantum_efficiency
    config = pumped_config(pump_power_W=120.0, seed_power_W=3.0, back_reflectance=0.0, passes=1, slices=slices,
                           points=16, quantum_efficiency=eta)
    config = dataclasses.replace(config, seed=dataclasses.replace(config.seed, profile="flat", diameter_m=1.2e-3))
    result = simulate(config)
    sap, sep, sa, se, tau = 8.0e-25, 1.6e-25, 1.1e-25, 2.1e-24, 951e-6
    hp, hs = photon_energy(940e-9), photon_energy(1030e-9)
    pixels = (np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= 0.6e-3).sum() * (result.x_m[1] - result.x_m[0]) ** 2
    ix = np.argmin(np.abs(result.x_m - 1e-6))
    i_in = result.seed_intensity_W_m2[ix, ix]
    phi0 = 120.0 / hp / pixels

    def rhs(z, y):
        phi_p, i_s = y
        phi_s = i_s / hs
        n2 = NT * (eta * sap * phi_p + sa * phi_s) / ((eta * sap + sep) * phi_p + (sa + se) * phi_s + 1.0 / tau)
        return [-(sap * (NT - n2) - sep * n2) * phi_p, (se * n2 - sa * (NT - n2)) * i_s]

    sol = solve_ivp(rhs, (0.0, 6e-3), [phi0, i_in], method="DOP853", rtol=1e-11, atol=[1e-6 * phi0, 1e-9 * i_in])
    code = (result.steps[0].intensity_W_m2[ix, ix], result.summary["media"][0]["pump_power_transmitted_W"] / 120.0)
    return code, (sol.y[1, -1], sol.y[0, -1] / phi0)


@pytest.mark.parametrize("slices", [3, 24])
def test_pumped_single_pass_matches_the_coupled_rate_equations(slices):
    """Flat pump and flat signal, both forward, one pass: the pump and the signal along z from the
    steady-state rate equation (Giles & Desurvire 1991, bulk form), integrated by solve_ivp:
    dΦp/dz = −(σa,p·N1 − σe,p·N2)·Φp, dIs/dz = (σe·N2 − σa·N1)·Is,
    N2 = Nt·(σa,p·Φp + σa·Φs)/((σa,p + σe,p)·Φp + (σa + σe)·Φs + 1/τ). Each beam's ln gain over a slice
    is linear in ∫N2 dz, and ∫N2 dz/τ is fixed by the photons absorbed (the integral form of A. A. M.
    Saleh et al., IEEE Photon. Technol. Lett. 2, 714 (1990)), so one density per voxel is exact at any
    slice count (measured 6e-11, the iteration tolerance)."""
    (out, pump), (out_ref, pump_ref) = coupled_single_pass(slices)
    assert out == pytest.approx(out_ref, rel=1e-8)
    assert pump == pytest.approx(pump_ref, rel=1e-8)


def test_quantum_efficiency_below_one_converges_as_the_square_of_the_slice_length():
    """With η < 1 and a pump emission cross-section the pump is taken at its slice mean: second order
    (same coupled equations with η·σa,p in the pump's creation term; solve_ivp reference)."""
    errors = []
    for slices in (12, 24):
        (out, _), (out_ref, _) = coupled_single_pass(slices, quantum_efficiency=0.8)
        errors.append(abs(out / out_ref - 1.0))
    assert errors[1] < 2e-6                                  # measured 7.6e-7 at 24 slices
    assert 3.5 < errors[0] / errors[1] < 4.5
