"""Small frictions a new user met: `ampmodel media` as a short sorted table, one material by name (any
letter case) with its sources, every value with --all, an unknown name with a did-you-mean; `run` on a
config with a [sweep] or [spread] table says that it runs the base case and names the command."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from sweep_helpers import ampmodel

ROOT = Path(__file__).resolve().parents[2]



def test_media_short_table_one_material_and_all(tmp_path):
    from ampmodel.materials import registry
    short = ampmodel("media", cwd=tmp_path)
    assert short.returncode == 0
    rows = [line.split("  ")[0] for line in short.stdout.splitlines()[1:] if line and not line.startswith("ampmodel")]
    assert rows == sorted(registry.names(), key=str.casefold) and len(rows) == len(registry.names())
    assert "source:" not in short.stdout and "ampmodel media NAME" in short.stdout
    one = ampmodel("media", "nd:yag", cwd=tmp_path)
    assert one.returncode == 0 and one.stdout.startswith("Nd:YAG  (four-level")
    assert "source:" in one.stdout and "Yb:YAG" not in one.stdout
    everything = ampmodel("media", "--all", cwd=tmp_path)
    assert everything.returncode == 0 and all(f"{name}  (" in everything.stdout for name in registry.names())
    bad = ampmodel("media", "Nd:YAH", cwd=tmp_path)
    assert bad.returncode == 2 and "did you mean 'Nd:YAG'" in bad.stderr and "Traceback" not in bad.stderr


def test_run_on_a_config_with_a_sweep_table_says_it_runs_the_base_case(tmp_path):
    config = ROOT / "configs" / "sweep_seed_and_gain.toml"
    proc = ampmodel("run", str(config), "--out", str(tmp_path / "o"), "--quiet", "--no-plots", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "has a [sweep] table; `run` computes its base case only" in proc.stdout
    assert f"sweep {config}` runs the table" in proc.stdout
    plain = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(tmp_path / "p"), "--quiet",
                     "--no-plots", cwd=tmp_path)
    assert "base case only" not in plain.stdout


def test_the_python_example_runs(tmp_path):
    """configs/explore_results.py: a run through the API, its result read with h5py, a lineout, a sweep."""
    proc = subprocess.run([sys.executable, str(ROOT / "configs" / "explore_results.py"), str(tmp_path / "out")],
                          capture_output=True, text=True, cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)},
                          timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert (tmp_path / "out" / "lineout.png").stat().st_size > 10_000
    assert (tmp_path / "out" / "demo" / "result.h5").is_file() and (tmp_path / "out" / "sweep" / "sweep.h5").is_file()
    assert proc.stdout.count("-> output") == 4 and "Laser safety" in proc.stdout
