"""Tolerance runs end to end: reproducible draws, percentiles, files, resume, bad draws; the yield and
the sensitivity against scipy.stats (binomtest, spearmanr) on the sample table the run wrote, a case
whose ranking is known, named figures and their checks."""
from __future__ import annotations

import csv
import json

import matplotlib.image as mpimg
import numpy as np
import pytest
from scipy import stats as scipy_stats
from sweep_helpers import BASE, ampmodel, write_config

import ampmodel as api
from ampmodel.output.hdf5 import read_hdf5
from ampmodel.studies.store import read_table

SPREAD = """
[spread]
samples = 16
random_seed = {seed}
"seed.energy_J" = {{ normal = 0.05 }}
"medium.rod.small_signal_gain" = {{ uniform = [4.5, 5.5] }}
"""


def read_csv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def spread_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("spread")
    config = write_config(tmp, SPREAD.format(seed=7))
    proc = ampmodel("spread", str(config), "--out", str(tmp / "a"), "--jobs", "2", cwd=tmp)
    assert proc.returncode == 0, proc.stderr
    return tmp, config, proc


def test_spread_reports_percentiles_and_writes_its_files(spread_run):
    tmp, _, proc = spread_run
    out = tmp / "a"
    assert "16 samples: computed 16, found 0 already done (2 loky workers" in proc.stdout
    assert "5 %" in proc.stdout and "95 %" in proc.stdout and "output_energy_J" in proc.stdout
    assert "random_seed 7" in proc.stdout and "normal, relative std 0.05 around 0.01" in proc.stdout
    for name in ("manifest.json", "samples.h5", "samples.csv", "spread.json", "spread.csv"):
        assert (out / name).is_file(), name
    assert len(list((out / "points").glob("*.h5"))) == 16
    stats = json.loads((out / "spread.json").read_text())
    assert stats["samples"] == 16 and stats["random_seed"] == 7 and stats["failed"] == []
    assert stats["distributions"]["medium.rod.small_signal_gain"] == {"uniform": [4.5, 5.5]}
    rows = read_csv(out / "samples.csv")
    energies = np.array([float(r["output_energy_J"]) for r in rows])
    p = stats["percentiles"]["output_energy_J"]
    assert p["unit"] == "J"
    assert p["p5"] == np.percentile(energies, 5) and p["p50"] == np.percentile(energies, 50)
    assert p["p95"] == np.percentile(energies, 95)
    assert p["p5"] < p["p50"] < p["p95"]
    table = {r["figure"]: r for r in read_csv(out / "spread.csv")}
    assert float(table["peak_fluence_J_cm2"]["p95"]) == stats["percentiles"]["peak_fluence_J_cm2"]["p95"]
    assert table["peak_fluence_J_cm2"]["unit"] == "J/cm^2"
    assert (out / "plots" / "hist_output_energy_J.png").is_file()
    assert (out / "plots" / "hist_peak_fluence_J_cm2.png").is_file()


def test_samples_follow_the_table_and_each_point_is_its_own_run(spread_run):
    tmp, config, _ = spread_run
    rows = read_csv(tmp / "a" / "samples.csv")
    gains = [float(r["medium.rod.small_signal_gain"]) for r in rows]
    assert all(4.5 <= g < 5.5 for g in gains) and len(set(gains)) == 16
    r = rows[9]
    single = api.simulate(api.load_config(config, [f"seed.energy_J={r['seed.energy_J']}",
                                                   f"medium.rod.small_signal_gain={r['medium.rod.small_signal_gain']}"]))
    point = json.loads(read_hdf5(tmp / "a" / "points" / "0009.h5")["attrs"]["summary"])
    assert point["output_energy_J"] == pytest.approx(single.summary["output_energy_J"], rel=1e-12)


def test_the_same_seed_reproduces_and_another_seed_differs(spread_run):
    tmp, config, _ = spread_run
    again = api.run_spread(config, tmp / "b", jobs=1, plots=False)
    first = json.loads((tmp / "a" / "spread.json").read_text())["percentiles"]
    assert again.percentiles == first
    assert read_csv(tmp / "b" / "samples.csv") == read_csv(tmp / "a" / "samples.csv")
    other = write_config(tmp, SPREAD.format(seed=8), name="other.toml")
    different = api.run_spread(other, tmp / "c", jobs=1, plots=False)
    assert different.values != again.values
    assert different.percentiles["output_energy_J"]["p50"] != first["output_energy_J"]["p50"]


def test_a_spread_resumes_and_a_new_seed_recomputes(tmp_path):
    config = write_config(tmp_path, SPREAD.format(seed=3))
    out = tmp_path / "out"
    first = api.run_spread(config, out, jobs=1, plots=False)
    assert len(first.computed) == 16
    (out / "points" / "0004.h5").unlink()
    second = api.run_spread(config, out, jobs=1, plots=False)
    assert second.computed == [4] and second.percentiles == first.percentiles
    config.write_text(config.read_text().replace("random_seed = 3", "random_seed = 4"))
    third = api.run_spread(config, out, jobs=1, plots=False)     # same config, other draws: all new
    assert len(third.computed) == 16
    proc = ampmodel("spread", str(config), "--out", str(out), "--set", "grid.width_mm=9", cwd=tmp_path)
    assert proc.returncode == 2 and "holds a spread of a different config" in proc.stderr
    proc = ampmodel("sweep", str(config), "--out", str(out), cwd=tmp_path)
    assert proc.returncode == 2 and "has no [sweep] table" in proc.stderr


def test_draws_outside_the_allowed_values_stop_before_running(tmp_path):
    extra = '\n[spread]\nsamples = 50\n"medium.rod.small_signal_gain" = { normal = 0.5 }\n'
    config = write_config(tmp_path, extra, base=BASE.replace("small_signal_gain = 5.0", "small_signal_gain = 1.5"))
    proc = ampmodel("spread", str(config), "--out", str(tmp_path / "o"), cwd=tmp_path)
    assert proc.returncode == 2
    assert "sample 00" in proc.stderr and "small_signal_gain" in proc.stderr and "out of range" in proc.stderr
    assert not (tmp_path / "o").exists()
    proc = ampmodel("spread", str(write_config(tmp_path, "", name="plain.toml")), cwd=tmp_path)
    assert proc.returncode == 2 and "has no [spread] table" in proc.stderr


# --- yield, sensitivity, figure paths --------------------------------------------------------------------

# Two loss steps after the double pass (steps 3 and 4): the output energy is the energy after step 2
# times both transmissions, so it depends on the two alike; the second is spread 10 times wider.
TWO_LOSSES = BASE + """
[[step]]
kind = "loss"
transmission = 0.9

[[step]]
kind = "loss"
transmission = 0.9
"""
LIMITED = """
[spread]
samples = 16
random_seed = 5
"step.3.transmission" = {{ uniform = [0.89, 0.91] }}
"step.4.transmission" = {{ uniform = [0.8, 1.0] }}
figures = ["steps.3.energy_out_J", "media.rod.stored_energy_final_J"]
limits = ["steps.4.energy_out_J>={low}", "b_integral_rad<=1"]
"""


@pytest.fixture(scope="module")
def limited_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("limited")
    nominal = api.simulate(api.load_config(write_config(tmp, "", name="nominal.toml", base=TWO_LOSSES)),
                           progress=False).summary["output_energy_J"]
    config = write_config(tmp, LIMITED.format(low=repr(nominal)), base=TWO_LOSSES)   # about half the samples meet it
    proc = ampmodel("spread", str(config), "--out", str(tmp / "out"), "--jobs", "2",
                    "--limit", "steps.2.peak_fluence_J_cm2<=100", cwd=tmp)
    assert proc.returncode == 0, proc.stderr
    return tmp / "out", proc, nominal


def test_the_yield_is_scipys_binomtest_on_the_written_table(limited_run):
    out, proc, nominal = limited_run
    stats = json.loads((out / "spread.json").read_text())
    table = read_table(out / "samples.h5")
    ran = table["warning_count"] >= 0
    energy = table["steps.4.energy_out_J"][ran]
    b = table["b_integral_rad"][ran]
    fluence = table["steps.2.peak_fluence_J_cm2"][ran]
    limits = {y["limit"]: y for y in stats["yield"]["limits"]}
    assert list(limits) == [f"steps.4.energy_out_J>={nominal:g}", "b_integral_rad<=1", "steps.2.peak_fluence_J_cm2<=100"]
    for y, met in zip(limits.values(), (energy >= nominal, b <= 1, fluence <= 100), strict=True):
        k, n = int(met.sum()), int(ran.sum())
        ci = scipy_stats.binomtest(k, n).proportion_ci(method="wilson")
        assert (y["ran"], y["met"]) == (n, k) and y["share"] == k / n
        assert y["ci95"] == pytest.approx([ci.low, ci.high], abs=1e-14)
    together = (energy >= nominal) & (b <= 1) & (fluence <= 100)
    assert stats["yield"]["all"]["met"] == int(together.sum())
    assert 0 < limits[f"steps.4.energy_out_J>={nominal:g}"]["met"] < 16          # the limit does cut
    assert "yield: the samples that meet each limit" in proc.stdout and "all limits" in proc.stdout
    assert stats["limits"] == list(limits)


def test_the_sensitivity_is_scipys_spearmanr_and_ranks_the_wider_tolerance_first(limited_run):
    out, proc, _ = limited_run
    stats = json.loads((out / "spread.json").read_text())
    table = read_table(out / "samples.h5")
    figures = stats["sensitivity"]["figures"]
    for figure in ("output_energy_J", "steps.4.energy_out_J", "steps.3.energy_out_J"):
        for row in figures[figure]:
            ref = scipy_stats.spearmanr(table[row["path"]], table[figure])
            assert row["rho"] == pytest.approx(ref.statistic, abs=1e-12)
            assert row["p_value"] == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-300)
    first, second = figures["output_energy_J"]
    assert first["path"] == "step.4.transmission" and first["rho"] > 0.9
    assert second["path"] == "step.3.transmission" and abs(second["rho"]) < first["rho"]
    # the energy after step 3 depends on step 3 alone (step 4 comes after it)
    assert figures["steps.3.energy_out_J"][0]["path"] == "step.3.transmission"
    assert figures["steps.3.energy_out_J"][0]["rho"] == pytest.approx(1.0)
    assert "sensitivity: Spearman's rank correlation" in proc.stdout
    assert "  output_energy_J: step.4.transmission +" in proc.stdout
    assert "  steps.3.energy_out_J: step.3.transmission +1.00" in proc.stdout    # named figures are printed too


def test_named_figures_are_tabled_plotted_and_summarised(limited_run):
    out, _, _ = limited_run
    stats = json.loads((out / "spread.json").read_text())
    rows = read_csv(out / "samples.csv")
    assert "steps.2.peak_fluence_J_cm2" in rows[0] and "media.rod.stored_energy_final_J" in rows[0]     # every figure
    point = json.loads(read_hdf5(out / "points" / "0003.h5")["attrs"]["summary"])
    assert float(rows[3]["steps.2.peak_fluence_J_cm2"]) == point["steps"][2]["peak_fluence_J_cm2"]
    assert stats["percentiles"]["media.rod.stored_energy_final_J"]["unit"] == "J"
    assert stats["figures"] == ["steps.3.energy_out_J", "media.rod.stored_energy_final_J",
                                "steps.4.energy_out_J", "b_integral_rad", "steps.2.peak_fluence_J_cm2"]
    plots = out / "plots"
    assert (plots / "hist_steps.3.energy_out_J.png").is_file()          # named in figures
    assert (plots / "hist_steps.4.energy_out_J.png").is_file()          # named in a limit
    assert not (plots / "hist_steps.4.gain.png").exists()               # steps' figures only when named
    assert not (plots / "hist_media.rod.stored_energy_final_J.png").exists()   # named, the same in every sample
    image = mpimg.imread(plots / "sensitivity.png")
    assert image.shape[0] > 300 and image[..., :3].std() > 0.05     # drawn, not blank


def test_bad_figures_and_limits_are_bad_input_before_anything_is_written(tmp_path):
    bad_form = LIMITED.format(low="0.1").replace('"media.rod.stored_energy_final_J"', '"media.rod"') \
        .replace('"b_integral_rad<=1"', '"b_integral_rad=<1"')
    config = write_config(tmp_path, bad_form, base=TWO_LOSSES)
    proc = ampmodel("spread", str(config), "--out", str(tmp_path / "o"), "--limit", "gain>=x", cwd=tmp_path)
    assert proc.returncode == 2
    lines = proc.stderr.splitlines()
    assert any("spread.figures[1]" in line and "media must be followed by a medium's name" in line for line in lines)
    assert any("spread.limits[1]" in line and "expected FIGURE<=VALUE" in line for line in lines)
    assert not (tmp_path / "o").exists()
    # the form is fine: the key names and the config's steps are checked before any run, with the --limit
    unknown = LIMITED.format(low="0.1").replace("steps.3.energy_out_J", "steps.9.energy_out_J") \
        .replace("b_integral_rad<=1", "b_integrl_rad<=1")
    config = write_config(tmp_path, unknown, name="unknown.toml", base=TWO_LOSSES)
    proc = ampmodel("spread", str(config), "--out", str(tmp_path / "o"), "--limit", "gain>=x", cwd=tmp_path)
    assert proc.returncode == 2
    lines = proc.stderr.splitlines()
    assert lines[-1] == "3 problems in the input; nothing was run or written."
    assert any("spread.figures[0] = steps.9.energy_out_J: the config has steps 0 to 4, not step 9" in line
               for line in lines)
    assert any("spread.limits[1] = b_integrl_rad<=1" in line and "did you mean 'b_integral_rad'" in line
               for line in lines)
    assert any("--limit gain>=x: 'x' is not a number" in line for line in lines)
    assert not (tmp_path / "o").exists()


def test_a_figure_the_first_sample_lacks_stops_the_run_with_nothing_written(tmp_path):
    """steps.0.round_trip_count is a step's figure (of a repeat), not of a pass: known only once the
    first sample has run, which happens before the folder is made."""
    extra = LIMITED.format(low="0.1").replace('"media.rod.stored_energy_final_J"', '"steps.0.round_trip_count"')
    config = write_config(tmp_path, extra, base=TWO_LOSSES)
    proc = ampmodel("spread", str(config), "--out", str(tmp_path / "o"), cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert ("spread.figures[1] = steps.0.round_trip_count: steps.0.round_trip_count is not a figure of sample 0000 "
            "(step.3.transmission = ") in proc.stderr
    assert "steps.0 has no figure 'round_trip_count'" in proc.stderr
    assert not (tmp_path / "o").exists()


def test_the_report_holds_the_percentiles_the_yield_the_sensitivity_and_every_histogram(limited_run):
    out, proc, _ = limited_run
    assert proc.stdout.splitlines()[-1].endswith("report.html)")
    page = (out / "report.html").read_text(encoding="utf-8")
    stats = json.loads((out / "spread.json").read_text())
    p = stats["percentiles"]["output_energy_J"]
    assert f"<td>output_energy_J</td><td>J</td><td class=\"num\">{p['p5']:.5g}</td>" in page
    for y in [*stats["yield"]["limits"], stats["yield"]["all"]]:
        assert f"<td>{y['limit'].replace('<', '&lt;').replace('>', '&gt;')}</td>" in page
        assert f"{100 * y['share']:.1f} %" in page
    best = stats["sensitivity"]["figures"]["output_energy_J"][0]
    assert f"{best['path']} {best['rho']:+.2f}" in page
    pngs = sorted((out / "plots").glob("*.png"))
    assert page.count("data:image/png;base64,") == len(pngs) and "plots/sensitivity.png" in page
    assert page.count('<tr class="failed">') == 0 and "Every sample has its result file." in page
