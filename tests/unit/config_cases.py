"""Shared pieces of the config tests (imported as ``config_cases``): the good configs of tests/data as
dicts, and the problem lines of a config that ``load_config`` rejects."""
from __future__ import annotations

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib
from pathlib import Path

import pytest

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config

DATA = Path(__file__).resolve().parents[1] / "data"
MINIMAL = DATA / "good_minimal.toml"
FIBRE = DATA / "good_fibre.toml"


def good(path: Path = MINIMAL) -> dict:
    """A good config of tests/data as a dict (the minimal one unless told)."""
    return tomllib.loads(path.read_text())


def problems_of(source, overrides=()) -> list[str]:
    """The problem lines of a config that must be rejected; the error's text is those lines."""
    with pytest.raises(ConfigError) as info:
        load_config(source, overrides)
    assert str(info.value) == "\n".join(info.value.problems)
    return info.value.problems


def one_problem(source, overrides=()) -> str:
    problems = problems_of(source, overrides)
    assert len(problems) == 1, problems
    return problems[0]


def step_problems(step: dict) -> list[str]:
    """The problem lines of the minimal config with ``step`` added after its pass (as step[1])."""
    raw = good()
    raw["step"].append(step)
    return problems_of(raw)
