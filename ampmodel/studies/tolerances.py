"""What a tolerance run tells beyond its percentiles: the yield against limits, and which tolerance
moves each figure most.

Yield. For each limit (``b_integral_rad<=3``, the syntax of ``size --limit``) and for all limits
together: the samples that ran (failed samples left out), those whose figure meets the limit (a figure
that a sample lacks, or NaN, does not meet it), their share k/n, and a 95 % confidence interval for the
share by the Wilson score interval (no continuity correction):

    centre = (p + z²/2n) / (1 + z²/n),   half width = z/(1 + z²/n) · sqrt(p(1 − p)/n + z²/4n²),

with p = k/n and z the standard normal's 97.5 % quantile. Unlike p ± z·sqrt(p(1 − p)/n) it stays in
[0, 1] and does not collapse to a point when every sample (or none) meets the limit, which is the
usual case of a good design with few samples. Reference: E. B. Wilson, "Probable inference, the law
of succession, and statistical inference", J. Am. Stat. Assoc. 22, 209-212 (1927);
scipy.stats.binomtest(k, n).proportion_ci(method="wilson") gives the same interval.

Sensitivity. For each figure that varies and each spread path: Spearman's rank correlation rho of
the figure with the path's sampled values (the Pearson correlation of their ranks, ties given their
mean rank), and the two-sided p-value of rho = 0 from Student's t with n − 2 degrees of freedom,
t = rho·sqrt((n − 2)/(1 − rho²)), as scipy.stats.spearmanr gives them. The paths are ranked by |rho|.

What rho means: how closely the figure rises (rho near +1) or falls (near −1) with the value, in any
monotone way, not only a straight line; it measures association, not cause. Because every path is
drawn independently of the others (spread.py: one random stream per path), a path's rho reflects how
much of the figure's spread that tolerance drives, given the widths of all the tolerances together:
ranking the paths by |rho| ranks the tolerances by how much they move the figure. A narrower tolerance
on the same value gives a smaller |rho|; with few samples a |rho| below about 2/sqrt(n) is within the
noise (the p-value says so). Reference: C. Spearman, "The proof and measurement of association between
two things", Am. J. Psychol. 15, 72-101 (1904); scipy.stats.spearmanr.
"""
from __future__ import annotations

import math
from statistics import NormalDist
from typing import Any, Mapping, Sequence

import numpy as np

from ampmodel.studies.figures import Limit

CONFIDENCE = 0.95
YIELD_METHOD = "Wilson score interval, 95 % (E. B. Wilson 1927; scipy.stats.binomtest ... method='wilson')"
SENSITIVITY_METHOD = ("Spearman's rank correlation of each figure with each spread value (ties: mean ranks), "
                      "p-value of rho = 0 from Student's t with n - 2 degrees of freedom; ranked by |rho|; "
                      "monotone association, not causation (the values are drawn independently)")


def wilson_interval(met: int, ran: int, confidence: float = CONFIDENCE) -> tuple[float, float] | None:
    """The Wilson score interval of a share ``met``/``ran`` (None when nothing ran)."""
    if ran <= 0:
        return None
    z = NormalDist().inv_cdf(0.5 + confidence / 2)
    p = met / ran
    denominator = 1 + z * z / ran
    centre = (p + z * z / (2 * ran)) / denominator
    half = z / denominator * math.sqrt(p * (1 - p) / ran + z * z / (4 * ran * ran))
    # at k = 0 and k = n one end is exactly 0 or 1 (centre and half width are then equal)
    return (0.0 if met == 0 else max(0.0, centre - half)), (1.0 if met == ran else min(1.0, centre + half))


def _share(name: str, met: np.ndarray) -> dict[str, Any]:
    ran, k = int(met.size), int(met.sum())
    ci = wilson_interval(k, ran)
    return {"limit": name, "ran": ran, "met": k, "share": k / ran if ran else None,
            "ci95": list(ci) if ci else None}


def yield_table(limits: Sequence[Limit], flat: Sequence[Mapping[str, float] | None]) -> dict[str, Any] | None:
    """The yield of each limit and of all together over the samples that ran (``flat``: one flattened
    summary per sample, None for a failed one); None without limits."""
    if not limits:
        return None
    ran = [f for f in flat if f is not None]
    each = []
    together = np.ones(len(ran), dtype=bool)
    for lim in limits:
        met = np.array([lim.holds(f.get(lim.figure, math.nan)) for f in ran], dtype=bool)
        together &= met
        each.append({**_share(str(lim), met), "figure": lim.figure, "op": lim.op, "value": lim.value})
    return {"method": YIELD_METHOD, "limits": each, "all": _share("all limits", together)}


def ranks(x: np.ndarray) -> np.ndarray:
    """Ranks 1..n of ``x``, tied values sharing their mean rank."""
    x = np.asarray(x, dtype=float)
    if x.size == 0:
        return x.copy()
    order = np.argsort(x, kind="mergesort")
    xs = x[order]
    new = np.r_[True, xs[1:] != xs[:-1]]              # where a run of equal values starts
    starts = np.flatnonzero(new)
    ends = np.r_[starts[1:], x.size] - 1
    r = np.empty(x.size, dtype=float)
    r[order] = (0.5 * (starts + ends) + 1.0)[np.cumsum(new) - 1]
    return r


def spearman(x: Sequence[float], y: Sequence[float]) -> dict[str, Any]:
    """Spearman's rho of two samples (pairs with a NaN left out), its p-value and the pair count;
    rho None when either side is constant."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    keep = np.isfinite(x) & np.isfinite(y)
    n = int(keep.sum())
    out: dict[str, Any] = {"rho": None, "p_value": None, "samples": n}
    if n < 2:
        return out
    rx, ry = ranks(x[keep]), ranks(y[keep])
    rx, ry = rx - rx.mean(), ry - ry.mean()
    norm = math.sqrt(float(rx @ rx) * float(ry @ ry))
    if norm == 0:
        return out
    rho = float(np.clip(rx @ ry / norm, -1.0, 1.0))
    out["rho"] = rho
    if n > 2:
        from scipy.stats import t as student_t
        dof = n - 2
        out["p_value"] = 0.0 if abs(rho) == 1 else float(
            2 * student_t.sf(abs(rho) * math.sqrt(dof / ((1 - rho) * (1 + rho))), dof))
    return out


def sensitivity(figures: Sequence[str], flat: Sequence[Mapping[str, float] | None], paths: Sequence[str],
                values: Sequence[Mapping[str, float]]) -> dict[str, list[dict[str, Any]]]:
    """For each figure that varies over the samples that ran: one entry per spread path (path, rho,
    p_value, samples), strongest |rho| first."""
    ran = [i for i, f in enumerate(flat) if f is not None]
    out: dict[str, list[dict[str, Any]]] = {}
    for figure in figures:
        y = np.array([flat[i].get(figure, math.nan) for i in ran], dtype=float)     # type: ignore[union-attr]
        finite = y[np.isfinite(y)]
        if finite.size < 2 or np.all(finite == finite[0]):
            continue
        rows = [{"path": p, **spearman([values[i][p] for i in ran], y)} for p in paths]
        rows.sort(key=lambda r: -1.0 if r["rho"] is None else -abs(r["rho"]))
        out[figure] = rows
    return out
