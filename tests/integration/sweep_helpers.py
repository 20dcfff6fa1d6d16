"""Shared pieces of the sweep, sizing and spread tests: a small config and the command line.

The config is kept small (16 x 16 pixels, 8 time slices, 4 z-slices) so that a point takes
milliseconds; the tests are about the machinery, the physics tests cover the solver.
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

BASE = """\
title = "sweep test rod"

[grid]
points = 16
width_mm = 8.0
time_slices = 8

[[medium]]
name = "rod"
length_mm = 100.0
diameter_mm = 7.0
slices = 4
loss_per_cm = 0.01
small_signal_gain = 5.0

[medium.material]
wavelength_nm = 1064.0
emission_cross_section_cm2 = 2.8e-19
upper_lifetime_us = 230.0
refractive_index = 1.82
n2_m2_W = 7.0e-20

[seed]
energy_J = 0.01
duration_ns = 10.0
diameter_mm = 4.0

[[step]]
kind = "pass"
medium = "rod"

[[step]]
kind = "loss"
transmission = 0.9

[[step]]
kind = "pass"
medium = "rod"
reverse = true
"""

GRID_4x2 = """
[sweep]
"seed.energy_J" = [0.002, 0.005, 0.01, 0.02]
"medium.rod.small_signal_gain" = [4.0, 8.0]
combine = "grid"
"""


def write_config(folder: Path, extra: str = GRID_4x2, name: str = "rod.toml", base: str = BASE) -> Path:
    path = folder / name
    path.write_text(base + extra)
    return path


def ampmodel(*args: str, cwd: Path | None = None, timeout: float = 300) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    return subprocess.run([sys.executable, "-m", "ampmodel", *args], capture_output=True, text=True,
                          cwd=cwd or ROOT, env=env, timeout=timeout)
