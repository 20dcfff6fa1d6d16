"""Pumping by the rate equations with bleaching, against references written out here.

References
----------
Rate equations of a quasi-three-level medium with a propagating pump (T. Y. Fan and R. L. Byer, IEEE
J. Quantum Electron. 23, 605 (1987), from memory — verify):
dN2/dt = (η·σa,p·(Nt − N2) − σe,p·N2)·Φ − N2/τ, dΦ/dz = −(σa,p·(Nt − N2) − σe,p·N2)·Φ.
Optically thin, flat pump: N2(t) = N∞·(1 − exp(−t/τeff)), 1/τeff = 1/τ + (η·σa,p + σe,p)·Φ,
N∞ = η·σa,p·Φ·Nt·τeff (the same equation with Φ constant). The method-of-lines references integrate
the equations in time with scipy.integrate.solve_ivp on a fine grid along z, the pump by the
trapezoid rule (scipy.integrate.cumulative_trapezoid), independently of the code's slice scheme.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from physics_reference import make_config, make_material, make_medium, pass_step, photon_energy
from scipy.integrate import cumulative_trapezoid, solve_ivp

from ampmodel import load_config, simulate
from ampmodel.description import Pump, Seed
from ampmodel.kernels import beam_shapes
from ampmodel.kernels import pump_rates as pr
from ampmodel.media import gain_maps, pumping

# Yb:YAG-like numbers (from memory — verify): 2 at.%, σa,p = 0.8e-20 cm², σe,p = 0.16e-20 cm² at 940 nm.
NT, SAP, SEP, TAU = 2.76e26, 0.8e-24, 0.16e-24, 0.951e-3
SIGMA_E, SIGMA_A = 2.1e-24, 0.11e-24


def mol_reference(flux0: np.ndarray, length_m: float, duration_s: float, back_reflectance: float = 0.0,
                  eta: float = 1.0, cells: int = 240, n2_start: np.ndarray | None = None) -> np.ndarray:
    """N2 (cells, C) at the end of a pump pulse by the method of lines (module docstring): the pump
    forward from z = 0 and, reflected at z = L, back; the exponent ∫α dz by the trapezoid rule from the
    face (α taken constant over the first half cell)."""
    z = (np.arange(cells) + 0.5) * length_m / cells
    half = 0.5 * length_m / cells
    c = flux0.size

    def rhs(_, y):
        n2 = y.reshape(cells, c)
        alpha = SAP * (NT - n2) - SEP * n2
        depth = cumulative_trapezoid(alpha, z, axis=0, initial=0.0) + alpha[0] * half
        total = depth[-1] + alpha[-1] * half
        flux = flux0 * np.exp(-depth)
        if back_reflectance:
            flux = flux + back_reflectance * flux0 * np.exp(-total) * np.exp(-(total - depth))
        return ((eta * SAP * (NT - n2) - SEP * n2) * flux - n2 / TAU).ravel()

    start = np.zeros(cells * c) if n2_start is None else n2_start.ravel()
    sol = solve_ivp(rhs, (0.0, duration_s), start, method="RK45", rtol=1e-9, atol=1e12)
    return sol.y[:, -1].reshape(cells, c)


def slice_means(values: np.ndarray, slices: int) -> np.ndarray:
    return values.reshape(slices, -1, values.shape[-1]).mean(axis=1)


@pytest.mark.parametrize("reflect", [0.0, 0.9])
def test_pump_pulse_matches_the_method_of_lines(reflect):
    """A bleaching end pump (two flux levels): the kernel's slices against the fine reference's mean
    over each slice, at the default time steps (1e-4) and with fine steps (1e-6: the pump's exact
    passage through each slice leaves no error of its own worth the name, even at 6 slices)."""
    flux0 = np.array([2e8, 5e7]) / photon_energy(940e-9)             # 20 and 5 kW/cm²
    length, tp = 6e-3, 1e-3
    ref = mol_reference(flux0, length, tp, reflect, cells=480)
    for nz in (6, 12, 24):
        for steps, tolerance in ((None, 1e-4), (1000, 1e-6)):
            out = pr.pump_interval(np.zeros((nz, 2)), flux0, length / nz, tp, SAP * NT, SAP + SEP, SAP + SEP, 1.0,
                                   TAU, reflect, steps=steps)
            error = float(np.max(np.abs(out.n2 - slice_means(ref, nz)))) / float(ref.max())
            assert error < tolerance, (nz, steps, error)
    assert float(ref.max()) > 0.2 * NT                                # bleached: not a small-signal case


def test_time_steps_converge_to_the_exact_time_solution():
    """The same slices integrated in time by solve_ivp: the midpoint steps to 1e-4 at their default,
    and second order in the step."""
    flux0 = np.array([2e8]) / photon_energy(940e-9)
    nz, length, tp = 24, 6e-3, 1e-3
    dz = length / nz

    def rhs(_, y):
        mean, _, _ = pr.march(SAP * NT - (SAP + SEP) * y[:, None], flux0, dz, 0.9)
        return (SAP * NT * mean[:, 0] - ((SAP + SEP) * mean[:, 0] + 1 / TAU) * y)

    exact = solve_ivp(rhs, (0.0, tp), np.zeros(nz), method="DOP853", rtol=1e-12, atol=1e8).y[:, -1]
    errs = {}
    for steps in (None, 40, 80):
        n2 = pr.pump_interval(np.zeros((nz, 1)), flux0, dz, tp, SAP * NT, SAP + SEP, SAP + SEP, 1.0, TAU, 0.9,
                              steps=steps).n2[:, 0]
        errs[steps] = float(np.max(np.abs(n2 - exact)) / exact.max())
    assert errs[None] < 1e-4
    assert 3.5 < errs[40] / errs[80] < 4.5


def test_optically_thin_pump_follows_the_closed_form():
    """A flat side pump (no propagation): N2(t) = N∞·(1 − exp(−t/τeff)) in every voxel, exactly."""
    flux = 3e26
    t = 0.7e-3
    out = pr.pump_interval(np.zeros((3, 1)), np.array([flux]), 1e-3, t, SAP * NT, SAP + SEP, 0.9 * SAP + SEP, 0.9,
                           TAU, side=True)
    tau_eff = 1.0 / (1.0 / TAU + (0.9 * SAP + SEP) * flux)
    expected = 0.9 * SAP * flux * NT * tau_eff * -math.expm1(-t / tau_eff)
    np.testing.assert_allclose(out.n2, expected, rtol=1e-13)
    # ions created less ions decayed is what is left
    np.testing.assert_allclose(out.created - out.decayed, out.n2, rtol=1e-12)


def test_a_long_pump_pulse_reaches_the_steady_state():
    flux0 = np.array([2e8, 3e7]) / photon_energy(940e-9)
    nz, length = 24, 6e-3
    steady, _, _, _ = pr.steady_columns(flux0, length / nz, nz, SAP * NT, SAP + SEP, SAP + SEP, 1.0, TAU, 0.9)
    long = pr.pump_interval(np.zeros((nz, 2)), flux0, length / nz, 30 * TAU, SAP * NT, SAP + SEP, SAP + SEP, 1.0,
                            TAU, 0.9)
    np.testing.assert_allclose(long.n2, steady, rtol=1e-9)
    assert float(steady.max()) / NT < SAP / (SAP + SEP)           # the bleaching limit is never passed


def yb_medium(pump: Pump, slices: int = 24):
    mat = make_material(name="Yb:YAG-like", wavelength_m=1030e-9, emission_cross_section_m2=SIGMA_E,
                        absorption_cross_section_m2=SIGMA_A, upper_lifetime_s=TAU, pump_wavelength_m=940e-9,
                        pump_absorption_cross_section_m2=SAP, pump_emission_cross_section_m2=SEP, doping_per_m3=NT)
    return make_medium(mat, length_m=6e-3, diameter_m=4e-3, slices=slices, pump=pump, doping_per_m3=NT)


def test_pulsed_and_cw_pumping_agree_in_the_steady_state():
    """A continuous pump in a pulsed run, a pump pulse much longer than the lifetime, and the cw path's
    state with the pump alone: one gain map."""
    common = dict(geometry="end", wavelength_m=940e-9, profile="gaussian", diameter_m=3e-3, back_reflectance=0.9,
                  absorption_per_m=SAP * NT)
    seed = Seed(wavelength_m=1030e-9, energy_J=1e-6, duration_s=1e-9, profile="gaussian", diameter_m=2e-3)
    cont = yb_medium(Pump(energy_J=None, duration_s=None, power_W=400.0, continuous=True, **common))
    longp = yb_medium(Pump(energy_J=400.0 * 30 * TAU, duration_s=30 * TAU, **common))
    runs = [simulate(make_config(m, seed, [pass_step(0)], points=16, width_m=6e-3, time_slices=4))
            for m in (cont, longp)]
    maps = [r.media["rod"].gain_initial_per_m for r in runs]
    cw_config = dataclasses.replace(make_config(cont, dataclasses.replace(seed, energy_J=None, power_W=1e-3,
                                                                          duration_s=None),
                                                [pass_step(0)], points=16, width_m=6e-3, time_slices=1), mode="cw")
    cw_run = simulate(cw_config)
    cw = cw_run.media["rod"].gain_initial_per_m
    scale = float(np.abs(maps[0]).max())
    assert np.max(np.abs(maps[1] - maps[0])) < 1e-8 * scale
    assert np.max(np.abs(cw - maps[0])) < 1e-6 * scale
    # the same populations: the largest N2/Nt agrees, and stays below the bleaching limit σa,p/(σa,p + σe,p)
    fractions = [r.summary["media"][0]["upper_state_fraction_max"] for r in (*runs, cw_run)]
    assert fractions == pytest.approx([fractions[0]] * 3, rel=1e-6)
    assert 0.1 < fractions[0] < SAP / (SAP + SEP)


def test_no_pump_excites_more_ions_than_the_doping_holds():
    """A four-level medium with its doping under a pump far beyond saturation: N2 stays below Nt and
    the stored energy below Nt·hν·V (every ion excited)."""
    nt = 1.38e26                                                     # Nd:YAG-like, 1 at.%
    mat = make_material(pump_wavelength_m=808e-9, pump_absorption_cross_section_m2=7e-24, doping_per_m3=nt)
    pump = Pump(geometry="end", energy_J=50.0, duration_s=200e-6, wavelength_m=808e-9, profile="flat")
    medium = make_medium(mat, length_m=0.02, diameter_m=3e-3, slices=16, pump=pump, doping_per_m3=nt)
    seed = Seed(wavelength_m=1064e-9, energy_J=1e-6, duration_s=1e-9, profile="gaussian", diameter_m=2e-3)
    res = simulate(make_config(medium, seed, [pass_step(0)], points=16, width_m=4e-3, time_slices=4))
    entry = res.summary["media"][0]
    assert 0.9 < entry["upper_state_fraction_max"] < 1.0
    x = beam_shapes.pixel_centres(16, 4e-3)
    volume = beam_shapes.aperture_mask(x, x, "round", 3e-3).sum() * (x[1] - x[0]) ** 2 * 0.02
    assert entry["stored_energy_J"] < nt * photon_energy(1064e-9) * volume
    assert all(math.isfinite(v) for v in (entry["stored_energy_J"], entry["small_signal_gain_on_axis"]))


def test_four_pass_yb_yag_example_against_the_rate_equations(monkeypatch):
    """The shipped example: its gain map against a method-of-lines solution of every distinct pump
    column (the flux entering each), and its output with that reference map within 2 %."""
    config = load_config("configs/four_pass_yb_yag.toml", ["grid.points=48", "medium.disc.slices=12"])
    medium = config.media[0]
    x = beam_shapes.pixel_centres(config.grid.points, config.grid.width_m)
    mask = beam_shapes.aperture_mask(x, x, medium.aperture, medium.diameter_m)
    model = pumping.build_pump(medium, x, x, mask)
    distinct, which = np.unique(model.flux_in[mask], return_inverse=True)
    ref = slice_means(mol_reference(distinct, medium.length_m, medium.pump.duration_s, 0.9, cells=120), 12)
    nt = medium.doping_per_m3
    gain_ref = np.zeros((12,) + mask.shape)
    gain_ref[:, mask] = ((SIGMA_E + SIGMA_A) * ref - SIGMA_A * nt)[:, which]
    built = gain_maps.gain_map(medium, x, x)
    assert np.max(np.abs(built.gain_per_m - gain_ref)) < 3e-3 * float(np.abs(gain_ref).max())
    out = simulate(config).summary["output_energy_J"]
    real = gain_maps.gain_map
    monkeypatch.setattr(gain_maps, "gain_map", lambda *a: dataclasses.replace(real(*a), gain_per_m=gain_ref.copy()))
    out_ref = simulate(config).summary["output_energy_J"]
    assert out == pytest.approx(out_ref, rel=0.02)


def test_a_pump_beyond_any_representable_gain_is_refused_not_infinite():
    """A pump that would raise a column's ln G past 700 is bad input (exit 2 through the command line):
    amplified spontaneous emission would clamp such a gain long before; nothing reaches inf."""
    from ampmodel.config.checks import ConfigError
    mat = make_material(emission_cross_section_m2=1e-22, pump_wavelength_m=808e-9,
                        pump_absorption_cross_section_m2=1e-23, doping_per_m3=1e27)
    pump = Pump(geometry="end", energy_J=500.0, duration_s=200e-6, wavelength_m=808e-9, profile="flat")
    medium = make_medium(mat, length_m=0.1, diameter_m=3e-3, slices=16, pump=pump, doping_per_m3=1e27)
    seed = Seed(wavelength_m=1064e-9, energy_J=1e-6, duration_s=1e-9, profile="gaussian", diameter_m=2e-3)
    with pytest.raises(ConfigError, match=r"medium rod: the pump raises the single-pass small-signal gain to exp\("):
        simulate(make_config(medium, seed, [pass_step(0)], points=16, width_m=4e-3, time_slices=4))


def mol_both_ends(flux0: np.ndarray, length_m: float, duration_s: float, cells: int = 480) -> np.ndarray:
    """N2 (cells, C) under a pump of ``flux0`` entering at each face, by the method of lines (the module
    docstring): the forward and the backward pump each attenuated by ∫α dz from its own face."""
    z = (np.arange(cells) + 0.5) * length_m / cells
    half = 0.5 * length_m / cells
    c = flux0.size

    def rhs(_, y):
        n2 = y.reshape(cells, c)
        alpha = SAP * (NT - n2) - SEP * n2
        depth = cumulative_trapezoid(alpha, z, axis=0, initial=0.0) + alpha[0] * half
        back = cumulative_trapezoid(alpha[::-1], z, axis=0, initial=0.0)[::-1] + alpha[-1] * half
        flux = flux0 * (np.exp(-depth) + np.exp(-back))
        return ((SAP * (NT - n2) - SEP * n2) * flux - n2 / TAU).ravel()

    sol = solve_ivp(rhs, (0.0, duration_s), np.zeros(cells * c), method="RK45", rtol=1e-9, atol=1e12)
    return sol.y[:, -1].reshape(cells, c)


def test_a_pump_from_both_ends_matches_the_method_of_lines():
    """Two counter-propagating pumps, each bleaching the medium for the other: the kernel's slices
    against the fine reference; a pump from z = L alone is the forward pump mirrored."""
    flux0 = np.array([1e8, 2.5e7]) / photon_energy(940e-9)
    length, tp, nz = 6e-3, 1e-3, 24
    ref = mol_both_ends(flux0, length, tp)
    out = pr.pump_interval(np.zeros((nz, 2)), flux0, length / nz, tp, SAP * NT, SAP + SEP, SAP + SEP, 1.0, TAU,
                           direction="both")
    error = float(np.max(np.abs(out.n2 - slice_means(ref, nz)))) / float(ref.max())
    assert error < 1e-4, error
    np.testing.assert_allclose(out.n2, out.n2[::-1], rtol=1e-12)           # symmetric, as the pumps are
    assert float(ref.max()) > 0.2 * NT
    # photons: absorbed plus transmitted is what entered at the two faces
    np.testing.assert_allclose(out.absorbed + out.transmitted, 2 * flux0 * tp, rtol=1e-12)
    forward = pr.pump_interval(np.zeros((nz, 2)), flux0, length / nz, tp, SAP * NT, SAP + SEP, SAP + SEP, 1.0, TAU,
                               back_reflectance=0.5)
    backward = pr.pump_interval(np.zeros((nz, 2)), flux0, length / nz, tp, SAP * NT, SAP + SEP, SAP + SEP, 1.0, TAU,
                                back_reflectance=0.5, direction="backward")
    np.testing.assert_allclose(backward.n2, forward.n2[::-1], rtol=1e-12)


def test_a_rod_pumped_from_both_ends_through_a_whole_run():
    """Runs with direction = "both", "forward" and "backward": the summary's pump energy is both ends'
    (the description holds the total), photons balance, the map of a pump from both ends is symmetric
    along z, and a pump from z = L builds the forward pump's map mirrored."""
    common = dict(geometry="end", wavelength_m=940e-9, profile="flat", diameter_m=3e-3, duration_s=1e-3,
                  absorption_per_m=SAP * NT)
    seed = Seed(wavelength_m=1030e-9, energy_J=1e-6, duration_s=1e-9, profile="gaussian", diameter_m=2e-3)
    runs = {}
    for direction in ("both", "forward", "backward"):
        medium = yb_medium(Pump(energy_J=1.2, direction=direction, **common))
        runs[direction] = simulate(make_config(medium, seed, [pass_step(0)], points=16, width_m=6e-3, time_slices=4))
    both = runs["both"].summary["media"][0]
    assert both["pump_energy_J"] == pytest.approx(1.2)
    assert abs(both["pump_photon_balance_error"]) < 1e-9
    assert both["absorbed_pump_energy_J"] + both["transmitted_pump_energy_J"] == pytest.approx(1.2, rel=1e-9)
    maps = {k: r.media["rod"].gain_initial_per_m for k, r in runs.items()}
    np.testing.assert_allclose(maps["both"], maps["both"][::-1], rtol=1e-10, atol=1e-12 * np.abs(maps["both"]).max())
    np.testing.assert_allclose(maps["backward"], maps["forward"][::-1], rtol=1e-10,
                               atol=1e-12 * np.abs(maps["forward"]).max())
    assert not np.allclose(maps["forward"], maps["forward"][::-1], rtol=1e-2)   # the one-end map is not
