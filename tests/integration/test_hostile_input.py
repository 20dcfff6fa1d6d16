"""Input a config reader must survive: numbers beyond a float, integers beyond the TOML reader's digit
limit, nesting hundreds deep, a wrong type for a flag, a key of megabytes. Each ends as bad input (exit
2, the key or the file named, nothing written), never a traceback."""
from __future__ import annotations

import json
import os
import subprocess
from pathlib import Path

import pytest
from sweep_helpers import ampmodel

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "configs" / "single_pass_rod.toml"



def assert_refused(proc: subprocess.CompletedProcess, *texts: str) -> None:
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert "Traceback" not in proc.stderr and "nothing was run or written" in proc.stderr
    assert len(proc.stderr) < 5000, len(proc.stderr)           # nothing echoed in full
    for t in texts:
        assert t in proc.stderr, proc.stderr[-2000:]


@pytest.mark.parametrize("args, texts", [
    (["--set", "seed.energy_J=1" + "0" * 400], ["seed.energy_J = an integer of about 401 digits", "too large"]),
    (["--set", "step.0.reverse=2.5"], ["step[0].reverse = 2.5: must be true or false"]),
    (["--set", "seed.energy_J=" + "[" * 600 + "]" * 600], ["seed.energy_J = ", "not a string"]),
    (["--set", "seed.energy_J=" + "1" * 5000], ["seed.energy_J", "not a string"]),
])
def test_hostile_set_values_are_bad_input(tmp_path, args, texts):
    for command in ("check", "run"):
        proc = ampmodel(command, str(DEMO), *args, "--out", str(tmp_path / "o"), cwd=tmp_path) \
            if command == "run" else ampmodel(command, str(DEMO), *args, cwd=tmp_path)
        assert_refused(proc, *texts)
    assert not (tmp_path / "o").exists()


def _with(tmp_path: Path, name: str, edit) -> Path:
    path = tmp_path / name
    path.write_text(edit(DEMO.read_text()))
    return path


@pytest.mark.parametrize("name, edit, texts", [
    ("digits.toml", lambda t: t.replace("energy_J = 0.020", "energy_J = 1" + "0" * 5000),
     ["a number with too many digits", "exponent form"]),
    ("deep.toml", lambda t: t + "\n[sweep]\nx = " + "[" * 600 + "]" * 600 + "\n", ["nested too deep"]),
    ("dotted.toml", lambda t: "a." * 500 + "b = 1\n" + t, ["nested more than 32 levels deep"]),
    ("hugekey.toml", lambda t: t.replace("[seed]", "[seed]\n" + "k" * 5_000_000 + " = 1"),
     ["...(5000000 characters)", "unknown key"]),
])
def test_hostile_files_are_bad_input(tmp_path, name, edit, texts):
    path = _with(tmp_path, name, edit)
    assert_refused(ampmodel("check", str(path), cwd=tmp_path), *texts)
    out = tmp_path / "o"
    assert_refused(ampmodel("run", str(path), "--out", str(out), cwd=tmp_path), *texts)
    assert not out.exists()


def test_legal_looking_values_check_refuses_what_run_cannot_finish(tmp_path):
    """A NUL in the title (the result file cannot store it) and a clear aperture narrower than a pixel
    (no gain, no pump, no beam) are refused by check and run alike."""
    cw = ROOT / "configs" / "cw_end_pumped_yb_yag.toml"
    for config, setting, text in ((DEMO, 'title="a\\u0000b"', "holds a control character (U+0000)"),
                                  (cw, "medium.crystal.diameter_mm=1e-300", "covers no pixel of the grid")):
        assert_refused(ampmodel("check", str(config), "--set", setting, cwd=tmp_path), text)
        assert_refused(ampmodel("run", str(config), "--set", setting, "--out", str(tmp_path / "o"), cwd=tmp_path), text)
        assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("config, setting", [
    ("single_pass_rod.toml", "seed.energy_J=1e-250"),          # beam figures of a vanishing beam
    ("fibre_yb_cw.toml", "grid.width_mm=1e4"),                  # a fibre mode far narrower than a pixel
])
def test_what_check_accepts_run_completes_with_finite_figures(tmp_path, config, setting):
    import h5py
    import numpy as np
    out = tmp_path / "o"
    proc = ampmodel("run", str(ROOT / "configs" / config), "--set", setting, "--no-plots", "--quiet", "--out", str(out),
                    cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    with h5py.File(out / "result.h5") as f:
        for name in f["steps"]:
            for data in f["steps"][name].values():
                if data.dtype.kind == "f":
                    assert np.all(np.isfinite(data[()])), (name, data.name)
    import json
    summary = json.loads((out / "summary.json").read_text())
    numbers = [v for v in summary.values() if isinstance(v, float)]
    assert numbers and all(np.isfinite(numbers))


SPECTRUM_CONFIG = """\
title = "spectrum file"
[grid]
width_mm = 8.0
points = 16
time_slices = 4
[[medium]]
name = "rod"
length_mm = 10.0
diameter_mm = 6.0
small_signal_gain = 2.0
[medium.material]
wavelength_nm = 1030.0
emission_cross_section_cm2 = 2e-20
upper_lifetime_us = 950.0
refractive_index = 1.82
[medium.material.spectrum]
file = {file}
[seed]
energy_J = 0.001
duration_ns = 10.0
diameter_mm = 3.0
[[step]]
kind = "pass"
medium = "rod"
"""


def _spectrum_config(tmp_path: Path, file: str) -> Path:
    path = tmp_path / "spectrum.toml"
    path.write_text(SPECTRUM_CONFIG.replace("{file}", json.dumps(file)))
    return path


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no named pipes on this system")
def test_data_files_are_regular_files_read_without_waiting(tmp_path):
    """A pipe (it would block a plain read forever), a device, a path too long to open: refused at
    once, naming the key; a wrong line of a file is quoted by a short excerpt only."""
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    long_name = "x" * 5000 + ".csv"
    secret = tmp_path / "secret.csv"
    secret.write_text("root:" + "s" * 200 + ":0:0\n")
    for file, text in ((str(fifo), "not a regular file"), ("/dev/zero", "not a regular file"),
                       (long_name, "cannot be opened (File name too long)"), (str(secret), "must name the columns")):
        proc = ampmodel("check", str(_spectrum_config(tmp_path, file)), cwd=tmp_path)
        assert_refused(proc, "medium[0] (rod).material.spectrum.file", text)
        assert "s" * 40 not in proc.stderr           # at most a short excerpt of the file's line
    fifo_config = tmp_path / "config_pipe.toml"
    os.mkfifo(fifo_config)
    proc = ampmodel("check", str(fifo_config), cwd=tmp_path)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr


def test_out_paths_are_taken_literally_and_checked_before_computing(tmp_path):
    """--out / and --out . are refused before any computation; a dangling symbolic link is never
    written through (the run takes the next free name); a name with glob characters is a name: the
    clean-up of stale folders does not match other runs' folders with it."""
    for out in ("/", "."):
        assert_refused(ampmodel("run", str(DEMO), "--out", out, "--no-plots", "--quiet", cwd=tmp_path),
                       "not a folder name of its own")
    assert not Path("/-2").exists()
    link = tmp_path / "dangling"
    link.symlink_to(tmp_path / "no" / "such" / "folder")
    proc = ampmodel("run", str(DEMO), "--out", str(link), "--no-plots", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert link.is_symlink() and not link.exists() and (tmp_path / "dangling-2" / "result.h5").is_file()
    runs = tmp_path / "runs"
    stale = runs / ".other.abc.partial"
    stale.mkdir(parents=True)
    os.utime(stale, (1, 1))                  # old and unlocked: would be removed if matched
    proc = ampmodel("run", str(DEMO), "--out", str(runs / "*"), "--no-plots", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert stale.is_dir() and (runs / "*" / "result.h5").is_file()
