"""Unit suffixes of config keys and their conversion to SI.

Config keys carry their unit as a suffix (``length_mm``, ``energy_J``, ``loss_per_cm``); inside the
code every quantity is SI (m, s, J, W, m², 1/m, J/m², W/m²). Conversion happens here, once, where a
file is read; :func:`si_name` gives the name the value has inside the code.
"""
from __future__ import annotations

# Suffix -> (SI suffix used inside the code, factor to SI). Longest suffixes are matched first.
SUFFIXES: dict[str, tuple[str, float]] = {
    "_J_cm2": ("_J_m2", 1e4),
    "_W_cm2": ("_W_m2", 1e4),
    "_m2_W": ("_m2_W", 1.0),
    "_m_W": ("_m_W", 1.0),
    "_per_cm": ("_per_m", 1e2),
    "_per_m3": ("_per_m3", 1.0),
    "_per_m": ("_per_m", 1.0),
    "_cm2": ("_m2", 1e-4),
    "_m": ("_m", 1.0),
    "_cm": ("_m", 1e-2),
    "_mm": ("_m", 1e-3),
    "_um": ("_m", 1e-6),
    "_nm": ("_m", 1e-9),
    "_s": ("_s", 1.0),
    "_us": ("_s", 1e-6),
    "_ns": ("_s", 1e-9),
    "_ps": ("_s", 1e-12),
    "_fs": ("_s", 1e-15),
    "_mJ": ("_J", 1e-3),
    "_J": ("_J", 1.0),
    "_W": ("_W", 1.0),
    "_kHz": ("_Hz", 1e3),
    "_Hz": ("_Hz", 1.0),
    "_rad": ("_rad", 1.0),
    "_W_mK": ("_W_mK", 1.0),
    "_per_K": ("_per_K", 1.0),
}
_ORDER = sorted(SUFFIXES, key=len, reverse=True)


def split_unit(key: str) -> tuple[str, str]:
    """Split a config key into (stem, suffix); the suffix is '' for a dimensionless key."""
    for suffix in _ORDER:
        if key.endswith(suffix) and len(key) > len(suffix):
            return key[: -len(suffix)], suffix
    return key, ""


def factor(key: str) -> float:
    """The factor that converts the value of config key ``key`` to SI."""
    return SUFFIXES[split_unit(key)[1]][1] if split_unit(key)[1] else 1.0


def si_name(key: str) -> str:
    """The SI name of config key ``key`` (``length_mm`` -> ``length_m``)."""
    stem, suffix = split_unit(key)
    return stem + SUFFIXES[suffix][0] if suffix else key


def to_si(key: str, value: float) -> float:
    """Convert ``value`` given under config key ``key`` to SI."""
    return float(value) * factor(key)


# Physical constants (CODATA 2018, exact in the SI since 2019).
PLANCK_J_S = 6.62607015e-34
LIGHT_SPEED_M_S = 299792458.0


def photon_energy_J(wavelength_m: float) -> float:
    """Photon energy h·c/λ in J for a vacuum wavelength in m."""
    return PLANCK_J_S * LIGHT_SPEED_M_S / wavelength_m


# How each suffix reads as a unit (axis labels, HDF5 ``units`` attributes of tables kept in config units).
UNIT_TEXT: dict[str, str] = {
    "_J_cm2": "J/cm^2", "_W_cm2": "W/cm^2", "_m2_W": "m^2/W", "_per_cm": "1/cm", "_per_m3": "1/m^3",
    "_per_m": "1/m", "_cm2": "cm^2", "_m": "m", "_cm": "cm", "_mm": "mm", "_um": "um", "_nm": "nm",
    "_s": "s", "_us": "us", "_ns": "ns", "_ps": "ps", "_fs": "fs", "_mJ": "mJ", "_J": "J", "_W": "W",
    "_kHz": "kHz", "_Hz": "Hz", "_rad": "rad", "_W_mK": "W/(m K)", "_per_K": "1/K", "_dB": "dB",
}


def unit_of(key: str) -> str:
    """The unit a key's suffix names, as plain text (``peak_fluence_J_cm2`` -> "J/cm^2"); "1" without one.

    ``gain_dB`` (summary.json of fibre runs) reads as "dB".
    """
    if key.endswith("_dB") and len(key) > 3:
        return "dB"
    return UNIT_TEXT.get(split_unit(key)[1], "1")


# Units as a reader sees them on a figure or a page (superscripts, µ); others as UNIT_TEXT writes them.
_SHOWN = {"J/cm^2": "J/cm²", "W/cm^2": "W/cm²", "cm^2": "cm²", "m^2/W": "m²/W", "1/m^3": "1/m³", "um": "µm",
          "us": "µs"}


def shown_unit(unit: str) -> str:
    """``unit`` (as :func:`unit_of` gives it) as a reader sees it: "J/cm^2" -> "J/cm²", "um" -> "µm"."""
    return _SHOWN.get(unit, unit)

