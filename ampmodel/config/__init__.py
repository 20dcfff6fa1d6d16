"""The run config: TOML text (or a dict) to a validated, SI description (ampmodel.description).

load.py (load_config: the whole config checked, every problem at once), medium.py and steps.py (the
media and the layout), schema.py (every table's keys, types and ranges as data), keys.py (what a key
is: Key and its builders), checks.py (what every check shares: Problems, ConfigError), text.py (TOML
read and written, --set), files.py (data files a config names), measured.py (the seed's measured
pulse trace and spectrum, from CSV files or inline arrays), profile.py (a measured seed profile's
frames), cw.py, fibre.py, timing.py, sweep.py
(the keys of one mode or table). Imports description, materials, units and kernels; nothing that runs.
"""
from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config

__all__ = ["ConfigError", "load_config"]
