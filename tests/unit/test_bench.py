"""The benchmark's plain reference does the solver's work: same arrays, same updates, same result.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): the textbook update of the reference
loop; the solver's output per pixel must agree with it to round-off (the maps are the same), else the
benchmark would compare unlike work.
"""
from __future__ import annotations

import numpy as np
import pytest

from ampmodel import load_config, simulate
from ampmodel.bench import cases
from ampmodel.bench.report import table_text


@pytest.mark.parametrize("case", ["slab", "rod"])
@pytest.mark.parametrize("n2", [True, False])
def test_reference_loop_equals_simulate(n2, case):
    config = load_config(cases.bench_config(24, 8, 4, 3, n2=n2, lit=case))
    fluence, ln_gain, mask, fsat, reverses = cases.reference_arrays(config)
    assert list(reverses) == [False, True, False]
    cases.reference_loop(fluence, ln_gain, mask, fsat, reverses)
    result = simulate(config)
    out = result.steps[-1].fluence_J_m2
    lit = out > 0
    assert lit.sum() > 100 and np.all(fluence.sum(axis=0)[~lit] == 0.0)
    np.testing.assert_allclose(out[lit], fluence.sum(axis=0)[lit], rtol=1e-12, atol=0)
    rec = result.media["rod"]
    assert np.max(np.abs(rec.gain_final_per_m * rec.slice_length_m - ln_gain)) < 1e-12
    # and the case really saturates: the gain has been drawn down by more than round-off
    assert np.max(rec.gain_initial_per_m - rec.gain_final_per_m) * rec.slice_length_m > 1e-3
    assert (result.summary["b_integral_rad"] > 0) == n2
    # the slab lights every pixel (the ratio measures the kernel); the rod about 39 % of them
    share = float(lit.mean())
    if case == "slab":
        assert share == 1.0
    else:
        assert 0.3 < share < 0.5


def test_spectral_reference_loop_on_populations_equals_simulate():
    """A chirped seed: the plain loop on N2 with each slice's cross-sections from the material's
    spectrum does what simulate does, to round-off; and the spectrum really matters (the slices differ)."""
    config = load_config(cases.bench_config(16, 12, 4, 3, bandwidth_nm=cases.SPECTRAL_BANDWIDTH_NM))
    fluence, n2, sigma_e, sigma_a, photon_J, nt, dz, reverses = cases.spectral_arrays(config)
    assert np.ptp(sigma_e) > 0.3 * sigma_e.max()
    cases.reference_loop_spectral(fluence, n2, sigma_e, sigma_a, photon_J, nt, dz, reverses)
    result = simulate(config)
    np.testing.assert_allclose(result.steps[-1].fluence_J_m2, fluence.sum(axis=0), rtol=1e-12, atol=0)
    rec = result.media["rod"]
    assert np.max(np.abs(rec.ions.n2_per_m3(rec.gain_final_per_m) - n2)) < 1e-12 * nt
    assert np.max(rec.gain_initial_per_m - rec.gain_final_per_m) * rec.slice_length_m > 1e-3


def test_table_marks_each_figure():
    report = {"mode": "full", "timing": "best of 3", "machine": {"cpus": 2, "load_average_at_start": [0.5]},
              "figures": {"a": {"key": "a", "label": "one", "value": 0.5, "unit": "", "target": "<= 1.0",
                                "passed": True, "detail": "d1"},
                          "b": {"key": "b", "label": "two", "value": None, "unit": "", "target": "<= 1.5",
                                "passed": None, "detail": "not available"},
                          "c": {"key": "c", "label": "three", "value": 2.0, "unit": "s", "target": "<= 0.5 s",
                                "passed": False, "detail": "d3"}}}
    lines = table_text(report).splitlines()
    assert lines[1].split() == ["figure", "measured", "target", "result"]
    assert lines[2].split()[-1] == "pass" and lines[3].split()[-1] == "n/a" and lines[4].split()[-1] == "FAIL"
    assert "2 s" in lines[4] and "- b: not available" in lines
