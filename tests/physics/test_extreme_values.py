"""Extreme values (hypothesis): the pass kernels, the cw saturation kernels, the fibre slice passage and
whole small runs stay finite, bounded and conserving for fluence (or intensity) ratios from 1e-12 to 1e4
and gains from 1e-30 to 1e30, and grow with their input and their gain where the physics says so.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)],
Fsat·Δln G = −ΔJ; the maps of slices compose, FN(G1)∘FN(G2) = FN(G1·G2), and so do those of the time
slices of a pulse through one slab, so a column of slabs gives the whole pulse X_out = FN(X_in, Π G_k).
A. E. Siegman, Lasers, University Science Books (1986): steady-state saturation, homogeneous
x + (T/Isat)·(exp(x) − 1) = g0·dz; inhomogeneous, one direction, Φ(u_out) − Φ(u_in) = g0·dz.
Fibre slice of uniform populations: dP/dz = a·P + s, P_out = P_in·exp(a·h) + s·(exp(a·h) − 1)/a.
"""
from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from physics_reference import make_material, make_medium, pass_step

from ampmodel.description import Config, Grid, Seed
from ampmodel.kernels.cw_saturation import homogeneous_slice_gain, inhomogeneous_closed_form, inhomogeneous_slice_gain
from ampmodel.kernels.fibre_rates import slice_transfer
from ampmodel.kernels.fn_pass import amplify_block, amplify_block_composite, composite_valid, linear_form_valid
from ampmodel.kernels.frantz_nodvik import fn_total
from ampmodel.simulation import simulate

LN_G_MAX = math.log(1e30)                       # 69.08: gains from 1e-30 to 1e30
SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
RUNS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
log_ratio = st.floats(-12.0, 4.0)              # J/Fsat (or I/Isat) from 1e-12 to 1e4
ln_gain = st.floats(-LN_G_MAX, LN_G_MAX)


# ----------------------------------------------------------------------------------------------
# The pass kernel (a block of pixels through a column of gain slices, time slice after time slice)
# ----------------------------------------------------------------------------------------------

@st.composite
def blocks(draw):
    nt, nz, c = draw(st.integers(1, 4)), draw(st.integers(1, 4)), draw(st.integers(1, 3))
    x = np.array([[10.0 ** draw(log_ratio) / nt for _ in range(c)] for _ in range(nt)])
    # one ln G per column, shared out over its slices: a column's gain spans 1e-30 to 1e30
    columns = [draw(ln_gain) for _ in range(c)]
    shares = np.array([[draw(st.floats(0.1, 1.0)) for _ in range(c)] for _ in range(nz)])
    g = shares / shares.sum(axis=0) * np.array(columns)
    return x, g


def _run(x, g, how):
    x, g = x.copy(), g.copy()
    if how == "composite":
        amplify_block_composite(x, g)
    else:
        amplify_block(x, g, linear=how == "linear")
    return x, g


@SETTINGS
@given(block=blocks())
def test_pass_kernel_finite_conserving_and_the_closed_form(block):
    x_in, g_in = block
    hows = ["log"] + (["linear"] if linear_form_valid(x_in, g_in) else []) + \
        (["composite"] if composite_valid(g_in) else [])
    total_in = x_in.sum(axis=0)
    stored = np.clip(g_in, 0.0, None).sum(axis=0)         # extractable, in units of Fsat
    closed = fn_total(total_in, g_in.sum(axis=0), 1.0)    # the whole pulse through the whole column
    for how in hows:
        x, g = _run(x_in, g_in, how)
        assert np.all(np.isfinite(x)) and np.all(np.isfinite(g)) and np.all(x >= 0.0), how
        out = x.sum(axis=0)
        scale = total_in + out + np.abs(g_in).sum(axis=0)
        # energy balance: what the beam gained is what the gain lost (Fsat·Δln G = −ΔJ), within 1e-9
        assert np.all(np.abs((out - total_in) - (g_in - g).sum(axis=0)) <= 1e-9 * scale), how
        # never more out than in plus the stored energy
        assert np.all(out <= (total_in + stored) * (1 + 1e-12)), how
        # Frantz-Nodvik composition in z and in time: the total follows from the totals
        np.testing.assert_allclose(out, closed, rtol=1e-9, atol=1e-300, err_msg=how)


@SETTINGS
@given(block=blocks(), factor=st.floats(1.001, 100.0), extra=st.floats(1e-3, 10.0))
def test_pass_kernel_grows_with_input_and_gain(block, factor, extra):
    x_in, g_in = block
    base = _run(x_in, g_in, "log")[0].sum(axis=0)
    more_input = _run(x_in * factor, g_in, "log")[0].sum(axis=0)
    more_gain = _run(x_in, g_in + extra / g_in.shape[0], "log")[0].sum(axis=0)
    assert np.all(more_input >= base * (1 - 1e-12))
    assert np.all(more_gain >= base * (1 - 1e-12))


# ----------------------------------------------------------------------------------------------
# The cw saturation kernels (one slice, steady state)
# ----------------------------------------------------------------------------------------------

@SETTINGS
@given(lr=log_ratio, c=ln_gain, factor=st.floats(1.001, 100.0), extra=st.floats(1e-3, 10.0))
def test_homogeneous_slice_gain(lr, c, factor, extra):
    """x solves x + a·expm1(x) = g0·dz (a = T/Isat); 0 <= x <= g0·dz for gain, g0·dz <= x <= 0 for an
    absorber; the slice adds at most Isat·g0·dz (a·expm1(x) = g0·dz − x); output a·exp(x) grows with a,
    x with g0·dz, and saturation lowers the gain (bleaching raises an absorber's)."""
    a = 10.0 ** lr
    x = float(homogeneous_slice_gain(np.array([a]), c, 1.0)[0])
    assert math.isfinite(x)
    residual = x + a * math.expm1(x) - c
    assert abs(residual) <= 1e-12 * (abs(x) + abs(a * math.expm1(x)) + abs(c) + 1e-300)
    assert min(0.0, c) - 1e-15 <= x <= max(0.0, c) + 1e-15
    if c >= 0:
        assert a * math.expm1(x) <= c * (1 + 1e-12)
    x_more = float(homogeneous_slice_gain(np.array([a * factor]), c, 1.0)[0])
    assert a * factor * math.exp(x_more) >= a * math.exp(x) * (1 - 1e-12)       # output grows with input
    assert (x_more <= x + 1e-15) if c >= 0 else (x_more >= x - 1e-15)
    x_gain = float(homogeneous_slice_gain(np.array([a]), c + extra, 1.0)[0])
    assert x_gain >= x - 1e-15


@SETTINGS
@given(lr=log_ratio, c=st.floats(-3.0, 3.0))
def test_inhomogeneous_slice_gain_one_direction(lr, c):
    """Against the closed form Φ(u_out) − Φ(u_in) = g0·dz (Siegman 1986), where the quadrature holds
    (|x| <= 3 per slice)."""
    u = 10.0 ** lr
    x = float(inhomogeneous_slice_gain(np.array([u]), np.array([0.0]), c, 1.0)[0])
    assert math.isfinite(x) and min(0.0, c) - 1e-15 <= x <= max(0.0, c) + 1e-15
    if c != 0.0:
        h = float(inhomogeneous_closed_form(np.array([u * math.exp(x)]))[0] - inhomogeneous_closed_form(np.array([u]))[0])
        assert abs(h - c) <= 1e-9 * max(1.0, abs(c))


@SETTINGS
@given(lf=log_ratio, lb=log_ratio, c=ln_gain)
def test_inhomogeneous_slice_gain_finite_and_bounded_everywhere(lf, lb, c):
    x = float(inhomogeneous_slice_gain(np.array([10.0 ** lf]), np.array([10.0 ** lb]), c, 1.0)[0])
    assert math.isfinite(x) and min(0.0, c) - 1e-12 <= x <= max(0.0, c) + 1e-12


# ----------------------------------------------------------------------------------------------
# The fibre slice passage
# ----------------------------------------------------------------------------------------------

@SETTINGS
@given(lp=log_ratio, ah=ln_gain, ls=st.floats(-12.0, 3.0), factor=st.floats(1.001, 100.0),
       extra=st.floats(1e-3, 10.0))
def test_fibre_slice_passage(lp, ah, ls, factor, extra):
    """P_out = P_in·exp(a·h) + s·h·(exp(a·h) − 1)/(a·h): finite, non-negative, the closed form to 1e-12,
    growing with the input power and with the gain."""
    h = 0.01
    p, s = 10.0 ** lp, 10.0 ** ls
    out, mean = slice_transfer(np.array([p]), np.array([ah / h]), np.array([s]), h)
    out, mean = float(out[0]), float(mean[0])
    assert math.isfinite(out) and math.isfinite(mean) and out >= 0.0 and mean >= 0.0
    closed = p * math.exp(ah) + s * h * (math.expm1(ah) / ah if ah != 0.0 else 1.0)
    assert abs(out - closed) <= 1e-12 * closed
    assert float(slice_transfer(np.array([p * factor]), np.array([ah / h]), np.array([s]), h)[0][0]) >= out
    assert float(slice_transfer(np.array([p]), np.array([(ah + extra) / h]), np.array([s]), h)[0][0]) >= out


# ----------------------------------------------------------------------------------------------
# Whole small cw runs
# ----------------------------------------------------------------------------------------------

MAT = make_material()
ISAT = MAT.saturation_intensity_W_m2
SEED_AREA = math.pi * (1.5e-3) ** 2


def cw_run(ratio: float, gain: float, slices: int = 4):
    """A flat cw seed of intensity ``ratio``·Isat, one pass through a medium of on-axis small-signal
    gain ``gain`` (8 x 8 pixels)."""
    medium = make_medium(MAT, length_m=0.05, diameter_m=4e-3, slices=slices, small_signal_gain=gain)
    config = Config(title="cw extremes", mode="cw", grid=Grid(points=8, width_m=6e-3), media=(medium,),
                    seed=Seed(wavelength_m=1064e-9, power_W=ratio * ISAT * SEED_AREA, profile="flat",
                              diameter_m=3e-3), steps=(pass_step(0),))
    return simulate(config)


@RUNS
@given(lr=log_ratio, lg=st.floats(0.0, LN_G_MAX))
def test_cw_run_finite_bounded_and_balanced(lr, lg):
    s = cw_run(10.0 ** lr, math.exp(lg)).summary
    for key in ("input_power_W", "output_power_W", "extracted_power_W", "peak_intensity_W_cm2",
                "power_balance_error"):
        assert math.isfinite(s[key]), key
    # a slice adds at most Isat·g0·dz per unit area (Siegman): the run at most Isat·ln G0 over the seed
    pixel = (6e-3 / 8) ** 2
    lit = s["input_power_W"] / (10.0 ** lr * ISAT) / pixel          # pixels the flat seed covers
    assert s["output_power_W"] <= s["input_power_W"] + ISAT * lg * lit * pixel * (1 + 1e-9)
    assert s["output_power_W"] >= s["input_power_W"] * (1 - 1e-12)
    assert abs(s["power_balance_error"]) <= 1e-9


@RUNS
@given(lr=log_ratio, lg=st.floats(0.0, LN_G_MAX - 10.0), factor=st.floats(1.01, 10.0), extra=st.floats(0.01, 9.0))
def test_cw_run_grows_with_input_and_gain(lr, lg, factor, extra):
    base = cw_run(10.0 ** lr, math.exp(lg)).summary["output_power_W"]
    assert cw_run(10.0 ** lr * factor, math.exp(lg)).summary["output_power_W"] >= base * (1 - 1e-12)
    assert cw_run(10.0 ** lr, math.exp(lg + extra)).summary["output_power_W"] >= base * (1 - 1e-12)


# ----------------------------------------------------------------------------------------------
# Whole small pulsed runs with shaped beams and pulses (test_whole_run_properties: flat ones)
# ----------------------------------------------------------------------------------------------

@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lr=log_ratio, lg=st.floats(0.0, LN_G_MAX), profile=st.sampled_from(["gaussian", "supergaussian", "flat"]),
       shape=st.sampled_from(["gaussian", "sech2", "flat"]), reverse=st.booleans())
def test_shaped_pulsed_run_finite_bounded_and_balanced(lr, lg, profile, shape, reverse):
    """Gaussian beams put fluences far below the peak at the edge (down to e^-18 of it inside the rod):
    the kernels switch between their forms there; every figure stays finite and the energy balance
    closes."""
    fsat = MAT.saturation_fluence_J_m2
    medium = make_medium(MAT, length_m=0.05, diameter_m=3.5e-3, slices=3, small_signal_gain=math.exp(lg))
    config = Config(title="shaped extremes", mode="pulsed", grid=Grid(points=16, width_m=4e-3, time_slices=6),
                    media=(medium,), seed=Seed(wavelength_m=1064e-9, energy_J=10.0 ** lr * fsat * 4e-6,
                                               duration_s=5e-9, shape=shape, profile=profile, order=8.0,
                                               diameter_m=2e-3),
                    steps=(pass_step(0, reverse=reverse),))
    s = simulate(config).summary
    assume(s["output_energy_J"] > 0.0)
    for key in ("output_energy_J", "stored_energy_J", "peak_fluence_J_cm2", "peak_intensity_W_cm2",
                "energy_balance_error", "extraction_efficiency"):
        assert math.isfinite(s[key]), key
    assert s["output_energy_J"] <= (s["input_energy_J"] + s["stored_energy_J"]) * (1 + 1e-12)
    residual = s["energy_balance_error"] * s["output_energy_J"]
    assert abs(residual) <= 1e-9 * (s["input_energy_J"] + s["extracted_energy_J"])
