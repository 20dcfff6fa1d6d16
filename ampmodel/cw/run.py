"""CW operation: the steady state of a layout whose passes saturate their media together.

The beam is one intensity map I(y, x) (W/m²) per point of the layout. In steady state every pass
of a medium is present at once, so each voxel's gain is saturated by the sum of the intensities of
all passes (and, with a pump, set by the local pump flux too; ``cw_pump.py``). The layout is
therefore solved by iteration: each sweep runs the pump through the pumped media, then the seed
through the steps in order; a pass updates each slice's gain from the intensity entering it now
plus the intensities the other passes brought in their latest sweep (Gauss–Seidel), optionally
under-relaxed (``solver.damping``), and then crosses it. Sweeps repeat until the largest change of
any gain coefficient is below ``solver.tolerance`` times the largest small-signal gain coefficient.
With one pass per medium and no pump, the first sweep is already exact and is the only one.

Per slice the gain is the exact steady-state solution for the intensities entering it
(``kernels/cw_saturation.py``): Lambert-W form for a homogeneous line, a quadrature for an
inhomogeneous one. Passive loss inside a medium is split around the gain step (half the loss, the
gain, half the loss); with loss, each slice is cut into ``loss_substeps`` internal sub-slices so
that the splitting error stays below about 1e-6 of the output (README).

References
----------
A. E. Siegman, Lasers, University Science Books (1986): steady-state saturation.
"""
from __future__ import annotations

import math
from contextlib import nullcontext
from dataclasses import dataclass, field

import numpy as np

from ampmodel.progress import progress_bar

from ampmodel.kernels import beam_shapes
from ampmodel.media import cw_pump, gain_maps
from ampmodel.description import Config, Medium, Step
from ampmodel.kernels.cw_saturation import homogeneous_slice_gain, inhomogeneous_slice_gain
from ampmodel.pulsed.passes import STEP_ACTIONS, BeamState

# Sub-slices per slice with passive loss. The symmetric splitting of the loss around the gain step
# is second order: against scipy.integrate.solve_ivp the relative error of the output intensity is
# at most about 5e-3·q, q = L·dz²·g0²·α (medium length L, slice length dz, largest |g0|, loss
# coefficient α; measured over both line shapes and I/Isat from 0.01 to 100). Each slice is cut into
# sub-slices so that q <= LOSS_SPLIT_LIMIT, which keeps the error near 5e-7 or below
# (tests/physics/test_cw_slices.py checks 1e-6).
LOSS_SPLIT_LIMIT = 1e-4
MAX_LOSS_SUBSTEPS = 64
MIN_DAMPING = 1.0 / 64.0


@dataclass
class CwMedium:
    """A medium in the cw iteration, on its internal voxel grid (Nz·sub, Ny, Nx), SI.

    gain : current gain coefficient g (1/m) of each voxel (the mean over the voxel)
    g0, isat : small-signal gain coefficient (1/m) and saturation intensity (W/m²) of each voxel
        (pump-dependent with a pump; isat a float without one)
    entering : step index -> (nz, Ny, Nx) intensity entering each voxel's gain step in that pass
    forward, backward : sums of ``entering`` over the passes in each direction
    """

    medium: Medium
    mask: np.ndarray
    sub: int
    dz_m: float
    homogeneous: bool
    levels: cw_pump.SignalLevels
    g0: np.ndarray
    isat: np.ndarray | float
    gain: np.ndarray
    pump: cw_pump.CwPump | None = None
    pump_field: cw_pump.PumpField | None = None
    entering: dict[int, np.ndarray] = field(default_factory=dict)
    forward: np.ndarray | None = None
    backward: np.ndarray | None = None
    initial_iterations: int = 0

    @property
    def name(self) -> str:
        return self.medium.name

    def coarse(self, a: np.ndarray) -> np.ndarray:
        """(Nz·sub, Ny, Nx) -> (Nz, Ny, Nx): the mean over each slice's sub-slices."""
        if self.sub == 1:
            return a.copy()
        nz = a.shape[0] // self.sub
        return a.reshape((nz, self.sub) + a.shape[1:]).mean(axis=1)


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


def loss_substeps(medium: Medium, g0_max_per_m: float) -> int:
    """Internal sub-slices per slice: 1 without loss, else enough that L·dz²·g0²·α <= LOSS_SPLIT_LIMIT."""
    if medium.loss_per_m <= 0.0:
        return 1
    dz = medium.length_m / medium.slices
    q = medium.length_m * dz * dz * g0_max_per_m ** 2 * medium.loss_per_m
    return int(min(MAX_LOSS_SUBSTEPS, max(1, math.ceil(math.sqrt(q / LOSS_SPLIT_LIMIT)))))


def _levels(medium: Medium) -> cw_pump.SignalLevels:
    mat = medium.material
    return cw_pump.SignalLevels(sigma_e_m2=mat.emission_cross_section_m2, sigma_a_m2=mat.absorption_cross_section_m2,
                                lifetime_s=mat.upper_lifetime_s, photon_energy_J=mat.photon_energy_J,
                                nt_per_m3=medium.doping_per_m3 or mat.doping_per_m3)


def _relative_change(new: np.ndarray, old: np.ndarray, scale: float) -> float:
    return float(np.max(np.abs(new - old))) / scale if new.size else 0.0


def pump_sweep(st: CwMedium, pixel_area_m2: float) -> tuple[np.ndarray, np.ndarray]:
    """Run the pump through a pumped medium at its current gain (``st.pump_field``) and return the
    small-signal gain g0 (1/m) and saturation intensity (W/m²) of each voxel that it gives."""
    n2 = cw_pump.upper_population(st.gain, st.levels)
    st.pump_field = cw_pump.sweep(st.pump, n2, st.mask, st.dz_m, pixel_area_m2)
    return cw_pump.small_signal(st.pump, st.levels, st.pump_field.mean_flux, st.mask)


def pump_only(st: CwMedium, pixel_area_m2: float, tolerance: float, max_iterations: int) -> int:
    """Settle a pumped medium without signal: g = g0(pump(g)) by fixed-point iteration (bleaching
    couples the pump's absorption to the population it creates). Returns the iterations used."""
    assert st.pump is not None
    for it in range(1, max_iterations + 1):
        g0, isat = pump_sweep(st, pixel_area_m2)
        scale = max(float(np.abs(g0).max()), 1e-300)
        change = _relative_change(g0, st.gain, scale)
        st.g0, st.isat, st.gain = g0, isat, g0.copy()
        if change <= tolerance:
            return it
    return max_iterations


def build_medium(medium: Medium, x_m: np.ndarray, y_m: np.ndarray, solver) -> CwMedium:
    """A medium's cw state before the signal: its small-signal gain map (pump settled if pumped)."""
    mask = beam_shapes.aperture_mask(x_m, y_m, medium.aperture, medium.diameter_m)
    levels = _levels(medium)
    homogeneous = medium.material.broadening != "inhomogeneous"
    pixel_area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    if medium.pump is None:
        g = gain_maps.gain_map(medium, x_m, y_m).gain_per_m
        sub = loss_substeps(medium, float(np.abs(g).max()))
        g0 = np.repeat(g, sub, axis=0)
        return CwMedium(medium, mask, sub, medium.length_m / (medium.slices * sub), homogeneous, levels,
                        g0=g0, isat=medium.material.saturation_intensity_W_m2, gain=g0.copy())
    pump = cw_pump.build_pump(medium, x_m, y_m, mask)

    def settle(sub: int) -> CwMedium:
        nz = medium.slices * sub
        zero = np.zeros((nz,) + mask.shape)
        st = CwMedium(medium, mask, sub, medium.length_m / nz, homogeneous, levels, g0=zero, isat=1.0,
                      gain=zero.copy(), pump=pump)
        st.initial_iterations = pump_only(st, pixel_area, solver.tolerance, solver.max_iterations)
        return st

    st = settle(1)
    sub = loss_substeps(medium, float(np.abs(st.g0).max()))
    return st if sub == 1 else settle(sub)


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
    """A loss, aperture, space, lens or relay step on the intensity map: the pulsed step actions of
    ``layout.py`` (and ``optics.FLUENCE_STEP_ACTIONS``) applied to a one-slice beam of 1 s, whose energies are then powers."""
    beam = BeamState(fluence=intensity[None, :, :].copy(), b_integral=np.zeros((1,) + intensity.shape),
                     x_m=x_m, y_m=y_m, dt_s=1.0, wavelength_m=wavelength_m)
    from ampmodel.beam.field import FLUENCE_STEP_ACTIONS   # soft apertures and relays act on the map too
    oc = FLUENCE_STEP_ACTIONS.get(step.kind, STEP_ACTIONS.get(step.kind))(beam, step)
    return beam.fluence[0], CwOutcome(oc.energy_in_J, oc.energy_out_J, clipped_W=oc.clipped_J,
                                      passive_loss_W=oc.passive_loss_J, peak_intensity_W_m2=oc.peak_intensity_W_m2)


@dataclass
class Sweep:
    """The final sweep of the layout: the intensity after each step and each step's outcome."""

    maps: list[np.ndarray]
    outcomes: list[CwOutcome]
    iterations: int
    residual: float
    damping: float


def solve(config: Config, states: dict[str, CwMedium], seed: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
          progress: bool | None = False) -> Sweep:
    """Iterate the layout to its steady state (module docstring).

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
    wavelength = config.seed.wavelength_m
    with progress_bar(False if single else progress, unit="sweep", desc="cw steady state") as bar:
        for iteration in range(1, solver.max_iterations + 1):
            change = 0.0
            for st in states.values():
                if st.pump is not None:
                    st.g0, st.isat = pump_sweep(st, pixel_area)
                    if counts[st.name] == 0:
                        change = max(change, float(np.max(np.abs(st.g0 - st.gain))))
                        st.gain = st.g0.copy()
            intensity = seed.copy()
            maps, outcomes = [], []
            for step in config.steps:
                if step.kind == "pass":
                    intensity, oc, c = cw_pass(intensity, states[step.medium], step, damping, pixel_area)
                    change = max(change, c)
                else:
                    intensity, oc = other_step(intensity, step, x_m, y_m, wavelength)
                maps.append(intensity.copy())
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
    from ampmodel.config.load import ConfigError
    raise ConfigError([f"{config.source}: solver.max_iterations = {solver.max_iterations}: the cw steady state "
                       f"did not converge: the gain still changed by {residual:.1e} (relative) in the last "
                       f"sweep, above solver.tolerance = {solver.tolerance:g}; raise solver.max_iterations, or "
                       f"lower solver.damping (it started at {solver.damping:g} and reached {damping:g})"])


def memory_estimate_bytes(config: Config) -> int:
    """Peak bytes of a cw run's arrays: per medium the gain, small-signal gain, saturation intensity,
    the two direction sums, the intensity entering each voxel in each pass, and (pumped) the pump's
    fields, on the internal grid (loss sub-slices, at most MAX_LOSS_SUBSTEPS, counted as 4 here), plus
    the maps."""
    pixels = config.grid.points ** 2
    passes = {m.name: sum(1 for s in config.steps if s.kind == "pass" and s.medium == m.name)
              for m in config.media}
    media = sum((8 + passes[m.name]) * m.slices * pixels * (4 if m.loss_per_m > 0 else 1) for m in config.media)
    return 8 * (media + (3 + len(config.steps)) * pixels)


def simulate_cw(config: Config, progress: bool | None = False):
    """Run a validated cw configuration and return its Result (nothing is written).

    Parameters
    ----------
    config : Config with mode "cw"
    progress : True shows a progress bar of the sweeps on stderr, None on an interactive terminal
    """
    from ampmodel.cw import diagnostics as diagnostics_cw
    from ampmodel.output.result import MediumRecord, Result, StepRecord

    grid, seed_cfg = config.grid, config.seed
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    y = x.copy()
    seed = beam_shapes.seed_fluence(x, y, seed_cfg.profile, seed_cfg.diameter_m, seed_cfg.order, seed_cfg.power_W)
    states = {m.name: build_medium(m, x, y, config.solver) for m in config.media}
    initial = {name: st.coarse(st.g0) for name, st in states.items()}
    sweep = solve(config, states, seed, x, y, progress)

    records = []
    for step, intensity, oc in zip(config.steps, sweep.maps, sweep.outcomes):
        records.append(StepRecord(index=step.index, kind=step.kind, medium=step.medium, intensity_W_m2=intensity,
                                  axis_z_m=oc.axis_z_m, axis_intensity_W_m2=oc.axis_intensity_W_m2))
    media = {}
    for m in config.media:
        st = states[m.name]
        pump_i = None
        if st.pump is not None:
            pump_i = st.coarse(st.pump_field.mean_flux) * st.pump.photon_energy_J
        media[m.name] = MediumRecord(
            name=m.name, gain_initial_per_m=initial[m.name], gain_final_per_m=st.coarse(st.gain),
            slice_length_m=m.length_m / m.slices, saturation_fluence_J_m2=m.material.saturation_fluence_J_m2,
            saturation_intensity_W_m2=m.material.saturation_intensity_W_m2, material=m.material.name,
            sources=dict(m.material.sources), pump_intensity_W_m2=pump_i)
    summary = diagnostics_cw.summarise(config, seed, sweep, states, media, x)
    return Result(config=config, x_m=x, y_m=y, t_s=np.zeros(0), seed_fluence_J_m2=None, seed_power_W=None,
                  steps=records, media=media, summary=summary, seed_intensity_W_m2=seed)
