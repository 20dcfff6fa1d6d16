"""TODO"""
from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config

__all__ = ["ConfigError", "load_config"]
