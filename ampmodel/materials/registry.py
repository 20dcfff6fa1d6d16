"""The built-in materials: one TOML file per material beside this module.

File format
-----------
Each file gives, at top level, ``name`` (str), ``description`` (str) and optionally ``broadening``
(``"homogeneous"`` or ``"inhomogeneous"``). Every value is a table named after its config key in
:data:`ampmodel.materials.MATERIAL_KEYS` (config units)::

    [emission_cross_section_cm2]
    value = 2.8e-19
    source = "author, title, publisher or journal (year), table"
    range = "spread reported in the literature"     # optional

``source`` is required for every value; a value recalled rather than looked up says so in its source
("from memory — verify").

A material may also carry cross-section spectra as a table, interpolated linearly in wavelength::

    [spectrum]
    wavelength_nm = [900.0, 975.0, 1030.0]
    emission_cm2 = [2.0e-22, 2.5e-20, 6.0e-21]
    absorption_cm2 = [6.5e-21, 2.6e-20, 4.0e-22]
    source = "author, title, journal (year), figure"

The spectrum then stands in for the scalar cross-sections that the file does not give (at
``wavelength_nm`` and ``pump_wavelength_nm``), each derived value sourced to the table. The loader rejects a file with a value lacking its source, an unknown key, a
missing required key, or a value outside the plausibility range of its key, so bad data cannot ship.
"""
from __future__ import annotations

import difflib
import functools
import math
import textwrap
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib  # type: ignore[no-redef]

from ampmodel.materials.material import (
    BROADENINGS,
    CROSS_SECTION_STAND_INS,
    MATERIAL_KEYS,
    Material,
    check_spectrum,
    config_values,
    material_from_values,
)
from ampmodel.units import factor

DATA_DIR = Path(__file__).parent
"""Directory holding the built-in material files (``*.toml``)."""

_TOP_KEYS = ("name", "description", "broadening", "spectrum")
_VALUE_FIELDS = ("value", "source", "range")
_WIDTH = 100


def _fail(path: Path, where: str, problem: str) -> ValueError:
    return ValueError(f"{path.name}: {where}: {problem}")


def _check_value(path: Path, key: str, table: object) -> tuple[float, str, str | None]:
    """Validate one value table; return (value in config units, source, range note or None)."""
    spec = MATERIAL_KEYS[key]
    if not isinstance(table, dict):
        raise _fail(path, key, "must be a table with 'value' and 'source'")
    unknown = sorted(set(table) - set(_VALUE_FIELDS))
    if unknown:
        raise _fail(path, key, f"unknown field(s) {unknown}; allowed: {list(_VALUE_FIELDS)}")
    if "value" not in table:
        raise _fail(path, key, "missing 'value'")
    value = table["value"]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise _fail(path, key, f"value {value!r} is not a finite number")
    source = table.get("source")
    if not isinstance(source, str) or not source.strip():
        raise _fail(path, key, "missing 'source' (give the publication, or mark it 'from memory — verify')")
    note = table.get("range")
    if note is not None and not isinstance(note, str):
        raise _fail(path, key, "'range' must be a string")
    value = float(value)
    if not (value == 0.0 and spec.allow_zero) and not spec.low <= value <= spec.high:
        allowed = f"{spec.low:g} to {spec.high:g}" + (" (or 0)" if spec.allow_zero else "")
        raise _fail(path, key, f"value {value:g} outside the plausible range {allowed}")
    return value, source.strip(), note.strip() if note else None


def _load_file(path: str | Path) -> Material:
    """Read and validate one material file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    Material
        The material, values in SI, with ``sources`` and ``notes`` keyed by config key.

    Raises
    ------
    ValueError
        Naming the file and the key, when the file is not valid TOML, a value lacks its source, a key
        is unknown or missing, or a value lies outside the plausible range of its key.
    """
    path = Path(path)
    try:
        with path.open("rb") as handle:
            data = tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path.name}: not valid TOML: {exc}") from exc

    name = data.get("name")
    if not isinstance(name, str) or not name.strip():
        raise _fail(path, "name", "missing or empty")
    description = data.get("description", "")
    if not isinstance(description, str):
        raise _fail(path, "description", "must be a string")
    broadening = data.get("broadening", "homogeneous")
    if broadening not in BROADENINGS:
        raise _fail(path, "broadening", f"{broadening!r} is not one of {list(BROADENINGS)}")

    values: dict[str, object] = {"broadening": broadening}
    sources: dict[str, str] = {}
    notes: dict[str, str] = {}
    for key, table in data.items():
        if key in _TOP_KEYS:
            continue
        if key not in MATERIAL_KEYS:
            hint = difflib.get_close_matches(key, list(MATERIAL_KEYS), n=1)
            did_you_mean = f"; did you mean {hint[0]!r}?" if hint else ""
            raise _fail(path, key, f"unknown key{did_you_mean}")
        values[key], sources[key], note = _check_value(path, key, table)
        if note:
            notes[key] = note
    spectrum = None
    if "spectrum" in data:
        spectrum, problems = check_spectrum(data["spectrum"], need_source=True)
        if problems:
            key, _, message = problems[0]
            raise _fail(path, f"spectrum.{key}" if key else "spectrum", message)
        for key in ("wavelength_nm", "pump_wavelength_nm"):
            if key in values and not spectrum.covers(values[key] * factor(key)):
                raise _fail(path, key, f"{values[key]:g} lies outside the spectrum ({spectrum.range_nm})")
    stand_ins = {key for key, _, _ in CROSS_SECTION_STAND_INS} if spectrum is not None else set()
    missing = [key for key, spec in MATERIAL_KEYS.items()
               if spec.required and key not in values and key not in stand_ins]
    if missing:
        raise _fail(path, ", ".join(missing), "required key(s) missing")
    return material_from_values(values, name.strip(), description.strip(), sources, notes, spectrum=spectrum)


@functools.lru_cache(maxsize=1)
def _load_all() -> dict[str, Material]:
    """All built-in materials by name, read once."""
    materials: dict[str, Material] = {}
    for path in sorted(DATA_DIR.glob("*.toml")):
        material = _load_file(path)
        if material.name in materials:
            raise ValueError(f"{path.name}: name: {material.name!r} is defined by another file too")
        materials[material.name] = material
    return materials


def names() -> list[str]:
    """Names of the built-in materials, sorted without regard to letter case (e.g. ``"Nd:YAG"``)."""
    return sorted(_load_all(), key=lambda n: (n.casefold(), n))


def closest(name: str) -> list[str]:
    """Built-in names close to ``name`` (case-insensitive), best first, for "did you mean" hints."""
    by_folded = {known.casefold(): known for known in _load_all()}
    hits = difflib.get_close_matches(name.casefold(), list(by_folded), n=3, cutoff=0.6)
    return [by_folded[hit] for hit in hits]


def get(name: str) -> Material:
    """The built-in material called ``name``.

    Parameters
    ----------
    name : str
        Exact name, or the same name in other letter case (``"nd:yag"``).

    Raises
    ------
    KeyError
        When no material matches; the message lists close names and all built-in names.
    """
    materials = _load_all()
    if name in materials:
        return materials[name]
    for known, material in materials.items():
        if known.casefold() == name.casefold():
            return material
    hint = closest(name)
    did_you_mean = f"did you mean {' or '.join(repr(h) for h in hint)}? " if hint else ""
    raise KeyError(f"unknown material {name!r}; {did_you_mean}built-in: {', '.join(names())}")


def _format_value(value: float) -> str:
    return f"{value:.4g}"


def _wrapped(label: str, text: str, indent: int) -> list[str]:
    prefix = " " * indent + label
    return textwrap.wrap(text, width=_WIDTH, initial_indent=prefix,
                         subsequent_indent=" " * (indent + len(label)),
                         break_on_hyphens=False) or [prefix.rstrip()]


def short_table() -> str:
    """One line per built-in material (sorted without regard to case): its kind, lasing wavelength,
    emission cross-section, upper-state lifetime and saturation fluence; how to see the rest."""
    rows = [("material", "kind", "lambda nm", "sigma_e cm2", "tau us", "Fsat J/cm2")]
    for name in names():
        m = _load_all()[name]
        rows.append((m.name, "quasi-3-level" if m.quasi_three_level else "four-level", f"{m.wavelength_m * 1e9:g}",
                     f"{m.emission_cross_section_m2 * 1e4:.3g}", f"{m.upper_lifetime_s * 1e6:.4g}",
                     f"{m.saturation_fluence_J_m2 / 1e4:.3g}"))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = ["  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths, strict=True)))
             for r in rows]
    lines.append("")
    lines.append("ampmodel media NAME: one material's values with their sources; ampmodel media --all: every material's")
    return "\n".join(lines) + "\n"


def table_text(selected: list[str] | None = None) -> str:
    """The built-in materials (or those ``selected``, by name) as text: per material its values in config
    units and their sources.

    Each material also shows the derived saturation fluence h·nu/(sigma_e + sigma_a) in J/cm² and
    saturation intensity Fsat/tau in W/cm² (Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963)). Lines
    are at most 100 characters wide.
    """
    lines: list[str] = []
    for name in (names() if selected is None else [get(n).name for n in selected]):
        lines += material_lines(_load_all()[name])
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"


def material_lines(material: Material) -> list[str]:
    """One material as lines of text: its kind, description, every value in config units with its
    source (and plausible range), the spectrum, and the derived saturation fluence and intensity.
    ``table_text`` prints these for built-in materials; a run's report for the material data it used."""
    key_width = max(len(key) for key in MATERIAL_KEYS)
    kind = "quasi-three-level" if material.quasi_three_level else "four-level"
    lines = [f"{material.name}  ({kind}, {material.broadening} broadening)"]
    if material.description:
        lines.extend(_wrapped("", material.description, 2))
    for key, value in config_values(material).items():
        lines.append(f"  {key:<{key_width}}  {_format_value(value)}")
        lines.extend(_wrapped("source: ", material.sources.get(key, "(none)"), 6))
        if key in material.notes:
            lines.extend(_wrapped("range: ", material.notes[key], 6))
    if material.spectrum is not None:
        sp = material.spectrum
        lines.append(f"  {'cross-section spectrum':<{key_width}}  {len(sp.wavelength_m)} points, {sp.range_nm}")
        lines.extend(_wrapped("source: ", sp.source, 6))
    fsat_J_cm2 = material.saturation_fluence_J_m2 / 1e4
    isat_W_cm2 = material.saturation_intensity_W_m2 / 1e4
    lines.append(f"  {'saturation fluence, J/cm2':<{key_width}}  {_format_value(fsat_J_cm2)}"
                 "   (derived: h·nu/(sigma_e + sigma_a))")
    lines.append(f"  {'saturation intensity, W/cm2':<{key_width}}  {_format_value(isat_W_cm2)}"
                 "   (derived: Fsat/tau)")
    return lines
