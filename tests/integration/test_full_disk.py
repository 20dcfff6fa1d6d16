"""A full disk, for real: a small tmpfs mounted for the test (root on Linux; skipped with the reason
elsewhere). A run and a sweep stop with exit 6 naming the file they could not write, no crash of the
HDF5 library, no partial file left, and the sweep prints the command that resumes it."""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from sweep_helpers import ampmodel

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture
def small_disk(tmp_path):
    mount = tmp_path / "disk"
    mount.mkdir()
    if sys.platform != "linux" or os.geteuid() != 0 or shutil.which("mount") is None:
        pytest.skip("mounting a small tmpfs needs root on Linux")
    made = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=400k", "tmpfs", str(mount)], capture_output=True)
    if made.returncode != 0:
        pytest.skip(f"this machine does not allow mounting a tmpfs ({made.stderr.decode().strip()})")
    yield mount
    subprocess.run(["umount", str(mount)], capture_output=True)



def test_a_run_on_a_full_disk_exits_6_naming_the_file(small_disk, tmp_path):
    proc = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(small_disk / "r"), "--quiet",
                    cwd=tmp_path)
    assert proc.returncode == 6, (proc.returncode, proc.stderr[-2000:])      # not 139: no crash
    assert "the disk is full" in proc.stderr and "result.h5" in proc.stderr and "None" not in proc.stderr
    assert not [p for p in small_disk.rglob("*") if p.name != "lost+found"]   # nothing left


def test_a_sweep_on_a_full_disk_keeps_its_points_and_says_how_to_resume(small_disk, tmp_path):
    out = small_disk / "sw"
    proc = ampmodel("sweep", str(ROOT / "configs" / "sweep_seed_and_gain.toml"), "--out", str(out), "--jobs", "2",
                    "--no-plots", cwd=tmp_path)
    assert proc.returncode == 6, (proc.returncode, proc.stderr[-2000:])
    assert "the disk is full" in proc.stderr and "None" not in proc.stderr and "Traceback" not in proc.stderr
    assert f"--out {out}" in proc.stderr and "run the same command again" in proc.stderr
    assert not list(out.rglob("*.part"))
