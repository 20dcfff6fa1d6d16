"""Steps that take time and repeated steps: the layout run step by step for one pulse.

A ``repeat`` step runs its steps round trip after round trip: ``count`` times, or with
``until = "peak"`` until the energy after a round trip falls below the one before; the state (beam,
gain maps, clock) of the round trip with the largest energy is kept (a copy is taken before each
round trip, which costs one beam and one set of gain maps of memory and a copy per round trip, much
less than the passes themselves) and the one after it is discarded: the pulse is dumped after the
round trip of largest energy. On the fluence path a repeat with ``mode_diameter_m`` re-forms the beam
on the cavity's mode after each round trip, and one without it warns when the beam changes size over
the round trips (``cavity_mode.py``, which says what the re-forming means for the B-integral, apertures,
``until = "peak"`` and pulse trains). The beam figures of every round trip are kept for result.h5.

:func:`run_step` runs one step of the layout (a repeat round trip by round trip) and lets its time
pass; the layout loop (``pulsed.run``) calls it for each step, for a single pulse and for each
pulse of a train (``trains.py``); the media's clocks are in ``clocks.py``. What a single step does to the beam, on the fluence path or the
field path, comes from the caller (``act``).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ampmodel.beam.state import RepeatOutcome, StepOutcome
from ampmodel.description import Config, Limits, Step
from ampmodel.kernels.pulse_shape import true_peak_map
from ampmodel.output.result import StepRecord
from ampmodel.pulsed import cavity_mode
from ampmodel.pulsed.clocks import Timeline
from ampmodel.pulsed.passes import MediumState


def _beam_arrays(beam) -> tuple[str, str]:
    """The beam's state arrays: the complex field (field path) or the fluence, and the B-integral."""
    return ("field" if hasattr(beam, "field") else "fluence", "b_integral")


@dataclass
class _Snapshot:
    """A copy of everything a round trip changes."""

    beam: dict[str, np.ndarray]
    ln_gain: dict[str, np.ndarray]
    elapsed_s: float = 0.0
    bookkeeping: dict[str, tuple[float, float]] = field(default_factory=dict)

    @classmethod
    def empty_like(cls, beam, states: dict[str, MediumState]) -> "_Snapshot":
        return cls({a: np.empty_like(getattr(beam, a)) for a in _beam_arrays(beam)},
                   {n: np.empty_like(s.ln_gain) for n, s in states.items()})

    def take(self, beam, states: dict[str, MediumState], timeline: Timeline) -> None:
        for a, copy in self.beam.items():
            np.copyto(copy, getattr(beam, a))
        for n, s in states.items():
            np.copyto(self.ln_gain[n], s.ln_gain)
        self.elapsed_s = timeline.elapsed_s
        self.bookkeeping = {n: (c.pumped_J, c.decayed_J) for n, c in timeline.clocks.items()}

    def restore(self, beam, states: dict[str, MediumState], timeline: Timeline) -> None:
        for a, copy in self.beam.items():
            np.copyto(getattr(beam, a), copy)
        for n, s in states.items():
            np.copyto(s.ln_gain, self.ln_gain[n])
        timeline.elapsed_s = self.elapsed_s
        for n, (pumped, decayed) in self.bookkeeping.items():
            timeline.clocks[n].pumped_J, timeline.clocks[n].decayed_J = pumped, decayed


Act = Callable[..., StepOutcome]     # act(step, beam, tick) -> StepOutcome


def run_repeat(step: Step, beam, states: dict[str, MediumState], timeline: Timeline, act: Act,
               tick: Callable[[], None] | None = None, limits: Limits | None = None) -> StepOutcome:
    """Run a repeat's steps round trip after round trip; see the module docstring.

    ``beam`` is a ``beam.state.BeamState`` or a ``beam.field.FieldBeam``; ``act(step, beam, tick)`` applies
    one inner step to it. ``limits``: the thresholds of the repeat's own warnings (None: none given).

    Returns
    -------
    StepOutcome
        Energies in (entering the repeat) and out (after the dump round trip); clipped, passive-loss
        and extracted energy summed over the round trips kept; peaks over them; the B-integral added.
        ``repeat``: the round trips (:class:`~ampmodel.beam.state.RepeatOutcome`);
        ``edge_absorbed_J`` (field path): taken by the window's absorbing edge over the round trips kept;
        ``warnings``: the cavity mode's grid warnings, or the warning of a beam without a mode.
    """
    e_in = beam.energy_J()
    b_start = beam.b_integral.copy()
    round_trip_s = step.round_trip_time_s
    rest_s = max(round_trip_s - sum(s.delay_s for s in step.steps), 0.0)
    until_peak = step.until == "peak"
    snap = _Snapshot.empty_like(beam, states) if until_peak else None
    mode, warnings = _mode(step, beam, limits)
    energies: list[float] = []
    figures: list[cavity_mode.RoundTripBeam] = []
    last_inner: list[StepOutcome] = []
    clipped = passive = extracted = edge = peak_f = peak_i = 0.0
    peak_found = False
    for k in range(1, step.most_round_trips + 1):
        if snap is not None and k > 1:
            snap.take(beam, states, timeline)
        inner = []
        for s in step.steps:
            inner.append(act(s, beam, tick))
            timeline.wait(states, s.delay_s)
        timeline.wait(states, rest_s)
        if mode is not None:
            cavity_mode.reform(beam.fluence, mode)
        figures.append(cavity_mode.RoundTripBeam.of(cavity_mode.fluence_map(beam), beam.x_m, beam.y_m,
                                                    beam.pixel_area_m2))
        energy = beam.energy_J()
        energies.append(energy)
        if snap is not None and k > 1 and energy < energies[-2]:
            snap.restore(beam, states, timeline)     # dump after the round trip before this one
            peak_found = True
            break
        last_inner = inner
        clipped += sum(o.clipped_J for o in inner)
        passive += sum(o.passive_loss_J for o in inner)
        extracted += sum(o.extracted_J for o in inner)
        edge += sum(o.edge_absorbed_J for o in inner)
        peak_f = max([peak_f] + [o.peak_fluence_J_m2 for o in inner])
        peak_i = max([peak_i] + [o.peak_intensity_W_m2 for o in inner])
        if energy <= 0.0:
            break
    kept = len(energies) - (1 if peak_found else 0)
    if mode is None and limits is not None and not hasattr(beam, "field"):
        warnings += [w for w in (cavity_mode.no_mode_warning(figures, kept, limits),) if w]
    b_added = float((beam.b_integral - b_start).max()) if beam.b_integral.size else 0.0
    return StepOutcome(e_in, beam.energy_J(), clipped_J=clipped, passive_loss_J=passive, extracted_J=extracted,
                       peak_fluence_J_m2=peak_f, peak_intensity_W_m2=peak_i, b_integral_step_rad=b_added,
                       edge_absorbed_J=edge, warnings=warnings,
                       repeat=RepeatOutcome(energies, kept, round_trip_s, peak_found, last_inner, figures))


def _mode(step: Step, beam, limits: Limits | None) -> tuple[np.ndarray | None, list[str]]:
    """The repeat's cavity mode on the grid (None without ``mode_diameter_m``) and its grid warnings."""
    if step.mode_diameter_m is None:
        return None, []
    if hasattr(beam, "field"):
        raise ValueError("a cavity mode (mode_diameter_m) applies to the fluence path only: the field path "
                         "forms its own mode")
    mode = cavity_mode.mode_shape(beam.x_m, beam.y_m, step.mode_diameter_m)
    dx = float(beam.x_m[1] - beam.x_m[0])
    width = dx * len(beam.x_m)
    warnings = cavity_mode.mode_grid_warnings(mode, step.mode_diameter_m, dx, width, limits) if limits else []
    return mode, warnings


def run_step(step: Step, beam, states: dict[str, MediumState], timeline: Timeline, act: Act,
             tick: Callable[[], None] | None = None, limits: Limits | None = None) -> StepOutcome:
    """One step of the layout (a repeat round trip by round trip, any other through ``act``), then
    its delay; ``limits`` the thresholds of a repeat's own warnings."""
    if step.kind == "repeat":
        outcome = run_repeat(step, beam, states, timeline, act, tick, limits)
    else:
        outcome = act(step, beam, tick)
    timeline.wait(states, step.delay_s)
    return outcome


def step_record(step: Step, beam, outcome: StepOutcome, fluence_map: np.ndarray, power: np.ndarray) -> StepRecord:
    """The beam after a step, for result.h5 (a repeat adds its energy and time per round trip).

    fluence_map : (Ny, Nx) fluence after the step (J/m²); power : (Nt,) power of each time slice (W)
    """
    record = StepRecord(index=step.index, kind=step.kind, medium=step.medium, fluence_J_m2=fluence_map,
                        power_W=power, b_integral_rad=true_peak_map(beam.b_integral, beam.peak_factor))
    if step.kind == "repeat":
        energies = np.asarray(outcome.repeat.round_trip_energies_J, dtype=float)
        times = outcome.repeat.round_trip_s * np.arange(1, energies.size + 1)
        figures = outcome.repeat.round_trip_beams
        record.datasets = {"round_trip_energy": (energies, "J"), "round_trip_end_time": (times, "s"),
                           "round_trip_d4sigma": (np.array([[f.d4sigma_x_m, f.d4sigma_y_m] for f in figures],
                                                           dtype=float).reshape(-1, 2), "m"),
                           "round_trip_peak_fluence": (np.array([f.peak_fluence_J_m2 for f in figures],
                                                                dtype=float), "J/m^2")}
    return record


def slice_passes(config: Config) -> int | None:
    """z-slices the beam crosses in one pulse (for the progress bar); None when a repeat stops at
    the peak (the count is not known in advance)."""
    total = 0
    for step in config.steps:
        if step.kind == "repeat":
            if step.count is None:
                return None
            total += step.count * sum(config.medium(s.medium).slices for s in step.steps if s.kind == "pass")
        elif step.kind == "pass":
            total += config.medium(step.medium).slices
    return total
