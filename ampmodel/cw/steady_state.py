"""CW operation: the steady state of a layout whose passes saturate their media together.

The beam is one intensity map I(y, x) (W/m²) per point of the layout. In steady state every pass
of a medium is present at once, so each voxel's gain is saturated by the sum of the intensities of
all passes (and, with a pump, set by the local pump flux too; ``media/cw_pump.py``). The layout is
therefore solved by iteration: each sweep runs the pump through the pumped media, then the seed
through the steps in order; a pass updates each slice's gain from the intensity entering it now
plus the intensities the other passes brought in their latest sweep (Gauss–Seidel), optionally
under-relaxed (``solver.damping``), and then crosses it. Sweeps repeat until the largest change of
any gain coefficient is below ``solver.tolerance`` times the largest small-signal gain coefficient.
With one pass per medium and no pump, the first sweep is already exact and is the only one.

Per slice the gain is the exact steady-state solution for the intensities entering it
(``kernels/cw_saturation.py``): Lambert-W form for a homogeneous line, a quadrature for an
inhomogeneous one. Passive loss inside a medium is split around the gain step (half the loss, the
gain, half the loss); with loss, each slice is cut into ``medium.loss_substeps`` internal sub-slices so
that the splitting error stays below about 1e-6 of the output (README).

References
----------
A. E. Siegman, Lasers, University Science Books (1986): steady-state saturation.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from ampmodel.beam.fluence_steps import FLUENCE_STEP_ACTIONS
from ampmodel.beam.state import BeamState
from ampmodel.config.checks import ConfigError
from ampmodel.cw.medium import CwMedium, pump_sweep
from ampmodel.description import Config, Step
from ampmodel.kernels.cw_saturation import homogeneous_slice_gain, inhomogeneous_slice_gain
from ampmodel.progress import progress_bar

MIN_DAMPING = 1.0 / 64.0


@dataclass
class CwOutcome:
    """Power bookkeeping and peaks of one step of the final sweep (W, W/m²).

    axis_z_m, axis_intensity_W_m2 : passes only: the on-axis intensity at the slice faces, at
        positions z from the medium's face z = 0 (ascending)
    """

    power_in_W: float
    power_out_W: float
    clipped_W: float = 0.0
    passive_loss_W: float = 0.0
    extracted_W: float = 0.0
    peak_intensity_W_m2: float = 0.0
    axis_z_m: np.ndarray | None = None
    axis_intensity_W_m2: np.ndarray | None = None
    edge_absorbed_W: float = 0.0          # field path: taken by the window's absorbing edge
    b_integral_rad: float = 0.0           # field path: the largest B-integral of a pixel after the step
    warnings: list[str] = field(default_factory=list)
    pinhole_transmission: float | None = None   # field path: a spatial filter's


def _axis_index(n: int) -> int:
    return n // 2


def cw_pass(intensity: np.ndarray, st: CwMedium, step: Step, damping: float, pixel_area_m2: float,
            ) -> tuple[np.ndarray, CwOutcome, float]:
    """One pass through a medium in the steady state; returns (intensity out, outcome, largest change
    of a gain coefficient in 1/m, before damping).

    Each slice (in the order the beam meets them): half the passive loss, the gain update from the
    intensity entering now plus the other passes' latest entering intensities, the gain, half the loss.
    """
    p_in = float(intensity.sum() * pixel_area_m2)
    clipped = float(intensity[~st.mask].sum() * pixel_area_m2)
    i = np.where(st.mask, intensity, 0.0)
    nz = st.gain.shape[0]
    key = step.index
    if key not in st.entering:
        st.entering[key] = np.zeros_like(st.gain)
        if st.forward is None:
            st.forward, st.backward = np.zeros_like(st.gain), np.zeros_like(st.gain)
    entering = st.entering[key]
    own = st.backward if step.reverse else st.forward
    half = math.exp(-0.5 * st.medium.loss_per_m * st.dz_m)
    iy, ix = _axis_index(i.shape[0]), _axis_index(i.shape[1])
    order = range(nz - 1, -1, -1) if step.reverse else range(nz)
    axis = [float(i[iy, ix])]
    passive = extracted = change = 0.0
    peak = float(i.max()) if i.size else 0.0
    for k in order:
        if half != 1.0:
            before = i.sum()
            i *= half
            passive += before - i.sum()
        c = st.g0[k] * st.dz_m
        isat = st.isat[k] if isinstance(st.isat, np.ndarray) else st.isat
        if st.homogeneous:
            total = st.forward[k] + st.backward[k] - entering[k] + i
            x = homogeneous_slice_gain(total, c, isat)
        else:
            f = st.forward[k] + (0.0 if step.reverse else i - entering[k])
            b = st.backward[k] + (i - entering[k] if step.reverse else 0.0)
            x = inhomogeneous_slice_gain(f, b, c, isat)
        target = x / st.dz_m
        change = max(change, float(np.max(np.abs(target - st.gain[k]))))
        st.gain[k] += damping * (target - st.gain[k])
        own[k] += i - entering[k]
        entering[k] = i
        out = i * np.exp(st.gain[k] * st.dz_m)
        extracted += out.sum() - i.sum()
        i = out
        if half != 1.0:
            before = i.sum()
            i *= half
            passive += before - i.sum()
        peak = max(peak, float(i.max()))
        if (nz - k if step.reverse else k + 1) % st.sub == 0:
            axis.append(float(i[iy, ix]))
    z = np.linspace(0.0, st.medium.length_m, st.medium.slices + 1)
    axis_i = np.array(axis[::-1] if step.reverse else axis)
    outcome = CwOutcome(p_in, float(i.sum() * pixel_area_m2), clipped_W=clipped,
                        passive_loss_W=passive * pixel_area_m2, extracted_W=extracted * pixel_area_m2,
                        peak_intensity_W_m2=peak, axis_z_m=z, axis_intensity_W_m2=axis_i)
    return i, outcome, change


def other_step(intensity: np.ndarray, step: Step, x_m: np.ndarray, y_m: np.ndarray,
               wavelength_m: float) -> tuple[np.ndarray, CwOutcome]:
    """A loss, aperture, space, lens or relay step on the intensity map: the fluence path's step
    actions (``beam.fluence_steps``) applied to a one-slice beam of 1 s, whose energies are then powers."""
    beam = BeamState(fluence=intensity[None, :, :].copy(), b_integral=np.zeros((1,) + intensity.shape),
                     x_m=x_m, y_m=y_m, dt_s=1.0, wavelength_m=wavelength_m)
    oc = FLUENCE_STEP_ACTIONS[step.kind](beam, step)
    return beam.fluence[0], CwOutcome(oc.energy_in_J, oc.energy_out_J, clipped_W=oc.clipped_J,
                                      passive_loss_W=oc.passive_loss_J, peak_intensity_W_m2=oc.peak_intensity_W_m2)


@dataclass
class SweepActions:
    """What a sweep does to the beam: ``start()`` a fresh seed beam; ``run_pass(beam, state, step,
    damping)`` -> (beam, outcome, change of a gain coefficient); ``run_other(beam, step)`` -> (beam,
    outcome); ``record(beam)`` what the sweep keeps of the beam after each step. The intensity path's
    (``intensity_actions``) or the field path's (``cw/field_path.py``)."""

    start: Callable[[], Any]
    run_pass: Callable[[Any, CwMedium, Step, float], tuple[Any, CwOutcome, float]]
    run_other: Callable[[Any, Step], tuple[Any, CwOutcome]]
    record: Callable[[Any], np.ndarray]


def intensity_actions(seed: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, wavelength_m: float) -> SweepActions:
    """The intensity path: the beam is the intensity map (W/m²)."""
    pixel_area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    return SweepActions(start=seed.copy,
                        run_pass=lambda i, st, step, damping: cw_pass(i, st, step, damping, pixel_area),
                        run_other=lambda i, step: other_step(i, step, x_m, y_m, wavelength_m),
                        record=np.copy)


@dataclass
class Sweep:
    """The final sweep of the layout: the intensity after each step and each step's outcome."""

    maps: list[np.ndarray]
    outcomes: list[CwOutcome]
    iterations: int
    residual: float
    damping: float


def solve(config: Config, states: dict[str, CwMedium], seed: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
          progress: bool | None = False, actions: SweepActions | None = None) -> Sweep:
    """Iterate the layout to its steady state (module docstring); ``actions``: what a sweep does to the
    beam (default the intensity path's, from the ``seed`` intensity map).

    Raises
    ------
    ConfigError
        When the iteration has not converged within ``solver.max_iterations`` sweeps; the message
        names the solver keys to change.
    """
    solver = config.solver
    pixel_area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    passes = [s for s in config.steps if s.kind == "pass"]
    counts = {name: sum(1 for s in passes if s.medium == name) for name in states}
    single = all(n <= 1 for n in counts.values()) and all(st.pump is None for st in states.values())
    scale = max([float(np.abs(st.g0).max()) for st in states.values()] + [1e-300])
    damping = 1.0 if single else solver.damping
    previous = math.inf
    residual = math.inf
    if actions is None:
        actions = intensity_actions(seed, x_m, y_m, config.seed.wavelength_m)
    with progress_bar(False if single else progress, unit="sweep", desc="cw steady state") as bar:
        for iteration in range(1, solver.max_iterations + 1):
            change = 0.0
            for st in states.values():
                if st.pump is not None:
                    st.g0, st.isat = pump_sweep(st, pixel_area)
                    if counts[st.name] == 0:
                        change = max(change, float(np.max(np.abs(st.g0 - st.gain))))
                        st.gain = st.g0.copy()
            beam = actions.start()
            maps, outcomes = [], []
            for step in config.steps:
                if step.kind == "pass":
                    beam, oc, c = actions.run_pass(beam, states[step.medium], step, damping)
                    change = max(change, c)
                else:
                    beam, oc = actions.run_other(beam, step)
                maps.append(actions.record(beam))
                outcomes.append(oc)
            residual = change / scale
            if bar is not None:
                bar.update()
                bar.set_postfix(residual=f"{residual:.1e}", damping=f"{damping:.3g}")
            if single:
                return Sweep(maps, outcomes, 1, 0.0, damping)
            if residual <= solver.tolerance:
                return Sweep(maps, outcomes, iteration, residual, damping)
            if residual > previous and damping > MIN_DAMPING:
                damping = max(MIN_DAMPING, damping / 2.0)
            previous = residual
    raise ConfigError([f"{config.source}: solver.max_iterations = {solver.max_iterations}: the cw steady state "
                       f"did not converge: the gain still changed by {residual:.1e} (relative) in the last "
                       f"sweep, above solver.tolerance = {solver.tolerance:g}; raise solver.max_iterations, or "
                       f"lower solver.damping (it started at {solver.damping:g} and reached {damping:g})"])
