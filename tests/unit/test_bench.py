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


@pytest.mark.parametrize("n2", [True, False])
def test_reference_loop_equals_simulate(n2):
    config = load_config(cases.bench_config(24, 8, 4, 3, n2=n2))
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
