"""Parameter sweeps: the points of a [sweep] table, run in parallel, resumable.

The machinery here is shared with tolerance runs (``spread.py``): a list of points, each a dict of
value paths and values, is turned into one validated config per point; the points are run by
joblib (``backends.py``: loky processes here, or a dask cluster); each worker writes its point's
file ``points/NNNN.h5`` atomically; the parent writes the table (``sweep.h5``/``sweep.csv``) and
the plots. A second start on the same folder computes only the points whose file is missing,
partial or made for other values; a folder of another config is refused (``store.py``).
"""
from __future__ import annotations

import dataclasses
import json
import os
import re
import sys
import tempfile
import time
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.config.measured import inline_files
from ampmodel.config.sweep import VARY_EXAMPLE
from ampmodel.config.text import dump_toml, resolve_path
from ampmodel.description import Config
from ampmodel.output.atomic import OutputError, describe_write_error, is_write_error
from ampmodel.studies import store as store
from ampmodel.studies.backends import (
    BACKENDS,
    BackendError,
    Cluster,
    WorkerLost,
    cores,
    preflight,
    release_workers,
    run_tasks,
)
from ampmodel.studies.figures import check_before_run, figure_check, with_figures
from ampmodel.studies.points import (
    PointOutcome,
    PointTask,
    describe,
    first_point,
    keep_first,
    own_sweep_paths,
    point_raw,
    point_tasks,
    run_point,
    sweep_points,
    vary_record,
)
from ampmodel.studies.report_files import REPORT, write_report_keeping_results

__all__ = ["run_sweep", "SweepResult", "sweep_points", "run_points", "time_sweep", "BackendError",
           "FolderError"]
FolderError = store.FolderError
PREFLIGHT_TIMEOUT_S = 60.0


# ----------------------------------------------------------------------------------------------
# The machinery
# ----------------------------------------------------------------------------------------------

@dataclass
class SweepResult:
    """What a sweep (or a tolerance run) produced.

    out : the output folder; kind : "sweep" or "spread"; title : the config's title
    paths : the value paths; values : one {path: value} per point (config units)
    summaries : one summary.json dict per point (None for a point that failed)
    computed : indices computed by this start; reused : indices found done in the folder
    failed : index -> error text; point_seconds : index -> compute time (s) of the points computed
    table_h5, table_csv : the table files; plots : the PNG files written
    seconds : wall time of this start; jobs : worker count used (loky) or workers of the cluster
    """

    out: Path
    kind: str
    title: str
    paths: list[str]
    values: list[dict[str, Any]]
    summaries: list[dict | None]
    computed: list[int]
    reused: list[int]
    failed: dict[int, str]
    table_h5: Path
    table_csv: Path
    seconds: float
    jobs: int
    backend: str
    point_seconds: dict[int, float] = field(default_factory=dict)
    plots: list[Path] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    figures: list[str] = field(default_factory=list)     # figure paths named in the table (plotted, printed)

    def column(self, key: str) -> list:
        """The values of a swept path or a summary figure (a figure path: ``output_energy_J``,
        ``steps.0.peak_fluence_J_cm2``, ...), one per point (NaN for a failed point or one without it)."""
        from ampmodel.studies.figures import flatten
        if key in self.paths:
            return [v[key] for v in self.values]
        return [flatten(s).get(key, float("nan")) if s else float("nan") for s in self.summaries]


def _prefix_problems(problems: list[str], source: str, label: str) -> list[str]:
    return [line.replace("<dict>: ", f"{source}: {label}: ", 1) for line in problems]


def prepare(base: Config, values: Sequence[Mapping[str, Any]], kind: str) -> tuple[list[dict], list[str], int]:
    """Validate the config of every point before anything runs.

    Returns (point dicts, their TOML texts, the largest memory estimate of one point in bytes).

    Raises
    ------
    ConfigError
        Every problem of every point (up to 40 lines), each naming the point and its values."""
    from ampmodel.simulation import check_memory
    raws, texts, problems, largest = [], [], [], 0
    label = "sample" if kind == "spread" else "point"
    for i, v in enumerate(values):
        # data files inline: a worker need not see them (the same data as the base config read)
        raw = inline_files(point_raw(base.raw, v, base.title), base.folder or None, base.data_files)
        name = f"{label} {store.point_name(i)} ({describe(v)})"
        try:
            config = load_config(raw)
            need = check_memory(config)      # one point alone must fit; _fit_jobs then counts the workers
        except ConfigError as err:
            problems += _prefix_problems(err.problems, base.source, name)
            if len(problems) >= 40:
                problems.append(f"{base.source}: ... (stopped after 40 problems)")
                break
            continue
        largest = max(largest, need)
        raws.append(raw)
        texts.append(f"# {kind} {label} {store.point_name(i)} of {base.source}: {describe(v)}\n" + dump_toml(raw))
    if problems and kind == "spread":
        problems.append(f"{base.source}: spread: {len(values) - len(raws)} of {len(values)} samples are not valid "
                        "configs; narrow the distributions (a smaller normal relative std, or uniform bounds "
                        "inside the allowed values)")
    if problems:
        raise ConfigError(problems)
    return raws, texts, largest


def _fit_jobs(jobs: int, per_point: int, notes: list[str]) -> int:
    """Fewer local workers when their points would not fit in the available memory together."""
    from ampmodel.simulation import available_memory_bytes
    have = available_memory_bytes()
    if have is None or per_point <= 0 or jobs * per_point <= 0.8 * have:
        return jobs
    fit = max(1, int(0.8 * have // per_point))
    notes.append(f"{jobs} workers would need about {jobs * per_point / 2**30:.1f} GiB together; "
                 f"running {fit} at a time ({have / 2**30:.1f} GiB available)")
    return fit


def _hashed_config(base: Config) -> dict:
    """The config a sweep folder's hash is taken of: data files inline (a changed data file is another
    config), and so is the SHA-256 of an earlier stage's result (seed.from: another stage 1)."""
    hashed = inline_files(base.raw, base.folder or None, base.data_files)
    if base.seed.beam is not None:
        hashed["seed"] = {**hashed["seed"], "from_sha256": base.seed.beam.origin.get("sha256")}
    return hashed


def run_points(kind: str, base: Config, paths: list[str], values: Sequence[Mapping[str, Any]], out: Path, *,
               backend: str = "loky", jobs: int | None = None, scheduler: str | None = None,
               progress: bool = False, timeout_s: float = PREFLIGHT_TIMEOUT_S,
               table_stem: str = "sweep", table_attrs: Mapping[str, Any] | None = None,
               manifest_table: Any = None, finish: Callable[[SweepResult], None] | None = None,
               derived: Sequence[str] = (), first_check: Callable[[Mapping[str, Any], str], None] | None = None,
               command_line: Mapping[str, Any] | None = None) -> SweepResult:
    """Run the points of a sweep or a tolerance run into ``out``; compute only those it lacks.

    Parameters
    ----------
    kind : "sweep" or "spread" (recorded in the manifest; a folder of the other kind is refused)
    base : the validated config (its ``raw`` without [sweep]/[spread] is what the manifest hashes)
    paths, values : the value paths and one {path: value} per point, config units
    out : the output folder (created)
    backend, jobs, scheduler : see ``backends.run_tasks``; ``jobs`` None is every core
    progress, timeout_s : show a tqdm bar (count and time left) on stderr; the dask pre-flight timeout
    table_stem : the table's file name (``sweep`` -> sweep.h5, sweep.csv)
    manifest_table : the [sweep] or [spread] table, recorded in the manifest
    finish : called with the result while the folder is still locked (plots, statistics)
    derived : further files made from the table (removed at the start with the table, written by ``finish``)
    first_check : checks the figures a table names on a first summary before the folder is touched
        (ConfigError); ``points.first_point`` says which summary (a point it runs is not run again)
    command_line : a sweep's --vary (``points.vary_record``): in the manifest; a folder resumes only with the same

    Raises
    ------
    ConfigError (a point's config is invalid), FolderError (the folder cannot be used),
    BackendError (the dask cluster cannot be used); nothing is written in these cases.
    KeyboardInterrupt (Ctrl-C, or SIGTERM through the command line), OutputError (a file cannot be
    written: full disk, no permission), WorkerLost (a worker process died): the points done so far
    are kept, the table lists them, and ``exc.progress`` (a :class:`Progress`) says how far it got.
    """
    _check_options(backend, jobs, scheduler)
    start = time.perf_counter()
    out = Path(out)
    raws, texts, per_point = prepare(base, values, kind)
    hashed = _hashed_config(base)
    previous = store.check_folder(out, kind, hashed, base.source, command_line)
    hash_ = store.config_hash(hashed)
    notes: list[str] = []
    early = first_point(first_check, kind, base, raws, texts, values, out, hash_, progress) if first_check else None
    created = not out.exists()
    store.make_points_folder(out)
    with _folder_errors(out, kind, len(values), previous, created), store.folder_lock(out):
        store.reset_folder(out, table_stem, derived)
        store.write_manifest(out, kind, hashed, base.source, manifest_table, len(values), previous, command_line)
        summaries, todo = store.found_points(out, values, hash_)
        reused = [i for i in range(len(values)) if i not in set(todo)]
        failed: dict[int, str] = {}
        seconds: dict[int, float] = {}
        tasks = point_tasks(kind, base, raws, texts, values, keep_first(early, todo, summaries, failed, seconds),
                            out, hash_, backend)                # keep_first: the point the check ran
        used = 0
        attrs = {"config": base.text, "config_hash": hash_, "source": base.source,
                 "paths": json.dumps(paths), **(table_attrs or {})}

        def table() -> tuple[Path, Path]:
            done = [s is not None for s in summaries]
            return store.write_table(out, table_stem, kind, store.table_columns(paths, list(values), summaries),
                                     done, attrs)

        if tasks:
            try:
                used = _run(tasks, summaries, failed, seconds, backend, jobs, scheduler, per_point, out,
                            progress, timeout_s, len(values), len(values) - len(tasks), kind, notes)
            except (KeyboardInterrupt, OutputError, WorkerLost) as exc:
                # points a worker finished while the news was on its way: in the folder, so in the table
                store.collect_late_points(out, todo, values, hash_, summaries, failed)
                _stop(exc, table, out, kind, sum(s is not None for s in summaries), len(values))
                raise
        h5, csv = table()
        result = SweepResult(out=out, kind=kind, title=base.title, paths=list(paths), values=[dict(v) for v in values],
                             summaries=summaries, computed=[i for i in todo if i not in failed],
                             reused=reused, failed=failed, table_h5=h5, table_csv=csv,
                             seconds=time.perf_counter() - start, jobs=used, backend=backend,
                             point_seconds=seconds, notes=notes)
        if finish is not None:
            finish(result)
    return result


def _check_options(backend: str, jobs: int | None, scheduler: str | None) -> None:
    """Refuse a backend, a worker count or a scheduler address that cannot be used (ValueError)."""
    if backend not in BACKENDS:
        raise ValueError(f"backend must be one of {BACKENDS}, not {backend!r}")
    if scheduler and backend != "dask":
        raise ValueError("a scheduler address needs the dask backend")
    if jobs is not None and jobs < 1:
        raise ValueError(f"jobs must be 1 or more, not {jobs}")


@contextmanager
def _folder_errors(out: Path, kind: str, total: int, previous: dict | None, created: bool) -> Iterator[None]:
    """On a BackendError, remove a new folder the cluster never wrote into; make a write error an OutputError."""
    try:
        yield
    except BackendError:
        if previous is None:      # a new folder that the cluster never wrote into: leave nothing behind
            store.undo_new_folder(out, created)
        raise
    except OSError as exc:
        if is_write_error(exc):   # the manifest, the table or the plots: the folder or the disk
            error = OutputError(describe_write_error(exc, out), out)
            error.progress = getattr(exc, "progress", None) or Progress(out, kind, None, total)
            raise error from None
        raise


@dataclass
class Progress:
    """How far a sweep or spread got before it stopped (attached to the exception as ``progress``)."""

    out: Path
    kind: str
    done: int | None      # points done and kept (None: not known)
    total: int


def _stop(exc: BaseException, table: Callable[[], Any], out: Path, kind: str, done: int, total: int) -> None:
    """A start that stops early: write the table of the points done so far (best effort: the disk may
    be full, or a second Ctrl-C may come) and attach how far it got to ``exc`` (``exc.progress``)."""
    try:
        table()
    except (OSError, KeyboardInterrupt):
        pass
    exc.progress = Progress(out, kind, done, total)


def _run(tasks: list[PointTask], summaries: list, failed: dict, seconds: dict, backend: str, jobs: int | None,
         scheduler: str | None, per_point: int, out: Path, progress: bool, timeout_s: float,
         total: int, initial: int, kind: str, notes: list[str]) -> int:
    """Run ``tasks`` on the backend, filling ``summaries`` and ``failed``; return the worker count."""
    from tqdm import tqdm
    bar = tqdm(total=total, initial=initial, unit="sample" if kind == "spread" else "point", desc=kind, disable=not progress, file=sys.stderr,
               dynamic_ncols=True, smoothing=0.2)
    try:
        if backend == "dask":
            workers = min(jobs or cores(), len(tasks))
            with Cluster(scheduler, workers, timeout_s) as cluster:
                answers = preflight(cluster.client, out.absolute() / store.POINTS, timeout_s)
                n = len(answers)
                bar.set_postfix_str(f"{n} dask workers")
                for outcome in run_tasks(run_point, tasks, "dask", client=cluster.client):
                    _collect(outcome, summaries, failed, seconds, bar)
            return n
        n = _fit_jobs(min(jobs or cores(), len(tasks)), per_point, notes)
        try:
            for outcome in run_tasks(run_point, tasks, "loky", n):
                _collect(outcome, summaries, failed, seconds, bar)
        finally:
            release_workers()       # before the serial work (table, plots): no idle worker outlives the run
        return n
    finally:
        bar.close()


def _collect(outcome: PointOutcome, summaries: list, failed: dict, seconds: dict, bar) -> None:
    if outcome.write_error:       # every later point would fail the same way: stop
        raise OutputError(outcome.error or "cannot write a point file")
    seconds[outcome.index] = outcome.seconds
    if outcome.error is None:
        summaries[outcome.index] = outcome.summary
    else:
        failed[outcome.index] = outcome.error
        bar.set_postfix_str(f"{len(failed)} failed")
    bar.update(1)


# ----------------------------------------------------------------------------------------------
# The public entry point
# ----------------------------------------------------------------------------------------------

def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_") or "untitled"


def default_folder(base: Config, suffix: str) -> Path:
    """``runs/<config stem>-<suffix>`` (the title stands in for a config given as a dict)."""
    stem = Path(base.source).stem if base.source not in ("<dict>", "") else _slug(base.title)
    return Path("runs") / f"{stem}-{suffix}"


def load(config: str | os.PathLike | Mapping | Config, overrides: Sequence[str] = (), **sweep: Any) -> Config:
    """A validated Config from a path, a dict or a Config (``overrides``: --set strings; ``sweep``:
    ``vary`` and ``combine`` of :func:`ampmodel.config.load.load_config`, when not None)."""
    sweep = {k: v for k, v in sweep.items() if v is not None}
    if isinstance(config, Config):
        if overrides or sweep:
            return load_config(dict(config.raw), overrides, folder=config.folder or None, **sweep)
        return config
    return load_config(config, overrides, **sweep)


def load_with_table(config: str | os.PathLike | Mapping | Config, overrides: Sequence[str], name: str,
                    example: str, **sweep: Any) -> tuple[Config, dict]:
    """The validated config (:func:`load`) and its ``[name]`` table (``sweep`` or ``spread``).

    Raises
    ------
    ConfigError : bad input, or no such table (the message shows ``example``)
    """
    base = load(config, overrides, **sweep)
    table = base.raw.get(name)
    if not isinstance(table, dict):
        raise ConfigError([f"{base.source}: {name}: missing: the config has no [{name}] table; add one, e.g. "
                           f"{example}"])
    return base, table


def run_sweep(config: str | os.PathLike | Mapping | Config, out: str | os.PathLike | None = None, *,
              jobs: int | None = None, backend: str = "loky", scheduler: str | None = None,
              overrides: Sequence[str] = (), progress: bool = False, plots: bool = True,
              timeout_s: float = PREFLIGHT_TIMEOUT_S, vary: Mapping[str, Sequence] | Sequence[str] | None = None,
              combine: str | None = None) -> SweepResult:
    """Run the sweep in a config's [sweep] table (or given by ``vary``), in parallel, resumable.

    Parameters
    ----------
    config : path of a TOML file, a config dict, or a Config from :func:`ampmodel.load_config`
    out : output folder (default ``runs/<config stem>-sweep``); started again on the same folder,
        only the points it lacks are computed
    jobs : worker processes (default: every core); with the dask backend and no scheduler, the
        workers of the LocalCluster
    backend : "loky" (processes on this machine) or "dask" (a dask.distributed cluster)
    scheduler : address ``tcp://host:port`` of a running dask scheduler (implies backend "dask");
        None with backend "dask": a LocalCluster on 127.0.0.1
    overrides : ``PATH=VALUE`` strings applied to the config first, like ``--set``
    progress : show a progress bar (count, time left) on stderr
    plots : write ``plots/*.png`` (each summary scalar against the swept values)
    timeout_s : how long the dask pre-flight check waits for the scheduler and workers
    vary : the swept value paths and their values, ``{"seed.energy_J": [0.001, 0.01]}`` or
        ``["seed.energy_J=0.001,0.01"]`` (``--vary``), in place of those of the config's [sweep] table
        (its ``combine`` and ``figures`` are kept); a config without [sweep] takes them too. A folder
        started with ``vary`` resumes only with the same values and ``combine``.
    combine : "grid" or "zip" (``--combine``), in place of the table's (default "grid")

    Returns
    -------
    SweepResult
        ``summaries[i]`` is point i's summary.json dict; ``computed`` the points this call ran.

    Raises
    ------
    ConfigError : bad input (also a config without [sweep] and no ``vary``); FolderError : ``out``
    holds another config's sweep (or another ``vary``, or is not a sweep folder, or is in use);
    BackendError : the dask cluster cannot be used. Nothing is written in these cases.
    """
    if scheduler and backend == "loky":
        backend = "dask"
    base, table = load_with_table(config, overrides, "sweep",
                                  '[sweep] "seed.energy_J" = [0.001, 0.01] (README: Sweeps), or give the '
                                  f'values on the command line: {VARY_EXAMPLE}', vary=vary, combine=combine)
    notes = []
    replaced = own_sweep_paths(config) if vary is not None else []
    if replaced:
        notes.append(f"--vary replaces the value paths of the config's [sweep] table ({', '.join(replaced)}); "
                     "its combine and figures are kept")
    paths, values = sweep_points(table)
    out = Path(out) if out is not None else default_folder(base, "sweep")
    combine = table.get("combine", "grid")
    figures = list(table.get("figures", []))
    named = [(f"sweep.figures[{j}] = {path}", path) for j, path in enumerate(figures)]
    problems = [f"{base.source}: {label}: {problem}" for label, path in named
                if (problem := check_before_run(path, base))]
    if problems:
        raise ConfigError(problems)

    def finish(result: SweepResult) -> None:
        result.figures = figures
        result.notes[:0] = notes
        if plots:
            from ampmodel.plots.sweep import plot_sweep
            shown = dataclasses.replace(result, summaries=with_figures(result.summaries, figures))
            result.plots = plot_sweep(shown, combine, out / "plots", limits=base.limits)
        write_report_keeping_results(out)   # after the plots: it embeds them

    return run_points("sweep", base, paths, values, out, backend=backend, jobs=jobs, scheduler=scheduler,
                      progress=progress, timeout_s=timeout_s, table_stem="sweep",
                      table_attrs={"combine": combine}, manifest_table=table, finish=finish, derived=(REPORT,),
                      first_check=figure_check(named, base.source) if named else None,
                      command_line=vary_record(table) if vary is not None else None)


# ----------------------------------------------------------------------------------------------
# For the benchmark: the wall time of an N-point sweep on k workers
# ----------------------------------------------------------------------------------------------

BENCH_CONFIG: dict[str, Any] = {
    "title": "sweep benchmark: double-pass Nd:YAG rod",
    "grid": {"points": 96, "width_mm": 8.0, "time_slices": 32},
    "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 100.0, "diameter_mm": 6.35,
                "slices": 24, "loss_per_cm": 0.002, "small_signal_gain": 6.0}],
    "seed": {"energy_J": 0.02, "duration_ns": 10.0, "profile": "gaussian", "diameter_mm": 4.5},
    "step": [{"kind": "pass", "medium": "rod"}, {"kind": "loss", "transmission": 0.95},
             {"kind": "pass", "medium": "rod", "reverse": True}],
}
"""A config whose points take about a second each on one core (96 x 96 x 32 x 2 x 24 cells)."""


def _warm_up(_: Any) -> str:
    """A task that makes a worker import what a point needs (for time_sweep(warm=True))."""
    from ampmodel.studies.backends import probe_import
    return probe_import()["where"]


def time_sweep(config: str | os.PathLike | Mapping | Config | None = None, points: int = 8,
               workers: Sequence[int] = (1, 2), path: str = "seed.energy_J", backend: str = "loky",
               folder: str | os.PathLike | None = None, warm: bool = False) -> dict[str, Any]:
    """Wall time of a ``points``-point sweep on each worker count in ``workers`` (for ``ampmodel bench``).

    The sweep varies ``path`` over ``points`` values from half to twice the config's value; each
    worker count runs the whole sweep into a fresh folder (no resume, no plots), so the times include
    starting the worker processes, writing the point files and the table. One worker runs the points
    in the calling process, one after another (what ``--jobs 1`` does). With ``warm`` (loky only), the
    worker processes are started and have imported ampmodel before the clock starts (joblib keeps
    them for the next sweep): the steady state of a long sweep rather than a fresh start.

    Returns
    -------
    dict
        ``points``, ``path``, ``backend``, ``seconds`` {k: wall time (s)}, ``speedup`` {k: t(first k)
        / t(k)}, ``point_seconds`` (mean compute time of one point, from the first run).
    """
    import numpy as np
    base = load(BENCH_CONFIG if config is None else config)
    container, key = resolve_path(dict(base.raw), path)
    nominal = container[key]
    values = [{path: float(nominal * f)} for f in np.geomspace(0.5, 2.0, points)]
    seconds: dict[int, float] = {}
    point_seconds = float("nan")
    with tempfile.TemporaryDirectory(prefix="ampmodel-bench-", dir=folder) as tmp:
        for k in workers:
            if warm and backend == "loky" and k > 1:
                list(run_tasks(_warm_up, list(range(k)), "loky", k))
            t0 = time.perf_counter()
            r = run_points("sweep", base, [path], values, Path(tmp) / f"workers-{k}", backend=backend, jobs=k)
            seconds[k] = time.perf_counter() - t0
            if r.failed:
                raise RuntimeError(f"benchmark point failed: {next(iter(r.failed.values()))}")
            if point_seconds != point_seconds:     # NaN: the first run
                point_seconds = sum(r.point_seconds.values()) / len(r.point_seconds)
    first = seconds[workers[0]]
    return {"points": points, "path": path, "backend": backend, "warm": warm, "seconds": seconds,
            "speedup": {k: first / t for k, t in seconds.items()}, "point_seconds": point_seconds}
