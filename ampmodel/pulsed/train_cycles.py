"""How a pulse train settles: to one repeating pulse, or to a cycle of k pulses.

A train settles to its periodic steady state x* = Φ(x*) when that state is stable (``trains.py``).
It need not be: in a regenerative amplifier run near or above the inverse of the upper-state lifetime
a larger pulse leaves less gain for the next one, which comes out smaller and leaves more gain for the
one after, and the train settles to a cycle of k pulses (period doubling for k = 2). The cycle is a
periodic orbit: a fixed point of Φ^k (k pulses and their recoveries) that is not a fixed point of Φ.

1. The train from its start shows the cycle: its last 3k pulses repeat every k pulses
   (:func:`repeating_cycle`, 2 <= k <= 8).
2. The orbit itself is found with the same Anderson acceleration as x* (``kernels/fixed_point.py``),
   applied to Φ^k and started from the state before a pulse of the observed cycle, to the same
   tolerance (:func:`find_orbit`). Its k pulses are then run once: their energies, the state before
   each, and the energy balance over the whole cycle (k periods).
3. A true cycle has pulses that are not all one pulse: the orbit's shortest period within the tolerance
   (:func:`shortest_period`) is its length; 1 means the iteration found the single-pulse steady state
   after all, and the train is reported as settling to it.

The orbit is reported starting with its largest pulse, the one that stresses the optics most.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ampmodel.kernels.fixed_point import anderson
from ampmodel.notices import Notice, note, warning

LONGEST_CYCLE = 8


@dataclass
class PeriodFigures:
    """One period of the train from the state ``u`` before a pulse: the state before the next pulse,
    the output energy (J), the extractable stored energy before the pulse (J), the upper-state energy
    before and after the period, and the energy pumped into, decayed from and extracted from the upper
    state over the period (J, at the signal photon energy)."""

    u_next: np.ndarray
    energy_J: float
    stored_before_J: float
    upper_before_J: float
    upper_after_J: float
    pumped_J: float
    decayed_J: float
    extracted_J: float


@dataclass
class Orbit:
    """A cycle of ``length`` pulses, starting with its largest pulse.

    states : the state before each pulse of the cycle, in the order they occur
    energies_J, stored_before_J : each pulse's output energy and the stored energy before it (J)
    pumped_J, decayed_J, extracted_J, change_J : over the whole cycle (``length`` periods, J)
    start_pulse : the number of a pulse of the train from its start (1 = the first) in the phase of
        the cycle's first (largest) pulse
    evaluations, residual : Anderson's evaluations of Φ^k and its residual max|Φ^k(x) − x|/max|x|
    observed : the k of the cycle the train from its start showed
    """

    states: list[np.ndarray]
    energies_J: list[float]
    stored_before_J: list[float]
    pumped_J: float
    decayed_J: float
    extracted_J: float
    change_J: float
    start_pulse: int
    evaluations: int
    residual: float
    observed: int

    @property
    def length(self) -> int:
        return len(self.energies_J)

    @property
    def balance(self) -> float:
        """(pumped − decayed − extracted − change of the upper-state energy)/pumped over the cycle."""
        if self.pumped_J <= 0:
            return 0.0
        return (self.pumped_J - self.decayed_J - self.extracted_J - self.change_J) / self.pumped_J

    def phase(self, pulse: int) -> int:
        """The index in the cycle of pulse number ``pulse`` of the train from its start."""
        return (pulse - self.start_pulse) % self.length


def find_orbit(phi: Callable[[np.ndarray], np.ndarray], period: Callable[[np.ndarray], PeriodFigures],
               u_start: np.ndarray, next_pulse: int, k: int, tolerance: float, fp_tolerance: float,
               upper: np.ndarray | None, depth: int, max_pulses: int, stagnation_pulses: int) -> Orbit:
    """The periodic orbit of ``k`` pulses near ``u_start``, the state before pulse ``next_pulse`` of the
    train from its start: the fixed point of Φ^k by Anderson acceleration (at most about ``max_pulses``
    pulses, ``stagnation_pulses`` without progress) to ``fp_tolerance``, its pulses run once, cut to
    its shortest period within ``tolerance`` and turned to start with its largest pulse.

    ``phi(u)`` is one pulse and its recovery (the state before the next pulse); ``period(u)`` the same
    with its figures (:class:`PeriodFigures`).
    """
    def phi_k(u: np.ndarray) -> np.ndarray:
        for _ in range(k):
            u = phi(u)
        return u

    x, evaluations, residual = anderson(phi_k, u_start, fp_tolerance, max(max_pulses // k, 10), upper, depth=depth,
                                        stagnation=max(stagnation_pulses // k, 5))
    figures, u = [], x
    for _ in range(k):
        figures.append(period(u))
        u = figures[-1].u_next
    d = shortest_period([f.energy_J for f in figures], tolerance)
    cycle = figures[:d]
    first = int(np.argmax([f.energy_J for f in cycle]))
    turned = cycle[first:] + cycle[:first]
    states = [x] + [f.u_next for f in cycle[:-1]]
    states = states[first:] + states[:first]
    return Orbit(states=states, energies_J=[f.energy_J for f in turned],
                 stored_before_J=[f.stored_before_J for f in turned],
                 pumped_J=sum(f.pumped_J for f in cycle), decayed_J=sum(f.decayed_J for f in cycle),
                 extracted_J=sum(f.extracted_J for f in cycle),
                 change_J=cycle[-1].upper_after_J - cycle[0].upper_before_J,
                 start_pulse=next_pulse + first, evaluations=evaluations, residual=residual, observed=k)


def shortest_period(energies: list[float], tolerance: float) -> int:
    """The shortest d dividing len(energies) with which the energies repeat, each within
    ``tolerance`` of the largest: 1 when they are all one pulse."""
    e = np.asarray(energies, dtype=float)
    k = e.size
    scale = float(np.abs(e).max()) if k else 0.0
    for d in range(1, k):
        if k % d == 0 and np.all(np.abs(e - np.roll(e, d)) <= tolerance * scale):
            return d
    return k


def repeating_cycle(energies: list[float], tolerance: float, longest: int = LONGEST_CYCLE) -> list[float]:
    """The last ``k`` pulse energies when the train repeats every k pulses (2 <= k <= ``longest``)
    over the last 3k pulses, to 10 times the tolerance; [] when it does not."""
    for k in range(2, longest + 1):
        if len(energies) < 3 * k:
            break
        tail = np.asarray(energies[-3 * k:], dtype=float)
        scale = float(np.abs(tail).max())
        if np.all(np.abs(tail[k:] - tail[:-k]) <= 10 * tolerance * scale) \
                and np.ptp(tail[-k:]) > 10 * tolerance * scale:
            return [float(e) for e in tail[-k:]]
    return []


# ----------------------------------------------------------------------------------------------
# Pulses to the steady state: to one pulse or to the cycle
# ----------------------------------------------------------------------------------------------

def estimate_settling(energies: list[float], steady: float, tolerance: float) -> int | None:
    """Pulses until |E_k − E*| <= tolerance·E*, extrapolated from the geometric decay of the last
    pulses' distance to the steady state; None when they do not approach it steadily."""
    d = np.abs(np.asarray(energies[-10:], dtype=float) - steady)
    return _extrapolate(d, len(energies), tolerance * steady, 1)


def _extrapolate(d: np.ndarray, done: int, threshold: float, block: int) -> int | None:
    """Pulses until the distance ``d`` (one value per block of ``block`` pulses, the last block ending
    at pulse ``done``) falls to ``threshold``, from its geometric decay; None when it does not decay
    steadily."""
    if d.size < 4 or np.any(d <= 0.0):
        return None
    k = np.arange(d.size)
    slope, _ = np.polyfit(k, np.log(d), 1)
    upper = np.maximum.accumulate(d[::-1])[::-1]          # each block's largest later distance
    if slope >= 0.0 or d[-1] > 0.5 * d[0] or np.any(upper[1:] > 1.5 * d[:-1]):
        return None
    return done + block * max(1, math.ceil(math.log(threshold / d[-1]) / slope))


def settling(energies: list[float], e_out: float, tolerance: float, settled: int | None, rate_Hz: float,
             warnings: list[str]) -> tuple[int | None, bool]:
    """(pulses to the steady state, whether estimated) of a train reported as settling to one pulse
    that settled at pulse ``settled`` or, if None, the estimate, with a warning when it is estimated or
    not found."""
    if settled is not None:
        return settled, False
    settled = estimate_settling(energies, e_out, tolerance)
    if settled is not None:
        warnings.append(note("train", f"train: the output is not within {tolerance:g} of the steady state after "
                        f"{len(energies)} pulses (train.max_pulses); about {settled} pulses are needed, "
                        f"estimated from the contraction per pulse"))
        return settled, True
    cycle = repeating_cycle(energies, tolerance)
    if cycle:
        warnings.append(warning("train", f"train: the last pulses repeat every {len(cycle)} pulses "
                        f"({', '.join(f'{e:.4g}' for e in cycle)} J), but the periodic orbit found from them is "
                        f"the single-pulse steady state (its pulses are equal to {tolerance:g}): that is "
                        f"reported, though the train had not reached it after {len(energies)} pulses "
                        f"(train.max_pulses); the average power of those pulses is "
                        f"{sum(cycle) / len(cycle) * rate_Hz:.4g} W"))
    else:
        warnings.append(warning("train", f"train: the pulses do not settle within {len(energies)} pulses (train.max_pulses) "
                        f"and do not approach the steady state steadily (the last ones spread over "
                        f"{min(energies[-10:]):.4g} to {max(energies[-10:]):.4g} J): the steady state "
                        f"reported may be unstable; raise train.max_pulses to see more of the train"))
    return None, False


def cycle_settling(energies: list[float], orbit: Orbit, tolerance: float) -> tuple[int | None, bool]:
    """(pulses to the cycle, whether estimated): the first pulse of the train from its start from which
    every pulse run is within ``tolerance`` (of the cycle's largest pulse) of the orbit's pulse of the
    same phase; when the last one is not, extrapolated from the geometric decay of the largest distance
    in each cycle (None when it does not decay steadily)."""
    e = np.asarray(energies, dtype=float)
    n = np.arange(1, e.size + 1)
    reference = np.asarray(orbit.energies_J)[[orbit.phase(int(p)) for p in n]]
    d = np.abs(e - reference)
    threshold = tolerance * max(orbit.energies_J)
    outside = np.flatnonzero(d > threshold)
    if outside.size == 0:
        return 1, False
    if outside[-1] < e.size - 1:
        return int(outside[-1]) + 2, False
    k = orbit.length
    blocks = d[e.size % k:].reshape(-1, k).max(axis=1)[-10:]
    return _extrapolate(blocks, e.size, threshold, k), True


def cycle_warning(orbit: Orbit, settled: int | None, estimated: bool, rate_Hz: float, tolerance: float,
                  e_single: float) -> Notice:
    """The one-line warning of a train that settles to a cycle."""
    energies = ", ".join(f"{e:.4g}" for e in orbit.energies_J)
    mean = sum(orbit.energies_J) / orbit.length
    if settled is None:
        reached = "the train from its start does not approach it steadily within train.max_pulses"
    else:
        reached = f"the train from its start is within {tolerance:g} of it after {'about ' if estimated else ''}{settled} pulses"
    return warning("train", f"train: the pulses alternate in a cycle of {orbit.length} ({energies} J; mean {mean:.4g} J, "
            f"{mean * rate_Hz:.4g} W average): the single-pulse steady state ({e_single:.4g} J) is unstable, so "
            f"the train is reported as the cycle and the pulse described in the summary (steps, damage, "
            f"B-integral) is its largest; {reached}")
