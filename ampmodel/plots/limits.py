"""The lines a sweep or tolerance-run figure draws across its values: the damage fluence and the
B-integral limit of the config's [limits] table, and the bounds of a tolerance run's ``limits``.

A line is in the figure's own unit (as summary.json holds it); the figure scales it as it scales its
data. Which figure gets which line:

- ``peak_fluence_J_cm2`` (the layout's highest fluence): the lowest damage fluence of any step
  (scaled to the pulse duration, an estimate) and the warning level, ``damage_fraction`` of it;
  ``steps.N.peak_fluence_J_cm2``: that step's own;
- ``worst_damage_margin`` and a step's ``damage_margin`` (fluence over damage fluence): 1 and
  ``damage_fraction``;
- ``b_integral_rad``: the layout's limit ``b_integral_total_rad``; a step's: ``b_integral_step_rad``;
  ``b_integral_margin`` (B over its limit): 1;
- any figure named by a bound ``FIGURE<=VALUE`` or ``FIGURE>=VALUE``: the bound.

The limits are common practice, and damage fluences are estimates (README: Limits).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from ampmodel.output.summary import is_number

LIMIT_COLOUR = "#d62728"
WARNING_COLOUR = "#e08a00"
BOUND_COLOUR = "#2a7d3a"


@dataclass(frozen=True)
class LimitLine:
    """A value to mark on a figure's axis (in the figure's own unit), its legend text and colour."""

    value: float
    label: str
    colour: str = LIMIT_COLOUR
    style: str = "--"


def _leaf(key: str) -> tuple[str, int | None]:
    """(last key, step index or None) of a figure path: "steps.3.peak_fluence_J_cm2" -> (…, 3)."""
    parts = key.split(".")
    step = int(parts[1]) if len(parts) >= 3 and parts[0] == "steps" and parts[1].isdigit() else None
    return parts[-1], step


def _steps(summary: Mapping[str, Any] | None) -> list[Mapping[str, Any]]:
    """The steps of a summary, a repeat's inner steps included."""
    out: list[Mapping[str, Any]] = []
    for e in (summary or {}).get("steps") or []:
        if isinstance(e, Mapping):
            out.append(e)
            out += [s for s in e.get("steps") or [] if isinstance(s, Mapping)]
    return out


def _damage_fluence(summaries: Sequence[Mapping[str, Any] | None], step: int | None) -> float | None:
    """The lowest damage fluence (J/cm²) of the points: of step ``step``, or of any step."""
    found = []
    for s in summaries:
        entries = (s or {}).get("steps") or []
        chosen = [entries[step]] if step is not None and step < len(entries) else \
            [] if step is not None else _steps(s)
        found += [e.get("damage_fluence_J_cm2") for e in chosen if isinstance(e, Mapping)]
    values = [float(v) for v in found if isinstance(v, (int, float)) and math.isfinite(v) and v > 0]
    return min(values) if values else None


def limit_lines(key: str, summaries: Sequence[Mapping[str, Any] | None], limits: Any = None,
                bounds: Sequence[Any] = ()) -> list[LimitLine]:
    """The lines of figure ``key`` (see the module docstring).

    Parameters
    ----------
    key : a summary figure or figure path
    summaries : the points' summary.json dicts (None for a point that failed)
    limits : the config's Limits (``description.Limits``), or None for no [limits] lines
    bounds : a tolerance run's bounds (objects with ``figure``, ``op``, ``value``)
    """
    leaf, step = _leaf(key)
    lines: list[LimitLine] = []
    if limits is not None:
        frac = float(limits.damage_fraction)
        if leaf == "peak_fluence_J_cm2":
            damage = _damage_fluence(summaries, step)
            if damage is not None:
                where = f"step {step}: " if step is not None else ""
                lines += [LimitLine(damage, f"{where}damage fluence (estimate)"),
                          LimitLine(frac * damage, f"warning level ({frac:g} × damage)", WARNING_COLOUR, ":")]
        elif leaf in ("worst_damage_margin", "damage_margin"):
            lines += [LimitLine(1.0, "at the damage fluence (estimate)"),
                      LimitLine(frac, f"warning level ({frac:g} × damage)", WARNING_COLOUR, ":")]
        elif leaf == "b_integral_rad":
            limit = limits.b_integral_step_rad if step is not None else limits.b_integral_total_rad
            lines.append(LimitLine(float(limit), "B-integral limit (common practice)"))
        elif leaf == "b_integral_margin":
            lines.append(LimitLine(1.0, "at the B-integral limit (common practice)"))
    for b in bounds:
        if getattr(b, "figure", None) == key:
            lines.append(LimitLine(float(b.value), "bound " + {"<=": "≤", ">=": "≥"}.get(b.op, b.op), BOUND_COLOUR, "-."))
    return lines


# Summary figures that restate an input of the run (the seed inside the grid, the pump power, the
# pulse duration): not drawn against a swept value they merely follow (_echoes).
INPUT_ECHOES = ("input_energy_J", "input_power_W", "pump_power_W", "pulse_duration_ns", "time_slice_ns",
                "repetition_rate_Hz")


def _echoes(key: str, y: np.ndarray, values: list[dict], paths: Sequence[str]) -> bool:
    """Whether figure ``key`` is an input restated: one of INPUT_ECHOES in a fixed ratio to a swept value
    (to 1e-9) over every point, so its figure would be that value drawn against itself."""
    if key not in INPUT_ECHOES:
        return False
    for p in paths:
        v = np.array([float(x[p]) if is_number(x[p]) else np.nan for x in values])
        ok = np.isfinite(v) & np.isfinite(y) & (v != 0)
        if np.unique(v[ok]).size >= 2:
            ratio = y[ok] / v[ok]
            if np.all(np.abs(ratio - ratio[0]) <= 1e-9 * abs(ratio[0])):
                return True
    return False
