"""The radially resolved fibre: the doped core in rings, each with its own population.

- One ring is the overlap model: its outputs equal those of the overlap factors computed from
  Marcuse's mode field and A_core/A_clad (D. Marcuse, Bell Syst. Tech. J. 56, 703 (1977)), and the
  overlap model itself is checked against Saleh et al. (1990) and solve_bvp in test_fibre_cw.py.
- With a uniform excitation (a cladding pump and no signal), every ring has the same population and
  any number of rings gives the overlap model's small-signal gain, since Σ_j Γ_j = Γ.
- Unpumped, any number of rings transmits exp(−Γ·σa·Nt·L).
- Saturated by the signal, the rings near the axis, where the mode is brightest, are the most
  depleted (transverse hole burning), photons still balance, and the result settles as rings are added.
"""
from __future__ import annotations

import math

import fibre_reference as R
import numpy as np
import pytest

from ampmodel.fibre import model as F
from ampmodel.fibre import steady_state

SIGNAL_M = 1030e-9


def solve(medium, signal_W):
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), signal_W)
    assert sol.converged
    return sol, steady_state.output_figures(sol)


def marcuse_overlap(wavelength_m, a=5e-6, na=0.07):
    return R.core_fraction(a, a * R.marcuse_w_over_a(2 * math.pi * a * na / wavelength_m))


@pytest.mark.parametrize("direction", ["forward", "backward"])
def test_one_ring_is_the_overlap_model(direction):
    ring, ring_out = solve(R.make_fibre(rings=1, direction=direction, slices=60), 0.1)
    over, over_out = solve(R.make_fibre(rings=1, direction=direction, slices=60,
                                        signal_overlap=marcuse_overlap(SIGNAL_M), pump_overlap=(5 / 62.5) ** 2), 0.1)
    assert ring.model.overlap[ring.model.signal, 0] == pytest.approx(marcuse_overlap(SIGNAL_M), rel=1e-13)
    for key in ("signal_out_W", "pump_out_W"):
        assert ring_out[key] == pytest.approx(over_out[key], rel=1e-9)


@pytest.mark.parametrize("rings", [3, 9])
def test_uniform_excitation_gives_the_overlap_model_gain(rings):
    one, one_out = solve(R.make_fibre(rings=1, slices=40), 0.0)
    many, many_out = solve(R.make_fibre(rings=rings, slices=40), 0.0)
    assert np.ptp(many.n2, axis=0).max() < 1e-12                       # the same population in every ring
    assert many.n2[0] == pytest.approx(one.n2[0], rel=1e-12)
    assert many_out["gain"] == pytest.approx(one_out["gain"], rel=1e-10)


def test_unpumped_rings_transmit_like_the_overlap_model():
    sol, out = solve(R.make_fibre(rings=7, pump_W=None, slices=20), 1e-9)
    sa = np.interp(1030.0, R.TABLE_NM, R.ABSORPTION_CM2) * 1e-4
    assert out["gain"] == pytest.approx(math.exp(-marcuse_overlap(SIGNAL_M) * sa * 6e25 * 3.0), rel=1e-7)


def test_transverse_hole_burning_and_convergence_in_rings():
    results = {}
    for rings in (2, 4, 8, 16):
        sol, out = solve(R.make_fibre(rings=rings, slices=60, pump_W=10.0, core_diameter_m=25e-6,
                                      cladding_diameter_m=250e-6, core_na=0.06), 2.0)
        results[rings] = out["signal_out_W"]
        if rings == 8:
            near_input = sol.n2[:, 0]                # strong pump and signal: the axis is depleted most
            assert np.all(np.diff(near_input) > 0)   # inversion rises from the axis to the core edge
            assert near_input[-1] > 2 * near_input[0]
            assert abs(out["photon_balance_error"]) < 1e-9
    one = solve(R.make_fibre(rings=1, slices=60, pump_W=10.0, core_diameter_m=25e-6, cladding_diameter_m=250e-6,
                             core_na=0.06), 2.0)[1]["signal_out_W"]
    steps = [abs(results[b] - results[a]) for a, b in ((2, 4), (4, 8), (8, 16))]
    assert steps[0] > steps[1] > steps[2]
    assert steps[2] < 2e-3 * results[16]
    # the overlap model, blind to the hole burning, extracts more than the resolved core lets it
    assert one > results[16]
