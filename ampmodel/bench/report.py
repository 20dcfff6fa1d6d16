"""The figures of ``ampmodel bench``: each measurement turned into a row with its target, the table
printed and the JSON written (the targets live here and only here: tests never assert a time)."""
from __future__ import annotations

import os
import platform
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from ampmodel._version import __version__
from ampmodel.bench.cases import FULL, MB, QUICK, SPECTRAL_BANDWIDTH_NM, bench_config
from ampmodel.bench.measure import (
    idle_cpus,
    measure_diffraction,
    measure_figures,
    measure_memory,
    measure_pulsed,
    measure_scaling,
    measure_spectral,
    measure_startup,
    measure_sweep,
)
from ampmodel.progress import progress_bar


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


def _check(value: float | None, low: float | None = None, high: float | None = None) -> bool | None:
    if value is None:
        return None
    return (low is None or value >= low) and (high is None or value <= high)


def pulsed_figures(p: dict[str, Any], rod: dict[str, Any], case: str) -> list[Figure]:
    """simulate against the plain loop on the fully lit slab, with the B-integral on and with n2 = 0
    (composite slices); and on the round rod, where the solver computes only the pixels inside."""
    agree = p["agree"]
    ratio = p["simulate_s"] / p["reference_s"]
    ratio0 = p["composite_s"] / p["reference_s"]
    rod_ratio = rod["simulate_s"] / rod["reference_s"]
    per_lit = rod["simulate_s"] / rod["lit_updates"] * 1e9
    numbers = ("simulate_s", "reference_s", "wall_simulate_s", "wall_reference_s", "lit_pixels", "pixels",
               "updates", "lit_updates")
    return [Figure(
        "pulsed_ratio", f"pulsed {case}, every pixel lit (B-integral on): simulate / plain loop", ratio, "",
        "<= 1.5", _check(ratio, high=1.5),
        f"CPU time: simulate {p['simulate_s']:.3g} s ({p['simulate_s'] / p['lit_updates'] * 1e9:.3g} ns per "
        f"lit pixel-slice update, with the B-integral, peaks and energy bookkeeping the plain loop does not "
        f"do), plain loop {p['reference_s']:.3g} s ({p['reference_s'] / p['updates'] * 1e9:.3g} ns per update); "
        f"{p['lit_pixels']} of {p['pixels']} pixels lit; outputs agree to {agree['with_n2']['fluence_rel']:.1e} "
        f"(fluence, relative), {agree['with_n2']['ln_gain_abs']:.1e} (ln G); wall time: simulate "
        f"{p['wall_simulate_s']:.3g} s, plain loop {p['wall_reference_s']:.3g} s",
        {k: p[k] for k in numbers} | {"agree": agree}), Figure(
        "pulsed_composite_ratio", "pulsed, the same with n2 = 0 (composite slices): simulate / plain loop", ratio0,
        "", "<= 1.0", _check(ratio0, high=1.0),
        f"CPU time: simulate {p['composite_s']:.3g} s: without B-integral and passive loss no result needs the inside "
        f"of the medium per time slice; outputs agree to {agree['without_n2']['fluence_rel']:.1e}, "
        f"{agree['without_n2']['ln_gain_abs']:.1e}", {"simulate_s": p["composite_s"]}), Figure(
        "pulsed_rod_ratio", "pulsed, a round rod in the same window (B-integral on): simulate / plain loop",
        rod_ratio, "", "<= 1.0", _check(rod_ratio, high=1.0),
        f"CPU time: simulate {rod['simulate_s']:.3g} s ({per_lit:.3g} ns per lit pixel-slice update), plain loop "
        f"{rod['reference_s']:.3g} s over every pixel of the window; {rod['lit_pixels']} of {rod['pixels']} pixels "
        f"inside the clear aperture, which the solver alone skips; outputs agree to "
        f"{rod['agree']['with_n2']['fluence_rel']:.1e}, {rod['agree']['with_n2']['ln_gain_abs']:.1e}",
        {k: rod[k] for k in numbers})]


def spectral_figure(sp: dict[str, Any]) -> Figure:
    """simulate with a stretched seed against the plain loop on populations."""
    ratio = sp["simulate_s"] / sp["reference_s"]
    return Figure(
        "pulsed_spectral_ratio", f"pulsed, the slab with a {SPECTRAL_BANDWIDTH_NM:g} nm chirped seed: simulate / "
        "plain loop on populations", ratio, "", "<= 1.5", _check(ratio, high=1.5),
        f"CPU time: simulate {sp['simulate_s']:.3g} s ({sp['simulate_s'] / sp['updates'] * 1e9:.3g} ns per "
        f"pixel-slice update, each time slice with its own cross-sections), plain loop {sp['reference_s']:.3g} s; "
        f"outputs agree to {sp['fluence_rel']:.1e} (fluence, relative), {sp['n2_rel']:.1e} (N2/Nt); output "
        f"spectrum {sp['output_bandwidth_nm']:.3g} nm FWHM", dict(sp))


def diffraction_figure(d: dict[str, Any], size: dict, repeat: int) -> Figure:
    """simulate with diffraction against its bare transforms."""
    nt, nz, passes = size["time_slices"], size["slices"], size["passes"]
    dratio = d["simulate_s"] / d["fft_s"]
    return Figure(
        "diffraction_ratio", f"with diffraction, {d['points']}², {nt} t, {nz} z, {passes} passes: simulate / "
        f"its bare FFTs", dratio, "", "<= 1.5", _check(dratio, high=1.5),
        f"wall time, best of {repeat}: simulate {d['simulate_s']:.3g} s (CPU {d['simulate_cpu_s']:.3g} s) "
        f"against the faster of two ways of doing its bare transforms, {d['pairs']} fft2/ifft2 pairs of "
        f"({nt}, {d['points']}, {d['points']}) complex ({d['transforms']} transforms of one time slice) on "
        f"{d['threads']} threads: batched over the whole array {d['fft_batched_s']:.3g} s, in cache-sized "
        f"chunks as the field path runs them {d['fft_chunked_s']:.3g} s", d)


def sweep_figure(sw: dict[str, Any], size: dict, repeat: int) -> Figure:
    """The sweep on 2 workers against 1, with the idle CPUs that bound it."""
    start = f"; starting the 2 workers took {sw['startup_s']:.2g} s (not in the time)" if sw["startup_s"] else ""
    cpus = os.cpu_count() or 1
    if sw["idle_cpus"] is not None:
        start += f"; {sw['idle_cpus']:.1f} of {cpus} CPUs idle just before the timing"
        if sw["idle_cpus"] < cpus - 0.5:
            start += " (other work on the machine: the speed-up is bounded by the idle CPUs)"
    return Figure(
        "sweep_speedup", f"sweep of {size['sweep_points']} points of {size['sweep_grid']}²: time on 1 worker / on 2",
        sw["speedup"], "x", ">= 1.7", _check(sw["speedup"], low=1.7),
        f"{sw['how']}: best of {repeat}, 1 worker {sw['one_s']:.3g} s, 2 workers {sw['two_s']:.3g} s{start}",
        {k: sw[k] for k in ("one_s", "two_s", "startup_s", "how")} | {"idle_cpus": sw["idle_cpus"]})


def scaling_figure(per: dict[int, float]) -> Figure:
    """The spread of the time per pixel·slice·step over the grid sizes."""
    spread = max(per.values()) / min(per.values()) - 1.0
    return Figure(
        "scaling_spread", f"scaling {', '.join(f'{k}²' for k in per)}: spread of time per pixel·slice·step",
        100.0 * spread, "%", "<= 25 %", _check(spread, high=0.25),
        ", ".join(f"{k}²: {v * 1e9:.3g} ns" for k, v in per.items()) + " (CPU time of simulate over all pixels "
        "of the grid)",
        {"ns_per_update": {str(k): v * 1e9 for k, v in per.items()}})


def memory_figures(size: dict) -> list[Figure]:
    """Peak memory of the large case against its arrays and against the estimate; the mid case's peak."""
    n, nt, nz, passes, m = (size[k] for k in ("points", "time_slices", "slices", "passes", "memory_points"))
    big = measure_memory(bench_config(m, nt, nz, passes))
    mem_ratio = big["run_B"] / big["required_B"]
    est_ratio = big["estimate_B"] / big["run_B"]
    mid = big if m == n else measure_memory(bench_config(n, nt, nz, passes))
    return [Figure(
        "memory_ratio", f"peak memory {m}², less the interpreter / arrays it must hold", mem_ratio, "", "<= 1.5",
        _check(mem_ratio, high=1.5),
        f"peak {big['peak_B'] / MB:.0f} MB, interpreter and modules {big['baseline_B'] / MB:.0f} MB, run "
        f"{big['run_B'] / MB:.0f} MB; arrays (beam, B-integral, gain before and after, records) "
        f"{big['required_B'] / MB:.0f} MB", big), Figure(
        "memory_estimate_ratio", f"memory estimate {m}² (the guard) / measured peak", est_ratio, "",
        "1.0 to 1.3", _check(est_ratio, low=1.0, high=1.3),
        f"estimate {big['estimate_B'] / MB:.0f} MB, measured {big['run_B'] / MB:.0f} MB", {}), Figure(
        "memory_peak_MB", f"peak memory {n}² {passes}-pass case, interpreter included",
        mid["peak_B"] / MB, "MB", "<= 600 MB", _check(mid["peak_B"] / MB, high=600.0),
        f"run {mid['run_B'] / MB:.0f} MB + interpreter and modules {mid['baseline_B'] / MB:.0f} MB", mid)]


def figures_figure(fg: dict[str, Any], repeat: int) -> Figure:
    """Writing the figures of a run and of a sweep: as before against as now."""
    return Figure(
        "figures_speedup", "figures of a run and a 2 x 2 sweep: time drawn as before / as now", fg["speedup"], "x",
        ">= 2.0", _check(fg["speedup"], low=2.0),
        f"wall time, best of {repeat}, {fg['files']} PNG files: one after another, a canvas each, zlib level 6, each "
        f"figure cleared (as before) {fg['before_s']:.3g} s; on {fg['workers']} worker processes, the sweep's on "
        f"a shared canvas, level 1 (now) {fg['now_s']:.3g} s",
        fg)


def startup_figure(times: list[float]) -> Figure:
    best = min(times)
    return Figure(
        "startup_s", "start-up: ampmodel --help in a new process", best, "s", "<= 0.5 s", _check(best, high=0.5),
        f"best of {len(times)}: " + ", ".join(f"{t:.3f}" for t in times) + " s", {"times_s": times})


STAGES = ("pulsed (plain loops, simulate: slab, rod, chirped seed)", "sweep on 1 and 2 workers", "scaling",
          "memory (child processes)", "figures, as before and as now", "start-up")


def run_bench(quick: bool = False, progress: bool = True) -> dict[str, Any]:
    """Measure every figure; returns the JSON-ready report (``figures``: key -> Figure as a dict)."""
    size = QUICK if quick else FULL
    repeat = size["repeat"]
    case = f"{size['points']}², {size['time_slices']} t, {size['slices']} z, {size['passes']} passes"
    load_start = os.getloadavg() if hasattr(os, "getloadavg") else None
    idle_start = idle_cpus()
    figures: list[Figure] = []
    with progress_bar(progress, total=len(STAGES), unit="stage", desc="bench", min_total=1,
                      bar_format="{desc} [{n}/{total} done, {elapsed}]") as bar:
        def stage(i: int) -> None:
            if bar is not None:
                bar.set_description(f"bench: {STAGES[i]}")
                bar.update(1 if i else 0)

        stage(0)
        p = measure_pulsed(size, repeat)
        figures += pulsed_figures(p, measure_pulsed(size, repeat, lit="rod"), case)
        figures.append(spectral_figure(measure_spectral(size, repeat)))
        figures.append(diffraction_figure(measure_diffraction(size, min(repeat, 2)), size, min(repeat, 2)))
        stage(1)
        figures.append(sweep_figure(measure_sweep(size, repeat=min(repeat, 2)), size, min(repeat, 2)))
        stage(2)
        figures.append(scaling_figure(measure_scaling(size, repeat, {size["points"]: p["simulate_s"]})))
        stage(3)
        figures += memory_figures(size)
        stage(4)
        figures.append(figures_figure(measure_figures(size, size["figures_repeat"]), size["figures_repeat"]))
        stage(5)
        figures.append(startup_figure(measure_startup(size["startup_repeat"])))
        if bar is not None:
            bar.update(1)
    return {
        "ampmodel_version": __version__,
        "created_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        "mode": "quick" if quick else "full",
        "timing": f"best of {repeat}, CPU time in one process, simulate and the plain loop interleaved",
        "machine": _machine(load_start, idle_start),
        "figures": {f.key: asdict(f) for f in figures},
    }


def _machine(load_start, idle_start) -> dict[str, Any]:
    import numpy as np
    return {"cpus": os.cpu_count(), "platform": platform.platform(), "processor": platform.processor(),
            "python": platform.python_version(), "numpy": np.__version__,
            "load_average_at_start": list(load_start) if load_start else None,
            "idle_cpus_at_start": idle_start,
            "load_average_at_end": list(os.getloadavg()) if load_start else None}


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
    """Write the report atomically (output.atomic.write_json)."""
    from ampmodel.output.atomic import write_json as atomic
    atomic(report, path)
