"""Sizing to a target: the value of one parameter at which a summary figure reaches a target, under limits.

``ampmodel size CONFIG --target output_energy_J=1.0 --vary medium.rod.small_signal_gain --within 2,50
--limit peak_fluence_J_cm2<=5 --limit b_integral_rad<=3``

Method: the figure minus the target is evaluated at both ends of the range; when the signs differ,
scipy.optimize.brentq (Brent's bracketing method: bisection, secant and inverse quadratic steps) finds
the crossing. Each evaluation is a full run. Tolerance: brentq stops when the bracket is below
``xtol + rtol·|x|``; the defaults, ``xtol`` = 1e-12 x max(|low|, |high|) and ``rtol`` = 1e-10, fix
the value to about 1e-10 relative, far below the model's own accuracy (the test suite checks a 1e-6
relative agreement with the analytic inverse of Frantz–Nodvik).

Limits are checked at the answer. When one is crossed there, it is crossed before the target is
reached: the value where the limit is met exactly is found by brentq too (between the end of the
range where the limit holds and the answer), and reported with the figures there. When several limits
are crossed, the one met first on the way from that end is reported.

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
from ampmodel.description import Config
from ampmodel.output.summary import is_number

RTOL = 1e-10
XTOL_RELATIVE = 1e-12
STATUSES = ("ok", "unreachable", "limited")


@dataclass(frozen=True)
class Limit:
    """A bound on a summary figure: ``figure op value`` with op "<=" or ">="."""

    figure: str
    op: str
    value: float

    def margin(self, x: float) -> float:
        """How far ``x`` is inside the bound (negative: crossed), in the figure's unit."""
        return self.value - x if self.op == "<=" else x - self.value

    def __str__(self) -> str:
        return f"{self.figure}{self.op}{self.value:g}"


_LIMIT = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(<=|>=|<|>)\s*(\S+)\s*$")


def _number(text: str, what: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ConfigError([f"{what}: {text!r} is not a number"]) from None
    if not math.isfinite(value):
        raise ConfigError([f"{what}: must be a finite number, not {text}"])
    return value


def parse_limit(text: str) -> Limit:
    """``"peak_fluence_J_cm2<=5"`` -> Limit; ``<`` and ``>`` read as ``<=`` and ``>=``."""
    m = _LIMIT.match(text)
    if not m:
        raise ConfigError([f"--limit {text}: expected FIGURE<=VALUE or FIGURE>=VALUE, e.g. --limit "
                           "peak_fluence_J_cm2<=5"])
    op = {"<": "<=", ">": ">="}.get(m.group(2), m.group(2))
    return Limit(m.group(1), op, _number(m.group(3), f"--limit {text}"))


def parse_target(text: str) -> tuple[str, float]:
    """``"output_energy_J=1.0"`` -> ("output_energy_J", 1.0)."""
    figure, sep, value = text.partition("=")
    if not sep or not figure.strip() or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", figure.strip()):
        raise ConfigError([f"--target {text}: expected FIGURE=VALUE, e.g. --target output_energy_J=1.0"])
    return figure.strip(), _number(value.strip(), f"--target {text}")


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

    def as_dict(self) -> dict[str, Any]:
        """The result as plain data (size.json)."""
        return {"status": self.status, "vary": self.vary, "target_figure": self.target[0],
                "target": self.target[1], "within": list(self.within), "value": self.value,
                "message": self.message, "margins": self.margins,
                "limiting": str(self.limiting) if self.limiting else None,
                "xtol": self.xtol, "rtol": self.rtol, "runs": len(self.evaluations),
                "evaluations": [list(e) for e in self.evaluations], "summary": self.summary}


def _check_vary(config: Config, vary: str, within: tuple[float, float]) -> None:
    """The varied path must name a number of this config; both ends must be allowed values."""
    src = config.source
    try:
        _, leaf, trail = walk(dict(config.raw), vary)
    except PathError as exc:
        raise ConfigError([f"{src}: --vary {vary}: the path does not resolve: {exc}"]) from None
    schema = leaf_schema(dict(config.raw), trail)
    if schema is None or leaf not in schema:
        hits = close_matches(leaf, schema) if schema else []
        prefix = vary.rsplit(".", 1)[0] + "." if "." in vary else ""
        hint = f"; did you mean {quoted_list(prefix + h for h in hits)}?" if hits else ""
        raise ConfigError([f"{src}: --vary {vary}: not a value of this config{hint}"])
    spec = schema[leaf]
    if spec.kind != "float":
        raise ConfigError([f"{src}: --vary {vary}: sizing varies a continuous number; {leaf} is not one"])
    problems = []
    for end, value in zip(("low", "high"), within, strict=True):
        _, message = check_value(value, spec)
        if message:
            problems.append(f"{src}: --within: the {end} end {value:g} is not an allowed value of {leaf}: {message}")
    if problems:
        raise ConfigError(problems)


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
        value = self.figure_of(s, self.figure)
        self.evaluations.append((x, value))
        if self.report:
            self.report(f"  {self.vary} = {x:<14.10g} -> {self.figure} = {value:.10g}")
        return s

    def figure_of(self, s: Mapping[str, Any], figure: str, option: str = "--target") -> float:
        value = s.get(figure)
        if not is_number(value):
            figures = [k for k, v in s.items() if is_number(v)]
            hits = close_matches(figure, figures)
            hint = f"; did you mean {quoted_list(hits)}?" if hits else ""
            raise ConfigError([f"{self.config.source}: {option} {figure}: not a figure of summary.json{hint} (figures: "
                               f"{', '.join(figures)})"])
        return float(value)

    def result_at(self, x: float):
        if self.last is not None and self.last[0] == x:
            return self.last[1]
        from ampmodel.simulation import simulate
        return simulate(self.config_at(x))


def _margins(runs: _Runs, s: Mapping[str, Any], limits: Sequence[Limit]) -> list[dict]:
    out = []
    for lim in limits:
        v = runs.figure_of(s, lim.figure)
        m = lim.margin(v)
        out.append({"figure": lim.figure, "op": lim.op, "limit": lim.value, "value": v, "margin": m,
                    "relative_margin": m / abs(lim.value) if lim.value else float("inf") if m > 0 else 0.0})
    return out


def size_to_target(config: str | os.PathLike | Mapping | Config, target: tuple[str, float], vary: str,
                   within: tuple[float, float], limits: Sequence[Limit | str] = (), *,
                   overrides: Sequence[str] = (), xtol: float | None = None, rtol: float = RTOL,
                   report: Callable[[str], None] | None = None, keep_result: bool = False) -> SizingResult:
    """Find the value of ``vary`` in ``within`` at which the summary figure ``target[0]`` equals ``target[1]``.

    Parameters
    ----------
    config : a TOML path, a config dict or a Config
    target : (figure, value): a scalar of summary.json in the unit its name carries, e.g.
        ("output_energy_J", 1.0)
    vary : value path of a number, e.g. "medium.rod.small_signal_gain" (config units)
    within : (low, high) range searched, config units of ``vary``
    limits : Limit objects or strings like "peak_fluence_J_cm2<=5"; must hold at the answer
    overrides : "PATH=VALUE" strings applied first (like --set)
    xtol, rtol : brentq tolerances (default xtol = 1e-12·max(|low|, |high|), rtol = 1e-10)
    report : called with one line per run (e.g. ``print``); None: quiet
    keep_result : keep the Result of the run at the answer in ``SizingResult.result``

    Returns
    -------
    SizingResult
        ``status`` "ok", "unreachable" (not bracketed in the range) or "limited" (a limit crossed first).

    Raises
    ------
    ConfigError
        Bad input: the config, the path, the range, a figure that summary.json does not have.

    References
    ----------
    R. P. Brent, Algorithms for Minimization without Derivatives (1973); scipy.optimize.brentq.
    """
    from ampmodel.studies.sweeps import load
    base = load(config, overrides)
    figure, goal = target
    (low, high), limits, xtol = _checked_search(base, vary, within, limits, xtol, rtol)
    runs = _Runs(base, vary, figure, report, keep_result)
    if report:
        report(f"sizing {base.source}: {figure} = {goal:g} by {vary} within [{low:g}, {high:g}]")
    for lim in limits:                       # a misspelt figure fails now, before the search
        runs.figure_of(runs.summary(low), lim.figure, f"--limit {lim}:")
    x, f_low, f_high = _crossing(runs, goal, low, high, xtol, rtol)
    common = dict(vary=vary, target=(figure, goal), within=(low, high), evaluations=runs.evaluations,
                  xtol=xtol, rtol=rtol)
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
           f"{vary} = {x:.6g} with {lim.figure} = {runs.figure_of(s, lim.figure):.6g})")
    return SizingResult(status="limited", value=x_lim, summary=s_lim, margins=_margins(runs, s_lim, limits),
                        message=msg, limiting=lim, result=runs.result_at(x_lim) if keep_result else None,
                        **common)


def _checked_search(base: Config, vary: str, within: tuple[float, float], limits: Sequence[Limit | str],
                    xtol: float | None, rtol: float) -> tuple[tuple[float, float], list[Limit], float]:
    """The range, the limits and ``xtol`` of a search, checked (ConfigError, ValueError for ``rtol``)."""
    low, high = float(within[0]), float(within[1])
    if not low < high:
        raise ConfigError([f"{base.source}: --within {low:g},{high:g}: the low end must be below the high end"])
    limits = [parse_limit(lim) if isinstance(lim, str) else lim for lim in limits]
    _check_vary(base, vary, (low, high))
    if not rtol >= 4 * sys.float_info.epsilon:
        raise ValueError("rtol must be at least 4 x machine epsilon (scipy.optimize.brentq)")
    xtol = XTOL_RELATIVE * max(abs(low), abs(high)) if xtol is None else float(xtol)
    return (low, high), limits, xtol


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
            return lim.margin(runs.figure_of(runs.summary(x), lim.figure))
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
