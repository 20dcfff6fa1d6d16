"""A measured pulse shape and a measured spectrum from CSV files, end to end: the command line, the
stored file text that lets `rerun` repeat the run without the file, sweep workers, the warnings on a
trace the slices hold badly, and bad input (exit 2, the key named, nothing written)."""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from sweep_helpers import ROOT

from ampmodel import load_config, simulate
from ampmodel.cli import EXIT_BAD_INPUT, main
from ampmodel.output.hdf5 import read_provenance

CONFIGS = ROOT / "configs"
SMALL = ["--set", "grid.points=24"]


def _cli(args, capsys, cwd: Path, monkeypatch) -> tuple[int, str, str]:
    monkeypatch.chdir(cwd)
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _project(tmp_path: Path, *names: str) -> Path:
    folder = tmp_path / "project"
    folder.mkdir(exist_ok=True)
    for name in names:
        shutil.copy(CONFIGS / name, folder / name)
    return folder


def trace_fwhm_from_csv(path: Path) -> float:
    """The FWHM (ns) of the example trace, found independently: the offset as the mean of the first and
    last 5 values, then half the peak on a grid 1e6 points fine (numpy only)."""
    rows = [line.split(",") for line in path.read_text().splitlines() if line and not line.startswith("#")][1:]
    t, p = (np.array(c, dtype=float) for c in zip(*rows, strict=True))
    p = np.maximum(p - 0.5 * (p[:5].mean() + p[-5:].mean()), 0.0)
    keep = (t >= -6.0) & (t <= 45.0)                    # the example's window_ns falls on trace points
    t, p = t[keep], p[keep]
    grid = np.linspace(t[0], t[-1], 1_000_001)
    values = np.interp(grid, t, p)
    above = grid[values >= 0.5 * values.max()]
    return float(above[-1] - above[0])


def test_a_run_with_a_trace_file_and_its_rerun_without_the_file(tmp_path, capsys, monkeypatch):
    folder = _project(tmp_path, "qswitch_measured_pulse.toml", "qswitch_pulse_trace.csv")
    cfg = folder / "qswitch_measured_pulse.toml"
    out = tmp_path / "runs" / "q"
    code, text, err = _cli(["run", cfg, "--out", out, "--no-plots", "--quiet", *SMALL], capsys, tmp_path,
                           monkeypatch)
    assert code == 0, err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["pulse_duration_ns"] == pytest.approx(trace_fwhm_from_csv(folder / "qswitch_pulse_trace.csv"),
                                                         abs=1e-4)
    assert summary["input_energy_J"] == pytest.approx(0.020, rel=1e-12)
    assert not {n["code"] for n in summary["notices"]} & {"pulse-clipped", "pulse-ends", "pulse-coarse"}
    stored = read_provenance(out / "result.h5")
    assert stored["data_files"] == {"qswitch_pulse_trace.csv": (folder / "qswitch_pulse_trace.csv").read_text()}
    (folder / "qswitch_pulse_trace.csv").unlink()
    code, text, err = _cli(["rerun", out / "result.h5", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == 0, (text, err)
    assert "the figures match" in text


def test_a_measured_spectrum_run_writes_the_spectrum_and_reruns_without_the_file(tmp_path, capsys, monkeypatch):
    import h5py

    folder = _project(tmp_path, "stretched_measured_spectrum.toml", "stretched_seed_spectrum.csv")
    cfg = folder / "stretched_measured_spectrum.toml"
    out = tmp_path / "runs" / "s"
    code, _, err = _cli(["run", cfg, "--out", out, "--no-plots", "--quiet", *SMALL], capsys, tmp_path, monkeypatch)
    assert code == 0, err
    config = load_config(cfg)
    with h5py.File(out / "result.h5") as f:
        spectrum = f["seed/spectrum"][()]
        wavelength = f["grid/wavelength"][()]
    from ampmodel.pulsed.spectra import wavelength_step_m
    widths = np.asarray(wavelength_step_m(config, 0.0))
    assert float(np.sum(spectrum * widths)) == pytest.approx(5e-4, rel=1e-9)
    assert wavelength.min() > 759e-9 and wavelength.max() < 841e-9
    (folder / "stretched_seed_spectrum.csv").unlink()
    code, text, err = _cli(["rerun", out / "result.h5", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == 0, (text, err)
    assert "the figures match" in text


def test_sweep_workers_get_the_trace_inline_and_a_point_reruns_without_it(tmp_path, capsys, monkeypatch):
    folder = _project(tmp_path, "qswitch_measured_pulse.toml", "qswitch_pulse_trace.csv")
    cfg = folder / "qswitch_measured_pulse.toml"
    with open(cfg, "a") as fh:
        fh.write('\n[sweep]\n"seed.energy_J" = [0.01, 0.02]\n')
    out = tmp_path / "runs" / "sw"
    code, _, err = _cli(["sweep", cfg, "--out", out, "--jobs", "2", "--no-plots", "--quiet",
                         "--set", "grid.points=16", "--set", "grid.time_slices=24"], capsys, tmp_path, monkeypatch)
    assert code == 0, err
    (folder / "qswitch_pulse_trace.csv").unlink()
    code, text, err = _cli(["rerun", out / "points" / "0001.h5", "--no-plots", "--quiet"], capsys, tmp_path,
                           monkeypatch)
    assert code == 0, (text, err)
    assert "the figures match" in text


# ------------------------------------------------------------------------------------------------
# Warnings
# ------------------------------------------------------------------------------------------------

def qswitch(t: np.ndarray) -> np.ndarray:
    return 2.0 / (np.exp(-t / 1.3) + np.exp(t / 5.0))             # t in ns: rise 1.3 ns, tail 5 ns


def small_run(pulse: dict, time_slices: int = 32) -> set[str]:
    raw = {"title": "trace warnings", "grid": {"points": 8, "width_mm": 4.0, "time_slices": time_slices},
           "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 50.0, "diameter_mm": 3.9, "slices": 4,
                       "small_signal_gain": 3.0}],
           "seed": {"energy_J": 1e-3, "shape": "file", "profile": "flat", "diameter_mm": 3.0,
                    "measured_pulse": pulse},
           "step": [{"kind": "pass", "medium": "rod"}]}
    summary = simulate(load_config(raw)).summary
    return {n["code"] for n in summary["notices"] if n["severity"] == "warning"}


def inline(t_ns: np.ndarray, p: np.ndarray, **more) -> dict:
    return {"time_s": (t_ns * 1e-9).tolist(), "power": p.tolist(), **more}


TRACE_CODES = {"pulse-clipped", "pulse-ends", "pulse-coarse"}


def test_a_good_trace_gives_no_trace_warning():
    t = np.linspace(-15.0, 60.0, 301)
    assert not small_run(inline(t, qswitch(t)), time_slices=48) & TRACE_CODES


def test_a_window_cutting_the_tail_warns_clipped_and_ends():
    t = np.linspace(-15.0, 60.0, 301)
    codes = small_run(inline(t, qswitch(t), window_ns=[-15.0, 8.0]), time_slices=48)
    assert {"pulse-clipped", "pulse-ends"} <= codes


def test_a_trace_that_stops_high_warns_ends_but_not_clipped():
    t = np.linspace(-15.0, 10.0, 101)
    codes = small_run(inline(t, qswitch(t)), time_slices=48)
    assert "pulse-ends" in codes and "pulse-clipped" not in codes


def test_a_coarse_trace_and_coarse_slices_warn_coarse():
    t = np.linspace(-15.0, 60.0, 16)                      # 5 ns between points: about 2 across the FWHM
    assert "pulse-coarse" in small_run(inline(t, qswitch(t)), time_slices=48)
    fine = np.linspace(-15.0, 60.0, 751)
    assert "pulse-coarse" in small_run(inline(fine, qswitch(fine)), time_slices=10)   # 7.5 ns slices
    assert "pulse-coarse" not in small_run(inline(fine, qswitch(fine)), time_slices=80)


# ------------------------------------------------------------------------------------------------
# Bad input: exit 2, the key and the fix, nothing written
# ------------------------------------------------------------------------------------------------

_T = np.arange(-10.0, 30.0, 1.0)
GOOD_ROWS = "\n".join(f"{t:.1f}, {p:.5f}" for t, p in zip(_T, qswitch(_T), strict=True))
CONFIG = """title = "bad trace"
[grid]
points = 8
width_mm = 4.0
time_slices = 16
[[medium]]
name = "rod"
material = "Nd:YAG"
length_mm = 50.0
diameter_mm = 3.9
small_signal_gain = 3.0
[seed]
energy_J = 1e-3
diameter_mm = 3.0
{seed}
[[step]]
kind = "pass"
medium = "rod"
"""
PULSE = 'shape = "file"\nmeasured_pulse = {{ file = "trace.csv"{more} }}'

BAD = {
    "missing file": (PULSE.format(more="").replace("trace.csv", "nowhere.csv"), None,
                     ['seed.measured_pulse.file = "nowhere.csv": no such file']),
    "no units": (PULSE.format(more=""), "time, power\n" + GOOD_ROWS,
                 ["seed.measured_pulse.file", "line 1: the time column \"time\" must carry its unit", "time_ns"]),
    "few points": (PULSE.format(more=""), "time_ns, power\n0, 1\n1, 2\n2, 1\n",
                   ["seed.measured_pulse.file", "3 data rows: at least 5 are needed"]),
    "time not increasing": (PULSE.format(more=""), "time_ns, power\n0, 1\n1, 2\n3, 3\n2, 2\n4, 1\n5, 0\n",
                            ["seed.measured_pulse.file", 'line 5: the time "2" is not above that of line 4']),
    "all zero": (PULSE.format(more=""), "time_ns, power_W\n" + "\n".join(f"{i}, 0" for i in range(8)),
                 ["seed.measured_pulse.file", "no power above the background"]),
    "negative": (PULSE.format(more=""), "time_ns, power_W\n0, 0\n1, 5\n2, 10\n3, -4\n4, 2\n5, 0\n",
                 ["seed.measured_pulse.file", "point 4 is 40.0% of the peak below the background", "sign"]),
    "nan": (PULSE.format(more=""), "time_ns, power\n0, 0\n1, 5\n2, nan\n3, 4\n4, 2\n5, 0\n",
            ["seed.measured_pulse.file", "line 4", "nan and inf are not allowed"]),
    "duration given": (PULSE.format(more="") + "\nduration_ns = 7.0", "time_ns, power\n" + GOOD_ROWS,
                       ['seed.duration_ns = 7.0: a measured pulse (shape = "file") has the FWHM of its trace']),
    "no table": ('shape = "file"', None, ['seed.measured_pulse: missing: shape = "file" takes the pulse']),
    "window outside": (PULSE.format(more=", window_ns = [-20.0, 10.0]"), "time_ns, power\n" + GOOD_ROWS,
                       ["seed.measured_pulse.window_ns = [-20.0, 10.0]: must lie within the trace"]),
    "bad background": (PULSE.format(more=', background = "edges"'), "time_ns, power\n" + GOOD_ROWS,
                       ['seed.measured_pulse.background = "edges": must be a power level', '"ends"']),
    "spectrum with bandwidth": ('duration_ns = 1.0\nbandwidth_nm = 10.0\nmeasured_spectrum = { file = "trace.csv" }',
                                "wavelength_nm, power\n1060, 0\n1062, 1\n1064, 2\n1066, 1\n1068, 0\n",
                                ["seed.bandwidth_nm = 10.0: a measured spectrum sets the seed's bandwidth"]),
    "spectrum in angstrom": ('duration_ns = 1.0\nmeasured_spectrum = { file = "trace.csv" }',
                             "wavelength_A, power\n10600, 0\n10620, 1\n10640, 2\n10660, 1\n10680, 0\n",
                             ["seed.measured_spectrum.file", "wavelength_nm, wavelength_um"]),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_traces_exit_2_with_the_key(case, tmp_path, capsys, monkeypatch):
    seed, csv, expected = BAD[case]
    (tmp_path / "bad.toml").write_text(CONFIG.format(seed=seed))
    if csv is not None:
        (tmp_path / "trace.csv").write_text(csv)
    code, out, err = _cli(["run", "bad.toml", "--out", "out", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_BAD_INPUT, (out, err)
    for part in expected:
        assert part in err, (part, err)
    assert not (tmp_path / "out").exists()


def test_the_spectrum_plot_draws_the_measured_spectrum(tmp_path):
    from ampmodel.plots.spectra import plot_spectra

    folder = _project(tmp_path, "stretched_measured_spectrum.toml", "stretched_seed_spectrum.csv")
    config = load_config(folder / "stretched_measured_spectrum.toml", ["grid.points=16", "grid.time_slices=24"])
    path = plot_spectra(simulate(config), tmp_path / "spectrum.png")
    assert path.stat().st_size > 10_000 and path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_check_reports_the_trace_and_its_warnings(tmp_path, capsys, monkeypatch):
    folder = _project(tmp_path, "qswitch_measured_pulse.toml", "qswitch_pulse_trace.csv")
    code, out, err = _cli(["check", folder / "qswitch_measured_pulse.toml", "--set", "grid.time_slices=10"], capsys,
                          tmp_path, monkeypatch)
    assert code == 0, err
    fwhm = trace_fwhm_from_csv(folder / "qswitch_pulse_trace.csv")
    assert f"seed: measured pulse, FWHM {fwhm:.4g} ns" in out
    assert "warning: grid: time slices of 5.1 ns are too coarse for the measured pulse's fastest edge" in out
