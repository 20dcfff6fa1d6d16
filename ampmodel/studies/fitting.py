"""Calibration to measurements: the values of some config numbers that best reproduce a measured table.

``ampmodel fit CONFIG --data DATA.csv --vary medium.rod.small_signal_gain=2,50 --vary step.1.transmission=0.5,1``

The table (``fit_data.py``) gives, per row, the conditions of one measurement (value paths of the
config) and what was measured (figure paths of summary.json), optionally with ``sigma_<figure>``.

Method: ``scipy.optimize.least_squares`` (trust region reflective, "trf", bounded by the ``--vary``
ranges, ``x_scale`` the range widths) minimises ½·Σ r_k² over the measured values k, with the
weighted residual r_k = (model_k − measured_k)/s_k. s_k is the value's sigma when the table gives
one, else |measured_k|: a relative residual, so that figures of different units and sizes weigh
alike (a measured 0 without a sigma is bad input). The start is the config's value of each varied
path (its default when the config does not give it), or the middle of the range when that lies
outside it. Each residual evaluation runs every row (``fit_runs.py``: in parallel, through the sweep
machinery); the Jacobian is a forward difference with a relative step of 1e-6 (``fit_runs.DIFF_STEP``:
about the square root of the model's ~1e-12 accuracy). Tolerances: scipy's defaults (ftol, xtol,
gtol 1e-8), far below the uncertainty a bench measurement leaves.

Statistics, from the Jacobian J of the weighted residuals at the answer (SVD pseudo-inverse):

- every measured value has a sigma: cov = (JᵀJ)⁻¹ (the sigmas are absolute uncertainties);
- otherwise: cov = s²·(JᵀJ)⁻¹ with s² = SSR/(m − n) (m measured values, n varied paths): the scatter
  of the residuals estimates the uncertainty (a common relative uncertainty for relative residuals);
  with m = n there is none to estimate from and the standard errors are not given (null).

The standard error of a value is sqrt(cov_jj); the correlation cov_ij/sqrt(cov_ii·cov_jj). They are
the linearised (asymptotic) uncertainties of least squares, valid when the model is nearly linear
over a few standard errors and the errors are independent and normal.

Outcomes (``FitResult.status``): "ok"; "at_bound" (a value ends at an end of its range: the best
value may lie beyond it); "not_converged" (the evaluations ran out); "undetermined" (the data do
not fix every value: J has a zero singular value). The command line exits 0, 3, 3 and 3; the values
are the best found in every case.

References: M. A. Branch, T. F. Coleman and Y. Li, SIAM J. Sci. Comput. 21, 1 (1999) (the trust
region reflective method); scipy.optimize.least_squares; W. H. Press et al., Numerical Recipes, 3rd
ed. (2007), ch. 15.5 (the covariance of a nonlinear least-squares fit).
"""
from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.description import Config
from ampmodel.studies.backends import BACKENDS
from ampmodel.studies.fit_data import FitData, parse_table, read_text, table_from_columns
from ampmodel.studies.fit_runs import RowRuns, as_config_value, compute, config_value
from ampmodel.studies.points import point_raw
from ampmodel.studies.sizing import _check_vary, _Collect, _number, _quiet_load, _source

__all__ = ["fit_to_data", "plan_fit", "run_fit", "FitPlan", "FitResult", "Vary", "parse_vary", "STATUSES"]

STATUSES = ("ok", "at_bound", "not_converged", "undetermined")
EDGE = 1e-6          # a value within EDGE x the range width of an end is at that end


@dataclass(frozen=True)
class Vary:
    """A varied value path and its range (config units)."""

    path: str
    low: float
    high: float

    def __str__(self) -> str:
        return f"{self.path}={self.low:g},{self.high:g}"


def parse_vary(text: str) -> Vary:
    """``"medium.rod.small_signal_gain=2,50"`` -> Vary; ConfigError naming the option."""
    path, sep, span = text.partition("=")
    parts = [p for p in re.split(r"[,\s]+", span.strip()) if p]
    if not sep or not path.strip() or len(parts) != 2:
        raise ConfigError([f"--vary {text}: expected PATH=LOW,HIGH, e.g. --vary medium.rod.small_signal_gain=2,50"])
    low, high = (_number(p, f"--vary {text}") for p in parts)
    if not low < high:
        raise ConfigError([f"--vary {text}: the low end must come first and be below the high end"])
    return Vary(path.strip(), low, high)


def _vary_from(item: Any) -> Vary:
    """A (path, low, high) tuple as a Vary; ConfigError when it is not one."""
    try:
        path, low, high = item
        return parse_vary(f"{path}={float(low)!r},{float(high)!r}")
    except (TypeError, ValueError):
        raise ConfigError([f"vary {item!r}: expected (path, low, high) or \"PATH=LOW,HIGH\""]) from None


@dataclass
class FitPlan:
    """A fit whose every option was checked (:func:`plan_fit`); run it with :func:`run_fit`."""

    base: Config
    data: FitData
    vary: list[Vary]
    start: list[float]
    backend: str = "loky"
    jobs: int | None = None
    scheduler: str | None = None
    timeout_s: float = 60.0
    max_evaluations: int | None = None
    notes: list[str] = field(default_factory=list)

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        return np.array([v.low for v in self.vary]), np.array([v.high for v in self.vary])


def _load_data(p: _Collect, data: Any, checked: Config | None) -> FitData | None:
    """The measured table from a path, {column: values} or a FitData; problems prefixed with the file."""
    if isinstance(data, FitData):
        return data
    if isinstance(data, Mapping):
        try:
            text, source = table_from_columns(data), "<table>"
        except (ValueError, TypeError) as exc:
            p.add(f"data: {exc}")
            return None
    else:
        text, why = read_text(data)
        source = str(data)
        if why:
            p.add(why)
            return None
    if checked is None:                 # the columns are named against the config: it has problems
        return None
    table, problems = parse_table(text or "", checked, source)
    for line in problems:
        p.add(f"--data {source}: {line}")
    return table


def _check_rows(p: _Collect, base: Config, data: FitData, vary: Sequence[Vary], start: Sequence[float]) -> None:
    """Every row's config at the start must be valid, and one run of it must fit in memory."""
    from ampmodel.simulation import check_memory
    raw = base.raw
    for i, row in enumerate(data.rows):
        values = {path: as_config_value(raw, path, v) for path, v in row.items()}
        values.update({v.path: x for v, x in zip(vary, start, strict=True)})
        try:
            check_memory(load_config(point_raw(raw, values, base.title), folder=base.folder or None))
        except ConfigError as err:
            for line in err.problems[:5]:
                p.add(f"--data {data.source}: line {data.lines[i]}: " + line.replace("<dict>: ", "", 1))


def _start(base: Config, v: Vary, notes: list[str]) -> float:
    """The config's value of a varied path (or its default), or the middle of the range outside it."""
    value = config_value(base.raw, v.path)
    middle = 0.5 * (v.low + v.high)
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        notes.append(f"{v.path}: the config gives no value; the fit starts at the middle of the range, {middle:g}")
        return middle
    if not v.low <= value <= v.high:
        notes.append(f"{v.path}: the config's value {value:g} lies outside [{v.low:g}, {v.high:g}]; the fit "
                     f"starts at the middle of the range, {middle:g}")
        return middle
    return float(value)


def _options(p: _Collect, backend: str, jobs: Any, scheduler: Any, max_evaluations: Any) -> None:
    if backend not in BACKENDS:
        p.add(f"--backend {backend}: must be one of {', '.join(BACKENDS)}")
    if jobs is not None and not (isinstance(jobs, int) and jobs >= 1):
        p.add(f"--jobs {jobs}: must be 1 or more")
    if scheduler and backend != "dask":
        p.add(f"--scheduler {scheduler}: needs --backend dask (or leave --backend out)")
    if scheduler and "://" not in str(scheduler):
        p.add(f"--scheduler {scheduler}: give the address as tcp://host:port")
    if max_evaluations is not None and not (isinstance(max_evaluations, int) and max_evaluations >= 1):
        p.add(f"--max-evaluations {max_evaluations}: must be a whole number >= 1")


def plan_fit(config: str | os.PathLike | Mapping | Config, data: Any, vary: Sequence[str | Vary | tuple], *,
             overrides: Sequence[str] = (), backend: str = "loky", jobs: int | None = None,
             scheduler: str | None = None, timeout_s: float = 60.0,
             max_evaluations: int | None = None) -> FitPlan:
    """Check every option of a fit before any run; all problems at once (ConfigError).

    ``data``: a CSV path, {column: values} (None for an empty cell) or a FitData; ``vary``: "PATH=LOW,HIGH"
    texts, Vary objects or (path, low, high) tuples."""
    from ampmodel.studies.sweeps import load
    if scheduler and backend == "loky":
        backend = "dask"
    p = _Collect(_source(config))
    base = p.call(load, config, overrides)
    if base is not None:
        p.source = base.source
    checked = base if base is not None or not overrides else _quiet_load(load, config)
    varied = [p.call(parse_vary, v) if isinstance(v, str) else v if isinstance(v, Vary) else
              p.call(_vary_from, v) for v in vary]
    if not vary:
        p.add("--vary: give at least one value to fit, e.g. --vary medium.rod.small_signal_gain=2,50")
    paths = [v.path for v in varied if v is not None]
    for path in dict.fromkeys(x for x in paths if paths.count(x) > 1):
        p.add(f"--vary {path}: given {paths.count(path)} times; vary each path once")
    if checked is not None:
        for v in varied:
            if v is not None:
                for line in _check_vary(checked, v.path, (v.low, v.high)):
                    p.add(line.replace("--within: ", f"--vary {v}: ").replace("sizing varies", "a fit varies"))
    table = _load_data(p, data, checked)
    _options(p, backend, jobs, scheduler, max_evaluations)
    if table is not None:
        for path in paths:
            if path in table.conditions:
                p.add(f"--vary {path}: also a column of {table.source}; a value is either fitted or a condition")
        if len(paths) > table.count():
            p.add(f"--data {table.source}: {table.count()} measured value{'s' if table.count() != 1 else ''} "
                  f"cannot fix {len(paths)} varied values; measure more, or vary fewer")
    notes: list[str] = []
    if base is not None and table is not None and all(v is not None for v in varied) and \
            not any(" --vary " in line for line in p.problems):
        start = [_start(base, v, notes) for v in varied]
        _check_rows(p, base, table, varied, start)
    if p.problems:
        raise ConfigError(p.problems)
    assert base is not None and table is not None
    return FitPlan(base, table, list(varied), start, backend, jobs, scheduler, timeout_s, max_evaluations, notes)


@dataclass
class FitResult:
    """The answer of :func:`fit_to_data`.

    status : "ok", "at_bound", "not_converged" or "undetermined" (module docstring); message : in words
    values : path -> best value (config units); standard_errors : path -> one standard error (None:
    not determined); correlation : n x n list (paths in the order of ``vary``)
    residual_rms : the root mean square of the weighted residuals at the answer
    points : per row: line, conditions (as run), measured, sigma, modelled, residual (weighted)
    evaluations : residual evaluations; runs : model runs (rows x evaluations, Jacobians included)
    weighting : "sigma" (every value has one), "relative" or "mixed"; curve : the fitted model along
    the varying condition (``fit_runs.RowRuns.curve``), when asked for
    """

    status: str
    message: str
    vary: list[Vary]
    start: list[float]
    values: dict[str, float]
    standard_errors: dict[str, float | None]
    correlation: list[list[float | None]]
    residual_rms: float
    points: list[dict[str, Any]]
    evaluations: int
    jacobians: int
    runs: int
    weighting: str
    history: list[dict[str, Any]]
    notes: list[str] = field(default_factory=list)
    curve: dict[str, Any] | None = None
    figures: list[str] = field(default_factory=list)
    data_source: str = ""
    data_text: str = field(default="", repr=False)
    config_text: str = field(default="", repr=False)

    def as_dict(self) -> dict[str, Any]:
        """The result as plain data (fit.json)."""
        return {"status": self.status, "message": self.message, "values": self.values,
                "standard_errors": self.standard_errors, "correlation": self.correlation,
                "paths": [v.path for v in self.vary], "ranges": {v.path: [v.low, v.high] for v in self.vary},
                "start": {v.path: s for v, s in zip(self.vary, self.start, strict=True)},
                "residual_rms": self.residual_rms, "weighting": self.weighting, "figures": self.figures,
                "points": self.points, "evaluations": self.evaluations, "jacobians": self.jacobians,
                "runs": self.runs, "history": self.history, "notes": self.notes, "curve": self.curve,
                "data_file": self.data_source, "data": self.data_text, "config": self.config_text}

    def save(self, folder: str | os.PathLike, plots: bool = True) -> list[Path]:
        """Write fit.json (and plots/fit_<figure>.png) into ``folder``; return the files written."""
        from ampmodel.output.atomic import write_json
        folder = Path(folder)
        write_json(_json_safe(self.as_dict()), folder / "fit.json")
        written = [folder / "fit.json"]
        if plots:
            from ampmodel.plots.fit import plot_fit
            written += plot_fit(self.as_dict(), folder / "plots")
        return written


def _json_safe(x: Any) -> Any:
    """NaN and infinities as null (JSON has no such numbers)."""
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {k: _json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_json_safe(v) for v in x]
    return x


def fit_to_data(config: str | os.PathLike | Mapping | Config, data: Any, vary: Sequence[str | Vary | tuple], *,
                overrides: Sequence[str] = (), backend: str = "loky", jobs: int | None = None,
                scheduler: str | None = None, max_evaluations: int | None = None,
                report: Callable[[str], None] | None = None, curve: bool = False) -> FitResult:
    """Fit config values to measurements by least squares.

    Parameters
    ----------
    config : a TOML path, a config dict or a Config
    data : the measured table: a CSV path, or {column: values} (None for an empty cell); columns name
        conditions (value paths), figures (figure paths) and ``sigma_<figure>`` (``fit_data.py``)
    vary : the values to fit, each "PATH=LOW,HIGH", a Vary or (path, low, high), config units
    overrides : "PATH=VALUE" strings applied first (like --set)
    backend, jobs, scheduler : where the rows run (as for sweeps; jobs None: every core, 1: in this process)
    max_evaluations : the most residual evaluations (None: scipy's default, 100 x the varied values)
    report : called with a line per evaluation (e.g. ``print``); None: quiet
    curve : also run the fitted config along the varying condition (for the plots)

    Returns
    -------
    FitResult
        ``status`` "ok", "at_bound", "not_converged" or "undetermined"; ``values`` the best found.

    Raises
    ------
    ConfigError
        Bad input, every problem at once: the config, the data file and its columns and cells, each
        --vary (path, range), the rows' configs at the start, the options.
    """
    plan = plan_fit(config, data, vary, overrides=overrides, backend=backend, jobs=jobs, scheduler=scheduler,
                    max_evaluations=max_evaluations)
    return run_fit(plan, report=report, curve=curve)


def run_fit(plan: FitPlan, *, report: Callable[[str], None] | None = None, curve: bool = False,
            folder: Path | None = None, progress: bool = False) -> FitResult:
    """The fit of a checked plan (see :func:`fit_to_data`); ``folder``: where a dask pre-flight may probe;
    ``progress``: a bar of each batch of runs on stderr."""
    from scipy.optimize import least_squares
    low, high = plan.bounds()
    if report:
        report(f"fitting {plan.base.source} to {plan.data.source}: {len(plan.data.rows)} rows, "
               f"{plan.data.count()} measured values; varying " + ", ".join(map(str, plan.vary)))
        for note in plan.notes:
            report(f"note: {note}")
    with compute(plan, folder) as client:
        runs = RowRuns(plan, client, report, progress)
        res = least_squares(runs.residuals, np.array(plan.start, float), jac=runs.jacobian, bounds=(low, high),
                            x_scale=high - low, method="trf", max_nfev=plan.max_evaluations)
        r = np.asarray(res.fun, float)          # the weighted residuals at res.x
        path_curve = runs.curve(res.x, plan.data.figures) if curve else None
        modelled = {i: s for i, s in enumerate(runs.at([res.x])[0])}
    return _result(plan, runs, res, r, modelled, path_curve)


def _covariance(jac: np.ndarray, r: np.ndarray, all_sigma: bool) -> tuple[np.ndarray | None, bool]:
    """cov (None: not estimable) and whether J has full rank (module docstring)."""
    m, n = jac.shape
    u, s, vt = np.linalg.svd(jac, full_matrices=False)
    full_rank = s.size == n and s[-1] > s[0] * max(m, n) * np.finfo(float).eps * 1e3
    if not full_rank:
        return None, False
    cov = (vt.T / s ** 2) @ vt
    if not all_sigma:
        if m <= n:
            return None, True
        cov = cov * float(r @ r) / (m - n)
    return cov, True


def _result(plan: FitPlan, runs: RowRuns, res: Any, r: np.ndarray, summaries: Mapping[int, Any],
            curve: dict | None) -> FitResult:
    from ampmodel.studies.figures import FigureError, resolve
    paths = [v.path for v in plan.vary]
    x = [float(v) for v in res.x]
    data = plan.data
    all_sigma = data.all_have_sigma()
    cov, full_rank = _covariance(res.jac, r, all_sigma)
    n = len(paths)
    se = {p: (float(math.sqrt(cov[j, j])) if cov is not None else None) for j, p in enumerate(paths)}
    corr: list[list[float | None]] = [[None] * n for _ in range(n)]
    if cov is not None:
        d = np.sqrt(np.diag(cov))
        corr = [[float(cov[i, j] / (d[i] * d[j])) if d[i] > 0 and d[j] > 0 else None for j in range(n)]
                for i in range(n)]
    residual = {key: float(v) for key, v in zip(runs.keys, r, strict=True)}
    points = []
    for i, row in enumerate(data.rows):
        modelled = {}
        for f in data.figures:
            try:
                modelled[f] = resolve(summaries[i], f)
            except FigureError:
                modelled[f] = None
        points.append({"line": data.lines[i],
                       "conditions": {p: row.get(p, config_value(runs.raw, p)) for p in data.conditions},
                       "measured": data.measured[i], "sigma": data.sigma[i], "modelled": modelled,
                       "residual": {f: residual[(i, f)] for f in data.measured[i]}})
    edges = [v.path for v, xv in zip(plan.vary, x, strict=True)
             if min(xv - v.low, v.high - xv) <= EDGE * (v.high - v.low)]
    edges += [p for p, a in zip(paths, res.active_mask, strict=True) if a and p not in edges]
    status, message = _status(plan, res, edges, full_rank, cov is None and full_rank, x, se)
    weighting = "sigma" if all_sigma else "relative" if not any(data.sigma) else "mixed"
    return FitResult(status=status, message=message, vary=list(plan.vary), start=list(plan.start),
                     values=dict(zip(paths, x, strict=True)), standard_errors=se, correlation=corr,
                     residual_rms=float(np.sqrt(np.mean(r ** 2))), points=points, evaluations=int(res.nfev),
                     jacobians=int(res.njev or 0), runs=runs.runs, weighting=weighting, history=runs.history,
                     notes=list(plan.notes), curve=curve, figures=list(data.figures), data_source=data.source,
                     data_text=data.text, config_text=plan.base.text)


def _status(plan: FitPlan, res: Any, edges: list[str], full_rank: bool, no_scatter: bool, x: list[float],
            se: Mapping[str, float | None]) -> tuple[str, str]:
    """The outcome and its message."""
    found = ", ".join(f"{v.path} = {xv:.8g}" + (f" ± {se[v.path]:.3g}" if se.get(v.path) is not None else "")
                      for v, xv in zip(plan.vary, x, strict=True))
    counts = f"{res.nfev} evaluations"
    if res.status == 0:
        return "not_converged", (f"the fit did not converge within {counts} (scipy: {res.message}); the best "
                                 f"found so far: {found}; allow more with --max-evaluations, or start nearer")
    if edges:
        ends = "; ".join(f"{v.path} = {xv:.8g} is at the {'low' if xv - v.low < v.high - xv else 'high'} "
                         f"end of [{v.low:g}, {v.high:g}]" for v, xv in zip(plan.vary, x, strict=True)
                         if v.path in edges)
        return "at_bound", (f"the fit ends at a bound: {ends}; the best value may lie beyond it: widen the "
                            f"range if the value is physical there. The best found within the ranges: {found}")
    if not full_rank:
        return "undetermined", (f"the data do not fix every varied value (the Jacobian is singular: a value "
                                f"changes no measured figure, or two change them alike); the best found: {found}")
    tail = "; no standard errors: as many measured values as varied ones leave no scatter to estimate " \
           "them from (give sigma_ columns)" if no_scatter else ""
    return "ok", f"converged ({res.message.rstrip('.')}; {counts}): {found}{tail}"
