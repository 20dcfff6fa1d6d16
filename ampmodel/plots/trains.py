"""Figures of time in a run: the energy round trip by round trip of a repeat step, and a pulse train
from its start to its periodic steady state (drawn like the other figures, with the helpers of ``common.py``)."""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from matplotlib.ticker import MaxNLocator

from ampmodel.plots.common import (
    ENERGY_UNITS,
    LOSS_COLOUR,
    OUTPUT_COLOUR,
    SEED_COLOUR,
    finite_max,
    new_figure,
    save_png,
    title_suffix,
    unit_prefix,
)
from ampmodel.plots.placement import TOP_AXIS_PT, legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def plot_round_trips(result: Result, entry: dict, path: Path) -> Path:
    """Energy after each round trip of a repeat step (log scale), the dump round trip marked, and the
    gain of each round trip.

    Parameters
    ----------
    result : the run (for the title)
    entry : the repeat's entry in ``result.summary["steps"]`` (energies in J, times in ns)
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    energies = np.asarray(entry.get("energy_per_round_trip_J", []), dtype=float)
    n = energies.size
    k = np.arange(1, n + 1)
    dump = int(entry.get("round_trip_count", n))
    seed = float(entry.get("energy_in_J", 0.0))
    rt_ns = float(entry.get("round_trip_ns", 0.0))
    factor, unit = unit_prefix(max(finite_max(energies), seed), ENERGY_UNITS)
    fig = new_figure(8.0, 7.0)
    ax, ax_g = fig.subplots(2, 1, sharex=True, height_ratios=[1.4, 1.0])
    kept = k <= dump
    positive = energies > 0
    ax.plot(np.concatenate(([0], k)), np.concatenate(([seed], energies)) / factor, color="0.6", linewidth=1.0)
    ax.scatter([0], [seed / factor], color=SEED_COLOUR, s=30, zorder=3, label="seed (injected)")
    ax.scatter(k[kept & positive], energies[kept & positive] / factor, color=OUTPUT_COLOUR, s=22, zorder=3,
               label="after the round trip")
    if np.any(~kept):
        ax.scatter(k[~kept], energies[~kept] / factor, facecolor="white", edgecolor=OUTPUT_COLOUR, s=26,
                   zorder=3, label="run and discarded (the energy fell)")
    if 1 <= dump <= n:
        e_dump = energies[dump - 1]
        ax.axvline(dump, color="0.3", linestyle=":", linewidth=1.0)
        ax.annotate(f"dump after round trip {dump}\n{e_dump / factor:.3g} {unit}, "
                    f"build-up {dump * rt_ns:.4g} ns", (dump, e_dump / factor), textcoords="offset points",
                    xytext=(-8, -28), ha="right", fontsize="small")
    values = np.concatenate(([seed], energies[positive]))
    if values.size >= 2 and values[values > 0].size and values.max() / values[values > 0].min() > 30:
        ax.set_yscale("log")
    else:
        ax.set_ylim(bottom=0)
    ax.set_ylabel(f"energy ({unit})")
    rule = "until the peak" if entry.get("until") == "peak" else f"count = {entry.get('count')}"
    ax.grid(True, which="both", alpha=0.3)
    if rt_ns > 0:
        top = ax.secondary_xaxis("top", functions=(lambda r: r * rt_ns, lambda t: t / rt_ns))
        top.set_xlabel("time since injection (ns)")
    legend_above(ax, f"Energy after each round trip of step {entry.get('index')} (repeat, {rule}; "
                 f"round trip {rt_ns:.4g} ns)", lift_pt=TOP_AXIS_PT if rt_ns > 0 else 0.0)
    before = np.concatenate(([seed], energies[:-1]))
    gains = np.full(n, np.nan)
    np.divide(energies, before, out=gains, where=before > 0)
    ax_g.bar(k, gains, width=0.7, color=[OUTPUT_COLOUR if g >= 1 else LOSS_COLOUR for g in np.nan_to_num(gains)])
    ax_g.axhline(1.0, color="0.3", linestyle=":", linewidth=1.0)
    ax_g.set_ylabel("round-trip gain (out / in)")
    ax_g.set_xlabel("round trip")
    ax_g.set_ylim(bottom=0, top=max(1.2, finite_max(gains) * 1.1))
    ax_g.grid(True, axis="y", alpha=0.3)
    ax_g.set_xlim(-0.6, n + 0.6)
    ax_g.xaxis.set_major_locator(MaxNLocator(integer=True))
    fig.suptitle("Build-up of the pulse, round trip by round trip" + title_suffix(result))
    return save_png(fig, path)


def plot_train(result: Result, path: Path) -> Path:
    """A pulse train from its start: the energy of each pulse and the stored energy before it, with
    the periodic steady state as dashed lines: one pulse, or each pulse of the cycle the train settles
    to (then the unstable single-pulse steady state dotted).

    Parameters
    ----------
    result : the run; ``result.summary["train"]`` holds the figures (J, Hz, W)
    path : PNG file to write

    Returns
    -------
    Path : ``path``
    """
    train = (result.summary or {}).get("train", {})
    energies = np.asarray(train.get("pulse_energies_J", []), dtype=float)
    stored = np.asarray(train.get("stored_energy_before_each_pulse_J", []), dtype=float)
    k = np.arange(1, energies.size + 1)
    cycle = [float(e) for e in train.get("cycle_pulse_energies_J") or []]
    steady_e = cycle or [float(train.get("pulse_energy_J", np.nan))]
    steady_s = [float(e) for e in train.get("cycle_stored_energy_before_pulse_J") or []] \
        or [float(train.get("stored_energy_before_pulse_J", np.nan))]
    fig = new_figure(8.0, 7.0)
    ax_e, ax_s = fig.subplots(2, 1, sharex=True)
    ef, eu = unit_prefix(max(finite_max(energies), finite_max(np.asarray(steady_e))), ENERGY_UNITS)
    kw = dict(marker="o", markersize=4) if k.size <= 60 else {}
    ax_e.plot(k, energies / ef, color=OUTPUT_COLOUR, label="output pulse energy", **kw)
    average = f"{train.get('average_power_W', 0):.3g} W average"
    if len(cycle) > 1:
        _cycle_lines(ax_e, steady_e, ef, eu, f"cycle of {len(cycle)} pulses ({average}):")
        single = train.get("fixed_point_pulse_energy_J")
        if single is not None:
            ax_e.axhline(single / ef, color="0.6", linestyle=":", linewidth=1.0,
                         label=f"single-pulse steady state {single / ef:.4g} {eu} (unstable)")
    else:
        ax_e.axhline(steady_e[0] / ef, color="0.3", linestyle="--", linewidth=1.0,
                     label=f"steady state {steady_e[0] / ef:.4g} {eu}, {average}")
    ax_e.set_ylabel(f"pulse energy ({eu})")
    ax_e.grid(True, alpha=0.3)
    legend_above(ax_e, f"Output pulse by pulse at {train.get('repetition_rate_Hz', 0):g} Hz: {_settling_text(train)}")
    sf, su = unit_prefix(max(finite_max(stored), finite_max(np.asarray(steady_s))), ENERGY_UNITS)
    ax_s.plot(k, stored / sf, color=SEED_COLOUR, label="stored energy before the pulse", **kw)
    if len(cycle) > 1:
        _cycle_lines(ax_s, steady_s, sf, su, "before each pulse of the cycle:")
    else:
        ax_s.axhline(steady_s[0] / sf, color="0.3", linestyle="--", linewidth=1.0,
                     label=f"steady state {steady_s[0] / sf:.4g} {su}")
    ax_s.set_ylabel(f"stored energy ({su})")
    ax_s.set_xlabel("pulse number from the start of the train")
    ax_s.grid(True, alpha=0.3)
    legend_above(ax_s, "Extractable stored energy before each pulse (pumped without a seed before pulse 1)")
    for ax in (ax_e, ax_s):
        lo, hi = ax.get_ylim()
        ax.set_ylim(min(lo, 0.0) if lo <= 0 else lo, hi)
    ax_s.xaxis.set_major_locator(MaxNLocator(integer=True))
    if k.size:
        ax_s.set_xlim(0.5, k.size + 0.5)
    goal = f"a cycle of {len(cycle)} pulses" if len(cycle) > 1 else "the periodic steady state"
    fig.suptitle(f"Pulse train from its start to {goal}" + title_suffix(result))
    return save_png(fig, path)


def _cycle_lines(ax, values: list[float], factor: float, unit: str, label: str) -> None:
    """One dashed line per pulse of a cycle (in the order they occur, the largest first), labelled once."""
    text = ", ".join(f"{v / factor:.4g}" for v in values)
    for i, v in enumerate(values):
        ax.axhline(v / factor, color="0.3", linestyle="--", linewidth=1.0,
                   label=f"{label} {text} {unit}" if i == 0 else None)


def _settling_text(train: dict) -> str:
    """How the train from its start reaches its steady state or cycle (for the title)."""
    settled = train.get("pulses_to_steady_state")
    est = " (estimated)" if train.get("pulses_to_steady_state_estimated") else ""
    plural = "s" if settled != 1 else ""
    if int(train.get("cycle_length", 1)) > 1:
        if settled is None:
            return f"a cycle of {train['cycle_length']} pulses, not approached steadily"
        return f"within {train.get('tolerance', 0):g} of a cycle of {train['cycle_length']} pulses after {settled} pulse{plural}{est}"
    if settled is not None:
        return f"within {train.get('tolerance', 0):g} of the steady state after {settled} pulse{plural}{est}"
    return "not settled to the steady state"
