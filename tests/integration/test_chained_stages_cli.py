"""Chained stages from the command line: the provenance of the seed, rerun without the earlier file,
sweep points that read it, and the bad inputs (exit 2, the key named, nothing written)."""
from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import h5py
import numpy as np
import pytest
from sweep_helpers import BASE

from ampmodel.cli import EXIT_BAD_INPUT, EXIT_OK, main
from ampmodel.output.hdf5 import read_provenance

STAGE2 = """\
title = "stage 2"

[grid]
points = 16
width_mm = 8.0
time_slices = 8

[[medium]]
name = "amp"
length_mm = 100.0
diameter_mm = 7.0
slices = 4
small_signal_gain = 4.0

[medium.material]
wavelength_nm = 1064.0
emission_cross_section_cm2 = 2.8e-19
upper_lifetime_us = 230.0
refractive_index = 1.82
n2_m2_W = 7.0e-20

[seed]
from = "../s1/result.h5"
{seed}
[[step]]
kind = "pass"
medium = "amp"
"""

CW_STAGE = """\
title = "cw stage"
mode = "cw"

[grid]
points = 16
width_mm = 8.0

[[medium]]
name = "rod"
material = "Nd:YAG"
length_mm = 80.0
diameter_mm = 6.0
slices = 4
small_signal_gain = 3.0

[seed]
{seed}

[[step]]
kind = "pass"
medium = "rod"

[[step]]
kind = "loss"
transmission = 0.8
"""


def _cli(args, capsys, cwd: Path, monkeypatch) -> tuple[int, str, str]:
    monkeypatch.chdir(cwd)
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture
def stage1(tmp_path, capsys, monkeypatch) -> Path:
    """Stage 1 (the sweep tests' rod: pass, loss, pass back) run into tmp/s1; stage 2 configs go to tmp/cfg."""
    (tmp_path / "rod.toml").write_text(BASE)
    code, _, err = _cli(["run", "rod.toml", "--out", "s1", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, err
    (tmp_path / "cfg").mkdir()
    return tmp_path / "s1" / "result.h5"


def write_stage2(tmp_path: Path, seed: str = "", name: str = "stage2.toml", text: str = STAGE2) -> Path:
    path = tmp_path / "cfg" / name
    path.write_text(text.replace("{seed}", seed))
    return path


def test_the_seed_is_recorded_and_rerun_needs_no_earlier_file(stage1, tmp_path, capsys, monkeypatch):
    cfg = write_stage2(tmp_path)
    code, out, err = _cli(["run", cfg, "--out", "s2", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, err
    assert "seed: from ../s1/result.h5, the beam after its step 2 (pass; steps 0 to 2): full (written" in out
    summary = json.loads((tmp_path / "s2" / "summary.json").read_text())
    origin = summary["seed_from"]
    earlier = read_provenance(stage1)
    assert origin["sha256"] == hashlib.sha256(stage1.read_bytes()).hexdigest()
    assert origin["created_utc"] == earlier["created_utc"]
    assert origin["software_version"] == earlier["software_version"]
    assert (origin["file"], origin["step"], origin["step_count"], origin["beam"]) == ("../s1/result.h5", 2, 3, "full")
    assert read_provenance(tmp_path / "s2" / "result.h5")["seed_from"] == origin
    with h5py.File(stage1) as f1, h5py.File(tmp_path / "s2" / "result.h5") as f2:
        np.testing.assert_array_equal(f2["seed/from/fluence"][()], f1["output/fluence"][()])
        np.testing.assert_array_equal(f2["seed/from/b_integral"][()], f1["output/b_integral"][()])
        assert f2["seed"].attrs["duration"] == f1["seed"].attrs["duration"] == 10e-9
    assert summary["input_energy_J"] == pytest.approx(earlier["summary"]["output_energy_J"], rel=1e-13)
    shutil.rmtree(tmp_path / "s1")                  # the earlier run is gone: the rerun takes the stored seed
    code, out, err = _cli(["rerun", "s2/result.h5", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, out + err
    assert "the figures match" in out
    assert json.loads((tmp_path / "s2-rerun" / "summary.json").read_text())["seed_from"] == origin


def test_sweep_points_read_the_earlier_file(stage1, tmp_path, capsys, monkeypatch):
    """Two worker processes started in another folder than the config's (the path is made absolute for
    them); each point records the file's SHA-256, and a point reruns without the file."""
    sweep = '\n[sweep]\n"medium.amp.small_signal_gain" = [2.0, 6.0]\n'
    cfg = write_stage2(tmp_path, text=STAGE2 + sweep)
    code, out, err = _cli(["sweep", cfg, "--out", "sw", "--jobs", "2", "--no-plots", "--quiet"], capsys, tmp_path,
                          monkeypatch)
    assert code == EXIT_OK, err
    sha = hashlib.sha256(stage1.read_bytes()).hexdigest()
    points = sorted((tmp_path / "sw" / "points").glob("*.h5"))
    assert len(points) == 2
    outputs = []
    for point in points:
        summary = read_provenance(point)["summary"]
        assert summary["seed_from"]["sha256"] == sha
        outputs.append(summary["output_energy_J"])
    assert outputs[1] > outputs[0]
    shutil.rmtree(tmp_path / "s1")
    code, out, err = _cli(["rerun", points[0], "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK and "the figures match" in out, out + err
    # a point file leaves the full beam out (the folder's size); its rerun's result.h5 holds it
    with h5py.File(points[0]) as f:
        assert "output/fluence" not in f
    with h5py.File(tmp_path / "sw-0000-rerun" / "result.h5") as f:
        assert f["output/fluence"].shape == (8, 16, 16)
    third = write_stage2(tmp_path, text=STAGE2.replace("../s1/result.h5", "../sw/points/0000.h5"), name="s3.toml")
    code, _, err = _cli(["run", third, "--out", "s3"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT and "seed.from" in err and "`ampmodel rerun` the point" in err, err


def test_a_cw_stage_takes_the_intensity_after_a_step(tmp_path, capsys, monkeypatch):
    (tmp_path / "cfg").mkdir()
    first = write_stage2(tmp_path, 'power_W = 2.0\ndiameter_mm = 3.0', "cw1.toml", CW_STAGE)
    code, _, err = _cli(["run", first, "--out", "c1", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, err
    second = write_stage2(tmp_path, 'from = "../c1/result.h5"\nfrom_step = 0', "cw2.toml", CW_STAGE)
    code, _, err = _cli(["run", second, "--out", "c2", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, err
    with h5py.File(tmp_path / "c1" / "result.h5") as f1, h5py.File(tmp_path / "c2" / "result.h5") as f2:
        np.testing.assert_array_equal(f2["seed/intensity"][()], f1["steps/000/intensity"][()])
    s1 = json.loads((tmp_path / "c1" / "summary.json").read_text())
    s2 = json.loads((tmp_path / "c2" / "summary.json").read_text())
    assert s2["input_power_W"] == pytest.approx(s1["steps"][0]["power_out_W"], rel=1e-12)
    assert s2["seed_from"]["beam"] == "intensity"
    # a pulsed stage cannot take a cw result
    third = write_stage2(tmp_path, text=STAGE2.replace("../s1/", "../c1/"))
    code, _, err = _cli(["run", third, "--out", "c3"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT and "seed.from" in err and "a result of a cw run" in err, err
    assert not (tmp_path / "c3").exists()


def _damage(stage1: Path, tmp_path: Path, how: str) -> str:
    """A copy of stage 1's result, damaged as ``how`` says; its path relative to the cfg folder."""
    target = tmp_path / "bad" / "result.h5"
    target.parent.mkdir(exist_ok=True)
    if how == "text":
        target.write_text("wavelength_nm, emission_cm2\n1064, 1e-19\n")
    elif how == "empty hdf5":
        with h5py.File(target, "w") as f:
            f.attrs["title"] = "something else"
    else:
        shutil.copy(stage1, target)
        with h5py.File(target, "a") as f:
            if how == "incomplete":
                f.attrs["complete"] = False
            elif how == "wrong type":
                f["seed"].attrs["wavelength"] = "1064 nm"
            elif how == "no full beam":
                del f["output"]
            elif how == "fibre result":
                f.create_group("fibre")
            elif how == "beam of another shape":
                del f["output/fluence"]
                f["output/fluence"] = np.ones((3, 16, 16))
    return "../bad/result.h5"


@pytest.mark.parametrize("case, seed, grid, key, words", [
    ("missing", 'from = "../nowhere/result.h5"', "", "seed.from", "run the earlier stage first"),
    ("folder", 'from = "../s1"', "", "seed.from", "not a file"),
    ("text", None, "", "seed.from", "cannot be read as HDF5"),
    ("empty hdf5", None, "", "seed.from", "not a result file of ampmodel"),
    ("incomplete", None, "", "seed.from", "not complete"),
    ("wrong type", None, "", "seed.from", "attribute wavelength of /seed is str, not float"),
    ("no full beam", None, "", "seed.from", "give seed.from_step"),
    ("fibre result", None, "", "seed.from", "a layout of fibres"),
    ("beam of another shape", None, "", "seed.from", "/output/fluence is float64 of shape (3, 16, 16), not numbers"),
    ("from_step alone", "from_step = 1\nenergy_J = 0.01\nduration_ns = 10.0\ndiameter_mm = 4.0", "", "seed.from_step",
     "give seed.from too"),
    ("step out of range", 'from = "../s1/result.h5"\nfrom_step = 3', "", "seed.from_step", "steps 0 to 2"),
    ("step not an integer", 'from = "../s1/result.h5"\nfrom_step = 1.5', "", "seed.from_step", "integer"),
    ("energy given", 'from = "../s1/result.h5"\nenergy_J = 0.01', "", "seed.energy_J", "remove this key"),
    ("wavelength given", 'from = "../s1/result.h5"\nwavelength_nm = 1064.0', "", "seed.wavelength_nm", "remove"),
    ("other grid", 'from = "../s1/result.h5"', "points = 24", "grid", "set grid.points = 16"),
    ("other time slices", 'from = "../s1/result.h5"', "time_slices = 12", "grid", "grid.time_slices = 8"),
])
def test_bad_sources_exit_2_naming_the_key(stage1, tmp_path, capsys, monkeypatch, case, seed, grid, key, words):
    if seed is None:
        seed = f'from = "{_damage(stage1, tmp_path, case)}"'
    text = STAGE2.replace('from = "../s1/result.h5"\n{seed}', seed + "\n")
    if grid:
        name = grid.split()[0]
        text = "\n".join(grid if line.startswith(f"{name} =") else line for line in text.splitlines()) + "\n"
    cfg = write_stage2(tmp_path, text=text)
    code, out, err = _cli(["run", cfg, "--out", "s2"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT, out + err
    assert f"{key} = " in err or f"{key}: " in err, err
    assert words in err, err
    assert "Traceback" not in err
    assert not (tmp_path / "s2").exists()


def test_a_sweep_does_not_resume_on_another_earlier_stage(stage1, tmp_path, capsys, monkeypatch):
    """The sweep folder's config hash holds the earlier file's SHA-256: stage 1 run again differently
    (into the same folder, after removing it) is another config, and the sweep is not resumed on it."""
    sweep = '\n[sweep]\n"medium.amp.small_signal_gain" = [2.0, 6.0]\n'
    cfg = write_stage2(tmp_path, text=STAGE2 + sweep)
    args = ["sweep", cfg, "--out", "sw", "--jobs", "1", "--no-plots", "--quiet"]
    assert _cli(args, capsys, tmp_path, monkeypatch)[0] == EXIT_OK
    shutil.rmtree(tmp_path / "s1")
    code, _, err = _cli(["run", "rod.toml", "--out", "s1", "--no-plots", "--quiet", "--set", "seed.energy_J=0.02"],
                        capsys, tmp_path, monkeypatch)
    assert code == EXIT_OK, err
    code, out, err = _cli(args, capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT
    assert "seed.from_sha256" in err and "holds a sweep of a different config" in err
