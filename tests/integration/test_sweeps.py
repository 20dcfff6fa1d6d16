"""Sweeps end to end: points equal single runs, the table files, orders, resume, refusals, dask, plots."""
from __future__ import annotations

import csv
import json
import os
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
from sweep_helpers import ROOT, GRID_4x2, ampmodel, write_config

import ampmodel as api
from ampmodel.output.hdf5 import read_hdf5
from ampmodel.studies.store import FolderError

SCALARS = ("input_energy_J", "output_energy_J", "gain", "stored_energy_J", "stored_energy_final_J",
           "extraction_efficiency", "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad")
EXPECTED_4x2 = [(e, g) for e in (0.002, 0.005, 0.01, 0.02) for g in (4.0, 8.0)]   # the gain varies fastest


def read_csv(path: Path) -> list[dict]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    """A 4 x 2 sweep run once through the command line with two loky workers."""
    tmp = tmp_path_factory.mktemp("sweep")
    config = write_config(tmp)
    out = tmp / "out"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "2", cwd=tmp)
    assert proc.returncode == 0, proc.stderr
    return config, out, proc


def test_sweep_reports_and_writes_the_folder(swept):
    config, out, proc = swept
    assert "8 points: computed 8, found 0 already done (2 loky workers" in proc.stdout
    assert "Laser safety" in proc.stdout
    assert "sweep: 100%" in proc.stderr and "8/8" in proc.stderr          # the progress bar with its count
    for name in ("manifest.json", "sweep.h5", "sweep.csv"):
        assert (out / name).is_file(), name
    assert sorted(p.name for p in (out / "points").iterdir()) == [f"{i:04d}.h5" for i in range(8)]
    assert not list(out.rglob("*.part"))


def test_notes_are_not_counted_as_warnings(swept):
    """Every point gives notes (self-focusing far off, few time slices) and no warning: the table's
    warning_count is 0 everywhere and the report names no point "with warnings"."""
    _, out, proc = swept
    rows = read_csv(out / "sweep.csv")
    assert [r["warning_count"] for r in rows] == ["0"] * 8
    for i in range(8):
        summary = json.loads(read_hdf5(out / "points" / f"{i:04d}.h5")["attrs"]["summary"])
        assert summary["warnings"] == [] and {n["code"] for n in summary["notices"]} == {"self-focusing", "time-slices"}
        assert all(n["severity"] == "note" for n in summary["notices"])
    assert "warnings at" not in proc.stdout


def test_every_point_equals_the_single_run_with_set(swept, tmp_path):
    config, out, _ = swept
    for i, (energy, gain) in enumerate(EXPECTED_4x2):
        sets = [f"seed.energy_J={energy}", f"medium.rod.small_signal_gain={gain}"]
        single = api.simulate(api.load_config(config, sets))          # what `run --set` runs
        point = read_hdf5(out / "points" / f"{i:04d}.h5")
        summary = json.loads(point["attrs"]["summary"])
        for key in SCALARS:
            assert summary[key] == pytest.approx(single.summary[key], rel=1e-12, abs=1e-300), (i, key)
        last = sorted(point["steps"])[-1]
        np.testing.assert_allclose(point["steps"][last]["fluence"], single.steps[-1].fluence_J_m2, rtol=1e-12)
        np.testing.assert_allclose(point["media"]["rod"]["gain_final"], single.media["rod"].gain_final_per_m,
                                   rtol=1e-12)
    # and one of them through the command line itself
    proc = ampmodel("run", str(config), "--out", str(tmp_path / "single"), "--no-plots",
                    "--set", "seed.energy_J=0.01", "--set", "medium.rod.small_signal_gain=8.0", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    single = json.loads((tmp_path / "single" / "summary.json").read_text())
    point = json.loads(read_hdf5(out / "points" / "0005.h5")["attrs"]["summary"])
    for key in SCALARS:
        assert point[key] == pytest.approx(single[key], rel=1e-12, abs=1e-300), key


def test_sweep_csv_is_the_table_in_grid_order(swept):
    _, out, _ = swept
    rows = read_csv(out / "sweep.csv")
    assert [(float(r["seed.energy_J"]), float(r["medium.rod.small_signal_gain"])) for r in rows] == EXPECTED_4x2
    assert [int(r["index"]) for r in rows] == list(range(8))
    assert rows[3]["point_file"] == "points/0003.h5"
    for key in SCALARS + ("warning_count",):
        assert key in rows[0], key
    for i, r in enumerate(rows):
        summary = json.loads(read_hdf5(out / "points" / f"{i:04d}.h5")["attrs"]["summary"])
        assert float(r["output_energy_J"]) == summary["output_energy_J"]   # full precision


def test_sweep_h5_holds_the_table_with_units_and_links(swept, tmp_path):
    _, out, _ = swept
    os.chdir(tmp_path)     # the links are relative to sweep.h5, not to the working directory
    try:
        with h5py.File(out / "sweep.h5", "r") as f:
            assert f["swept/seed.energy_J"].attrs["units"] == "J"
            assert f["swept/medium.rod.small_signal_gain"].attrs["units"] == "1"
            assert f["summary/peak_fluence_J_cm2"].attrs["units"] == "J/cm^2"
            assert f["summary/b_integral_rad"].attrs["units"] == "rad"
            np.testing.assert_array_equal(f["swept/seed.energy_J"][()], [e for e, _ in EXPECTED_4x2])
            np.testing.assert_array_equal(f["index"][()], np.arange(8))
            for key in SCALARS:
                assert f[f"summary/{key}"].shape == (8,)
            missing = []
            for group in ("swept", "summary"):
                for name, ds in f[group].items():
                    if "units" not in ds.attrs:
                        missing.append(name)
            assert not missing
            assert sorted(f["points"]) == [f"{i:04d}" for i in range(8)]
            link = f["points"].get("0006", getlink=True)
            assert isinstance(link, h5py.ExternalLink) and link.filename == "points/0006.h5"
            point = f["points/0006"]
            assert json.loads(point.attrs["sweep_values"]) == {"medium.rod.small_signal_gain": 4.0,
                                                                "seed.energy_J": 0.02}
            assert f["summary/output_energy_J"][6] == json.loads(point.attrs["summary"])["output_energy_J"]
            assert f["points/0006/steps/002/fluence"].attrs["units"] == "J/m^2"
    finally:
        os.chdir(ROOT)


def test_sweep_plots_have_units_and_are_not_blank(swept):
    import matplotlib.image as mpimg
    _, out, _ = swept
    names = {p.name for p in (out / "plots").glob("*.png")}
    assert {"output_energy_J.png", "peak_fluence_J_cm2.png", "b_integral_rad.png", "extraction_efficiency.png",
            "overview.png"} <= names
    assert "pulse_duration_ns.png" not in names                          # constant over the sweep
    assert not list((out / "points").glob("*.png"))                      # points stay light
    image = mpimg.imread(out / "plots" / "output_energy_J.png")
    assert image.shape[1] > 800 and image[..., :3].std() > 0.05


def test_zip_order_through_the_api(tmp_path):
    extra = '\n[sweep]\n"seed.energy_J" = [0.002, 0.004, 0.008]\n"step.1.transmission" = [0.9, 0.8, 0.7]\n' \
            'combine = "zip"\n'
    config = write_config(tmp_path, extra)
    result = api.run_sweep(config, tmp_path / "zip", jobs=1, plots=True)
    assert result.values == [{"seed.energy_J": 0.002, "step.1.transmission": 0.9},
                             {"seed.energy_J": 0.004, "step.1.transmission": 0.8},
                             {"seed.energy_J": 0.008, "step.1.transmission": 0.7}]
    assert result.computed == [0, 1, 2] and not result.failed
    for v, s in zip(result.values, result.summaries, strict=True):
        assert s["input_energy_J"] == pytest.approx(v["seed.energy_J"], rel=1e-12)
        assert s["steps"][1]["gain"] == pytest.approx(v["step.1.transmission"], rel=1e-12)
    rows = read_csv(tmp_path / "zip" / "sweep.csv")
    assert [float(r["step.1.transmission"]) for r in rows] == [0.9, 0.8, 0.7]
    assert (tmp_path / "zip" / "plots" / "output_energy_J.png").is_file()


def test_a_restarted_sweep_computes_only_the_missing_points(tmp_path):
    config = write_config(tmp_path)
    out = tmp_path / "out"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", "--no-plots", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    points = out / "points"
    before = {p.name: p.stat().st_mtime_ns for p in points.iterdir()}
    time.sleep(0.05)
    (points / "0003.h5").unlink()                                        # a deleted point
    data = (points / "0005.h5").read_bytes()
    (points / "0005.h5").write_bytes(data[: len(data) // 3])             # a partial point
    (points / ".0006.h5.x1y2.part").write_bytes(b"left by a killed worker")
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "2", "--no-plots", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "8 points: computed 2, found 6 already done (2 loky workers" in proc.stdout
    after = {p.name: p.stat().st_mtime_ns for p in points.iterdir()}
    assert sorted(after) == [f"{i:04d}.h5" for i in range(8)]             # the stale .part is gone
    changed = sorted(name for name in after if after[name] != before[name])
    assert changed == ["0003.h5", "0005.h5"]
    rows = read_csv(out / "sweep.csv")
    assert [(float(r["seed.energy_J"]), float(r["medium.rod.small_signal_gain"])) for r in rows] == EXPECTED_4x2
    # through the API: nothing is left to compute
    result = api.run_sweep(config, out, plots=False)
    assert result.computed == [] and result.reused == list(range(8))


def test_an_extended_sweep_computes_only_the_new_points(tmp_path):
    config = write_config(tmp_path)
    out = tmp_path / "out"
    first = api.run_sweep(config, out, jobs=1, plots=False)
    assert first.computed == list(range(8))
    longer = GRID_4x2.replace("0.02]", "0.02, 0.04]")
    config.write_text(config.read_text().replace(GRID_4x2, longer))
    second = api.run_sweep(config, out, jobs=1, plots=False)
    assert second.computed == [8, 9] and second.reused == list(range(8))
    assert len(read_csv(out / "sweep.csv")) == 10


def test_a_folder_of_another_config_is_refused(tmp_path):
    config = write_config(tmp_path)
    out = tmp_path / "out"
    api.run_sweep(config, out, jobs=1, plots=False)
    before = {p: p.stat().st_mtime_ns for p in out.rglob("*")}
    proc = ampmodel("sweep", str(config), "--out", str(out), "--set", "medium.rod.length_mm=90", cwd=tmp_path)
    assert proc.returncode == 2
    assert "holds a sweep of a different config" in proc.stderr
    assert "medium[0].length_mm: 100 -> 90" in proc.stderr
    assert "Give another --out" in proc.stderr and "Traceback" not in proc.stderr
    assert {p: p.stat().st_mtime_ns for p in out.rglob("*")} == before    # untouched
    with pytest.raises(FolderError, match="seed.duration_ns: 10 -> 5"):
        api.run_sweep(config, out, overrides=["seed.duration_ns=5"], plots=False)


def test_folders_that_are_not_sweeps_are_refused(tmp_path):
    config = write_config(tmp_path)
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine")
    proc = ampmodel("sweep", str(config), "--out", str(other), cwd=tmp_path)
    assert proc.returncode == 2 and "is not a sweep or spread folder" in proc.stderr
    assert sorted(p.name for p in other.iterdir()) == ["notes.txt"]
    proc = ampmodel("sweep", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(tmp_path / "x"),
                    cwd=tmp_path)
    assert proc.returncode == 2 and "has no [sweep] table" in proc.stderr
    assert not (tmp_path / "x").exists()


def test_a_bad_point_is_reported_before_anything_runs(tmp_path):
    extra = '\n[sweep]\n"seed.duration_ns" = [5.0, 10.0]\n"grid.points" = [16, 4096]\n'
    config = write_config(tmp_path, extra, name="big.toml")
    proc = ampmodel("sweep", str(config), "--out", str(tmp_path / "big"), "--set", "grid.time_slices=4096",
                    cwd=tmp_path)
    assert proc.returncode == 2
    assert "point 0001 (seed.duration_ns = 5.0, grid.points = 4096)" in proc.stderr and "GiB" in proc.stderr
    assert not (tmp_path / "big").exists()


def test_default_folder_and_options(tmp_path):
    config = write_config(tmp_path, '\n[sweep]\n"seed.energy_J" = [0.002, 0.004]\n', name="mini.toml")
    proc = ampmodel("sweep", str(config), "--jobs", "1", "--no-plots", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "runs" / "mini-sweep" / "sweep.csv").is_file()
    assert "sweep:" not in proc.stderr                                       # --quiet: no progress bar
    for args, text in ((["--jobs", "0"], "--jobs 0: must be 1 or more"),
                       (["--backend", "loky", "--scheduler", "tcp://127.0.0.1:1"], "needs --backend dask"),
                       (["--scheduler", "127.0.0.1:8786"], "tcp://host:port")):
        proc = ampmodel("sweep", str(config), "--out", str(tmp_path / "o"), *args, cwd=tmp_path)
        assert proc.returncode == 2 and text in proc.stderr, (args, proc.stderr)
    assert not (tmp_path / "o").exists()


def test_time_sweep_for_the_benchmark(tmp_path):
    from ampmodel.studies.sweeps import time_sweep
    config = write_config(tmp_path, "")
    timing = time_sweep(config, points=3, workers=(1, 2), warm=True)
    assert timing["points"] == 3 and set(timing["seconds"]) == {1, 2} and timing["warm"]
    assert timing["speedup"][1] == 1.0 and timing["speedup"][2] > 0
    assert timing["point_seconds"] > 0


# --- dask ---------------------------------------------------------------------------------------------

@pytest.mark.slow
def test_dask_scheduler_with_two_workers_gives_the_same_table(swept, tmp_path):
    """A LocalCluster on loopback started here (two worker processes) stands in for a running cluster."""
    distributed = pytest.importorskip("distributed")
    config, loky_out, _ = swept
    with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        proc = ampmodel("sweep", str(config), "--out", str(tmp_path / "dask"), "--scheduler",
                        cluster.scheduler_address, "--no-plots", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "computed 8, found 0 already done (2 dask workers" in proc.stdout
    assert read_csv(tmp_path / "dask" / "sweep.csv") == read_csv(loky_out / "sweep.csv")
    # the dask backend without a scheduler: its own LocalCluster, resuming the folder after a deletion
    (tmp_path / "dask" / "points" / "0002.h5").unlink()
    (tmp_path / "dask" / "points" / "0005.h5").unlink()
    result = api.run_sweep(config, tmp_path / "dask", backend="dask", jobs=2, plots=False)
    assert sorted(result.computed) == [2, 5] and result.jobs == 2
    assert read_csv(tmp_path / "dask" / "sweep.csv") == read_csv(loky_out / "sweep.csv")


DASK_MAIN = """
import sys
%s
sys.argv = ["dask-ROLE"] + sys.argv[1:]
from distributed.cli.dask_ROLE import main
main()
"""
NO_AMPMODEL = """
class _NoAmpmodel:
    def find_spec(self, name, path=None, target=None):
        if name == "ampmodel" or name.startswith("ampmodel."):
            raise ModuleNotFoundError(f"No module named {name!r}")
sys.meta_path.insert(0, _NoAmpmodel())
"""


def _start(tmp_path: Path, role: str, *args: str, block: bool):
    """Start a dask scheduler or worker in its own process; with ``block``, ampmodel cannot be imported there."""
    import subprocess
    import sys
    script = tmp_path / f"{role}.py"
    script.write_text(DASK_MAIN.replace("ROLE", role) % (NO_AMPMODEL if block else ""))
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    return subprocess.Popen([sys.executable, str(script), *args], cwd=tmp_path, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


@pytest.mark.slow
@pytest.mark.parametrize("blocked", ["scheduler", "worker"])
def test_a_cluster_without_ampmodel_is_refused_in_time(blocked, tmp_path):
    """The pre-flight check stops a sweep whose scheduler or workers cannot import ampmodel."""
    pytest.importorskip("distributed")
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    address = f"tcp://127.0.0.1:{port}"
    scheduler = _start(tmp_path, "scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard",
                       block=blocked == "scheduler")
    worker = _start(tmp_path, "worker", address, "--no-nanny", "--nthreads", "1", "--host", "127.0.0.1",
                    "--no-dashboard", block=blocked == "worker")
    try:
        import distributed
        with distributed.Client(address, timeout=60) as client:     # both up before the clock starts
            client.wait_for_workers(1, timeout=60)
        config = write_config(tmp_path)
        out = tmp_path / "out"
        start = time.perf_counter()
        proc = ampmodel("sweep", str(config), "--out", str(out), "--scheduler", address, "--timeout", "8",
                        cwd=tmp_path, timeout=120)
        took = time.perf_counter() - start
    finally:
        for p in (worker, scheduler):
            p.terminate()
        for p in (worker, scheduler):
            try:
                p.wait(timeout=20)
            except Exception:
                p.kill()
    assert proc.returncode == 4, (proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr
    if blocked == "scheduler":
        assert "the dask scheduler at" in proc.stderr and "cannot import ampmodel" in proc.stderr
    else:
        assert "did not answer a short task importing ampmodel" in proc.stderr
        assert "installed on every worker" in proc.stderr
    assert took < 60
    assert not out.exists()                                               # nothing left behind


def test_a_cw_sweep_runs_through_the_same_machinery(tmp_path):
    config = ROOT / "configs" / "cw_double_pass_single_frequency.toml"
    small = ["grid.points=16", 'sweep."seed.power_W"=[0.5, 2.0]']
    result = api.run_sweep(config, tmp_path / "cw", jobs=1, overrides=small, plots=True)
    assert result.computed == [0, 1] and not result.failed
    for v, s in zip(result.values, result.summaries, strict=True):
        single = api.simulate(api.load_config(config, [small[0], f"seed.power_W={v['seed.power_W']}"]))
        assert s["output_power_W"] == pytest.approx(single.summary["output_power_W"], rel=1e-12)
    with h5py.File(tmp_path / "cw" / "sweep.h5", "r") as f:
        assert f["summary/output_power_W"].attrs["units"] == "W"
    assert (tmp_path / "cw" / "plots" / "output_power_W.png").is_file()
    assert not (tmp_path / "cw" / "plots" / "cw_residual.png").exists()       # a solver check: table only


def test_a_failed_point_is_listed_kept_out_of_the_table_and_retried(tmp_path):
    config = ROOT / "configs" / "cw_double_pass_single_frequency.toml"
    sets = ["--set", "grid.points=16", "--set", 'sweep."solver.max_iterations"=[2, 1000]']
    out = tmp_path / "out"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", "--quiet", *sets, cwd=tmp_path)
    assert proc.returncode == 1, proc.stderr
    assert "2 points: computed 1, found 0 already done, 1 failed" in proc.stdout
    assert "point 0000 FAILED (solver.max_iterations = 2)" in proc.stdout and "did not converge" in proc.stdout
    assert "Traceback" not in proc.stdout + proc.stderr          # bad input of that point, not a crash
    rows = read_csv(out / "sweep.csv")
    assert rows[0]["point_file"] == "" and rows[0]["output_power_W"] == "nan" and rows[0]["warning_count"] == "-1"
    assert rows[1]["point_file"] == "points/0001.h5" and float(rows[1]["output_power_W"]) > 0
    with h5py.File(out / "sweep.h5", "r") as f:
        assert sorted(f["points"]) == ["0001"]
    again = api.run_sweep(config, out, jobs=1, plots=False, overrides=sets[1::2])
    assert again.computed == [] and sorted(again.failed) == [0] and again.reused == [1]


# --- every figure in the table, named figures ---------------------------------------------------------

SMALL_GRID = """
[sweep]
"seed.energy_J" = [0.002, 0.005]
"medium.rod.small_signal_gain" = [4.0, 8.0]
"""


def test_the_table_holds_every_figure_by_its_path_and_named_ones_are_plotted(tmp_path):
    config = write_config(tmp_path, SMALL_GRID + 'figures = ["steps.2.peak_fluence_J_cm2"]\n')
    out = tmp_path / "out"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    header = proc.stdout.splitlines()[2]
    assert header.split()[-2:] == ["steps.2.peak_fluence_J_cm2", "warnings"]        # in the printed table
    with h5py.File(out / "sweep.h5", "r") as f:
        names = set(f["summary"])
        fluence = f["summary/steps.2.peak_fluence_J_cm2"]
        assert fluence.attrs["units"] == "J/cm^2"
        fluence = fluence[()]
        stored = f["summary/media.rod.stored_energy_J"][()]
        assert f["summary/output_energy_J"].attrs["units"] == "J"                     # top level as before
    assert {"steps.0.energy_out_J", "steps.1.passive_loss_J", "seed_beam.fill_factor"} <= names
    assert not any(n.endswith(".index") for n in names)
    for i in range(4):
        summary = json.loads(read_hdf5(out / "points" / f"{i:04d}.h5")["attrs"]["summary"])
        assert fluence[i] == summary["steps"][2]["peak_fluence_J_cm2"]
        assert stored[i] == summary["media"][0]["stored_energy_J"]
    rows = read_csv(out / "sweep.csv")
    columns = list(rows[0])
    # the top-level columns keep their place; the figures by path come after warning_count
    assert columns.index("warning_count") < columns.index("steps.0.energy_out_J")
    assert columns.index("output_energy_J") < columns.index("warning_count")
    assert (out / "plots" / "steps.2.peak_fluence_J_cm2.png").is_file()
    assert not (out / "plots" / "steps.0.energy_out_J.png").exists()                  # not named
    result = api.run_sweep(config, out, plots=False)
    assert result.column("steps.2.peak_fluence_J_cm2") == list(fluence)


def test_a_resumed_sweep_reads_older_point_files_for_their_own_figures(tmp_path):
    """Point files of an earlier version, whose summaries lack the steps and media: the table has
    their figures where their summaries have them (NaN elsewhere); a named figure their summaries lack
    is checked on a point still to compute, run first."""
    config = write_config(tmp_path, SMALL_GRID)
    out = tmp_path / "out"
    api.run_sweep(config, out, jobs=1, plots=False)
    with h5py.File(out / "points" / "0000.h5", "a") as f:
        older = json.loads(f.attrs["summary"])
        for key in ("steps", "media", "seed_beam"):
            del older[key]
        f.attrs["summary"] = json.dumps(older)
    (out / "points" / "0003.h5").unlink()
    config.write_text(config.read_text() + 'figures = ["steps.2.peak_fluence_J_cm2"]\n')
    result = api.run_sweep(config, out, jobs=1, plots=False)
    assert result.computed == [3] and result.reused == [0, 1, 2]
    with h5py.File(out / "sweep.h5", "r") as f:
        fluence = f["summary/steps.2.peak_fluence_J_cm2"][()]
        energy = f["summary/output_energy_J"][()]
    assert np.isnan(fluence[0]) and np.all(np.isfinite(fluence[1:]))
    assert energy[0] == older["output_energy_J"]
    point = json.loads(read_hdf5(out / "points" / "0003.h5")["attrs"]["summary"])
    assert fluence[3] == point["steps"][2]["peak_fluence_J_cm2"]
    # a named figure the oldest point lacks, points left to compute: the first of them runs first
    config.write_text(config.read_text().replace("steps.2.peak_fluence_J_cm2", "steps.2.b_integral_rad"))
    for name in ("0001.h5", "0002.h5", "0003.h5"):
        (out / "points" / name).unlink()
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "computed 3, found 1 already done" in proc.stdout
    assert "point 0001 first, to check the figures the table names" in proc.stderr
    # every point done and the first lacks a named figure: bad input, the table left as it was
    config.write_text(config.read_text().replace("steps.2.b_integral_rad", "media.rod.stored_energy_J"))
    before = (out / "sweep.csv").read_bytes()
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", cwd=tmp_path)
    assert proc.returncode == 2
    assert ("sweep.figures[0] = media.rod.stored_energy_J: media.rod.stored_energy_J is not a figure of point "
            "0000: summary.json has no media") in proc.stderr
    assert (out / "sweep.csv").read_bytes() == before                         # nothing lost


def test_an_unknown_figure_in_the_sweep_table_is_bad_input(tmp_path):
    config = write_config(tmp_path, SMALL_GRID + 'figures = ["steps.2.peak_fluence_J_cm", "media.rdo.gain_dB"]\n')
    proc = ampmodel("sweep", str(config), "--out", str(tmp_path / "o"), cwd=tmp_path)
    assert proc.returncode == 2
    lines = proc.stderr.splitlines()
    assert lines[-1] == "2 problems in the input; nothing was run or written."
    assert "sweep.figures[0] = steps.2.peak_fluence_J_cm: a step has no figure 'peak_fluence_J_cm'; did you mean " \
           "'peak_fluence_J_cm2'" in lines[0]
    assert "sweep.figures[1] = media.rdo.gain_dB: no medium 'rdo' in the config; did you mean 'rod'?" in lines[1]
    assert not (tmp_path / "o").exists()
