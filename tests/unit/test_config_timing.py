"""Config keys of time: delay_ns, repeat steps with nested steps, continuous pumps, the seed's
repetition rate and the [train] table; their SI values and their problem messages."""
from __future__ import annotations

import copy

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib

import pytest
from config_cases import FIBRE, good, problems_of, step_problems
from config_cases import MINIMAL as GOOD

from ampmodel.config.load import load_config
from ampmodel.config.text import apply_overrides, dump_toml

C = 299792458.0


def with_repeat(**repeat) -> dict:
    raw = good()
    raw["step"] = [{"kind": "repeat", "steps": [{"kind": "pass", "medium": "rod"},
                                                 {"kind": "loss", "transmission": 0.9}], **repeat}]
    return raw


def test_repeat_with_count_and_nested_steps():
    raw = with_repeat(count=5, name="cell", delay_ns=2.0)
    raw["step"][0]["steps"].append({"kind": "space", "length_mm": 750.0})
    (step,) = load_config(raw).steps
    assert (step.kind, step.count, step.until, step.name) == ("repeat", 5, None, "cell")
    assert step.delay_s == pytest.approx(2e-9)
    assert [s.kind for s in step.steps] == ["pass", "loss", "space"]
    assert [s.index for s in step.steps] == [0, 1, 2] and all(s.parent == 0 for s in step.steps)
    assert step.steps[2].delay_s == pytest.approx(0.75 / C, rel=1e-12)
    assert step.round_trip_time_s == pytest.approx(0.75 / C, rel=1e-12)


def test_repeat_until_peak_with_round_trip_time():
    (step,) = load_config(with_repeat(until="peak", max_count=40, round_trip_ns=12.5)).steps
    assert (step.until, step.max_count, step.count) == ("peak", 40, None)
    assert step.round_trip_time_s == pytest.approx(12.5e-9)
    (default,) = load_config(with_repeat(until="peak")).steps
    assert default.max_count == 1000


def test_the_toml_form_reads_and_writes_back():
    text = GOOD.read_text().replace('[[step]]\nkind = "pass"\nmedium = "rod"', """
[[step]]
kind = "repeat"
count = 3

[[step.steps]]
kind = "pass"
medium = "rod"

[[step.steps]]
kind = "loss"
transmission = 0.8
""")
    raw = tomllib.loads(text)
    assert raw["step"][0]["steps"][1]["transmission"] == 0.8
    assert tomllib.loads(dump_toml(raw)) == raw
    assert load_config(raw).steps[0].steps[1].transmission == 0.8


@pytest.mark.parametrize("repeat, expected", [
    ({"count": 2, "until": "peak"}, "step[0]: both count and until given"),
    ({}, "step[0].count: missing: the number of round trips"),
    ({"count": 2, "max_count": 9}, 'step[0].max_count = 9: applies with until = "peak" only'),
    ({"until": "peek"}, "step[0].until = \"peek\": must be one of 'peak'; did you mean 'peak'?"),
    ({"count": 0}, "step[0].count = 0: out of range: must be an integer from 1 to 1e6"),
    ({"count": 2, "round_trip_ns": -1.0}, "step[0].round_trip_ns = -1.0: out of range"),
])
def test_repeat_problems(repeat, expected):
    problems = problems_of(with_repeat(**repeat))
    assert any(expected in line for line in problems), problems


def test_nested_key_paths_in_problems():
    raw = with_repeat(count=2)
    raw["step"][0]["steps"][1]["transmission"] = 1.5
    raw["step"][0]["steps"].append({"kind": "pass", "medium": "rdo"})
    raw["step"][0]["steps"].append({"kind": "repeat", "count": 2, "steps": []})
    raw["step"][0]["steps"].append({"kind": "loss", "transmision": 0.9})
    problems = problems_of(raw)
    text = "\n".join(problems)
    assert "step[0].steps[1].transmission = 1.5: out of range: must be a number > 0 and <= 1" in text
    assert "step[0].steps[2].medium = \"rdo\": no such medium" in text and "did you mean 'rod'?" in text
    assert "step[0].steps[3].kind = \"repeat\"" in text and "cannot hold another repeat" in text
    assert "step[0].steps[4].transmision = 0.9: unknown key; did you mean 'transmission'?" in text


def test_round_trip_shorter_than_the_steps_inside():
    raw = with_repeat(count=2, round_trip_ns=1.0)
    raw["step"][0]["steps"].append({"kind": "space", "length_mm": 600.0})       # 2 ns
    (line,) = problems_of(raw)
    assert "step[0].round_trip_ns = 1.0: shorter than the time the steps inside take (2.00138 ns" in line


@pytest.mark.parametrize("steps, expected", [
    ({"kind": "repeat", "count": 2, "steps": {"kind": "pass", "medium": "rod"}}, "write [[step.steps]]"),
    ({"kind": "repeat", "count": 2}, "step[1].steps: missing"),
    ({"kind": "repeat", "count": 2, "steps": []}, "step[1].steps = []: must be a non-empty array"),
    ({"kind": "loss", "transmission": 0.5, "delay_ns": -3}, "step[1].delay_ns = -3: out of range"),
    ({"kind": "loss", "transmission": 0.5, "count": 3}, "'count' is not a key of a 'loss' step (it belongs to "
                                                        "'repeat' steps)"),
])
def test_step_problems(steps, expected):
    problems = step_problems(steps)
    assert any(expected in line for line in problems), problems


def test_delay_on_any_step_and_space_default():
    raw = good()
    raw["step"] += [{"kind": "loss", "transmission": 0.9, "delay_ns": 40},
                    {"kind": "space", "length_mm": 300},
                    {"kind": "space", "length_mm": 300, "delay_ns": 0}]
    steps = load_config(raw).steps
    assert steps[0].delay_s == 0.0
    assert steps[1].delay_s == pytest.approx(40e-9)
    assert steps[2].delay_s == pytest.approx(0.3 / C, rel=1e-12)
    assert steps[3].delay_s == 0.0


def pumped(**pump) -> dict:
    raw = good()
    del raw["medium"][0]["small_signal_gain"]
    raw["medium"][0]["pump"] = {"geometry": "side", "wavelength_nm": 808.0, **pump}
    return raw


def test_continuous_pump():
    (m,) = load_config(pumped(continuous=True, power_W=50.0)).media
    assert m.pump.continuous and m.pump.power_W == 50.0 and m.pump.energy_J is None and m.pump.duration_s is None


@pytest.mark.parametrize("pump, expected", [
    ({"continuous": True, "power_W": 50.0, "duration_us": 100.0},
     "medium[0] (rod).pump.duration_us = 100.0: a continuous pump has no pulse length"),
    ({"continuous": True, "energy_J": 1.0}, "medium[0] (rod).pump.energy_J = 1.0: a continuous pump takes power_W"),
    ({"continuous": True}, "medium[0] (rod).pump.power_W: missing: the power of the continuous pump"),
    ({"power_W": 50.0}, "medium[0] (rod).pump.duration_us: missing: pump pulse length (pulsed mode), a number from 0.001 to 1e7; "
                        "or continuous = true with power_W"),
    ({"continuous": "yes", "power_W": 5.0}, 'medium[0] (rod).pump.continuous = "yes": must be true or false'),
])
def test_pump_problems(pump, expected):
    problems = problems_of(pumped(**pump))
    assert any(expected in line for line in problems), problems


def train(rate=1000.0, **more) -> dict:
    raw = pumped(continuous=True, power_W=50.0)
    raw["seed"]["repetition_rate_Hz"] = rate
    raw.update(more)
    return raw


def test_train_keys():
    config = load_config(train(2000.0, train={"tolerance": 1e-7, "max_pulses": 50, "method": "iterate"}))
    assert config.seed.repetition_rate_Hz == 2000.0
    assert (config.train.tolerance, config.train.max_pulses, config.train.method) == (1e-7, 50, "iterate")
    assert load_config(train()).train.tolerance == 1e-6


def test_train_problems():
    raw = good()
    raw["seed"]["repetition_rate_Hz"] = 1000.0
    (line,) = problems_of(raw)
    assert "medium[0] (rod): a pulse train (seed.repetition_rate_Hz) needs a pump" in line
    raw = good()
    raw["train"] = {"tolerance": 1e-6}
    (line,) = problems_of(raw)
    assert "train: applies to pulse trains of bulk media only" in line
    raw = train(1e9)
    raw["step"].append({"kind": "space", "length_mm": 600.0})
    (line,) = problems_of(raw)
    assert "seed.repetition_rate_Hz = 1000000000.0: the period (1 ns) is shorter than the layout's longest time (2.001 ns" in line
    (line,) = problems_of(train(0.0))
    assert "seed.repetition_rate_Hz = 0.0: out of range: must be a number > 0" in line
    (line,) = problems_of(train(train={"tolerance": 0.5}))
    assert "train.tolerance = 0.5: out of range" in line


def test_pulsed_pump_must_fit_in_the_period():
    raw = pumped(power_W=50.0, duration_us=800.0)
    raw["seed"]["repetition_rate_Hz"] = 2000.0            # 500 us period
    (line,) = problems_of(raw)
    assert "seed.repetition_rate_Hz = 2000.0" in line and "the pump pulse (800 us)" in line


def test_quasi_three_level_needs_its_density_once_time_passes():
    raw = good()
    raw["medium"][0]["material"]["absorption_cross_section_cm2"] = 1e-20
    load_config(raw)                                       # no time passes: fine
    raw["step"].append({"kind": "loss", "transmission": 0.9, "delay_ns": 10.0})
    (line,) = problems_of(raw)
    assert "medium[0] (rod).doping_per_m3: missing: time passes in this layout" in line


def test_nested_paths_for_set_and_sweep():
    raw = with_repeat(count=2)
    out = apply_overrides(raw, ["step.0.steps.1.transmission=0.7", "step.0.count=4"], "<test>")
    assert out["step"][0]["steps"][1]["transmission"] == 0.7 and out["step"][0]["count"] == 4
    config = load_config(raw, ["step.0.steps.1.transmission=0.7"])
    assert config.steps[0].steps[1].transmission == 0.7
    swept = copy.deepcopy(raw)
    swept["sweep"] = {"step.0.steps.1.transmission": [0.8, 0.9], "step.0.count": [2, 3]}
    load_config(swept)
    swept["sweep"] = {"step.0.steps.1.transmission": [0.8, 1.9]}
    (line,) = problems_of(swept)
    assert 'sweep."step.0.steps.1.transmission"[1] = 1.9: out of range' in line


def cw() -> dict:
    raw = good()
    raw["mode"] = "cw"
    raw["seed"] = {"power_W": 10.0, "diameter_mm": 4.0}
    return raw


def test_cw_runs_take_no_time():
    raw = cw()
    raw["step"] += [{"kind": "space", "length_mm": 300.0}]
    assert load_config(raw).steps[1].delay_s == 0.0          # a steady beam: no delays
    raw["step"] += [{"kind": "loss", "transmission": 0.9, "delay_ns": 5.0},
                    {"kind": "repeat", "count": 2, "steps": [{"kind": "pass", "medium": "rod"}]}]
    problems = problems_of(raw)
    assert any('step[2].delay_ns = 5.0: applies to mode = "pulsed" only' in line for line in problems), problems
    assert any('step[3].kind = "repeat": applies to mode = "pulsed" only' in line for line in problems), problems
    raw = cw()
    raw["seed"]["repetition_rate_Hz"] = 1000.0
    assert any('seed.repetition_rate_Hz = 1000.0: applies to pulses (mode = "pulsed")' in line
               for line in problems_of(raw))


def test_cw_pumps_are_continuous():
    raw = cw()
    del raw["medium"][0]["small_signal_gain"]
    raw["medium"][0]["loss_per_cm"] = 0.0
    raw["medium"][0]["pump"] = {"geometry": "side", "wavelength_nm": 808.0, "power_W": 50.0, "continuous": True}
    assert load_config(raw).media[0].pump.continuous
    raw["medium"][0]["pump"]["continuous"] = False
    (line,) = problems_of(raw)
    assert "medium[0] (rod).pump.continuous = false: a pump in a cw run is continuous" in line


def test_a_field_only_step_inside_a_repeat_needs_diffraction():
    raw = with_repeat(count=2)
    raw["step"][0]["steps"].append({"kind": "filter", "focal_mm": 500.0, "pinhole_diameter_mm": 0.5})
    problems = problems_of(raw)
    assert any("step[0].steps[2].kind = \"filter\": a 'filter' step acts on the optical field" in line
               for line in problems), problems
    raw["grid"]["diffraction"] = True
    assert load_config(raw).steps[0].steps[2].kind == "filter"


def test_repetition_rate_in_kHz():
    raw = pumped(continuous=True, power_W=50.0)
    raw["seed"]["repetition_rate_kHz"] = 2.5
    assert load_config(raw).seed.repetition_rate_Hz == pytest.approx(2500.0)
    raw = good()
    raw["seed"]["repetition_rate_kHz"] = 2.5
    (line,) = problems_of(raw)
    assert "medium[0] (rod): a pulse train (seed.repetition_rate_kHz) needs a pump" in line


def test_fibre_layouts_keep_their_own_trains():
    raw = good(FIBRE)
    raw["mode"] = "pulsed"
    raw["seed"] = {"energy_J": 1e-6, "duration_ns": 5.0, "repetition_rate_kHz": 50.0}
    assert load_config(raw).seed.repetition_rate_Hz == pytest.approx(5e4)     # no bulk pump needed
    raw["step"][0]["delay_ns"] = 3.0
    raw["train"] = {"tolerance": 1e-6}
    problems = problems_of(raw)
    assert any("step[0].delay_ns = 3.0: applies to bulk media only" in line for line in problems), problems
    assert any("train: applies to pulse trains of bulk media only" in line for line in problems), problems
