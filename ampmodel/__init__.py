"""ampmodel: a spatially resolved model of laser amplifiers.

Public API (SPEC sections 4 and 5): :func:`load_config`, :func:`simulate`, :class:`Result`
(``Result.summary``, ``Result.save``); :func:`run_sweep` (the [sweep] table, in parallel,
resumable), :func:`size_to_target` (the value of one parameter that reaches a target figure, under
limits) and :func:`run_spread` (a tolerance run of the [spread] table, with percentiles).
"""
from __future__ import annotations

__version__ = "0.1.0"
__all__ = ["__version__", "load_config", "simulate", "Result", "ConfigError", "run_sweep", "size_to_target",
           "run_spread"]


def __getattr__(name: str):
    # Imported on first use, so that `ampmodel --help` starts fast.
    if name in ("load_config", "ConfigError"):
        from . import config
        return getattr(config, name)
    if name == "simulate":
        from .solver import simulate
        return simulate
    if name == "Result":
        from .results import Result
        return Result
    if name == "run_sweep":
        from .sweeps import run_sweep
        return run_sweep
    if name == "size_to_target":
        from .sizing import size_to_target
        return size_to_target
    if name == "run_spread":
        from .spread import run_spread
        return run_spread
    raise AttributeError(f"module 'ampmodel' has no attribute {name!r}")
