"""Faults: runs and sweeps killed (SIGKILL), stopped (SIGTERM, Ctrl-C), or facing a full disk or an
unwritable folder leave no file that looks complete but is not, say how to go on, and a restarted
sweep finishes with the table an uninterrupted one has."""
from __future__ import annotations

import errno
import json
import os
import random
import shlex
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from sweep_helpers import BASE, ROOT, ampmodel, write_config

from ampmodel.cli import EXIT_CANNOT_WRITE, EXIT_INTERRUPTED, main
from ampmodel.output.atomic import is_complete_hdf5
from ampmodel.studies import store as store

# Points of about 0.2 s each (96 x 96 pixels, 64 time slices, 20 z-slices): long enough for a kill to
# land in the middle of a sweep, short enough for the suite.
SLOW_BASE = BASE.replace("points = 16", "points = 96").replace("time_slices = 8", "time_slices = 64") \
                .replace("slices = 4", "slices = 20")
ENERGIES = [round(0.001 * (i + 1), 6) for i in range(16)]
SLOW_SWEEP = '\n[sweep]\n"seed.energy_J" = [' + ", ".join(repr(e) for e in ENERGIES) + "]\n"


def _env() -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    return env


def _start(args: list[str], cwd: Path, log: Path) -> subprocess.Popen:
    """``python -m ampmodel ARGS`` in a process group of its own (so that its workers can be killed with it)."""
    with open(log, "w") as fh:
        return subprocess.Popen([sys.executable, "-m", "ampmodel", *args], cwd=cwd, env=_env(), stdout=fh,
                                stderr=subprocess.STDOUT, start_new_session=True)


def _wait_for(condition, proc: subprocess.Popen, timeout: float = 120.0) -> None:
    end = time.monotonic() + timeout
    while not condition():
        assert proc.poll() is None, "the command ended before the moment chosen to stop it"
        assert time.monotonic() < end, "timed out"
        time.sleep(0.02)


def _complete_points(out: Path) -> int:
    return sum(1 for p in (out / store.POINTS).glob("*.h5") if is_complete_hdf5(p)) if (out / store.POINTS).is_dir() else 0


def _nothing_looks_complete_but_is_not(out: Path) -> int:
    """Every file under its final name is whole; returns the number of point files."""
    points = sorted((out / store.POINTS).glob("*.h5"))
    for p in points:
        assert store.read_point(p) is not None, p            # complete = True, a summary, its identity
    if (out / "sweep.h5").exists():
        assert is_complete_hdf5(out / "sweep.h5")
    if (out / store.MANIFEST).exists():
        json.loads((out / store.MANIFEST).read_text())
    return len(points)


def _tables_equal(a: Path, b: Path) -> None:
    assert (a / "sweep.csv").read_text() == (b / "sweep.csv").read_text()
    ta, tb = store.read_table(a / "sweep.h5"), store.read_table(b / "sweep.h5")
    assert sorted(ta) == sorted(tb)
    for name in ta:
        np.testing.assert_array_equal(ta[name], tb[name], err_msg=name)


@pytest.mark.slow
def test_a_sweep_killed_twice_finishes_with_the_uninterrupted_table(tmp_path):
    """SIGKILL to the sweep and its workers at two random moments (seeded), then a start to the end: the
    table (sweep.csv and sweep.h5) equals that of a sweep never interrupted."""
    cfg = write_config(tmp_path, SLOW_SWEEP, base=SLOW_BASE)
    args = ["sweep", str(cfg), "--jobs", "2", "--no-plots", "--quiet"]
    reference = tmp_path / "reference"                          # in one process: the same numbers
    proc = ampmodel(*args[:2], "--jobs", "1", "--no-plots", "--quiet", "--out", str(reference), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr

    out = tmp_path / "killed"
    rng = random.Random(20240611)
    done = 0
    for kill in range(2):
        target = rng.randint(done + 2, min(done + 6, len(ENERGIES) - 5))
        p = _start(args + ["--out", str(out)], tmp_path, tmp_path / f"kill{kill}.log")
        try:
            _wait_for(lambda target=target: _complete_points(out) >= target, p)
            time.sleep(rng.uniform(0.0, 0.25))                 # anywhere inside the next points
        finally:
            os.killpg(p.pid, signal.SIGKILL)
            p.wait()
        assert p.returncode == -signal.SIGKILL
        done = _nothing_looks_complete_but_is_not(out)
        assert target <= done < len(ENERGIES)                  # killed in the middle of the sweep
        assert not (out / "sweep.h5").exists()                 # no table claims points it lacks
    final = ampmodel(*args, "--out", str(out), cwd=tmp_path)
    assert final.returncode == 0, final.stderr
    assert f"computed {len(ENERGIES) - done}, found {done} already done" in final.stdout
    assert not list((out / store.POINTS).glob(".*.part"))      # what the killed writers left is gone
    _tables_equal(reference, out)


def test_sigterm_stops_a_run_and_leaves_nothing(tmp_path):
    """SIGTERM (a batch system ending a job) is handled like Ctrl-C: exit 130, a message, no folder that
    looks like a run (the hidden temporary folder is removed)."""
    raw = SLOW_BASE.replace("time_slices = 64", "time_slices = 256").replace("slices = 20", "slices = 60")
    cfg = write_config(tmp_path, "", base=raw)
    out = tmp_path / "runs" / "slow"
    p = _start(["run", str(cfg), "--out", str(out), "--quiet"], tmp_path, tmp_path / "run.log")
    _wait_for(lambda: any((tmp_path / "runs").glob(".slow.*.partial")), p)
    time.sleep(0.3)
    p.send_signal(signal.SIGTERM)
    assert p.wait(timeout=60) == EXIT_INTERRUPTED
    log = (tmp_path / "run.log").read_text()
    assert "interrupted: nothing was written" in log and "Traceback" not in log
    assert not (tmp_path / "runs").exists()                  # made for the run, removed with it


@pytest.mark.slow
def test_ctrl_c_stops_a_sweep_and_prints_the_command_that_resumes_it(tmp_path):
    """Ctrl-C (SIGINT to the whole process group, as a terminal sends it) during a sweep: exit 130, the
    table of the points done, and the exact command; that command computes the rest."""
    # enough points that a loaded machine cannot finish them all between the third and the Ctrl-C
    energies = [round(0.0005 * (i + 1), 6) for i in range(32)]
    cfg = write_config(tmp_path, '\n[sweep]\n"seed.energy_J" = [' + ", ".join(map(repr, energies)) + "]\n",
                       base=SLOW_BASE.replace("points = 96", "points = 64"))
    p = _start(["sweep", "rod.toml", "--jobs", "2", "--no-plots", "--quiet"], tmp_path, tmp_path / "sweep.log")
    out = tmp_path / "runs" / "rod-sweep"
    _wait_for(lambda: _complete_points(out) >= 3, p)
    os.killpg(p.pid, signal.SIGINT)
    assert p.wait(timeout=60) == EXIT_INTERRUPTED
    log = (tmp_path / "sweep.log").read_text()
    assert "Traceback" not in log
    assert f"of {len(energies)} points are done and kept in runs/rod-sweep/" in log
    command = log.splitlines()[log.splitlines().index(next(line for line in log.splitlines()
                                                            if "run the same command again" in line)) + 1]
    words = shlex.split(command)
    assert words[:3] == [Path(sys.executable).name, "-m", "ampmodel"]
    assert words[3:] == ["sweep", "rod.toml", "--jobs", "2", "--no-plots", "--quiet", "--out", "runs/rod-sweep"]
    done = _nothing_looks_complete_but_is_not(out)
    with h5py.File(out / "sweep.h5") as f:                     # the table of the points done so far
        assert f.attrs["points_done"] == done and not f.attrs["all_points_done"]
    again = subprocess.run([sys.executable, *words[1:]], cwd=tmp_path, env=_env(), capture_output=True, text=True,
                           timeout=300)
    assert again.returncode == 0, again.stderr
    assert f"found {done} already done" in again.stdout
    with h5py.File(out / "sweep.h5") as f:
        assert f.attrs["all_points_done"] and f.attrs["points_done"] == len(energies)
    assert cfg.exists()


# ----------------------------------------------------------------------------------------------
# Full disks and unwritable folders
# ----------------------------------------------------------------------------------------------

def _main(args, capsys, cwd: Path, monkeypatch) -> tuple[int, str, str]:
    monkeypatch.chdir(cwd)
    code = main(args)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _disk_full(after: int = 0):
    """A writer that works ``after`` times, then fails as a full disk does."""
    from ampmodel.output import hdf5
    real = hdf5.write_hdf5
    calls = {"n": 0}

    def write(result, path, attrs=None, **more):
        calls["n"] += 1
        if calls["n"] > after:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
        return real(result, path, attrs, **more)
    return write


def test_a_full_disk_during_a_run_is_a_message(tmp_path, capsys, monkeypatch):
    from ampmodel.output import hdf5
    cfg = write_config(tmp_path, "")
    monkeypatch.setattr(hdf5, "write_hdf5", _disk_full())
    code, out, err = _main(["run", str(cfg), "--out", str(tmp_path / "runs" / "x"), "--no-plots"], capsys, tmp_path,
                           monkeypatch)
    assert code == EXIT_CANNOT_WRITE
    assert "cannot write" in err and "the disk is full" in err and "free some space" in err
    assert "nothing was kept" in err and "Traceback" not in err + out
    assert not (tmp_path / "runs").exists()                    # the temporary folder is gone, and runs/ with it


def test_a_full_disk_during_a_sweep_stops_it_and_keeps_the_points(tmp_path, capsys, monkeypatch):
    from ampmodel.output import hdf5
    write_config(tmp_path)                                      # 8 points, in this process (--jobs 1)
    args = ["sweep", "rod.toml", "--jobs", "1", "--no-plots", "--quiet"]
    monkeypatch.setattr(hdf5, "write_hdf5", _disk_full(after=3))
    code, out, err = _main(args, capsys, tmp_path, monkeypatch)
    assert code == EXIT_CANNOT_WRITE
    assert "the disk is full" in err and "Traceback" not in err + out
    assert "3 of 8 points are done and kept in runs/rod-sweep/" in err
    assert "ampmodel sweep rod.toml --jobs 1 --no-plots --quiet --out runs/rod-sweep" in err
    sweep = tmp_path / "runs" / "rod-sweep"
    assert _nothing_looks_complete_but_is_not(sweep) == 3
    monkeypatch.undo()
    code, out, err = _main(args, capsys, tmp_path, monkeypatch)
    assert code == 0, err
    assert "computed 5, found 3 already done" in out


def test_a_full_disk_while_the_table_is_written(tmp_path, capsys, monkeypatch):
    cfg = write_config(tmp_path)

    def full(*a, **k):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(tmp_path / "runs" / "rod-sweep" / "sweep.h5"))
    monkeypatch.setattr(store, "write_table", full)
    code, out, err = _main(["sweep", str(cfg), "--jobs", "1", "--no-plots", "--quiet"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_CANNOT_WRITE
    assert "cannot write" in err and "sweep.h5" in err and "the disk is full" in err
    assert "to compute the rest, run the same command again" in err and "Traceback" not in err
    assert not (tmp_path / "runs" / "rod-sweep" / "sweep.h5").exists()


@pytest.mark.parametrize("command", ["run", "sweep", "size", "rerun"])
def test_an_output_path_through_a_file_is_a_message_before_any_work(command, tmp_path, capsys, monkeypatch):
    """--out below a regular file cannot be created (this works as root too, where permissions do not
    stop writes): exit 6 before anything is computed, nothing created."""
    cfg = write_config(tmp_path)
    (tmp_path / "a_file").write_text("not a folder\n")
    out = tmp_path / "a_file" / "runs" / "x"
    if command == "rerun":
        assert main(["run", str(cfg), "--out", str(tmp_path / "first"), "--no-plots", "--quiet"]) == 0
        capsys.readouterr()
        args = ["rerun", str(tmp_path / "first" / "result.h5"), "--out", str(out)]
    elif command == "size":
        args = ["size", str(cfg), "--target", "output_energy_J=0.02", "--vary", "seed.energy_J",
                "--within", "0.001,0.01", "--out", str(out)]
    else:
        args = [command, str(cfg), "--out", str(out), "--no-plots"]
    before = sorted(p.name for p in tmp_path.iterdir())
    code, stdout, err = _main(args, capsys, tmp_path, monkeypatch)
    assert code == EXIT_CANNOT_WRITE, err
    assert "cannot write" in err
    assert "a part of the path is a file, not a folder" in err or "a file stands where a folder is to be made" in err
    assert "give --out" in err and "Traceback" not in err + stdout
    assert "->" not in stdout                                  # size: no search was run
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_a_folder_without_write_permission_is_a_message(tmp_path, capsys, monkeypatch):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        probe = locked / "probe"
        try:
            probe.write_text("")
            probe.unlink()
            pytest.skip("permissions do not stop this user from writing (root): the path-through-a-file "
                        "test covers the message")
        except PermissionError:
            pass
        cfg = write_config(tmp_path)
        for args in (["run", str(cfg), "--out", str(locked / "x")], ["sweep", str(cfg), "--out", str(locked / "s")]):
            code, out, err = _main(args + ["--no-plots"], capsys, tmp_path, monkeypatch)
            assert code == EXIT_CANNOT_WRITE and "no permission to write there" in err and "Traceback" not in err
        assert list(locked.iterdir()) == []
    finally:
        locked.chmod(0o700)


# ----------------------------------------------------------------------------------------------
# Partial files on restart, interruptions in this process
# ----------------------------------------------------------------------------------------------

def test_partial_point_files_are_computed_again(tmp_path):
    from ampmodel.studies.sweeps import run_sweep
    cfg = write_config(tmp_path)
    out = tmp_path / "sweep"
    first = run_sweep(cfg, out, jobs=1, plots=False)
    csv = (out / "sweep.csv").read_text()
    points = out / store.POINTS
    # a file cut short (a copy interrupted half-way), one without its completeness mark, a writer's
    # leftover, and a point removed
    data = (points / "0001.h5").read_bytes()
    (points / "0001.h5").write_bytes(data[: len(data) // 2])
    with h5py.File(points / "0004.h5", "a") as f:
        del f.attrs["complete"]
    (points / ".0005.h5.abc123.part").write_bytes(b"partial")
    (points / "0006.h5").unlink()
    again = run_sweep(cfg, out, jobs=1, plots=False)
    assert sorted(again.computed) == [1, 4, 6] and len(again.reused) == 5
    assert not list(points.glob(".*.part"))
    assert (out / "sweep.csv").read_text() == csv
    assert again.summaries == first.summaries


def test_ctrl_c_in_this_process_keeps_the_points_and_the_table(tmp_path, capsys, monkeypatch):
    """A KeyboardInterrupt at the fourth point (--jobs 1): the three before are kept and listed in the
    table; the message gives the command; the folder resumes."""
    from ampmodel import simulation as solver
    real = solver.simulate
    calls = {"n": 0}

    def interrupted(config, progress=False):
        calls["n"] += 1
        if calls["n"] == 4:
            raise KeyboardInterrupt
        return real(config, progress=progress)
    monkeypatch.setattr(solver, "simulate", interrupted)
    write_config(tmp_path)
    code, out, err = _main(["sweep", "rod.toml", "--jobs", "1", "--no-plots"], capsys, tmp_path, monkeypatch)
    assert code == EXIT_INTERRUPTED and "Traceback" not in err
    assert "interrupted: 3 of 8 points are done and kept in runs/rod-sweep/" in err
    assert "-m ampmodel sweep rod.toml --jobs 1 --no-plots --out runs/rod-sweep" in err or \
        "ampmodel sweep rod.toml --jobs 1 --no-plots --out runs/rod-sweep" in err
    table = store.read_table(tmp_path / "runs" / "rod-sweep" / "sweep.h5")
    assert np.isfinite(table["output_energy_J"]).sum() == 3
    monkeypatch.setattr(solver, "simulate", real)
    code, out, err = _main(["sweep", "rod.toml", "--jobs", "1", "--no-plots"], capsys, tmp_path, monkeypatch)
    assert code == 0 and "computed 5, found 3 already done" in out


def test_a_killed_run_leaves_only_a_hidden_partial_folder_that_a_later_run_removes(tmp_path, monkeypatch):
    """What SIGKILL leaves of a run (its hidden .partial folder, lock released) is removed by the next run
    into the same place once it is older than run_folder.STALE_AFTER_S; a folder whose owner still holds
    its lock is left alone."""
    from ampmodel.output import run_folder
    base = tmp_path / "runs" / "rod"
    base.parent.mkdir(parents=True)
    dead = base.parent / ".rod.dead1234.partial"
    dead.mkdir()
    (dead / "result.h5").write_bytes(b"half")
    alive = base.parent / ".rod.alive567.partial"
    alive.mkdir()
    old = time.time() - 2 * run_folder.STALE_AFTER_S
    for folder in (dead, alive):
        os.utime(folder, (old, old))
    fcntl = pytest.importorskip("fcntl")
    fd = os.open(alive, os.O_RDONLY)
    fcntl.flock(fd, fcntl.LOCK_EX)          # flock locks belong to the open file: another open() is refused
    try:
        removed = run_folder.remove_stale(base.parent, "rod")
    finally:
        os.close(fd)
    assert [Path(p).name for p in removed] == [dead.name]
    assert not dead.exists() and alive.exists()


def _die(task):
    """A task whose worker process dies (as one killed by the system for lack of memory would)."""
    if task == 1:
        os._exit(3)
    return task


def test_a_worker_that_dies_is_named_not_a_traceback():
    from ampmodel.studies.backends import WorkerLost, run_tasks
    with pytest.raises(WorkerLost) as info:
        list(run_tasks(_die, [0, 1, 2, 3], "loky", 2))
    assert "a worker process died" in str(info.value) and "fewer --jobs" in str(info.value)


def test_the_atomic_writer(tmp_path):
    from ampmodel.output import atomic
    target = tmp_path / "table.csv"
    atomic.write_text(target, "a,b\n")
    assert target.read_text() == "a,b\n"
    assert target.stat().st_mode & 0o777 == atomic.default_mode()     # not the private mode of a temp file
    with pytest.raises(KeyboardInterrupt):
        with atomic.target(target) as tmp:
            tmp.write_text("half")
            raise KeyboardInterrupt
    assert target.read_text() == "a,b\n" and sorted(p.name for p in tmp_path.iterdir()) == ["table.csv"]
    (tmp_path / ".table.csv.x1.part").write_text("left by a killed writer")
    assert atomic.remove_parts(tmp_path) == 1 and sorted(p.name for p in tmp_path.iterdir()) == ["table.csv"]
    error = OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), "/data/runs/x/result.h5")
    assert atomic.is_write_error(error) and not atomic.is_write_error(OSError(errno.EIO, "I/O error"))
    assert atomic.describe_write_error(error) == (
        "cannot write /data/runs/x/result.h5: the disk is full (no space left on device): free some space, or give "
        "--out a folder on another disk (ENOSPC: No space left on device)")
    assert not atomic.is_complete_hdf5(target)
