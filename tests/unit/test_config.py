"""Config loading: SI conversion, defaults, materials, pumps, steps, overrides, paths, TOML writing."""
from __future__ import annotations

import copy
import math

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib
from pathlib import Path

import pytest
from config_cases import MINIMAL as GOOD
from config_cases import good, one_problem, problems_of, step_problems

from ampmodel.config.checks import ConfigError, PathError
from ampmodel.config.load import load_config
from ampmodel.config.text import apply_overrides, dump_toml, resolve_path
from ampmodel.description import Limits

ROOT = Path(__file__).resolve().parents[2]

@pytest.fixture
def registry():
    """The built-in materials."""
    from ampmodel.materials import registry as real
    return real


# --- the good config -------------------------------------------------------------------------------

def check_minimal(config):
    assert config.title == "minimal"
    assert config.mode == "pulsed"
    assert config.grid.width_m == pytest.approx(8e-3)
    (rod,) = config.media
    assert rod.name == "rod" and rod.kind == "bulk" and rod.aperture == "round"
    assert rod.length_m == pytest.approx(0.1)
    assert rod.diameter_m == pytest.approx(6e-3)
    assert rod.loss_per_m == pytest.approx(10.0)
    assert rod.small_signal_gain == 5.0 and rod.stored_energy_J is None and rod.pump is None
    mat = rod.material
    assert mat.wavelength_m == pytest.approx(1064e-9)
    assert mat.emission_cross_section_m2 == pytest.approx(2.8e-23)
    assert mat.upper_lifetime_s == pytest.approx(230e-6)
    assert mat.refractive_index == 1.82
    assert mat.absorption_cross_section_m2 == 0.0
    assert config.seed.energy_J == 0.01
    assert config.seed.duration_s == pytest.approx(1e-8)
    assert config.seed.diameter_m == pytest.approx(4e-3)
    (step,) = config.steps
    assert (step.kind, step.index, step.medium, step.reverse) == ("pass", 0, "rod", False)


def test_minimal_file_loads_in_si():
    config = load_config(GOOD)
    check_minimal(config)
    assert config.source == str(GOOD)
    assert config.text == GOOD.read_text()
    assert config.raw == good()


def test_minimal_dict_loads_in_si():
    raw = good()
    config = load_config(raw)
    check_minimal(config)
    assert config.source == "<dict>"
    assert tomllib.loads(config.text) == raw
    assert raw == good()                                     # the caller's dict is not changed


def test_defaults():
    raw = good()
    del raw["title"]
    config = load_config(raw)
    assert config.title == "untitled"
    assert (config.grid.points, config.grid.time_slices, config.grid.diffraction) == (128, 64, False)
    assert config.media[0].slices == 20
    assert config.media[0].doping_per_m3 is None
    seed = config.seed
    assert (seed.shape, seed.profile, seed.order) == ("gaussian", "gaussian", 8.0)
    assert seed.wavelength_m == pytest.approx(1064e-9)      # the first medium's lasing wavelength
    assert config.media[0].material.broadening == "homogeneous"
    assert config.limits == Limits()


def test_title_defaults_to_the_file_stem(tmp_path):
    text = GOOD.read_text().replace('title = "minimal"\n', "")
    path = tmp_path / "my_amp.toml"
    path.write_text(text)
    assert load_config(path).title == "my_amp"
    assert load_config(str(path)).source == str(path)


def test_dict_from_python_types():
    import numpy as np
    raw = good()
    raw["grid"]["points"] = np.int64(64)
    raw["seed"]["energy_J"] = np.float64(0.02)
    raw["seed"]["wavelength_nm"] = None                     # None: not given
    raw["step"] = ({"kind": "pass", "medium": "rod"},)
    config = load_config(raw)
    assert config.grid.points == 64 and config.seed.energy_J == 0.02
    assert config.seed.wavelength_m == pytest.approx(1064e-9)
    assert tomllib.loads(config.text)["grid"]["points"] == 64


def test_other_units_and_keys():
    raw = good()
    raw["seed"].pop("duration_ns")
    raw["seed"].update(duration_ps=500, shape="sech2", profile="supergaussian", order=6, wavelength_nm=1060)
    raw["medium"][0].pop("diameter_mm")
    raw["medium"][0].update(width_mm=5, doping_per_m3=1.4e26, slices=7)
    raw["medium"][0]["material"].update(absorption_cross_section_cm2=1e-21, n2_m2_W=7e-20,
                                        broadening="inhomogeneous", name="my crystal", wavelength_nm=1060)
    raw["limits"] = {"damage_fraction": 0.3, "pixels_across_beam": 12}
    config = load_config(raw)
    assert config.seed.duration_s == pytest.approx(5e-10)
    assert (config.seed.shape, config.seed.profile, config.seed.order) == ("sech2", "supergaussian", 6.0)
    assert config.seed.wavelength_m == pytest.approx(1060e-9)
    rod = config.media[0]
    assert rod.aperture == "square" and rod.diameter_m == pytest.approx(5e-3)
    assert rod.doping_per_m3 == 1.4e26 and rod.slices == 7
    assert rod.material.name == "my crystal" and rod.material.quasi_three_level
    assert rod.material.absorption_cross_section_m2 == pytest.approx(1e-25)
    assert rod.material.broadening == "inhomogeneous"
    assert config.limits.damage_fraction == 0.3 and config.limits.pixels_across_beam == 12.0
    assert config.limits.b_integral_total_rad == Limits().b_integral_total_rad


def test_stored_energy():
    raw = good()
    raw["medium"][0].pop("small_signal_gain")
    raw["medium"][0]["stored_energy_J"] = 0.4
    rod = load_config(raw).media[0]
    assert rod.stored_energy_J == 0.4 and rod.small_signal_gain is None


# --- materials -------------------------------------------------------------------------------------

def test_builtin_material(registry):
    raw = good()
    raw["medium"][0]["material"] = "Nd:YAG"
    config = load_config(raw)
    assert config.media[0].material == registry.get("Nd:YAG")
    assert config.seed.wavelength_m == registry.get("Nd:YAG").wavelength_m


def test_material_base_with_overrides(registry):
    raw = good()
    raw["medium"][0]["material"] = {"base": "Nd:YAG", "emission_cross_section_cm2": 3.3e-19,
                                    "upper_lifetime_us": 200}
    mat = load_config(raw).media[0].material
    base = registry.get("Nd:YAG")
    assert mat.emission_cross_section_m2 == pytest.approx(3.3e-23)
    assert mat.upper_lifetime_s == pytest.approx(200e-6)
    assert mat.wavelength_m == base.wavelength_m
    assert mat.refractive_index == base.refractive_index
    assert mat.pump_absorption_per_m == base.pump_absorption_per_m
    assert mat.name == "Nd:YAG (modified)"
    assert "run config" in mat.sources["emission_cross_section_cm2"]


def test_unknown_material_lists_close_names(registry):
    raw = good()
    raw["medium"][0]["material"] = "nd:yga"
    line = one_problem(raw)
    assert line.startswith('<dict>: medium[0] (rod).material = "nd:yga": unknown material')
    assert "Nd:YAG" in line and "ampmodel media" in line


def test_unknown_base_material(registry):
    raw = good()
    raw["medium"][0]["material"] = {"base": "Nd:YGA", "upper_lifetime_us": 200}
    assert "medium[0] (rod).material.base" in one_problem(raw)


def test_material_spectrum_problems_name_their_keys():
    raw = good()
    raw["medium"][0]["material"]["spectrum"] = {"wavelength_nm": [1000.0], "emission_cm2": [1e-20]}
    problems = "\n".join(problems_of(raw))
    assert "medium[0] (rod).material.spectrum.wavelength_nm = [1000.0]: must be an array of at least 2" in problems
    assert "medium[0] (rod).material.spectrum.absorption_cm2: missing" in problems


def test_material_spectrum_stands_in_for_the_cross_sections():
    raw = good()
    mat = raw["medium"][0]["material"]
    del mat["emission_cross_section_cm2"]
    mat["spectrum"] = {"wavelength_nm": [1000.0, 1100.0], "emission_cm2": [1e-19, 3e-19],
                       "absorption_cm2": [0.0, 0.0]}
    material = load_config(raw).media[0].material
    assert material.emission_cross_section_m2 == pytest.approx(2.28e-23)          # at 1064 nm
    assert material.spectrum.wavelength_m == pytest.approx((1000e-9, 1100e-9))
    mat["wavelength_nm"] = 1200.0
    assert "material.wavelength_nm = 1200.0: outside the spectrum (1000 to 1100 nm)" in one_problem(raw)


# --- pumps -------------------------------------------------------------------------------------------

def pumped(**pump) -> dict:
    raw = good()
    rod = raw["medium"][0]
    rod.pop("small_signal_gain")
    rod["material"].update(pump_wavelength_nm=808.0, pump_absorption_per_cm=4.0)
    rod["pump"] = pump
    return raw


def test_pump_power_times_duration():
    pump = load_config(pumped(geometry="end", power_W=1000, duration_us=200)).media[0].pump
    assert pump.energy_J == pytest.approx(0.2)
    assert pump.duration_s == pytest.approx(2e-4)
    assert pump.wavelength_m == pytest.approx(808e-9)       # from the material
    assert pump.absorption_per_m is None                    # None: the material's
    assert (pump.profile, pump.order, pump.diameter_m) == ("flat", 8.0, None)
    assert (pump.back_reflectance, pump.absorbed_fraction) == (0.0, 1.0)
    assert (pump.transfer_efficiency, pump.quantum_efficiency) == (1.0, 1.0)


def test_pump_given_in_full():
    pump = load_config(pumped(geometry="side", energy_J=1.5, duration_us=250, wavelength_nm=805,
                              profile="parabolic", diameter_mm=7, absorbed_fraction=0.8,
                              transfer_efficiency=0.9, quantum_efficiency=0.95)).media[0].pump
    assert (pump.geometry, pump.energy_J, pump.profile) == ("side", 1.5, "parabolic")
    assert pump.wavelength_m == pytest.approx(805e-9) and pump.diameter_m == pytest.approx(7e-3)
    assert (pump.absorbed_fraction, pump.transfer_efficiency, pump.quantum_efficiency) == (0.8, 0.9, 0.95)
    end = load_config(pumped(geometry="end", energy_J=1, duration_us=100, absorption_per_cm=2.5,
                             back_reflectance=0.9)).media[0].pump
    assert end.absorption_per_m == pytest.approx(250.0) and end.back_reflectance == 0.9


@pytest.mark.parametrize("pump, expected", [
    (dict(geometry="end", energy_J=1, power_W=5, duration_us=100), "both energy_J and power_W"),
    (dict(geometry="end", duration_us=100), "pump.energy_J: missing"),
    (dict(geometry="end", energy_J=1), "pump.duration_us: missing"),
    (dict(geometry="side", energy_J=1, duration_us=100, back_reflectance=0.5), "end pumping only"),
    (dict(geometry="end", energy_J=1, duration_us=100, absorbed_fraction=0.5), "side pumping only"),
    (dict(geometry="end", energy_J=1, duration_us=100, wavelength_nm=1100), "shorter than the lasing"),
    (dict(geometry="end", energy_J=1, duration_us=100, quantum_efficiency=1.2), "pump.quantum_efficiency"),
    (dict(geometry="end", energy_J=1, duration_us=100, order=1), "pump.order = 1"),
    (dict(geometry="end", energy_J=1, duration_us=100, colour="red"), "pump.colour"),
])
def test_pump_problems(pump, expected):
    assert expected in one_problem(pumped(**pump))


def test_pump_needs_wavelength_and_absorption_from_somewhere():
    raw = pumped(geometry="end", energy_J=1, duration_us=100)
    del raw["medium"][0]["material"]["pump_wavelength_nm"]
    del raw["medium"][0]["material"]["pump_absorption_per_cm"]
    problems = problems_of(raw)
    assert len(problems) == 2
    assert "pump.wavelength_nm: missing" in problems[0]
    assert "pump.absorption_per_cm: missing" in problems[1]


# --- steps -------------------------------------------------------------------------------------------

def test_every_step_kind():
    raw = good()
    raw["step"] = [
        {"kind": "pass", "medium": 0, "name": "first pass"},
        {"kind": "loss", "transmission": 0.9, "damage_fluence_J_cm2": 10, "damage_pulse_ns": 10},
        {"kind": "aperture", "diameter_mm": 5},
        {"kind": "aperture", "width_mm": 4},                    # square, from the key
        {"kind": "space", "length_mm": 250},
        {"kind": "lens", "focal_mm": -500},
        {"kind": "pass", "medium": "rod", "reverse": True},
    ]
    steps = load_config(raw).steps
    assert [s.index for s in steps] == list(range(7))
    assert steps[0].medium == "rod" and steps[0].name == "first pass"
    assert steps[1].transmission == 0.9
    assert steps[1].damage_fluence_J_m2 == pytest.approx(1e5) and steps[1].damage_pulse_s == pytest.approx(1e-8)
    assert (steps[2].shape, steps[2].diameter_m) == ("round", pytest.approx(5e-3))
    assert (steps[3].shape, steps[3].diameter_m) == ("square", pytest.approx(4e-3))
    assert steps[4].length_m == pytest.approx(0.25)
    assert steps[5].focal_m == pytest.approx(-0.5)
    assert steps[6].reverse is True


@pytest.mark.parametrize("step, expected", [
    ({"kind": "lens", "focal_mm": 0}, "step[1].focal_mm = 0: out of range: must be a non-zero number"),
    ({"kind": "space", "length_mm": -1}, "step[1].length_mm = -1"),
    ({"kind": "space"}, "step[1].length_mm: missing"),
    ({"transmission": 0.9}, "step[1].kind: missing"),
    ({"kind": "aperture", "shape": "round", "width_mm": 3}, "a round aperture takes diameter_mm"),
    ({"kind": "aperture", "shape": "square"}, "step[1].width_mm: missing"),
    ({"kind": "pass", "medium": 3}, "step[1].medium = 3: no such medium"),
    ({"kind": "pass", "medium": True}, "step[1].medium = true"),
    ({"kind": "loss", "transmission": 0.5, "reverse": True}, "'reverse' is not a key of a 'loss' step"),
    ({"kind": "loss", "transmision": 0.5}, "did you mean 'transmission'?"),
    ({"kind": "space", "length_mm": 1, "name": 3}, "step[1].name = 3: must be a string"),
])
def test_step_problems(step, expected):
    problems = step_problems(step)
    assert any(expected in line for line in problems), problems


# --- validation behaviour ---------------------------------------------------------------------------

def test_every_problem_is_reported_at_once():
    raw = good()
    raw["grid"]["points"] = True
    raw["grid"]["width_mm"] = float("inf")
    raw["medium"][0]["material"]["refractive_index"] = -1
    raw["seed"]["sahpe"] = "flat"
    raw["seed"]["power_W"] = 3.0
    raw["step"][0]["medium"] = "rdo"
    raw["limits"] = {"damage_fraction": 0}
    problems = problems_of(raw)
    expected = ["grid.points = true: must be an integer from 8 to 4096, not a boolean",
                "grid.width_mm = inf: must be a number from 0.001 to 10000; nan and inf are not allowed",
                "medium[0] (rod).material.refractive_index = -1",
                "seed.sahpe = \"flat\": unknown key; did you mean 'shape'?",
                "seed.power_W = 3.0: is a key of a cw seed",
                "step[0].medium = \"rdo\": no such medium; media: rod",
                "limits.damage_fraction = 0"]
    assert len(problems) == len(expected), problems
    assert all(line.startswith("<dict>: ") for line in problems)
    for text in expected:
        assert sum(text in line for line in problems) == 1, (text, problems)


def test_seed_duration_and_mode_rules():
    raw = good()
    raw["seed"]["duration_ps"] = 10
    assert "several durations" in one_problem(raw)
    raw["seed"] = {"energy_J": 1, "diameter_mm": 1}
    assert "seed.duration_ns: missing" in one_problem(raw)
    raw = good()
    raw["mode"] = "cw"
    problems = problems_of(raw)
    assert not any("not available" in line for line in problems)    # cw mode is available
    assert any("seed.energy_J = 0.01: is a key of a pulsed seed" in line for line in problems)
    assert any("seed.power_W: missing" in line for line in problems)


@pytest.mark.parametrize("name, expected", [("", "must not be empty"), ("a/b", "must not contain '/'"),
                                            ("7", "must not be a plain number")])
def test_medium_names(name, expected):
    raw = good()
    raw["medium"][0]["name"] = name
    raw["step"][0]["medium"] = 0
    assert expected in one_problem(raw)


def test_unnamed_media_are_numbered():
    raw = good()
    del raw["medium"][0]["name"]
    raw["step"][0]["medium"] = "medium0"
    assert load_config(raw).media[0].name == "medium0"


def test_aperture_of_a_medium():
    raw = good()
    raw["medium"][0]["width_mm"] = 5.0
    assert "both diameter_mm and width_mm" in one_problem(raw)
    del raw["medium"][0]["width_mm"], raw["medium"][0]["diameter_mm"]
    assert "medium[0] (rod).diameter_mm: missing" in one_problem(raw)


def test_missing_file_and_syntax_error(tmp_path):
    assert one_problem(tmp_path / "nope.toml") == f"{tmp_path / 'nope.toml'}: no such config file"
    path = tmp_path / "broken.toml"
    path.write_text('title = "x"\n[grid\nwidth_mm = 1\n')
    line = one_problem(path)
    assert line.startswith(f"{path}: TOML syntax error at line 2, column ")


def test_sweep_is_checked_and_kept():
    raw = good()
    raw["sweep"] = {"seed.energy_J": [0.001, 0.01], "medium.rod.length_mm": [50, 100], "combine": "zip"}
    config = load_config(raw)
    assert config.raw["sweep"] == raw["sweep"]
    raw["sweep"] = {"seed.energy_J": [0.001, -1], "medium.rod.length_mm": [], "step.0.medium": ["rdo"],
                    "grid": [1], "combine": "cross"}
    problems = problems_of(raw)
    for text in ["sweep.combine = \"cross\": must be one of 'grid', 'zip'",
                 'sweep."seed.energy_J"[1] = -1: out of range',
                 'sweep."medium.rod.length_mm" = []: must be a non-empty array',
                 'sweep."step.0.medium"[0] = "rdo": no such medium',
                 'sweep.grid = [1]: not a value this config can sweep']:
        assert any(text in line for line in problems), (text, problems)
    raw["sweep"] = {"seed.energy_J": [0.001, 0.01], "grid.points": [64, 128, 256], "combine": "zip"}
    assert "needs lists of equal length" in one_problem(raw)


# --- overrides ----------------------------------------------------------------------------------------

def test_overrides_by_name_and_by_index():
    sets = ["medium.rod.length_mm=50", "medium.0.slices=5", "step.0.reverse=true", "seed.shape=flat",
            "grid.points=256", 'medium.rod.material.name="crystal"', "limits.damage_fraction=0.25"]
    config = load_config(GOOD, sets)
    rod = config.media[0]
    assert rod.length_m == pytest.approx(0.05) and rod.slices == 5 and rod.material.name == "crystal"
    assert config.steps[0].reverse is True
    assert config.seed.shape == "flat"
    assert config.grid.points == 256
    assert config.limits.damage_fraction == 0.25
    first, rest = config.text.split("\n", 1)
    assert first.startswith("#") and "medium.rod.length_mm=50" in first and "seed.shape=flat" in first
    assert tomllib.loads(rest) == config.raw
    assert config.raw["medium"][0]["length_mm"] == 50 and config.raw["seed"]["shape"] == "flat"


def test_apply_overrides_returns_a_new_dict():
    raw = good()
    before = copy.deepcopy(raw)
    out = apply_overrides(raw, ["step.0.medium=0", "seed.energy_J=2e-3"], "x.toml")
    assert raw == before
    assert out["step"][0]["medium"] == 0 and out["seed"]["energy_J"] == 0.002


def test_bad_override_paths():
    with pytest.raises(ConfigError) as info:
        apply_overrides(good(), ["medum.rod.length_mm=5", "medium.rdo.length_mm=5", "seed.energy_J",
                                 "step.4.transmission=0.5"], "x.toml")
    problems = info.value.problems
    assert len(problems) == 4, problems
    assert problems[0].startswith("x.toml: --set medum.rod.length_mm=5:") and "did you mean 'medium'?" in problems[0]
    assert "no item 'rdo' in medium" in problems[1] and "did you mean 'rod'?" in problems[1]
    assert "expected PATH=VALUE" in problems[2]
    assert "indices 0 to 0" in problems[3]


def test_override_problems_come_with_the_rest():
    problems = problems_of(GOOD, ["grid.pionts=64", "seed.energy_J=-1", "sed.energy_J=1"])
    assert len(problems) == 3, problems
    assert "--set sed.energy_J=1" in problems[0] and "did you mean 'seed'?" in problems[0]
    assert "grid.pionts = 64: unknown key; did you mean 'points'?" in problems[1]
    assert "seed.energy_J = -1: out of range" in problems[2]


# --- paths and TOML writing ---------------------------------------------------------------------------

def test_resolve_path():
    raw = good()
    raw["step"].append({"kind": "loss", "name": "polariser", "transmission": 0.9})
    raw["sweep"] = {"seed.energy_J": [1.0]}
    assert resolve_path(raw, "seed.energy_J") == (raw["seed"], "energy_J")
    assert resolve_path(raw, "medium.rod.length_mm") == (raw["medium"][0], "length_mm")
    assert resolve_path(raw, "medium.0.slices") == (raw["medium"][0], "slices")
    assert resolve_path(raw, "step.1.transmission") == (raw["step"][1], "transmission")
    assert resolve_path(raw, "step.polariser.transmission") == (raw["step"][1], "transmission")
    assert resolve_path(raw, "grid.points") == (raw["grid"], "points")
    assert resolve_path(raw, "medium.rod.material.wavelength_nm") == (raw["medium"][0]["material"], "wavelength_nm")
    assert resolve_path(raw, "title") == (raw, "title")
    assert resolve_path(raw, "step.1") == (raw["step"], 1)
    assert resolve_path(raw, 'sweep."seed.energy_J"') == (raw["sweep"], "seed.energy_J")
    for path, text in [("seed.energy_J.x", "not a table"), ("medium.2.slices", "indices 0 to 0"),
                       ("limits.damage_fraction", "no key 'limits'"), ("medium..slices", "empty part"),
                       ("grdi.points", "did you mean 'grid'?")]:
        with pytest.raises(PathError, match=text):
            resolve_path(raw, path)
    with pytest.raises(KeyError):                           # a PathError is a KeyError
        resolve_path(raw, "medium.pump.x")


def test_dump_toml_round_trips():
    raw = good()
    raw["step"].append({"kind": "loss", "transmission": 0.9})
    raw["medium"][0]["pump"] = {"geometry": "end", "energy_J": 1.0}
    raw["sweep"] = {"seed.energy_J": [0.001, 0.01], "combine": "grid"}
    text = dump_toml(raw)
    assert tomllib.loads(text) == raw
    assert "[[medium]]" in text and "[medium.material]" in text and "[medium.pump]" in text
    assert '"seed.energy_J" = [' in text
    for path in sorted((ROOT / "configs").glob("*.toml")):
        data = tomllib.loads(path.read_text())
        assert tomllib.loads(dump_toml(data)) == data, path.name
    nan = tomllib.loads(dump_toml({"x": float("nan")}))["x"]
    assert math.isnan(nan)


def test_a_seed_off_the_materials_wavelength_needs_its_spectrum():
    """The scalar cross-sections hold at the material's wavelength only: a seed elsewhere, or a
    stretched seed, is refused with the key and the fix; with a spectrum table it is accepted, and a
    centre outside the table is refused."""
    raw = good()
    raw["seed"]["wavelength_nm"] = 1060.0
    line = one_problem(raw)
    assert "seed.wavelength_nm = 1060.0" in line and "a seed at 1060 nm needs the cross-sections" in line
    assert "[medium.material.spectrum]" in line
    raw = good()
    raw["seed"]["bandwidth_nm"] = 4.0
    line = one_problem(raw)
    assert "seed.bandwidth_nm = 4.0" in line and "a stretched seed of 4 nm bandwidth" in line
    raw["medium"][0]["material"]["spectrum"] = {"wavelength_nm": [1050.0, 1064.0, 1080.0],
                                                "emission_cm2": [1e-20, 2.8e-19, 1e-20],
                                                "absorption_cm2": [0.0, 0.0, 0.0]}
    config = load_config(raw)
    assert config.seed.bandwidth_m == pytest.approx(4e-9) and config.seed.chirp == "up"
    raw["seed"]["wavelength_nm"] = 1100.0
    assert "outside the cross-section spectrum" in one_problem(raw)
