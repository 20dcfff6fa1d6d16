"""The runs of a fit: every data row as a point, at the values the optimiser asks for.

One residual evaluation runs each row of the measured table once (its conditions and the varied
values set in the config); one Jacobian runs each row once more for each varied path, all rows of
all perturbed values together in one batch, so that they share the workers. The points go through
the sweep machinery (``points.run_point`` with nothing written, on ``backends.run_tasks``: loky
processes here, or a dask cluster). The configs carry their data files inline (``inline_files``):
workers need no access to them.

Jacobian by forward differences: the step of varied value j is h_j = DIFF_STEP·max(|x_j|,
(high_j − low_j)/100), taken towards the inside of the range. A forward difference has a truncation
error of order h·f'' and a round-off error of order δ·|f|/h, where δ is the relative accuracy of a
figure (about 1e-12 for this model: the runs are deterministic and the energy balance closes to
round-off); both are about sqrt(δ) ~ 1e-6 relative at h ~ 1e-6·|x|, hence DIFF_STEP = 1e-6. The
floor (a hundredth of the range) keeps the step away from zero when a value is near 0.
"""
from __future__ import annotations

import math
import os
import sys
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

import numpy as np

from ampmodel.config.checks import ConfigError
from ampmodel.config.measured import inline_files
from ampmodel.config.schema import leaf_schema, walk
from ampmodel.studies.backends import Cluster, cores, preflight, run_tasks
from ampmodel.studies.figures import FigureError, resolve
from ampmodel.studies.points import PointOutcome, PointTask, describe, point_raw, run_point

DIFF_STEP = 1e-6
CURVE_POINTS = 41


def fit_point(task: PointTask) -> PointOutcome:
    """Run one row of the table (in a worker): its summary, nothing written, the Result not sent back."""
    outcome = run_point(task, write=False)
    outcome.result = None
    return outcome


def config_value(raw: Mapping[str, Any], path: str) -> Any:
    """The value at a value path of a validated config dict: as given, else the key's default (None: neither)."""
    container, key, trail = walk(dict(raw), path)
    try:
        return container[key]
    except (KeyError, IndexError, TypeError):
        schema = leaf_schema(dict(raw), trail)
        spec = schema.get(key) if schema else None
        return getattr(spec, "default", None)


def as_config_value(raw: Mapping[str, Any], path: str, value: float) -> Any:
    """A number from the table in the type its key wants (a whole number for an integer key)."""
    _, key, trail = walk(dict(raw), path)
    schema = leaf_schema(dict(raw), trail)
    spec = schema.get(key) if schema else None
    if getattr(spec, "kind", "") == "int" and float(value).is_integer():
        return int(value)
    return value


def steps(x: np.ndarray, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """The forward-difference step of each value (signed: towards the inside of the range)."""
    h = DIFF_STEP * np.maximum(np.abs(x), (high - low) / 100)
    return np.where(x + h <= high, h, -h)


class RowRuns:
    """Runs of the data rows at values of the varied paths, cached by those values.

    ``plan``: a checked FitPlan (``fitting.plan_fit``); ``client``: the dask client (dask backend);
    ``report``: called with a line per evaluation (None: quiet); ``progress``: a bar of the runs of each
    batch on stderr."""

    def __init__(self, plan: Any, client: Any = None, report: Callable[[str], None] | None = None,
                 progress: bool = False):
        self.plan, self.client, self.report, self.progress = plan, client, report, progress
        base = plan.base
        self.raw = inline_files(base.raw, base.folder or None, base.data_files)
        self.paths = [v.path for v in plan.vary]
        data = plan.data
        self.rows = [{p: as_config_value(self.raw, p, v) for p, v in row.items()} for row in data.rows]
        # the measured values in order: (row, figure), and the scale of each residual
        self.keys = [(i, f) for i, m in enumerate(data.measured) for f in data.figures if f in m]
        self.measured = np.array([data.measured[i][f] for i, f in self.keys])
        self.scale = np.array([data.sigma[i].get(f, abs(data.measured[i][f])) for i, f in self.keys])
        self.cache: dict[tuple[float, ...], list[dict]] = {}
        self.runs = 0
        self.history: list[dict[str, Any]] = []

    # -- running -----------------------------------------------------------------------------

    def _task(self, index: int, values: Mapping[str, Any]) -> PointTask:
        raw = point_raw(self.raw, values, self.plan.base.title)
        text = f"# fit of {self.plan.base.source}: {describe(values)}\n"
        pid = os.getpid() if self.plan.backend == "loky" else 0
        return PointTask(index, raw, text, self.plan.base.source, "", {}, parent_pid=pid)

    def run(self, value_sets: Sequence[Mapping[str, Any]], what: Callable[[int], str]) -> list[dict | None]:
        """Run one config per value set (in parallel); their summaries. A run that fails stops the fit
        (ConfigError naming ``what(index)``, or RuntimeError for an internal failure)."""
        from tqdm import tqdm
        tasks = [self._task(k, v) for k, v in enumerate(value_sets)]
        out: list[dict | None] = [None] * len(tasks)
        errors: dict[int, str] = {}
        with tqdm(total=len(tasks), unit="run", desc="fit", disable=not self.progress, file=sys.stderr,
                  leave=False, dynamic_ncols=True) as bar:
            for outcome in run_tasks(fit_point, tasks, self.plan.backend, self.plan.jobs, client=self.client):
                if outcome.error is not None:
                    errors[outcome.index] = outcome.error
                out[outcome.index] = outcome.summary
                bar.update(1)
        self.runs += len(tasks)
        if errors:
            k = min(errors)
            first = errors[k].splitlines()[0]
            message = f"{self.plan.base.source}: {what(k)}: the run failed: {first}"
            if "Traceback" in errors[k]:
                raise RuntimeError(f"{message}\n{errors[k]}")
            raise ConfigError([message])
        return out

    def row_values(self, i: int, x: Sequence[float]) -> dict[str, Any]:
        """The values set in row i's config at the varied values ``x``."""
        return {**self.rows[i], **{p: float(v) for p, v in zip(self.paths, x, strict=True)}}

    def at(self, xs: Sequence[Sequence[float]]) -> list[list[dict]]:
        """The summaries of every row at each vector of varied values (one batch for those not cached)."""
        keys = [tuple(float(v) for v in x) for x in xs]
        todo = list(dict.fromkeys(k for k in keys if k not in self.cache))
        n = len(self.rows)
        if todo:
            sets = [self.row_values(i, x) for x in todo for i in range(n)]
            lines = self.plan.data.lines

            def what(k: int) -> str:
                return f"the row of line {lines[k % n]} ({describe(sets[k])})"

            summaries = self.run(sets, what)
            for j, x in enumerate(todo):
                self.cache[x] = summaries[j * n:(j + 1) * n]
        return [self.cache[k] for k in keys]

    # -- what the optimiser sees -------------------------------------------------------------

    def modelled(self, summaries: Sequence[Mapping[str, Any]]) -> np.ndarray:
        """The modelled value of each measured value (in the order of ``keys``)."""
        out = np.empty(len(self.keys))
        for k, (i, f) in enumerate(self.keys):
            try:
                out[k] = resolve(summaries[i], f)
            except FigureError as exc:
                line = self.plan.data.lines[i]
                raise ConfigError([f"{self.plan.data.source}: column {f!r} (line {line}): not a figure of "
                                   f"this run: {exc}"]) from None
        return out

    def residuals(self, x: np.ndarray) -> np.ndarray:
        """(model − measured)/scale at ``x``: scale is the sigma, else |measured| (relative residuals)."""
        r = (self.modelled(self.at([x])[0]) - self.measured) / self.scale
        rms = float(np.sqrt(np.mean(r ** 2)))
        self.history.append({"values": dict(zip(self.paths, map(float, x), strict=True)), "residual_rms": rms})
        if self.report:
            shown = ", ".join(f"{p} = {v:.8g}" for p, v in zip(self.paths, x, strict=True))
            self.report(f"  {len(self.history):3d}: {shown} -> residual rms {rms:.6g}")
        return r

    def jacobian(self, x: np.ndarray) -> np.ndarray:
        """d residual / d value by forward differences (module docstring), all columns in one batch."""
        low, high = self.plan.bounds()
        h = steps(np.asarray(x, float), low, high)
        moved = []
        for j in range(len(x)):
            y = np.array(x, float)
            y[j] += h[j]
            moved.append(y)
        runs = self.at([x] + moved)
        base = self.modelled(runs[0])
        jac = np.empty((len(self.keys), len(x)))
        for j in range(len(x)):
            dx = moved[j][j] - x[j]          # the step as represented
            jac[:, j] = (self.modelled(runs[j + 1]) - base) / dx / self.scale
        return jac

    # -- the fitted model between the measured conditions ----------------------------------------

    def curve(self, x: Sequence[float], figures: Sequence[str]) -> dict[str, Any] | None:
        """The fitted model along the first condition whose values vary between rows: CURVE_POINTS values
        from its least to its largest, the other conditions at their common value. None: no condition
        varies, or another varies as well (then the rows' own modelled values stand alone)."""
        columns = {p: [r.get(p, config_value(self.raw, p)) for r in self.rows] for p in self.plan.data.conditions}
        varying = [p for p, vals in columns.items() if len(set(vals)) > 1]
        if len(varying) != 1 or not all(isinstance(v, (int, float)) for v in columns[varying[0]]):
            return None
        path = varying[0]
        lo, hi = min(columns[path]), max(columns[path])
        grid = np.linspace(lo, hi, CURVE_POINTS)
        fixed = {p: vals[0] for p, vals in columns.items() if p != path and vals[0] is not None}
        fitted = dict(zip(self.paths, map(float, x), strict=True))
        sets = [{**fixed, path: as_config_value(self.raw, path, float(v)), **fitted} for v in grid]
        summaries = self.run(sets, lambda k: f"the fitted model at {path} = {grid[k]:g}")
        out: dict[str, list[float]] = {}
        for f in figures:
            vals = []
            for s in summaries:
                try:
                    vals.append(resolve(s or {}, f))
                except FigureError:
                    vals.append(math.nan)
            out[f] = vals
        return {"condition": path, "values": [float(v) for v in grid], "figures": out}


@contextmanager
def compute(plan: Any, folder: Path | None) -> Iterator[Any]:
    """The dask client for the fit's runs (None for loky). The dask backend's pre-flight check probes the
    workers by writing into ``folder`` (the output folder; a temporary one without it)."""
    if plan.backend != "dask":
        yield None
        return
    import tempfile
    workers = plan.jobs or cores()
    with Cluster(plan.scheduler, workers, plan.timeout_s) as cluster:
        if folder is not None:
            preflight(cluster.client, Path(folder).absolute(), plan.timeout_s)
        else:
            with tempfile.TemporaryDirectory(prefix="ampmodel-fit-") as tmp:
                preflight(cluster.client, Path(tmp), plan.timeout_s)
        yield cluster.client
