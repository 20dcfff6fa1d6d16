"""Sizing to a target: against the analytic inverse of Frantz–Nodvik, out of reach, limits crossed first;
figure paths (a per-step limit that binds, checked against scipy.optimize.brentq on the model run
directly), the tolerances, and bad input reported at once.

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
from scipy.optimize import brentq
from sweep_helpers import ampmodel, write_config

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


# --- figure paths, a per-step limit, rtol ---------------------------------------------------------------

GAIN = "medium.rod.small_signal_gain"


def _run_at(config, g: float) -> dict:
    """The summary of the two-pass layout at small-signal gain ``g`` (a run of its own, not through size)."""
    return api.simulate(api.load_config(config, [f"{GAIN}={g!r}"]), progress=False).summary


@pytest.fixture
def two_pass(tmp_path):
    """sweep_helpers' rod: a pass, a 90 % loss, the pass back (steps 0, 1, 2)."""
    return write_config(tmp_path, "")


def test_a_per_step_limit_binds_before_the_output_reaches_the_target(two_pass, tmp_path):
    """The first pass's fluence (steps.0) reaches its limit before the output reaches the target: the
    answer is where that step's fluence meets the limit, checked against brentq on a function that
    runs the model and reads the step's fluence itself."""
    target = ("output_energy_J", 0.12)
    free = api.size_to_target(two_pass, target, GAIN, (2, 30))
    assert free.status == "ok", free.message
    limit = 0.8 * free.summary["steps"][0]["peak_fluence_J_cm2"]
    last_pass = free.summary["steps"][2]["peak_fluence_J_cm2"]
    r = api.size_to_target(two_pass, target, GAIN, (2, 30),
                           [f"steps.0.peak_fluence_J_cm2<={limit!r}", f"peak_fluence_J_cm2<={2 * last_pass!r}"])
    assert r.status == "limited" and r.limiting.figure == "steps.0.peak_fluence_J_cm2", r.message
    ref = brentq(lambda g: _run_at(two_pass, g)["steps"][0]["peak_fluence_J_cm2"] - limit, 2, free.value,
                 xtol=1e-14, rtol=1e-14)
    assert abs(r.value - ref) <= r.xtol + r.rtol * abs(r.value) + 1e-14 + 1e-14 * abs(ref)
    assert r.summary["steps"][0]["peak_fluence_J_cm2"] == pytest.approx(limit, rel=1e-6)
    assert r.summary["output_energy_J"] < target[1]
    margins = {m["figure"]: m for m in r.margins}
    assert margins["peak_fluence_J_cm2"]["margin"] > 0                      # the top-level limit holds there
    out = tmp_path / "answer"
    proc = ampmodel("size", str(two_pass), "--target", "output_energy_J=0.12", "--vary", GAIN, "--within", "2,30",
                    "--limit", f"steps.0.peak_fluence_J_cm2<={limit!r}", "--quiet", "--out", str(out), cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "steps.0.peak_fluence_J_cm2 reaches" in proc.stdout and "met (binding)" in proc.stdout
    saved = json.loads((out / "size.json").read_text())
    assert saved["limits"] == [f"steps.0.peak_fluence_J_cm2<={limit:g}"]
    assert saved["figures"]["steps.0.peak_fluence_J_cm2"] == pytest.approx(limit, rel=1e-6)
    assert saved["figures"]["output_energy_J"] == saved["summary"]["output_energy_J"]
    page = (out / "report.html").read_text(encoding="utf-8")        # the sizing's report: answer, margins, run
    assert "<h2>Sizing</h2>" in page and f"{saved['value']:.10g}" in page and "met (binding)" in page
    assert f"<td>steps.0.peak_fluence_J_cm2</td><td>&lt;=</td><td class=\"num\">{limit:.5g}</td>" in page
    assert page.count("data:image/png;base64,") == len(list((out / "plots").glob("*.png"))) > 0


def test_rtol_sets_the_bracket_of_the_answer(two_pass, tmp_path):
    """brentq stops when the bracket is below xtol + rtol·|x|: the answer is that close to the crossing
    (brentq on the test's own function gives the crossing); a larger rtol takes fewer runs."""
    target = 0.12
    ref = brentq(lambda g: _run_at(two_pass, g)["output_energy_J"] - target, 2, 30, xtol=1e-14, rtol=1e-14)
    fine = api.size_to_target(two_pass, ("output_energy_J", target), GAIN, (2, 30))
    coarse = api.size_to_target(two_pass, ("output_energy_J", target), GAIN, (2, 30), xtol=1e-12, rtol=1e-3)
    slack = 1e-14 + 1e-14 * abs(ref)
    assert fine.rtol == 1e-10 and abs(fine.value - ref) <= fine.xtol + 1e-10 * abs(fine.value) + slack
    assert coarse.rtol == 1e-3 and abs(coarse.value - ref) <= 1e-12 + 1e-3 * abs(coarse.value) + slack
    assert len(coarse.evaluations) < len(fine.evaluations)
    out = tmp_path / "coarse"
    proc = ampmodel("size", str(two_pass), "--target", f"output_energy_J={target}", "--vary", GAIN,
                    "--within", "2,30", "--rtol", "1e-3", "--xtol", "1e-12", "--quiet", "--out", str(out),
                    cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    saved = json.loads((out / "size.json").read_text())
    assert saved["rtol"] == 1e-3 and saved["xtol"] == 1e-12 and saved["value"] == coarse.value
    assert "rtol 0.001" in proc.stdout


def test_every_bad_option_is_reported_at_once_and_nothing_is_written(two_pass, tmp_path):
    out = tmp_path / "never"
    proc = ampmodel("size", str(two_pass), "--target", "steps.7.peak_fluence_J_cm2=1", "--vary",
                    "medium.rod.small_signal_gian", "--within", "50,2", "--limit", "media.rdo.stored_energy_J<=3",
                    "--limit", "gain=>3", "--xtol", "-1", "--rtol", "1e-20", "--set", "seed.energy_J=-1",
                    "--out", str(out), cwd=tmp_path)
    assert proc.returncode == 2, proc.stdout
    lines = proc.stderr.strip().splitlines()
    assert lines[-1] == "8 problems in the input; nothing was run or written."
    expected = ["seed.energy_J = -1: out of range",
                "--target steps.7.peak_fluence_J_cm2=1: the config has steps 0 to 2, not step 7",
                "--vary medium.rod.small_signal_gian: not a value of this config; did you mean "
                "'medium.rod.small_signal_gain'?",
                "--within 50,2: the low end must come first",
                "--limit media.rdo.stored_energy_J<=3: no medium 'rdo' in the config; did you mean 'rod'?",
                "--limit gain=>3: expected FIGURE<=VALUE",
                "--xtol -1.0: must be a finite number > 0",
                "--rtol 1e-20: must be at least 4 x machine epsilon"]
    for text in expected:                                 # each on its own line, naming the config
        assert sum(text in line and line.startswith(f"{two_pass}: ") for line in lines[:-1]) == 1, text
    assert proc.stdout == "" and not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rod.toml"]


def test_a_figure_the_first_run_lacks_is_bad_input_after_one_run(two_pass, tmp_path):
    """steps.0.round_trip_count passes the checks made before a run (a repeat step has it) but a pass
    step has no such figure: the first run's summary says so, before the search spends more runs."""
    out = tmp_path / "never"
    proc = ampmodel("size", str(two_pass), "--target", "steps.2.energy_out_J=0.1", "--vary", GAIN,
                    "--within", "2,30", "--limit", "steps.0.round_trip_count<=3", "--limit", "b_integral_rad<=1",
                    "--out", str(out), cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert proc.stdout.count(f"  {GAIN} = ") == 1                         # one run, at the low end
    assert (f"{two_pass}: --limit steps.0.round_trip_count<=3: steps.0.round_trip_count is not a figure of the run "
            f"at {GAIN} = 2: steps.0 has no figure 'round_trip_count'") in proc.stderr
    assert "1 problem in the input" in proc.stderr and not out.exists()


def test_a_step_figure_as_the_target(two_pass):
    """The target may be any figure: the energy after the loss step (steps.1.energy_out_J)."""
    r = api.size_to_target(two_pass, "steps.1.energy_out_J=0.03", GAIN, "2,30")
    assert r.status == "ok", r.message
    assert r.summary["steps"][1]["energy_out_J"] == pytest.approx(0.03, rel=1e-9)
    assert r.figures() == {"steps.1.energy_out_J": r.summary["steps"][1]["energy_out_J"]}


CHAIN = """\
title = "two-stage Nd:YAG chain, relayed"

[grid]
points = 48
width_mm = 12.0
time_slices = 8

[[medium]]
name = "rod1"
material = "Nd:YAG"             # damage fluence 10 J/cm² quoted at 10 ns (built-in, an estimate)
length_mm = 80.0
diameter_mm = 9.0
slices = 4
small_signal_gain = 4.0

[[medium]]
name = "rod2"
material = "Nd:YAG"
length_mm = 80.0
diameter_mm = 9.0
slices = 4
small_signal_gain = 2.0

[seed]
energy_J = 0.01
duration_ns = 10.0
shape = "gaussian"
profile = "gaussian"
diameter_mm = 6.0

[[step]]
kind = "pass"
medium = "rod1"

[[step]]
kind = "relay"                  # demagnifies onto rod2; its coating is the weakest surface
magnification = 0.7
damage_fluence_J_cm2 = 6.0
damage_pulse_ns = 10.0

[[step]]
kind = "pass"
medium = "rod2"
"""


def test_sizing_stops_where_the_first_optic_reaches_half_its_damage_fluence(tmp_path):
    """``--limit worst_damage_margin<=0.5`` on a relayed two-stage chain: the relay's coating (6 J/cm²)
    reaches half its damage fluence before rod2 (10 J/cm²), though rod2 carries the larger fluence.
    The answer is where the relay's margin is 0.5, checked against brentq on the model run directly;
    every surface is below half its damage fluence just before it."""
    path = tmp_path / "chain.toml"
    path.write_text(CHAIN)
    vary = "seed.energy_J"

    def run(e: float) -> dict:
        return api.simulate(api.load_config(path, [f"{vary}={e!r}"]), progress=False).summary

    r = api.size_to_target(path, ("output_energy_J", 1.2), vary, (0.01, 1.0), ["worst_damage_margin<=0.5"])
    assert r.status == "limited" and r.limiting.figure == "worst_damage_margin", r.message
    s = r.summary
    assert s["worst_damage_margin"] == pytest.approx(0.5, rel=1e-6)
    assert s["worst_damage_step"] == "step 1 (relay)"
    relay, rod2 = s["steps"][1], s["steps"][2]
    assert relay["peak_fluence_J_cm2"] == pytest.approx(0.5 * relay["damage_fluence_J_cm2"], rel=1e-6)
    assert rod2["peak_fluence_J_cm2"] > relay["peak_fluence_J_cm2"] and rod2["damage_margin"] < 0.5
    ref = brentq(lambda e: run(e)["steps"][1]["damage_margin"] - 0.5, 0.01, 1.0, xtol=1e-14, rtol=1e-14)
    assert abs(r.value - ref) <= r.xtol + r.rtol * abs(r.value) + 1e-14 + 1e-14 * abs(ref)
    below = run(r.value * (1 - 1e-3))
    assert all(e["damage_margin"] is None or e["damage_margin"] < 0.5 for e in below["steps"])
    proc = ampmodel("size", str(path), "--target", "output_energy_J=1.2", "--vary", vary, "--within", "0.01,1",
                    "--limit", "worst_damage_margin<=0.5", "--quiet", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "worst_damage_margin reaches 0.5" in proc.stdout and "met (binding)" in proc.stdout
