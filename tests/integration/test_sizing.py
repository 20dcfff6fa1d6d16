"""Sizing to a target: against the analytic inverse of Frantz–Nodvik, out of reach, limits crossed first.

Reference: L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963). For a flat beam (every
lit pixel carries the same fluence) through a uniform gain without loss, each pixel's output fluence
is F_out = Fsat·ln[1 + G0·(exp(F_in/Fsat) − 1)] whatever the slice counts, so the small-signal
gain that gives an output energy E_out is

    G0 = (exp(F_out/Fsat) − 1) / (exp(F_in/Fsat) − 1),   F = E / (lit area),

and the input fluence that gives it at a fixed G0 is F_in = Fsat·ln[1 + (exp(F_out/Fsat) − 1)/G0].
The lit area is counted here from the pixel centres inside the seed diameter, and Fsat = h·c/(λ·σe)
from CODATA constants, independently of the code under test.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.constants import c as LIGHT_SPEED
from scipy.constants import h as PLANCK
from sweep_helpers import ampmodel

import ampmodel as api

WAVELENGTH_M, SIGMA_M2 = 1064e-9, 2.8e-23
FSAT_J_M2 = PLANCK * LIGHT_SPEED / WAVELENGTH_M / SIGMA_M2
POINTS, WIDTH_M, BEAM_D_M = 16, 8e-3, 4e-3
E_IN_J = 0.01

FLAT = f"""\
title = "flat beam, uniform gain"

[grid]
points = {POINTS}
width_mm = {WIDTH_M * 1e3}
time_slices = 8

[[medium]]
name = "rod"
length_mm = 100.0
diameter_mm = 7.0
slices = 4
small_signal_gain = 5.0

[medium.material]
wavelength_nm = {WAVELENGTH_M * 1e9}
emission_cross_section_cm2 = {SIGMA_M2 * 1e4}
upper_lifetime_us = 230.0
refractive_index = 1.82

[seed]
wavelength_nm = {WAVELENGTH_M * 1e9}
energy_J = {E_IN_J}
duration_ns = 10.0
shape = "flat"
profile = "flat"
diameter_mm = {BEAM_D_M * 1e3}

[[step]]
kind = "pass"
medium = "rod"
"""


def lit_area_m2() -> float:
    """Pixel centres inside the flat seed's diameter, times the pixel area."""
    dx = WIDTH_M / POINTS
    c = (np.arange(POINTS) - (POINTS - 1) / 2) * dx
    r = np.hypot(c[None, :], c[:, None])
    return float((r <= BEAM_D_M / 2).sum()) * dx * dx


@pytest.fixture
def flat(tmp_path):
    path = tmp_path / "flat.toml"
    path.write_text(FLAT)
    return path


@pytest.mark.parametrize("e_out_J", [0.04, 0.1, 0.16])
def test_sizing_the_gain_reproduces_the_analytic_fn_inverse(flat, e_out_J):
    area = lit_area_m2()
    f_in, f_out = E_IN_J / area, e_out_J / area
    expected = math.expm1(f_out / FSAT_J_M2) / math.expm1(f_in / FSAT_J_M2)
    assert 2 < expected < 50
    r = api.size_to_target(flat, ("output_energy_J", e_out_J), "medium.rod.small_signal_gain", (2, 50))
    assert r.status == "ok", r.message
    assert r.value == pytest.approx(expected, rel=1e-6)
    assert r.summary["output_energy_J"] == pytest.approx(e_out_J, rel=1e-9)
    assert len(r.evaluations) < 30


def test_sizing_the_seed_energy_reproduces_the_analytic_fn_inverse(flat):
    g0, e_out_J = 12.0, 0.12
    area = lit_area_m2()
    f_in = FSAT_J_M2 * math.log1p(math.expm1(e_out_J / area / FSAT_J_M2) / g0)
    r = api.size_to_target(flat, ("output_energy_J", e_out_J), "seed.energy_J", (0.001, 0.05),
                           overrides=[f"medium.rod.small_signal_gain={g0}"])
    assert r.status == "ok", r.message
    assert r.value == pytest.approx(f_in * area, rel=1e-6)


def test_an_unreachable_target_is_reported_with_exit_3(flat, tmp_path):
    r = api.size_to_target(flat, ("output_energy_J", 5.0), "medium.rod.small_signal_gain", (2, 50))
    assert r.status == "unreachable" and r.value is None
    assert "no solution in range" in r.message and "below the target 5 at both ends" in r.message
    assert len(r.evaluations) == 2                                       # only the two ends were run
    proc = ampmodel("size", str(flat), "--target", "output_energy_J=5", "--vary", "medium.rod.small_signal_gain",
                    "--within", "2,50", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "no solution in range" in proc.stdout and "Traceback" not in proc.stderr
    assert list(tmp_path.iterdir()) == [flat]                            # nothing written


def test_a_limit_crossed_first_gives_the_value_where_it_is_met(flat, tmp_path):
    area = lit_area_m2()
    limit_J_cm2 = 0.08 / area * 1e-4                                     # the fluence of 0.08 J on the lit area
    r = api.size_to_target(flat, ("output_energy_J", 0.1), "medium.rod.small_signal_gain", (2, 50),
                           [f"peak_fluence_J_cm2<={limit_J_cm2}", "b_integral_rad<=3"])
    assert r.status == "limited"
    assert "a limit is crossed first" in r.message and "peak_fluence_J_cm2 reaches" in r.message
    assert r.limiting.figure == "peak_fluence_J_cm2"
    assert r.summary["peak_fluence_J_cm2"] == pytest.approx(limit_J_cm2, rel=1e-9)
    # where the limit is met, the output is 0.08 J: the FN inverse again
    expected = math.expm1(0.08 / area / FSAT_J_M2) / math.expm1(E_IN_J / area / FSAT_J_M2)
    assert r.value == pytest.approx(expected, rel=1e-6)
    margins = {m["figure"]: m for m in r.margins}
    assert abs(margins["peak_fluence_J_cm2"]["margin"]) < 1e-9 * limit_J_cm2
    assert margins["b_integral_rad"]["margin"] == pytest.approx(3.0)       # no n2: B = 0
    out = tmp_path / "limited"
    proc = ampmodel("size", str(flat), "--target", "output_energy_J=0.1", "--vary", "medium.rod.small_signal_gain",
                    "--within", "2,50", "--limit", f"peak_fluence_J_cm2<={limit_J_cm2}", "--quiet",
                    "--out", str(out), cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "a limit is crossed first" in proc.stdout and "met (binding)" in proc.stdout
    saved = json.loads((out / "size.json").read_text())
    assert saved["status"] == "limited" and saved["value"] == pytest.approx(expected, rel=1e-6)
    assert (out / "result.h5").is_file() and (out / "summary.json").is_file()


def test_a_reachable_target_prints_the_value_figures_and_margins(flat, tmp_path):
    proc = ampmodel("size", str(flat), "--target", "output_energy_J=0.1", "--vary", "medium.rod.small_signal_gain",
                    "--within", "2,50", "--limit", "peak_fluence_J_cm2<=5", "--limit", "gain>=2", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "found: medium.rod.small_signal_gain = " in out and "every limit holds" in out
    assert "medium.rod.small_signal_gain = 2 " in out                   # the runs of the search are listed
    assert "peak_fluence_J_cm2 <= 5:" in out and "gain >= 2:" in out and "holds" in out
    assert "Laser safety" in out
    assert list(tmp_path.iterdir()) == [tmp_path / "flat.toml"]


@pytest.mark.parametrize("args, text", [
    (["--vary", "medium.rod.small_signal_gian"], "did you mean 'medium.rod.small_signal_gain'?"),
    (["--vary", "medium.rod.slices"], "sizing varies a continuous number"),
    (["--within", "0.5,50"], "the low end 0.5 is not an allowed value of small_signal_gain"),
    (["--within", "50,2"], "the low end must come first"),
    (["--target", "output_enrgy_J=1"], "did you mean 'output_energy_J'"),
    (["--limit", "peak_fluence<=3"], "did you mean 'peak_fluence_J_cm2'"),
    (["--limit", "peak_fluence_J_cm2=<3"], "expected FIGURE<=VALUE"),
])
def test_bad_sizing_input_is_exit_2(flat, tmp_path, args, text):
    base = {"--target": "output_energy_J=0.1", "--vary": "medium.rod.small_signal_gain", "--within": "2,50"}
    for k, v in zip(args[::2], args[1::2], strict=True):
        base[k] = v
    extra = [x for k, v in base.items() for x in (k, v)]
    if "--limit" in args:
        extra = [x for k, v in base.items() if k != "--limit" for x in (k, v)] + ["--limit", base["--limit"]]
    proc = ampmodel("size", str(flat), *extra, "--quiet", cwd=tmp_path)
    assert proc.returncode == 2, (proc.stdout, proc.stderr)
    assert text in proc.stderr and "Traceback" not in proc.stderr
