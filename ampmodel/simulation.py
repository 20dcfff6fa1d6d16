"""One run, whatever its kind: the memory check, then the path that computes it.

A layout of fibres goes to :mod:`ampmodel.fibre.run`, a cw run to :mod:`ampmodel.cw.run`, any other
to :mod:`ampmodel.pulsed.run`. Each path estimates the memory its arrays need; a run that would not fit
is refused before anything is allocated.
"""
from __future__ import annotations

from ampmodel import notices
from ampmodel.config.checks import ConfigError
from ampmodel.cw import run as cw_run
from ampmodel.description import Config
from ampmodel.fibre import run as fibre_run
from ampmodel.output.result import Result
from ampmodel.pulsed import memory as pulsed_memory
from ampmodel.pulsed import run as pulsed_run


def _is_fibre(config: Config) -> bool:
    return any(m.kind == "fibre" for m in config.media)


def memory_estimate_bytes(config: Config) -> int:
    """Peak bytes of a run's arrays (the interpreter and its modules not included), from its path."""
    if _is_fibre(config):
        return fibre_run.memory_estimate_bytes(config)
    if config.mode == "cw":
        return cw_run.memory_estimate_bytes(config)
    return pulsed_memory.memory_estimate_bytes(config)


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
        sizes = [f"grid.points = {config.grid.points}"]
        if config.mode == "pulsed":
            sizes.append(f"grid.time_slices = {config.grid.time_slices}")
        sizes.append(f"slices = {max(m.slices for m in config.media)} (largest medium)")
        raise ConfigError([f"{config.source}: grid: {', '.join(sizes)}: the run needs about {need / 2**30:.1f} GiB "
                           f"of arrays but {have / 2**30:.1f} GiB are available (the limit is 80 % of it); lower "
                           f"grid.points, grid.time_slices or the media's slices (nothing was allocated)"])
    return need


def simulate(config: Config, progress: bool | None = False) -> Result:
    """Run a validated configuration and return its Result (nothing is written).

    Parameters
    ----------
    config : Config from :func:`ampmodel.load_config`
    progress : True shows a progress bar on stderr, None shows it on an interactive terminal

    Raises
    ------
    ConfigError : the run would not fit in the available memory, or (cw) its steady state does not
        converge within the solver's iterations
    """
    check_memory(config)
    if _is_fibre(config):
        result = fibre_run.simulate_fibre(config, progress)
    elif config.mode == "cw":
        result = cw_run.simulate_cw(config, progress)
    else:
        result = pulsed_run.simulate_pulsed(config, progress)
    result.summary = notices.settle(result.summary, config.limits.mute)
    return result
