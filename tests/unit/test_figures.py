"""Figure paths: resolution against real summaries, flattening, errors with a did-you-mean, the checks
made before any run, and the form checked when a config loads."""
from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.config.sweep import figure_parts, split_limit
from ampmodel.output.summary import is_number
from ampmodel.studies.figures import (
    SUMMARY_KEYS,
    FigureError,
    Limit,
    check_before_run,
    figure_keys,
    flatten,
    parse_limit,
    resolve,
    with_figures,
)

ROOT = Path(__file__).resolve().parents[2]
GOLDEN = ROOT / "tests" / "data" / "golden"
CONFIGS = ROOT / "configs"


def golden(name: str) -> dict:
    return json.loads((GOLDEN / f"{name}.json").read_text())


def all_goldens() -> list[tuple[str, dict]]:
    return [(p.stem, json.loads(p.read_text())) for p in sorted(GOLDEN.glob("*.json"))]


# --- resolution --------------------------------------------------------------------------------------

def test_top_level_step_and_medium_figures_are_the_summary_numbers():
    s = golden("double_pass_side_pumped")
    assert resolve(s, "output_energy_J") == s["output_energy_J"]
    assert resolve(s, "steps.2.peak_fluence_J_cm2") == s["steps"][2]["peak_fluence_J_cm2"]
    assert resolve(s, "steps.0.energy_out_J") == s["steps"][0]["energy_out_J"]
    assert resolve(s, "media.rod.stored_energy_J") == s["media"][0]["stored_energy_J"]
    assert resolve(s, "seed_beam.fill_factor") == s["seed_beam"]["fill_factor"]


def test_a_repeats_inner_steps_and_a_trains_figures():
    s = golden("regen_ti_sapphire")
    assert s["steps"][0]["kind"] == "repeat"
    inner = s["steps"][0]["steps"][5]
    assert resolve(s, "steps.0.steps.5.energy_out_J") == inner["energy_out_J"]
    assert resolve(s, "steps.0.round_trip_count") == s["steps"][0]["round_trip_count"]
    t = golden("khz_end_pumped_train")
    assert resolve(t, "train.average_power_W") == t["train"]["average_power_W"]
    assert resolve(t, "train.pulses_to_steady_state") == t["train"]["pulses_to_steady_state"]


def test_a_medium_is_found_by_its_name_even_with_dots_in_it():
    s = {"media": [{"name": "pre", "stored_energy_J": 1.0}, {"name": "amp.2", "stored_energy_J": 2.5}]}
    assert resolve(s, "media.amp.2.stored_energy_J") == 2.5
    assert resolve(s, "media.pre.stored_energy_J") == 1.0


@pytest.mark.parametrize("path, words", [
    ("output_enrgy_J", "did you mean 'output_energy_J'"),
    ("steps.9.gain", "has steps 0 to 3, not step 9"),
    ("steps.0.peak_fluence_J_cm", "steps.0 has no figure 'peak_fluence_J_cm'; did you mean 'peak_fluence_J_cm2'"),
    ("media.rdo.stored_energy_J", "no medium 'rdo'; did you mean 'rod'? (media: rod)"),
    ("media.rod.stored_enrgy_J", "media.rod has no figure 'stored_enrgy_J'; did you mean 'stored_energy_J'"),
    ("steps.0.kind", "steps.0.kind is \"pass\", not a number"),
    ("train.average_power_W", "summary.json has no figure 'train'"),
    ("steps.0.steps.1.gain", "steps.0 has no steps"),
    ("steps.x.gain", "steps must be followed by a step index"),
    ("output energy", "is not a key name"),
    ("steps.0", "a figure path ends with a key"),
    ("media.rod", "media must be followed by a medium's name and a key"),
])
def test_paths_that_lead_nowhere_say_why(path, words):
    with pytest.raises(FigureError) as info:
        resolve(golden("double_pass_side_pumped"), path)
    assert words in str(info.value)


def test_flatten_lists_every_number_by_a_path_that_resolves_to_it():
    for name, s in all_goldens():
        flat = flatten(s)
        assert flat, name
        for path, value in flat.items():
            assert resolve(s, path) == value or (math.isnan(value) and math.isnan(resolve(s, path))), (name, path)
        # every number at the top level, of each step and of each medium is there
        assert {k for k, v in s.items() if is_number(v)} <= set(flat), name
        for i, step in enumerate(s["steps"]):
            assert {f"steps.{i}.{k}" for k, v in step.items() if is_number(v) and k != "index"} <= set(flat)
        for m in s["media"]:
            assert {f"media.{m['name']}.{k}" for k, v in m.items() if is_number(v)} <= set(flat)
        assert not any(p.endswith(".index") for p in flat)           # a step's index is its place in the path
    regen = flatten(golden("regen_ti_sapphire"))
    assert "steps.0.steps.6.gain" in regen
    assert not any("round_trips" in p or "energy_per_round_trip" in p for p in regen)   # lists left out
    train = flatten(golden("khz_end_pumped_train"))
    assert "train.average_power_W" in train and not any("pulse_energies_J" in p for p in train)


def test_figure_keys_put_the_top_level_first():
    keys = figure_keys([flatten(golden("single_pass_rod")), None, flatten(golden("double_pass_side_pumped"))])
    first_nested = next(i for i, k in enumerate(keys) if "." in k)
    assert all("." not in k for k in keys[:first_nested]) and all("." in k for k in keys[first_nested:])
    assert "steps.3.gain" in keys                     # from the second summary only


def test_with_figures_adds_the_named_paths_as_entries():
    s = golden("double_pass_side_pumped")
    shown = with_figures([s, None], ["steps.2.peak_fluence_J_cm2", "train.average_power_W"])
    assert shown[0]["steps.2.peak_fluence_J_cm2"] == s["steps"][2]["peak_fluence_J_cm2"]
    assert "train.average_power_W" not in shown[0] and shown[1] is None


def test_the_known_key_names_cover_every_number_of_every_example_summary():
    """SUMMARY_KEYS is checked before any run: every figure of every example must be in it (a new
    summary key goes into SUMMARY_KEYS with it)."""
    missing = []
    for name, s in all_goldens():
        for path in flatten(s):
            parts = path.split(".")
            step = len(parts) >= 3 and parts[-3] == "steps" and parts[-2].isdigit()
            level = ("top" if len(parts) == 1 else "step" if step else "medium" if parts[0] == "media"
                     else parts[0] if len(parts) == 2 else None)
            if level in SUMMARY_KEYS and parts[-1] not in SUMMARY_KEYS[level]:
                missing.append(f"{name}: {path}")
    assert not missing, missing


# --- before any run ----------------------------------------------------------------------------------

def test_checks_before_a_run_against_key_names_and_the_config():
    regen = load_config(CONFIGS / "regen_ti_sapphire.toml")
    assert check_before_run("output_energy_J", regen) is None
    assert check_before_run("worst_damage_margin") is None
    assert check_before_run("steps.0.damage_margin") is None
    assert check_before_run("steps.0.steps.6.peak_fluence_J_cm2", regen) is None
    assert check_before_run("media.crystal.stored_energy_J", regen) is None
    assert "did you mean 'b_integral_rad'" in check_before_run("b_integrl_rad")
    assert "a step has no figure 'peak_fluence'" in check_before_run("steps.0.peak_fluence", regen)
    assert "steps 0 to 1, not step 2" in check_before_run("steps.2.gain", regen)
    assert "steps 0 to 6, not step 7" in check_before_run("steps.0.steps.7.gain", regen)
    assert "has no steps, not step 0" in check_before_run("steps.1.steps.0.gain", regen)     # a loss step
    assert "no medium 'cristal' in the config; did you mean 'crystal'?" in \
        check_before_run("media.cristal.stored_energy_J", regen)
    assert "train has no figure 'average_power'" in check_before_run("train.average_power")
    assert check_before_run("some_object.any_key") is None              # not known before a run: left to it


def test_limits_parse_to_paths_and_bounds():
    assert parse_limit("steps.3.peak_fluence_J_cm2<=5") == Limit("steps.3.peak_fluence_J_cm2", "<=", 5.0)
    assert parse_limit("media.rod.stored_energy_J > 0.1") == Limit("media.rod.stored_energy_J", ">=", 0.1)
    assert not parse_limit("gain>=3").holds(math.nan)
    assert split_limit("worst_damage_margin<=0.5") == ("worst_damage_margin", "<=", 0.5)
    for bad, words in [("gain=<3", "expected FIGURE<=VALUE"), ("steps.a.gain<=3", "step index"),
                       ("gain<=inf", "finite number"), ("gain<=x", "'x' is not a number")]:
        with pytest.raises(ConfigError) as info:
            parse_limit(bad, "spread.limits[0]")
        assert info.value.problems[0].startswith(f"spread.limits[0] {bad}: ") and words in info.value.problems[0]
    assert figure_parts("steps.0.steps.2.gain") == [("step", 0), ("step", 2), ("key", "gain")]


def test_the_form_of_figures_and_limits_is_checked_when_the_config_loads():
    raw = {"title": "t", "grid": {"points": 16, "width_mm": 8.0, "time_slices": 4},
           "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 50.0, "diameter_mm": 6.0,
                       "slices": 2, "small_signal_gain": 3.0}],
           "seed": {"energy_J": 0.01, "duration_ns": 10.0, "diameter_mm": 4.0},
           "step": [{"kind": "pass", "medium": "rod"}],
           "sweep": {"seed.energy_J": [0.01, 0.02], "figures": ["steps.0.gain", "steps..gain", 3]},
           "spread": {"samples": 4, "seed.energy_J": {"normal": 0.01}, "figures": "gain",
                      "limits": ["gain>=2", "gain=>2", "media.rod.stored_energy_J<=nan"]}}
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    text = "\n".join(info.value.problems)
    assert "sweep.figures = [" in text and "must be an array of texts" in text
    assert 'spread.figures = "gain": must be an array of texts, e.g. figures = ["steps.0.peak_fluence_J_cm2"]' in text
    assert 'spread.limits[1] = "gain=>2": expected FIGURE<=VALUE' in text
    assert "spread.limits[2]" in text and "finite number" in text
    assert len(info.value.problems) == 4
    raw["sweep"]["figures"] = ["steps.0.gain", "steps..gain"]
    raw["spread"]["figures"] = ["gain"]
    raw["spread"]["limits"] = ["gain>=2"]
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    assert info.value.problems == ["<dict>: sweep.figures[1] = \"steps..gain\": steps must be followed by a step "
                                   "index and a key, e.g. steps.0.gain"]
    raw["sweep"]["figures"] = ["steps.0.gain"]
    config = load_config(raw)                          # figures and limits are not value paths
    assert "figures" in config.raw["sweep"]
