"""The regenerative-amplifier and pulse-train examples through the command line (small grids): what they
report in summary.json, result.h5, the printed table and the plots."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import h5py
import pytest
from test_cli import SMALL, assert_output_contract

ROOT = Path(__file__).resolve().parents[2]


def run(config: str, out: Path, *extra: str) -> subprocess.CompletedProcess:
    proc = subprocess.run([sys.executable, "-m", "ampmodel", "run", str(ROOT / "configs" / config), "--out", str(out),
                           *SMALL, *extra], capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return proc


@pytest.mark.slow
def test_regenerative_amplifier_example(tmp_path):
    out = tmp_path / "regen"
    proc = run("regen_ti_sapphire.toml", out)
    summary = assert_output_contract(out)
    repeat = summary["steps"][0]
    assert repeat["kind"] == "repeat" and repeat["until"] == "peak" and repeat["peak_found"]
    energies = repeat["energy_per_round_trip_J"]
    dump = repeat["round_trip_count"]
    assert max(energies) == energies[dump - 1] == repeat["energy_out_J"]
    assert repeat["build_up_time_ns"] == pytest.approx(dump * repeat["round_trip_ns"])
    assert repeat["round_trip_ns"] == pytest.approx(2 * 1.5 / 299792458.0 * 1e9, rel=1e-12)  # two 1.5 m spaces
    for inner in repeat["steps"]:                 # the per-step keys on the round trip's steps too
        for key in ("index", "kind", "energy_in_J", "energy_out_J", "gain", "peak_fluence_J_cm2", "b_integral_rad"):
            assert key in inner
    assert repeat["steps"][-1]["energy_out_J"] == pytest.approx(repeat["energy_out_J"], rel=1e-12)
    assert abs(summary["energy_balance_error"]) < 1e-12
    assert summary["media"][0]["decayed_energy_J"] > 0                 # fluorescence during the build-up
    with h5py.File(out / "result.h5", "r") as f:
        ds = f["steps/000/round_trip_energy"]
        assert ds.attrs["units"] == "J" and list(ds[()]) == pytest.approx(energies, rel=1e-15)
        assert f["steps/000/round_trip_end_time"].attrs["units"] == "s"
        d4 = f["steps/000/round_trip_d4sigma"]                      # the cavity's mode, every round trip
        assert d4.attrs["units"] == "m" and d4.shape == (len(energies), 2)
        assert d4[()] == pytest.approx(1.4e-3, rel=1e-6)
    assert repeat["d4sigma_x_mm"] == pytest.approx(1.4, rel=1e-6)
    assert not any("no cavity mode" in w for w in summary["warnings"])
    assert (out / "plots" / "round_trips.png").stat().st_size > 10_000
    assert f"{dump} round trips" in proc.stdout and "build-up time" in proc.stdout


@pytest.mark.slow
def test_pulse_train_example(tmp_path):
    out = tmp_path / "train"
    proc = run("khz_end_pumped_train.toml", out)
    summary = assert_output_contract(out)
    train = summary["train"]
    assert train["repetition_rate_Hz"] == 10000.0
    assert train["pulse_energy_J"] == summary["output_energy_J"]
    assert summary["average_power_W"] == pytest.approx(10000.0 * summary["output_energy_J"], rel=1e-12)
    # the crystal's doping is known, so its pump bleaches it: the fixed point is iterated on the whole
    # state (the per-pixel column solution needs a pump that does not follow the inversion)
    assert train["direct_solution"].startswith("not applicable: the pump bleaches medium")
    assert train["fixed_point_residual"] < 1e-9
    assert 1 < train["pulses_to_steady_state"] == len(train["pulse_energies_J"])
    assert not train["pulses_to_steady_state_estimated"]
    assert abs(train["energy_balance_error"]) < 1e-12
    assert train["pump_stored_power_W"] == pytest.approx(train["decay_power_W"] + train["extracted_power_W"],
                                                         rel=1e-8)
    with h5py.File(out / "result.h5", "r") as f:
        assert f["train/pulse_energy"].attrs["units"] == "J"
        assert len(f["train/stored_energy_before_pulse"]) == train["pulses_to_steady_state"]
    assert (out / "plots" / "train.png").stat().st_size > 10_000
    assert "pulse train at 10 kHz" in proc.stdout and "average" in proc.stdout
    saved = json.loads((out / "summary.json").read_text())
    assert saved["train"]["stored_energy_before_each_pulse_J"] == train["stored_energy_before_each_pulse_J"]
