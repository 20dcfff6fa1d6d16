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

When the steady state is unstable the train from its start settles instead to a cycle of k pulses
(period doubling): the periodic orbit, the fixed point of Phi^k, is then found and reported
(``train_cycles.py``): the average power of the cycle, and its largest pulse as the pulse the summary
describes (steps, records, damage, gain maps), so that the optics are checked on the pulse that
stresses them most.

Energy balance over a steady period, or over the whole cycle (at the signal photon energy): pumped =
decayed + extracted by the beam + change of the upper-state energy (zero at the fixed point or over
the cycle, to the tolerance).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ampmodel.beam.state import BeamState, StepOutcome
from ampmodel.description import Config, passed_media
from ampmodel.kernels.fixed_point import anderson
from ampmodel.media import gain_maps
from ampmodel.notices import warning
from ampmodel.output.result import StepRecord
from ampmodel.pulsed import train_cycles
from ampmodel.pulsed.clocks import MediumClock, Timeline, unseeded_n2
from ampmodel.pulsed.passes import MediumState
from ampmodel.pulsed.train_direct import direct_columns, direct_not_applicable

ANDERSON_DEPTH = 6
FIXED_POINT_TOLERANCE = 1e-10
MAX_FIXED_POINT_PULSES = 300
STAGNATION_PULSES = 40


@dataclass
class TrainRun:
    """The steady-state pulse of a train (of a cycle: its largest pulse) and what the train did.

    ln_gain_before : per medium, the ln G map before that pulse
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
    heat: dict = field(default_factory=dict)   # per medium (absorbed pump J, decayed J, heat (Nz, n) J/m³) over the period


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

    def period(self, u: np.ndarray) -> train_cycles.PeriodFigures:
        """One pulse and its recovery from the state ``u``, with the energies of the period."""
        clocks = self.timeline.clocks
        self.state.set(u)
        stored = _stored_J(self.states, clocks)
        u_next, beam, outcomes, *_ = self(u)
        return train_cycles.PeriodFigures(
            u_next=u_next, energy_J=beam.energy_J(), stored_before_J=stored,
            upper_before_J=_upper_state_J(self.state, clocks, u), upper_after_J=_upper_state_J(self.state, clocks, u_next),
            pumped_J=sum(c.pumped_J for c in clocks.values()), decayed_J=sum(c.decayed_J for c in clocks.values()),
            extracted_J=sum(o.extracted_J for o in outcomes))


def _upper_state_J(state: _State, clocks: dict[str, MediumClock], u: np.ndarray) -> float:
    """The energy of the upper state of all media in the state ``u`` (J, at the signal photon energy)."""
    n2 = state.split(u)
    return sum(float(np.sum(n2[n])) * c.photon_energy_J * c.voxel_volume_m3 for n, c in clocks.items())


def run_train(config: Config, new_beam: Callable[[], BeamState], run_layout: Callable,
              states: dict[str, MediumState], timeline: Timeline, seed_fluence: np.ndarray,
              progress: Callable[[], None] | None = None) -> TrainRun:
    """Find the periodic steady state of a pulse train (one pulse, or a cycle of pulses), run the train
    from its start, and return the pulse the summary describes (see the module docstring).

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
        warnings.append(warning("train", f"train: the periodic steady state was not reached to {fp_tolerance:.0e} in "
                        f"{evaluations} pulse evaluations (residual {residual:.1e}); the figures are those of "
                        f"the last estimate"))

    # 2. the steady pulse, recorded
    steady = _steady_pulse(pulse, u_star, seed_fluence)

    # 3. the train from its start: pulse after pulse until the output is within the tolerance
    e_star = steady.pulse_energy_J
    energies, stored, settled, u_last = _from_the_start(pulse, u0, e_star, tolerance, config.train.max_pulses)

    # 4. a train that does not settle but repeats every k pulses: the periodic orbit, its largest pulse recorded
    orbit = _orbit(pulse, energies, settled, e_star, u_last, tolerance, fp_tolerance, upper, warnings)
    if orbit is None:
        settled, estimated = train_cycles.settling(energies, e_star, tolerance, settled, rate_Hz, warnings)
        cycle, recorded = _single_cycle(steady), steady
    else:
        recorded = _steady_pulse(pulse, orbit.states[0], seed_fluence)
        settled, estimated = train_cycles.cycle_settling(energies, orbit, tolerance)
        warnings.append(train_cycles.cycle_warning(orbit, settled, estimated, rate_Hz, tolerance, e_star))
        cycle = orbit
    for n, s in states.items():              # the pulse() calls above changed the media: restore
        np.copyto(s.ln_gain, recorded.after[n])

    summary = _summary(config, recorded, cycle, orbit, energies, stored, settled, estimated, reason,
                       direct_energy, e_star, evaluations, residual)
    datasets = {"pulse_energy": (np.asarray(energies), "J"),
                "stored_energy_before_pulse": (np.asarray(stored), "J")}
    if orbit is not None:
        datasets["cycle_pulse_energy"] = (np.asarray(orbit.energies_J), "J")
    layout = recorded.layout
    return TrainRun(beam=recorded.beam, outcomes=recorded.outcomes, records=recorded.records,
                    ln_gain_before=recorded.before, pumped_J={n: v[0] for n, v in layout.items()},
                    decayed_J={n: v[1] for n, v in layout.items()}, summary=summary, warnings=warnings,
                    datasets=datasets, checks=recorded.checks, heat=recorded.heat)


def _summary(config: Config, recorded: _SteadyPulse, cycle: train_cycles.Orbit, orbit: train_cycles.Orbit | None,
             energies: list[float], stored: list[float], settled: int | None, estimated: bool, reason: str | None,
             direct_energy: float | None, e_star: float, evaluations: int, residual: float) -> dict:
    """The ``train`` entry of summary.json: the cycle's figures (one pulse: ``cycle`` of length 1, ``orbit``
    None), the recorded pulse (the largest of the cycle), the train from its start and the solvers'."""
    rate_Hz = config.seed.repetition_rate_Hz
    k = cycle.length
    return {
        "repetition_rate_Hz": rate_Hz,
        "period_s": 1.0 / rate_Hz,
        "pulse_energy_J": recorded.pulse_energy_J,
        "pulse_energy_mean_J": sum(cycle.energies_J) / k,
        "average_power_W": sum(cycle.energies_J) / k * rate_Hz,
        "input_average_power_W": recorded.input_energy_J * rate_Hz,
        "stored_energy_before_pulse_J": recorded.stored_before_J,
        "cycle_length": cycle.length,
        "cycle_pulse_energies_J": cycle.energies_J if orbit is not None else [],
        "cycle_stored_energy_before_pulse_J": cycle.stored_before_J if orbit is not None else [],
        "pulses_to_steady_state": settled,
        "pulses_to_steady_state_estimated": estimated,
        "tolerance": config.train.tolerance,
        "pulse_energies_J": energies,
        "stored_energy_before_each_pulse_J": stored,
        "method": ("direct per-pixel solution, then accelerated iteration" if reason is None
                   else "accelerated iteration"),
        "direct_solution": "applied" if reason is None else f"not applicable: {reason}",
        "direct_pulse_energy_J": direct_energy,
        "fixed_point_pulse_energy_J": e_star,
        "fixed_point_pulse_evaluations": evaluations,
        "fixed_point_residual": residual,
        "cycle_fixed_point_evaluations": orbit.evaluations if orbit is not None else None,
        "cycle_fixed_point_residual": orbit.residual if orbit is not None else None,
        "pump_stored_power_W": cycle.pumped_J / k * rate_Hz,
        "decay_power_W": cycle.decayed_J / k * rate_Hz,
        "extracted_power_W": float(cycle.extracted_J / k * rate_Hz),
        "energy_balance_error": float(cycle.balance),
        "layout_time_s": recorded.layout_time_s,
    }


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
    over the period (J), the change of the upper-state energy over it (J) and the layout's time (s)."""

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
    change_J: float
    layout_time_s: float
    heat: dict = field(default_factory=dict)


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
    layout_time_s = pulse.timeline.elapsed_s
    heat = {n: (c.absorbed_pump_J, c.decayed_J, None if c.heat_J_m3 is None else c.heat_J_m3.copy())
            for n, c in clocks.items()}
    state.set(u_star)                        # leave the media as before the steady pulse ...
    for n, s in states.items():              # ... and then as after its layout (the "final" gain)
        np.copyto(s.ln_gain, after[n])
    return _SteadyPulse(beam, outcomes, records, checks, before, after, layout, beam.energy_J(),
                        float(seed_fluence.sum() * beam.pixel_area_m2), stored_before, pumped, decayed,
                        extracted, change, layout_time_s, heat)


def _from_the_start(pulse: _Pulses, u0: np.ndarray, e_out: float, tolerance: float,
                    max_pulses: int) -> tuple[list[float], list[float], int | None, np.ndarray]:
    """The train from its start, pulse after pulse until the output is within ``tolerance`` of the
    steady ``e_out`` (J): each pulse's energy, the stored energy before each, the pulse that settled
    (None: not within ``max_pulses``) and the state before the next pulse."""
    energies, stored = [], []
    u = u0
    for k in range(1, max_pulses + 1):
        pulse.state.set(u)
        stored.append(_stored_J(pulse.states, pulse.timeline.clocks))
        u, b, *_ = pulse(u)
        energies.append(b.energy_J())
        if abs(energies[-1] - e_out) <= tolerance * e_out:
            return energies, stored, k, u
    return energies, stored, None, u


def _orbit(pulse: _Pulses, energies: list[float], settled: int | None, e_star: float, u_last: np.ndarray,
           tolerance: float, fp_tolerance: float, upper: np.ndarray | None,
           warnings: list[str]) -> train_cycles.Orbit | None:
    """The periodic orbit of a train from its start that did not settle, does not approach the steady
    state steadily and repeats every k pulses (``train_cycles.py``); None for any other train, or when
    the orbit found is the single-pulse steady state after all. Warns when the orbit is not reached to
    ``fp_tolerance``."""
    if settled is not None or train_cycles.estimate_settling(energies, e_star, tolerance) is not None:
        return None
    k = len(train_cycles.repeating_cycle(energies, tolerance))
    if k == 0:
        return None
    orbit = train_cycles.find_orbit(lambda u: pulse(u)[0], pulse.period, u_last, len(energies) + 1, k, tolerance,
                                    fp_tolerance, upper, ANDERSON_DEPTH, MAX_FIXED_POINT_PULSES, STAGNATION_PULSES)
    if orbit.length == 1:
        return None
    if orbit.residual > fp_tolerance:
        warnings.append(warning("train", f"train: the cycle of {orbit.length} pulses was not reached to {fp_tolerance:.0e} in "
                        f"{orbit.evaluations} evaluations of {k} pulses (residual {orbit.residual:.1e}); the "
                        f"figures are those of the last estimate"))
    return orbit


def _single_cycle(steady: _SteadyPulse) -> train_cycles.Orbit:
    """The steady pulse as a cycle of one pulse (its figures over one period)."""
    return train_cycles.Orbit(states=[], energies_J=[steady.pulse_energy_J], stored_before_J=[steady.stored_before_J],
                              pumped_J=steady.pumped_J, decayed_J=steady.decayed_J, extracted_J=steady.extracted_J,
                              change_J=steady.change_J, start_pulse=1, evaluations=0, residual=0.0, observed=1)
