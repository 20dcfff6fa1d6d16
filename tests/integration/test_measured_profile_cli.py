"""A measured seed profile from a 16-bit PNG through the command line: `check` prints its D4σ, `run`
uses it (the summary's seed_beam D4σ is the frame's), `rerun` repeats the run from result.h5 alone
after the frame is gone, and a sweep's points carry the frame inline.

Reference: the D4σ of a Gaussian beam exp(−2r²/w²) is its 1/e² diameter 2w (ISO 11146-1).
"""
from __future__ import annotations

import json
import re

import h5py
import numpy as np
import pytest
from PIL import Image

from ampmodel.cli import main

DIAMETERS_MM = (3.2, 2.8)           # 1/e² diameters of the invented beam in x and y
PIXEL_UM = 60.0

CONFIG = """\
title = "measured seed, command line"

[grid]
points = 48
width_mm = 9.0
time_slices = 8

[[medium]]
name = "rod"
material = "Nd:YAG"
length_mm = 50.0
diameter_mm = 6.0
slices = 4
small_signal_gain = 3.0

[seed]
energy_J = 0.01
duration_ns = 10.0
profile = "file"

[seed.measured_profile]
file = "frames/beam.png"
pixel_um = 60.0
background = 500.0

[[step]]
kind = "pass"
medium = "rod"
"""


def write_png(folder) -> None:
    """A 16-bit frame of 150 x 120 pixels: the Gaussian at 30000 counts above 500, read noise 6 counts."""
    nx, ny = 150, 120
    x = (np.arange(nx) - (nx - 1) / 2) * PIXEL_UM * 1e-3 - 0.3
    y = (np.arange(ny) - (ny - 1) / 2) * PIXEL_UM * 1e-3 + 0.2
    wx, wy = DIAMETERS_MM[0] / 2, DIAMETERS_MM[1] / 2
    beam = 30000 * np.exp(-2 * (x[None, :] / wx) ** 2 - 2 * (y[:, None] / wy) ** 2) + 500
    counts = beam + np.random.default_rng(5).normal(0, 6.0, beam.shape)
    (folder / "frames").mkdir()
    Image.fromarray(np.round(counts).astype(np.uint16)).save(folder / "frames" / "beam.png")


@pytest.fixture
def measured(tmp_path):
    work = tmp_path / "bench"
    work.mkdir()
    write_png(work)
    (work / "seed.toml").write_text(CONFIG)
    return work


def test_check_run_and_rerun_without_the_frame(measured, capsys, monkeypatch):
    monkeypatch.chdir(measured)
    assert main(["check", "seed.toml"]) == 0
    out = capsys.readouterr().out
    found = re.search(r"seed profile from frames/beam.png \(150 x 120 pixels of 60 µm\): D4σ ([\d.]+) x ([\d.]+) mm",
                      out)
    assert found, out
    assert [float(v) for v in found.groups()] == pytest.approx(DIAMETERS_MM, rel=0.01)
    assert "seed profile on the grid (48 x 48 pixels" in out and "fill factor" in out

    assert main(["run", "seed.toml", "--out", "runs/a", "--no-plots", "--quiet"]) == 0
    capsys.readouterr()
    summary = json.loads((measured / "runs" / "a" / "summary.json").read_text())
    seed_beam = summary["seed_beam"]
    assert (seed_beam["d4sigma_x_mm"], seed_beam["d4sigma_y_mm"]) == pytest.approx(DIAMETERS_MM, rel=0.01)
    with h5py.File(measured / "runs" / "a" / "result.h5") as f:
        x = f["grid/x"][()]
        fluence = f["seed/fluence"][()]
        stored = json.loads(f["provenance/data_files"][()])
    assert fluence.sum() * (x[1] - x[0]) ** 2 == pytest.approx(0.01, rel=1e-12)   # the seed energy
    assert list(stored) == ["frames/beam.png"] and stored["frames/beam.png"].startswith("# file frames/beam.png")

    (measured / "frames" / "beam.png").unlink()
    assert main(["rerun", "runs/a/result.h5", "--no-plots", "--quiet"]) == 0
    assert "the figures match" in capsys.readouterr().out
    again = json.loads((measured / "runs" / "a-rerun" / "summary.json").read_text())
    assert again["seed_beam"] == seed_beam
    assert again["output_energy_J"] == pytest.approx(summary["output_energy_J"], rel=1e-12)


def test_sweep_points_carry_the_frame_inline(measured, monkeypatch):
    """A sweep over the pixel pitch: each point's stored config holds the frame (image = [[...]]), so
    that a point reruns without the file; the beam's D4σ scales with the pitch."""
    from ampmodel.studies.rerun import rerun
    from ampmodel.studies.sweeps import run_sweep
    monkeypatch.chdir(measured)
    text = CONFIG + '\n[sweep]\n"seed.measured_profile.pixel_um" = [50.0, 60.0]\n'
    (measured / "sweep.toml").write_text(text)
    result = run_sweep("sweep.toml", "runs/s", jobs=1, plots=False)
    d4 = [s["seed_beam"]["d4sigma_x_mm"] for s in result.summaries]
    assert d4[1] / d4[0] == pytest.approx(60.0 / 50.0, rel=0.01)
    with h5py.File(measured / "runs" / "s" / "points" / "0001.h5") as f:
        assert "image = [" in f.attrs["config"]
    (measured / "frames" / "beam.png").unlink()
    report, _ = rerun(measured / "runs" / "s" / "points" / "0001.h5", write=False, plots=False)
    assert report.matched
