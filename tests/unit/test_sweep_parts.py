"""The pure parts of sweeps and tolerance runs: point order, config hash, draws, statistics, limits, labels."""
from __future__ import annotations

import math

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib
from pathlib import Path

import numpy as np
import pytest

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.plots.sweep import path_label, scale_for
from ampmodel.studies.points import point_raw, sweep_points
from ampmodel.studies.sizing import Limit, parse_limit, parse_target, parse_within
from ampmodel.studies.spread import distributions, draw, statistics
from ampmodel.studies.store import _as_array, config_hash, table_columns
from ampmodel.units import unit_of

ROOT = Path(__file__).resolve().parents[2]
GOOD = ROOT / "tests" / "data" / "good_minimal.toml"


def good() -> dict:
    return tomllib.loads(GOOD.read_text())


# --- points ---------------------------------------------------------------------------------------

def test_grid_order_is_nested_loops_in_table_order_last_fastest():
    paths, points = sweep_points({"seed.energy_J": [1, 2, 3], "medium.rod.small_signal_gain": [4, 5],
                                  "combine": "grid"})
    assert paths == ["seed.energy_J", "medium.rod.small_signal_gain"]
    assert [(p["seed.energy_J"], p["medium.rod.small_signal_gain"]) for p in points] == \
        [(1, 4), (1, 5), (2, 4), (2, 5), (3, 4), (3, 5)]


def test_grid_is_the_default_and_three_paths_multiply():
    _, points = sweep_points({"a": [1, 2], "b": [3, 4, 5], "c": [6, 7]})
    assert len(points) == 12
    assert points[0] == {"a": 1, "b": 3, "c": 6} and points[1] == {"a": 1, "b": 3, "c": 7}
    assert points[-1] == {"a": 2, "b": 5, "c": 7}


def test_zip_takes_the_lists_side_by_side():
    paths, points = sweep_points({"combine": "zip", "a": [1, 2, 3], "b": [10, 20, 30]})
    assert paths == ["a", "b"]
    assert points == [{"a": 1, "b": 10}, {"a": 2, "b": 20}, {"a": 3, "b": 30}]


def test_point_raw_sets_values_and_drops_the_sweep_and_spread_tables():
    raw = good()
    raw["sweep"] = {"seed.energy_J": [0.1, 0.2]}
    raw["spread"] = {"samples": 3, "seed.energy_J": {"normal": 0.1}}
    out = point_raw(raw, {"seed.energy_J": 0.2, "medium.rod.length_mm": 90.0, "step.0.reverse": True}, "t")
    assert "sweep" not in out and "spread" not in out
    assert out["seed"]["energy_J"] == 0.2 and out["medium"][0]["length_mm"] == 90.0
    assert out["step"][0]["reverse"] is True
    assert out["title"] == "minimal"                     # the config's own title is kept
    assert raw["seed"]["energy_J"] == 0.01               # the original is not changed
    load_config(out)


# --- the config hash (resume or refuse) -------------------------------------------------------------

def test_config_hash_ignores_sweep_spread_and_int_float_spelling():
    a = good()
    b = good()
    b["sweep"] = {"seed.energy_J": [0.1]}
    b["spread"] = {"samples": 2, "seed.energy_J": {"normal": 0.1}}
    b["medium"][0]["length_mm"] = 100               # int for 100.0
    assert config_hash(a) == config_hash(b)
    b["medium"][0]["length_mm"] = 100.5
    assert config_hash(a) != config_hash(b)


# --- tolerance draws --------------------------------------------------------------------------------

def spread_raw(seed: int = 1, samples: int = 10) -> dict:
    raw = good()
    raw["spread"] = {"samples": samples, "random_seed": seed, "seed.energy_J": {"normal": 0.1},
                     "medium.rod.small_signal_gain": {"uniform": [4.0, 6.0]}}
    return raw


def test_a_valid_spread_table_loads():
    config = load_config(spread_raw())
    assert config.raw["spread"]["samples"] == 10


def test_draws_are_reproducible_and_depend_on_the_seed():
    d = distributions(spread_raw())
    assert d["seed.energy_J"] == {"normal": 0.1, "nominal": 0.01}
    assert d["medium.rod.small_signal_gain"] == {"uniform": [4.0, 6.0]}
    a, b, c = draw(d, 10, 1), draw(d, 10, 1), draw(d, 10, 2)
    assert a == b
    assert a != c


def test_the_first_samples_of_a_longer_run_are_the_shorter_run():
    d = distributions(spread_raw())
    assert draw(d, 30, 5)[:7] == draw(d, 7, 5)


def test_a_path_draws_the_same_values_whatever_other_paths_there_are():
    d = distributions(spread_raw())
    alone = {"seed.energy_J": d["seed.energy_J"]}
    assert [p["seed.energy_J"] for p in draw(d, 8, 3)] == [p["seed.energy_J"] for p in draw(alone, 8, 3)]


def test_draws_follow_their_distributions():
    d = distributions(spread_raw())
    n = 20000
    pts = draw(d, n, 11)
    e = np.array([p["seed.energy_J"] for p in pts])
    g = np.array([p["medium.rod.small_signal_gain"] for p in pts])
    # normal: mean 0.01, relative std 0.1 (5 sigma bounds on the estimates)
    assert abs(e.mean() - 0.01) < 5 * 0.001 / math.sqrt(n)
    assert e.std(ddof=1) == pytest.approx(0.001, rel=5 / math.sqrt(2 * n))
    # uniform on [4, 6]: inside, mean 5, variance 1/3
    assert g.min() >= 4.0 and g.max() < 6.0
    assert abs(g.mean() - 5.0) < 5 * math.sqrt(1 / 3) / math.sqrt(n)
    assert g.var(ddof=1) == pytest.approx(1 / 3, rel=0.03)


def test_statistics_are_numpy_percentiles_of_the_samples():
    rng = np.random.default_rng(0)
    values = rng.normal(size=101)
    summaries = [{"output_energy_J": float(v), "warnings": []} for v in values] + [None]
    st = statistics(summaries)["output_energy_J"]
    assert st["p5"] == np.percentile(values, 5) and st["p95"] == np.percentile(values, 95)
    assert st["p50"] == np.median(values)
    assert st["count"] == 101 and st["unit"] == "J"
    assert st["std"] == pytest.approx(values.std(ddof=1))


# --- the table ----------------------------------------------------------------------------------------

def test_table_columns_carry_units_and_nan_for_a_failed_point():
    summaries = [{"output_energy_J": 1.0, "peak_fluence_J_cm2": 2.0, "title": "x", "warnings": ["w"]}, None]
    cols = table_columns(["seed.energy_J", "medium.rod.length_mm"],
                         [{"seed.energy_J": 0.1, "medium.rod.length_mm": 80.0},
                          {"seed.energy_J": 0.2, "medium.rod.length_mm": 90.0}], summaries)
    by = {c.name: c for c in cols}
    assert by["seed.energy_J"].units == "J" and by["medium.rod.length_mm"].units == "mm"
    assert by["peak_fluence_J_cm2"].units == "J/cm^2"
    assert math.isnan(by["output_energy_J"].values[1])
    assert by["warning_count"].values == [1, -1]
    assert "title" not in by


def test_column_types():
    assert _as_array([1, 2])[0].dtype == np.int64
    assert _as_array([1, 2.5])[0].dtype == np.float64
    assert _as_array([True, False])[0].dtype == bool
    data, text = _as_array(["flat", "gaussian"])
    assert text and list(data) == ["flat", "gaussian"]


# --- units and labels ---------------------------------------------------------------------------------

@pytest.mark.parametrize("key, unit", [("output_energy_J", "J"), ("peak_fluence_J_cm2", "J/cm^2"),
                                       ("length_mm", "mm"), ("gain", "1"), ("loss_per_cm", "1/cm"),
                                       ("b_integral_rad", "rad"), ("duration_ns", "ns"), ("gain_dB", "dB")])
def test_unit_of_reads_the_suffix(key, unit):
    assert unit_of(key) == unit


def test_labels_and_prefixes():
    assert path_label("seed.energy_J") == "seed energy"
    assert path_label("medium.rod.small_signal_gain") == "rod: small-signal gain G0"
    assert path_label("step.1.transmission") == "step 1: transmission"
    assert scale_for("J", [0.001, 0.04]) == (1e-3, "mJ")
    assert scale_for("W/cm^2", [3e8]) == (1e6, "MW/cm²")
    assert scale_for("mm", [80.0]) == (1.0, "mm")


# --- sizing input ------------------------------------------------------------------------------------

def test_sizing_arguments_parse():
    assert parse_target("output_energy_J=1.0") == ("output_energy_J", 1.0)
    assert parse_within("2,50") == (2.0, 50.0)
    assert parse_limit("peak_fluence_J_cm2<=5") == Limit("peak_fluence_J_cm2", "<=", 5.0)
    assert parse_limit("gain >= 3").margin(4.0) == 1.0
    assert parse_limit("b_integral_rad<3").margin(3.5) == -0.5


@pytest.mark.parametrize("parse, text", [(parse_target, "output_energy_J"), (parse_target, "=3"),
                                         (parse_target, "output_energy_J=lots"), (parse_within, "50,2"),
                                         (parse_within, "2"), (parse_within, "2,nan"), (parse_limit, "gain==3"),
                                         (parse_limit, "gain<=x")])
def test_bad_sizing_arguments_are_bad_input(parse, text):
    with pytest.raises(ConfigError) as info:
        parse(text)
    assert text.split(",")[0].split("=")[0] in info.value.problems[0]
