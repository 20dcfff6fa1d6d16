"""The evaluations of a pass in kernels/fn_pass.py against the plain Frantz–Nodvik formula.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): per time slice and gain slice,
J_out = Fsat·log1p(G·expm1(J_in/Fsat)) and ln G <- ln G − (J_out − J_in)/Fsat. The reference below is
that formula written out in a plain loop over time slices and gain slices (with the symmetric split of
the passive loss and the logarithmic-mean B-integral of the solver's model, the mean taken directly
from its definition, (b − a)/ln(b/a)). Every evaluation must agree with it to round-off: the linear
form, the log-domain form and the exact composition are three ways to the same numbers.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from ampmodel.beam.state import BeamState
from ampmodel.kernels import fn_pass
from ampmodel.kernels.frantz_nodvik import fn_slice_linear
from ampmodel.pulsed import passes as layout

TOL = 1e-12      # relative: a few hundred updates of a few ulp each cannot reach it; a wrong update does


def plain_pass(x, ln_gain, half_loss=1.0, with_b=False):
    """The textbook loop: returns (x_out, ln_gain_out, b_sum, peak plane fluence, peak slice fluence,
    passive loss, fluence the gain added), all in units of Fsat."""
    x = np.array(x, dtype=float)
    ln_gain = np.array(ln_gain, dtype=float)
    nt, c = x.shape
    nz = ln_gain.shape[0]
    b_sum = np.zeros_like(x)
    plane = np.zeros((nz, c))
    peak_slice = np.zeros(nt)                         # the largest fluence of each time slice
    passive, gained = 0.0, 0.0
    for t in range(nt):
        xb = x[t].copy()
        for k in range(nz):
            passive += (1.0 - half_loss) * xb.sum()
            xin = xb * half_loss
            xout = np.log1p(np.exp(ln_gain[k]) * np.expm1(xin))      # Frantz & Nodvik (1963)
            ln_gain[k] -= xout - xin
            gained += (xout - xin).sum()
            passive += (1.0 - half_loss) * xout.sum()
            xout = xout * half_loss
            if with_b:
                # (b − a)/ln(b/a) with ln(b/a) = log1p((b − a)/a): b − a is exact for b/a in [1/2, 2]
                # (Sterbenz), so this stays accurate where b is close to a; a where b = a, 0 where a = 0
                with np.errstate(divide="ignore", invalid="ignore"):
                    diff = xout - xb
                    lm = diff / np.log1p(diff / xb)
                lm[diff == 0.0] = xb[diff == 0.0]
                lm[xb == 0.0] = 0.0
                b_sum[t] += lm
            plane[k] += xout
            peak_slice[t] = max(peak_slice[t], float(xout.max()))
            xb = xout
        x[t] = xb
    return x, ln_gain, b_sum, float(plane.max()), peak_slice, passive, gained


def block(nt=12, nz=7, c=300, seed=0, absorbing=False, scale=1.0):
    rng = np.random.default_rng(seed)
    weights = rng.uniform(0.2, 1.0, nt)[:, None]
    x = scale * weights / weights.sum() * rng.uniform(0.0, 3.0, c)[None, :]
    x[:, :5] = 0.0                                     # pixels without fluence
    x[3, 5:10] = 0.0                                   # a time slice without fluence at some pixels
    ln_gain = rng.uniform(0.0, 0.6, (nz, c))
    ln_gain[:, 10:15] = 0.0                            # no gain
    if absorbing:
        ln_gain[2, 15:40] = -rng.uniform(0.1, 1.0, 25)
    return x, ln_gain


def rel(a, b):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = np.maximum(np.abs(b), 1e-300)
    return float(np.max(np.where((a == 0) & (b == 0), 0.0, np.abs(a - b) / scale)))


def test_fn_slice_linear_against_plain_formula():
    # u = expm1(x): log1p(u_out) must equal log1p(G·expm1(x)), and the new gain G·exp(x − x_out).
    rng = np.random.default_rng(5)
    x = 10 ** rng.uniform(-12, 1.7, 2000)
    ln_g = rng.uniform(-8, 8, 2000)
    u = np.expm1(x)
    gain = np.exp(ln_g)
    out, scratch = np.empty_like(u), np.empty_like(u)
    fn_slice_linear(u, gain, out, scratch)
    y = np.log1p(np.exp(ln_g) * np.expm1(x))
    assert rel(np.log1p(out), y) < 1e-14
    assert np.max(np.abs(np.log(gain) - (ln_g - (y - x)))) < 1e-14 * (1 + np.abs(ln_g)).max()


@pytest.mark.parametrize("half_loss", [1.0, math.exp(-0.5 * 0.3)])
@pytest.mark.parametrize("with_b", [False, True])
@pytest.mark.parametrize("linear", [True, False])
@pytest.mark.parametrize("absorbing, dark", [(True, True), (False, False)])
def test_amplify_block_equals_plain_loop(half_loss, with_b, linear, absorbing, dark):
    # absorbing slices and pixels or time slices without fluence, or neither (then, without loss, the
    # peaks are those at the exit and the logarithmic mean needs no guard against zero)
    x, ln_gain = block(absorbing=absorbing)
    if not dark:
        x[x == 0.0] = 1e-3
    ln_gain0 = ln_gain.copy()
    lit = x > 0.0
    ref = plain_pass(x, ln_gain, half_loss, with_b)
    b_sum = np.zeros_like(x) if with_b else None
    assert fn_pass.linear_form_valid(x, ln_gain, half_loss)
    oc = fn_pass.amplify_block(x, ln_gain, half_loss, b_sum, linear=linear)
    assert rel(x, ref[0]) < TOL
    assert np.max(np.abs(ln_gain - ref[1])) < TOL
    if with_b:
        assert rel(b_sum, ref[2]) < TOL
        assert np.all(b_sum[lit] > 0.0) and np.all(b_sum[~lit] == 0.0)
    assert oc.peak_plane_fluence == pytest.approx(ref[3], rel=TOL)
    np.testing.assert_allclose(oc.peak_slice_fluence, ref[4], rtol=TOL)
    assert oc.passive_loss == pytest.approx(ref[5], rel=TOL, abs=0.0)
    assert oc.gained == pytest.approx(ref[6], rel=TOL)
    assert (half_loss == 1.0) == (oc.passive_loss == 0.0)
    if dark:       # nothing changes where there is no fluence
        assert np.all(x[:, :5] == 0.0) and np.all(ln_gain[:, :5] == ln_gain0[:, :5])


def test_composite_equals_plain_loop_and_per_slice_depletion():
    # Exact composition (Frantz & Nodvik 1963): every time slice's output and every gain slice's
    # depletion agree with the plain loop over all (t, k), for z-varying gain.
    x, ln_gain = block(nt=16, nz=9)
    assert fn_pass.composite_valid(ln_gain)
    ref = plain_pass(x, ln_gain)
    oc = fn_pass.amplify_block_composite(x, ln_gain)
    assert rel(x, ref[0]) < TOL
    assert np.max(np.abs(ln_gain - ref[1])) < TOL
    assert oc.peak_plane_fluence == pytest.approx(ref[3], rel=TOL)
    np.testing.assert_allclose(oc.peak_slice_fluence, ref[4], rtol=TOL)
    assert oc.gained == pytest.approx(ref[6], rel=TOL)
    # the depletion is resolved slice by slice (it differs along z), not spread evenly
    depletion = block(nt=16, nz=9)[1] - ln_gain
    assert np.all(depletion[:, 15:] > 0.0) and np.ptp(depletion[:, 20]) > 1e-3


def test_composite_refuses_absorbing_columns():
    _, ln_gain = block(absorbing=True)
    assert not fn_pass.composite_valid(ln_gain)
    ln_gain[ln_gain < 0] = -1e-15          # round-off below zero is accepted
    assert fn_pass.composite_valid(ln_gain)


def test_linear_form_range_and_log_domain_fallback():
    # Beyond exp(600) the linear variable would overflow: the check refuses it, and the log-domain form
    # stays finite and agrees with the closed form for the whole pulse (composition in time and z).
    x, ln_gain = block(nt=6, nz=4, c=50, scale=400.0)
    ln_gain += 60.0
    assert not fn_pass.linear_form_valid(x, ln_gain)
    total_in = x.sum(axis=0)
    ln_total = ln_gain.sum(axis=0)
    oc = fn_pass.amplify_block(x, ln_gain, linear=False)
    assert np.all(np.isfinite(x)) and np.isfinite(oc.peak_plane_fluence)
    # FN for the whole pulse (Frantz & Nodvik 1963, the output fluence Fsat·ln(1 + G·(e^x − 1)), rewritten
    # for large x): x + ln G + log1p((1 − G)·exp(−x)/G)
    has = total_in > 0
    t_in, ln_t = total_in[has], ln_total[has]
    expected = t_in + ln_t + np.log1p(np.expm1(-ln_t) * np.exp(-t_in))
    assert rel(x.sum(axis=0)[has], expected) < TOL
    # tiny fluences behind strong absorption leave the normal float range: refused too
    x2, ln_gain2 = block(nt=4, nz=3, c=20)
    x2 *= 1e-150
    ln_gain2[1] = -300.0
    assert not fn_pass.linear_form_valid(x2, ln_gain2)
    assert fn_pass.linear_form_valid(x2 * 1e120, ln_gain2 * 0.0 + 0.1)


def test_blocks_of_a_pass_agree_with_one_block(monkeypatch):
    # pass_medium gathers the pixels with fluence in blocks: many small blocks give the same beam,
    # gain, B-integral and bookkeeping as one block.
    rng = np.random.default_rng(3)
    n, nt, nz = 40, 10, 6
    xs = np.linspace(-2e-3, 2e-3, n)
    mask = np.hypot(xs[None, :], xs[:, None]) < 1.8e-3
    fluence = rng.uniform(0.0, 3e3, (nt, n, n))
    ln_gain = np.where(mask, rng.uniform(0.05, 0.4, (nz, n, n)), 0.0)

    def run(block_size, n2, loss):
        beam = BeamState(fluence.copy(), np.zeros_like(fluence), xs, xs, 1e-9, 1.064e-6)
        medium = layout.MediumState("rod", ln_gain.copy(), mask, 6.7e3, 2e-3, loss, n2)
        monkeypatch.setattr(layout, "block_pixels", lambda nt, nz: block_size)
        oc = layout.pass_medium(beam, medium, reverse=True)
        return beam, medium, oc

    # (no n2, no loss): composite slices; (n2, loss): every slice
    for n2, loss in ((0.0, 0.0), (3e-20, 5.0)):
        one = run(10**6, n2, loss)
        many = run(97, n2, loss)
        # the same operations per pixel (vector and scalar code paths of numpy may differ by an ulp)
        assert rel(many[0].fluence, one[0].fluence) < 1e-14
        assert np.max(np.abs(many[1].ln_gain - one[1].ln_gain)) < 1e-14
        assert rel(many[0].b_integral, one[0].b_integral) < 1e-14
        for field in ("energy_out_J", "passive_loss_J", "extracted_J", "peak_fluence_J_m2", "peak_intensity_W_m2",
                      "b_integral_step_rad"):
            assert getattr(many[2], field) == pytest.approx(getattr(one[2], field), rel=1e-14), field
        assert (one[2].b_integral_step_rad > 0) == (n2 > 0)
