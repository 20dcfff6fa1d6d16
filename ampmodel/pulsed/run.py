"""A pulsed run: the gain maps and the seed on the grid, the steps of the layout in order (or a pulse
train to its periodic steady state), the diagnostics, the Result."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.beam import field as field_path
from ampmodel.beam import grid_checks
from ampmodel.beam.field_steps import FIELD_STEP_ACTIONS
from ampmodel.beam.fluence_steps import FLUENCE_STEP_ACTIONS
from ampmodel.beam.state import BeamFigures, BeamState, StepOutcome
from ampmodel.config.checks import ConfigError
from ampmodel.description import Config, Step, step_label
from ampmodel.kernels import beam_shapes, pulse_shape
from ampmodel.kernels.pulse_shape import true_peak
from ampmodel.media import gain_maps
from ampmodel.media.gain_maps import GainMap
from ampmodel.media.ions import SliceCrossSections, slice_cross_sections
from ampmodel.output.result import MediumRecord, Result, StepRecord
from ampmodel.progress import progress_bar
from ampmodel.pulsed import diagnostics, repeats, spectra, trains
from ampmodel.pulsed.clocks import Timeline, medium_clocks
from ampmodel.pulsed.field_pass import pass_medium_field
from ampmodel.pulsed.passes import MediumState, pass_medium
from ampmodel.pulsed.thermal import add_train_heat, lens_phases


@dataclass
class PulsedLayout:
    """A pulsed run's initial state and its step loop.

    x_m : (Nx,) pixel centres (the grid is square); maps : medium name -> its gain map as built;
    states : medium name -> the state the passes deplete; t_s, weights, dt_s : the time slices, the
    share of the seed's energy in each and their width; seed_map : (Ny, Nx) the seed's fluence (J/m²);
    seed_field : the seed's field at the start plane (field path, or a seed with a waist) or None;
    seed_power_W : (Nt,) the seed's power; apertures : step index -> the clear aperture its beam
    figures are taken over; wavelengths_m : (Nt,) the wavelength of each time slice; peak_factor :
    (Nt,) the largest power inside each time slice over its mean (the seed's shape; the true peaks).
    """

    config: Config
    x_m: np.ndarray
    maps: dict[str, GainMap]
    states: dict[str, MediumState]
    t_s: np.ndarray
    weights: np.ndarray
    dt_s: float
    seed_map: np.ndarray
    seed_field: np.ndarray | None
    seed_power_W: np.ndarray
    timeline: Timeline
    apertures: dict[int, np.ndarray]
    wavelengths_m: np.ndarray
    peak_factor: np.ndarray

    @classmethod
    def build(cls, config: Config) -> PulsedLayout:
        """The gain maps first (their construction's temporaries are freed before the beam is
        allocated), then the seed and the media's clocks."""
        grid, seed = config.grid, config.seed
        x = beam_shapes.pixel_centres(grid.points, grid.width_m)
        try:
            maps = {m.name: gain_maps.gain_map(m, x, x) for m in config.media}
        except gain_maps.GainMapError as exc:
            raise ConfigError([f"{config.source}: {exc}"]) from None
        t, weights, dt = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices, seed.pulse_trace)
        wavelengths = spectra.slice_wavelengths(config, t)
        states = {m.name: _medium_state(m, maps[m.name], slice_cross_sections(m, wavelengths))
                  for m in config.media}
        seed_field = None
        area = float((x[1] - x[0]) ** 2)
        if seed.beam is not None:            # seed.from: an earlier run's beam, per time slice
            seed_map = seed.beam.fluence_J_m2.sum(axis=0)
            seed_power = seed.beam.fluence_J_m2.sum(axis=(1, 2)) * area / dt
        elif grid.diffraction or seed.waist_m is not None:
            seed_field = _seed_field(config, x, x)
            seed_map = field_path.fluence_of(seed_field)
        else:
            shape = seed.measured.on_grid(x, x)[0] if seed.measured is not None else None
            seed_map = beam_shapes.seed_fluence(x, x, seed.profile, seed.diameter_m, seed.order, seed.energy_J,
                                                shape)
        if seed.beam is None:
            seed_power = weights * seed_map.sum() * area / dt
        return cls(config, x, maps, states, t, weights, dt, seed_map, seed_field, seed_power,
                   Timeline(medium_clocks(config, maps, area)), _clear_apertures(config, states), wavelengths,
                   beam_shapes.slice_peak_factors(seed.shape, grid.time_slices, seed.pulse_trace))

    @property
    def pixel_area_m2(self) -> float:
        return float((self.x_m[1] - self.x_m[0]) ** 2)

    def new_beam(self):
        """A fresh seed pulse on the grid (a field beam with diffraction)."""
        grid, seed = self.config.grid, self.config.seed
        if seed.beam is not None:
            return self._beam_from(seed.beam)
        if grid.diffraction:
            beam = field_path.start_beam(self.seed_field, self.weights, self.x_m, self.x_m, self.dt_s,
                                         seed.wavelength_m, grid.width_m, grid.fft_workers)
            beam.peak_factor = self.peak_factor
            return beam
        fluence = self.weights[:, None, None] * self.seed_map[None, :, :]
        return BeamState(fluence=fluence, b_integral=np.zeros(fluence.shape), x_m=self.x_m, y_m=self.x_m,
                         dt_s=self.dt_s, wavelength_m=seed.wavelength_m, peak_factor=self.peak_factor)

    def _beam_from(self, taken):
        """A copy of an earlier run's beam (seed.from), its B-integral carried on."""
        grid, seed = self.config.grid, self.config.seed
        if grid.diffraction:
            beam = field_path.FieldBeam(field=taken.complex_field.copy(), b_integral=taken.b_integral_rad.copy(), x_m=self.x_m,
                                        y_m=self.x_m, dt_s=self.dt_s, wavelength_m=seed.wavelength_m,
                                        width_m=grid.width_m, workers=grid.fft_workers, peak_factor=self.peak_factor)
            return beam
        return BeamState(fluence=taken.fluence_J_m2.copy(), b_integral=taken.b_integral_rad.copy(), x_m=self.x_m,
                         y_m=self.x_m, dt_s=self.dt_s, wavelength_m=seed.wavelength_m, peak_factor=self.peak_factor)

    def act(self, step: Step, beam, tick) -> StepOutcome:
        """One step that is not a repeat, on the field path or the fluence path."""
        diffraction = self.config.grid.diffraction
        if step.kind == "pass":
            state = self.states[step.medium]
            if diffraction:
                index = self.config.medium(step.medium).material.refractive_index
                return pass_medium_field(beam, state, index, reverse=step.reverse, tick=tick)
            return pass_medium(beam, state, reverse=step.reverse, tick=tick)
        return (FIELD_STEP_ACTIONS if diffraction else FLUENCE_STEP_ACTIONS)[step.kind](beam, step)

    def run_layout(self, beam, tick=None, record: bool = True):
        """The steps in order on ``beam`` (each followed by its delay; repeats round trip by round
        trip): their outcomes, the beam after each (``record``) and the grid checks."""
        config, diffraction = self.config, self.config.grid.diffraction
        outcomes: list[StepOutcome] = []
        records: list[StepRecord] = []
        checks = [("the seed", grid_checks.check_grid(beam))] if diffraction and record else []
        power_before = true_peak(self.seed_power_W, self.peak_factor)
        for step in config.steps:
            outcome = repeats.run_step(step, beam, self.states, self.timeline, self.act, tick, config.limits)
            if record:
                fluence = beam.fluence
                fluence_map = fluence.sum(axis=0)
                power = fluence.sum(axis=(1, 2)) * self.pixel_area_m2 / self.dt_s
                power_after = true_peak(power, self.peak_factor)
                if diffraction:
                    checks.append((step_label(config.steps, step.index),
                                   grid_checks.check_grid(beam, fluence=fluence)))
                outcome.beam = BeamFigures.of(fluence_map, self.x_m, self.x_m, self.apertures[step.index],
                                              self.pixel_area_m2)
                outcome.peak_power_W = max(power_before, power_after)
                outcome.duration_s = pulse_shape.fwhm_s(*pulse_shape.resampled(
                    power, config.seed.shape, config.seed.duration_s, trace=config.seed.pulse_trace))
                power_before = power_after
                records.append(repeats.step_record(step, beam, outcome, fluence_map, power))
            outcomes.append(outcome)
        return outcomes, records, checks


def simulate_pulsed(config: Config, progress: bool | None = False) -> Result:
    """Run a validated pulsed configuration of bulk media and return its Result (nothing is written).

    Parameters
    ----------
    config : Config from :func:`ampmodel.load_config`
    progress : True shows a progress bar on stderr, None shows it on an interactive terminal
    """
    run = PulsedLayout.build(config)
    beam = run.new_beam()
    train = None
    if config.seed.repetition_rate_Hz is not None:
        run, train = _train(config, run, progress)
        beam, outcomes, records, checks = train.beam, train.outcomes, train.records, train.checks
        initial_ln_gain, pumped, decayed = train.ln_gain_before, train.pumped_J, train.decayed_J
    else:
        initial_ln_gain = None               # the gain maps as built (no copy)
        with progress_bar(progress, total=repeats.slice_passes(config), unit="slice", desc="amplifying") as bar:
            outcomes, records, checks = run.run_layout(beam, tick=bar.update if bar is not None else None)
        pumped = {n: c.pumped_J for n, c in run.timeline.clocks.items()}
        decayed = {n: c.decayed_J for n, c in run.timeline.clocks.items()}
    media = _media_records(run, initial_ln_gain, pumped, decayed)
    summary = _summary(run, beam, outcomes, media, checks, train)
    if train is not None:
        add_train_heat(config, train, summary, media, run.x_m, config.seed.wavelength_m)
    seed_spectrum = spectra.add_spectra(config, summary, records, run.wavelengths_m, run.seed_power_W, run.dt_s,
                                        run.states)
    chirped = seed_spectrum is not None
    return Result(config=config, x_m=run.x_m, y_m=run.x_m.copy(), t_s=run.t_s, seed_fluence_J_m2=run.seed_map,
                  seed_power_W=run.seed_power_W, steps=records, media=media, summary=summary,
                  wavelength_m=run.wavelengths_m if chirped else None, seed_spectrum_J_m=seed_spectrum,
                  output_field=beam.field if config.grid.diffraction else None,
                  output_fluence=None if config.grid.diffraction else beam.fluence, output_b_integral=beam.b_integral,
                  train=train.datasets if train is not None else {},
                  field_transforms=beam.fft_count if config.grid.diffraction else 0)


def _train(config: Config, run: PulsedLayout, progress: bool | None):
    """A pulse train solved; with diffraction and media whose thermal lens is on, solved again with the
    lens of the first solve's heat on every pass (pulsed/thermal.py). Returns the layout and the train."""
    with progress_bar(progress, unit="pulse", desc="pulse train") as bar:
        train = trains.run_train(config, run.new_beam, run.run_layout, run.states, run.timeline, run.seed_map,
                                 bar.update if bar is not None else None)
    if not config.grid.diffraction:
        return run, train
    phases = lens_phases(config, train, {n: gm.mask for n, gm in run.maps.items()}, run.x_m)
    if not phases:
        return run, train
    run = PulsedLayout.build(config)
    for name, phase in phases.items():
        run.states[name].thermal_phase_rad = phase
    with progress_bar(progress, unit="pulse", desc="pulse train, with its thermal lens") as bar:
        train = trains.run_train(config, run.new_beam, run.run_layout, run.states, run.timeline, run.seed_map,
                                 bar.update if bar is not None else None)
    return run, train


def _medium_state(medium, gm: GainMap, spectral: SliceCrossSections | None) -> MediumState:
    return MediumState(name=medium.name, ln_gain=gm.gain_per_m * gm.slice_length_m, mask=gm.mask,
                       saturation_fluence_J_m2=medium.material.saturation_fluence_J_m2,
                       slice_length_m=gm.slice_length_m, loss_per_m=medium.loss_per_m,
                       n2_m2_W=medium.material.n2_m2_W, spectral=spectral)


def _media_records(run: PulsedLayout, initial_ln_gain: dict[str, np.ndarray] | None, pumped: dict[str, float],
                   decayed: dict[str, float]) -> dict[str, MediumRecord]:
    """Each medium's gain before the first and after the last pass (a train: before and after the
    steady-state pulse, of a cycle its largest), with its pumped and decayed energy over the layout."""
    out = {}
    for m in run.config.media:
        s = run.states[m.name]
        final = np.divide(s.ln_gain, s.slice_length_m, out=s.ln_gain)      # the state is done: in place
        initial = run.maps[m.name].gain_per_m if initial_ln_gain is None else initial_ln_gain[m.name] / s.slice_length_m
        out[m.name] = MediumRecord(
            name=m.name, gain_initial_per_m=initial, gain_final_per_m=final, slice_length_m=s.slice_length_m,
            saturation_fluence_J_m2=m.material.saturation_fluence_J_m2,
            saturation_intensity_W_m2=m.material.saturation_intensity_W_m2,
            material=m.material.name, sources=dict(m.material.sources),
            pumped_J=pumped[m.name], decayed_J=decayed[m.name], ions=run.maps[m.name].ions,
            mask=run.maps[m.name].mask)
    return out


def _summary(run: PulsedLayout, beam, outcomes: list[StepOutcome], media: dict[str, MediumRecord],
             checks: list, train) -> dict:
    """The summary.json dict: the diagnostics, the grid's warnings, the layout time and the train's."""
    config, grid = run.config, run.config.grid
    grid_warnings = grid_checks.grid_warnings(checks, config.limits, grid.width_m, grid.points)
    seed_aperture = (run.apertures[config.steps[0].index] if config.steps
                     else np.ones_like(run.seed_map, dtype=bool))
    seed_beam = BeamFigures.of(run.seed_map, run.x_m, run.x_m, seed_aperture, run.pixel_area_m2)
    summary = diagnostics.summarise(config, beam, run.seed_map, outcomes, media, run.maps,
                                    seed_beam=seed_beam.as_dict(), extra_warnings=grid_warnings)
    power = beam.fluence.sum(axis=(1, 2)) * run.pixel_area_m2 / run.dt_s      # (Nt,) W, the output
    t_fine, p_fine = pulse_shape.resampled(power, config.seed.shape, config.seed.duration_s,
                                           trace=config.seed.pulse_trace)
    summary["output_duration_ns"] = pulse_shape.fwhm_s(t_fine, p_fine) * 1e9
    summary["output_peak_power_W"] = true_peak(power, run.peak_factor)
    summary["layout_time_ns"] = (train.summary["layout_time_s"] if train else run.timeline.elapsed_s) * 1e9
    if config.seed.beam is not None:
        summary["seed_from"] = dict(config.seed.beam.origin)
        summary["warnings"].extend(config.seed.beam.notes)
    if train is not None:
        summary["average_power_W"] = train.summary["average_power_W"]
        summary["train"] = train.summary
        summary["warnings"].extend(train.warnings)
    return summary


def _seed_field(config: Config, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The seed's field at the start plane (waist position, curvature, M²: beam_shapes.seed_start_field)."""
    return field_path.start_field(config.seed, x, y, config.seed.energy_J, config.source)


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
