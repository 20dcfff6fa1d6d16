"""The command line end to end: run, check, media, --set, no overwriting, the example configs."""
from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
CONFIGS = sorted((ROOT / "configs").glob("*.toml"))
SMALL = ["--set", "grid.points=32", "--set", "grid.time_slices=12"]
SMALL_CW = ["--set", "grid.points=32"]            # a cw run has no time slices


def is_cw(config: Path) -> bool:
    return re.search(r'^mode\s*=\s*"cw"', config.read_text(), re.MULTILINE) is not None


def ampmodel(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "ampmodel", *args], capture_output=True, text=True,
                          cwd=cwd or ROOT, timeout=300)


def assert_cw_output_contract(out: Path) -> dict:
    """A cw run folder: the output contract with power and intensity in place of energy and fluence."""
    summary = json.loads((out / "summary.json").read_text())
    assert summary["mode"] == "cw"
    for key in ("input_power_W", "output_power_W", "gain", "peak_intensity_W_cm2", "b_integral_rad",
                "power_balance_error", "cw_iterations", "cw_residual", "absorbed_pump_power_W", "warnings", "steps"):
        assert key in summary, key
    for step in summary["steps"]:
        for key in ("index", "kind", "power_in_W", "power_out_W", "gain", "peak_intensity_W_cm2", "b_integral_rad"):
            assert key in step, (step["index"], key)
    with h5py.File(out / "result.h5", "r") as f:
        assert f.attrs["mode"] == "cw"
        for path in ("grid/x", "grid/y", "seed/intensity"):
            assert path in f
        for name in f["steps"]:
            assert f[f"steps/{name}/intensity"].attrs["units"] == "W/m^2"
        for name in f["media"]:
            for attr in ("slice_length", "saturation_fluence", "saturation_intensity"):
                assert attr in f[f"media/{name}/gain_initial"].attrs
        missing = []
        f.visititems(lambda p, o: missing.append(p) if isinstance(o, h5py.Dataset) and "units" not in o.attrs else None)
        assert not missing, missing
        x = f["grid/x"][()]
        last = sorted(f["steps"])[-1]
        assert summary["output_power_W"] == pytest.approx(f[f"steps/{last}/intensity"][()].sum() * (x[1] - x[0]) ** 2,
                                                          rel=1e-12)
    names = {p.name for p in (out / "plots").glob("*.png")}
    assert {"intensity_maps.png", "power_per_step.png"} <= names and any(n.startswith("gain_") for n in names)
    return summary


def assert_fibre_outputs(out: Path, summary: dict) -> None:
    """A layout of fibres: the fibre keys of summary.json, the groups along each fibre in result.h5, the
    fibre figures."""
    for key in ("pump_power_out_W", "ase_forward_W", "ase_backward_W", "gain_dB"):
        assert key in summary, key
    if summary["mode"] == "cw":
        assert "noise_figure_dB" in summary and abs(summary["photon_balance_error"]) < 1e-6
    names = {p.name for p in (out / "plots").glob("*.png")}
    with h5py.File(out / "result.h5", "r") as f:
        for medium in summary["media"]:
            g = f[f"fibre/{medium['name']}"]
            for name in ("z", "inversion", "modal_gain", "ase_wavelength", "ase_forward_power", "ase_backward_power"):
                assert name in g, name
            assert ("signal_power" if summary["mode"] == "cw" else "pulse_energy") in g
            assert g["inversion"].attrs["units"] == "1" and g["z"].attrs["units"] == "m"
            assert g["inversion"].shape == (medium["rings"], g["z"].shape[0] - 1)
            assert {f"fibre_{medium['name']}_powers.png", f"gain_{medium['name']}.png"} <= names


def assert_output_contract(out: Path) -> dict:
    """The run folder holds the files, keys, datasets and units attributes of the output contract (README, "Reading the outputs")."""
    summary = json.loads((out / "summary.json").read_text())
    if summary.get("mode") == "cw":
        summary = assert_cw_output_contract(out)
        if summary.get("layout") == "fibre":
            assert_fibre_outputs(out, summary)
        return summary
    if summary.get("layout") == "fibre":
        assert_fibre_outputs(out, summary)
    for key in ("mode", "input_energy_J", "output_energy_J", "stored_energy_J", "stored_energy_final_J",
                "extraction_efficiency", "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad",
                "energy_balance_error", "warnings", "steps"):
        assert key in summary, key
    for step in summary["steps"]:
        for key in ("index", "kind", "energy_in_J", "energy_out_J", "gain", "peak_fluence_J_cm2",
                    "b_integral_rad"):
            assert key in step, (step["index"], key)
    with h5py.File(out / "result.h5", "r") as f:
        for attr in ("software_version", "config", "mode", "created_utc"):
            assert attr in f.attrs
        for path in ("grid/x", "grid/y", "grid/t", "seed/fluence", "seed/power"):
            assert path in f
        assert len(f["steps"]) == len(summary["steps"])
        for name in f["steps"]:
            assert f"steps/{name}/fluence" in f and f"steps/{name}/power" in f
        for name in f["media"]:
            for attr in ("slice_length", "saturation_fluence", "saturation_intensity"):
                assert attr in f[f"media/{name}/gain_initial"].attrs
        missing = []
        f.visititems(lambda p, o: missing.append(p) if isinstance(o, h5py.Dataset) and "units" not in o.attrs else None)
        assert not missing, missing
        # summary.json agrees with the fields in the file
        x = f["grid/x"][()]
        area = (x[1] - x[0]) ** 2
        last = sorted(f["steps"])[-1]
        assert summary["output_energy_J"] == pytest.approx(f[f"steps/{last}/fluence"][()].sum() * area, rel=1e-12)
    assert list((out / "plots").glob("*.png"))
    return summary


def test_help_lists_the_commands():
    proc = ampmodel("--help")
    assert proc.returncode == 0
    for word in ("run", "check", "media"):
        assert word in proc.stdout


def test_media_prints_every_material_with_sources():
    proc = ampmodel("media", "--all")
    assert proc.returncode == 0, proc.stderr
    for name in ("Nd:YAG", "Nd:YLF", "Nd:YVO4", "Nd:phosphate glass", "Nd:silicate glass", "Yb:YAG",
                 "Ti:sapphire", "Cr:LiSAF", "alexandrite", "Yb:silica fibre", "Er:silica fibre"):
        assert name in proc.stdout
    assert "cross-section spectrum" in proc.stdout
    assert "source" in proc.stdout.lower()


@pytest.mark.slow
@pytest.mark.parametrize("config", CONFIGS, ids=[c.stem for c in CONFIGS])
def test_example_configs_check_and_run(config, tmp_path):
    small = SMALL_CW if is_cw(config) else SMALL
    chained = []
    source = re.search(r'^from\s*=\s*"\.\./runs/([^/"]+)/result\.h5"', config.read_text(), re.MULTILINE)
    if source:       # a chained stage: its earlier stage (configs/NAME.toml) runs first, at the same grid
        earlier = ampmodel("run", str(ROOT / "configs" / f"{source.group(1)}.toml"), "--out",
                           str(tmp_path / "earlier"), "--no-plots", *small)
        assert earlier.returncode == 0, earlier.stderr
        chained = ["--set", f'seed.from="{tmp_path / "earlier" / "result.h5"}"']
    check = ampmodel("check", str(config), *chained, *small)
    assert check.returncode == 0, check.stderr
    assert "small-signal gain" in check.stdout
    out = tmp_path / "out"
    proc = ampmodel("run", str(config), "--out", str(out), *small, *chained)
    assert proc.returncode == 0, proc.stderr
    assert "Laser safety" in proc.stdout
    summary = assert_output_contract(out)
    if summary["mode"] == "cw":
        assert abs(summary["power_balance_error"]) < 1e-7
        assert summary["output_power_W"] > summary["input_power_W"]
        assert abs(summary["photon_balance_error"]) < 1e-6
        return
    assert abs(summary["energy_balance_error"]) < 1e-9
    assert summary["output_energy_J"] > summary["input_energy_J"]


def run_warnings(config_name: str, out: Path, *options: str) -> tuple[list[str], str]:
    """Run an example config without plots: the warnings of its summary.json, and what it printed."""
    proc = ampmodel("run", str(ROOT / "configs" / config_name), "--out", str(out), "--no-plots", *options)
    assert proc.returncode == 0, proc.stderr
    return json.loads((out / "summary.json").read_text())["warnings"], proc.stdout


def test_near_damage_example_warns(tmp_path):
    warnings, printed = run_warnings("double_pass_side_pumped.toml", tmp_path / "o", *SMALL)
    assert any("damage fluence" in w for w in warnings), warnings
    assert "damage fluence" in printed


def test_a_run_never_overwrites_another(tmp_path):
    config = ROOT / "configs" / "single_pass_rod.toml"
    outs = []
    for _ in range(3):
        proc = ampmodel("run", str(config), "--no-plots", *SMALL, cwd=tmp_path)
        assert proc.returncode == 0, proc.stderr
        outs.append(proc.stdout)
    names = sorted(p.name for p in (tmp_path / "runs").iterdir())
    assert names == ["single_pass_rod", "single_pass_rod-2", "single_pass_rod-3"]
    assert not list((tmp_path / "runs").glob(".*partial"))


def test_set_changes_the_run_and_is_recorded(tmp_path):
    config = ROOT / "configs" / "single_pass_rod.toml"
    a, b = tmp_path / "a", tmp_path / "b"
    assert ampmodel("run", str(config), "--out", str(a), "--no-plots", *SMALL).returncode == 0
    proc = ampmodel("run", str(config), "--out", str(b), "--no-plots", *SMALL, "--set", "seed.energy_J=0.002")
    assert proc.returncode == 0, proc.stderr
    sa = json.loads((a / "summary.json").read_text())
    sb = json.loads((b / "summary.json").read_text())
    assert sa["input_energy_J"] == pytest.approx(0.020, rel=1e-12)
    assert sb["input_energy_J"] == pytest.approx(0.002, rel=1e-12)
    assert sb["gain"] > sa["gain"]          # less saturation at lower input
    with h5py.File(b / "result.h5", "r") as f:
        assert "0.002" in f.attrs["config"]


def test_api_matches_the_command_line(tmp_path):
    import ampmodel as api
    config = api.load_config(ROOT / "configs" / "single_pass_rod.toml", SMALL[1::2])
    result = api.simulate(config)
    result.save(tmp_path / "api", plots=False)
    assert ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(tmp_path / "cli"),
                    "--no-plots", *SMALL).returncode == 0
    cli = json.loads((tmp_path / "cli" / "summary.json").read_text())
    assert result.summary["output_energy_J"] == pytest.approx(cli["output_energy_J"], rel=1e-12)
    with h5py.File(tmp_path / "api" / "result.h5", "r") as f:
        assert np.allclose(f["seed/fluence"][()], result.seed_fluence_J_m2)


def test_missing_config_file_is_bad_input(tmp_path):
    proc = ampmodel("run", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "o"))
    assert proc.returncode == 2
    assert "no such config file" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("command", ["check", "run"])
def test_a_grid_too_large_for_memory_is_refused_before_allocating(command, tmp_path):
    config = ROOT / "configs" / "single_pass_rod.toml"
    extra = ["--out", str(tmp_path / "o")] if command == "run" else []
    proc = ampmodel(command, str(config), *extra, "--set", "grid.points=4096", "--set", "grid.time_slices=4096")
    assert proc.returncode == 2
    assert "grid: grid.points = 4096, grid.time_slices = 4096, slices = " in proc.stderr and "GiB" in proc.stderr
    assert "lower grid.points, grid.time_slices or the media's slices" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "o").exists()


def test_seed_cut_by_the_window_warns(tmp_path):
    warnings, _ = run_warnings("single_pass_rod.toml", tmp_path / "o", *SMALL, "--set", "grid.width_mm=5.0")
    assert any("edge of the 5 mm window" in w for w in warnings), warnings


def test_cw_run_that_does_not_converge_exits_2_and_writes_nothing(tmp_path):
    config = ROOT / "configs" / "cw_double_pass_single_frequency.toml"
    out = tmp_path / "o"
    proc = ampmodel("run", str(config), "--out", str(out), *SMALL_CW, "--set", "solver.max_iterations=2")
    assert proc.returncode == 2, proc.stderr
    assert "solver.max_iterations = 2" in proc.stderr and "did not converge" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert not out.exists() and not list(tmp_path.glob(".*partial"))


def test_cw_damage_intensity_warns(tmp_path):
    warnings, _ = run_warnings("cw_double_pass_single_frequency.toml", tmp_path / "o", *SMALL_CW,
                               "--set", "step.1.damage_intensity_W_cm2=200")
    assert any("cw damage intensity of this optic" in w for w in warnings), warnings


def test_fibre_check_describes_each_fibre(tmp_path):
    proc = ampmodel("check", str(ROOT / "configs" / "fibre_yb_pulsed.toml"), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    for part in ("fibre pre (Yb:silica fibre)", "fibre power (Yb:silica fibre)", "V = 4.58", "mode-field diameter",
                 "pump overlap 0.0144", "small-signal gain"):
        assert part in proc.stdout, (part, proc.stdout)
    assert list(tmp_path.iterdir()) == []


def test_fibre_run_set_and_repetition_rate(tmp_path):
    """--set reaches fibre keys; a single pulse (no repetition rate) meets the fibre in its pumped steady
    state and takes more energy than a pulse in a 50 kHz train."""
    config = ROOT / "configs" / "fibre_yb_pulsed.toml"
    small = ["--no-plots", "--set", "medium.pre.slices=40", "--set", "medium.power.slices=40",
             "--set", "medium.power.rings=1", "--set", "grid.time_slices=8"]
    a, b = tmp_path / "train", tmp_path / "single"
    assert ampmodel("run", str(config), "--out", str(a), *small).returncode == 0
    edited = tmp_path / "single.toml"
    edited.write_text(config.read_text().replace("repetition_rate_kHz = 50.0", ""))
    proc = ampmodel("run", str(edited), "--out", str(b), *small)
    assert proc.returncode == 0, proc.stderr
    train = json.loads((a / "summary.json").read_text())
    single = json.loads((b / "summary.json").read_text())
    assert train["repetition_rate_Hz"] == 5e4 and single["repetition_rate_Hz"] is None
    assert single["output_energy_J"] > train["output_energy_J"]
    assert train["media"][1]["rings"] == 1
    assert train["output_power_W"] == pytest.approx(train["output_energy_J"] * 5e4, rel=1e-12)
