"""Energy bookkeeping, result files, B-integral, pumping and stored energy.

References
----------
Conservation of energy: input + extracted (Fsat·∫ Δg dV) = output + clipped + passive losses.
B-integral (W. Koechner, Solid-State Laser Engineering): B = (2π/λ0)·∫ n2·I dz; flat beam, square pulse, small signal:
B = k0·n2·I0·(G0 − 1)/g0.
Storage efficiency of a square pump pulse: dN/dt = R − N/τ (W. Koechner, Solid-State Laser
Engineering, Springer), integrated with scipy.integrate.solve_ivp.
End pumping: Beer–Lambert absorption exp(−α z), with a back reflector a second pass.
Nd:YAG saturation fluence: Fsat = hν/σe ≈ 0.67 J/cm² (Koechner, Solid-State Laser Engineering,
handbook value; from memory — verify).
"""
from __future__ import annotations

import json

import h5py
import numpy as np
import pytest
from physics_reference import (
    aperture_step,
    disc,
    loss_step,
    make_config,
    make_material,
    make_medium,
    pass_step,
    photon_energy,
    radius,
)
from scipy.integrate import solve_ivp

from ampmodel.description import Pump, Seed
from ampmodel.media import gain_maps
from ampmodel.simulation import simulate

MATERIAL = make_material()
FSAT = photon_energy(MATERIAL.wavelength_m) / MATERIAL.emission_cross_section_m2
POINTS, WIDTH = 48, 6e-3
PIXEL_AREA = (WIDTH / POINTS) ** 2


@pytest.fixture(scope="module")
def lossy_run():
    """A clipping aperture, a pass with passive loss, a lumped loss, a second (reverse) pass."""
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=5e-3, duration_s=10e-9, profile="gaussian",
                diameter_m=3e-3)
    medium = make_medium(MATERIAL, small_signal_gain=6.0, diameter_m=3e-3, slices=10, loss_per_m=0.5)
    steps = [aperture_step(0, 3.5e-3), pass_step(1), loss_step(2, 0.7), pass_step(3, reverse=True)]
    return simulate(make_config(medium, seed, steps, points=POINTS, width_m=WIDTH, time_slices=24))


def test_energy_balance_with_clipping_and_losses(lossy_run):
    res = lossy_run
    s = res.summary
    assert abs(s["energy_balance_error"]) < 1e-12
    # the run exercises every loss channel, each far above the 1e-12 bound
    assert sum(st["clipped_energy_J"] for st in s["steps"]) > 0.05 * s["input_energy_J"]
    assert s["steps"][1]["passive_loss_J"] > 1e-3 * s["input_energy_J"]
    assert s["steps"][2]["passive_loss_J"] == pytest.approx(0.3 * s["steps"][2]["energy_in_J"], rel=1e-13)

    # By hand from the step list and the gain maps: extracted = Fsat·Σ (g_initial − g_final)·dV.
    rec = res.media["rod"]
    extracted = FSAT * rec.slice_length_m * PIXEL_AREA * float((rec.gain_initial_per_m - rec.gain_final_per_m).sum())
    lost = sum(st["clipped_energy_J"] + st["passive_loss_J"] for st in s["steps"])
    e_in = 5e-3                                     # the seed is normalised to its energy on the grid
    e_out = float(res.steps[-1].fluence_J_m2.sum() * PIXEL_AREA)
    assert s["input_energy_J"] == pytest.approx(e_in, rel=1e-13)
    assert abs((e_in + extracted - e_out - lost) / e_out) < 1e-12
    # the chain of steps: each step starts with what the last one left
    energies = [e_in] + [st["energy_out_J"] for st in s["steps"]]
    for st, before in zip(s["steps"], energies[:-1], strict=True):
        assert st["energy_in_J"] == pytest.approx(before, rel=1e-13)
    for st in s["steps"]:
        if st["kind"] != "pass":                              # no gain: out = in − losses
            assert st["energy_in_J"] - st["energy_out_J"] == pytest.approx(
                st["clipped_energy_J"] + st["passive_loss_J"], rel=1e-12)


def test_summary_agrees_with_hdf5(lossy_run, tmp_path):
    res = lossy_run
    res.save(tmp_path, plots=False)
    summary = json.loads((tmp_path / "summary.json").read_text())
    with h5py.File(tmp_path / "result.h5", "r") as f:
        x, y = f["grid/x"][()], f["grid/y"][()]
        area = (x[1] - x[0]) * (y[1] - y[0])
        assert area == pytest.approx(PIXEL_AREA, rel=1e-12)
        names = sorted(f["steps"])
        assert names == [f"{i:03d}" for i in range(len(summary["steps"]))]
        step_fluence = [f[f"steps/{n}/fluence"][()] for n in names]
        seed_fluence = f["seed/fluence"][()]
        # every dataset carries its units
        units = {}
        f.visititems(lambda name, obj: units.__setitem__(name, obj.attrs.get("units"))
                     if isinstance(obj, h5py.Dataset) else None)
        assert units and all(units.values()), units
        assert units["grid/x"] == "m" and units["grid/t"] == "s"
        assert units["seed/fluence"] == "J/m^2" and units["steps/000/fluence"] == "J/m^2"
        assert units["media/rod/gain_initial"] == "1/m"
        g0 = f["media/rod/gain_initial"]
        assert g0.attrs["saturation_fluence"] == pytest.approx(FSAT, rel=1e-14)
        slice_length = g0.attrs["slice_length"]
        stored = FSAT * slice_length * area * np.clip(g0[()], 0.0, None).sum()

    assert summary["output_energy_J"] == pytest.approx(step_fluence[-1].sum() * area, rel=1e-12)
    for entry, fl in zip(summary["steps"], step_fluence, strict=True):
        assert entry["energy_out_J"] == pytest.approx(fl.sum() * area, rel=1e-12)
    assert summary["input_energy_J"] == pytest.approx(seed_fluence.sum() * area, rel=1e-12)
    assert summary["stored_energy_J"] == pytest.approx(stored, rel=1e-12)
    # the gain exceeds the losses at every slice of the last pass, so the largest fluence is that of a
    # step end (here the output); J/m² -> J/cm² is the factor 1e-4
    peak = max([seed_fluence.max()] + [fl.max() for fl in step_fluence]) / 1e4
    assert summary["peak_fluence_J_cm2"] == pytest.approx(peak, rel=1e-12)
    assert peak == pytest.approx(step_fluence[-1].max() / 1e4, rel=1e-12)


def test_b_integral_small_signal():
    # B-integral (Koechner, above): flat beam, square pulse, small signal: I(z) = I0·exp(g0 z), so
    # B = k0·n2·∫ I dz = k0·n2·I0·(G0 − 1)/g0. At a seed of 1e-6·Fsat saturation changes I by
    # ~G0·1e-6 at most (the log-mean per slice is exact for exponential growth), so 1e-5 is a tight
    # bound (a missing factor is O(1) off, an arithmetic instead of a logarithmic mean 7e-3 here).
    n2, g0_total, length, duration = 7e-20, 10.0, 0.05, 10e-9
    material = make_material(n2_m2_W=n2)
    n, width, diameter = 16, 4e-3, 2e-3
    inside = disc(n, width, diameter)
    f0 = 1e-6 * FSAT
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=f0 * (width / n) ** 2 * inside.sum(),
                duration_s=duration, shape="flat", profile="flat", diameter_m=diameter)
    medium = make_medium(material, length_m=length, small_signal_gain=g0_total, diameter_m=3e-3, slices=8)
    res = simulate(make_config(medium, seed, [pass_step(0)], points=n, width_m=width, time_slices=4))
    k0 = 2 * np.pi / MATERIAL.wavelength_m
    g0 = np.log(g0_total) / length
    expected = k0 * n2 * (f0 / duration) * (g0_total - 1.0) / g0
    assert res.summary["b_integral_rad"] == pytest.approx(expected, rel=1e-5)
    assert res.summary["steps"][0]["b_integral_rad"] == pytest.approx(expected, rel=1e-5)
    # zero n2: no B-integral
    res0 = simulate(make_config(make_medium(MATERIAL, length_m=length, small_signal_gain=g0_total,
                                            diameter_m=3e-3, slices=8), seed, [pass_step(0)],
                                points=n, width_m=width, time_slices=4))
    assert res0.summary["b_integral_rad"] == 0.0


@pytest.mark.parametrize("ratio", [0.01, 0.5, 1.0, 3.0])
def test_storage_efficiency_against_rate_equation(ratio):
    # Koechner, Solid-State Laser Engineering: dN/dt = R − N/τ, N(0) = 0, square pump of length tp;
    # the efficiency is N(tp)/(R·tp). solve_ivp at rtol 1e-12 is good to ~1e-11.
    tau = 230e-6
    tp = ratio * tau
    rate = 1.0
    sol = solve_ivp(lambda t, n: rate - n / tau, (0.0, tp), [0.0], method="DOP853", rtol=1e-12, atol=1e-20)
    assert sol.success
    expected = sol.y[0, -1] / (rate * tp)
    assert gain_maps.storage_efficiency(tau, tp) == pytest.approx(expected, rel=1e-8)


def _end_pump(**kw) -> Pump:
    base = dict(geometry="end", energy_J=0.2, duration_s=200e-6, wavelength_m=808e-9, profile="gaussian",
                diameter_m=4e-3, absorption_per_m=300.0, transfer_efficiency=0.9, quantum_efficiency=0.95)
    base.update(kw)
    return Pump(**base)


def _pumped_run(pump: Pump, points: int = POINTS, width: float = 12e-3, slices: int = 10):
    medium = make_medium(MATERIAL, length_m=10e-3, diameter_m=4e-3, slices=slices, pump=pump)
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=1e-9, duration_s=10e-9, diameter_m=2e-3)
    return simulate(make_config(medium, seed, [pass_step(0)], points=points, width_m=width, time_slices=4))


def _inside_fraction(points: int, width: float, pump_diameter: float, aperture: float) -> float:
    """Discrete fraction of a Gaussian pump profile exp(−2r²/w²) inside the clear aperture."""
    r, _ = radius(points, width)
    profile = np.exp(-2.0 * (r / (pump_diameter / 2)) ** 2)
    return float(profile[r <= aperture / 2].sum() / profile.sum())


@pytest.mark.parametrize("reflectance", [0.0, 0.8])
def test_end_pump_absorbed_energy(reflectance):
    # Beer–Lambert: E·η_transfer·(1 − exp(−αL))·(fraction of the pump inside the clear aperture);
    # a back reflector R adds E·η_transfer·R·exp(−αL)·(1 − exp(−αL))·fraction.
    pump = _end_pump(back_reflectance=reflectance)
    res = _pumped_run(pump)
    (entry,) = res.summary["media"]
    single = np.exp(-300.0 * 10e-3)                                         # exp(−αL)
    frac = _inside_fraction(POINTS, 12e-3, 4e-3, 4e-3)
    expected = 0.2 * 0.9 * frac * ((1 - single) + reflectance * single * (1 - single))
    assert entry["absorbed_pump_energy_J"] == pytest.approx(expected, rel=1e-12)
    # the discrete fraction approaches the continuous one, 1 − exp(−2a²/w²) with a = w (here 1 − e⁻²);
    # 48 pixels across 12 mm leave a ~1e-2 discretisation difference
    assert frac == pytest.approx(1 - np.exp(-2.0), rel=2e-2)

    # the z-profile of the inversion follows the slice integrals of the pump absorption exactly
    rec = res.media["rod"]
    z = np.linspace(0.0, 10e-3, 11)
    per_slice = (np.exp(-300.0 * z[:-1]) - np.exp(-300.0 * z[1:]))
    per_slice = per_slice + reflectance * single * (np.exp(-300.0 * (10e-3 - z[1:])) - np.exp(-300.0 * (10e-3 - z[:-1])))
    n2_per_slice = rec.gain_initial_per_m.sum(axis=(1, 2)) / MATERIAL.emission_cross_section_m2
    np.testing.assert_allclose(n2_per_slice / n2_per_slice.sum(), per_slice / per_slice.sum(), rtol=1e-12)


def test_four_level_stored_energy_from_pump():
    # stored = absorbed·η_storage·η_q·(λp/λs): each absorbed pump photon (hν_p) leaves η_storage·η_q
    # upper-state ions, each storing hν_s (four-level: Fsat·g = hν_s·N2).
    pump = _end_pump(back_reflectance=0.5)
    res = _pumped_run(pump)
    single = np.exp(-300.0 * 10e-3)
    absorbed = 0.2 * 0.9 * _inside_fraction(POINTS, 12e-3, 4e-3, 4e-3) * (1 - single) * (1 + 0.5 * single)
    tau, tp = MATERIAL.upper_lifetime_s, 200e-6
    eta_storage = tau / tp * (1 - np.exp(-tp / tau))      # Koechner (solved form, checked above)
    expected = absorbed * eta_storage * 0.95 * (808e-9 / 1064e-9)
    (entry,) = res.summary["media"]
    assert res.summary["stored_energy_J"] == pytest.approx(expected, rel=1e-12)
    assert entry["stored_energy_J"] == pytest.approx(expected, rel=1e-12)
    # energy check: stored = Σ N2·hν_s·V with N2 = g/σe
    rec = res.media["rod"]
    n2 = rec.gain_initial_per_m / MATERIAL.emission_cross_section_m2
    voxel = rec.slice_length_m * (12e-3 / POINTS) ** 2
    assert n2.sum() * voxel * photon_energy(1064e-9) == pytest.approx(expected, rel=1e-12)


def test_stored_energy_spec_is_reproduced():
    # A medium given by its stored energy: Fsat·∫ g dV over the clear aperture equals it (round-off).
    medium = make_medium(MATERIAL, diameter_m=4e-3, slices=7, stored_energy_J=0.123)
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=1e-6, duration_s=10e-9, diameter_m=2e-3)
    res = simulate(make_config(medium, seed, [pass_step(0)], points=32, width_m=WIDTH, time_slices=4))
    assert res.summary["stored_energy_J"] == pytest.approx(0.123, rel=1e-12)
    # and the gain is uniform over the clear aperture: ln G0 = E/(Fsat·A), A the aperture's pixel area
    inside = disc(32, WIDTH, 4e-3)
    rec = res.media["rod"]
    ln_g = rec.gain_initial_per_m.sum(axis=0) * rec.slice_length_m
    area = inside.sum() * (WIDTH / 32) ** 2
    np.testing.assert_allclose(ln_g[inside], 0.123 / (FSAT * area), rtol=1e-12)


def test_nd_yag_saturation_fluence():
    # Koechner's handbook value for Nd:YAG at 1064 nm: Fsat = hν/σe ≈ 0.67 J/cm² with σe = 2.8e-19 cm².
    nd_yag = make_material(name="Nd:YAG-like", wavelength_m=1064e-9, emission_cross_section_m2=2.8e-23)
    assert nd_yag.saturation_fluence_J_m2 * 1e-4 == pytest.approx(0.67, rel=1e-2)
    # exact: h·c/(λ·σe) from the CODATA constants, 0.6668 J/cm²
    assert nd_yag.saturation_fluence_J_m2 == pytest.approx(photon_energy(1064e-9) / 2.8e-23, rel=1e-14)
