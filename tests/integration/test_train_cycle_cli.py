"""A pulse train that settles to a cycle of two pulses, through the command line: summary.json reports
the cycle and its average power, result.h5 the cycle's energies, the printed table the cycle, and the
plots the train with the cycle."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import h5py
import pytest

from ampmodel.output.tables import quantity_text

ROOT = Path(__file__).resolve().parents[2]
CONFIG = ROOT / "tests" / "data" / "train_cycle_regen.toml"


def test_a_train_in_a_cycle_through_the_command_line(tmp_path):
    out = tmp_path / "cycle"
    proc = subprocess.run([sys.executable, "-m", "ampmodel", "run", str(CONFIG), "--out", str(out)],
                          capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert proc.returncode == 0, proc.stderr
    summary = json.loads((out / "summary.json").read_text())
    train = summary["train"]
    cycle = train["cycle_pulse_energies_J"]
    rate = train["repetition_rate_Hz"]
    assert train["cycle_length"] == len(cycle) == 2
    assert cycle[0] > 1.5 * cycle[1]                       # a large and a small pulse, the large first
    assert train["pulse_energy_J"] == cycle[0] == summary["output_energy_J"]
    assert train["pulse_energy_mean_J"] == pytest.approx(sum(cycle) / 2, rel=1e-15)
    assert summary["average_power_W"] == train["average_power_W"] == pytest.approx(sum(cycle) / 2 * rate, rel=1e-15)
    # the unstable single-pulse steady state is not what is reported
    assert abs(train["fixed_point_pulse_energy_J"] * rate / summary["average_power_W"] - 1) > 0.05
    assert train["pulses_to_steady_state"] is not None and not train["pulses_to_steady_state_estimated"]
    assert abs(train["energy_balance_error"]) < 1e-10
    assert sum("cycle of 2" in w for w in summary["warnings"]) == 1
    with h5py.File(out / "result.h5", "r") as f:
        assert list(f["train/cycle_pulse_energy"][()]) == cycle
        assert f["train/cycle_pulse_energy"].attrs["units"] == "J"
    printed = f"cycle of 2 pulses: {quantity_text(cycle[0], 'J')}, {quantity_text(cycle[1], 'J')}, average " \
              f"{quantity_text(summary['average_power_W'], 'W')}"
    assert printed in proc.stdout
    assert (out / "plots" / "train.png").stat().st_size > 10_000
