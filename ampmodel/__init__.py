"""ampmodel: a spatially resolved model of laser amplifiers.

Public API (SPEC section 4): :func:`load_config`, :func:`simulate`, :class:`Result`
(``Result.summary``, ``Result.save``).
"""
from __future__ import annotations

__version__ = "0.1.0"
__all__ = ["__version__", "load_config", "simulate", "Result", "ConfigError"]


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
    raise AttributeError(f"module 'ampmodel' has no attribute {name!r}")
