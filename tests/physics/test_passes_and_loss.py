"""Passes through one medium with a lumped loss between them, and distributed passive loss.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): output fluence of a slab and the
gain left behind.
Distributed loss: the total fluence obeys dF/dz = g0·Fsat·(1 − exp(−F/Fsat)) − α·F (integrate the
rate equations over the pulse; cf. A. Avizonis and R. L. Grotbeck, J. Appl. Phys. 37, 687 (1966),
from memory — verify); the reference is scipy.integrate.solve_ivp.
"""
from __future__ import annotations

import numpy as np
import pytest
from physics_reference import (
    disc,
    fn_closed,
    loss_step,
    make_config,
    make_material,
    make_medium,
    max_rel,
    pass_step,
    photon_energy,
    seed_map,
)
from scipy.integrate import solve_ivp

from ampmodel.description import Seed
from ampmodel.simulation import simulate

MATERIAL = make_material()
FSAT = photon_energy(MATERIAL.wavelength_m) / MATERIAL.emission_cross_section_m2
G0 = 8.0
T = 0.7
POINTS, WIDTH, APERTURE, BEAM_W = 48, 6e-3, 4e-3, 1e-3
TOL = 1e-12   # no distributed loss: the slice maps compose exactly, round-off only


@pytest.fixture(scope="module")
def double_pass():
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=0.5 * FSAT * np.pi * BEAM_W ** 2 / 2.0,
                duration_s=10e-9, profile="gaussian", diameter_m=2 * BEAM_W)
    medium = make_medium(MATERIAL, small_signal_gain=G0, diameter_m=APERTURE, slices=12)
    steps = [pass_step(0), loss_step(1, T), pass_step(2, reverse=True)]
    res = simulate(make_config(medium, seed, steps, points=POINTS, width_m=WIDTH, time_slices=32))
    inside = disc(POINTS, WIDTH, APERTURE)
    return res, np.where(inside, seed_map(POINTS, WIDTH, seed), 0.0), inside


def test_double_pass_with_loss_every_pixel(double_pass):
    # Frantz & Nodvik (1963) composed by hand per pixel: F1 = FN(F_in, ln G0);
    # ln G1 = ln G0 − (F1 − F_in)/Fsat; F2 = T·F1; F3 = FN(F2, ln G1).
    res, f_in, inside = double_pass
    ln_g0 = np.log(G0)
    f1 = fn_closed(f_in, ln_g0, FSAT)
    ln_g1 = ln_g0 - (f1 - f_in) / FSAT
    f2 = T * f1
    f3 = fn_closed(f2, ln_g1, FSAT)
    assert max_rel(res.steps[0].fluence_J_m2, f1, inside) < TOL
    assert max_rel(res.steps[1].fluence_J_m2, f2, inside) < TOL
    assert max_rel(res.steps[2].fluence_J_m2, f3, inside) < TOL
    rec = res.media["rod"]
    ln_g2 = ln_g1 - (f3 - f2) / FSAT
    remaining = rec.gain_final_per_m.sum(axis=0) * rec.slice_length_m
    assert np.max(np.abs(remaining - ln_g2)[inside]) < TOL * ln_g0


def test_second_pass_sees_depleted_gain(double_pass):
    res, f_in, inside = double_pass
    f2 = res.steps[1].fluence_J_m2
    f3 = res.steps[2].fluence_J_m2
    with_fresh_gain = fn_closed(f2, np.log(G0), FSAT)
    # at the centre the first pass has used much of the gain: the second pass amplifies far less than
    # it would with the fresh medium (by much more than any tolerance here)
    centre = np.unravel_index(np.argmax(f_in), f_in.shape)
    assert f3[centre] < 0.7 * with_fresh_gain[centre]
    assert np.all(f3[inside] < with_fresh_gain[inside])
    # step gains recorded in the summary agree with the energies
    s = res.summary["steps"]
    assert s[1]["gain"] == pytest.approx(T, rel=1e-13)
    assert s[2]["gain"] < s[0]["gain"] < G0


def _distributed_loss_error(slices: int, ln_g0: float = 2.0, alpha_l: float = 0.5, x_in: float = 0.5):
    """Relative error of the sliced solver against solve_ivp for a flat beam through uniform gain
    g0 = ln G0/L and passive loss α (every pixel inside the flat beam is alike)."""
    length = 0.05
    g0, alpha = ln_g0 / length, alpha_l / length
    n, width, diameter = 16, 4e-3, 2e-3
    inside = disc(n, width, diameter)
    area = (width / n) ** 2 * inside.sum()
    seed = Seed(wavelength_m=MATERIAL.wavelength_m, energy_J=x_in * FSAT * area, duration_s=10e-9,
                shape="flat", profile="flat", diameter_m=diameter)
    medium = make_medium(MATERIAL, length_m=length, small_signal_gain=np.exp(ln_g0), diameter_m=3e-3,
                         slices=slices, loss_per_m=alpha)
    res = simulate(make_config(medium, seed, [pass_step(0)], points=n, width_m=width, time_slices=4))
    out = res.steps[0].fluence_J_m2[inside]

    # dF/dz = g0·Fsat·(1 − exp(−F/Fsat)) − α·F (Avizonis & Grotbeck 1966), solve_ivp at rtol 1e-10
    sol = solve_ivp(lambda z, f: g0 * FSAT * -np.expm1(-f / FSAT) - alpha * f, (0.0, length), [x_in * FSAT],
                    method="DOP853", rtol=1e-10, atol=1e-12 * FSAT)
    assert sol.success
    reference = sol.y[0, -1]
    return float(np.max(np.abs(out / reference - 1.0)))


def test_distributed_loss_against_solve_ivp():
    assert _distributed_loss_error(4) < 5e-3


def test_distributed_loss_second_order_splitting():
    # Symmetric splitting (half loss, gain, half loss) is second order: doubling the slices divides
    # the error by ~4 (first order would give ~2; the ODE reference is 1e-10, far below the errors).
    errors = [_distributed_loss_error(n) for n in (4, 8, 16)]
    for coarse, fine in zip(errors[:-1], errors[1:], strict=True):
        assert 3.6 < coarse / fine < 4.4, errors
