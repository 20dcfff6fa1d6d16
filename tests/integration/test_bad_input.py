"""Broken configs (tests/data/bad_*.toml): each is rejected with a message that points into the input.

Every file is checked twice: through ``load_config`` (the ConfigError lines) and through the command
line (``check`` and ``run``: exit code 2, the same lines on stderr, no traceback, nothing written).
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data"

# file -> (substrings the problem lines must hold, number of problems)
CASES: dict[str, tuple[list[str], int]] = {
    "bad_toml_syntax.toml": (["TOML syntax error at line 9, column 19", "units belong in the key's name"], 1),
    "bad_unknown_top_key.toml": (['titel = "broken": unknown key', "did you mean 'title'?"], 1),
    "bad_unknown_medium_key.toml": (["medium[0] (rod).slice = 20: unknown key", "did you mean 'slices'?"], 1),
    "bad_wrong_type.toml": (['medium[0] (rod).length_mm = "100": must be a number from 0.001 to 10000, not a string',
                             "write the number without quotes"], 1),
    "bad_bool_number.toml": (["seed.energy_J = true: must be a number > 0 and <= 1e6, not a boolean"], 1),
    "bad_nan.toml": (["grid.width_mm = nan:", "nan and inf are not allowed"], 1),
    "bad_negative_length.toml": (["medium[0] (rod).length_mm = -100.0: out of range: must be a number from 0.001 to 10000"], 1),
    "bad_transmission.toml": (["step[1].transmission = 1.2: out of range: must be a number > 0 and <= 1"], 1),
    "bad_missing_seed.toml": (["seed: missing section [seed]"], 1),
    "bad_missing_energy.toml": (["seed.energy_J: missing"], 1),
    "bad_pump_direction.toml": (["medium[0] (rod).pump.back_reflectance = 0.9: a pump entering at both ends has "
                                 "no back reflector",
                                 'medium[1] (slab).pump.direction = "backward": applies to end pumping only'], 2),
    "bad_gain_beyond_doping.toml": (["medium[0] (rod).small_signal_gain = 1e+20: more than the doping can give",
                                     "exp(σe·Nt·L) = 6.041e+16",
                                     "medium[1] (slab).stored_energy_J = 100.0: more than the doping can store",
                                     "raise doping_per_m3"], 2),
    "bad_unknown_material.toml": (['medium[0] (rod).material = "Nd:YGA": unknown material',
                                   "did you mean 'Nd:YAG'", "ampmodel media"], 1),
    "bad_unknown_pass_medium.toml": (['step[0].medium = "rdo": no such medium; media: rod',
                                      "did you mean 'rod'?"], 1),
    "bad_two_gains.toml": (["medium[0] (rod): two gain specifications (small_signal_gain, stored_energy_J)",
                            "give exactly one of"], 1),
    "bad_no_gain.toml": (["medium[0] (rod): no gain specification"], 1),
    "bad_step_kind.toml": (['step[0].kind = "pas"', "did you mean 'pass'?"], 1),
    "bad_wrong_step_key.toml": (["step[0].transmission = 0.9: 'transmission' is not a key of a 'pass' step",
                                 "keys: kind, name, medium, reverse"], 1),
    "bad_material_missing_key.toml": (["medium[0] (rod).material.upper_lifetime_us: missing"], 1),
    "bad_cross_section.toml": (["medium[0] (rod).material.emission_cross_section_cm2 = 2.8e-15: out of range",
                                "from 1e-24 to 1e-16"], 1),
    "bad_pump_geometry.toml": (['medium[0] (rod).pump.geometry = "top": must be one of \'end\', \'side\''], 1),
    "bad_seed_profile.toml": (['seed.profile = "tophat": must be one of'], 1),
    "bad_duplicate_media.toml": (['medium[1].name = "rod": duplicate medium name'], 1),
    "bad_diffraction.toml": (['step[1].kind = "filter": a \'filter\' step acts on the optical field',
                              "set grid.diffraction = true"], 1),
    "bad_seed_waist_and_curvature.toml": (["seed: both waist_mm and curvature_mm given: give one"], 1),
    "bad_m_squared.toml": (["seed.m_squared = 0.5: out of range: must be a number from 1 to 50"], 1),
    "bad_aperture_order.toml": (["step[1].order = 1.0: out of range: must be a number from 2 to 1000",
                                 "soft edge"], 1),
    "bad_limits_mute.toml": (['limits.mute = ["time-slices", "self-focussing"]: \'self-focussing\' is not one of the codes',
                              "did you mean 'self-focusing'?"], 1),
    "bad_relay_magnification.toml": (["step[1].magnification = 0.0: out of range: must be a number from 0.01"], 1),
    "bad_filter_pinhole.toml": (["step[1].pinhole_diameter_mm: missing: pinhole diameter"], 1),
    "bad_fft_workers.toml": (["grid.fft_workers = 0: out of range: must be an integer non-zero from -1"], 1),
    "bad_cw_mode.toml": (['seed.energy_J = 0.01: is a key of a pulsed seed', "a cw seed takes power_W",
                          "seed.power_W: missing"], 2),
    "bad_cw_pump_duration.toml": (["medium[0] (rod).pump.duration_us = 250.0: applies to pulsed mode only",
                                   "give its power as power_W"], 1),
    "bad_cw_pump_energy.toml": (["medium[0] (rod).pump.energy_J = 1.5: applies to pulsed mode only",
                                 "medium[0] (rod).pump.power_W: missing"], 2),
    "bad_cooling.toml": (['medium[0] (rod).cooling = "side": must be one of', "coolant_C = -300.0: out of range"], 2),
    "bad_cw_solver.toml": (["solver.max_iterations = 0: out of range: must be an integer from 1"], 1),
    "bad_cw_time_slices.toml": (["grid.time_slices = 32: applies to pulsed mode only"], 1),
    "bad_cw_damage_fluence.toml": (['step[1].damage_fluence_J_cm2 = 10.0: applies to mode = "pulsed" only',
                                    "give damage_intensity_W_cm2"], 2),
    "bad_solver_in_pulsed.toml": (['solver = {damping = 0.5}: the [solver] table', 'applies to mode = "cw" only'], 1),
    "bad_cw_inhomogeneous_pump.toml": (["medium[0] (rod).pump: a cw pump is modelled for homogeneously broadened",
                                        "Nd:phosphate glass"], 1),
    "bad_fibre.toml": (["medium[0] (f1).length_mm = 3000.0: is a key of bulk media; a fibre takes length_m",
                        "medium[0] (f1).length_m: missing"], 2),
    "bad_fibre_na_and_mfd.toml": (["medium[0] (f1): give exactly one of core_na", "mode_field_diameter_um"], 1),
    "bad_fibre_spectrum.toml": (["medium[0] (f1).material.spectrum: the arrays must have equal length",
                                 "absorption_cm2: 3"], 1),
    "bad_fibre_pump_direction.toml": (['medium[0] (f1).pump.direction = "backwards": must be one of',
                                       "did you mean 'backward'?"], 1),
    "bad_fibre_cladding_pump.toml": (["medium[0] (f1).cladding_diameter_um: missing: a pump launched into the "
                                      "cladding"], 1),
    "bad_fibre_step.toml": (['step[1].kind = "aperture": a fibre layout takes', "'pass' or 'loss'"], 1),
    "bad_fibre_seed_profile.toml": (["seed.diameter_mm = 0.01: a fibre's mode carries the signal"], 1),
    "bad_fibre_ase_without_spectrum.toml": (["medium[0] (f1).ase = true: ASE needs cross-section spectra",
                                             "[medium.material.spectrum]"], 1),
    "bad_fibre_seed_wavelength.toml": (["seed.wavelength_nm = 1300.0: outside the cross-section spectrum of "
                                        "fibre 'f1' (850 to 1150 nm)"], 1),
    "bad_fibre_with_bulk.toml": (['medium[1].kind = "bulk": a layout with a fibre is made of fibres only'], 1),
    "bad_fibre_solver.toml": (["solver = {max_iterations = 50}: the [solver] table sets the bulk cw iteration"], 1),
    "bad_repetition_rate_bulk.toml": (["medium[0] (rod): a pulse train (seed.repetition_rate_kHz) needs a pump "
                                       "that restores the gain between pulses"], 1),
    "bad_medium_table.toml": (["medium = {", "write [[medium]]"], 1),
    "bad_damage_pair.toml": (["step[1].damage_pulse_ns: missing"], 1),
    "bad_parabolic_end.toml": (['medium[0] (rod).pump.profile = "parabolic"', "side pumping only"], 1),
    "bad_float_for_int.toml": (["grid.points = 128.0: must be an integer", "write 128"], 1),
    "bad_sweep_path.toml": (['sweep."seed.energi_J"', "did you mean 'seed.energy_J'?"], 1),
    "bad_pump_quasi_three_level_no_doping.toml": (["medium[0] (c).doping_per_m3: missing",
                                                   "needs its ion density"], 1),
    "bad_spread_distribution.toml": (['spread."seed.energy_J".norml = 0.05: unknown key', "did you mean 'normal'"], 1),
    "bad_spread_samples.toml": (["spread.samples = 0: out of range: must be an integer from 1 to 100000"], 1),
    "bad_spread_uniform.toml": (['spread."medium.rod.small_signal_gain".uniform = [6.5, 5.5]',
                                 "the lower bound comes first"], 1),
    "bad_spread_path.toml": (['spread."seed.duration_sn"', "not a value this config can spread",
                              "'seed.duration_ns'"], 1),
    "bad_spread_many.toml": (["spread.random_seed = -1: out of range", "spread.samples: missing",
                              "the lower bound 0.5 is not an allowed value of small_signal_gain",
                              'spread."grid.points" = {normal = 0.1}: only numbers can spread',
                              "the config gives no value of wavelength_nm to spread around",
                              "give exactly one distribution",
                              'spread."medium.rod.length_mm" = 0.05: must be a table'], 7),
    "bad_many_problems.toml": (['titel = "broken"', "grid.points = 4", "medium[0] (rod).length_mm = -1.0",
                                "medium[0] (rod).material.refractive_index = 0.5", 'seed.energy_J = "ten"',
                                'seed.shape = "square"', "step[1].transmission = 0.0"], 7),
    "bad_empty.toml": (["missing section [grid]", "missing section [seed]", "medium: missing",
                        "step: missing"], 4),
    "bad_repeat_nested_key.toml": (["step[0].steps[1].transmission = 1.5: out of range: must be a number > 0 "
                                    "and <= 1"], 1),
    "bad_repeat_count_and_until.toml": (["step[0]: both count and until given", 'until = "peak"'], 1),
    "bad_repeat_inside_repeat.toml": (['step[0].steps[1].kind = "repeat"', "cannot hold another repeat"], 1),
    "bad_repeat_until.toml": (['step[0].until = "peek"', "did you mean 'peak'?"], 1),
    "bad_round_trip_short.toml": (["step[0].round_trip_ns = 5.0: shorter than the time the steps inside take "
                                   "(10.0069 ns"], 1),
    "bad_mode_diameter_with_diffraction.toml": (["step[0] (cavity).mode_diameter_mm = 2.0: applies without "
                                                 "diffraction only", "forms the cavity's own mode from its lenses",
                                                 "remove mode_diameter_mm, or set grid.diffraction = false"], 1),
    "bad_mode_diameter_negative.toml": (["step[0] (cavity).mode_diameter_mm = -2.0: out of range: must be a number "
                                         "> 0 and <= 10000", "a plausible range"], 1),
    "bad_mode_diameter_huge.toml": (["step[0] (cavity).mode_diameter_mm = 20000.0: out of range: must be a number "
                                     "> 0 and <= 10000", "a slip of unit"], 1),
    "bad_mode_diameter_wider_than_window.toml": (["step[0] (cavity).mode_diameter_mm = 12.0: the cavity mode is "
                                                  "wider than the grid's window (8 mm)", "widen grid.width_mm"], 1),
    "bad_continuous_pump_duration.toml": (["medium[0] (rod).pump.duration_us = 250.0: a continuous pump has no "
                                           "pulse length", "remove duration_us"], 1),
    "bad_train_no_pump.toml": (["medium[0] (rod): a pulse train (seed.repetition_rate_Hz) needs a pump",
                                "continuous = true"], 1),
    "bad_train_period.toml": (["seed.repetition_rate_Hz = 1000000.0: the period (1 us) is shorter than the pump "
                               "pulse (250 us)", "lower the repetition rate"], 1),
    "bad_train_without_rate.toml": (["train: applies to pulse trains of bulk media only",
                                     "give seed.repetition_rate_Hz"], 1),
    "bad_delay_negative.toml": (["step[0].delay_ns = -5.0: out of range: must be a number from 0 to 1e10",
                                 "a plausible range"], 1),
    # values outside their plausible range: the message names the range (README, "Plausible ranges")
    "bad_wavelength_unit.toml": (["seed.wavelength_nm = 1.064: out of range: must be a number from 150 to 20000",
                                  "seed wavelength; a plausible range"], 1),
    "bad_duration_range.toml": (["seed.duration_ns = 5000000000.0: out of range: must be a number from 1e-6 to 1e7",
                                 "1 fs to 10 ms"], 1),
    "bad_energy_range.toml": (["seed.energy_J = 20000000.0: out of range: must be a number > 0 and <= 1e6",
                               "a slip of unit"], 1),
    "bad_length_range.toml": (["medium[0] (rod).length_mm = 100000.0: out of range: must be a number from 0.001 "
                               "to 10000"], 1),
    "bad_loss_range.toml": (["medium[0] (rod).loss_per_cm = 250.0: out of range: must be a number from 0 to 100"], 1),
    "bad_lifetime_range.toml": (["medium[0] (rod).material.upper_lifetime_us = 230000000.0: out of range: must be "
                                 "a number from 0.0001 to 100000"], 1),
    "bad_damage_fluence_range.toml": (["step[1].damage_fluence_J_cm2 = 50000.0: out of range: must be a number from "
                                       "0.001 to 10000"], 1),
    "bad_space_length_range.toml": (["step[1].length_mm = 50000000.0: out of range: must be a number from 0 to 1e7"], 1),
    "bad_repetition_rate_range.toml": (["seed.repetition_rate_Hz = 1000000000000.0: out of range: must be a number "
                                        "> 0 and <= 1e10"], 1),
    # config files are data
    "bad_expression.toml": (['seed.energy_J = "2 * 0.005": must be a number > 0 and <= 1e6, not a string',
                             "expressions are not evaluated"], 1),
    "bad_date_for_number.toml": (["seed.energy_J = 2024-01-01: must be a number > 0 and <= 1e6, not a date/time"], 1),
    "bad_toml_duplicate_key.toml": (["TOML syntax error at line 11, column 18: Cannot overwrite a value",
                                     "a key given twice"], 1),
    "bad_toml_unclosed_table.toml": (["TOML syntax error at line 20, column 6: Expected ']' at the end of a table "
                                      "declaration"], 1),
    "bad_toml_unclosed_string.toml": (["TOML syntax error at line 2, column 17", "without its closing quote"], 1),
    "bad_not_utf8.toml": (["cannot read the config: not UTF-8 text", "at line 2, column 15", "save the file as UTF-8"], 1),
    # data files (paths relative to the config file's folder)
    "bad_spectrum_file_missing.toml": (['medium[0] (f1).material.spectrum.file = "no_such_spectrum.csv": no such '
                                        "file", "a relative path is taken from the config file's folder"], 1),
    "bad_spectrum_file_row.toml": (['medium[0] (f1).material.spectrum.file = "spectrum_bad_row.csv": line 4: '
                                    "expected 3 numbers separated by commas", "got 2 fields"], 1),
    "bad_spectrum_file_units.toml": (['spectrum.file = "spectrum_bad_units.csv": line 2: the header',
                                      "wavelength_nm, emission_cm2, absorption_cm2 (wavelengths in nm, "
                                      'cross-sections in cm2), not "wavelength_um'], 1),
    "bad_spectrum_file_order.toml": (['spectrum.file = "spectrum_bad_order.csv": column wavelength_nm: must be '
                                      "strictly increasing"], 1),
    "bad_spectrum_file_and_arrays.toml": (["medium[0] (f1).material.spectrum: both file and wavelength_nm given"], 1),
    # a measured seed profile (seed.profile = "file", frames beside the config)
    "bad_profile_file_missing.toml": (['seed.measured_profile.file = "no_such_frame.png": no such file',
                                       "a relative path is taken from the config file's folder"], 1),
    "bad_profile_format.toml": (['seed.measured_profile.file = "good_minimal.toml": unknown format \'.toml\'',
                                 ".csv", ".npy", ".png", ".tif", ".h5"], 1),
    "bad_profile_unreadable.toml": (['seed.measured_profile.file = "profile_not_an_image.png": cannot be read as an '
                                     "image", "greyscale PNG or TIFF"], 1),
    "bad_profile_not_2d.toml": (['seed.measured_profile.file = "profile_stack.npy": an array of shape (2, 16, 16), '
                                 "not a 2-D frame"], 1),
    "bad_profile_all_zero.toml": (["seed.measured_profile.background = 5000.0: nothing is left of the image",
                                   "lower the background"], 1),
    "bad_profile_dark_shape.toml": (['seed.measured_profile.dark_file = "profile_dark_small.csv": a frame of 12 x 12 '
                                     "pixels, the image has 16 x 16", "same shape"], 1),
    "bad_profile_pixel_missing.toml": (["seed.measured_profile.pixel_um: missing: camera pixel pitch"], 1),
    "bad_profile_pixel_range.toml": (["seed.measured_profile.pixel_um = 0.0: out of range: must be a number from "
                                      "0.05 to 10000"], 1),
    "bad_profile_wider_than_window.toml": (["grid.width_mm = 8.0: the measured beam (D4σ 12.6 x 12.6 mm from "
                                            "profile_frame.csv) is not smaller than the window",
                                            "widen grid.width_mm", "seed.measured_profile.pixel_um"], 1),
    "bad_profile_phase_without_diffraction.toml": (["seed.measured_profile.phase_file: a measured wavefront acts on "
                                                    "the optical field: set grid.diffraction = true"], 1),
    "bad_profile_with_diameter.toml": (['seed.diameter_mm = 4.0: with profile = "file" the measured beam\'s D4σ is '
                                        "its diameter: remove diameter_mm"], 1),
    "bad_profile_not_file_profile.toml": (['seed.measured_profile = {file = "profile_frame.csv", pixel_um = 250.0}: '
                                           'applies to profile = "file"'], 1),
}
FILES = sorted(CASES)

@pytest.fixture
def registry():
    """The built-in materials."""
    from ampmodel.materials import registry as real
    return real


def test_enough_broken_configs_are_covered():
    on_disk = sorted(p.name for p in DATA.glob("bad_*.toml"))
    assert on_disk == FILES
    assert len(FILES) >= 18


@pytest.mark.parametrize("name", FILES)
def test_load_config_reports_the_key(name, registry):
    path = DATA / name
    with pytest.raises(ConfigError) as info:
        load_config(path)
    problems = info.value.problems
    expected, count = CASES[name]
    assert len(problems) == count, problems
    assert all(line.startswith(f"{path}: ") for line in problems), problems
    text = "\n".join(problems)
    for part in expected:
        assert part in text, (part, problems)
    assert "Traceback" not in text


def run_cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    return subprocess.run([sys.executable, "-m", "ampmodel", *args], capture_output=True, text=True,
                          cwd=cwd, env=env, timeout=300)


def _rejects(name: str, tmp_path: Path, call) -> None:
    """``check`` and ``run`` of a broken config: exit code 2, the problem lines on stderr naming the
    file, no traceback, nothing written (neither --out nor anything in the working folder)."""
    path = DATA / name
    work = tmp_path / "work"
    work.mkdir()
    out = tmp_path / "out"
    expected, _ = CASES[name]
    for args in (["check", str(path)], ["run", str(path), "--out", str(out)]):
        code, stdout, stderr = call(args, work)
        assert code == 2, (args, stdout, stderr)
        assert "Traceback" not in stderr + stdout
        assert str(path) in stderr
        for part in expected:
            assert part in stderr, (args, part, stderr)
    assert not out.exists()
    assert list(work.iterdir()) == []                       # nothing written where it ran


@pytest.mark.parametrize("name", FILES)
def test_command_line_rejects_with_exit_code_2(name, tmp_path, monkeypatch, capsys):
    """Through ``cli.main`` in this process (the entry point itself: test_entry_point_rejects)."""
    from ampmodel.cli import main

    def call(args, cwd):
        monkeypatch.chdir(cwd)
        code = main(args)
        captured = capsys.readouterr()
        return code, captured.out, captured.err
    _rejects(name, tmp_path, call)


@pytest.mark.parametrize("name", ["bad_toml_syntax.toml", "bad_not_utf8.toml", "bad_spectrum_file_row.toml",
                                  "bad_many_problems.toml", "bad_energy_range.toml"])
def test_entry_point_rejects(name, tmp_path):
    """The same through ``python -m ampmodel`` in a child process, for a few of the files."""

    def call(args, cwd):
        proc = run_cli(*args, cwd=cwd)
        return proc.returncode, proc.stdout, proc.stderr
    _rejects(name, tmp_path, call)


def test_command_line_rejects_a_bad_set_path(tmp_path):
    out = tmp_path / "out"
    proc = run_cli("run", str(DATA / "good_minimal.toml"), "--out", str(out),
                    "--set", "medium.rdo.length_mm=50", "--set", "seed.energy_J=-1", cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert "--set medium.rdo.length_mm=50" in proc.stderr and "did you mean 'rod'?" in proc.stderr
    assert "seed.energy_J = -1: out of range" in proc.stderr
    assert "Traceback" not in proc.stderr + proc.stdout
    assert not out.exists()


def test_a_gain_beyond_any_number_is_found_by_check_before_it_says_valid(tmp_path, monkeypatch, capsys):
    """Every key valid, but the pump would raise ln G0 past 700: `check` builds the gain maps before it
    says "valid", so it and `run` exit 2 with the medium named, print no "valid" and write nothing."""
    from ampmodel.cli import main
    path = DATA / "unrepresentable_gain.toml"
    monkeypatch.chdir(tmp_path)
    for args in (["check", str(path)], ["run", str(path), "--out", str(tmp_path / "out")]):
        code = main(args)
        captured = capsys.readouterr()
        assert code == 2, captured
        assert "valid" not in captured.out
        assert "medium rod: the pump raises the single-pass small-signal gain to exp(" in captured.err
        assert "Traceback" not in captured.err
    assert list(tmp_path.iterdir()) == []


def test_good_minimal_passes_the_check(tmp_path):
    proc = run_cli("check", str(DATA / "good_minimal.toml"), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert list(tmp_path.iterdir()) == []
