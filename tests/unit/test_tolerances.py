"""Yield and sensitivity of a tolerance run: the Wilson score interval against scipy.stats.binomtest,
Spearman's rank correlation and its p-value against scipy.stats.spearmanr, ranks against
scipy.stats.rankdata, on data made here (the integration tests compare on a run's own table)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from ampmodel.studies.figures import Limit
from ampmodel.studies.tolerances import ranks, sensitivity, spearman, wilson_interval, yield_table


@pytest.mark.parametrize("met, ran", [(0, 1), (1, 1), (0, 10), (10, 10), (7, 16), (1, 3), (50, 200), (199, 200)])
def test_wilson_interval_is_scipys(met, ran):
    ci = stats.binomtest(met, ran).proportion_ci(confidence_level=0.95, method="wilson")
    low, high = wilson_interval(met, ran)
    assert low == pytest.approx(ci.low, abs=1e-14) and high == pytest.approx(ci.high, abs=1e-14)
    assert 0.0 <= low <= met / ran <= high <= 1.0


def test_wilson_interval_of_nothing_is_none():
    assert wilson_interval(0, 0) is None


def test_ranks_are_scipys_with_ties():
    x = np.array([3.0, 1.0, 2.0, 2.0, 5.0, 1.0, 2.0, 9.0])
    assert np.array_equal(ranks(x), stats.rankdata(x))
    rng = np.random.default_rng(4)
    y = rng.integers(0, 6, size=200).astype(float)
    assert np.array_equal(ranks(y), stats.rankdata(y))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_spearman_is_scipys(seed):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=40)
    y = np.exp(x) + rng.normal(scale=0.5, size=40)
    y[::7] = np.round(y[::7])                       # some ties
    ref = stats.spearmanr(x, y)
    got = spearman(x, y)
    assert got["rho"] == pytest.approx(ref.statistic, abs=1e-13)
    assert got["p_value"] == pytest.approx(ref.pvalue, rel=1e-10)
    assert got["samples"] == 40


def test_spearman_leaves_out_nan_pairs_and_a_constant_side():
    x = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0])
    y = np.array([2.0, 1.0, np.nan, 5.0, 4.0, 7.0])
    keep = np.isfinite(y)
    ref = stats.spearmanr(x[keep], y[keep])
    got = spearman(x, y)
    assert got["samples"] == 5 and got["rho"] == pytest.approx(ref.statistic)
    assert got["p_value"] == pytest.approx(ref.pvalue)
    assert spearman(x, np.ones(6))["rho"] is None
    assert spearman(x, -x)["rho"] == -1.0 and spearman(x, -x)["p_value"] == 0.0


def test_yield_counts_the_samples_that_ran_and_meet_each_limit():
    flat = [{"gain": 5.0, "b": 1.0}, {"gain": 2.0, "b": 0.5}, None, {"gain": 4.0}, {"gain": 6.0, "b": 4.0}]
    table = yield_table([Limit("gain", ">=", 3.0), Limit("b", "<=", 3.0)], flat)
    gain, b = table["limits"]
    assert (gain["ran"], gain["met"]) == (4, 3)
    assert (b["ran"], b["met"]) == (4, 2)               # a sample without the figure does not meet it
    assert (table["all"]["ran"], table["all"]["met"]) == (4, 1)
    assert b["ci95"] == pytest.approx(list(wilson_interval(2, 4)))
    assert yield_table([], flat) is None


def test_sensitivity_ranks_the_wider_tolerance_first():
    """A figure that depends on two values alike (their product), one drawn 10x wider: the wider one
    correlates strongly, the narrow one weakly; a constant figure has no ranking."""
    rng = np.random.default_rng(7)
    n = 64
    values = [{"a": 1 + 0.01 * rng.standard_normal(), "b": 1 + 0.1 * rng.standard_normal()} for _ in range(n)]
    flat = [{"product": v["a"] * v["b"], "fixed": 1.0} for v in values]
    result = sensitivity(["product", "fixed"], flat, ["a", "b"], values)
    assert "fixed" not in result
    first, second = result["product"]
    assert first["path"] == "b" and second["path"] == "a"
    assert first["rho"] > 0.95 and abs(second["rho"]) < first["rho"]
    ref = stats.spearmanr([v["a"] for v in values], [f["product"] for f in flat])
    assert second["rho"] == pytest.approx(ref.statistic) and not math.isnan(second["p_value"])
