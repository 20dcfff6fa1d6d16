"""A cw run: the media built, the layout solved to its steady state, the Result assembled.

:mod:`ampmodel.cw.medium` holds each medium's state on its voxel grid, :mod:`ampmodel.cw.steady_state`
the iteration of the layout, :mod:`ampmodel.cw.diagnostics` the summary.
"""
from __future__ import annotations

import numpy as np

from ampmodel.beam.field import fluence_of, start_field
from ampmodel.cw import diagnostics as cw_diagnostics
from ampmodel.cw import field_path
from ampmodel.cw import thermal as cw_thermal
from ampmodel.cw.medium import build_medium
from ampmodel.cw.steady_state import solve
from ampmodel.description import Config
from ampmodel.kernels import beam_shapes
from ampmodel.output.result import MediumRecord, Result, StepRecord


def memory_estimate_bytes(config: Config) -> int:
    """Peak bytes of a cw run's arrays: per medium the gain, small-signal gain, saturation intensity,
    the two direction sums, the intensity entering each voxel in each pass, and (pumped) the pump's
    fields and the heat and temperature, on the internal grid (loss sub-slices, at most MAX_LOSS_SUBSTEPS, counted as 4 here), plus
    the maps."""
    pixels = config.grid.points ** 2
    passes = {m.name: sum(1 for s in config.steps if s.kind == "pass" and s.medium == m.name)
              for m in config.media}
    media = sum((8 + passes[m.name]) * m.slices * pixels * (4 if m.loss_per_m > 0 else 1) for m in config.media)
    media += sum(3 * m.slices * pixels for m in config.media if m.pump is not None)   # heat, its voxel form, rise
    maps = (3 + len(config.steps)) * pixels
    if config.grid.diffraction:     # complex fields: each step's, the beam, its spectrum, FFT scratch
        maps += 2 * (len(config.steps) + 8) * pixels
    return 8 * (media + maps)


def _seed_field(config: Config, x: np.ndarray) -> np.ndarray:
    """The cw seed's field (Ny, Nx) at the start plane, |E|² in W/m² (``beam_shapes.seed_start_field``:
    waist, curvature, M², a measured profile and wavefront); seed.from: the earlier run's field
    (config/chain.py: its /output/field, or sqrt(intensity) with a flat phase)."""
    seed = config.seed
    if seed.beam is not None:
        if seed.beam.complex_field is not None:
            return seed.beam.complex_field.copy()
        return np.sqrt(seed.beam.intensity_W_m2).astype(np.complex128)
    return start_field(seed, x, x, seed.power_W, config.source)


def simulate_cw(config: Config, progress: bool | None = False):
    """Run a validated cw configuration and return its Result (nothing is written).

    Parameters
    ----------
    config : Config with mode "cw"
    progress : True shows a progress bar of the sweeps on stderr, None on an interactive terminal
    """
    grid, seed_cfg = config.grid, config.seed
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    y = x.copy()
    seed_field = actions = None
    if grid.diffraction:
        seed_field = _seed_field(config, x)
        seed = fluence_of(seed_field)
        actions = field_path.field_actions(config, seed_field, x)
    elif seed_cfg.beam is not None:           # seed.from: an earlier cw run's intensity map
        seed = seed_cfg.beam.intensity_W_m2.copy()
    else:
        shape = seed_cfg.measured.on_grid(x, y)[0] if seed_cfg.measured is not None else None
        seed = beam_shapes.seed_fluence(x, y, seed_cfg.profile, seed_cfg.diameter_m, seed_cfg.order,
                                        seed_cfg.power_W, shape)
    states = {m.name: build_medium(m, x, y, config.solver, seed_cfg.wavelength_m) for m in config.media}
    initial = {name: st.coarse(st.g0) for name, st in states.items()}
    sweep = solve(config, states, seed, x, y, progress, actions)
    lensed = False
    if grid.diffraction and cw_thermal.apply_lenses(states, x, y, seed_cfg.wavelength_m):
        # the thermal lens of the steady state's heat, then the steady state again with it (one update:
        # the heat of a four-level medium does not depend on the extraction)
        lensed = True
        sweep = solve(config, states, seed, x, y, progress, field_path.field_actions(config, seed_field, x))
    fields = None
    if grid.diffraction:
        fields, sweep.maps = sweep.maps, [fluence_of(f) for f in sweep.maps]

    records = []
    for step, intensity, oc in zip(config.steps, sweep.maps, sweep.outcomes, strict=True):
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
            sources=dict(m.material.sources), pump_intensity_W_m2=pump_i, ions=st.levels, mask=st.mask)
    summary = cw_diagnostics.summarise(config, seed, sweep, states, media, x)
    if fields is not None:
        cw_diagnostics.add_field_figures(summary, sweep, *field_path.field_figures(config, states, seed_field,
                                                                                    fields, x))
    _add_heat(summary, states, media, x, y, seed_cfg.wavelength_m, lensed)
    if seed_cfg.beam is not None:
        summary["seed_from"] = dict(seed_cfg.beam.origin)
        summary["warnings"].extend(seed_cfg.beam.notes)
    return Result(config=config, x_m=x, y_m=y, t_s=np.zeros(0), seed_fluence_J_m2=None, seed_power_W=None,
                  steps=records, media=media, summary=summary, seed_intensity_W_m2=seed,
                  output_field=fields[-1][None, :, :] if fields else None)


def _add_heat(summary: dict, states: dict, media: dict[str, MediumRecord], x: np.ndarray, y: np.ndarray,
              wavelength_m: float | None, lensed: bool = False) -> None:
    """Each pumped medium's heat, temperature and thermal lens into its summary entry and record."""
    for entry in summary["media"]:
        st = states[entry["name"]]
        if st.pump is None:
            continue
        figures, heat, rise, opd = cw_thermal.heat_entries(st, x, y, wavelength_m or st.medium.material.wavelength_m,
                                                           applied=lensed)
        entry.update(figures)
        rec = media[entry["name"]]
        rec.heat_W_m3, rec.temperature_rise_K, rec.opd_m = heat, rise, opd
