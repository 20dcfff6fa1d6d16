"""ampmodel: a spatially resolved model of laser amplifiers.

Public API: :func:`load_config` (a TOML file, or a dict, to a validated Config), :func:`simulate`
(a Config to a Result; nothing written), :class:`Result` (``Result.summary``, ``Result.save``),
:class:`ConfigError`; :func:`run_sweep` (the [sweep] table, in parallel, resumable),
:func:`size_to_target` (the value of one parameter that reaches a target figure, under limits) and
:func:`run_spread` (a tolerance run of the [spread] table, with percentiles) and :func:`fit_to_data`
(config values fitted to measurements by least squares).

The names are loaded on first use, so that ``ampmodel --help`` starts fast.
"""
from __future__ import annotations

from ampmodel._version import __version__

__all__ = ["__version__", "load_config", "simulate", "Result", "ConfigError", "run_sweep", "size_to_target",
           "run_spread", "fit_to_data"]


def __getattr__(name: str):
    if name == "load_config":
        from ampmodel.config.load import load_config
        return load_config
    if name == "ConfigError":
        from ampmodel.config.checks import ConfigError
        return ConfigError
    if name == "simulate":
        from ampmodel.simulation import simulate
        return simulate
    if name == "Result":
        from ampmodel.output.result import Result
        return Result
    if name == "run_sweep":
        from ampmodel.studies.sweeps import run_sweep
        return run_sweep
    if name == "size_to_target":
        from ampmodel.studies.sizing import size_to_target
        return size_to_target
    if name == "run_spread":
        from ampmodel.studies.spread import run_spread
        return run_spread
    if name == "fit_to_data":
        from ampmodel.studies.fitting import fit_to_data
        return fit_to_data
    raise AttributeError(f"module 'ampmodel' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
