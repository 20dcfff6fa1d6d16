"""`ampmodel sweep CONFIG --vary PATH=V1,V2,...`: the sweep's value paths from the command line.

Tiny configs (sweep_helpers: 16 x 16 pixels, 8 time slices) and two to four points: the tests are
about the options, the checks, the records and resume; test_sweeps.py covers the machinery.
"""
from __future__ import annotations

import csv
import json
import shlex
from pathlib import Path

import h5py
import pytest
from sweep_helpers import GRID_4x2, ampmodel, write_config

import ampmodel as api
from ampmodel.cli import main, resume_command
from ampmodel.config.text import parse_values

FAST = ("--jobs", "1", "--no-plots", "--quiet")


def read_csv(path: Path) -> list[dict]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def snapshot(folder: Path) -> dict:
    return {p: p.stat().st_mtime_ns for p in folder.rglob("*")}


def test_vary_on_a_config_without_a_sweep_table_then_resume_and_refusal(tmp_path):
    config = write_config(tmp_path, extra="")
    out = tmp_path / "out"
    vary = ("--vary", "seed.energy_J=0.002,0.004", "--vary", "medium.rod.small_signal_gain=4,8")
    proc = ampmodel("sweep", str(config), *vary, "--out", str(out), *FAST, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "4 points: computed 4, found 0 already done" in proc.stdout
    assert "note: --vary replaces" not in proc.stdout                   # the config has no [sweep] table
    rows = read_csv(out / "sweep.csv")
    # grid: every combination, the last --vary varying fastest; each point ran its own values
    assert [(float(r["seed.energy_J"]), float(r["medium.rod.small_signal_gain"])) for r in rows] == \
        [(0.002, 4.0), (0.002, 8.0), (0.004, 4.0), (0.004, 8.0)]
    assert [float(r["input_energy_J"]) for r in rows] == pytest.approx([0.002, 0.002, 0.004, 0.004], rel=1e-12)
    # the sweep as run is recorded: the manifest's table and --vary, the config text of the table file
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["table"] == {"seed.energy_J": [0.002, 0.004], "medium.rod.small_signal_gain": [4, 8]}
    assert manifest["vary"]["combine"] == "grid"
    with h5py.File(out / "sweep.h5", "r") as f:
        text = str(f.attrs["config"])
    assert "# the [sweep] table from the command line: --vary seed.energy_J=0.002,0.004 --vary " \
           "medium.rod.small_signal_gain=4,8" in text
    assert api.load_config(config, vary=["seed.energy_J=0.002,0.004"]).raw["sweep"] == {"seed.energy_J": [0.002, 0.004]}

    # the same --vary again: nothing to compute
    before = snapshot(out / "points")
    proc = ampmodel("sweep", str(config), *vary, "--out", str(out), *FAST, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "4 points: computed 0, found 4 already done" in proc.stdout
    assert snapshot(out / "points") == before

    # another --vary, or another --combine, on the same folder: refused, nothing touched
    before = snapshot(out)
    for other in (("--vary", "seed.energy_J=0.002,0.008", *vary[2:]), (*vary, "--combine", "zip")):
        proc = ampmodel("sweep", str(config), *other, "--out", str(out), *FAST, cwd=tmp_path)
        assert proc.returncode == 2, proc.stderr
        assert f"{out}: holds a sweep started with --vary seed.energy_J=0.002,0.004" in proc.stderr
        assert "give the same --vary and --combine options as its first start, or another --out" in proc.stderr
        assert "Traceback" not in proc.stderr
    assert snapshot(out) == before


def test_vary_replaces_the_tables_paths_and_combine_zip(tmp_path):
    """The config's [sweep] table gives two paths, combine = "grid" and a figure; --vary gives other
    paths and --combine zip: its values are run side by side, the figure is kept."""
    table = GRID_4x2 + 'figures = ["steps.0.peak_fluence_J_cm2"]\n'
    config = write_config(tmp_path, table)
    out = tmp_path / "zip"
    proc = ampmodel("sweep", str(config), "--vary", "seed.energy_J=0.002,0.004,0.008",
                    "--vary", "step.1.transmission=0.9,0.8,0.7", "--combine", "zip", "--out", str(out),
                    "--jobs", "1", "--no-plots", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.count("note: --vary replaces the value paths of the config's [sweep] table "
                             "(seed.energy_J, medium.rod.small_signal_gain); its combine and figures are kept") == 1
    rows = read_csv(out / "sweep.csv")
    assert "medium.rod.small_signal_gain" not in rows[0]                  # replaced, not swept
    assert [(float(r["seed.energy_J"]), float(r["step.1.transmission"])) for r in rows] == \
        [(0.002, 0.9), (0.004, 0.8), (0.008, 0.7)]
    assert [float(r["steps.1.gain"]) for r in rows] == pytest.approx([0.9, 0.8, 0.7], rel=1e-12)
    assert "steps.0.peak_fluence_J_cm2" in proc.stdout.split("point", 2)[2].splitlines()[0]   # the printed table
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["table"]["combine"] == "zip" and manifest["table"]["figures"] == ["steps.0.peak_fluence_J_cm2"]
    # through the API, the same values as a mapping: the folder is resumed, nothing computed
    result = api.run_sweep(config, out, vary={"seed.energy_J": [0.002, 0.004, 0.008],
                                              "step.1.transmission": (0.9, 0.8, 0.7)}, combine="zip", plots=False)
    assert result.computed == [] and result.reused == [0, 1, 2]
    assert result.notes[0].startswith("--vary replaces the value paths")


@pytest.mark.parametrize("vary, message", [
    (["seed.energy_k=0.001,0.01"], "--vary seed.energy_k = [0.001, 0.01]: not a value this config can sweep; "
                                   "give a path such as seed.energy_J or medium.<name>.length_mm; did you mean "
                                   "'seed.energy_J'?"),
    (["medium.rdo.length_mm=90"], "--vary medium.rdo.length_mm = [90]: not a value path of this config: no item "
                                  "'rdo' in medium"),
    (["grid.points=16.5"], "--vary grid.points[0] = 16.5: "),
    (["seed.energy_J=0.001,-0.01"], "--vary seed.energy_J[1] = -0.01: out of range: must be a number > 0"),
    (["seed.energy_J=0.01,abc"], '--vary seed.energy_J[1] = "abc": must be a number > 0'),
    (["seed.energy_J="], "--vary seed.energy_J = []: give at least one value after =, separated by commas"),
    (["seed.energy_J=0.001,,0.01"], "--vary seed.energy_J=0.001,,0.01: an empty value between two commas"),
    (["seed.energy_J=0.001", "seed.energy_J=0.01"], "--vary seed.energy_J: given twice: give each path once"),
    (["seed.energy_J"], "--vary seed.energy_J: expected PATH=V1,V2,..."),
    (["=0.001"], "--vary =0.001: expected PATH=V1,V2,..."),
    (["seed.energy_J=0.001,0.01", "step.1.transmission=0.9", "--combine", "zip"],
     "--vary: --combine zip needs lists of equal length (seed.energy_J: 2, step.1.transmission: 1): give every "
     "--vary the same number of values, or use --combine grid"),
])
def test_bad_vary_is_bad_input_and_nothing_is_written(vary, message, tmp_path, capsys):
    config = write_config(tmp_path, extra="")
    out = tmp_path / "out"
    words = [w for v in vary for w in ((v,) if v.startswith("--") or v == "zip" else ("--vary", v))]
    code = main(["sweep", str(config), *words, "--out", str(out), *FAST])
    err = capsys.readouterr().err
    assert code == 2, err
    assert message in err and "nothing was run or written" in err and "Traceback" not in err
    assert not out.exists()


def test_a_zip_table_kept_with_unequal_vary_lists_names_the_table(tmp_path, capsys):
    config = write_config(tmp_path, '\n[sweep]\n"seed.energy_J" = [0.002, 0.004]\ncombine = "zip"\n')
    code = main(["sweep", str(config), "--vary", "seed.energy_J=0.001,0.01", "--vary", "step.1.transmission=0.9",
                 "--out", str(tmp_path / "out"), *FAST])
    assert code == 2
    assert 'sweep.combine = "zip" (kept with --vary) needs lists of equal length' in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_the_resume_command_carries_the_vary_options():
    argv = ["sweep", "rod.toml", "--vary", "seed.energy_J=0.001,0.01", "--vary",
            'medium.rod.material="Nd:YAG","Nd:YLF"', "--combine", "zip"]
    words = shlex.split(resume_command(argv, Path("runs/rod-sweep")))
    assert words[words.index("sweep"):] == argv + ["--out", "runs/rod-sweep"]


@pytest.mark.parametrize("text, values", [
    ("0.001,0.01,5e-2", [0.001, 0.01, 0.05]),
    ("4,8", [4, 8]),
    ("true,false", [True, False]),
    ('"Nd:YAG","Nd:YLF"', ["Nd:YAG", "Nd:YLF"]),
    ('"a,b","c"', ["a,b", "c"]),                    # a quoted string holds a comma
    ("flat,gaussian", ["flat", "gaussian"]),        # plain strings, as --set takes them
    ('flat, "gaussian"', ["flat", "gaussian"]),
    ("1,2,", [1, 2]),                               # a comma at the end, as in a TOML array
    ("", []),
    ("1,,2", None),
    (",1", None),
])
def test_vary_values_are_read_like_set_values(text, values):
    assert parse_values(text) == values
