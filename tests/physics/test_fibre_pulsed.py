"""Pulses in doped fibres: Frantz–Nodvik with the fibre's saturation energy, and the inversion between
pulses at a repetition rate.

- A single pulse into the pumped fibre leaves with the energy of the Frantz–Nodvik closed form,
  E_out = E_sat·ln[1 + G0·(exp(E_in/E_sat) − 1)], E_sat = hν·A/(Γ·(σe + σa)), G0 = exp(∫g dz)
  (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963)), and a square pulse keeps their
  output shape P_out(t) = P_in/(1 − (1 − 1/G0)·exp(−E_in(t)/E_sat)).
- At a repetition rate the inversion before a pulse is the fixed point of "one pulse, then one period
  of pumping": for a one-slice fibre it is found here with scipy.optimize.brentq, the recovery
  integrated by scipy.integrate.solve_ivp.
- Far above the inverse lifetime the pulse train behaves like the CW amplifier with the same mean power.
- Energy bookkeeping of a pulse, with background loss and rings: input + extracted = output + lost.
- B-integral in an unpumped fibre: k0·n2·P0·L_eff/A_eff, L_eff = (1 − exp(−κL))/κ (G. P. Agrawal,
  Nonlinear Fiber Optics, ch. 4), A_eff = π·w².
"""
from __future__ import annotations

import math

import fibre_reference as R
import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq

from ampmodel.fibre import model as F
from ampmodel.fibre import pulsed as P
from ampmodel.fibre import steady_state
from ampmodel.kernels import beam_shapes

SIGNAL_M = 1030e-9
A_CORE = math.pi * (5e-6) ** 2


def sections(wavelength_m):
    wl = wavelength_m * 1e9
    return (np.interp(wl, R.TABLE_NM, R.EMISSION_CM2) * 1e-4, np.interp(wl, R.TABLE_NM, R.ABSORPTION_CM2) * 1e-4)


def gamma_signal(a=5e-6, na=0.07):
    return R.core_fraction(a, a * R.marcuse_w_over_a(2 * math.pi * a * na / SIGNAL_M))


def saturation_energy():
    se, sa = sections(SIGNAL_M)
    return R.photon_energy(SIGNAL_M) * A_CORE / (gamma_signal() * (se + sa))


def ln_gain(n2_profile, length):
    se, sa = sections(SIGNAL_M)
    h = length / n2_profile.size
    return float(np.sum(gamma_signal() * ((se + sa) * n2_profile - sa) * 6e25) * h)


@pytest.mark.parametrize("energy_J", [1e-7, 2e-5, 3e-4])
def test_single_pulse_energy_is_frantz_nodvik_with_the_fibre_saturation_energy(energy_J):
    medium = R.make_fibre(length_m=3.0, slices=50, pump_W=8.0)
    t, w, dt = beam_shapes.time_slices("gaussian", 2e-9, 24)
    sol = P.solve_pulse_train(F.build_model(medium, SIGNAL_M), w * energy_J, dt, None)
    esat = saturation_energy()
    g0 = math.exp(ln_gain(sol.n2_before[0], 3.0))
    expected = esat * math.log1p(g0 * math.expm1(energy_J / esat))
    assert sol.pulse.energy_out_J.sum() == pytest.approx(expected, rel=1e-11)
    # the inversion the pulse leaves: ln G falls by (E_out − E_in)/E_sat
    assert ln_gain(sol.n2_after[0], 3.0) == pytest.approx(math.log(g0) - (expected - energy_J) / esat, rel=1e-10)


def test_square_pulse_shape_follows_frantz_nodvik():
    medium = R.make_fibre(length_m=1.0, slices=30, pump_W=3.0)
    energy, length_s, slices = 1e-4, 10e-9, 20
    t, w, dt = beam_shapes.time_slices("flat", length_s, slices)
    sol = P.solve_pulse_train(F.build_model(medium, SIGNAL_M), w * energy, dt, None)
    esat, p_in = saturation_energy(), energy / length_s
    g0 = math.exp(ln_gain(sol.n2_before[0], 1.0))
    assert 100 < g0 < 1e5

    def p_out(time):
        return p_in / (1 - (1 - 1 / g0) * math.exp(-p_in * time / esat))

    edges = np.linspace(0.0, length_s, slices + 1)
    expected = [quad(p_out, a, b, epsabs=0, epsrel=1e-12, limit=200)[0] for a, b in zip(edges[:-1], edges[1:], strict=True)]
    assert sol.pulse.energy_out_J == pytest.approx(np.array(expected), rel=1e-9)
    assert sol.pulse.energy_out_J[0] > 5 * sol.pulse.energy_out_J[-1]      # the leading edge takes the gain


def test_repetition_rate_fixed_point_of_a_one_slice_fibre():
    """One slice of fibre: the pre-pulse inversion x solves x = R_T(x − (E_out(x) − E)/(hν·A·Nt·L)), the
    recovery R_T over one period integrated with solve_ivp; the root by brentq."""
    length, pump_W, energy, rate = 0.5, 30.0, 2e-5, 5e3
    medium = R.make_fibre(length_m=length, slices=1, pump_W=pump_W)
    model = F.build_model(medium, SIGNAL_M)
    sol = P.solve_pulse_train(model, np.array([energy]), 1e-9, rate)
    assert sol.converged
    se, sa = sections(SIGNAL_M)
    pe, pa = sections(976e-9)
    gp, nt, tau = (5 / 62.5) ** 2, 6e25, 0.9e-3
    hnu_p = R.photon_energy(976e-9)
    esat = saturation_energy()
    ions_J = R.photon_energy(SIGNAL_M) * A_CORE * nt * length

    def pump_mean(n2):
        a = gp * ((pe + pa) * n2 - pa) * nt * length
        return pump_W * math.expm1(a) / a

    def dn2dt(_, y):
        flux = gp * pump_mean(y[0]) / (hnu_p * A_CORE)
        return [pa * flux * (1 - y[0]) - pe * flux * y[0] - y[0] / tau]

    def after_pulse(x):
        g = math.exp(gamma_signal() * ((se + sa) * x - sa) * nt * length)
        out = esat * math.log1p(g * math.expm1(energy / esat))
        return x - (out - energy) / ions_J, out

    def mismatch(x):
        y = solve_ivp(dn2dt, (0, 1 / rate), [after_pulse(x)[0]], method="LSODA", rtol=1e-12, atol=1e-15)
        return y.y[0, -1] - x

    x = brentq(mismatch, 0.05, 0.5, xtol=1e-14)
    assert sol.n2_before[0, 0] == pytest.approx(x, rel=1e-5)
    assert sol.pulse.energy_out_J.sum() == pytest.approx(after_pulse(x)[1], rel=1e-5)


def test_high_repetition_rate_approaches_cw():
    medium = R.make_fibre(length_m=3.0, slices=40, pump_W=8.0)
    model = F.build_model(medium, SIGNAL_M)
    mean_power = 0.2
    cw = steady_state.output_figures(steady_state.solve_cw(model, mean_power))["signal_out_W"]
    gaps = []
    for rate in (1e6, 1e7):
        sol = P.solve_pulse_train(model, np.array([mean_power / rate]), 1e-9, rate)
        assert sol.converged
        gaps.append(abs(sol.pulse.energy_out_J.sum() * rate / cw - 1))
    assert gaps[1] < 2e-3 and gaps[1] < gaps[0] / 5       # the gap closes as the pulses shrink


@pytest.mark.parametrize("rings, loss", [(1, 0.05), (5, 0.02)])
def test_pulse_energy_bookkeeping(rings, loss):
    medium = R.make_fibre(length_m=2.0, slices=40, pump_W=6.0, rings=rings, loss_per_m=loss)
    t, w, dt = beam_shapes.time_slices("sech2", 1e-9, 16)
    sol = P.solve_pulse_train(F.build_model(medium, SIGNAL_M), w * 5e-5, dt, 2e4)
    p = sol.pulse
    out = p.energy_out_J.sum()
    assert p.loss_J > 0 and p.extracted_J > 0
    assert (5e-5 + p.extracted_J - out - p.loss_J) / out == pytest.approx(0.0, abs=1e-12)
    assert p.energy_z_J[-1] == pytest.approx(out, rel=1e-13)


def test_b_integral_in_an_unpumped_fibre():
    medium = R.make_fibre(length_m=4.0, slices=25, pump_W=None, loss_per_m=0.1)
    t, w, dt = beam_shapes.time_slices("flat", 1e-9, 4)
    energy = 1e-15                                  # far below saturation: no bleaching
    sol = P.solve_pulse_train(F.build_model(medium, SIGNAL_M), w * energy, dt, None, n2_index_m2_W=2.6e-20)
    _, sa = sections(SIGNAL_M)
    kappa = gamma_signal() * sa * 6e25 + 0.1
    a = 5e-6
    w_mode = a * R.marcuse_w_over_a(2 * math.pi * a * 0.07 / SIGNAL_M)
    expected = 2 * math.pi / SIGNAL_M * 2.6e-20 * (energy / 1e-9) * (-math.expm1(-kappa * 4.0)) / kappa \
        / (math.pi * w_mode ** 2)
    assert sol.pulse.b_integral_rad == pytest.approx(np.full(4, expected), rel=1e-9)
