"""Orchestration: validated description -> initial state -> steps in order -> diagnostics -> Result."""
from __future__ import annotations

import sys
from contextlib import nullcontext

import numpy as np

from . import beams, diagnostics, pumping
from .description import Config
from .layout import STEP_ACTIONS, BeamState, MediumState, StepOutcome, pass_medium
from .results import MediumRecord, Result, StepRecord


def _progress(total: int, enabled: bool | None):
    """A tqdm bar over z-slice passes, shown on an interactive terminal (or when forced on)."""
    if enabled is None:
        enabled = sys.stderr.isatty()
    if not enabled or total < 50:
        return nullcontext(None)
    from tqdm import tqdm
    return tqdm(total=total, unit="slice", desc="amplifying", leave=False)


def memory_estimate_bytes(config: Config) -> int:
    """Bytes the arrays of a run need at their peak (float64): the beam's fluence and B-integral per
    time slice with one working copy and the kernel's temporaries, each medium's gain three times
    (working, initial, final), and one map per step for the records."""
    pixels = config.grid.points ** 2
    if config.mode == "cw":
        # cw: per medium the gain, small-signal gain, saturation intensity, the two direction sums,
        # the intensity entering each voxel in each pass, and (pumped) the pump's fields, on the
        # internal grid (loss sub-slices, at most MAX_LOSS_SUBSTEPS, counted as 4 here), plus the maps.
        passes = {m.name: sum(1 for s in config.steps if s.kind == "pass" and s.medium == m.name)
                  for m in config.media}
        media = sum((8 + passes[m.name]) * m.slices * pixels * (4 if m.loss_per_m > 0 else 1) for m in config.media)
        return 8 * (media + (3 + len(config.steps)) * pixels)
    beam = 5 * config.grid.time_slices * pixels
    media = sum(3 * m.slices * pixels for m in config.media)
    records = 2 * len(config.steps) * pixels
    return 8 * (beam + media + records)


def available_memory_bytes() -> int | None:
    """Memory available to a new allocation (Linux /proc/meminfo MemAvailable), or None if unknown."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def check_memory(config: Config) -> int:
    """Refuse, before allocating, a run whose arrays would not fit in the available memory.

    Returns the estimate in bytes; raises ConfigError (bad input, exit 2) naming the grid keys."""
    need, have = memory_estimate_bytes(config), available_memory_bytes()
    if have is not None and need > 0.8 * have:
        from .config import ConfigError
        raise ConfigError([f"{config.source}: grid: the run needs about {need / 2**30:.1f} GiB of arrays but "
                           f"{have / 2**30:.1f} GiB are available; lower grid.points, grid.time_slices or "
                           f"the media's slices"])
    return need


def simulate(config: Config, progress: bool | None = False) -> Result:
    """Run a validated configuration and return its Result (nothing is written).

    Parameters
    ----------
    config : Config from :func:`ampmodel.load_config`
    progress : True shows a progress bar on stderr, None shows it on an interactive terminal
    """
    check_memory(config)
    if config.mode == "cw":
        from .cw import simulate_cw
        return simulate_cw(config, progress)
    grid, seed = config.grid, config.seed
    x = beams.pixel_centres(grid.points, grid.width_m)
    y = x.copy()
    t, weights, dt = beams.time_slices(seed.shape, seed.duration_s, grid.time_slices)
    seed_map = beams.seed_fluence(x, y, seed.profile, seed.diameter_m, seed.order, seed.energy_J)
    fluence = weights[:, None, None] * seed_map[None, :, :]
    beam = BeamState(fluence=fluence, b_integral=np.zeros_like(fluence), x_m=x, y_m=y, dt_s=dt,
                     wavelength_m=seed.wavelength_m)
    seed_power = fluence.sum(axis=(1, 2)) * beam.pixel_area_m2 / dt

    maps = {m.name: pumping.gain_map(m, x, y) for m in config.media}
    states = {}
    for m in config.media:
        gm = maps[m.name]
        states[m.name] = MediumState(
            name=m.name, ln_gain=gm.gain_per_m * gm.slice_length_m, mask=gm.mask,
            saturation_fluence_J_m2=m.material.saturation_fluence_J_m2, slice_length_m=gm.slice_length_m,
            loss_per_m=m.loss_per_m, n2_m2_W=m.material.n2_m2_W)
    initial_ln_gain = {name: s.ln_gain.copy() for name, s in states.items()}

    total_slices = sum(config.medium(s.medium).slices for s in config.steps if s.kind == "pass")
    outcomes: list[StepOutcome] = []
    records: list[StepRecord] = []
    with _progress(total_slices, progress) as bar:
        tick = bar.update if bar is not None else None
        for step in config.steps:
            if step.kind == "pass":
                outcome = pass_medium(beam, states[step.medium], reverse=step.reverse, tick=tick)
            else:
                outcome = STEP_ACTIONS[step.kind](beam, step)
            outcomes.append(outcome)
            records.append(StepRecord(
                index=step.index, kind=step.kind, medium=step.medium,
                fluence_J_m2=beam.fluence.sum(axis=0),
                power_W=beam.fluence.sum(axis=(1, 2)) * beam.pixel_area_m2 / dt,
                b_integral_rad=beam.b_integral.max(axis=0)))

    media_records = {}
    for m in config.media:
        s = states[m.name]
        media_records[m.name] = MediumRecord(
            name=m.name, gain_initial_per_m=initial_ln_gain[m.name] / s.slice_length_m,
            gain_final_per_m=s.ln_gain / s.slice_length_m, slice_length_m=s.slice_length_m,
            saturation_fluence_J_m2=m.material.saturation_fluence_J_m2,
            saturation_intensity_W_m2=m.material.saturation_intensity_W_m2,
            material=m.material.name, sources=dict(m.material.sources))
    summary = diagnostics.summarise(config, beam, seed_map, outcomes, media_records, maps)
    return Result(config=config, x_m=x, y_m=y, t_s=t, seed_fluence_J_m2=seed_map, seed_power_W=seed_power,
                  steps=records, media=media_records, summary=summary)
