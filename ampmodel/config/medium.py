"""The media of a config: each [[medium]] checked (bulk here, fibres in fibre.py), its material (a
built-in name, a [medium.material] table, or a table on a built-in ``base``), cross-section spectra
standing in for scalar values, and its [medium.pump].
"""
from __future__ import annotations

import dataclasses
import math
from types import MappingProxyType
from typing import Any

import numpy as np

from ampmodel.config import cw as config_cw
from ampmodel.config import fibre as config_fibre
from ampmodel.config import files as config_files
from ampmodel.config import schema as S
from ampmodel.config.checks import Problems, check_table, expected, given_keys, join_path, quoted_list, type_name
from ampmodel.config.schema import array_of_tables, item_names
from ampmodel.description import Medium, Pump, Seed
from ampmodel.kernels import beam_shapes
from ampmodel.materials import registry
from ampmodel.materials.material import (
    CROSS_SECTION_STAND_INS,
    MATERIAL_KEYS,
    Material,
    check_spectrum,
    config_values,
    material_from_values,
)
from ampmodel.units import si_name, to_si

STAND_IN_KEYS = frozenset(key for key, _, _ in CROSS_SECTION_STAND_INS)


def check_media(p: Problems, raw: dict, mode: str | None = "pulsed") -> tuple[list[Medium] | None, list[str]]:
    """Every [[medium]]; return (media or None, the names steps may refer to)."""
    items = array_of_tables(p, raw, "medium")
    if items is None:
        return None, []
    names = item_names(items, "medium")
    seen: dict[str, int] = {}
    media: list[Medium | None] = []
    for i, item in enumerate(items):
        if not isinstance(item, dict):
            media.append(None)
            continue
        given = item.get("name")
        path = f"medium[{i}] ({given})" if isinstance(given, str) else f"medium[{i}]"
        name = names[i]
        if isinstance(given, str):
            reason = ("must not be empty" if not given.strip() else
                      "must not contain '/'" if "/" in given else
                      "must not be a plain number (paths and steps read a number as an index)"
                      if given.isdigit() else None)
            if reason:
                p.add(f"medium[{i}].name", f"{reason}; give a medium name such as \"rod\"", given)
        if name in seen:
            p.add(f"medium[{i}].name", f"duplicate medium name (medium[{seen[name]}] has it too); "
                                       "give each medium its own name", name)
        seen.setdefault(name, i)
        media.append(_medium(p, item, path, name, mode))
    if any(m is None for m in media):
        return None, names
    return media, names  # type: ignore[return-value]


def _medium(p: Problems, item: dict, path: str, name: str, mode: str | None = "pulsed") -> Medium | None:
    """One [[medium]]: keys, material, aperture, exactly one gain specification."""
    before = len(p)
    if item.get("kind") == "fibre":
        return config_fibre.fibre_medium(p, item, path, name, _material(p, item, path, name))
    v = check_table(p, item, path, S.MEDIUM, skip=("material",))
    material = _material(p, item, path, name)
    given_keys(p, item, ("diameter_mm", "width_mm"),
               none=(join_path(path, "diameter_mm"), "missing: the clear aperture, diameter_mm (round) "
                                                     "or width_mm (square), a number > 0"),
               several=(path, "both diameter_mm and width_mm given: give diameter_mm (round aperture) "
                              "or width_mm (square aperture), not both"))
    aperture_key = "width_mm" if "width_mm" in item else "diameter_mm"
    given_keys(p, item, S.GAIN_KEYS,
               none=(path, "no gain specification: give exactly one of small_signal_gain, stored_energy_J, "
                           "[medium.pump]"),
               several=lambda gains: (path, f"two gain specifications ({', '.join(S.GAIN_NAMES[g] for g in gains)}): "
                                            "give exactly one of small_signal_gain, stored_energy_J, [medium.pump]"))
    pump = None
    if isinstance(item.get("pump"), dict):
        doping = item.get("doping_per_m3") if isinstance(item.get("doping_per_m3"), (int, float)) else None
        pump = _pump(p, item["pump"], join_path(path, "pump"), material, doping, mode)
    if len(p) > before or material is None:
        return None
    medium = Medium(
        name=name, material=material, length_m=to_si("length_mm", v["length_mm"]),
        diameter_m=to_si(aperture_key, v[aperture_key]),
        aperture="square" if aperture_key == "width_mm" else "round",
        slices=v["slices"], loss_per_m=to_si("loss_per_cm", v["loss_per_cm"]),
        small_signal_gain=v.get("small_signal_gain"),
        stored_energy_J=v.get("stored_energy_J"), pump=pump,
        doping_per_m3=v.get("doping_per_m3"), kind=v["kind"], cooling=v["cooling"],
        coolant_C=float(v["coolant_C"]), thermal_lens=v["thermal_lens"])
    _check_ion_ceiling(p, medium, path)
    return medium if len(p) == before else None


def _check_ion_ceiling(p: Problems, medium: Medium, path: str) -> None:
    """A given small-signal gain or stored energy must fit in the doping: every ion excited gives
    g = σe·Nt at the material's wavelength (ln G0 = σe·Nt·L), and the stored energy down to
    transparency Fsat·σe·Nt·V."""
    nt = medium.doping_per_m3 or medium.material.doping_per_m3
    if not nt:
        return
    g_max = medium.material.emission_cross_section_m2 * nt
    doping = "doping_per_m3" if medium.doping_per_m3 else "the material's doping_per_m3"
    fix = f"lower it, lengthen the medium or raise {doping}"
    ln_max = g_max * medium.length_m
    if medium.small_signal_gain is not None and math.log(medium.small_signal_gain) > ln_max:
        p.add(join_path(path, "small_signal_gain"),
              f"more than the doping can give: with every ion excited the single-pass gain at "
              f"{medium.material.wavelength_m * 1e9:g} nm is exp(σe·Nt·L) = {_gain_text(ln_max)}; {fix}",
              medium.small_signal_gain)
    if medium.stored_energy_J is not None:
        area = medium.diameter_m ** 2 * (1.0 if medium.aperture == "square" else math.pi / 4.0)
        e_max = medium.material.saturation_fluence_J_m2 * g_max * area * medium.length_m
        if medium.stored_energy_J > e_max:
            p.add(join_path(path, "stored_energy_J"),
                  f"more than the doping can store: with every ion excited the extractable energy of the "
                  f"clear aperture is Fsat·σe·Nt·V = {e_max:.4g} J; {fix}", medium.stored_energy_J)


def _gain_text(ln_gain: float) -> str:
    return f"{math.exp(ln_gain):.4g}" if ln_gain < 700.0 else f"exp({ln_gain:.4g})"


def builtin_material(p: Problems, path: str, name: str) -> Material | None:
    """A built-in material by name; an unknown name is a problem listing the close ones."""
    for known, material in p.builtin.items():        # a rerun: the data its result file recorded
        if known.casefold() == name.casefold():
            p.used_builtin[known] = material
            return material
    try:
        material = registry.get(name)
        p.used_builtin[material.name] = material
        return material
    except KeyError:
        close = registry.closest(name)
        hint = f"; did you mean {quoted_list(close)}?" if close else ""
        p.add(path, f"unknown material{hint} (built-in: {', '.join(registry.names())}; "
                    "`ampmodel media` lists them with their values)", name)
        return None


def _material(p: Problems, item: dict, path: str, medium_name: str) -> Material | None:
    """A medium's material: a built-in name, or a table (optionally on a built-in ``base``)."""
    mpath = join_path(path, "material")
    if "material" not in item:
        p.add(mpath, 'missing: give material = "<built-in name>" (see `ampmodel media`) '
                     "or a [medium.material] table")
        return None
    value = item["material"]
    if isinstance(value, str):
        return builtin_material(p, mpath, value)
    if not isinstance(value, dict):
        p.add(mpath, f"must be {expected(S.MEDIUM['material'])}, not {type_name(value)}", value)
        return None
    before = len(p)
    base_name = value.get("base")
    spectrum = None
    if "spectrum" in value:
        spectrum = _spectrum(p, value["spectrum"], join_path(mpath, "spectrum"))
    schema = S.MATERIAL_TABLE
    if "spectrum" in value:          # the spectrum stands in for the scalar cross-sections
        schema = {k: dataclasses.replace(s, required=False) if k == "emission_cross_section_cm2" else s
                  for k, s in schema.items()}
    v = check_table(p, value, mpath, schema, require=not isinstance(base_name, str))
    base = builtin_material(p, join_path(mpath, "base"), base_name) if isinstance(base_name, str) else None
    if len(p) > before:
        return None
    given = {k: x for k, x in v.items() if k in MATERIAL_KEYS or (k == "broadening" and k in value)}
    if spectrum is not None:
        wl = given.get("wavelength_nm", base.wavelength_m / 1e-9 if base is not None else None)
        if wl is not None and not spectrum.covers(wl * 1e-9):
            p.add(join_path(mpath, "wavelength_nm"), f"outside the spectrum ({spectrum.range_nm})", wl)
            return None
    if base is not None:
        name = v.get("name", f"{base.name} (modified)")
        sources = dict(base.sources)
        sources.update({k: f"set in the run config ({p.source})" for k in given})
        changes = {si_name(k): to_si(k, x) for k, x in given.items() if k in MATERIAL_KEYS}
        if "broadening" in given:
            changes["broadening"] = given["broadening"]
        if spectrum is not None:
            # a new spectrum: the cross-sections not given in the table are read from it again
            keep = {k: x for k, x in config_values(base).items() if k not in STAND_IN_KEYS}
            keep.update(given)
            keep["broadening"] = given.get("broadening", base.broadening)
            sources = {k: x for k, x in sources.items() if k not in STAND_IN_KEYS or k in given}
            return material_from_values(keep, name, description=base.description, sources=sources,
                                        notes=dict(base.notes), spectrum=spectrum)
        return dataclasses.replace(base, name=name, sources=MappingProxyType(sources), **changes)
    given.setdefault("broadening", v.get("broadening", "homogeneous"))
    return material_from_values(given, v.get("name", f"{medium_name} material"),
                                description=f"given in the run config ({p.source})",
                                sources={k: f"run config ({p.source})" for k in given}, spectrum=spectrum)


def _spectrum(p: Problems, table: Any, path: str):
    """A [medium.material.spectrum] table (its arrays inline or in a file); each problem names its key."""
    if isinstance(table, dict) and "file" in table:
        return config_files.spectrum_from_file(p, table, path)
    spectrum, problems = check_spectrum(table, need_source=False)
    for key, value, message in problems:
        where = join_path(path, key) if key else path
        if value is None:
            p.add(where, message)
        else:
            p.add(where, message, value)
    return spectrum


def _pump(p: Problems, table: dict, path: str, material: Material | None,
          doping_per_m3: float | None = None, mode: str | None = "pulsed") -> Pump | None:
    """A [medium.pump] table; defaults from the material (pump wavelength, absorption)."""
    before = len(p)
    v = check_table(p, table, path, S.PUMP)
    geometry = v.get("geometry")
    continuous = v.get("continuous") is True
    if mode == "cw" or not continuous:
        config_cw.pump_keys(p, table, path, mode, material)
        if mode == "cw" and table.get("continuous") is False:
            p.add(join_path(path, "continuous"), 'a pump in a cw run is continuous: remove continuous = false '
                                                 '(or set mode = "pulsed" for a pump pulse)', False)
    else:
        for key, why in (("energy_J", "takes power_W, not an energy"),
                         ("duration_us", "has no pulse length")):
            if key in table:
                p.add(join_path(path, key), f"a continuous pump {why}: remove {key} (or set continuous = false "
                                            "for a pump pulse)", table[key])
        if "power_W" not in table:
            p.add(join_path(path, "power_W"), "missing: the power of the continuous pump, a number > 0")
    if geometry == "side":
        for key in S.END_ONLY:
            if key in table:
                p.add(join_path(path, key), 'applies to end pumping only (geometry = "end")', table[key])
    if geometry == "end":
        for key in S.SIDE_ONLY:
            if key in table:
                p.add(join_path(path, key), 'applies to side pumping only (geometry = "side")', table[key])
        if v.get("profile") == "parabolic":
            p.add(join_path(path, "profile"), "'parabolic' applies to side pumping only; for end pumping give "
                                              "'flat', 'gaussian' or 'supergaussian'", "parabolic")
    wavelength_nm = v.get("wavelength_nm")
    if "wavelength_nm" not in table and material is not None:
        if material.pump_wavelength_m is None:
            p.add(join_path(path, "wavelength_nm"), f"missing: material '{material.name}' gives no pump "
                                                    "wavelength; give wavelength_nm")
        else:
            wavelength_nm = material.pump_wavelength_m / 1e-9
    if wavelength_nm is not None and material is not None and wavelength_nm >= material.wavelength_m / 1e-9:
        p.add(join_path(path, "wavelength_nm"), f"the pump wavelength must be shorter than the lasing "
                                                f"wavelength ({material.wavelength_m / 1e-9:g} nm)", wavelength_nm)
    density = doping_per_m3 or (material.doping_per_m3 if material is not None else None)
    if geometry == "end" and "absorption_per_cm" not in table and material is not None:
        from_cross_section = material.pump_absorption_cross_section_m2 and density
        if material.pump_absorption_per_m is None and not from_cross_section:
            p.add(join_path(path, "absorption_per_cm"), f"missing: material '{material.name}' gives no pump "
                                                        "absorption; give absorption_per_cm for end pumping")
    if material is not None and material.quasi_three_level and not density:
        p.add(join_path(path.rsplit(".", 1)[0], "doping_per_m3"),
              f"missing: a pumped quasi-three-level medium needs its ion density and material "
              f"'{material.name}' gives none; give doping_per_m3 in the medium or the material")
    direction = v.get("direction", "forward")
    if direction == "both" and v.get("back_reflectance", 0.0) > 0.0:
        p.add(join_path(path, "back_reflectance"), 'a pump entering at both ends has no back reflector: '
                                                   'remove back_reflectance (or give direction = "forward")',
              v["back_reflectance"])
    if len(p) > before or material is None:
        return None
    ends = 2.0 if direction == "both" else 1.0          # energy_J and power_W are given per pumped end
    if mode == "cw" or continuous:
        duration_s, energy_J, power_W = None, None, ends * v["power_W"]
    else:
        duration_s = to_si("duration_us", v["duration_us"])
        energy_J, power_W = ends * (v["energy_J"] if "energy_J" in v else v["power_W"] * duration_s), None
    return Pump(
        geometry=geometry, energy_J=energy_J, duration_s=duration_s,
        wavelength_m=to_si("wavelength_nm", wavelength_nm), profile=v["profile"],
        diameter_m=to_si("diameter_mm", v["diameter_mm"]) if "diameter_mm" in v else None,
        order=v["order"],
        absorption_per_m=to_si("absorption_per_cm", v["absorption_per_cm"]) if "absorption_per_cm" in v else None,
        back_reflectance=v.get("back_reflectance", 0.0), direction=direction,
        absorbed_fraction=v.get("absorbed_fraction", 1.0),
        transfer_efficiency=v["transfer_efficiency"], quantum_efficiency=v["quantum_efficiency"],
        power_W=power_W, continuous=continuous or mode == "cw")


def check_seed_spectrum(p: Problems, media: list[Medium], seed: Seed) -> None:
    """The seed against the cross-sections of the bulk media it meets: a seed away from a material's
    wavelength, or a stretched one, needs the material's cross-section spectrum (the scalar values hold
    at its wavelength only); the spectrum must cover the seed's centre; a material that absorbs there
    needs its doping."""
    key = "seed.bandwidth_nm" if seed.bandwidth_m else "seed.wavelength_nm"
    value = seed.bandwidth_m * 1e9 if seed.bandwidth_m else seed.wavelength_m * 1e9
    if seed.spectrum_trace is not None:           # its centroid and FWHM come from the measured spectrum
        key = "seed.measured_spectrum"
    low, high = beam_shapes.wavelength_span_m(seed.shape, seed.wavelength_m, seed.bandwidth_m, seed.pulse_trace,
                                              seed.spectrum_trace)
    for m in media:
        if m.kind == "fibre":
            continue
        mat = m.material
        at_line = not seed.bandwidth_m and abs(seed.wavelength_m - mat.wavelength_m) <= 1e-9 * mat.wavelength_m
        if at_line:
            continue
        if mat.spectrum is None:
            what = (f"a stretched seed of {value:g} nm bandwidth" if seed.bandwidth_m else
                    f"a seed at {value:g} nm")
            p.add(key, f"medium {m.name}: {what} needs the cross-sections of {mat.name} at its wavelengths, and "
                       f"the material gives them at {mat.wavelength_m * 1e9:g} nm only; give its "
                       f"[medium.material.spectrum] table, or set seed.wavelength_nm = {mat.wavelength_m * 1e9:g} "
                       f"without bandwidth_nm", value)
            continue
        if not mat.spectrum.covers(seed.wavelength_m):
            p.add("seed.measured_spectrum" if seed.spectrum_trace is not None else "seed.wavelength_nm",
                  f"medium {m.name}: outside the cross-section spectrum of {mat.name} "
                  f"({mat.spectrum.range_nm}); give a wavelength inside it",
                  seed.wavelength_m * 1e9)
            continue
        nt = m.doping_per_m3 or mat.doping_per_m3
        span = np.linspace(max(low, mat.spectrum.wavelength_m[0]), min(high, mat.spectrum.wavelength_m[-1]), 257)
        if not nt and float(np.max(mat.spectrum.at(span)[1])) > 0.0:
            p.add(join_path(f"medium[{media.index(m)}] ({m.name})", "doping_per_m3"),
                  f"missing: {mat.name} absorbs at the seed's wavelengths, which needs its ion density; give "
                  f"doping_per_m3 (the medium's or its material's)")
