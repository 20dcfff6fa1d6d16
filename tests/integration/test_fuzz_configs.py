"""Mutated example configs (hypothesis): any one value of an example replaced by another of any type
or size ends as a run with finite figures or as bad input (ConfigError: the command line's exit 2,
nothing written), never as another exception. Grids are kept small so that each case runs quickly."""
from __future__ import annotations

import math
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ampmodel.config.checks import ConfigError, Problems
from ampmodel.config.load import load_config
from ampmodel.config.text import parse_toml
from ampmodel.simulation import simulate

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ["single_pass_rod", "four_pass_yb_yag", "cw_end_pumped_yb_yag", "double_pass_side_pumped",
            "regen_ti_sapphire", "fibre_yb_pulsed"]
SMALL = {"points": 16, "time_slices": 6}
RAN: list[str] = []      # the mutated examples that ran (many mutations are bad input)


def _leaves(value, path=()):
    """(path, value) of every scalar in a config dict (lists of tables entered, arrays taken whole)."""
    if isinstance(value, dict):
        for k, v in value.items():
            yield from _leaves(v, path + (k,))
    elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        for i, v in enumerate(value):
            yield from _leaves(v, path + (i,))
    else:
        yield path, value


def _base(name: str) -> dict:
    raw = parse_toml((ROOT / "configs" / f"{name}.toml").read_text(), Problems(name))
    if isinstance(raw.get("grid"), dict):
        raw["grid"].update({k: v for k, v in SMALL.items() if k in raw["grid"] or k == "points"})
    return raw


VALUES = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64),
    st.sampled_from([0, -1, 1, 2, 10**400, 1e-300, 1e300, -0.0, 5e-324]),
    st.integers(min_value=-10**6, max_value=10**6),
    st.booleans(),
    st.text(max_size=8),
    st.lists(st.floats(allow_nan=False, width=64), max_size=3),
)


@settings(max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(example=st.sampled_from(EXAMPLES), pick=st.integers(min_value=0, max_value=10**6), value=VALUES)
def test_a_mutated_example_runs_or_is_bad_input(example, pick, value):
    raw = _base(example)
    leaves = [p for p, _ in _leaves(raw) if p and p[0] not in ("title",)]
    path = leaves[pick % len(leaves)]
    target = raw
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    try:
        config = load_config(raw, folder=ROOT / "configs")
        result = simulate(config)
    except ConfigError:
        return
    RAN.append(example)
    numbers = [v for v in result.summary.values() if isinstance(v, float)]
    assert all(math.isfinite(v) for v in numbers), (path, value, [k for k, v in result.summary.items()
                                                                  if isinstance(v, float) and not math.isfinite(v)])
