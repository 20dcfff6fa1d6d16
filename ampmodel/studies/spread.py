"""Tolerance runs: the samples of a [spread] table through the sweep machinery, with percentiles.

```toml
[spread]
samples = 200
random_seed = 1                                      # default 0
"seed.energy_J" = { normal = 0.05 }                  # relative standard deviation around the config's value
"medium.rod.small_signal_gain" = { uniform = [5.5, 6.5] }   # bounds, in the unit of the value
figures = ["steps.2.peak_fluence_J_cm2"]             # optional: figures to plot and rank besides the top level
limits = ["b_integral_rad<=3", "steps.2.peak_fluence_J_cm2<=4"]   # optional: the yield against each
```

Drawing: every path has its own random stream, ``numpy.random.default_rng(SeedSequence([random_seed,
code(path)]))`` with ``code`` a fixed hash of the path text, so a path's draws depend only on the seed
and the path (adding or removing another path leaves them as they were), and the first n samples of
a larger run are the samples of a run of n (a tolerance run can be extended and resumed). A normal
draw is nominal·(1 + rel·z), z standard normal; a uniform draw is low + (high − low)·u. A draw
outside the values the key allows stops the run before anything is computed (bad input, listing the
samples).

Figures are the numbers of summary.json by their paths (``figures.py``): the top-level ones, each
step's (``steps.N.KEY``), each medium's (``media.NAME.KEY``) and those of nested objects
(``train.KEY``). ``figures`` and ``limits`` (also ``--limit`` on the command line, the two merged) name
figures by path: their form is checked when the config loads, their last key and the config's steps
and media before any run, and their existence in the summary of the first sample before the others
run (bad input, exit 2).

Output folder (default ``runs/<config stem>-spread``): ``points/NNNN.h5`` (one per sample, resumable
like a sweep), ``samples.h5`` and ``samples.csv`` (the table of samples and every summary figure, the
layout of sweep.h5), ``spread.json`` and ``spread.csv`` (the 5, 50 and 95 % percentiles, mean,
standard deviation, min and max of every figure), ``plots/hist_<figure>.png`` (the top-level figures
and those named in ``figures``), ``plots/sensitivity.png``. spread.json also holds ``yield`` (per
limit and for all together: samples that ran, those that meet it, the share and its 95 % Wilson
interval) and ``sensitivity`` (per figure, Spearman's rank correlation with each spread value,
strongest first): see ``tolerances.py`` for the methods and what they mean.

Percentiles: ``numpy.percentile`` with linear interpolation between order statistics (Hyndman &
Fan type 7), over the samples that ran; the standard deviation with ddof = 1.

References: R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
Statistician 50, 361-365 (1996) (definition 7); numpy.percentile (method "linear").
"""
from __future__ import annotations

import csv
import functools
import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from ampmodel.config import schema as S
from ampmodel.config.checks import ConfigError
from ampmodel.description import Config
from ampmodel.output.atomic import target, write_json
from ampmodel.studies.figures import (
    Limit,
    check_before_run,
    figure_check,
    figure_keys,
    flatten,
    parse_limit,
    with_figures,
)
from ampmodel.studies.report_files import REPORT, write_report_keeping_results
from ampmodel.studies.sweeps import PREFLIGHT_TIMEOUT_S, SweepResult, default_folder, load_with_table, run_points
from ampmodel.studies.tolerances import SENSITIVITY_METHOD, sensitivity, yield_table
from ampmodel.units import unit_of

PERCENTILES = (5.0, 50.0, 95.0)
# The figures of plots/sensitivity.png, when the run has them (then those named in figures and limits).
KEY_FIGURES = ("output_energy_J", "output_power_W", "peak_fluence_J_cm2", "b_integral_rad", "worst_damage_margin")


def _path_code(path: str) -> int:
    """A fixed 64-bit number for a path (not Python's hash(), which changes between processes)."""
    return int.from_bytes(hashlib.sha256(path.encode()).digest()[:8], "little")


def distributions(raw: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """The [spread] entries of a validated config: path -> {"normal": rel, "nominal": value} or
    {"uniform": [low, high]}."""
    out = {}
    for path, entry in raw["spread"].items():
        if path in S.SPREAD or path in S.SPREAD_LISTS:
            continue
        container, leaf, trail = S.walk(dict(raw), path)
        if "normal" in entry:
            spec = S.leaf_schema(dict(raw), trail)[leaf]
            nominal = container.get(leaf, spec.default)
            out[path] = {"normal": float(entry["normal"]), "nominal": float(nominal)}
        else:
            out[path] = {"uniform": [float(v) for v in entry["uniform"]]}
    return out


def draw(dists: Mapping[str, Mapping[str, Any]], samples: int, random_seed: int) -> list[dict[str, float]]:
    """``samples`` points {path: value}, each path from its own stream (see the module docstring)."""
    columns = {}
    for path, d in dists.items():
        rng = np.random.default_rng(np.random.SeedSequence([int(random_seed), _path_code(path)]))
        if "normal" in d:
            columns[path] = d["nominal"] * (1.0 + d["normal"] * rng.standard_normal(samples))
        else:
            low, high = d["uniform"]
            columns[path] = low + (high - low) * rng.random(samples)
    return [{p: float(c[i]) for p, c in columns.items()} for i in range(samples)]


def statistics(summaries: Sequence[Mapping[str, Any] | None]) -> dict[str, dict[str, float]]:
    """Percentiles (5, 50, 95), mean, std (ddof 1), min, max and count of every summary figure (by its
    figure path, top-level figures first)."""
    flat = [flatten(s) if s else None for s in summaries]
    out = {}
    for key in figure_keys(flat):
        data = np.array([f[key] for f in flat if f and key in f], dtype=float)
        data = data[np.isfinite(data)]
        if data.size == 0:
            continue
        p5, p50, p95 = np.percentile(data, PERCENTILES)
        out[key] = {"unit": unit_of(key), "p5": float(p5), "p50": float(p50), "p95": float(p95),
                    "mean": float(data.mean()), "std": float(data.std(ddof=1)) if data.size > 1 else 0.0,
                    "min": float(data.min()), "max": float(data.max()), "count": int(data.size)}
    return out


@dataclass
class SpreadResult(SweepResult):
    """A :class:`~ampmodel.studies.sweeps.SweepResult` of the samples, plus their statistics.

    percentiles : figure -> {"unit", "p5", "p50", "p95", "mean", "std", "min", "max", "count"}, in the
        unit the figure's name carries
    distributions : path -> its distribution; random_seed, samples as given
    limits : the limits of the yield; yields : spread.json's ``yield`` (None without limits)
    sensitivity : figure -> [{"path", "rho", "p_value", "samples"}, ...], strongest first
    """

    percentiles: dict[str, dict[str, float]] = field(default_factory=dict)
    limits: list[Limit] = field(default_factory=list)
    yields: dict[str, Any] | None = None
    sensitivity: dict[str, list[dict[str, Any]]] = field(default_factory=dict)
    distributions: dict[str, dict[str, Any]] = field(default_factory=dict)
    random_seed: int = 0
    samples: int = 0
    spread_json: Path | None = None
    spread_csv: Path | None = None


def _write_stats(out: Path, result: SpreadResult, base: Config) -> None:
    write_json({"source": base.source, "title": base.title, "samples": result.samples,
                "random_seed": result.random_seed, "distributions": result.distributions,
                "samples_ran": len(result.values) - len(result.failed),
                "failed": sorted(result.failed), "figures": result.figures,
                "limits": [str(lim) for lim in result.limits],
                "percentile_method": "numpy.percentile, linear (type 7)",
                "percentiles": result.percentiles, "yield": result.yields,
                "sensitivity": {"method": SENSITIVITY_METHOD, "paths": result.paths,
                                "figures": result.sensitivity}}, out / "spread.json")
    with target(out / "spread.csv") as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            cols = ["p5", "p50", "p95", "mean", "std", "min", "max", "count"]
            w.writerow(["figure", "unit"] + cols)
            for key, st in result.percentiles.items():
                w.writerow([key, st["unit"]] + [repr(st[c]) if c != "count" else st[c] for c in cols])
    result.spread_json, result.spread_csv = out / "spread.json", out / "spread.csv"


def _named(base: Config, table: Mapping[str, Any], limits: Sequence[str]) -> tuple[list[str], list[Limit], list]:
    """The figures and the limits a tolerance run names ([spread] figures and limits, then ``limits``
    from the command line), each checked before any run; (figures, limits, (label, path) pairs)."""
    problems: list[str] = []
    figures = list(table.get("figures", []))
    parsed: list[Limit] = []
    named = [(f"spread.figures[{j}] = {path}", path) for j, path in enumerate(figures)]
    for j, text in enumerate(table.get("limits", [])):
        parsed.append(parse_limit(text))           # the form was checked when the config loaded
        named.append((f"spread.limits[{j}] = {text}", parsed[-1].figure))
    for text in limits:
        try:
            parsed.append(parse_limit(text))
            named.append((f"--limit {text}", parsed[-1].figure))
        except ConfigError as err:
            problems += [f"{base.source}: {line}" for line in err.problems]
    for label, path in named:
        problem = check_before_run(path, base)
        if problem:
            problems.append(f"{base.source}: {label}: {problem}")
    if problems:
        raise ConfigError(problems)
    return figures, parsed, named


def run_spread(config: str | os.PathLike | Mapping | Config, out: str | os.PathLike | None = None, *,
               jobs: int | None = None, backend: str = "loky", scheduler: str | None = None,
               overrides: Sequence[str] = (), progress: bool = False, plots: bool = True,
               timeout_s: float = PREFLIGHT_TIMEOUT_S, limits: Sequence[str] = ()) -> SpreadResult:
    """Run the tolerance run of a config's [spread] table and report the spread of every summary figure,
    the yield against the limits and the sensitivity of each figure to each spread value.

    Parameters are those of :func:`ampmodel.run_sweep` (``out`` default ``runs/<config stem>-spread``),
    and ``limits``: "FIGURE<=VALUE" texts added to those of the table (as ``--limit``).

    Returns
    -------
    SpreadResult
        ``percentiles[figure]["p5" | "p50" | "p95"]``, ``yields``, ``sensitivity``, plus everything a
        SweepResult holds.

    Raises
    ------
    ConfigError : bad input (also no [spread] table, or a draw outside the allowed values, or a named
    figure that the first sample's summary does not have);
    FolderError, BackendError : as for run_sweep.
    """
    if scheduler and backend == "loky":
        backend = "dask"
    base, table = load_with_table(config, overrides, "spread",
                                  f"[spread] samples = 100, {S.SPREAD_HINT} (README: Tolerance runs)")
    figures, parsed, named = _named(base, table, limits)
    dists = distributions(base.raw)
    samples, seed = int(table["samples"]), int(table.get("random_seed", 0))
    values = draw(dists, samples, seed)
    paths = list(dists)
    out = Path(out) if out is not None else default_folder(base, "spread")
    box: dict[str, SpreadResult] = {}
    shown = list(dict.fromkeys(figures + [lim.figure for lim in parsed]))

    def finish(run: SweepResult) -> None:
        flat = [flatten(s) if s else None for s in run.summaries]
        result = SpreadResult(**{f: getattr(run, f) for f in SweepResult.__dataclass_fields__},
                              percentiles=statistics(run.summaries), distributions=dists, random_seed=seed,
                              samples=samples, limits=parsed, yields=yield_table(parsed, flat))
        result.figures = shown
        result.sensitivity = sensitivity(list(result.percentiles), flat, paths, run.values)
        _write_stats(out, result, base)
        if plots:
            from ampmodel.plots.drawing import PANELS, FigureJob, draw_all
            from ampmodel.plots.histograms import histogram_jobs
            from ampmodel.plots.sensitivity import plot_sensitivity
            jobs = histogram_jobs(with_figures(run.summaries, shown), result.percentiles, out / "plots", base.title,
                                  base.limits, parsed)
            keys = [k for k in KEY_FIGURES if k in result.sensitivity] + [k for k in shown if k in result.sensitivity]
            ranked = functools.partial(plot_sensitivity, result.sensitivity, list(dict.fromkeys(keys)),
                                       out / "plots", base.title, len(run.values) - len(run.failed))
            jobs.append(FigureJob(out / "plots" / "sensitivity.png", ranked, PANELS))
            result.plots = [p for p in draw_all(jobs) if p.exists()]
        write_report_keeping_results(out)   # after the statistics and the plots: it shows them
        box["result"] = result

    run_points("spread", base, paths, values, out, backend=backend, jobs=jobs, scheduler=scheduler,
               progress=progress, timeout_s=timeout_s, table_stem="samples",
               table_attrs={"random_seed": seed, "samples": samples}, manifest_table=table, finish=finish,
               derived=("spread.json", "spread.csv", REPORT), first_check=figure_check(named, base.source) if named else None)
    return box["result"]
