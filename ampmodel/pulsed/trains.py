"""Pulse trains: an amplifier seeded at ``seed.repetition_rate_Hz``, with the gain recovering between pulses.

Each pulse runs the whole layout (with its delays and repeats) from a fresh seed; for the rest of the
period T = 1/f every medium relaxes by the exact N2(t) of dN2/dt = R − N2/tau (``clocks.py``): a
continuous pump is on all the time, a pulsed pump during its pump pulse, which ends when the next
seed pulse arrives. The state of the train is the upper-state density N2 of every voxel before a
pulse; one pulse and the recovery after it map it to the state before the next pulse, x -> Phi(x).
The train settles to the fixed point x* = Phi(x*), the periodic steady state.

How the fixed point is found (``train.method``):

1. **Direct** ("auto", where it applies; ``train_direct.py``): without diffraction every pixel is independent, and for a
   single medium without passive loss inside it (and no bleaching cap acting) the energies a pixel's
   pulse takes out depend only on its column ∫N2 dz: Frantz–Nodvik maps compose over the z-slices
   and time slices, and the relaxation is linear, so the column obeys the same exact solution with
   the column pump rate ∫R dz. Phi is then a scalar, increasing map per pixel with slope below 1,
   and its fixed point is found per pixel by bisection (vectorised over the pixels, to round-off).
   A layout with a repeat that stops at the peak couples the pixels and is not solved this way.
2. **Accelerated iteration** (always, from the direct solution when there is one): the real pulse
   map (every z-slice and time slice) is iterated with Anderson acceleration (depth 6; Walker & Ni,
   SIAM J. Numer. Anal. 49, 1715 (2011)) until max|Phi(x) − x| <= 1e-10·max|x| (or 1e-3 of the
   tolerance, when that is tighter). From the direct start this settles where along z the gain sits.

Then the train as it starts is run pulse after pulse from the state pumped long before the first
pulse (no seed: the steady state of the pump alone), until the output energy is within
``train.tolerance`` of the steady state: the number of pulses to steady state, the energy of each
pulse and the stored energy before each. When ``train.max_pulses`` pulses do not reach it, the number
is estimated from the contraction per pulse of the last ones, and a warning says so.

Energy balance over a steady period (at the signal photon energy): pumped = decayed + extracted by
the beam + change of the upper-state energy (zero at the fixed point, to the tolerance).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ampmodel.beam.state import BeamState, StepOutcome
from ampmodel.description import Config, passed_media
from ampmodel.kernels.fixed_point import anderson
from ampmodel.media import gain_maps
from ampmodel.output.result import StepRecord
from ampmodel.pulsed.clocks import MediumClock, Timeline, unseeded_n2
from ampmodel.pulsed.passes import MediumState
from ampmodel.pulsed.train_direct import direct_columns, direct_not_applicable

ANDERSON_DEPTH = 6
FIXED_POINT_TOLERANCE = 1e-10
MAX_FIXED_POINT_PULSES = 300
STAGNATION_PULSES = 40


@dataclass
class TrainRun:
    """The steady-state pulse of a train and what the train did.

    ln_gain_before, ln_gain_after : per medium, ln G maps before the steady pulse and after its layout
    pumped_J, decayed_J : per medium, pump and decay during the steady pulse's layout (J)
    summary : the ``train`` entry of summary.json; datasets : name -> (array, units) for result.h5
    checks : the grid checks of the steady pulse (field path)
    """

    beam: BeamState
    outcomes: list[StepOutcome]
    records: list[StepRecord]
    ln_gain_before: dict[str, np.ndarray]
    pumped_J: dict[str, float]
    decayed_J: dict[str, float]
    summary: dict
    warnings: list[str] = field(default_factory=list)
    datasets: dict[str, tuple[np.ndarray, str]] = field(default_factory=dict)
    checks: list = field(default_factory=list)


# ----------------------------------------------------------------------------------------------
# The state vector: N2 of every voxel inside the apertures, each medium scaled to order one
# ----------------------------------------------------------------------------------------------

class _State:
    def __init__(self, clocks: dict[str, MediumClock], states: dict[str, MediumState], scales: dict[str, float]):
        self.clocks, self.states, self.scales = clocks, states, scales
        self.sizes = {n: c.n2(states[n].ln_gain).shape for n, c in clocks.items()}

    def get(self) -> np.ndarray:
        return np.concatenate([(c.n2(self.states[n].ln_gain) / self.scales[n]).ravel()
                               for n, c in self.clocks.items()])

    def set(self, u: np.ndarray) -> None:
        start = 0
        for n, c in self.clocks.items():
            shape = self.sizes[n]
            size = int(np.prod(shape))
            c.set_n2(self.states[n].ln_gain, u[start:start + size].reshape(shape) * self.scales[n])
            start += size

    def split(self, u: np.ndarray) -> dict[str, np.ndarray]:
        """Per medium, N2 (ions/m³) of shape (Nz, n)."""
        out, start = {}, 0
        for n in self.clocks:
            size = int(np.prod(self.sizes[n]))
            out[n] = u[start:start + size].reshape(self.sizes[n]) * self.scales[n]
            start += size
        return out

    def join(self, n2: dict[str, np.ndarray]) -> np.ndarray:
        return np.concatenate([(n2[n] / self.scales[n]).ravel() for n in self.clocks])


def _recover(clocks: dict[str, MediumClock], states: dict[str, MediumState], rest_s: float) -> None:
    """The rest of the period after a pulse's layout: continuous pumps on throughout, a pulsed pump
    on during its pump pulse at the end (it ends when the next seed pulse arrives)."""
    for n, c in clocks.items():
        ln_gain = states[n].ln_gain
        if c.rate_per_m3_s is None or c.continuous:
            c.evolve(ln_gain, rest_s, pump_on=True)
        else:
            c.evolve(ln_gain, rest_s - c.pump_duration_s, pump_on=False)
            c.evolve(ln_gain, c.pump_duration_s, pump_on=True)


# ----------------------------------------------------------------------------------------------
# The train
# ----------------------------------------------------------------------------------------------

def _stored_J(states: dict[str, MediumState], clocks: dict[str, MediumClock]) -> float:
    """Extractable stored energy of all media (down to transparency), J."""
    total = 0.0
    for n, c in clocks.items():
        fsat = c.photon_energy_J / c.sum_cross_section_m2
        total += gain_maps.stored_energy_J(states[n].ln_gain / c.slice_length_m, fsat, c.voxel_volume_m3)
    return total


class _Pulses:
    """One pulse of the train as a map of the media's state: the upper-state densities before a pulse
    (the state vector ``u``) to those before the next, with what the pulse did."""

    def __init__(self, new_beam: Callable[[], BeamState], run_layout: Callable, states: dict[str, MediumState],
                 timeline: Timeline, state: _State, period_s: float, progress: Callable[[], None] | None):
        self.new_beam, self.run_layout, self.states, self.timeline = new_beam, run_layout, states, timeline
        self.state, self.period_s, self.progress = state, period_s, progress

    def __call__(self, u: np.ndarray, record: bool = False):
        """(u after the period, the beam, outcomes, records, the gain maps after the layout (record),
        each medium's (pumped, decayed) energy over the layout, grid checks)."""
        clocks = self.timeline.clocks
        self.state.set(u)
        self.timeline.reset()
        beam = self.new_beam()
        outcomes, records, checks = self.run_layout(beam, record=record)
        after = {n: s.ln_gain.copy() for n, s in self.states.items()} if record else None
        layout = {n: (c.pumped_J, c.decayed_J) for n, c in clocks.items()}
        _recover(clocks, self.states, self.period_s - self.timeline.elapsed_s)
        if self.progress is not None:
            self.progress()
        return self.state.get(), beam, outcomes, records, after, layout, checks


def run_train(config: Config, new_beam: Callable[[], BeamState], run_layout: Callable,
              states: dict[str, MediumState], timeline: Timeline, seed_fluence: np.ndarray,
              progress: Callable[[], None] | None = None) -> TrainRun:
    """Find the periodic steady state of a pulse train, run the train from its start, and return the
    steady pulse (see the module docstring).

    ``new_beam()`` gives a fresh seed pulse; ``run_layout(beam, record=...)`` runs the layout on it
    and returns (outcomes, records, grid checks), as ``pulsed.run`` does for a single pulse.
    """
    clocks = timeline.clocks
    rate_Hz = config.seed.repetition_rate_Hz
    period = 1.0 / rate_Hz
    tolerance = config.train.tolerance
    probe = new_beam()
    x_m, y_m = probe.x_m, probe.y_m
    del probe
    unseeded = {n: (unseeded_n2(c, period) if c.rate_per_m3_s is not None else c.n2(states[n].ln_gain))
                for n, c in clocks.items()}
    scales = {n: max(float(np.max(np.abs(v))) if v.size else 0.0, 1.0) for n, v in unseeded.items()}
    state = _State(clocks, states, scales)
    pulse = _Pulses(new_beam, run_layout, states, timeline, state, period, progress)
    u0 = state.join(unseeded)
    upper = state.join({n: np.full(state.sizes[n], c.n2_max_per_m3 if c.n2_max_per_m3 is not None else np.inf)
                        for n, c in clocks.items()})
    upper = upper if np.all(np.isfinite(upper)) else None
    warnings: list[str] = []

    # 1. the fixed point: direct per pixel where it applies, then accelerated iteration of the real map
    start, reason, direct_energy = _fixed_point_start(config, clocks, state, unseeded, u0, seed_fluence, x_m, y_m)
    fp_tolerance = max(min(FIXED_POINT_TOLERANCE, 1e-3 * tolerance), 1e-13)
    u_star, evaluations, residual = anderson(lambda u: pulse(u)[0], start, fp_tolerance, MAX_FIXED_POINT_PULSES, upper,
                                             depth=ANDERSON_DEPTH, stagnation=STAGNATION_PULSES)
    if residual > fp_tolerance:
        warnings.append(f"train: the periodic steady state was not reached to {fp_tolerance:.0e} in "
                        f"{evaluations} pulse evaluations (residual {residual:.1e}); the figures are those of "
                        f"the last estimate")

    # 2. the steady pulse, recorded
    steady = _steady_pulse(pulse, u_star, seed_fluence)

    # 3. the train from its start: pulse after pulse until the output is within the tolerance
    e_out = steady.pulse_energy_J
    energies, stored, settled = _from_the_start(pulse, u0, e_out, tolerance, config.train.max_pulses)
    settled, estimated, cycle = _settling(energies, e_out, tolerance, settled, rate_Hz, warnings)
    for n, s in states.items():              # the pulse() calls above changed the media: restore
        np.copyto(s.ln_gain, steady.after[n])

    summary = {
        "repetition_rate_Hz": rate_Hz,
        "period_s": period,
        "pulse_energy_J": e_out,
        "average_power_W": e_out * rate_Hz,
        "input_average_power_W": steady.input_energy_J * rate_Hz,
        "stored_energy_before_pulse_J": steady.stored_before_J,
        "pulses_to_steady_state": settled,
        "pulses_to_steady_state_estimated": estimated,
        "cycle_pulse_energies_J": cycle,
        "tolerance": tolerance,
        "pulse_energies_J": energies,
        "stored_energy_before_each_pulse_J": stored,
        "method": ("direct per-pixel solution, then accelerated iteration" if reason is None
                   else "accelerated iteration"),
        "direct_solution": "applied" if reason is None else f"not applicable: {reason}",
        "direct_pulse_energy_J": direct_energy,
        "fixed_point_pulse_evaluations": evaluations,
        "fixed_point_residual": residual,
        "pump_stored_power_W": steady.pumped_J * rate_Hz,
        "decay_power_W": steady.decayed_J * rate_Hz,
        "extracted_power_W": float(steady.extracted_J * rate_Hz),
        "energy_balance_error": float(steady.balance),
        "layout_time_s": steady.layout_time_s,
    }
    datasets = {"pulse_energy": (np.asarray(energies), "J"),
                "stored_energy_before_pulse": (np.asarray(stored), "J")}
    layout = steady.layout
    return TrainRun(beam=steady.beam, outcomes=steady.outcomes, records=steady.records,
                    ln_gain_before=steady.before, pumped_J={n: v[0] for n, v in layout.items()},
                    decayed_J={n: v[1] for n, v in layout.items()}, summary=summary, warnings=warnings,
                    datasets=datasets, checks=steady.checks)


def _fixed_point_start(config: Config, clocks: dict[str, MediumClock], state: _State,
                       unseeded: dict[str, np.ndarray], u0: np.ndarray, seed_fluence: np.ndarray,
                       x_m: np.ndarray, y_m: np.ndarray) -> tuple[np.ndarray, str | None, float | None]:
    """Where the fixed-point iteration starts: the direct per-pixel solution shaped along z like the
    unseeded state where it applies, else the unseeded state; with the reason it does not apply
    (None when it does) and the direct solution's pulse energy (J)."""
    reason = direct_not_applicable(config, clocks)
    if reason is not None:
        return u0, reason, None
    (name,) = passed_media(config.steps)
    c = clocks[name]
    try:
        column, direct_energy = direct_columns(config, c, seed_fluence, x_m, y_m)
    except ArithmeticError as exc:
        return u0, str(exc), None
    n2 = dict(unseeded)
    profile = unseeded[name]
    col0 = profile.sum(axis=0) * c.slice_length_m
    n2[name] = np.where(col0 > 0, profile * (column / np.where(col0 > 0, col0, 1.0)),
                        column / (c.slice_length_m * profile.shape[0]))
    return state.join(n2), None, direct_energy


@dataclass
class _SteadyPulse:
    """The steady pulse, recorded: its beam, outcomes, records and grid checks; the gain maps (ln G)
    before and after its layout; each medium's (pumped, decayed) energy over the layout (J); the
    energies in and out (J), the stored energy before it (J), the energy pumped, decayed and extracted
    over the period (J), the train's energy balance per period and the layout's time (s)."""

    beam: BeamState
    outcomes: list
    records: list
    checks: list
    before: dict[str, np.ndarray]
    after: dict[str, np.ndarray]
    layout: dict[str, tuple[float, float]]
    pulse_energy_J: float
    input_energy_J: float
    stored_before_J: float
    pumped_J: float
    decayed_J: float
    extracted_J: float
    balance: float
    layout_time_s: float


def _steady_pulse(pulse: _Pulses, u_star: np.ndarray, seed_fluence: np.ndarray) -> _SteadyPulse:
    """The steady pulse, recorded (:class:`_SteadyPulse`). Leaves the media as after its layout (the
    "final" gain)."""
    state, states, clocks = pulse.state, pulse.states, pulse.timeline.clocks
    state.set(u_star)
    before = {n: s.ln_gain.copy() for n, s in states.items()}
    stored_before = _stored_J(states, clocks)
    u_next, beam, outcomes, records, after, layout, checks = pulse(u_star, record=True)
    pumped = sum(c.pumped_J for c in clocks.values())
    decayed = sum(c.decayed_J for c in clocks.values())
    extracted = sum(o.extracted_J for o in outcomes)
    n2_next, n2_star = state.split(u_next), state.split(u_star)
    change = sum(float(np.sum(n2_next[n] - n2_star[n])) * c.photon_energy_J * c.voxel_volume_m3
                 for n, c in clocks.items())
    balance = (pumped - decayed - extracted - change) / pumped if pumped > 0 else 0.0
    layout_time_s = pulse.timeline.elapsed_s
    state.set(u_star)                        # leave the media as before the steady pulse ...
    for n, s in states.items():              # ... and then as after its layout (the "final" gain)
        np.copyto(s.ln_gain, after[n])
    return _SteadyPulse(beam, outcomes, records, checks, before, after, layout, beam.energy_J(),
                        float(seed_fluence.sum() * beam.pixel_area_m2), stored_before, pumped, decayed,
                        extracted, balance, layout_time_s)


def _from_the_start(pulse: _Pulses, u0: np.ndarray, e_out: float, tolerance: float,
                    max_pulses: int) -> tuple[list[float], list[float], int | None]:
    """The train from its start, pulse after pulse until the output is within ``tolerance`` of the
    steady ``e_out`` (J): each pulse's energy, the stored energy before each, and the pulse that
    settled (None: not within ``max_pulses``)."""
    energies, stored = [], []
    u = u0
    for k in range(1, max_pulses + 1):
        pulse.state.set(u)
        stored.append(_stored_J(pulse.states, pulse.timeline.clocks))
        u, b, *_ = pulse(u)
        energies.append(b.energy_J())
        if abs(energies[-1] - e_out) <= tolerance * e_out:
            return energies, stored, k
    return energies, stored, None


def _settling(energies: list[float], e_out: float, tolerance: float, settled: int | None, rate_Hz: float,
              warnings: list[str]) -> tuple[int | None, bool, list[float]]:
    """(pulses to the steady state, whether estimated, the repeating cycle of energies) of a train that
    settled at pulse ``settled`` or, if None, the estimate or the cycle, with a warning for each case."""
    if settled is not None:
        return settled, False, []
    settled = _estimate_settling(energies, e_out, tolerance)
    cycle = _cycle(energies, tolerance)
    if settled is not None:
        warnings.append(f"train: the output is not within {tolerance:g} of the steady state after "
                        f"{len(energies)} pulses (train.max_pulses); about {settled} pulses are needed, "
                        f"estimated from the contraction per pulse")
        return settled, True, cycle
    if cycle:
        warnings.append(f"train: the pulses do not settle to one repeating pulse: after {len(energies)} pulses "
                        f"they repeat every {len(cycle)} pulses ({', '.join(f'{e:.4g}' for e in cycle)} J); "
                        f"the single-pulse steady state reported is unstable or absent (a pulse-to-pulse "
                        f"bifurcation), and the "
                        f"average power of the cycle is {sum(cycle) / len(cycle) * rate_Hz:.4g} W")
    else:
        warnings.append(f"train: the pulses do not settle within {len(energies)} pulses (train.max_pulses) "
                        f"and do not approach the steady state steadily (the last ones spread over "
                        f"{min(energies[-10:]):.4g} to {max(energies[-10:]):.4g} J): the steady state "
                        f"reported may be unstable; raise train.max_pulses to see more of the train")
    return None, False, cycle


def _estimate_settling(energies: list[float], steady: float, tolerance: float) -> int | None:
    """Pulses until |E_k − E*| <= tolerance·E*, extrapolated from the geometric decay of the last
    pulses' distance to the steady state; None when they do not approach it steadily."""
    d = np.abs(np.asarray(energies[-10:], dtype=float) - steady)
    if d.size < 4 or np.any(d <= 0.0):
        return None
    k = np.arange(d.size)
    slope, _ = np.polyfit(k, np.log(d), 1)
    upper = np.maximum.accumulate(d[::-1])[::-1]          # each pulse's largest later distance
    if slope >= 0.0 or d[-1] > 0.5 * d[0] or np.any(upper[1:] > 1.5 * d[:-1]):
        return None
    return len(energies) + max(1, math.ceil(math.log(tolerance * steady / d[-1]) / slope))


def _cycle(energies: list[float], tolerance: float, longest: int = 8) -> list[float]:
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
