"""Every physical key of the config has a plausible range, and a value outside it is reported with the
key's path and that range; config values are data, never evaluated."""
from __future__ import annotations

import ast
import copy
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib

import pytest

from ampmodel.config import checks as config_checks
from ampmodel.config import schema as S
from ampmodel.config.checks import ConfigError, expected, rule
from ampmodel.config.load import load_config
from ampmodel.config.schema import FIBRE_MEDIUM, FIBRE_PUMP
from ampmodel.units import split_unit

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data"

# Where each table of the schema sits in a config, and how a config holding it is made.
REQUIRED_STEP_KEYS = {"loss": {"transmission": 0.9}, "aperture": {"diameter_mm": 5.0}, "space": {"length_mm": 10.0},
                      "lens": {"focal_mm": 100.0}, "filter": {"focal_mm": 100.0, "pinhole_diameter_mm": 1.0},
                      "relay": {}, "pass": {"medium": "rod"},
                      "repeat": {"steps": [{"kind": "loss", "transmission": 0.9}], "count": 2}}


def _bulk() -> dict:
    return tomllib.loads((DATA / "good_minimal.toml").read_text())


def _fibre() -> dict:
    return tomllib.loads((DATA / "good_fibre.toml").read_text())


def _pumped() -> dict:
    raw = _bulk()
    del raw["medium"][0]["small_signal_gain"]
    raw["medium"][0]["pump"] = {"geometry": "side", "energy_J": 1.0, "duration_us": 200.0, "wavelength_nm": 808.0}
    return raw


# Where each table other than a step's sits: the config holding it, the way into it, its path in problem lines.
PLACES = {"grid": (_bulk, ("grid",), "grid"),
          "medium": (_bulk, ("medium", 0), "medium[0] (rod)"),
          "pump": (_pumped, ("medium", 0, "pump"), "medium[0] (rod).pump"),
          "material": (_bulk, ("medium", 0, "material"), "medium[0] (rod).material"),
          "seed": (_bulk, ("seed",), "seed"),
          "fibre medium": (_fibre, ("medium", 0), "medium[0] (f1)"),
          "fibre pump": (_fibre, ("medium", 0, "pump"), "medium[0] (f1).pump")}


def _place(table: str, key: str, value) -> tuple[dict, str]:
    """A valid config with ``key`` of ``table`` set to ``value``, and the key's path in problem lines."""
    if table in PLACES:
        make, way_in, path = PLACES[table]
        raw = make()
        node = raw
        for part in way_in:
            node = node[part]
        node[key] = value
        return raw, f"{path}.{key}"
    kind = "loss" if table == "step time" else table.split()[1]
    raw = _bulk()
    raw["step"].append({"kind": kind, **copy.deepcopy(REQUIRED_STEP_KEYS[kind]), key: value})
    return raw, f"step[1].{key}"


TABLES = {"grid": S.GRID, "medium": S.MEDIUM, "pump": S.PUMP, "material": S.MATERIAL_TABLE, "seed": S.SEED,
          "step time": S.STEP_TIME, **{f"step {kind}": keys for kind, keys in S.STEP_KINDS.items()},
          "fibre medium": FIBRE_MEDIUM, "fibre pump": FIBRE_PUMP}
PHYSICAL = [(table, key, spec) for table, schema in TABLES.items() for key, spec in schema.items()
            if spec.kind in ("float", "floats") and split_unit(key)[1]]


def test_the_audit_covers_the_physical_keys():
    names = {key for _, key, _ in PHYSICAL}
    for key in ("wavelength_nm", "emission_cross_section_cm2", "length_mm", "energy_J", "duration_ns",
                "loss_per_cm", "loss_per_m", "power_W", "delay_ns", "focal_mm", "damage_fluence_J_cm2"):
        assert key in names
    assert len(PHYSICAL) >= 60


@pytest.mark.parametrize("table, key, spec", PHYSICAL, ids=[f"{t}.{k}" for t, k, _ in PHYSICAL])
def test_every_physical_key_has_a_plausible_range(table, key, spec):
    """A key with a unit has a lower and an upper bound, marked as a plausible range (the README lists
    them): a value in the wrong unit is caught, not run."""
    assert spec.plausible, (table, key)
    assert spec.gt is not None or spec.ge is not None, (table, key)
    assert spec.lt is not None or spec.le is not None, (table, key)


def _beyond(spec):
    high = spec.le if spec.le is not None else spec.lt
    return high * 10 if high > 0 else high + 10


@pytest.mark.parametrize("table, key, spec", PHYSICAL, ids=[f"{t}.{k}" for t, k, _ in PHYSICAL])
def test_a_value_beyond_the_range_names_the_key_and_the_range(table, key, spec):
    value = _beyond(spec)
    raw, path = _place(table, key, [value, value * 2] if spec.kind == "floats" else value)
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    lines = [line for line in info.value.problems if line.startswith(f"<dict>: {path} = ") and "out of range" in line]
    assert len(lines) == 1, info.value.problems
    line = lines[0]
    assert f": out of range: must be {expected(spec)} (" in line     # the allowed range, as the schema states it
    assert config_checks._fmt(spec.le if spec.le is not None else spec.lt) in line
    assert "a plausible range" in line


def test_the_ranges_are_written_as_toml_writes_numbers():
    assert rule(S.SEED["energy_J"]) == "> 0 and <= 1e6"
    assert rule(S.SEED["duration_ns"]) == "from 1e-6 to 1e7"
    assert rule(S.MATERIAL_TABLE["emission_cross_section_cm2"]) == "from 1e-24 to 1e-16"
    assert expected(S.STEP_KINDS["lens"]["focal_mm"]) == "a non-zero number from -1e8 to 1e8"


@pytest.mark.parametrize("text", ["2 * 0.005", "1e-3/2", "__import__('os').getcwd()", "0.01 if True else 1"])
def test_config_values_are_never_evaluated(text, tmp_path):
    """A string where a number belongs is refused as a string, whatever it holds; --set takes a TOML value
    or a plain string, never an expression."""
    raw = _bulk()
    raw["seed"]["energy_J"] = text
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    assert "seed.energy_J = " in info.value.problems[0] and "not a string" in info.value.problems[0]
    with pytest.raises(ConfigError) as info:
        load_config(DATA / "good_minimal.toml", [f"seed.energy_J={text}"])
    assert "not a string" in info.value.problems[0]


def test_no_eval_or_exec_in_the_package():
    """No call of eval, exec or compile anywhere in ampmodel (config values stay data)."""
    calls = []
    for path in sorted((ROOT / "ampmodel").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(), str(path))):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and \
                    node.func.id in ("eval", "exec", "compile", "__import__"):
                calls.append(f"{path.name}:{node.lineno} {node.func.id}")
    assert calls == []
