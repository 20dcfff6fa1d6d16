"""Sizing to a target: the value of one parameter at which a summary figure reaches a target, under limits.

``ampmodel size CONFIG --target output_energy_J=1.0 --vary medium.rod.small_signal_gain --within 2,50
--limit steps.0.peak_fluence_J_cm2<=5 --limit b_integral_rad<=3``

The target and the limits name figures of summary.json by their paths (``figures.py``: top-level keys,
``steps.N.KEY``, ``media.NAME.KEY``, ``train.KEY``, ...).

Input: every option is checked before any run (:func:`plan_sizing`), and every bad one reported at
once, one line each: the config and its ``--set`` values, the target, the varied path and its range,
each limit, ``xtol`` and ``rtol``; a figure path for its form, its last key against the names a
summary holds, a step index and a medium's name against the config. The figures themselves are
looked up in the summary of the first run (at the low end of the range): one that is not there is
bad input, reported before any further run.

Method: the figure minus the target is evaluated at both ends of the range; when the signs differ,
scipy.optimize.brentq (Brent's bracketing method: bisection, secant and inverse quadratic steps) finds
the crossing. Each evaluation is a full run. Tolerance: brentq stops when the bracket around the
crossing is below ``xtol + rtol·|x|``, so the answer is within that distance of the crossing of the
computed figure. The defaults, ``xtol`` = 1e-12 x max(|low|, |high|) and ``rtol`` = 1e-10 (RTOL), fix
the value to about 1e-10 relative, far below the model's own accuracy (the test suite checks a 1e-6
relative agreement with the analytic inverse of Frantz–Nodvik). A larger ``rtol`` (``--rtol``) stops
the search sooner, with fewer runs, on a wider bracket; it must be at least 4·eps (about 8.9e-16),
the least brentq accepts, and below 1; ``xtol`` must be > 0.

Limits are checked at the answer. When one is crossed there, it is crossed before the target is
reached: the value where the limit is met exactly is found by brentq too (between the end of the
range where the limit holds and the answer, with the same tolerances), and reported with the figures
there. When several limits are crossed, the one met first on the way from that end is reported.

Outcomes (``SizingResult.status``): "ok"; "unreachable" (the figure does not cross the target
within the range: it stays above or below it at both ends); "limited" (a limit is crossed first).
The command line exits 0, 3 and 3.

References: R. P. Brent, Algorithms for Minimization without Derivatives (1973), ch. 4;
scipy.optimize.brentq.
"""
from __future__ import annotations

import math
import os
import re
import sys
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Sequence

from ampmodel.config.checks import ConfigError, PathError, check_value, close_matches, quoted_list
from ampmodel.config.load import load_config
from ampmodel.config.schema import leaf_schema, walk
from ampmodel.config.sweep import figure_parts
from ampmodel.description import Config
from ampmodel.studies.figures import FigureError, Limit, check_before_run, check_in_summary, parse_limit, resolve

__all__ = ["size_to_target", "plan_sizing", "run_sizing", "SizingPlan", "SizingResult", "Limit", "parse_limit",
           "parse_target", "parse_within", "RTOL", "RTOL_MIN"]

RTOL = 1e-10
RTOL_MIN = 4 * sys.float_info.epsilon      # scipy.optimize.brentq refuses a smaller rtol
XTOL_RELATIVE = 1e-12
STATUSES = ("ok", "unreachable", "limited")


def _number(text: str, what: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ConfigError([f"{what}: {text!r} is not a number"]) from None
    if not math.isfinite(value):
        raise ConfigError([f"{what}: must be a finite number, not {text}"])
    return value


def parse_target(text: str) -> tuple[str, float]:
    """``"output_energy_J=1.0"`` -> ("output_energy_J", 1.0); the figure is a figure path."""
    figure, sep, value = text.partition("=")
    figure = figure.strip()
    if not sep or not figure or re.search(r"[<>]", figure):
        raise ConfigError([f"--target {text}: expected FIGURE=VALUE, e.g. --target output_energy_J=1.0"])
    try:
        figure_parts(figure)
    except ValueError as exc:
        raise ConfigError([f"--target {text}: {exc}"]) from None
    return figure, _number(value.strip(), f"--target {text}")


def parse_within(text: str) -> tuple[float, float]:
    """``"2,50"`` -> (2.0, 50.0); the lower value first."""
    parts = [p for p in re.split(r"[,\s]+", text.strip()) if p]
    if len(parts) != 2:
        raise ConfigError([f"--within {text}: expected LOW,HIGH, e.g. --within 2,50"])
    low, high = (_number(p, f"--within {text}") for p in parts)
    if not low < high:
        raise ConfigError([f"--within {text}: the low end must come first and be below the high end"])
    return low, high


@dataclass
class SizingResult:
    """The answer of :func:`size_to_target`.

    status : "ok", "unreachable" or "limited"
    value : the answer (ok) or the value where the binding limit is met (limited); None (unreachable)
    summary : the summary.json dict at ``value``
    margins : one dict per limit at ``value``: figure, op, limit, value, margin, relative_margin
    message : what happened, in a sentence or two
    evaluations : (parameter value, target figure) of every run, in order
    limiting : the binding limit (limited)
    result : the Result of the run at ``value`` (when asked for with keep_result)
    """

    status: str
    vary: str
    target: tuple[str, float]
    within: tuple[float, float]
    value: float | None
    summary: dict | None
    margins: list[dict]
    message: str
    evaluations: list[tuple[float, float]]
    xtol: float
    rtol: float
    limiting: Limit | None = None
    result: Any = field(default=None, repr=False)
    limits: list[Limit] = field(default_factory=list)

    def figures(self) -> dict[str, float]:
        """The target's and the limits' figures at ``value`` (empty without an answer)."""
        if self.summary is None:
            return {}
        names = [self.target[0]] + [lim.figure for lim in self.limits]
        return {name: resolve(self.summary, name) for name in dict.fromkeys(names)}

    def as_dict(self) -> dict[str, Any]:
        """The result as plain data (size.json)."""
        return {"status": self.status, "vary": self.vary, "target_figure": self.target[0],
                "target": self.target[1], "within": list(self.within), "value": self.value,
                "message": self.message, "limits": [str(lim) for lim in self.limits],
                "figures": self.figures(), "margins": self.margins,
                "limiting": str(self.limiting) if self.limiting else None,
                "xtol": self.xtol, "rtol": self.rtol, "runs": len(self.evaluations),
                "evaluations": [list(e) for e in self.evaluations], "summary": self.summary}


def _check_vary(config: Config, vary: str, within: tuple[float, float] | None) -> list[str]:
    """The varied path must name a number of this config; both ends must be allowed values."""
    src = config.source
    try:
        _, leaf, trail = walk(dict(config.raw), vary)
    except PathError as exc:
        return [f"{src}: --vary {vary}: the path does not resolve: {exc}"]
    schema = leaf_schema(dict(config.raw), trail)
    if schema is None or leaf not in schema:
        hits = close_matches(leaf, schema) if schema else []
        prefix = vary.rsplit(".", 1)[0] + "." if "." in vary else ""
        hint = f"; did you mean {quoted_list(prefix + h for h in hits)}?" if hits else ""
        return [f"{src}: --vary {vary}: not a value of this config{hint}"]
    spec = schema[leaf]
    if spec.kind != "float":
        return [f"{src}: --vary {vary}: sizing varies a continuous number; {leaf} is not one"]
    problems = []
    for end, value in zip(("low", "high") if within else (), within or (), strict=True):
        _, message = check_value(value, spec)
        if message:
            problems.append(f"{src}: --within: the {end} end {value:g} is not an allowed value of {leaf}: {message}")
    return problems


@dataclass
class SizingPlan:
    """A sizing search whose every option was checked (:func:`plan_sizing`); run it with :func:`run_sizing`."""

    base: Config
    target: tuple[str, float]
    vary: str
    within: tuple[float, float]
    limits: list[Limit]
    xtol: float
    rtol: float


class _Collect:
    """Problems of several options, gathered so that all are reported at once."""

    def __init__(self, source: str):
        self.source, self.problems = source, []

    def add(self, line: str) -> None:
        self.problems.append(line if line.startswith(f"{self.source}: ") else f"{self.source}: {line}")

    def call(self, fn: Callable, *args: Any) -> Any:
        try:
            return fn(*args)
        except ConfigError as err:
            for line in err.problems:
                self.add(line)
            return None


def _source(config: Any) -> str:
    if isinstance(config, Config):
        return config.source
    return str(config) if isinstance(config, (str, os.PathLike)) else "<dict>"


def _quiet_load(load: Callable, config: Any) -> Config | None:
    """The config without its --set values (None when it has problems of its own)."""
    try:
        return load(config)
    except ConfigError:
        return None


def _tolerances(p: _Collect, xtol: Any, rtol: Any) -> None:
    if xtol is not None and not (isinstance(xtol, (int, float)) and math.isfinite(xtol) and xtol > 0):
        p.add(f"--xtol {xtol}: must be a finite number > 0 (the absolute tolerance on the varied value), "
              "e.g. --xtol 1e-9")
    if not (isinstance(rtol, (int, float)) and math.isfinite(rtol) and RTOL_MIN <= rtol < 1):
        p.add(f"--rtol {rtol}: must be at least 4 x machine epsilon ({RTOL_MIN:.3g}, the least "
              f"scipy.optimize.brentq accepts) and below 1, e.g. --rtol {RTOL:g}")


def _within(within: Any) -> tuple[float, float]:
    low, high = (float(v) for v in within)
    if not (math.isfinite(low) and math.isfinite(high) and low < high):
        raise ConfigError([f"--within {low:g},{high:g}: the low end must come first and be below the high end"])
    return low, high


def plan_sizing(config: str | os.PathLike | Mapping | Config, target: str | tuple[str, float], vary: str,
                within: str | tuple[float, float], limits: Sequence[Limit | str] = (), *,
                overrides: Sequence[str] = (), xtol: float | None = None, rtol: float = RTOL) -> SizingPlan:
    """Check every option of a sizing search before any run; all problems at once (ConfigError).

    ``target`` and ``within`` as the command line gives them ("output_energy_J=1", "2,50") or as a
    (figure, value) and (low, high) pair; ``limits`` as Limit objects or "FIGURE<=VALUE" texts.
    """
    from ampmodel.studies.sweeps import load
    p = _Collect(_source(config))
    base = p.call(load, config, overrides)
    if base is not None:
        p.source = base.source
    checked = base if base is not None or not overrides else _quiet_load(load, config)
    goal = p.call(parse_target, target) if isinstance(target, str) else (str(target[0]), float(target[1]))
    span = p.call(parse_within if isinstance(within, str) else _within, within)
    parsed = [p.call(parse_limit, lim) if isinstance(lim, str) else lim for lim in limits]
    _tolerances(p, xtol, rtol)
    named = ([(f"--target {target if isinstance(target, str) else goal[0]}", goal[0])] if goal else []) + \
        [(f"--limit {lim}", lim.figure) for lim in parsed if lim]
    for label, figure in named:                 # form, key names, steps and media of the config
        problem = check_before_run(figure, checked)
        if problem:
            p.add(f"{label}: {problem}")
    if checked is not None:                     # the config without its bad --set values, when they are bad
        for line in _check_vary(checked, vary, span):
            p.add(line)
    if p.problems:
        raise ConfigError(p.problems)
    assert base is not None and goal is not None and span is not None
    low, high = span
    return SizingPlan(base, goal, vary, span, [lim for lim in parsed if lim is not None],
                      XTOL_RELATIVE * max(abs(low), abs(high)) if xtol is None else float(xtol), float(rtol))


class _Runs:
    """Runs of the config at values of the varied path, cached; their summaries."""

    def __init__(self, config: Config, vary: str, figure: str, report: Callable[[str], None] | None,
                 keep_result: bool):
        self.config, self.vary, self.figure = config, vary, figure
        self.report, self.keep_result = report, keep_result
        self.cache: dict[float, dict] = {}
        self.evaluations: list[tuple[float, float]] = []
        self.last: tuple[float, Any] | None = None

    def config_at(self, x: float) -> Config:
        """The config with the varied path set to ``x`` (a problem names the value)."""
        from ampmodel.studies.points import point_raw
        raw = point_raw(self.config.raw, {self.vary: x}, self.config.title)
        try:
            return load_config(raw, folder=self.config.folder or None)
        except ConfigError as err:
            raise ConfigError([line.replace("<dict>: ", f"{self.config.source}: at {self.vary} = {x:g}: ", 1)
                               for line in err.problems]) from None

    def summary(self, x: float) -> dict:
        x = float(x)
        if x in self.cache:
            return self.cache[x]
        from ampmodel.simulation import simulate
        result = simulate(self.config_at(x), progress=False)
        s = result.summary
        self.cache[x] = s
        self.last = (x, result) if self.keep_result else None
        try:
            value = resolve(s, self.figure)
        except FigureError:           # reported by the check after the first run
            return s
        self.evaluations.append((x, value))
        if self.report:
            self.report(f"  {self.vary} = {x:<14.10g} -> {self.figure} = {value:.10g}")
        return s

    def figure_of(self, s: Mapping[str, Any], figure: str, option: str = "--target") -> float:
        try:
            return resolve(s, figure)
        except FigureError as exc:
            raise ConfigError([f"{self.config.source}: {option} {figure}: not a figure of this run: {exc}"]) from None

    def result_at(self, x: float):
        if self.last is not None and self.last[0] == x:
            return self.last[1]
        from ampmodel.simulation import simulate
        return simulate(self.config_at(x))


def _margins(runs: _Runs, s: Mapping[str, Any], limits: Sequence[Limit]) -> list[dict]:
    out = []
    for lim in limits:
        v = runs.figure_of(s, lim.figure, "--limit")
        m = lim.margin(v)
        out.append({"figure": lim.figure, "op": lim.op, "limit": lim.value, "value": v, "margin": m,
                    "relative_margin": m / abs(lim.value) if lim.value else float("inf") if m > 0 else 0.0})
    return out


def size_to_target(config: str | os.PathLike | Mapping | Config, target: tuple[str, float] | str, vary: str,
                   within: tuple[float, float] | str, limits: Sequence[Limit | str] = (), *,
                   overrides: Sequence[str] = (), xtol: float | None = None, rtol: float = RTOL,
                   report: Callable[[str], None] | None = None, keep_result: bool = False) -> SizingResult:
    """Find the value of ``vary`` in ``within`` at which the summary figure ``target[0]`` equals ``target[1]``.

    Parameters
    ----------
    config : a TOML path, a config dict or a Config
    target : (figure, value): a figure path of summary.json (``output_energy_J``,
        ``steps.2.energy_out_J``, ...) and its value in the unit its name carries; or "FIGURE=VALUE"
    vary : value path of a number, e.g. "medium.rod.small_signal_gain" (config units)
    within : (low, high) range searched, config units of ``vary``; or "LOW,HIGH"
    limits : Limit objects or strings like "steps.0.peak_fluence_J_cm2<=5"; must hold at the answer
    overrides : "PATH=VALUE" strings applied first (like --set)
    xtol, rtol : brentq tolerances (default xtol = 1e-12·max(|low|, |high|), rtol = RTOL = 1e-10): the
        answer is within xtol + rtol·|answer| of the crossing
    report : called with one line per run (e.g. ``print``); None: quiet
    keep_result : keep the Result of the run at the answer in ``SizingResult.result``

    Returns
    -------
    SizingResult
        ``status`` "ok", "unreachable" (not bracketed in the range) or "limited" (a limit crossed first).

    Raises
    ------
    ConfigError
        Bad input, every problem at once: the config, the path, the range, the tolerances, a figure
        path of bad form or one that the first run's summary does not have.

    References
    ----------
    R. P. Brent, Algorithms for Minimization without Derivatives (1973); scipy.optimize.brentq.
    """
    plan = plan_sizing(config, target, vary, within, limits, overrides=overrides, xtol=xtol, rtol=rtol)
    return run_sizing(plan, report=report, keep_result=keep_result)


def run_sizing(plan: SizingPlan, *, report: Callable[[str], None] | None = None,
               keep_result: bool = False) -> SizingResult:
    """The search of a checked plan (see :func:`size_to_target`)."""
    base, (figure, goal), vary, limits = plan.base, plan.target, plan.vary, plan.limits
    (low, high), xtol, rtol = plan.within, plan.xtol, plan.rtol
    runs = _Runs(base, vary, figure, report, keep_result)
    if report:
        report(f"sizing {base.source}: {figure} = {goal:g} by {vary} within [{low:g}, {high:g}]")
    # a figure the summary does not have fails now, after one run
    check_in_summary([(f"--target {figure}={goal:g}", figure)] + [(f"--limit {lim}", lim.figure) for lim in limits],
                     runs.summary(low), base.source, f"the run at {vary} = {low:g}")
    x, f_low, f_high = _crossing(runs, goal, low, high, xtol, rtol)
    common = dict(vary=vary, target=(figure, goal), within=(low, high), evaluations=runs.evaluations,
                  xtol=xtol, rtol=rtol, limits=list(limits))
    if x is None:
        msg = _unreachable_message(figure, goal, vary, (low, high), f_low, f_high)
        return SizingResult(status="unreachable", value=None, summary=None, margins=[], message=msg, **common)
    s = runs.summary(x)
    margins = _margins(runs, s, limits)
    crossed = [lim for lim, m in zip(limits, margins, strict=True) if m["margin"] < 0]
    if not crossed:
        msg = (f"found: {vary} = {x:.10g} gives {figure} = {runs.figure_of(s, figure):.10g} (target {goal:g}; "
               f"brentq, xtol {xtol:.2g}, rtol {rtol:.2g}, {len(runs.evaluations)} runs)" +
               ("; every limit holds" if limits else ""))
        return SizingResult(status="ok", value=x, summary=s, margins=margins, message=msg,
                            result=runs.result_at(x) if keep_result else None, **common)

    # A limit is crossed at the answer: find where each crossed limit is met, from the end where it holds.
    first, reasons = _first_limit(runs, crossed, x, (low, high), f_low, xtol, rtol)
    if first is None:
        msg = (f"no solution in range: {figure} reaches {goal:g} at {vary} = {x:.10g}, but "
               f"{'; '.join(reasons)}")
        return SizingResult(status="limited", value=None, summary=None, margins=margins, message=msg, **common)
    x_lim, lim = first
    s_lim = runs.summary(x_lim)
    msg = (f"no solution in range: a limit is crossed first. {lim.figure} reaches {lim.value:g} at {vary} = "
           f"{x_lim:.10g}, where {figure} = {runs.figure_of(s_lim, figure):.6g} (target {goal:g}, reached at "
           f"{vary} = {x:.6g} with {lim.figure} = {runs.figure_of(s, lim.figure, '--limit'):.6g})")
    return SizingResult(status="limited", value=x_lim, summary=s_lim, margins=_margins(runs, s_lim, limits),
                        message=msg, limiting=lim, result=runs.result_at(x_lim) if keep_result else None,
                        **common)


def _crossing(runs: _Runs, goal: float, low: float, high: float, xtol: float,
              rtol: float) -> tuple[float | None, float, float]:
    """Where the figure meets ``goal`` in [low, high] (None: not bracketed); the figure minus ``goal`` at the ends."""
    from scipy.optimize import brentq

    def f(x: float) -> float:
        return runs.figure_of(runs.summary(x), runs.figure) - goal

    f_low, f_high = f(low), f(high)
    if f_low == 0 or f_high == 0 or (f_low < 0) != (f_high < 0):
        x = low if f_low == 0 else high if f_high == 0 else brentq(f, low, high, xtol=xtol, rtol=rtol)
        return x, f_low, f_high
    return None, f_low, f_high


def _unreachable_message(figure: str, goal: float, vary: str, within: tuple[float, float], f_low: float,
                         f_high: float) -> str:
    """Why there is no answer: the figure minus ``goal`` has one sign at both ends (``f_low``, ``f_high``)."""
    low, high = within
    side = "above" if f_low > 0 else "below"
    return (f"no solution in range: {figure} is {side} the target {goal:g} at both ends of {vary} = "
            f"[{low:g}, {high:g}] ({f_low + goal:.6g} and {f_high + goal:.6g}); the target is out of reach "
            f"there: widen --within, or change another value (if {figure} is not monotonic in {vary}, "
            f"a narrower range may bracket it)")


def _first_limit(runs: _Runs, crossed: Sequence[Limit], x: float, within: tuple[float, float], f_low: float,
                 xtol: float, rtol: float) -> tuple[tuple[float, Limit] | None, list[str]]:
    """The crossed limit met first on the way to ``x`` and where (None: all crossed over the range); the reasons."""
    from scipy.optimize import brentq
    low, high = within
    first: tuple[float, Limit] | None = None
    reasons = []
    for lim in crossed:
        def g(x: float, lim: Limit = lim) -> float:
            return lim.margin(runs.figure_of(runs.summary(x), lim.figure, "--limit"))
        holds = [end for end in (low, high) if g(end) >= 0]
        if not holds:
            reasons.append(f"{lim} is crossed over the whole range")
            continue
        # from the end where the figure is short of the target, when the limit holds at both ends
        start = holds[0] if len(holds) == 1 else (low if f_low < 0 else high)
        x_lim = brentq(g, min(start, x), max(start, x), xtol=xtol, rtol=rtol)
        if first is None or abs(x_lim - start) < abs(first[0] - start):
            first = (x_lim, lim)
    return first, reasons
