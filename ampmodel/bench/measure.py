"""The measurements of the benchmark: each times two things side by side in one run (CPU time for
work in this process, wall time for processes and threads), best of a few repeats."""
from __future__ import annotations

import functools
import json
import os
import subprocess
import sys
import time
from pathlib import Path
from typing import Any, Callable

from ampmodel.bench.cases import (
    SPECTRAL_BANDWIDTH_NM,
    bench_config,
    reference_arrays,
    reference_loop,
    reference_loop_spectral,
    spectral_arrays,
)


def _time(fn: Callable[[], Any]) -> tuple[float, Any]:
    """Wall time of fn() (s) and its result."""
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def _cpu(fn: Callable[[], Any]) -> tuple[float, Any]:
    """CPU time of this process spent in fn() (s; user and system) and its result: for single-threaded
    work the fairest measure on a machine shared with other work (waiting for a core is not counted)."""
    t0 = time.process_time()
    out = fn()
    return time.process_time() - t0, out


def measure_pulsed(size: dict, repeat: int, lit: str = "slab") -> dict[str, Any]:
    """Best times of the reference loop, simulate with n2 and simulate without, interleaved, on the
    ``lit`` case (:func:`cases.bench_config`); and how closely the outputs agree (output fluence,
    relative; final ln G, absolute)."""
    import numpy as np

    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    args = (size["points"], size["time_slices"], size["slices"], size["passes"])
    with_n2 = load_config(bench_config(*args, lit=lit))
    without = load_config(bench_config(*args, n2=False, lit=lit))
    ref, sim, comp, wall = [], [], [], {"reference": [], "simulate": []}
    for _ in range(repeat):
        fluence, ln_gain, mask, fsat, reverses = reference_arrays(with_n2)
        w0 = time.perf_counter()
        ref.append(_cpu(functools.partial(reference_loop, fluence, ln_gain, mask, fsat, reverses))[0])
        w1 = time.perf_counter()
        t, result = _cpu(lambda: simulate(with_n2))
        w2 = time.perf_counter()
        sim.append(t)
        t, result0 = _cpu(lambda: simulate(without))
        comp.append(t)
        wall["reference"].append(w1 - w0)
        wall["simulate"].append(w2 - w1)
    agree = {}
    for name, res in (("with_n2", result), ("without_n2", result0)):
        out = res.steps[-1].fluence_J_m2
        lit_px = out > 0
        rec = res.media["rod"]
        agree[name] = {
            "fluence_rel": float(np.max(np.abs(out[lit_px] / fluence.sum(axis=0)[lit_px] - 1.0))),
            "ln_gain_abs": float(np.max(np.abs(rec.gain_final_per_m * rec.slice_length_m - ln_gain)))}
    lit_pixels = int(np.count_nonzero(result.steps[-1].fluence_J_m2))
    per_pass = size["time_slices"] * size["slices"] * size["passes"]
    return {"reference_s": min(ref), "simulate_s": min(sim), "composite_s": min(comp), "agree": agree,
            "wall_reference_s": min(wall["reference"]), "wall_simulate_s": min(wall["simulate"]),
            "lit_pixels": lit_pixels, "pixels": size["points"] ** 2,
            "updates": size["points"] ** 2 * per_pass, "lit_updates": lit_pixels * per_pass,
            "b_integral_rad": result.summary["b_integral_rad"]}


def measure_spectral(size: dict, repeat: int) -> dict[str, Any]:
    """The slab case with a stretched seed (every time slice at its own wavelength): simulate against
    :func:`cases.reference_loop_spectral` (the plain loop on populations), best CPU times interleaved, and
    how closely they agree (output fluence, relative; final N2, relative to the doping)."""
    import numpy as np

    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    args = (size["points"], size["time_slices"], size["slices"], size["passes"])
    config = load_config(bench_config(*args, bandwidth_nm=SPECTRAL_BANDWIDTH_NM))
    ref, sim = [], []
    for _ in range(repeat):
        arrays = spectral_arrays(config)
        ref.append(_cpu(functools.partial(reference_loop_spectral, *arrays))[0])
        t, result = _cpu(lambda: simulate(config))
        sim.append(t)
    fluence, n2, nt = arrays[0], arrays[1], arrays[5]
    out = result.steps[-1].fluence_J_m2
    rec = result.media["rod"]
    n2_sim = rec.ions.n2_per_m3(rec.gain_final_per_m)
    return {"reference_s": min(ref), "simulate_s": min(sim),
            "updates": size["points"] ** 2 * size["time_slices"] * size["slices"] * size["passes"],
            "fluence_rel": float(np.max(np.abs(out / fluence.sum(axis=0) - 1.0))),
            "n2_rel": float(np.max(np.abs(n2_sim - n2)) / nt),
            "output_bandwidth_nm": result.summary["output_bandwidth_nm"]}


def measure_scaling(size: dict, repeat: int, known: dict[int, float]) -> dict[int, float]:
    """Seconds per pixel·slice·step (all pixels of the grid) of simulate for each grid size."""
    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    per: dict[int, float] = {}
    for n in size["scaling"]:
        updates = n * n * size["time_slices"] * size["slices"] * size["passes"]
        if n in known:
            per[n] = known[n] / updates
            continue
        config = load_config(bench_config(n, size["time_slices"], size["slices"], size["passes"]))
        per[n] = min(_cpu(functools.partial(simulate, config))[0] for _ in range(repeat)) / updates
    return per


def bare_transforms(field, pairs: int, workers: int, chunked: bool) -> None:
    """``pairs`` fft2/ifft2 pairs of every time slice of ``field`` (Nt, N, N) complex, in place: nothing but
    the transforms (scipy.fft, overwrite_x).

    ``chunked=False``: each pair is one batched transform of the whole array with ``workers`` threads.
    ``chunked=True``: the way the field path runs them: chunks of ``field_step.chunk_rows`` time slices,
    each transformed ``pairs`` times in a row while it is in the processor cache, the chunks split over
    ``chunks.thread_count(workers)`` threads, one thread per transform."""
    import scipy.fft

    from ampmodel.beam import chunks
    from ampmodel.kernels import field_step
    if not chunked:
        for _ in range(pairs):
            scipy.fft.fft2(field, axes=(-2, -1), workers=workers, overwrite_x=True)
            scipy.fft.ifft2(field, axes=(-2, -1), workers=workers, overwrite_x=True)
        return
    nt = field.shape[0]
    rows = field_step.chunk_rows(nt, field.shape[1] * field.shape[2])
    starts = list(range(0, nt, rows))

    def work(thread: int, c: int, stage: int) -> None:
        e = field[starts[c]:starts[c] + rows]
        for _ in range(pairs):
            scipy.fft.fft2(e, axes=(-2, -1), workers=1, overwrite_x=True)
            scipy.fft.ifft2(e, axes=(-2, -1), workers=1, overwrite_x=True)

    chunks.run_chunks(len(starts), 1, work, chunks.thread_count(workers), ordered=False)


def measure_diffraction(size: dict, repeat: int) -> dict[str, Any]:
    """The benchmark case with diffraction (grid.diffraction) against the bare FFTs it needs: the run's 2-D
    transforms (Result.field_transforms, one time slice each) timed as that many fft2/ifft2 pairs of every
    slice of an (Nt, N, N) complex array with the same workers setting, done the two ways
    :func:`bare_transforms` knows (batched over the whole array, and in cache-sized chunks split over the
    threads as the field path runs them); the faster of the two is the reference. Wall time (the
    transforms use threads), best of ``repeat``, interleaved."""
    import numpy as np

    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    raw = bench_config(size["diffraction_grid"], size["time_slices"], size["slices"], size["passes"], lit="rod")
    raw["grid"]["diffraction"] = True
    config = load_config(raw)
    nt, n, workers = config.grid.time_slices, config.grid.points, config.grid.fft_workers
    field = np.exp(2j * np.pi * np.random.default_rng(1).random((nt, n, n)))
    sim, cpu, batched, chunked = [], [], [], []
    for _ in range(repeat):
        c0 = time.process_time()
        elapsed, result = _time(lambda: simulate(config))
        sim.append(elapsed)
        cpu.append(time.process_time() - c0)
        pairs = result.field_transforms // (2 * nt)
        batched.append(_time(functools.partial(bare_transforms, field, pairs, workers, chunked=False))[0])
        chunked.append(_time(functools.partial(bare_transforms, field, pairs, workers, chunked=True))[0])
    return {"simulate_s": min(sim), "simulate_cpu_s": min(cpu), "fft_s": min(min(batched), min(chunked)),
            "fft_batched_s": min(batched), "fft_chunked_s": min(chunked), "pairs": pairs,
            "transforms": result.field_transforms, "points": n, "threads": _threads(workers)}


def _threads(workers: int) -> int:
    from ampmodel.beam import chunks
    return chunks.thread_count(workers)


def _sweep_point(raw: dict) -> float:
    """One sweep point in a worker: the output energy of a run (J)."""
    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    return float(simulate(load_config(raw)).summary["output_energy_J"])


def _worker_ready() -> int:
    from ampmodel import simulation  # noqa: F401  (the imports a point needs)
    return os.getpid()


def idle_cpus(seconds: float = 0.5) -> float | None:
    """CPUs left idle by all other work over the next ``seconds`` (Linux /proc/stat; None elsewhere)."""
    def sample():
        with open("/proc/stat") as fh:
            values = [int(v) for v in fh.readline().split()[1:]]
        return values[3] + values[4], sum(values)            # idle + iowait, total (clock ticks)
    try:
        idle0, total0 = sample()
        time.sleep(seconds)
        idle1, total1 = sample()
    except (OSError, ValueError, IndexError):
        return None
    if total1 <= total0:
        return None
    return (os.cpu_count() or 1) * (idle1 - idle0) / (total1 - total0)


def measure_sweep(size: dict, repeat: int = 1) -> dict[str, Any]:
    """A sweep of ``sweep_points`` seed energies on 2 workers against 1, best of ``repeat`` each
    (interleaved).

    With the sweep machinery (ampmodel.sweeps.time_sweep) its own timing is used; without it, the points
    are independent simulate calls through joblib (loky): one worker runs them in this process (as a
    one-job sweep does), two run them in worker processes started (and their modules imported) before the
    timing starts; the start-up is reported beside. Wall time: the CPUs other work left idle just before
    the timing are reported with it."""
    try:
        from ampmodel.studies import sweeps
        timer = sweeps.time_sweep
    except (ImportError, AttributeError):
        timer = None
    raw = bench_config(size["sweep_grid"], size["time_slices"], size["slices"], size["passes"], lit="rod")
    n = size["sweep_points"]
    idle = idle_cpus()
    if timer is not None:
        runs = [timer(raw, points=n, workers=(1, 2)) for _ in range(repeat)]
        one_s = min(r["seconds"][1] for r in runs)
        two_s = min(r["seconds"][2] for r in runs)
        return {"how": "ampmodel.sweeps.time_sweep (loky; worker start-up, point files and table included)",
                "one_s": one_s, "two_s": two_s, "speedup": one_s / two_s, "startup_s": None, "idle_cpus": idle}
    from joblib import Parallel, delayed
    points = []
    for i in range(n):
        p = json.loads(json.dumps(raw))
        p["seed"]["energy_J"] = 0.05 * 2.0 ** (i / max(n - 1, 1) * 2.0 - 1.0)
        points.append(p)
    ones, twos = [], []
    with Parallel(n_jobs=2, backend="loky") as parallel:
        startup_s, _ = _time(lambda: parallel(delayed(_worker_ready)() for _ in range(2)))
        for _ in range(repeat):
            t, one = _time(lambda: Parallel(n_jobs=1)(delayed(_sweep_point)(p) for p in points))
            ones.append(t)
            t, two = _time(lambda: parallel(delayed(_sweep_point)(p) for p in points))
            twos.append(t)
            if any(abs(a - b) > 1e-12 * abs(a) for a, b in zip(one, two, strict=True)):
                raise RuntimeError("the sweep gave different results on 1 and 2 workers")
    return {"how": f"joblib (loky): {n} independent simulate calls; the sweep machinery is not in this version",
            "one_s": min(ones), "two_s": min(twos), "speedup": min(ones) / min(twos), "startup_s": startup_s,
            "idle_cpus": idle}


_MEMORY_CHILD = """
import json, resource, sys
import ampmodel
from ampmodel import simulation
from ampmodel.pulsed import memory
config = ampmodel.load_config(json.loads(sys.argv[1]))
if sys.argv[2] == "run":
    simulation.simulate(config)
scale = 1 if sys.platform == "darwin" else 1024
print(json.dumps({"peak": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * scale,
                  "required": sum(memory.required_array_bytes(config).values()),
                  "estimate": simulation.memory_estimate_bytes(config)}))
"""


def _child_env() -> dict[str, str]:
    env = dict(os.environ)
    root = str(Path(__file__).resolve().parents[1])
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


# A new process inherits its parent's peak resident size across exec (Linux keeps the larger of the
# two in ru_maxrss), so the measured child is started by a small launcher, never by the benchmark's own
# (large) process.
_LAUNCHER = "import subprocess, sys; sys.exit(subprocess.call(sys.argv[1:]))"


def _child(raw: dict, what: str) -> dict[str, int]:
    cmd = [sys.executable, "-c", _LAUNCHER, sys.executable, "-c", _MEMORY_CHILD, json.dumps(raw), what]
    proc = subprocess.run(cmd, capture_output=True, text=True, env=_child_env(), timeout=1800)
    if proc.returncode != 0:
        raise RuntimeError(f"memory measurement failed: {proc.stderr.strip()[-2000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def measure_memory(raw: dict) -> dict[str, float]:
    """Peak resident memory of a run in a child process, and of a child that imports and loads the same
    config without running it (the interpreter and its modules)."""
    base, run = _child(raw, "baseline"), _child(raw, "run")
    # at least one page: a tiny run may stay below the import-time peak of the interpreter
    return {"peak_B": run["peak"], "baseline_B": base["peak"], "run_B": max(run["peak"] - base["peak"], 4096),
            "required_B": run["required"], "estimate_B": run["estimate"]}


def measure_startup(repeat: int) -> list[float]:
    """Wall times of ``ampmodel --help`` in a new process (the same as the installed script)."""
    times = []
    for _ in range(repeat):
        t, proc = _time(lambda: subprocess.run([sys.executable, "-m", "ampmodel", "--help"], capture_output=True,
                                               env=_child_env(), timeout=120))
        if proc.returncode != 0:
            raise RuntimeError("ampmodel --help failed")
        times.append(t)
    return times


def _figure_cases(size: dict) -> tuple[Any, Any]:
    """A run like the demo (the rod case: maps, energy, pulse, gain, B-integral, beam figures) and a
    2 x 2 sweep of it over seed energy and small-signal gain (its summaries, as a sweep holds them)."""
    from types import SimpleNamespace

    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    n, nt = size["figures_grid"], size["figures_time_slices"]
    run = simulate(load_config(bench_config(n, nt, 6, 2, lit="rod")))
    values, summaries = [], []
    for energy in (0.01, 0.05):
        for gain in (4.0, 8.0):
            raw = bench_config(size["figures_sweep_grid"], 8, 4, 2, lit="rod", energy_J=energy)
            raw["medium"][0]["small_signal_gain"] = gain
            values.append({"seed.energy_J": energy, "medium.rod.small_signal_gain": gain})
            summaries.append(simulate(load_config(raw)).summary)
    sweep = SimpleNamespace(paths=["seed.energy_J", "medium.rod.small_signal_gain"], values=values,
                            summaries=summaries, title="figure benchmark sweep", out=Path("figures"))
    return run, sweep


def measure_figures(size: dict, repeat: int) -> dict[str, Any]:
    """Wall time of writing a run's figures and a sweep's, drawn as before (one figure after another in
    this process, a canvas built for each, PNG at zlib level 6, each figure cleared after writing) and as
    now (worker processes, the sweep's figures of single summary figures on one shared canvas per
    process, zlib level 1, left to the garbage collector), interleaved, best of
    ``repeat``, into fresh temporary folders."""
    import shutil
    import tempfile

    from ampmodel.plots.common import AS_BEFORE
    from ampmodel.plots.drawing import default_workers, draw_all
    from ampmodel.plots.run import figure_jobs
    from ampmodel.plots.sweep import sweep_jobs
    run, sweep = _figure_cases(size)
    times: dict[str, list[float]] = {"before_s": [], "now_s": []}
    files = 0
    with tempfile.TemporaryDirectory(prefix="ampmodel-bench-") as tmp:
        for k in range(repeat):
            for how, kwargs in (("before_s", {"workers": 1, "writing": AS_BEFORE}), ("now_s", {})):
                folder = Path(tmp) / f"{how}{k}"
                folder.mkdir()

                def draw(folder=folder, kwargs=kwargs, shared=how == "now_s") -> int:
                    jobs = figure_jobs(run, folder / "run") + sweep_jobs(sweep, "grid", folder / "sweep",
                                                                         shared=shared)
                    return len(draw_all(jobs, **kwargs))
                (folder / "run").mkdir()
                t, files = _time(draw)
                times[how].append(t)
                shutil.rmtree(folder)
    before, now = min(times["before_s"]), min(times["now_s"])
    return {"before_s": before, "now_s": now, "speedup": before / now, "files": files,
            "workers": default_workers(), "times_s": times}
