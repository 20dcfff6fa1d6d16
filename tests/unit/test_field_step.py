"""The field path's chunk kernels (kernels/field_step.py) and the threads that run them (chunks.py),
against plain formulas written out here.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): per time slice, in order,
J_out = Fsat·log1p(G·expm1(J_in/Fsat)) and ln G <- ln G − (J_out − J_in)/Fsat. The B-integral increment
and Kerr phase b·(J_out − J_in)/ln(J_out/J_in) (the logarithmic mean, from its definition), the amplitude
sqrt(J_out/J_in), the phase factor numpy's complex exponential. Angular spectrum: Goodman, Introduction
to Fourier Optics, section 3.10 (kernels.diffraction.propagate is the whole-field reference).
"""
from __future__ import annotations

import threading

import numpy as np
import pytest

from ampmodel.beam import chunks
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels import field_step as fs

N = 24
X = (np.arange(N) - (N - 1) / 2) * (6e-3 / N)
MASK = np.hypot(X[None, :], X[:, None]) < 2.2e-3
FSAT = 6.0e3


def plain_step(e, ln_gain, fsat, half_loss, b_coef, edge):
    """The gain and Kerr step written out per time slice (the model of optics.pass_medium_field):
    returns the field, ln G, the phases, and the energy in/out, gained and passive (J/m² summed)."""
    e = np.array(e, dtype=complex)
    ln_gain = np.array(ln_gain, dtype=float)
    if edge is not None:
        e = e * edge.ravel()
    inside = MASK.ravel()
    phases = np.zeros(e.shape)
    e_in = e_out = gained = passive = 0.0
    for t in range(e.shape[0]):
        j_in = np.abs(e[t]) ** 2
        x = j_in / fsat
        xh = x * half_loss
        with np.errstate(divide="ignore"):                                  # Frantz & Nodvik (1963),
            a = ln_gain + xh + np.log(-np.expm1(-xh))                       # log1p(G·expm1(x)) in the
        xo = np.logaddexp(0.0, a)                                           # log domain: no overflow
        xo = np.where(inside, xo, xh)                                       # outside: no gain medium
        ln_gain = np.where(inside, ln_gain - (xo - xh), ln_gain)
        passive += ((x + xo) * (1.0 - half_loss)).sum() * fsat
        gained += (xo - xh)[inside].sum() * fsat
        xo = xo * half_loss
        # the logarithmic mean (b − a)/ln(b/a) as (b − a)/log1p((b − a)/a): b − a is exact for b/a in
        # [1/2, 2] (Sterbenz), so it stays accurate where b is close to a; a where b = a, 0 where a = 0
        with np.errstate(divide="ignore", invalid="ignore"):
            diff = xo - x
            mean = np.where(diff == 0.0, x, diff / np.log1p(diff / x)) * fsat
            ratio = np.where(x > 0, xo / x, 0.0)
        mean[x == 0] = 0.0
        phase = b_coef * mean
        phases[t] = phase
        e[t] = e[t] * np.sqrt(ratio) * np.exp(1j * phase)
        e_in += j_in.sum()
        e_out += (xo * fsat).sum()
    return e, ln_gain, phases, e_in, e_out, gained, passive


def random_field(rows, scale, seed=1):
    rng = np.random.default_rng(seed)
    amplitude = np.sqrt(scale * (0.2 + rng.random((rows, N * N))))
    return amplitude * np.exp(2j * np.pi * rng.random((rows, N * N)))


CASES = [
    # fluence scale (J/m²), g·dz inside, half-slice transmission, b_coef (rad per J/m²), edge folded in
    (3e3, 0.4, 1.0, 2e-7, True),          # the benchmark's kind: small Kerr phases (Taylor series)
    (3e3, 0.4, 0.97, 2e-7, False),        # passive loss split around the gain
    (3e3, 0.4, 1.0, 0.0, True),           # no n2: the amplitude alone
    (8e3, -0.3, 0.99, 5e-5, True),        # an absorbing slice, phases above 0.1 rad (cos and sin)
    (4e6, 20.0, 1.0, 1e-9, False),        # beyond the linear form's range: the log-domain kernel
]


@pytest.mark.parametrize("scale, g, half_loss, b_coef, with_edge", CASES)
def test_gain_kerr_chunk_matches_the_plain_step(scale, g, half_loss, b_coef, with_edge):
    """Two chunks in order (the second sees the gain the first left) against the plain step over all
    time slices: field, ln G, B-increment and the sums to 1e-12 relative."""
    rows = 5
    e = random_field(rows, scale)
    e[1, 7] = 0.0                                            # a pixel without fluence
    ln_gain = np.where(MASK, g, 0.0).ravel()
    edge = kd.edge_mask(X, X, 6e-3) if with_edge else None
    ref_e, ref_g, ref_phase, e_in, e_out, gained, passive = plain_step(e, ln_gain, FSAT, half_loss, b_coef, edge)

    consts = fs.slice_constants(MASK, FSAT, half_loss, b_coef, edge)
    work = fs.ChunkWork(3, N * N, consts.inside.size)
    got_e, got_g = e.copy(), ln_gain.copy()
    plane = np.zeros(N * N)
    inc = np.zeros((rows, N * N))
    sums = [fs.gain_kerr_chunk(got_e[a:b], got_g, consts, work, plane, inc[a:b] if b_coef else None)
            for a, b in ((0, 3), (3, 5))]
    tol = 1e-12
    assert np.max(np.abs(got_e - ref_e)) < tol * np.max(np.abs(ref_e))
    assert np.max(np.abs(got_g - ref_g)) < tol * max(1.0, abs(g))
    if b_coef:
        assert np.max(np.abs(inc - ref_phase)) < tol * np.max(ref_phase)
    assert sum(s.energy_in for s in sums) == pytest.approx(e_in, rel=tol)
    assert sum(s.energy_out for s in sums) == pytest.approx(e_out, rel=tol)
    assert sum(s.gained for s in sums) == pytest.approx(gained, rel=tol, abs=tol * e_in)
    assert sum(s.passive for s in sums) == pytest.approx(passive, rel=tol, abs=tol * e_in)
    out = np.abs(ref_e) ** 2
    # the largest fluence of each time slice leaving the step
    np.testing.assert_allclose(np.concatenate([s.peak_slice_fluence for s in sums]), out.max(axis=1), rtol=tol)
    assert np.max(np.abs(plane - out.sum(axis=0))) < tol * out.sum(axis=0).max()


@pytest.mark.parametrize("scale", [1e-6, 1e-3, 0.05, 3.0])
def test_phase_factor_matches_the_complex_exponential(scale):
    rng = np.random.default_rng(2)
    phase = (rng.random((2, 500)) - 0.3) * scale
    amp = rng.random((2, 500)) + 0.5
    scratch = [np.empty((2, 500)) for _ in range(3)]
    out = fs.phase_factor_into(phase, np.empty((2, 500), complex), *scratch, amp)
    assert np.max(np.abs(out - amp * np.exp(1j * phase))) < 4e-16 * 2
    out = fs.phase_factor_into(phase, np.empty((2, 500), complex), *scratch, None, largest=scale)
    assert np.max(np.abs(out - np.exp(1j * phase))) < 4e-16 * 2


def test_propagate_chunk_in_place_equals_the_whole_field_step():
    """Sub-steps on a chunk, in its own memory, equal kernels.diffraction.propagate and the edge mask
    step by step; last_edge=False leaves the last mask out."""
    rng = np.random.default_rng(3)
    field = rng.standard_normal((4, N, N)) + 1j * rng.standard_normal((4, N, N))
    kx = kd.angular_frequencies(N, 6e-3)
    h = kd.transfer_function(kx, kx, 1e-6, 1.5, 0.02)
    edge = kd.edge_mask(X, X, 6e-3)
    ref = field.copy()
    for _ in range(3):
        ref = kd.propagate(ref, h) * edge
    got = field.copy()
    chunk = got[1:3]
    fs.propagate_chunk(chunk, h, edge, steps=3)
    assert np.max(np.abs(got[1:3] - ref[1:3])) < 1e-13 * np.max(np.abs(ref))
    assert np.array_equal(got[0], field[0]) and np.array_equal(got[3], field[3])
    got = field[1:3].copy()
    fs.propagate_chunk(got, h, edge, steps=3, last_edge=False)
    assert np.max(np.abs(got * edge - ref[1:3])) < 1e-13 * np.max(np.abs(ref))


def test_run_chunks_keeps_the_wavefront_order_and_spreads_the_work():
    """An ordered stage s of chunk c starts after stage s of chunk c − 1 (all stages ordered, or the odd
    ones: the gain steps of a pass), every stage after stage s − 1 of its chunk; both threads work."""
    events, lock = [], threading.Lock()

    def work(thread, c, s):
        with lock:
            events.append(("start", c, s, thread))
        with lock:
            events.append(("end", c, s, thread))

    for ordered in (True, lambda s: s % 2 == 1):
        events.clear()
        chunks.run_chunks(7, 5, work, 2, ordered=ordered)
        position = {(kind, c, s): i for i, (kind, c, s, _) in enumerate(events)}
        for c in range(7):
            for s in range(5):
                if c and (ordered is True or s % 2 == 1):
                    assert position[("start", c, s)] > position[("end", c - 1, s)]
                if s:
                    assert position[("start", c, s)] > position[("end", c, s - 1)]
        assert {t for *_, t in events} == {0, 1}
        assert {(c, t) for _, c, _, t in events} == {(c, c % 2) for c in range(7)}


def test_run_chunks_raises_what_a_thread_raised():
    def work(thread, c, s):
        if c == 3 and s == 1:
            raise ValueError("chunk 3")

    with pytest.raises(ValueError, match="chunk 3"):
        chunks.run_chunks(6, 4, work, 2)
    with pytest.raises(ValueError, match="chunk 3"):
        chunks.run_chunks(6, 4, work, 1)


def test_thread_count_reads_workers_as_scipy_fft_does():
    import os
    cpus = os.cpu_count() or 1
    assert chunks.thread_count(3) == 3
    assert chunks.thread_count(-1) == cpus
    assert chunks.thread_count(-cpus - 5) == 1


@pytest.mark.parametrize("largest", [1e-10, 3e-7, 2e-3, 0.02, 0.09])
def test_phase_factor_each_series_length_matches_the_complex_exponential(largest):
    """Phases below ``largest`` (1 to 5 Taylor terms kept), with and without an amplitude, against
    a·exp(iφ) by numpy's complex exponential, to a few ulp."""
    rng = np.random.default_rng(5)
    phase = (2.0 * rng.random((3, 400)) - 1.0) * largest
    phase[0, 0] = largest
    amp = rng.random((3, 400)) + 0.5
    scratch = [np.empty((3, 400)) for _ in range(3)]
    for a in (amp, None):
        out = fs.phase_factor_into(phase, np.empty((3, 400), complex), *scratch, a, largest=largest)
        ref = (1.0 if a is None else a) * np.exp(1j * phase)
        assert np.max(np.abs(out - ref)) < 4e-16 * 2


def test_log_mean_and_root_match_the_plain_formulas():
    """_log_mean_root: the logarithmic mean (b − a)/ln(b/a) of a = x and b = r·x from its definition
    (x where r = 1, 0 where r = 0; its Taylor series next to r = 1) and sqrt(r) by numpy, for ratios
    from 0 to e^40 and within 1e-9 of 1."""
    rng = np.random.default_rng(6)
    x = 10.0 ** rng.uniform(-8, 1, (3, 300))
    r = np.exp(rng.uniform(-3.0, 40.0, (3, 300)))
    r[0, :50] = 1.0 + rng.uniform(-1e-9, 1e-9, 50)
    r[1, :5] = 1.0
    r[2, :5] = 0.0
    got_r, work1, work2 = r.copy(), np.empty_like(r), np.empty_like(r)
    mean = fs._log_mean_root(x, got_r, work1, work2)
    assert mean is work2
    assert np.max(np.abs(got_r - np.sqrt(r)) / np.maximum(np.sqrt(r), 1e-300)) < 1e-14
    with np.errstate(divide="ignore", invalid="ignore"):
        b = r * x
        plain = np.where(r == 1.0, x, (b - x) / np.log(b / x))
    plain[r == 0.0] = 0.0
    near = np.abs(r - 1.0) < 1e-6                     # there the series in δ = r − 1 (exact for such r):
    d = r - 1.0                                       # (r − 1)/ln r = 1 + δ/2 − δ²/12 + δ³/24 − ...
    plain[near] = (x * (1.0 + d / 2 - d * d / 12 + d ** 3 / 24))[near]
    lit = r > 0.0
    assert np.max(np.abs(mean - plain)[lit] / plain[lit]) < 1e-14
    assert np.array_equal(mean[1, :5], x[1, :5]) and np.all(mean[2, :5] == 0.0)
