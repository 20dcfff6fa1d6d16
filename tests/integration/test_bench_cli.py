"""`ampmodel bench --quick`: the table, the JSON figures, and the refusals. No timing is asserted
(speed and memory targets live only in the benchmark itself)."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
KEYS = {"pulsed_ratio", "pulsed_composite_ratio", "pulsed_rod_ratio", "pulsed_spectral_ratio", "diffraction_ratio", "sweep_speedup", "scaling_spread",
        "memory_ratio", "memory_estimate_ratio", "memory_peak_MB", "figures_speedup", "startup_s"}


def ampmodel(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "ampmodel", *args], capture_output=True, text=True, cwd=ROOT,
                          timeout=600)


@pytest.mark.slow
def test_bench_quick_prints_the_table_and_writes_the_figures(tmp_path):
    out = tmp_path / "bench.json"
    proc = ampmodel("bench", "--quick", "--quiet", "--json", str(out))
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.splitlines()
    header = next(i for i, line in enumerate(lines) if line.split() == ["figure", "measured", "target", "result"])
    rows = lines[header + 1:header + 1 + len(KEYS)]
    assert all(row.split()[-1] in ("pass", "FAIL", "n/a") for row in rows), rows
    assert "fft2/ifft2 pairs" in proc.stdout          # the field path against its bare transforms
    report = json.loads(out.read_text())
    assert set(report["figures"]) == KEYS
    assert report["mode"] == "quick" and report["machine"]["cpus"] >= 1
    for key, fig in report["figures"].items():
        assert {"label", "value", "unit", "target", "passed", "detail"} <= set(fig), key
        assert isinstance(fig["value"], float) and fig["value"] >= 0, key
        assert isinstance(fig["passed"], bool), key
    assert report["figures"]["diffraction_ratio"]["numbers"]["transforms"] > 0
    # the reference loop and the solver computed the same thing
    agree = report["figures"]["pulsed_ratio"]["numbers"]["agree"]
    assert agree["with_n2"]["fluence_rel"] < 1e-12 and agree["without_n2"]["fluence_rel"] < 1e-12
    numbers = report["figures"]["pulsed_ratio"]["numbers"]
    assert numbers["lit_pixels"] == numbers["pixels"]          # every pixel lit: the ratio shows the kernel
    spectral = report["figures"]["pulsed_spectral_ratio"]["numbers"]
    assert spectral["fluence_rel"] < 1e-12 and spectral["n2_rel"] < 1e-12
    assert f"wrote {out}" in proc.stdout


def test_bench_never_overwrites_and_checks_the_folder_first(tmp_path):
    out = tmp_path / "old.json"
    out.write_text('{"earlier": true}\n')
    proc = ampmodel("bench", "--quick", "--json", str(out))
    assert proc.returncode == 2
    assert "exists" in proc.stderr and "Traceback" not in proc.stderr
    assert out.read_text() == '{"earlier": true}\n'
    proc = ampmodel("bench", "--quick", "--json", str(tmp_path / "missing" / "b.json"))
    assert proc.returncode == 2 and "does not exist" in proc.stderr
    assert not (tmp_path / "missing").exists()


def test_help_lists_bench():
    proc = ampmodel("--help")
    assert proc.returncode == 0 and "bench" in proc.stdout
