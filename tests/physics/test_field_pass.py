"""A pass with diffraction (pass_medium_field: chunks of time slices, in threads) against the
split-step model written out plainly on the whole field, and the same on one thread and on two.

References
----------
Split-step (Strang) splitting, e.g. G. P. Agrawal, Nonlinear Fiber Optics, section 2.4: per z-slice half
a diffraction step, the gain and Kerr step, half a diffraction step. Angular spectrum: J. W. Goodman,
Introduction to Fourier Optics, section 3.10 (kernels.diffraction.propagate on the whole field).
Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963), per time slice in order, in the log domain; the Kerr
phase and B-integral increment k0·n2·dz·I with I the logarithmic mean of the entering and leaving
intensity; the amplitude sqrt(J_out/J_in).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from ampmodel.beam import field as field_path
from ampmodel.beam.field import start_beam
from ampmodel.beam.field_steps import field_space
from ampmodel.description import Step
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels import field_step
from ampmodel.pulsed.field_pass import pass_medium_field
from ampmodel.pulsed.passes import MediumState

N, NT, NZ, WIDTH, WAVELENGTH, DT = 32, 7, 3, 6e-3, 1.064e-6, 1e-9
X = (np.arange(N) - (N - 1) / 2) * (WIDTH / N)
R = np.hypot(X[None, :], X[:, None])
MASK = R < 2.4e-3
FSAT, INDEX, N2, LOSS, DZ = 6.0e3, 1.8, 3e-18, 3.0, 4e-3


def make(workers):
    seed = np.sqrt(2e4 * np.exp(-2 * R ** 2 / 1.8e-3 ** 2)) * np.exp(1j * 300.0 * R)
    weights = np.exp(-((np.arange(NT) - 3.0) / 2.0) ** 2)
    beam = start_beam(seed, weights, X, X, DT, WAVELENGTH, WIDTH, workers)
    gain = np.where(MASK, 0.35, 0.0) * (1.0 + 0.2 * np.arange(NZ))[:, None, None]
    medium = MediumState(name="rod", ln_gain=gain, mask=MASK, saturation_fluence_J_m2=FSAT, slice_length_m=DZ,
                         loss_per_m=LOSS, n2_m2_W=N2)
    return beam, medium


def plain_pass(beam, medium, substeps, reverse):
    """The model on the whole field: clip, then per z-slice propagate (substeps, each with the edge mask),
    and per time slice in order Frantz–Nodvik with the loss split around it inside the aperture (the
    loss alone outside), amplitude and Kerr phase; a last half step. Returns field, ln G, B-integral
    and the energies (J/m² summed): in, clipped, out, gained, passive, edge."""
    e = beam.field.copy()
    ln_g = medium.ln_gain.copy()
    b = beam.b_integral.copy()
    f = np.abs(e) ** 2
    e_in, clipped = f.sum(), f[:, ~MASK].sum()
    e[:, ~MASK] = 0.0
    h = math.exp(-0.5 * LOSS * DZ)
    b_coef = 2 * math.pi / WAVELENGTH * N2 * DZ / DT
    kx = kd.angular_frequencies(N, WIDTH)
    gained = passive = edge = 0.0

    def diffract(e, length):
        energy = (np.abs(e) ** 2).sum()
        transfer = kd.transfer_function(kx, kx, WAVELENGTH, INDEX, length / substeps)
        for _ in range(substeps):
            e = kd.propagate(e, transfer) * beam.edge
        return e, energy - (np.abs(e) ** 2).sum()

    for j, k in enumerate(range(NZ - 1, -1, -1) if reverse else range(NZ)):
        e, lost = diffract(e, 0.5 * DZ if j == 0 else DZ)
        edge += lost
        for t in range(NT):
            x = np.abs(e[t]) ** 2 / FSAT
            xh = x * h
            with np.errstate(divide="ignore"):
                xo = np.logaddexp(0.0, ln_g[k] + xh + np.log(-np.expm1(-xh)))
            xo = np.where(MASK, xo, xh)
            ln_g[k] = np.where(MASK, ln_g[k] - (xo - xh), ln_g[k])
            gained += (xo - xh)[MASK].sum() * FSAT
            passive += ((x + xo) * (1 - h)).sum() * FSAT
            xo = xo * h
            diff = xo - x
            with np.errstate(divide="ignore", invalid="ignore"):
                mean = np.where(diff == 0.0, x, diff / np.log1p(diff / x))      # logarithmic mean
                ratio = np.where(x > 0, xo / x, 0.0)
            mean[x == 0] = 0.0
            phase = b_coef * FSAT * mean
            b[t] += phase
            e[t] = e[t] * np.sqrt(ratio) * np.exp(1j * phase)
    e, lost = diffract(e, 0.5 * DZ)
    edge += lost
    return e, ln_g, b, dict(e_in=e_in, clipped=clipped, e_out=(np.abs(e) ** 2).sum(), gained=gained,
                            passive=passive, edge=edge)


@pytest.mark.parametrize("reverse, substeps", [(False, 1), (True, 2)])
def test_pass_in_chunks_and_threads_matches_the_plain_split_step(monkeypatch, reverse, substeps):
    """Chunks of 2 time slices (the last one shorter) on 2 threads: field, gain, B-integral and the
    bookkeeping as the plain model to 1e-12."""
    monkeypatch.setattr(field_step, "CHUNK_VALUES", 2 * N * N)
    monkeypatch.setattr(field_path, "substeps", lambda *args, **kwargs: substeps)
    beam, medium = make(workers=2)
    ref_e, ref_g, ref_b, ref = plain_pass(beam, medium, substeps, reverse)
    out = pass_medium_field(beam, medium, INDEX, reverse=reverse)
    area = beam.pixel_area_m2
    tol = 1e-12
    assert np.max(np.abs(beam.field - ref_e)) < tol * np.max(np.abs(ref_e))
    assert np.max(np.abs(medium.ln_gain - ref_g)) < tol
    assert np.max(np.abs(beam.b_integral - ref_b)) < tol * np.max(ref_b)
    assert out.b_integral_step_rad == pytest.approx(ref_b.max(), rel=tol)
    assert ref_b.max() > 0.05 and ref["gained"] > 0.1 * ref["e_in"]           # Kerr and gain at work
    for got, key in ((out.energy_in_J, "e_in"), (out.clipped_J, "clipped"), (out.energy_out_J, "e_out"),
                     (out.extracted_J, "gained"), (out.passive_loss_J, "passive")):
        assert got == pytest.approx(ref[key] * area, rel=tol), key
    assert out.edge_absorbed_J == pytest.approx(ref["edge"] * area, rel=1e-6, abs=tol * out.energy_in_J)
    assert out.substeps == substeps
    assert beam.fft_count == 2 * NT * substeps * (NZ + 1)


def test_one_thread_and_two_give_the_same_numbers(monkeypatch):
    """The wavefront keeps every operation on every number in the same order: results are identical,
    not merely close, on 1 and 2 threads."""
    monkeypatch.setattr(field_step, "CHUNK_VALUES", 2 * N * N)
    runs = []
    for workers in (1, 2):
        beam, medium = make(workers)
        out = pass_medium_field(beam, medium, INDEX)
        field_space(beam, Step(kind="space", index=1, length_m=0.2))
        runs.append((beam, medium, out))
    (b1, m1, o1), (b2, m2, o2) = runs
    assert np.array_equal(b1.field, b2.field)
    assert np.array_equal(m1.ln_gain, m2.ln_gain)
    assert np.array_equal(b1.b_integral, b2.b_integral)
    assert o1 == o2
