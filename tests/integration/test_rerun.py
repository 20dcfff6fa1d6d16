"""What a result file records to reproduce its run, and `ampmodel rerun`: the same figures from the stored
config and material data, differences named, the exit codes."""
from __future__ import annotations

import dataclasses
import json
import shutil
from pathlib import Path

import h5py
import pytest
from sweep_helpers import BASE, ROOT, write_config

from ampmodel.cli import EXIT_BAD_INPUT, EXIT_MISMATCH, main
from ampmodel.config.load import load_config
from ampmodel.materials import registry
from ampmodel.materials.material import material_from_dict, material_to_dict
from ampmodel.output.hdf5 import read_provenance
from ampmodel.output.summary import Difference, compare_summaries
from ampmodel.studies.rerun import default_out

DATA = ROOT / "tests" / "data"
# the sweep tests' rod, but of built-in Nd:YAG (its data then come from the material files)
BUILTIN = BASE.replace("""[medium.material]
wavelength_nm = 1064.0
emission_cross_section_cm2 = 2.8e-19
upper_lifetime_us = 230.0
refractive_index = 1.82
n2_m2_W = 7.0e-20
""", 'material = "Nd:YAG"\n')


def _cli(args, capsys, cwd: Path, monkeypatch) -> tuple[int, str, str]:
    monkeypatch.chdir(cwd)
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture
def run_dir(tmp_path, capsys, monkeypatch) -> Path:
    cfg = write_config(tmp_path, "", base=BUILTIN)
    code, _, err = _cli(["run", cfg, "--out", tmp_path / "runs" / "rod", "--no-plots", "--quiet"], capsys, tmp_path,
                        monkeypatch)
    assert code == 0, err
    return tmp_path / "runs" / "rod"


def test_the_result_file_records_what_reproduces_the_run(run_dir):
    stored = read_provenance(run_dir / "result.h5")
    assert stored["complete"] and stored["software_version"] and stored["config"].startswith('title = "sweep test rod"')
    config = load_config(run_dir.parent.parent / "rod.toml")
    # the material data each medium used, exactly (SI values survive JSON bit for bit)
    assert stored["materials"]["rod"] == json.loads(json.dumps(material_to_dict(config.media[0].material)))
    assert material_from_dict(stored["materials"]["rod"]) == config.media[0].material
    assert set(stored["builtin_materials"]) == {"Nd:YAG"}
    assert stored["builtin_materials"]["Nd:YAG"]["sources"]["emission_cross_section_cm2"]
    assert stored["data_files"] == {}
    for name in ("python", "numpy", "scipy", "h5py", "platform"):
        assert stored["environment"][name]
    with h5py.File(run_dir / "result.h5") as f:
        assert f["provenance/materials"].attrs["units"] == "text"


def test_rerun_reproduces_the_figures(run_dir, tmp_path, capsys, monkeypatch):
    code, out, err = _cli(["rerun", run_dir / "result.h5", "--no-plots"], capsys, tmp_path, monkeypatch)
    assert code == 0, err
    assert "the figures match" in out
    new = tmp_path / "runs" / "rod-rerun"
    report = json.loads((new / "rerun.json").read_text())
    assert report["matched"] and report["differences"] == [] and report["material_data"] == "stored"
    assert report["compared"] > 50
    assert json.loads((new / "summary.json").read_text()) == json.loads((run_dir / "summary.json").read_text())
    # never over an earlier run
    code, out, _ = _cli(["rerun", run_dir / "result.h5", "--no-plots"], capsys, tmp_path, monkeypatch)
    assert code == 0 and (tmp_path / "runs" / "rod-rerun-2" / "result.h5").exists()


def test_rerun_names_the_figures_that_differ(run_dir, tmp_path, capsys, monkeypatch):
    tampered = tmp_path / "tampered.h5"
    shutil.copy(run_dir / "result.h5", tampered)
    with h5py.File(tampered, "a") as f:
        summary = json.loads(f.attrs["summary"])
        summary["output_energy_J"] *= 1 + 1e-6
        summary["steps"][0]["gain"] *= 1 + 1e-12                    # inside the tolerance
        f.attrs["summary"] = json.dumps(summary)
    code, out, _ = _cli(["rerun", tampered, "--out", tmp_path / "again", "--no-plots"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_MISMATCH
    assert "the figures DIFFER: 1 of" in out and "output_energy_J: stored" in out and "relative -1.000e-06" in out
    assert "steps[0].gain" not in out
    report = json.loads((tmp_path / "again" / "rerun.json").read_text())
    assert not report["matched"] and len(report["differences"]) == 1
    code, out, _ = _cli(["rerun", tampered, "--out", tmp_path / "again", "--no-plots", "--rtol", "1e-5"], capsys,
                        tmp_path, monkeypatch)
    assert code == 0


def test_rerun_uses_the_stored_material_data_and_names_what_changed(run_dir, tmp_path, capsys, monkeypatch):
    """Today's Nd:YAG file says something else: the rerun still reproduces the run (stored data) and lists
    the difference; with --current-materials it runs today's data and the figures differ."""
    real = registry.get("Nd:YAG")
    changed = dataclasses.replace(real, emission_cross_section_m2=real.emission_cross_section_m2 * 1.1)
    monkeypatch.setattr(registry, "get", lambda name: changed if name.casefold() == "nd:yag" else real)
    code, out, _ = _cli(["rerun", run_dir / "result.h5", "--out", tmp_path / "stored", "--no-plots"], capsys,
                        tmp_path, monkeypatch)
    assert code == 0
    assert "material data of built-in Nd:YAG differ from today's files (the rerun uses the stored data)" in out
    assert "emission_cross_section_cm2: " in out and "the figures match" in out
    code, out, _ = _cli(["rerun", run_dir / "result.h5", "--out", tmp_path / "today", "--no-plots",
                         "--current-materials"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_MISMATCH and "output_energy_J: stored" in out


def test_rerun_refuses_what_is_not_a_complete_result(run_dir, tmp_path, capsys, monkeypatch):
    cut = tmp_path / "cut.h5"
    shutil.copy(run_dir / "result.h5", cut)
    with h5py.File(cut, "a") as f:
        del f.attrs["complete"]
    half = tmp_path / "half.h5"
    half.write_bytes((run_dir / "result.h5").read_bytes()[:5000])
    for path, message in ((cut, "is not complete (no attribute complete = True)"),
                          (half, "cannot be read as HDF5"), (tmp_path / "none.h5", "no such result file"),
                          (run_dir / "summary.json", "cannot be read as HDF5")):
        code, out, err = _cli(["rerun", path], capsys, tmp_path, monkeypatch)
        assert code == EXIT_BAD_INPUT and message in err and "Traceback" not in err, (path, err)
    assert sorted(p.name for p in (tmp_path / "runs").iterdir()) == ["rod"]


def test_rerun_of_a_sweep_point_and_of_a_run_whose_data_file_moved(tmp_path, capsys, monkeypatch):
    """A spectrum file beside the config: the run stores its text, the rerun needs it no more."""
    folder = tmp_path / "project"
    folder.mkdir()
    for name in ("good_fibre_spectrum_file.toml", "spectrum_good.csv"):
        shutil.copy(DATA / name, folder / name)
    with open(folder / "good_fibre_spectrum_file.toml", "a") as fh:
        fh.write('\n[sweep]\n"seed.power_W" = [0.1, 0.2]\n')
    cfg = folder / "good_fibre_spectrum_file.toml"
    code, _, err = _cli(["run", cfg, "--out", tmp_path / "runs" / "f", "--no-plots", "--quiet"], capsys, tmp_path,
                        monkeypatch)
    assert code == 0, err
    code, _, err = _cli(["sweep", cfg, "--out", tmp_path / "runs" / "s", "--jobs", "1", "--no-plots", "--quiet"],
                        capsys, tmp_path, monkeypatch)
    assert code == 0, err
    stored = read_provenance(tmp_path / "runs" / "f" / "result.h5")
    assert stored["data_files"] == {"spectrum_good.csv": (DATA / "spectrum_good.csv").read_text()}
    (folder / "spectrum_good.csv").unlink()
    for path in (tmp_path / "runs" / "f" / "result.h5", tmp_path / "runs" / "s" / "points" / "0001.h5"):
        code, out, err = _cli(["rerun", path, "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
        assert code == 0, (out, err)
        assert "the figures match" in out
    assert (tmp_path / "runs" / "s-0001-rerun" / "rerun.json").exists()
    assert default_out(tmp_path / "runs" / "f" / "result.h5") == (tmp_path / "runs" / "f-rerun").absolute()


def test_compare_summaries_tolerances():
    stored = {"output_energy_J": 1.0, "energy_balance_error": 1e-16, "train": {"pulses": 12, "ok": True},
              "warnings": ["a"], "steps": [{"gain": 2.0}], "mode": "pulsed"}
    same = json.loads(json.dumps(stored))
    same["output_energy_J"] = 1.0 + 5e-10
    same["energy_balance_error"] = -3e-16                       # round-off figures: absolute
    assert compare_summaries(stored, same) == (7, [])
    other = json.loads(json.dumps(stored))
    other.update(output_energy_J=1.0 + 2e-9, warnings=["a", "b"], mode="cw", extra=1.0)
    other["train"]["pulses"] = 13
    other["steps"][0]["gain"] = float("nan")
    count, diffs = compare_summaries(stored, other)
    assert count == 8
    assert sorted(d.path for d in diffs) == ["extra", "mode", "output_energy_J", "steps[0].gain", "train.pulses",
                                             "warnings"]
    assert Difference("x", 1.0, 2.0).text() == "x: stored 1.0, now 2.0 (relative +1.000e+00)"


def _tamper_materials(f, edit):
    ds = f["provenance/builtin_materials"]
    data = json.loads(ds[()])
    edit(data["Nd:YAG"])
    del f["provenance/builtin_materials"]
    f.create_dataset("provenance/builtin_materials", data=json.dumps(data), dtype=h5py.string_dtype())


@pytest.mark.parametrize("what, tamper, text", [
    ("complete as an array", lambda f: f.attrs.__setitem__("complete", [1, 1]), "complete is not true or false"),
    ("config not a text", lambda f: f.attrs.__setitem__("config", 3.5), "config is not a text"),
    ("NaN lifetime", lambda f: _tamper_materials(f, lambda m: m["si"].__setitem__("upper_lifetime_s", float("nan"))),
     "si.upper_lifetime_s = nan: not a finite number"),
    ("negative lifetime", lambda f: _tamper_materials(f, lambda m: m["si"].__setitem__("upper_lifetime_s", -1e-3)),
     "upper_lifetime_us = -1000: outside"),
    ("garbage spectrum", lambda f: _tamper_materials(f, lambda m: m.__setitem__("spectrum", {
        "wavelength_m": [1, "x"], "emission_m2": [1], "absorption_m2": []})), "spectrum"),
    ("materials not a table", lambda f: _tamper_materials(f, lambda m: m.__setitem__("si", [1, 2])),
     "not material data"),
])
def test_a_crafted_result_file_is_bad_input(run_dir, tmp_path, capsys, monkeypatch, what, tamper, text):
    """rerun trusts nothing in the file: each damaged entry is bad input (exit 2) naming what is wrong;
    stored material data pass the ranges a config's material must."""
    path = run_dir / "result.h5"
    with h5py.File(path, "r+") as f:
        tamper(f)
    code, _, err = _cli(["rerun", path, "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT, (what, err)
    assert text in err and "Traceback" not in err, (what, err)
    assert not (run_dir.parent / "rod-rerun").exists()
