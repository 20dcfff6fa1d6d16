"""Gain-medium materials: the data model shared by the built-in files and the config's material tables.

A material is described by the keys in :data:`MATERIAL_KEYS` (config units, see ``units.py``). The
built-in materials live in one TOML file each beside this module (``registry.py`` loads them); a run
config may instead give a ``[medium.material]`` table with the same keys.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

from ..units import photon_energy_J, si_name, to_si


@dataclass(frozen=True)
class KeySpec:
    """One material key: whether it is required, its plausible range (config units), and its meaning."""

    required: bool
    low: float
    high: float
    meaning: str
    allow_zero: bool = False


# Config key -> spec. Ranges are plausibility bounds, wide enough for any real laser material.
MATERIAL_KEYS: dict[str, KeySpec] = {
    "wavelength_nm": KeySpec(True, 150.0, 20000.0, "lasing (signal) wavelength"),
    "emission_cross_section_cm2": KeySpec(True, 1e-24, 1e-16, "stimulated-emission cross-section at the lasing wavelength"),
    "absorption_cross_section_cm2": KeySpec(False, 1e-26, 1e-16, "absorption cross-section at the lasing wavelength (> 0: quasi-three-level)", allow_zero=True),
    "upper_lifetime_us": KeySpec(True, 1e-4, 1e5, "upper-state (fluorescence) lifetime"),
    "refractive_index": KeySpec(True, 1.0, 5.0, "refractive index at the lasing wavelength"),
    "n2_m2_W": KeySpec(False, 1e-22, 1e-16, "nonlinear refractive index (for the B-integral)", allow_zero=True),
    "damage_fluence_J_cm2": KeySpec(False, 1e-3, 1e4, "laser-damage fluence (bulk or coating) ..."),
    "damage_pulse_ns": KeySpec(False, 1e-6, 1e9, "... and the pulse length it was quoted at"),
    "damage_intensity_W_cm2": KeySpec(False, 1e2, 1e13, "cw laser-damage intensity (bulk or coating), for cw runs"),
    "doping_per_m3": KeySpec(False, 1e20, 1e29, "active-ion density (typical doping)"),
    "pump_wavelength_nm": KeySpec(False, 150.0, 20000.0, "pump wavelength"),
    "pump_absorption_per_cm": KeySpec(False, 1e-4, 1e4, "small-signal pump absorption coefficient at the typical doping"),
    "pump_absorption_cross_section_cm2": KeySpec(False, 1e-26, 1e-16, "absorption cross-section at the pump wavelength"),
    "pump_emission_cross_section_cm2": KeySpec(False, 1e-26, 1e-16, "emission cross-section at the pump wavelength (quasi-three-level bleaching limit)", allow_zero=True),
}
STRING_KEYS = {"name": "material name", "broadening": "line broadening: 'homogeneous' or 'inhomogeneous'"}
BROADENINGS = ("homogeneous", "inhomogeneous")


@dataclass(frozen=True)
class Material:
    """A gain material, all values SI.

    Attributes carry their unit in the name. ``sources`` maps each config key to its published source
    (or "from memory — verify"); ``notes`` maps a key to remarks such as the range in the literature.
    """

    name: str
    wavelength_m: float
    emission_cross_section_m2: float
    upper_lifetime_s: float
    refractive_index: float
    absorption_cross_section_m2: float = 0.0
    n2_m2_W: float = 0.0
    damage_fluence_J_m2: float | None = None
    damage_pulse_s: float | None = None
    damage_intensity_W_m2: float | None = None
    doping_per_m3: float | None = None
    pump_wavelength_m: float | None = None
    pump_absorption_per_m: float | None = None
    pump_absorption_cross_section_m2: float | None = None
    pump_emission_cross_section_m2: float | None = None
    broadening: str = "homogeneous"
    description: str = ""
    sources: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    notes: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))

    @property
    def quasi_three_level(self) -> bool:
        """True when the lower laser level is thermally populated (absorption at the lasing wavelength)."""
        return self.absorption_cross_section_m2 > 0.0

    @property
    def photon_energy_J(self) -> float:
        return photon_energy_J(self.wavelength_m)

    @property
    def saturation_fluence_J_m2(self) -> float:
        """Fsat = h·nu/(sigma_e + sigma_a) (Frantz & Nodvik 1963; quasi-three-level form)."""
        return self.photon_energy_J / (self.emission_cross_section_m2 + self.absorption_cross_section_m2)

    @property
    def saturation_intensity_W_m2(self) -> float:
        """Isat = h·nu/((sigma_e + sigma_a)·tau)."""
        return self.saturation_fluence_J_m2 / self.upper_lifetime_s


def material_from_values(values: Mapping[str, object], name: str, description: str = "",
                         sources: Mapping[str, str] | None = None,
                         notes: Mapping[str, str] | None = None) -> Material:
    """Build a Material from values under their config keys (config units); keys must be validated.

    Parameters
    ----------
    values : mapping of config key (see MATERIAL_KEYS, plus 'broadening') -> value in config units
    name : the material's name
    """
    kwargs: dict[str, object] = {}
    for key, value in values.items():
        if key in MATERIAL_KEYS:
            kwargs[si_name(key)] = to_si(key, value)
        elif key == "broadening":
            kwargs["broadening"] = str(value)
    return Material(name=name, description=description,
                    sources=MappingProxyType(dict(sources or {})),
                    notes=MappingProxyType(dict(notes or {})), **kwargs)
