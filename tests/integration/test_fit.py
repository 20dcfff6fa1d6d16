"""Fitting config values to measurements (``ampmodel fit``, ``ampmodel.fit_to_data``): against the
Frantz–Nodvik closed form, the standard errors against the analytic linearised covariance and a Monte
Carlo of refits, bad input reported at once, a fit that ends at a bound or does not converge.

Reference: L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963). For a flat beam (every lit
pixel carries the same fluence) and a flat pulse through a uniform gain without loss, each pixel's
output fluence is F_out = Fsat·ln[1 + G0·(exp(F_in/Fsat) − 1)], whatever the slice counts; a loss step
of transmission T after the pass multiplies it by T. So the measured output energy at seed energy E is

    E_out = T·A·Fsat·ln[1 + G0·(exp(E/(A·Fsat)) − 1)],

A the lit area (the pixel centres inside the seed's diameter), Fsat = h·c/(λ·σe) from CODATA
constants (scipy.constants), independently of the code under test (as tests/integration/test_sizing.py).
The covariance of a least-squares fit with absolute sigmas is (JᵀJ)⁻¹, J the Jacobian of the
weighted residuals (W. H. Press et al., Numerical Recipes, 3rd ed. (2007), ch. 15.5); here J comes
from the derivatives of that closed form, written out below.
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
G0_TRUE, T_TRUE = 7.0, 0.8
SEEDS_J = (0.005, 0.01, 0.02, 0.05, 0.1)
VARY = ("medium.rod.small_signal_gain=2,50", "step.1.transmission=0.5,1")

FLAT = f"""\
title = "flat beam, uniform gain, then a loss"

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
energy_J = 0.01
duration_ns = 10.0
shape = "flat"
profile = "flat"
diameter_mm = {BEAM_D_M * 1e3}

[[step]]
kind = "pass"
medium = "rod"

[[step]]
kind = "loss"
transmission = 0.9
"""


def lit_area_m2() -> float:
    """Pixel centres inside the flat seed's diameter, times the pixel area."""
    dx = WIDTH_M / POINTS
    c = (np.arange(POINTS) - (POINTS - 1) / 2) * dx
    r = np.hypot(c[None, :], c[:, None])
    return float((r <= BEAM_D_M / 2).sum()) * dx * dx


def fn_output_J(e_in_J: np.ndarray, g0: float, t: float) -> np.ndarray:
    """Frantz–Nodvik: the output energy of a flat beam after the pass and the loss step."""
    esat = lit_area_m2() * FSAT_J_M2
    return t * esat * np.log1p(g0 * np.expm1(np.asarray(e_in_J) / esat))


def fn_jacobian(e_in_J: np.ndarray, g0: float, t: float, sigma: np.ndarray) -> np.ndarray:
    """d(E_out/sigma)/d(G0, T) of the closed form, analytically."""
    esat = lit_area_m2() * FSAT_J_M2
    u = np.expm1(np.asarray(e_in_J) / esat)
    d_g0 = t * esat * u / (1 + g0 * u)
    d_t = esat * np.log1p(g0 * u)
    return np.column_stack([d_g0, d_t]) / sigma[:, None]


def csv_text(e_in, e_out, sigma=None) -> str:
    head = "# synthetic bench data from the Frantz-Nodvik closed form\nseed.energy_J,output_energy_J"
    lines = [head + (",sigma_output_energy_J" if sigma is not None else "")]
    for k, (a, b) in enumerate(zip(e_in, e_out, strict=True)):
        lines.append(f"{a!r},{float(b)!r}" + (f",{float(sigma[k])!r}" if sigma is not None else ""))
    return "\n".join(lines) + "\n"


@pytest.fixture
def flat(tmp_path):
    path = tmp_path / "flat.toml"
    path.write_text(FLAT)
    return path


def test_noise_free_data_give_g0_and_transmission_through_the_command_line(flat, tmp_path):
    data = tmp_path / "bench.csv"
    data.write_text(csv_text(SEEDS_J, fn_output_J(np.array(SEEDS_J), G0_TRUE, T_TRUE)))
    out = tmp_path / "fitted"
    proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", VARY[0], "--vary", VARY[1], "--out", str(out),
                    "--jobs", "2", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr + proc.stdout
    fit = json.loads((out / "fit.json").read_text())
    assert fit["status"] == "ok"
    assert fit["values"]["medium.rod.small_signal_gain"] == pytest.approx(G0_TRUE, rel=1e-3)
    assert fit["values"]["step.1.transmission"] == pytest.approx(T_TRUE, rel=1e-3)
    assert fit["residual_rms"] < 1e-6 and fit["weighting"] == "relative"
    assert [p["conditions"]["seed.energy_J"] for p in fit["points"]] == list(SEEDS_J)
    assert fit["data"] == data.read_text() and "[[step]]" in fit["config"]     # the fit can be repeated
    assert (out / "plots" / "fit_output_energy_J.png").stat().st_size > 5000
    assert "medium.rod.small_signal_gain" in proc.stdout and "std error" in proc.stdout
    page = (out / "report.html").read_text(encoding="utf-8")          # the report: values, errors, rms, figure
    for path in ("medium.rod.small_signal_gain", "step.1.transmission"):
        assert f"<td>{path}</td><td class=\"num\">{fit['values'][path]:.8g}</td>" in page
    assert f"Residual rms {fit['residual_rms']:.4g}" in page and "plots/fit_output_energy_J.png" in page
    assert page.count("data:image/png;base64,") == 1 and proc.stdout.rstrip().endswith("report.html)")
    # a second fit into the same place goes beside the first
    again = ampmodel("fit", str(flat), "--data", str(data), "--vary", VARY[0], "--vary", VARY[1], "--out", str(out),
                     "--jobs", "1", "--quiet", "--no-plots", cwd=tmp_path)
    assert again.returncode == 0, again.stderr
    assert (tmp_path / "fitted-2" / "fit.json").is_file() and not (tmp_path / "fitted-2" / "plots").exists()


@pytest.mark.slow
def test_the_dask_backend_gives_the_same_fit(flat, tmp_path):
    """The rows on a local dask cluster (two worker processes) give the fit the loky processes give."""
    pytest.importorskip("distributed")
    data = tmp_path / "bench.csv"
    data.write_text(csv_text(SEEDS_J, fn_output_J(np.array(SEEDS_J), G0_TRUE, T_TRUE)))
    fits = {}
    for backend in ("loky", "dask"):
        proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", VARY[0], "--vary", VARY[1], "--backend",
                        backend, "--jobs", "2", "--out", str(tmp_path / backend), "--quiet", cwd=tmp_path)
        assert proc.returncode == 0, proc.stderr
        fits[backend] = json.loads((tmp_path / backend / "fit.json").read_text())
    assert fits["dask"]["values"] == fits["loky"]["values"]
    assert fits["dask"]["runs"] == fits["loky"]["runs"]


def _noisy(rng, sigma_rel=0.01):
    e_in = np.array(SEEDS_J)
    exact = fn_output_J(e_in, G0_TRUE, T_TRUE)
    sigma = sigma_rel * exact
    return e_in, exact + rng.normal(0.0, 1.0, exact.size) * sigma, sigma


def test_noisy_data_within_two_standard_errors_which_match_the_analytic_covariance(flat):
    e_in, measured, sigma = _noisy(np.random.default_rng(7))
    data = {"seed.energy_J": list(e_in), "output_energy_J": list(measured), "sigma_output_energy_J": list(sigma)}
    r = api.fit_to_data(flat, data, VARY, jobs=1)
    assert r.status == "ok", r.message
    assert r.weighting == "sigma"
    g0, t = r.values["medium.rod.small_signal_gain"], r.values["step.1.transmission"]
    se = r.standard_errors
    assert abs(g0 - G0_TRUE) < 2 * se["medium.rod.small_signal_gain"]
    assert abs(t - T_TRUE) < 2 * se["step.1.transmission"]
    # cov = (JᵀJ)⁻¹ with J from the closed form's derivatives at the fitted values
    jac = fn_jacobian(e_in, g0, t, sigma)
    cov = np.linalg.inv(jac.T @ jac)
    assert se["medium.rod.small_signal_gain"] == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-3)
    assert se["step.1.transmission"] == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-3)
    assert r.correlation[0][1] == pytest.approx(cov[0, 1] / math.sqrt(cov[0, 0] * cov[1, 1]), rel=1e-3)
    # the fitted curve is the closed form at the fitted values (the model is the closed form here)
    assert r.curve is None
    chi = (fn_output_J(e_in, g0, t) - measured) / sigma
    assert r.residual_rms == pytest.approx(math.sqrt(np.mean(chi ** 2)), rel=1e-6)


def test_relative_residuals_scale_the_covariance_by_the_scatter(flat):
    """Without sigmas the residuals are relative and cov = s²·(JᵀJ)⁻¹, s² = SSR/(m − n)."""
    e_in, measured, _ = _noisy(np.random.default_rng(3), 0.02)
    r = api.fit_to_data(flat, {"seed.energy_J": list(e_in), "output_energy_J": list(measured)}, VARY, jobs=1,
                        curve=True)
    assert r.status == "ok" and r.weighting == "relative"
    g0, t = r.values["medium.rod.small_signal_gain"], r.values["step.1.transmission"]
    rel = (fn_output_J(e_in, g0, t) - measured) / np.abs(measured)
    s2 = float(rel @ rel) / (len(e_in) - 2)
    jac = fn_jacobian(e_in, g0, t, np.abs(measured))
    cov = s2 * np.linalg.inv(jac.T @ jac)
    assert r.standard_errors["medium.rod.small_signal_gain"] == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-3)
    assert r.standard_errors["step.1.transmission"] == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-3)
    # the curve of the fitted model along the seed energy is the closed form at the fitted values
    assert r.curve["condition"] == "seed.energy_J"
    x = np.array(r.curve["values"])
    assert x[0] == pytest.approx(min(SEEDS_J)) and x[-1] == pytest.approx(max(SEEDS_J))
    assert np.allclose(r.curve["figures"]["output_energy_J"], fn_output_J(x, g0, t), rtol=1e-9)


def test_standard_errors_match_the_scatter_of_refits_on_noisy_copies(flat):
    """A Monte Carlo: 30 noisy copies of the data, each refitted; the standard deviation of the fitted
    values agrees with the standard error of one fit (the statistical error of a standard deviation of
    30 samples is about 13 %: a 35 % band)."""
    rng = np.random.default_rng(11)
    fits = []
    for _ in range(30):
        e_in, measured, sigma = _noisy(rng)
        r = api.fit_to_data(flat, {"seed.energy_J": list(e_in), "output_energy_J": list(measured),
                                   "sigma_output_energy_J": list(sigma)}, VARY, jobs=1)
        assert r.status == "ok", r.message
        fits.append([r.values["medium.rod.small_signal_gain"], r.values["step.1.transmission"], r])
    spread = np.std([f[:2] for f in fits], axis=0, ddof=1)
    se = fits[0][2].standard_errors
    assert spread[0] == pytest.approx(se["medium.rod.small_signal_gain"], rel=0.35)
    assert spread[1] == pytest.approx(se["step.1.transmission"], rel=0.35)
    mean = np.mean([f[:2] for f in fits], axis=0)
    assert abs(mean[0] - G0_TRUE) < 3 * spread[0] / math.sqrt(len(fits))


def test_bad_input_is_reported_at_once_and_nothing_is_written(flat, tmp_path):
    data = tmp_path / "bad.csv"
    data.write_text("seed.energy_J,output_energie_J,steps.0.energy_outt_J,medium.rod.lenght_mm,sigma_gain\n"
                    "0.01,0.05,0.04,100,\n"
                    "0.02,abc,0.06,100,\n")
    proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", "medium.rod.small_signal_gain=50,2",
                    "--vary", "medium.rod.small_signal_gian=2,50", "--vary", "step.1.transmission", "--jobs", "0",
                    cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    err = proc.stderr
    assert "Traceback" not in err
    assert "column 'output_energie_J'" in err and "did you mean 'output_energy_J'" in err
    assert "steps.0.energy_outt_J" in err and "energy_out_J" in err
    assert "column 'medium.rod.lenght_mm'" in err and "medium.rod.length_mm" in err
    assert "column 'sigma_gain'" in err
    assert "line 3: output_energie_J = 'abc' is not a number" in err or "line 3" in err
    assert "--vary medium.rod.small_signal_gain=50,2: the low end must come first" in err
    assert "--vary medium.rod.small_signal_gian: not a value of this config; did you mean" in err
    assert "--vary step.1.transmission: expected PATH=LOW,HIGH" in err
    assert "--jobs 0" in err
    assert "nothing was run or written" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv", "flat.toml"]


@pytest.mark.parametrize("text, expected", [
    ("", "the file is empty"),
    ("# only a comment\n\n", "the file is empty"),
    ("seed.energy_J,output_energy_J\n", "no data rows"),
    ("seed.energy_J,output_energy_J\n0.01,\n", "no measured value"),
    ("seed.energy_J\n0.01\n", "no measured figure"),
])
def test_empty_data_is_bad_input(flat, tmp_path, text, expected):
    data = tmp_path / "empty.csv"
    data.write_text(text)
    proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", VARY[0], cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert expected in proc.stderr and "Traceback" not in proc.stderr
    assert not (tmp_path / "runs").exists()


def test_bad_cells_and_columns_through_python(flat, tmp_path):
    with pytest.raises(api.ConfigError) as err:
        api.fit_to_data(flat, {"seed.energy_J": [0.01, 0.02], "output_energy_J": [0.0, 0.05],
                               "sigma_output_energy_J": [None, -1.0]}, ["seed.energy_J=0.001,0.1"], jobs=1)
    text = str(err.value)
    assert "output_energy_J = 0 has no sigma_output_energy_J" in text
    assert "an uncertainty must be > 0" in text
    assert "--vary seed.energy_J: also a column" in text
    with pytest.raises(api.ConfigError, match="no such file"):
        api.fit_to_data(flat, tmp_path / "missing.csv", VARY)
    with pytest.raises(api.ConfigError, match="not a file"):
        api.fit_to_data(flat, tmp_path, VARY)
    with pytest.raises(api.ConfigError, match="cannot fix 2 varied values"):
        api.fit_to_data(flat, {"seed.energy_J": [0.01], "output_energy_J": [0.05]}, VARY)
    # a condition left empty takes the config's value; its row must still be a valid config
    with pytest.raises(api.ConfigError, match="line 3: .*seed.energy_J"):
        api.fit_to_data(flat, {"seed.energy_J": [0.01, -1.0], "output_energy_J": [0.05, 0.05]}, VARY[:1])


def test_a_fit_that_ends_at_a_bound_exits_3_with_the_best_found(flat, tmp_path):
    data = tmp_path / "bench.csv"
    data.write_text(csv_text(SEEDS_J, fn_output_J(np.array(SEEDS_J), G0_TRUE, T_TRUE)))
    out = tmp_path / "bound"
    proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", "medium.rod.small_signal_gain=2,4",
                    "--vary", VARY[1], "--out", str(out), "--jobs", "1", "--no-plots", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "the fit ends at a bound" in proc.stdout and "is at the high end of [2, 4]" in proc.stdout
    fit = json.loads((out / "fit.json").read_text())
    assert fit["status"] == "at_bound"
    assert fit["values"]["medium.rod.small_signal_gain"] == pytest.approx(4.0)
    # the best transmission with G0 held at 4: least squares on the closed form (scipy, directly)
    from scipy.optimize import minimize_scalar
    e_in = np.array(SEEDS_J)
    measured = fn_output_J(e_in, G0_TRUE, T_TRUE)
    best = minimize_scalar(lambda t: float(np.sum(((fn_output_J(e_in, 4.0, t) - measured) / measured) ** 2)),
                           bounds=(0.5, 1.0), method="bounded", options={"xatol": 1e-10})
    assert fit["values"]["step.1.transmission"] == pytest.approx(best.x, rel=1e-5)


def test_a_fit_that_does_not_converge_exits_3_with_the_best_found(flat, tmp_path):
    data = tmp_path / "bench.csv"
    data.write_text(csv_text(SEEDS_J, fn_output_J(np.array(SEEDS_J), G0_TRUE, T_TRUE)))
    out = tmp_path / "short"
    proc = ampmodel("fit", str(flat), "--data", str(data), "--vary", VARY[0], "--vary", VARY[1],
                    "--max-evaluations", "2", "--out", str(out), "--jobs", "1", "--no-plots", cwd=tmp_path)
    assert proc.returncode == 3, proc.stderr
    assert "did not converge within 2 evaluations" in proc.stdout and "best found so far" in proc.stdout
    fit = json.loads((out / "fit.json").read_text())
    assert fit["status"] == "not_converged" and fit["evaluations"] == 2
    # the best found is better than the start
    assert fit["residual_rms"] < fit["history"][0]["residual_rms"]


def test_a_value_the_data_do_not_fix_is_undetermined(flat):
    """The upper-state lifetime does not enter a single pulse's output when G0 is given: its Jacobian
    column is zero."""
    e_in = np.array(SEEDS_J)
    r = api.fit_to_data(flat, {"seed.energy_J": list(e_in), "output_energy_J": list(fn_output_J(e_in, 5.0, 0.9))},
                        [VARY[0], "medium.rod.material.upper_lifetime_us=100,400"], jobs=1)
    assert r.status == "undetermined", r.message
    assert "do not fix every varied value" in r.message
    assert r.standard_errors["medium.rod.small_signal_gain"] is None


def test_an_empty_condition_takes_the_configs_value_and_an_empty_figure_is_not_measured(flat):
    e_in = np.array(SEEDS_J)
    out = fn_output_J(e_in, G0_TRUE, 0.9)
    data = {"seed.energy_J": [None, *SEEDS_J[1:]],            # the config's seed energy is 0.01 J
            "output_energy_J": [float(fn_output_J(0.01, G0_TRUE, 0.9)), *out[1:-1], None],
            "steps.0.energy_out_J": [None, None, None, None, float(out[-1] / 0.9)]}
    r = api.fit_to_data(flat, data, [VARY[0]], jobs=1)
    assert r.status == "ok", r.message
    assert r.values["medium.rod.small_signal_gain"] == pytest.approx(G0_TRUE, rel=1e-6)
    assert r.points[0]["conditions"]["seed.energy_J"] == 0.01
    assert list(r.points[-1]["residual"]) == ["steps.0.energy_out_J"]
    assert r.points[-1]["modelled"]["steps.0.energy_out_J"] == pytest.approx(out[-1] / 0.9, rel=1e-6)


@pytest.mark.slow
def test_the_bench_example_recovers_the_values_its_data_were_made_with():
    """configs/bench_rod_measurements.csv was made from configs/single_pass_rod.toml at G0 = 5.2 and a
    transmission of 0.93 with 1.5 % noise (as the file says): the fit lands within two standard errors."""
    from sweep_helpers import ROOT
    r = api.fit_to_data(ROOT / "configs" / "single_pass_rod.toml", ROOT / "configs" / "bench_rod_measurements.csv",
                        ["medium.rod.small_signal_gain=2,20", "step.1.transmission=0.5,1"], jobs=2)
    assert r.status == "ok", r.message
    se = r.standard_errors
    assert abs(r.values["medium.rod.small_signal_gain"] - 5.2) < 2 * se["medium.rod.small_signal_gain"]
    assert abs(r.values["step.1.transmission"] - 0.93) < 2 * se["step.1.transmission"]
    assert 0.3 < r.residual_rms < 3
