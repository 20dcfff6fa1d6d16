"""CW slice solver against its references: scipy.special.lambertw (homogeneous line), the
inhomogeneous closed form, scipy.integrate.quad and solve_ivp (passive loss).

References
----------
Homogeneous line, steady state: ln(I_out/I_in) + (I_out − I_in)/Isat = g0·L, solved by
I_out = Isat·W((I_in/Isat)·exp(I_in/Isat + g0·L)) (A. E. Siegman, Lasers, University Science Books
(1986)). Inhomogeneous line: dI/dz = g0·I/sqrt(1 + I/Isat), g0·L = Φ(u_out) − Φ(u_in),
Φ(u) = 2·sqrt(1 + u) + ln[(sqrt(1 + u) − 1)/(sqrt(1 + u) + 1)], the integral of that
equation (saturation of an inhomogeneously broadened line: Siegman, Lasers (1986)).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from physics_reference import make_material, make_medium, pass_step
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq
from scipy.special import lambertw

from ampmodel.description import Config, Grid, Seed
from ampmodel.kernels.cw_saturation import homogeneous_slice_gain, inhomogeneous_slice_gain
from ampmodel.simulation import simulate

MAT = make_material()
ISAT = MAT.saturation_intensity_W_m2


def phi_direct(u):
    """Φ(u) as written in the module's references (direct form, for moderate u)."""
    r = np.sqrt(1.0 + u)
    return 2.0 * r + np.log((r - 1.0) / (r + 1.0))


def cw_single_pass(broadening="homogeneous", small_signal_gain=6.0, loss_per_m=0.0, power_W=1.0, profile="gaussian",
                   slices=12, points=24):
    mat = dataclasses.replace(MAT, broadening=broadening)
    medium = make_medium(mat, length_m=0.05, diameter_m=5e-3, slices=slices, small_signal_gain=small_signal_gain,
                         loss_per_m=loss_per_m)
    seed = Seed(wavelength_m=1064e-9, power_W=power_W, profile=profile, diameter_m=3e-3)
    config = Config(title="cw slice test", mode="cw", grid=Grid(points=points, width_m=6e-3), media=(medium,),
                    seed=seed, steps=(pass_step(0),))
    result = simulate(config)
    return result, result.seed_intensity_W_m2, result.steps[0].intensity_W_m2, medium


def test_kernel_matches_lambertw_per_pixel():
    rng = np.random.default_rng(7)
    a = 10.0 ** rng.uniform(-8, 2.5, size=(64, 64))          # I_in/Isat
    c = rng.uniform(-3.0, 6.0, size=(64, 64))                # g0·dz (negative: absorbing)
    x = homogeneous_slice_gain(a * ISAT, c, ISAT)
    reference = np.real(lambertw(a * np.exp(a + c)))         # I_out/Isat, principal branch
    assert np.max(np.abs(a * np.exp(x) / reference - 1.0)) < 1e-12   # required: 1e-5


def test_kernel_is_finite_where_the_lambertw_argument_overflows():
    a = np.array([1e3, 1e6, 1e-300, 2.0, 0.0])
    c = np.array([50.0, 3.0, 700.0, 800.0, 4.0])
    x = homogeneous_slice_gain(a, c, 1.0)
    assert np.all(np.isfinite(x))
    # the implicit form itself holds: x + a·(exp(x) − 1) = c
    assert np.allclose(x + a * np.expm1(x), c, rtol=1e-13, atol=1e-13)
    assert x[-1] == 4.0                                      # no signal: the small-signal gain


def test_whole_pass_equals_lambertw_with_the_whole_gain():
    """Slices compose exactly: a pass through a uniform medium equals one Lambert-W step with g0·L."""
    result, seed, out, medium = cw_single_pass(power_W=30.0)
    inside = seed > 0
    a = seed / ISAT
    g0_l = np.log(medium.small_signal_gain)
    reference = ISAT * np.real(lambertw(a * np.exp(a + g0_l)))
    mask = np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= medium.diameter_m / 2
    sel = inside & mask
    assert np.max(np.abs(out[sel] / reference[sel] - 1.0)) < 1e-11
    assert result.summary["cw_iterations"] == 1


def test_inhomogeneous_kernel_matches_the_closed_form():
    u_in = 10.0 ** np.linspace(-5, 2.5, 60)
    c = np.linspace(0.01, 3.0, 60)
    x = inhomogeneous_slice_gain(u_in * ISAT, 0.0, c, ISAT)
    u_out = u_in * np.exp(x)
    mid = u_in > 1e-3
    assert np.max(np.abs(phi_direct(u_out[mid]) - phi_direct(u_in[mid]) - c[mid])) < 1e-11
    for ui, ci, uo in zip(u_in[::7], c[::7], u_out[::7], strict=True):               # root found independently
        root = brentq(lambda v, ui=ui, ci=ci: phi_direct(v) - phi_direct(ui) - ci, ui, ui * np.exp(ci) * 1.01, xtol=1e-300,
                      rtol=1e-14)
        assert uo == pytest.approx(root, rel=1e-10)


def test_inhomogeneous_pass_matches_the_closed_form_per_pixel():
    result, seed, out, medium = cw_single_pass("inhomogeneous", power_W=20.0)
    g0_l = np.log(medium.small_signal_gain)
    inside = np.hypot(*np.meshgrid(result.x_m, result.y_m)) <= medium.diameter_m / 2
    sel = (seed > 1e-6 * seed.max()) & inside
    u_in, u_out = seed[sel] / ISAT, out[sel] / ISAT
    assert np.max(np.abs(phi_direct(u_out) - phi_direct(u_in) - g0_l)) < 1e-9


def test_inhomogeneous_kernel_with_both_directions_matches_quad():
    rng = np.random.default_rng(3)
    f, b = 10.0 ** rng.uniform(-4, 2, 12), 10.0 ** rng.uniform(-4, 2, 12)
    c = rng.uniform(-2.0, 2.0, 12)                          # negative: an absorbing slice
    x = inhomogeneous_slice_gain(f * ISAT, b * ISAT, c, ISAT)
    for fi, bi, ci, xi in zip(f, b, c, x, strict=True):
        h, _ = quad(lambda t, fi=fi, bi=bi, xi=xi: np.sqrt(1.0 + fi * np.exp(t) + bi * np.exp(xi - t)), 0.0, xi, epsabs=1e-14, epsrel=1e-13)
        assert h == pytest.approx(ci, rel=1e-11)


@pytest.mark.parametrize("broadening, power", [("homogeneous", 0.5), ("homogeneous", 40.0),
                                               ("inhomogeneous", 0.5), ("inhomogeneous", 40.0)])
def test_loss_inside_the_medium_matches_solve_ivp(broadening, power):
    """dI/dz = g0·I/(1 + I/Isat)^p − α·I (p = 1, or 1/2 inhomogeneous), integrated by solve_ivp;
    the stated error of the loss splitting at default settings is 1e-6."""
    alpha = 8.0                                              # 0.08 /cm over 5 cm
    result, seed, out, medium = cw_single_pass(broadening, small_signal_gain=10.0, loss_per_m=alpha, power_W=power,
                                               profile="flat", slices=20, points=16)
    g0 = np.log(medium.small_signal_gain) / medium.length_m
    p = 1.0 if broadening == "homogeneous" else 0.5
    i_in = seed[8, 8]
    sol = solve_ivp(lambda z, i: g0 * i / (1.0 + i / ISAT) ** p - alpha * i, (0.0, medium.length_m), [i_in],
                    method="DOP853", rtol=1e-12, atol=1e-12 * i_in)
    assert out[8, 8] == pytest.approx(sol.y[0, -1], rel=1e-6)
