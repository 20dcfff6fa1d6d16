"""The benchmark behind ``ampmodel bench``: speed and memory figures, measured side by side in one run.

Every ratio compares two things timed in the same run one after the other, each repeated and the best
time kept (the least disturbed by other work on the machine). Single-threaded work in this process
(simulate, the plain loop, the scaling) is timed in CPU time (time.process_time): on a machine shared
with other jobs, waiting for a core is not counted; the wall times are reported beside. The sweep and
the start-up are wall times (they are about processes). The targets live here and only here: tests
never assert a time.

Figures (the full set; ``quick`` runs the same measurements on small cases, for a test):

* ``pulsed_ratio``: :func:`ampmodel.simulate` on the benchmark case (a four-pass Nd:YAG rod, 256²
  pixels, 64 time slices, 20 z-slices, no diffraction; the built-in Nd:YAG has n2, so the B-integral is
  tracked) against :func:`reference_loop`, a plain numpy loop doing the same slice updates on the same
  arrays (target <= 1.0);
* ``pulsed_composite_ratio``: the same case with n2 = 0: no result needs the inside of the medium, and
  the solver traverses it by composite slices (same target);
* ``diffraction_ratio``: the same case with diffraction (128², the field path) against the bare FFTs it
  needs, the faster of batched over the whole field and in cache-sized chunks on the same threads
  (:func:`measure_diffraction`; target <= 1.5), or "not available" without the field path;
* ``sweep_speedup``: 8 independent runs on 2 workers against 1 (target >= 1.7);
* ``scaling_spread``: time per pixel·slice·step at 128², 256², 512² (flat within 25 %);
* ``memory_ratio``: peak memory of the 512² case (resident, measured in a child process, less the
  interpreter and its modules measured the same way) against the arrays it must hold
  (:func:`ampmodel.pulsed.memory.required_array_bytes`; target <= 1.5);
* ``memory_peak_MB``: the peak of the 256² four-pass case, interpreter included (target <= 600 MB);
* ``memory_estimate_ratio``: :func:`ampmodel.simulation.memory_estimate_bytes` against that measured peak
  (the guard that refuses too-large runs; target 1.0 to 1.3: never below the real peak);
* ``startup_s``: wall time of ``ampmodel --help`` in a new process (target <= 0.5 s).
"""
from __future__ import annotations

import json
import os
import platform
import subprocess
import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Callable

from ampmodel._version import __version__

# The benchmark case: an invented scenario, a four-pass Nd:YAG rod (6.35 mm clear aperture) in a 9 mm
# window, seeded with a 10 ns Gaussian pulse of 50 mJ, 4.5 mm 1/e² diameter.
FULL = {"points": 256, "time_slices": 64, "slices": 20, "passes": 4, "repeat": 3,
        "scaling": (128, 256, 512), "memory_points": 512, "sweep_points": 8, "sweep_grid": 128,
        "diffraction_grid": 128, "startup_repeat": 5}
QUICK = {"points": 48, "time_slices": 12, "slices": 5, "passes": 4, "repeat": 1,
         "scaling": (32, 48, 64), "memory_points": 64, "sweep_points": 8, "sweep_grid": 32,
         "diffraction_grid": 32, "startup_repeat": 3}

MB = 1e6


def bench_config(points: int, time_slices: int, slices: int, passes: int, n2: bool = True,
                 energy_J: float = 0.05) -> dict[str, Any]:
    """The benchmark case as a config dict (see the module docstring); ``n2=False`` sets n2 = 0."""
    material: Any = "Nd:YAG" if n2 else {"base": "Nd:YAG", "n2_m2_W": 0.0}
    return {
        "title": f"benchmark: {passes}-pass Nd:YAG rod, {points}² pixels",
        "mode": "pulsed",
        "grid": {"points": points, "width_mm": 9.0, "time_slices": time_slices},
        "medium": [{"name": "rod", "material": material, "length_mm": 80.0, "diameter_mm": 6.35,
                    "slices": slices, "small_signal_gain": 6.0}],
        "seed": {"energy_J": energy_J, "duration_ns": 10.0, "shape": "gaussian", "profile": "gaussian",
                 "diameter_mm": 4.5},
        "step": [{"kind": "pass", "medium": "rod", "reverse": bool(i % 2)} for i in range(passes)],
    }


@dataclass
class Figure:
    """One row of the benchmark table."""

    key: str
    label: str
    value: float | None
    unit: str
    target: str
    passed: bool | None
    detail: str = ""
    numbers: dict[str, Any] = field(default_factory=dict)


# --------------------------------------------------------------------------------------------------
# The plain reference
# --------------------------------------------------------------------------------------------------

def reference_arrays(config):
    """The arrays :func:`ampmodel.simulate` starts from, built by the same functions: the fluence of
    every time slice (Nt, Ny, Nx) in J/m², ln G of every voxel (Nz, Ny, Nx), the clear aperture and Fsat."""
    import numpy as np
    from ampmodel.kernels import beam_shapes
    from ampmodel.media import gain_maps
    grid, seed = config.grid, config.seed
    (medium,) = config.media
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    _, weights, _ = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices)
    seed_map = beam_shapes.seed_fluence(x, x, seed.profile, seed.diameter_m, seed.order, seed.energy_J)
    gm = gain_maps.gain_map(medium, x, x)
    fluence = weights[:, None, None] * seed_map[None, :, :]
    return fluence, gm.gain_per_m * gm.slice_length_m, gm.mask, medium.material.saturation_fluence_J_m2, \
        np.asarray([s.reverse for s in config.steps if s.kind == "pass"])


def reference_loop(fluence, ln_gain, mask, fsat: float, reverses) -> None:
    """Plain numpy: clip at the clear aperture, then for each pass, each z-slice in the order the beam
    meets them and each time slice, the textbook Frantz–Nodvik update over all pixels, in place.

    J_out = Fsat·log1p(G·expm1(J_in/Fsat)), ln G <- ln G − (J_out − J_in)/Fsat
    (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963)). No diagnostics.
    """
    import numpy as np
    fluence *= mask
    nz = ln_gain.shape[0]
    for reverse in reverses:
        for k in (range(nz - 1, -1, -1) if reverse else range(nz)):
            g = ln_gain[k]
            for t in range(fluence.shape[0]):
                f_in = fluence[t]
                f_out = fsat * np.log1p(np.exp(g) * np.expm1(f_in / fsat))
                g -= (f_out - f_in) / fsat
                fluence[t] = f_out


# --------------------------------------------------------------------------------------------------
# Measurements
# --------------------------------------------------------------------------------------------------

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


def measure_pulsed(size: dict, repeat: int) -> dict[str, Any]:
    """Best times of the reference loop, simulate with n2 and simulate without, interleaved; and how
    closely the outputs agree (output fluence, relative; final ln G, absolute)."""
    import numpy as np
    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    args = (size["points"], size["time_slices"], size["slices"], size["passes"])
    with_n2, without = load_config(bench_config(*args)), load_config(bench_config(*args, n2=False))
    ref, sim, comp, wall = [], [], [], {"reference": [], "simulate": []}
    for _ in range(repeat):
        fluence, ln_gain, mask, fsat, reverses = reference_arrays(with_n2)
        w0 = time.perf_counter()
        ref.append(_cpu(lambda: reference_loop(fluence, ln_gain, mask, fsat, reverses))[0])
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
        lit = out > 0
        rec = res.media["rod"]
        agree[name] = {
            "fluence_rel": float(np.max(np.abs(out[lit] / fluence.sum(axis=0)[lit] - 1.0))),
            "ln_gain_abs": float(np.max(np.abs(rec.gain_final_per_m * rec.slice_length_m - ln_gain)))}
    lit_pixels = int(np.count_nonzero(result.steps[-1].fluence_J_m2))
    return {"reference_s": min(ref), "simulate_s": min(sim), "composite_s": min(comp), "agree": agree,
            "wall_reference_s": min(wall["reference"]), "wall_simulate_s": min(wall["simulate"]),
            "lit_pixels": lit_pixels, "pixels": size["points"] ** 2,
            "updates": size["points"] ** 2 * size["time_slices"] * size["slices"] * size["passes"],
            "b_integral_rad": result.summary["b_integral_rad"]}


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
        per[n] = min(_cpu(lambda: simulate(config))[0] for _ in range(repeat)) / updates
    return per


def bare_transforms(field, pairs: int, workers: int, chunked: bool) -> None:
    """``pairs`` fft2/ifft2 pairs of every time slice of ``field`` (Nt, N, N) complex, in place: nothing but
    the transforms (scipy.fft, overwrite_x).

    ``chunked=False``: each pair is one batched transform of the whole array with ``workers`` threads.
    ``chunked=True``: the way the field path runs them: chunks of ``field_step.chunk_rows`` time slices,
    each transformed ``pairs`` times in a row while it is in the processor cache, the chunks split over
    ``chunks.thread_count(workers)`` threads, one thread per transform."""
    import scipy.fft
    from ampmodel.pulsed import chunks
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


def measure_diffraction(size: dict, repeat: int) -> dict[str, Any] | None:
    """The benchmark case with diffraction (grid.diffraction) against the bare FFTs it needs: the run's 2-D
    transforms (FieldBeam.fft_count, one time slice each) timed as that many fft2/ifft2 pairs of every
    slice of an (Nt, N, N) complex array with the same workers setting, done the two ways
    :func:`bare_transforms` knows (batched over the whole array, and in cache-sized chunks split over the
    threads as the field path runs them); the faster of the two is the reference. Wall time (the
    transforms use threads), best of ``repeat``, interleaved. None without the field path."""
    try:
        from ampmodel.beam import field as optics
    except ImportError:
        return None
    import numpy as np
    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    raw = bench_config(size["diffraction_grid"], size["time_slices"], size["slices"], size["passes"])
    raw["grid"]["diffraction"] = True
    config = load_config(raw)
    nt, n, workers = config.grid.time_slices, config.grid.points, config.grid.fft_workers
    beams: list = []
    start_beam = optics.start_beam

    def capture(*args, **kwargs):                       # the run's FieldBeam, for its FFT count
        beams.append(start_beam(*args, **kwargs))
        return beams[-1]

    field = np.exp(2j * np.pi * np.random.default_rng(1).random((nt, n, n)))
    sim, cpu, batched, chunked = [], [], [], []
    optics.start_beam = capture
    try:
        for _ in range(repeat):
            c0 = time.process_time()
            sim.append(_time(lambda: simulate(config))[0])
            cpu.append(time.process_time() - c0)
            pairs = beams[-1].fft_count // (2 * nt)
            batched.append(_time(lambda: bare_transforms(field, pairs, workers, chunked=False))[0])
            chunked.append(_time(lambda: bare_transforms(field, pairs, workers, chunked=True))[0])
    finally:
        optics.start_beam = start_beam
    return {"simulate_s": min(sim), "simulate_cpu_s": min(cpu), "fft_s": min(min(batched), min(chunked)),
            "fft_batched_s": min(batched), "fft_chunked_s": min(chunked), "pairs": pairs,
            "transforms": beams[-1].fft_count, "points": n, "threads": _threads(workers)}


def _threads(workers: int) -> int:
    from ampmodel.pulsed import chunks
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
    raw = bench_config(size["sweep_grid"], size["time_slices"], size["slices"], size["passes"])
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
            if any(abs(a - b) > 1e-12 * abs(a) for a, b in zip(one, two)):
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


# --------------------------------------------------------------------------------------------------
# The figures, the table, the JSON
# --------------------------------------------------------------------------------------------------

def _check(value: float | None, low: float | None = None, high: float | None = None) -> bool | None:
    if value is None:
        return None
    return (low is None or value >= low) and (high is None or value <= high)


def run_bench(quick: bool = False, progress: bool = True) -> dict[str, Any]:
    """Measure every figure; returns the JSON-ready report (``figures``: key -> Figure as a dict)."""
    size = QUICK if quick else FULL
    repeat = size["repeat"]
    n, nt, nz, passes = size["points"], size["time_slices"], size["slices"], size["passes"]
    steps = ["pulsed (plain loop, simulate with and without n2)", "sweep on 1 and 2 workers",
             "scaling", "memory (child processes)", "start-up"]
    bar = None
    if progress:
        from tqdm import tqdm
        bar = tqdm(total=len(steps), desc="bench", leave=False, file=sys.stderr,
                   bar_format="{desc} [{n}/{total} done, {elapsed}]")

    def stage(i: int) -> None:
        if bar is not None:
            bar.set_description(f"bench: {steps[i]}")
            if i:
                bar.update(1)

    load_start = os.getloadavg() if hasattr(os, "getloadavg") else None
    idle_start = idle_cpus()
    figures: list[Figure] = []
    case = f"{n}², {nt} t, {nz} z, {passes} passes"

    stage(0)
    p = measure_pulsed(size, repeat)
    agree = p["agree"]
    ratio = p["simulate_s"] / p["reference_s"]
    figures.append(Figure(
        "pulsed_ratio", f"pulsed {case} (B-integral on): simulate / plain loop", ratio, "",
        "<= 1.0", _check(ratio, high=1.0),
        f"CPU time: simulate {p['simulate_s']:.3g} s, plain loop {p['reference_s']:.3g} s "
        f"({p['reference_s'] / p['updates'] * 1e9:.3g} ns per pixel-slice update); simulate computes the "
        f"{p['lit_pixels']} of {p['pixels']} pixels inside the clear aperture; outputs agree to "
        f"{agree['with_n2']['fluence_rel']:.1e} (fluence, relative), {agree['with_n2']['ln_gain_abs']:.1e} (ln G); "
        f"wall time: simulate {p['wall_simulate_s']:.3g} s, plain loop {p['wall_reference_s']:.3g} s",
        {k: p[k] for k in ("simulate_s", "reference_s", "wall_simulate_s", "wall_reference_s", "lit_pixels",
                           "pixels", "updates")} | {"agree": agree}))
    ratio0 = p["composite_s"] / p["reference_s"]
    figures.append(Figure(
        "pulsed_composite_ratio", "pulsed, the same with n2 = 0 (composite slices): simulate / plain loop", ratio0,
        "", "<= 1.0", _check(ratio0, high=1.0),
        f"CPU time: simulate {p['composite_s']:.3g} s: without B-integral and passive loss no result needs the inside "
        f"of the medium per time slice; outputs agree to {agree['without_n2']['fluence_rel']:.1e}, "
        f"{agree['without_n2']['ln_gain_abs']:.1e}", {"simulate_s": p["composite_s"]}))
    d = measure_diffraction(size, min(repeat, 2))
    if d is None:
        figures.append(Figure(
            "diffraction_ratio", "with diffraction: simulate / the bare batched FFTs", None, "", "<= 1.5", None,
            "not available (no diffraction in this version)"))
    else:
        dratio = d["simulate_s"] / d["fft_s"]
        figures.append(Figure(
            "diffraction_ratio", f"with diffraction, {d['points']}², {nt} t, {nz} z, {passes} passes: simulate / "
            f"its bare FFTs", dratio, "", "<= 1.5", _check(dratio, high=1.5),
            f"wall time, best of {min(repeat, 2)}: simulate {d['simulate_s']:.3g} s (CPU {d['simulate_cpu_s']:.3g} s) "
            f"against the faster of two ways of doing its bare transforms, {d['pairs']} fft2/ifft2 pairs of "
            f"({nt}, {d['points']}, {d['points']}) complex ({d['transforms']} transforms of one time slice) on "
            f"{d['threads']} threads: batched over the whole array {d['fft_batched_s']:.3g} s, in cache-sized "
            f"chunks as the field path runs them {d['fft_chunked_s']:.3g} s", d))

    stage(1)
    sw = measure_sweep(size, repeat=min(repeat, 2))
    start = f"; starting the 2 workers took {sw['startup_s']:.2g} s (not in the time)" if sw["startup_s"] else ""
    cpus = os.cpu_count() or 1
    if sw["idle_cpus"] is not None:
        start += f"; {sw['idle_cpus']:.1f} of {cpus} CPUs idle just before the timing"
        if sw["idle_cpus"] < cpus - 0.5:
            start += " (other work on the machine: the speed-up is bounded by the idle CPUs)"
    figures.append(Figure(
        "sweep_speedup", f"sweep of {size['sweep_points']} points of {size['sweep_grid']}²: time on 1 worker / on 2",
        sw["speedup"], "x", ">= 1.7", _check(sw["speedup"], low=1.7),
        f"{sw['how']}: best of {min(repeat, 2)}, 1 worker {sw['one_s']:.3g} s, 2 workers {sw['two_s']:.3g} s{start}",
        {k: sw[k] for k in ("one_s", "two_s", "startup_s", "how")} | {"idle_cpus": sw["idle_cpus"]}))

    stage(2)
    per = measure_scaling(size, repeat, {n: p["simulate_s"]})
    spread = max(per.values()) / min(per.values()) - 1.0
    figures.append(Figure(
        "scaling_spread", f"scaling {', '.join(f'{k}²' for k in per)}: spread of time per pixel·slice·step",
        100.0 * spread, "%", "<= 25 %", _check(spread, high=0.25),
        ", ".join(f"{k}²: {v * 1e9:.3g} ns" for k, v in per.items()) + " (CPU time of simulate over all pixels "
        "of the grid)",
        {"ns_per_update": {str(k): v * 1e9 for k, v in per.items()}}))

    stage(3)
    m = size["memory_points"]
    big = measure_memory(bench_config(m, nt, nz, passes))
    mem_ratio = big["run_B"] / big["required_B"]
    figures.append(Figure(
        "memory_ratio", f"peak memory {m}², less the interpreter / arrays it must hold", mem_ratio, "", "<= 1.5",
        _check(mem_ratio, high=1.5),
        f"peak {big['peak_B'] / MB:.0f} MB, interpreter and modules {big['baseline_B'] / MB:.0f} MB, run "
        f"{big['run_B'] / MB:.0f} MB; arrays (beam, B-integral, gain before and after, records) "
        f"{big['required_B'] / MB:.0f} MB", big))
    est_ratio = big["estimate_B"] / big["run_B"]
    figures.append(Figure(
        "memory_estimate_ratio", f"memory estimate {m}² (the guard) / measured peak", est_ratio, "",
        "1.0 to 1.3", _check(est_ratio, low=1.0, high=1.3),
        f"estimate {big['estimate_B'] / MB:.0f} MB, measured {big['run_B'] / MB:.0f} MB", {}))
    mid = big if m == n else measure_memory(bench_config(n, nt, nz, passes))
    figures.append(Figure(
        "memory_peak_MB", f"peak memory {n}² {passes}-pass case, interpreter included",
        mid["peak_B"] / MB, "MB", "<= 600 MB", _check(mid["peak_B"] / MB, high=600.0),
        f"run {mid['run_B'] / MB:.0f} MB + interpreter and modules {mid['baseline_B'] / MB:.0f} MB", mid))

    stage(4)
    times = measure_startup(size["startup_repeat"])
    best = min(times)
    figures.append(Figure(
        "startup_s", "start-up: ampmodel --help in a new process", best, "s", "<= 0.5 s", _check(best, high=0.5),
        f"best of {len(times)}: " + ", ".join(f"{t:.3f}" for t in times) + " s", {"times_s": times}))
    if bar is not None:
        bar.update(1)
        bar.close()

    import numpy as np
    return {
        "ampmodel_version": __version__,
        "created_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        "mode": "quick" if quick else "full",
        "timing": f"best of {repeat}, CPU time in one process, simulate and the plain loop interleaved",
        "machine": {"cpus": os.cpu_count(), "platform": platform.platform(), "processor": platform.processor(),
                    "python": platform.python_version(), "numpy": np.__version__,
                    "load_average_at_start": list(load_start) if load_start else None,
                    "idle_cpus_at_start": idle_start,
                    "load_average_at_end": list(os.getloadavg()) if load_start else None},
        "figures": {f.key: asdict(f) for f in figures},
    }


def _value_text(f: dict) -> str:
    if f["value"] is None:
        return "n/a"
    unit = f" {f['unit']}" if f["unit"] and f["unit"] != "x" else ("x" if f["unit"] == "x" else "")
    return f"{f['value']:.3g}{unit}"


def table_text(report: dict[str, Any]) -> str:
    """The report as a table: figure, measured value, target, pass/fail; then the details."""
    figs = list(report["figures"].values())
    width = max(len(f["label"]) for f in figs)
    lines = [f"ampmodel bench ({report['mode']}; timings: {report['timing']}; {report['machine']['cpus']} CPUs; "
             f"{_load_text(report)})"]
    if report["mode"] == "quick":
        lines.append("quick: small cases that check the benchmark runs; their figures say nothing about the targets")
    lines += [
              f"{'figure':<{width}}  {'measured':>10}  {'target':>11}  result"]
    for f in figs:
        result = "n/a" if f["passed"] is None else ("pass" if f["passed"] else "FAIL")
        lines.append(f"{f['label']:<{width}}  {_value_text(f):>10}  {f['target']:>11}  {result}")
    lines.append("")
    for f in figs:
        lines.append(f"- {f['key']}: {f['detail']}")
    return "\n".join(lines)


def _load_text(report: dict[str, Any]) -> str:
    machine = report["machine"]
    load, idle = machine.get("load_average_at_start"), machine.get("idle_cpus_at_start")
    text = f"load average at start {load[0]:.2f}" if load else "load average unknown"
    return text + (f", {idle:.1f} CPUs idle" if idle is not None else "")


def write_json(report: dict[str, Any], path: Path) -> None:
    """Write the report atomically (results.write_json)."""
    from ampmodel.output.atomic import write_json as atomic
    atomic(report, path)
