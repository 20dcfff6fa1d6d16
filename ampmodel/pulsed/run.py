"""Orchestration: validated description -> initial state -> steps in order -> diagnostics -> Result."""
from __future__ import annotations

import numpy as np

from ampmodel.beam import field as field_path
from ampmodel.beam import grid_checks
from ampmodel.beam.field_steps import FIELD_STEP_ACTIONS
from ampmodel.beam.fluence_steps import FLUENCE_STEP_ACTIONS
from ampmodel.beam.state import BeamState, StepOutcome
from ampmodel.description import Config, Step, step_label
from ampmodel.kernels import beam_shapes
from ampmodel.kernels.beam_figures import aperture_figures, d4sigma
from ampmodel.media import gain_maps
from ampmodel.output.result import MediumRecord, Result, StepRecord
from ampmodel.progress import progress_bar
from ampmodel.pulsed import diagnostics, trains
from ampmodel.pulsed import repeats as timing
from ampmodel.pulsed.clocks import Timeline, medium_clocks
from ampmodel.pulsed.field_pass import pass_medium_field
from ampmodel.pulsed.passes import MediumState, pass_medium


def simulate_pulsed(config: Config, progress: bool | None = False) -> Result:
    """Run a validated configuration and return its Result (nothing is written).

    Parameters
    ----------
    config : Config from :func:`ampmodel.load_config`
    progress : True shows a progress bar on stderr, None shows it on an interactive terminal
    """
    grid, seed = config.grid, config.seed
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    y = x.copy()
    # The gain maps first: their construction's temporaries are freed before the beam is allocated.
    maps = {m.name: gain_maps.gain_map(m, x, y) for m in config.media}
    states = {}
    for m in config.media:
        gm = maps[m.name]
        states[m.name] = MediumState(
            name=m.name, ln_gain=gm.gain_per_m * gm.slice_length_m, mask=gm.mask,
            saturation_fluence_J_m2=m.material.saturation_fluence_J_m2, slice_length_m=gm.slice_length_m,
            loss_per_m=m.loss_per_m, n2_m2_W=m.material.n2_m2_W)

    t, weights, dt = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices)
    if grid.diffraction or seed.waist_m is not None:
        seed_field = _seed_field(config, x, y)
        seed_map = field_path.fluence_of(seed_field)
    else:
        seed_map = beam_shapes.seed_fluence(x, y, seed.profile, seed.diameter_m, seed.order, seed.energy_J)

    def new_beam():
        """A fresh seed pulse on the grid (a field beam with diffraction)."""
        if grid.diffraction:
            return field_path.start_beam(seed_field, weights, x, y, dt, seed.wavelength_m, grid.width_m,
                                     grid.fft_workers)
        fluence = weights[:, None, None] * seed_map[None, :, :]
        return BeamState(fluence=fluence, b_integral=np.zeros(fluence.shape), x_m=x, y_m=y, dt_s=dt,
                         wavelength_m=seed.wavelength_m)

    beam = new_beam()
    area = beam.pixel_area_m2
    seed_power = weights * seed_map.sum() * area / dt

    timeline = Timeline(medium_clocks(config, maps, area))
    apertures = _clear_apertures(config, states)

    def act(step: Step, beam, tick) -> StepOutcome:
        """One step that is not a repeat, on the field path or the fluence path."""
        if grid.diffraction and step.kind == "pass":
            index = config.medium(step.medium).material.refractive_index
            return pass_medium_field(beam, states[step.medium], index, reverse=step.reverse, tick=tick)
        if grid.diffraction:
            return FIELD_STEP_ACTIONS[step.kind](beam, step)
        if step.kind == "pass":
            return pass_medium(beam, states[step.medium], reverse=step.reverse, tick=tick)
        return FLUENCE_STEP_ACTIONS[step.kind](beam, step)

    def run_layout(beam, tick=None, record: bool = True):
        """The steps in order on ``beam`` (each followed by its delay; repeats round trip by round
        trip): their outcomes, the beam after each (``record``) and the grid checks."""
        outcomes: list[StepOutcome] = []
        records: list[StepRecord] = []
        checks = [("the seed", grid_checks.check_grid(beam))] if grid.diffraction and record else []
        power_before = float(seed_power.max()) if seed_power.size else 0.0
        for step in config.steps:
            outcome = timing.run_step(step, beam, states, timeline, act, tick)
            if record:
                fluence = beam.fluence
                fluence_map = fluence.sum(axis=0)
                power = fluence.sum(axis=(1, 2)) * area / dt
                if grid.diffraction:
                    label = step_label(config.steps, step.index)
                    checks.append((label, grid_checks.check_grid(beam, fluence=fluence)))
                outcome.extras["beam"] = beam_figures(fluence_map, x, y, apertures[step.index], area)
                outcome.extras["peak_power_W"] = max(power_before, float(power.max()) if power.size else 0.0)
                power_before = float(power.max()) if power.size else 0.0
                records.append(timing.step_record(step, beam, outcome, fluence_map, power))
            outcomes.append(outcome)
        return outcomes, records, checks

    train = None
    if seed.repetition_rate_Hz is not None:
        with progress_bar(progress, unit="pulse", desc="pulse train") as bar:
            train = trains.run_train(config, new_beam, run_layout, states, timeline, seed_map,
                                     bar.update if bar is not None else None)
        beam, outcomes, records, checks = train.beam, train.outcomes, train.records, train.checks
        initial_ln_gain, pumped, decayed = train.ln_gain_before, train.pumped_J, train.decayed_J
    else:
        initial_ln_gain = None               # the gain maps as built (no copy)
        with progress_bar(progress, total=timing.slice_passes(config), unit="slice", desc="amplifying") as bar:
            outcomes, records, checks = run_layout(beam, tick=bar.update if bar is not None else None)
        pumped = {n: c.pumped_J for n, c in timeline.clocks.items()}
        decayed = {n: c.decayed_J for n, c in timeline.clocks.items()}

    media_records = {}
    for m in config.media:
        s = states[m.name]
        final = np.divide(s.ln_gain, s.slice_length_m, out=s.ln_gain)      # the state is done: in place
        initial = maps[m.name].gain_per_m if initial_ln_gain is None else initial_ln_gain[m.name] / s.slice_length_m
        media_records[m.name] = MediumRecord(
            name=m.name, gain_initial_per_m=initial, gain_final_per_m=final,
            slice_length_m=s.slice_length_m,
            saturation_fluence_J_m2=m.material.saturation_fluence_J_m2,
            saturation_intensity_W_m2=m.material.saturation_intensity_W_m2,
            material=m.material.name, sources=dict(m.material.sources),
            pumped_J=pumped[m.name], decayed_J=decayed[m.name])
    grid_warnings = grid_checks.grid_warnings(checks, config.limits, grid.width_m, grid.points)
    seed_aperture = apertures[config.steps[0].index] if config.steps else np.ones_like(seed_map, dtype=bool)
    summary = diagnostics.summarise(config, beam, seed_map, outcomes, media_records, maps,
                                    seed_beam=beam_figures(seed_map, x, y, seed_aperture, area),
                                    extra_warnings=grid_warnings)
    summary["layout_time_ns"] = (train.summary["layout_time_s"] if train else timeline.elapsed_s) * 1e9
    if train is not None:
        summary["average_power_W"] = train.summary["average_power_W"]
        summary["train"] = train.summary
        summary["warnings"].extend(train.warnings)
    return Result(config=config, x_m=x, y_m=y, t_s=t, seed_fluence_J_m2=seed_map, seed_power_W=seed_power,
                  steps=records, media=media_records, summary=summary,
                  output_field=beam.field if grid.diffraction else None,
                  train=train.datasets if train is not None else {})


def _seed_field(config: Config, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The seed's field at the start plane (waist position, curvature, M²: beam_shapes.seed_start_field)."""
    seed = config.seed
    try:
        return beam_shapes.seed_start_field(x, y, seed.profile, seed.diameter_m, seed.order, seed.energy_J,
                                      seed.wavelength_m, waist_m=seed.waist_m, curvature_m=seed.curvature_m,
                                      m_squared=seed.m_squared, screen_seed=seed.phase_screen_seed)
    except ValueError as exc:
        from ampmodel.config.checks import ConfigError
        raise ConfigError([f"{config.source}: seed: {exc}"]) from None


def _clear_apertures(config: Config, states: dict[str, MediumState]) -> dict[int, np.ndarray]:
    """The clear aperture each step's beam figures are taken over: a pass's own medium; any other
    step the next medium the beam passes (after the last pass, the last one passed; a repeat: the
    first medium of its round trip)."""
    out: dict[int, np.ndarray] = {}
    # (index of the step, the pass): a repeat counts with the first pass of its round trip
    passes = [(s.index, s if s.kind == "pass" else next(i for i in s.steps if i.kind == "pass"))
              for s in config.steps if s.kind == "pass" or any(i.kind == "pass" for i in s.steps)]
    fallback = next(iter(states.values())).mask if states else None
    for step in config.steps:
        ahead = [p for index, p in passes if index >= step.index]
        chosen = ahead[0] if ahead else (passes[-1][1] if passes else None)
        out[step.index] = states[chosen.medium].mask if chosen is not None else fallback
    return out


def beam_figures(fluence_map: np.ndarray, x: np.ndarray, y: np.ndarray, aperture: np.ndarray | None,
                 pixel_area_m2: float) -> dict[str, float]:
    """D4σ diameters (mm), peak-to-mean modulation and fill factor over ``aperture`` of a fluence map
    (definitions in kernels/beam_figures.py and the README)."""
    dx4, dy4 = d4sigma(fluence_map, x, y)
    inside = aperture if aperture is not None else np.ones(fluence_map.shape, dtype=bool)
    modulation, fill = aperture_figures(fluence_map, inside, pixel_area_m2)
    return {"d4sigma_x_mm": dx4 * 1e3, "d4sigma_y_mm": dy4 * 1e3, "modulation_peak_to_mean": modulation,
            "fill_factor": fill}
