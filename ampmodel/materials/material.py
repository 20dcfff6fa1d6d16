"""Gain-medium materials: the data model shared by the built-in files and the config's material tables.

A material is described by the keys in :data:`MATERIAL_KEYS` (config units, see ``units.py``). The
built-in materials live in one TOML file each beside this module (``registry.py`` loads them); a run
config may instead give a ``[medium.material]`` table with the same keys.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

from ampmodel.kernels.fibre_rates import interpolate_cross_sections
from ampmodel.units import photon_energy_J, si_name, to_si


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
    "raman_gain_m_W": KeySpec(False, 1e-15, 1e-11, "peak stimulated-Raman gain coefficient (fibres: the Raman threshold)"),
    "thermal_conductivity_W_mK": KeySpec(False, 0.1, 2000.0, "thermal conductivity near room temperature (heat and thermal lens)"),
    "dn_dT_per_K": KeySpec(False, -1e-4, 1e-4, "thermo-optic coefficient dn/dT at the lasing wavelength (thermal lens)", allow_zero=True),
    "thermal_expansion_per_K": KeySpec(False, 1e-8, 1e-4, "linear thermal expansion coefficient (depolarisation estimate)"),
    "poisson_ratio": KeySpec(False, 0.01, 0.5, "Poisson's ratio (depolarisation estimate)"),
    "photoelastic_p11": KeySpec(False, -1.0, 1.0, "photo-elastic coefficient p11 (depolarisation estimate)", allow_zero=True),
    "photoelastic_p12": KeySpec(False, -1.0, 1.0, "photo-elastic coefficient p12 (depolarisation estimate)", allow_zero=True),
    "photoelastic_p44": KeySpec(False, -1.0, 1.0, "photo-elastic coefficient p44 (depolarisation estimate)", allow_zero=True),
}
STRING_KEYS = {"name": "material name", "broadening": "line broadening: 'homogeneous' or 'inhomogeneous'"}
BROADENINGS = ("homogeneous", "inhomogeneous")

# Keys a cross-section spectrum can stand in for: (key, spectrum column, wavelength key it is read at).
CROSS_SECTION_STAND_INS = (
    ("emission_cross_section_cm2", "emission", "wavelength_nm"),
    ("absorption_cross_section_cm2", "absorption", "wavelength_nm"),
    ("pump_absorption_cross_section_cm2", "absorption", "pump_wavelength_nm"),
    ("pump_emission_cross_section_cm2", "emission", "pump_wavelength_nm"),
)
CROSS_SECTION_COLUMNS = {"wavelength_nm": "wavelengths of the table, strictly increasing",
                   "emission_cm2": "emission cross-section at each wavelength",
                   "absorption_cm2": "absorption cross-section at each wavelength"}
CROSS_SECTION_MAX_CM2 = 1e-16


@dataclass(frozen=True)
class Spectrum:
    """Cross-section spectra as a table, interpolated linearly in wavelength.

    wavelength_m : strictly increasing wavelengths (m); emission_m2, absorption_m2 : cross-sections (m²)
    at those wavelengths; source : where the table comes from.
    """

    wavelength_m: tuple[float, ...]
    emission_m2: tuple[float, ...]
    absorption_m2: tuple[float, ...]
    source: str = ""

    def covers(self, wavelength_m: float) -> bool:
        """True when ``wavelength_m`` lies inside the table (no extrapolation is done)."""
        return self.wavelength_m[0] * (1 - 1e-12) <= wavelength_m <= self.wavelength_m[-1] * (1 + 1e-12)

    def at(self, wavelength_m):
        """(sigma_e, sigma_a) in m² at ``wavelength_m`` (scalar or array, inside the table)."""
        import numpy as np

        return interpolate_cross_sections(np.asarray(self.wavelength_m), np.asarray(self.emission_m2),
                                          np.asarray(self.absorption_m2), wavelength_m)

    @property
    def range_nm(self) -> str:
        return f"{self.wavelength_m[0] * 1e9:g} to {self.wavelength_m[-1] * 1e9:g} nm"


def check_spectrum(table: Any, need_source: bool) -> tuple[Spectrum | None, list[tuple[str, Any, str]]]:
    """Check a ``[spectrum]`` table (config units) and build its :class:`Spectrum`.

    Parameters
    ----------
    table : the table as read: ``wavelength_nm``, ``emission_cm2``, ``absorption_cm2`` (arrays of
        equal length, at least 2 entries, wavelengths strictly increasing, cross-sections from 0 to
        1e-16 cm²) and ``source`` (a string; required when ``need_source``).
    need_source : True for the built-in material files.

    Returns
    -------
    (spectrum or None, problems) : each problem is (key, value or None, message).
    """
    problems: list[tuple[str, Any, str]] = []
    if not isinstance(table, dict):
        return None, [("", table, "must be a table with wavelength_nm, emission_cm2 and absorption_cm2 arrays")]
    allowed = set(CROSS_SECTION_COLUMNS) | {"source"}
    for key in table:
        if key not in allowed:
            import difflib
            hint = difflib.get_close_matches(key, sorted(allowed), n=1)
            problems.append((key, table[key], "unknown key" + (f"; did you mean '{hint[0]}'?" if hint else
                                                               f"; keys: {', '.join(sorted(allowed))}")))
    arrays: dict[str, list[float]] = {}
    for key, meaning in CROSS_SECTION_COLUMNS.items():
        if key not in table:
            problems.append((key, None, f"missing: {meaning}, an array of numbers"))
            continue
        value = table[key]
        good = (isinstance(value, list) and len(value) >= 2
                and all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                        for v in value))
        if not good:
            problems.append((key, value, f"must be an array of at least 2 finite numbers ({meaning})"))
            continue
        values = [float(v) for v in value]
        if key == "wavelength_nm":
            if not all(150.0 <= v <= 20000.0 for v in values):
                problems.append((key, value, "out of range: wavelengths from 150 to 20000 nm"))
                continue
            if any(b <= a for a, b in zip(values[:-1], values[1:], strict=True)):
                problems.append((key, value, "must be strictly increasing"))
                continue
        elif not all(0.0 <= v <= CROSS_SECTION_MAX_CM2 for v in values):
            problems.append((key, value, f"out of range: cross-sections from 0 to {CROSS_SECTION_MAX_CM2:g} cm2"))
            continue
        arrays[key] = values
    if len(arrays) == 3 and len({len(v) for v in arrays.values()}) != 1:
        sizes = ", ".join(f"{k}: {len(v)}" for k, v in arrays.items())
        problems.append(("", None, f"the arrays must have equal length ({sizes})"))
    source = table.get("source", "")
    if "source" in table and (not isinstance(source, str) or not source.strip()):
        problems.append(("source", source, "must be a non-empty string naming the publication"))
    elif need_source and "source" not in table:
        problems.append(("source", None, "missing: the publication the table comes from "
                                         "(or 'from memory — verify')"))
    if problems:
        return None, problems
    return Spectrum(wavelength_m=tuple(v * 1e-9 for v in arrays["wavelength_nm"]),
                    emission_m2=tuple(v * 1e-4 for v in arrays["emission_cm2"]),
                    absorption_m2=tuple(v * 1e-4 for v in arrays["absorption_cm2"]),
                    source=str(source).strip()), []


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
    raman_gain_m_W: float | None = None
    thermal_conductivity_W_mK: float | None = None
    dn_dT_per_K: float | None = None
    thermal_expansion_per_K: float | None = None
    poisson_ratio: float | None = None
    photoelastic_p11: float | None = None
    photoelastic_p12: float | None = None
    photoelastic_p44: float | None = None
    broadening: str = "homogeneous"
    spectrum: Spectrum | None = None
    description: str = ""
    sources: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    notes: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))

    @property
    def quasi_three_level(self) -> bool:
        """True when the lower laser level is thermally populated (absorption at the lasing wavelength)."""
        return self.absorption_cross_section_m2 > 0.0

    def cross_sections_m2(self, wavelength_m):
        """(sigma_e, sigma_a) in m² at ``wavelength_m``: from the spectrum when the material has one,
        else the scalar values (valid at the lasing wavelength only)."""
        if self.spectrum is not None:
            return self.spectrum.at(wavelength_m)
        return self.emission_cross_section_m2, self.absorption_cross_section_m2

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


def config_values(material: Material) -> dict[str, float]:
    """The material's values under their config keys, in config units (only those it has)."""
    out: dict[str, float] = {}
    for key in MATERIAL_KEYS:
        si_value = getattr(material, si_name(key), None)
        if si_value is None or (key not in material.sources and si_value == 0.0):
            continue
        out[key] = si_value / to_si(key, 1.0)
    return out


def material_from_values(values: Mapping[str, object], name: str, description: str = "",
                         sources: Mapping[str, str] | None = None,
                         notes: Mapping[str, str] | None = None,
                         spectrum: Spectrum | None = None) -> Material:
    """Build a Material from values under their config keys (config units); keys must be validated.

    Parameters
    ----------
    values : mapping of config key (see MATERIAL_KEYS, plus 'broadening') -> value in config units
    name : the material's name
    spectrum : optional cross-section table; it stands in for the scalar cross-sections that are not
        given (at ``wavelength_nm``, and at ``pump_wavelength_nm`` for the pump's), each derived value
        sourced to the table. The wavelengths must lie inside the table.
    """
    kwargs: dict[str, object] = {}
    sources = dict(sources or {})
    for key, value in values.items():
        if key in MATERIAL_KEYS:
            kwargs[si_name(key)] = to_si(key, value)
        elif key == "broadening":
            kwargs["broadening"] = str(value)
    if spectrum is not None:
        kwargs["spectrum"] = spectrum
        for key, column, at_key in CROSS_SECTION_STAND_INS:
            at = kwargs.get(si_name(at_key))
            if key in values or at is None or not spectrum.covers(at):
                continue
            sigma_e, sigma_a = spectrum.at(at)
            kwargs[si_name(key)] = float(sigma_e if column == "emission" else sigma_a)
            sources.setdefault(key, f"read from the cross-section spectrum at {at * 1e9:g} nm "
                                   "(the spectrum's source applies)")
    return Material(name=name, description=description,
                    sources=MappingProxyType(sources),
                    notes=MappingProxyType(dict(notes or {})), **kwargs)


# ----------------------------------------------------------------------------------------------
# A material as plain data (result files record the material data each run used)
# ----------------------------------------------------------------------------------------------

_TEXT_FIELDS = ("name", "broadening", "description")


def material_to_dict(material: Material) -> dict[str, Any]:
    """The material as JSON-ready data: every value in SI (exact: floats survive JSON unchanged), its
    sources and notes, the spectrum, and the values in config units for people reading the file.

    Returns
    -------
    dict with ``name``, ``broadening``, ``description``, ``si`` {field: value or None},
    ``spectrum`` ({wavelength_m, emission_m2, absorption_m2, source} or None), ``sources``, ``notes``,
    ``config_units`` {config key: value}
    """
    from dataclasses import fields
    si: dict[str, Any] = {}
    for f in fields(Material):
        if f.name in _TEXT_FIELDS or f.name in ("spectrum", "sources", "notes"):
            continue
        si[f.name] = getattr(material, f.name)
    sp = material.spectrum
    spectrum = None if sp is None else {"wavelength_m": list(sp.wavelength_m), "emission_m2": list(sp.emission_m2),
                                        "absorption_m2": list(sp.absorption_m2), "source": sp.source}
    return {"name": material.name, "broadening": material.broadening, "description": material.description,
            "si": si, "spectrum": spectrum, "sources": dict(material.sources), "notes": dict(material.notes),
            "config_units": config_values(material)}


def material_from_dict(data: Mapping[str, Any]) -> Material:
    """The Material that :func:`material_to_dict` wrote (the same values, bit for bit)."""
    sp = data.get("spectrum")
    spectrum = None if not sp else Spectrum(wavelength_m=tuple(sp["wavelength_m"]), emission_m2=tuple(sp["emission_m2"]),
                                            absorption_m2=tuple(sp["absorption_m2"]), source=sp.get("source", ""))
    return Material(name=data["name"], broadening=data.get("broadening", "homogeneous"),
                    description=data.get("description", ""), spectrum=spectrum,
                    sources=MappingProxyType(dict(data.get("sources", {}))),
                    notes=MappingProxyType(dict(data.get("notes", {}))), **data["si"])


def stored_material_problems(data: Any) -> list[str]:
    """What is wrong with material data a result file recorded (:func:`material_to_dict`), checked as a
    config's material is: its structure, every value finite and within its key's plausible range, its
    spectrum as a ``[spectrum]`` table. An empty list: :func:`material_from_dict` may take it."""
    if not isinstance(data, Mapping) or not isinstance(data.get("name"), str) or not isinstance(data.get("si"), Mapping):
        return ["not material data (a table with name and si)"]
    problems = []
    for name, value in data["si"].items():
        if not isinstance(name, str) or name in _TEXT_FIELDS or name in ("spectrum", "sources", "notes"):
            problems.append(f"si.{name}: not a value of a material")
        elif value is not None and (isinstance(value, bool) or not isinstance(value, (int, float))
                                    or not math.isfinite(value)):
            problems.append(f"si.{name} = {value!r}: not a finite number")
    if problems:
        return problems
    for key, spec in MATERIAL_KEYS.items():
        value = data["si"].get(si_name(key))
        if value is None or (value == 0.0 and (spec.allow_zero or not spec.required)):
            continue
        shown = value / to_si(key, 1.0)
        if not spec.low <= shown <= spec.high:
            problems.append(f"{key} = {shown:.4g}: outside {spec.low:g} to {spec.high:g} (the range a config allows)")
    sp = data.get("spectrum")
    if sp:
        if not isinstance(sp, Mapping) or not all(isinstance(sp.get(k), list) for k in
                                                   ("wavelength_m", "emission_m2", "absorption_m2")):
            return problems + ["spectrum: not three lists"]
        table = {"wavelength_nm": [w * 1e9 if isinstance(w, (int, float)) else w for w in sp["wavelength_m"]],
                 "emission_cm2": [x * 1e4 if isinstance(x, (int, float)) else x for x in sp["emission_m2"]],
                 "absorption_cm2": [x * 1e4 if isinstance(x, (int, float)) else x for x in sp["absorption_m2"]],
                 "source": str(sp.get("source", "stored"))}
        _, bad = check_spectrum(table, need_source=False)
        problems += [f"spectrum.{key}: {message}" for key, _, message in bad]
    try:
        material_from_dict(data)
    except (KeyError, TypeError, ValueError) as exc:
        problems.append(f"cannot be rebuilt ({type(exc).__name__}: {exc})")
    return problems


def material_differences(stored: Mapping[str, Any], current: Mapping[str, Any]) -> list[str]:
    """Lines "key: stored -> current" between two :func:`material_to_dict` records (values in config
    units where the key has one; the spectrum and the sources compared as a whole)."""
    lines = []
    a, b = stored.get("si", {}), current.get("si", {})
    units_a, units_b = stored.get("config_units", {}), current.get("config_units", {})
    for name in sorted(set(a) | set(b)):
        if a.get(name) != b.get(name):
            key = next((k for k in MATERIAL_KEYS if si_name(k) == name), name)
            lines.append(f"{key}: {units_a.get(key, a.get(name))!r} -> {units_b.get(key, b.get(name))!r}")
    for name in ("broadening", "spectrum"):
        if stored.get(name) != current.get(name):
            lines.append(f"{name}: " + ("differs" if name == "spectrum" else f"{stored.get(name)!r} -> {current.get(name)!r}"))
    for key in sorted(set(stored.get("sources", {})) | set(current.get("sources", {}))):
        if stored.get("sources", {}).get(key) != current.get("sources", {}).get(key):
            lines.append(f"source of {key}: {stored.get('sources', {}).get(key)!r} -> "
                         f"{current.get('sources', {}).get(key)!r}")
    return lines
