"""The sliced solver against Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963), pixel by pixel.

Without passive loss and diffraction the slice maps compose exactly (FN with G1 then G2 is FN with
G1·G2; a pulse cut in time slices leaves with the same total as one slice), so the solver must agree
with the closed forms to round-off whatever the slice counts. The tolerances are therefore 1e-12
relative: about 1e3 float operations per pixel (12 z-slices x 32 time slices, plus the sums) cannot
account for more, while any modelling error (a wrong Fsat, gain update, slice order or time
weighting) shows up at the 1e-3 level or above.
"""
from __future__ import annotations

import numpy as np
import pytest
from physics_reference import (
    disc,
    fn_closed,
    fn_remaining_ln_gain,
    fn_slices,
    grid_axes,
    make_config,
    make_material,
    make_medium,
    max_rel,
    pass_step,
    photon_energy,
    pulse_weights,
    seed_map,
)
from scipy.integrate import quad

from ampmodel.beam.state import BeamState
from ampmodel.description import Pump, Seed
from ampmodel.pulsed.passes import MediumState, pass_medium
from ampmodel.simulation import simulate

G0 = 8.0
POINTS, WIDTH = 48, 6e-3          # 0.125 mm pixels
APERTURE = 4e-3                    # clips the Gaussian wings (r = 2 w: 3e-4 of the peak)
BEAM_W = 1e-3                      # 1/e² radius
PULSE = 10e-9
NT, NZ = 32, 12
TOL = 1e-12                        # exact composition: round-off only (see the module docstring)

MATERIAL = make_material()                                            # Nd:YAG-like, four-level
FSAT = photon_energy(MATERIAL.wavelength_m) / MATERIAL.emission_cross_section_m2


def gaussian_seed(peak_over_fsat: float = 1.0, shape: str = "gaussian") -> Seed:
    """Gaussian beam whose peak fluence is ``peak_over_fsat``·Fsat (2E/(π w²) = peak)."""
    energy = peak_over_fsat * FSAT * np.pi * BEAM_W ** 2 / 2.0
    return Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=energy, duration_s=PULSE, shape=shape,
                profile="gaussian", diameter_m=2 * BEAM_W)


@pytest.fixture(scope="module")
def gaussian_run():
    seed = gaussian_seed()
    medium = make_medium(MATERIAL, small_signal_gain=G0, diameter_m=APERTURE, slices=NZ)
    cfg = make_config(medium, seed, [pass_step(0)], points=POINTS, width_m=WIDTH, time_slices=NT)
    return simulate(cfg), seed_map(POINTS, WIDTH, seed), disc(POINTS, WIDTH, APERTURE)


def test_output_fluence_every_pixel_equals_closed_form(gaussian_run):
    # Frantz & Nodvik (1963), output fluence J_out = Fsat·ln[1 + G0·(exp(J_in/Fsat) − 1)] per pixel.
    res, f_in, inside = gaussian_run
    out = res.steps[0].fluence_J_m2
    assert max_rel(out, fn_closed(f_in, np.log(G0), FSAT), inside) < TOL
    # the clear aperture removes the beam outside it
    assert np.all(out[~inside] == 0.0)
    # the centre saturates strongly: there the closed form is far from the small-signal gain G0
    assert np.min(out[inside] / (G0 * f_in[inside])) < 0.4


def test_every_time_slice_at_every_pixel_equals_fn_of_cumulative_input():
    # Frantz & Nodvik (1963): the part of the pulse between t1 and t2 leaves with
    # FN(J_in(t2)) − FN(J_in(t1)), J_in(t) the input fluence passed by time t.
    seed = gaussian_seed()
    x, _ = grid_axes(POINTS, WIDTH)
    inside = disc(POINTS, WIDTH, APERTURE)
    slices_in = pulse_weights("gaussian", NT)[:, None, None] * seed_map(POINTS, WIDTH, seed)[None]
    slices_in[:, ~inside] = 0.0
    beam = BeamState(fluence=slices_in.copy(), b_integral=np.zeros_like(slices_in), x_m=x, y_m=x,
                     dt_s=5.0 * PULSE / NT, wavelength_m=seed.wavelength_m)
    ln_gain = np.where(inside, np.log(G0) / NZ, 0.0)[None] * np.ones((NZ, 1, 1))
    medium = MediumState("rod", ln_gain, inside, FSAT, 0.05 / NZ, 0.0, 0.0)
    pass_medium(beam, medium)
    expected = fn_slices(slices_in, np.log(G0), FSAT)
    assert max_rel(beam.fluence, expected, inside) < TOL
    # the wings of the window hold slices 1e-8 of the total: they are checked to the same relative bound
    assert pulse_weights("gaussian", NT).min() < 1e-7


def test_remaining_gain_every_pixel(gaussian_run):
    # Energy transfer, Frantz & Nodvik (1963): ln G_final = ln G0 − (F_out − F_in)/Fsat per pixel,
    # the sum over z of gain_final·dz.
    res, f_in, inside = gaussian_run
    rec = res.media["rod"]
    remaining = rec.gain_final_per_m.sum(axis=0) * rec.slice_length_m
    out = res.steps[0].fluence_J_m2
    expected = np.log(G0) - (out - f_in) / FSAT
    assert np.max(np.abs(remaining - expected)[inside]) < TOL * np.log(G0)
    # and its closed form −ln[1 − (1 − 1/G0)·exp(−F_in/Fsat)] (FN 1963, gain seen by the pulse's end)
    assert max_rel(remaining, fn_remaining_ln_gain(f_in, np.log(G0), FSAT), inside) < TOL
    # no gain medium outside the clear aperture
    assert np.all(rec.gain_final_per_m[:, ~inside] == 0.0)


def test_square_pulse_output_power_per_slice():
    # Frantz & Nodvik (1963): square input pulse, P_out(t) = P_in / (1 − (1 − 1/G0)·exp(−J_in(t)/Fsat)),
    # averaged over each time slice with scipy.integrate.quad. A flat beam makes every pixel alike, so
    # the slice powers of the result (summed over the pixels) carry the per-pixel shape.
    diameter = 2e-3
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=0.5 * FSAT * np.pi * diameter ** 2 / 4,
                duration_s=PULSE, shape="flat", profile="flat", diameter_m=diameter)
    medium = make_medium(MATERIAL, small_signal_gain=G0, diameter_m=APERTURE, slices=NZ)
    res = simulate(make_config(medium, seed, [pass_step(0)], points=32, width_m=4e-3, time_slices=NT))
    f_in = seed_map(32, 4e-3, seed).max()          # fluence of every pixel inside the flat beam
    p_in = seed.energy_J / PULSE                   # the whole flat beam lies on the grid
    dt = PULSE / NT

    def p_out(t):
        return p_in / (1.0 - (1.0 - 1.0 / G0) * np.exp(-f_in * (t / PULSE) / FSAT))

    expected = np.array([quad(p_out, k * dt, (k + 1) * dt, epsabs=0.0, epsrel=1e-13)[0] / dt
                         for k in range(NT)])
    assert max_rel(res.steps[0].power_W, expected) < TOL
    # the leading edge sees G0, the tail the depleted gain: the shape is strongly reshaped
    assert expected[0] / p_in > 0.9 * G0 and expected[-1] / expected[0] < 0.5


@pytest.mark.parametrize("shape", ["gaussian", "flat"])
def test_exact_composition_of_slices(shape):
    # Frantz & Nodvik (1963): without loss the slice maps compose exactly, so 1 or 37 z-slices and 1 or
    # 64 time slices give the same output fluence and remaining gain to round-off.
    seed = gaussian_seed(shape=shape)
    inside = disc(24, WIDTH, APERTURE)
    runs = {}
    for nz in (1, 37):
        for nt in (1, 64):
            medium = make_medium(MATERIAL, small_signal_gain=G0, diameter_m=APERTURE, slices=nz)
            res = simulate(make_config(medium, seed, [pass_step(0)], points=24, width_m=WIDTH, time_slices=nt))
            rec = res.media["rod"]
            runs[nz, nt] = (res.steps[0].fluence_J_m2, rec.gain_final_per_m.sum(axis=0) * rec.slice_length_m)
    base_out, base_gain = runs[1, 1]
    for key, (out, gain) in runs.items():
        assert max_rel(out, base_out, inside) < TOL, key
        assert max_rel(gain, base_gain, inside) < TOL, key


def _end_pumped_medium(slices: int = NZ):
    pump = Pump(geometry="end", energy_J=0.3, duration_s=200e-6, wavelength_m=808e-9, profile="flat",
                absorption_per_m=300.0)
    return make_medium(MATERIAL, length_m=10e-3, diameter_m=APERTURE, slices=slices, pump=pump)


def test_reverse_pass_through_z_varying_gain():
    # A reverse pass meets the z-slices from the far end. Its output equals FN with the product of the
    # slice gains (Frantz & Nodvik 1963, composition), and each slice is depleted by the fluence it
    # adds: slice k, met after the slices j > k, gives Fsat·Δln G_k = FN(F_in, Σ_{j>=k}) − FN(F_in, Σ_{j>k}).
    seed = gaussian_seed()
    medium = _end_pumped_medium()
    res = simulate(make_config(medium, seed, [pass_step(0, reverse=True)], points=POINTS, width_m=WIDTH,
                               time_slices=NT))
    rec = res.media["rod"]
    inside = disc(POINTS, WIDTH, APERTURE)
    f_in = np.where(inside, seed_map(POINTS, WIDTH, seed), 0.0)
    ln_g0 = rec.gain_initial_per_m * rec.slice_length_m
    assert ln_g0[0, inside].min() > 5.0 * ln_g0[-1, inside].max()       # strongly z-varying (end pumped)

    out = res.steps[0].fluence_J_m2
    assert max_rel(out, fn_closed(f_in, ln_g0.sum(axis=0), FSAT), inside) < TOL

    after = np.cumsum(ln_g0[::-1], axis=0)[::-1]             # Σ_{j>=k}
    before = after - ln_g0                                    # Σ_{j>k}
    depletion = (fn_closed(f_in, after, FSAT) - fn_closed(f_in, before, FSAT)) / FSAT
    ln_g_final = rec.gain_final_per_m * rec.slice_length_m
    assert np.max(np.abs(ln_g_final - (ln_g0 - depletion))[:, inside]) < TOL * ln_g0.sum(axis=0).max()

    # ... and equals a forward pass (same beam, same time slices) through the flipped map.
    x, _ = grid_axes(POINTS, WIDTH)
    slices_in = pulse_weights("gaussian", NT)[:, None, None] * f_in[None]
    beam = BeamState(fluence=slices_in, b_integral=np.zeros_like(slices_in), x_m=x, y_m=x,
                     dt_s=5.0 * PULSE / NT, wavelength_m=seed.wavelength_m)
    flipped = MediumState("rod", ln_g0[::-1].copy(), inside, FSAT, rec.slice_length_m, 0.0, 0.0)
    pass_medium(beam, flipped)
    assert max_rel(beam.fluence.sum(axis=0), out, inside) < TOL
    assert np.max(np.abs(flipped.ln_gain[::-1] - ln_g_final)[:, inside]) < TOL * ln_g0.sum(axis=0).max()
    # the depletion pattern differs from that of a forward pass through the original map
    assert np.max(np.abs(flipped.ln_gain - ln_g_final)[:, inside]) > 1e-3
