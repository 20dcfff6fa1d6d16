"""CW operation with diffraction (grid.diffraction = true): one complex field through the layout.

The beam is a ``beam.field.FieldBeam`` with one "time slice" of width 1 s: ``field`` (1, Ny, Nx)
complex, |E|² the intensity (W/m²), so the field path's energies are powers. The layout is iterated
to its steady state exactly as on the intensity path (``cw/steady_state.solve``, the same Gauss–Seidel
sweeps, damping and tolerance); only what a step does to the beam differs:

- **a pass** (:func:`field_pass`): the field is clipped at the clear aperture, then each internal
  z-slice (loss sub-slices included) is half a diffraction step in the medium's index (angular
  spectrum, ``kernels/diffraction.py``, with the absorbing window edge), the gain step, half a
  diffraction step. The gain step is the intensity path's: half the passive loss, the slice's
  saturated gain coefficient from |E|² entering it now plus the other passes' latest entering
  intensities (``kernels/cw_saturation.py``), the amplitude times exp(g·dz/2) (the phase kept), the
  Kerr phase k0·n2·Ī·dz (Ī the mean intensity over the slice, Ī = I·(e^x − 1)/x, x = g·dz, exact for
  the exponential growth inside the slice) when the material has an n2, half the loss. The medium's
  phase map (``CwMedium.phase_rad``, zero by default) is applied at the middle of the pass.
- **another step**: the pulsed field path's step actions (``beam/field_steps.py``) on the one slice.

Every power the beam loses is counted: clipped at an aperture, passive loss, and what the absorbing
edge (and the evanescent part of the angular spectrum) takes in each diffraction step.
"""
from __future__ import annotations

import math

import numpy as np

from ampmodel.beam import grid_checks
from ampmodel.beam.field import FieldBeam, fluence_of, substeps
from ampmodel.beam.field_steps import FIELD_STEP_ACTIONS
from ampmodel.beam.state import BeamFigures
from ampmodel.cw.medium import CwMedium
from ampmodel.cw.steady_state import CwOutcome, SweepActions
from ampmodel.description import Config, Step, step_label
from ampmodel.kernels import field_step as fs
from ampmodel.kernels.cw_saturation import homogeneous_slice_gain, inhomogeneous_slice_gain


def new_beam(seed_field: np.ndarray, x_m: np.ndarray, wavelength_m: float, width_m: float,
             workers: int = -1) -> FieldBeam:
    """A fresh one-slice beam carrying ``seed_field`` (Ny, Nx), |E|² in W/m²."""
    field = np.ascontiguousarray(seed_field[None, :, :].astype(np.complex128))
    return FieldBeam(field=field, b_integral=np.zeros(field.shape), x_m=x_m, y_m=x_m.copy(), dt_s=1.0,
                     wavelength_m=wavelength_m, width_m=width_m, workers=workers)


def _diffract(beam: FieldBeam, transfer: np.ndarray, steps: int) -> float:
    """Half a slice's diffraction (``steps`` angular-spectrum steps, each with the absorbing edge), in
    place; returns Σ|E|² the step lost (edge and evanescent waves), per pixel area."""
    before = float(fluence_of(beam.field).sum())
    fs.propagate_chunk(beam.field, transfer, beam.edge, steps)
    return before - float(fluence_of(beam.field).sum())


def _slice_gain(st: CwMedium, step: Step, k: int, i: np.ndarray, entering: np.ndarray) -> np.ndarray:
    """The saturated gain coefficient target (1/m) of slice ``k`` for the intensity ``i`` entering it now
    (the intensity path's update, ``cw.steady_state.cw_pass``)."""
    c = st.g0[k] * st.dz_m
    isat = st.isat[k] if isinstance(st.isat, np.ndarray) else st.isat
    if st.homogeneous:
        x = homogeneous_slice_gain(st.forward[k] + st.backward[k] - entering[k] + i, c, isat)
    else:
        f = st.forward[k] + (0.0 if step.reverse else i - entering[k])
        b = st.backward[k] + (i - entering[k] if step.reverse else 0.0)
        x = inhomogeneous_slice_gain(f, b, c, isat)
    return x / st.dz_m


def _kerr_increment(i: np.ndarray, x: np.ndarray, coef: float) -> np.ndarray:
    """k0·n2·dz·Ī (rad), Ī = I·(e^x − 1)/x the mean intensity over a slice of gain x = g·dz."""
    small = np.abs(x) < 1e-12
    ratio = np.where(small, 1.0, np.expm1(x) / np.where(small, 1.0, x))
    return coef * i * ratio


def field_pass(beam: FieldBeam, st: CwMedium, step: Step, damping: float, index: float, n2_m2_W: float,
               ) -> tuple[FieldBeam, CwOutcome, float]:
    """One pass through a medium with diffraction in the steady state (module docstring); returns (the
    beam, the outcome, the largest change of a gain coefficient in 1/m, before damping)."""
    area = beam.pixel_area_m2
    e = beam.field
    i0 = fluence_of(e[0])
    p_in, clipped = float(i0.sum() * area), float(i0[~st.mask].sum() * area)
    e[0][~st.mask] = 0.0
    nz = st.gain.shape[0]
    if step.index not in st.entering:
        st.entering[step.index] = np.zeros_like(st.gain)
        if st.forward is None:
            st.forward, st.backward = np.zeros_like(st.gain), np.zeros_like(st.gain)
    entering = st.entering[step.index]
    own = st.backward if step.reverse else st.forward
    half_loss = math.exp(-0.25 * st.medium.loss_per_m * st.dz_m)     # amplitude: half the loss
    n_sub = substeps(beam, 0.5 * st.dz_m, index)
    transfer = beam.transfer(0.5 * st.dz_m / n_sub, index)
    kerr = 2.0 * math.pi / beam.wavelength_m * (n2_m2_W or 0.0) * st.dz_m
    mid, odd = nz // 2, nz % 2 == 1
    iy, ix = e.shape[1] // 2, e.shape[2] // 2
    axis = [float(fluence_of(e[0, iy, ix]))]
    peak = float(i0.max()) if i0.size else 0.0
    edge = passive = extracted = change = 0.0
    for j, k in enumerate(range(nz - 1, -1, -1) if step.reverse else range(nz)):
        if j == mid and not odd:
            _phase(beam, st)
        edge += _diffract(beam, transfer, n_sub)
        i = fluence_of(e[0])
        if half_loss != 1.0:
            passive += float(i.sum()) * (1.0 - half_loss * half_loss)
            e *= half_loss
            i *= half_loss * half_loss
        target = _slice_gain(st, step, k, i, entering)
        change = max(change, float(np.max(np.abs(target - st.gain[k]))))
        st.gain[k] += damping * (target - st.gain[k])
        own[k] += i - entering[k]
        entering[k] = i
        x = st.gain[k] * st.dz_m
        extracted += float((i * np.expm1(x)).sum())
        if kerr > 0.0:
            b = _kerr_increment(i, x, kerr)
            beam.b_integral[0] += b
            e[0] *= np.exp(1j * b)
        e[0] *= np.exp(0.5 * x)
        if j == mid and odd:
            _phase(beam, st)
        if half_loss != 1.0:
            passive += float(fluence_of(e[0]).sum()) * (1.0 - half_loss * half_loss)
            e *= half_loss
        edge += _diffract(beam, transfer, n_sub)
        out = fluence_of(e[0])
        peak = max(peak, float(out.max()))
        if (nz - k if step.reverse else k + 1) % st.sub == 0:
            axis.append(float(out[iy, ix]))
    z = np.linspace(0.0, st.medium.length_m, st.medium.slices + 1)
    outcome = CwOutcome(p_in, float(fluence_of(e[0]).sum() * area), clipped_W=clipped, passive_loss_W=passive * area,
                        extracted_W=extracted * area, peak_intensity_W_m2=peak, axis_z_m=z,
                        axis_intensity_W_m2=np.array(axis[::-1] if step.reverse else axis),
                        edge_absorbed_W=edge * area, b_integral_rad=float(beam.b_integral.max()))
    return beam, outcome, change


def _phase(beam: FieldBeam, st: CwMedium) -> None:
    """The medium's own phase map (``CwMedium.phase_rad``), if it has one."""
    if st.phase_rad is not None:
        beam.field[0] *= np.exp(1j * st.phase_rad)


def other_field_step(beam: FieldBeam, step: Step) -> tuple[FieldBeam, CwOutcome]:
    """A loss, aperture, space, lens, filter or relay step: the field path's step action on the one
    slice of 1 s, whose energies are then powers."""
    oc = FIELD_STEP_ACTIONS[step.kind](beam, step)
    return beam, CwOutcome(oc.energy_in_J, oc.energy_out_J, clipped_W=oc.clipped_J, passive_loss_W=oc.passive_loss_J,
                           peak_intensity_W_m2=oc.peak_intensity_W_m2, edge_absorbed_W=oc.edge_absorbed_J,
                           b_integral_rad=float(beam.b_integral.max()), warnings=list(oc.warnings),
                           pinhole_transmission=oc.pinhole_transmission)


def field_actions(config: Config, seed_field: np.ndarray, x_m: np.ndarray) -> SweepActions:
    """The field path's sweep actions for ``cw.steady_state.solve``; the record of each step is its
    field (Ny, Nx) complex, with the B-integral map kept on ``b_maps``."""
    grid, wavelength = config.grid, config.seed.wavelength_m

    def run_pass(beam: FieldBeam, st: CwMedium, step: Step, damping: float):
        material = st.medium.material
        return field_pass(beam, st, step, damping, material.refractive_index, material.n2_m2_W)

    return SweepActions(start=lambda: new_beam(seed_field, x_m, wavelength, grid.width_m, grid.fft_workers),
                        run_pass=run_pass, run_other=other_field_step,
                        record=lambda beam: beam.field[0].copy())


def clear_apertures(config: Config, states: dict[str, CwMedium]) -> dict[int, np.ndarray | None]:
    """The clear aperture each step's beam figures are taken over: a pass's own medium; another step
    the next medium the beam passes (after the last pass, the last one passed; none: the whole grid)."""
    passes = [s for s in config.steps if s.kind == "pass"]
    out: dict[int, np.ndarray | None] = {}
    for step in config.steps:
        ahead = [p for p in passes if p.index >= step.index]
        chosen = ahead[0] if ahead else (passes[-1] if passes else None)
        out[step.index] = states[chosen.medium].mask if chosen is not None else None
    return out


def field_figures(config: Config, states: dict[str, CwMedium], seed_field: np.ndarray, fields: list[np.ndarray],
                  x_m: np.ndarray) -> tuple[dict, list[dict], list[str]]:
    """The pulsed field path's figures for the final sweep: the seed's beam figures, each step's (D4σ,
    modulation, fill factor over its clear aperture) and the grid's warnings (window edge, sampling
    limit: ``beam.grid_checks``, the seed and every step checked)."""
    area = float((x_m[1] - x_m[0]) ** 2)
    apertures = clear_apertures(config, states)
    first = apertures[config.steps[0].index] if config.steps else None
    seed_beam = BeamFigures.of(fluence_of(seed_field), x_m, x_m, first, area).as_dict()
    probe = new_beam(seed_field, x_m, config.seed.wavelength_m, config.grid.width_m, config.grid.fft_workers)
    checks = [("the seed", grid_checks.check_grid(probe))]
    figures = []
    for step, field in zip(config.steps, fields, strict=True):
        probe.field = np.ascontiguousarray(field[None, :, :])
        checks.append((step_label(config.steps, step.index), grid_checks.check_grid(probe)))
        figures.append(BeamFigures.of(fluence_of(field), x_m, x_m, apertures[step.index], area).as_dict())
    warnings = grid_checks.grid_warnings(checks, config.limits, config.grid.width_m, config.grid.points)
    return seed_beam, figures, warnings
