"""Tolerance runs end to end: reproducible draws, percentiles, files, resume, bad draws."""
from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from sweep_helpers import BASE, ampmodel, write_config

import ampmodel as api
from ampmodel.output.hdf5 import read_hdf5

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
