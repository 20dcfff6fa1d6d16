"""Config checks of doped-fibre media and of layouts made of fibres.

A fibre is a ``[[medium]]`` with ``kind = "fibre"``. Its keys, and those of its ``[medium.pump]``,
are schema tables here (the data-driven style of ``schema.py``); the checks that involve
several keys, the material, the seed and the layout follow. A layout with a fibre is made of fibres
only; its steps are ``pass`` (each fibre once, from z = 0) and ``loss``. ``[grid]`` is optional there
(``points``: the transverse map of the mode; ``time_slices``: the pulse; ``width_mm``: the map's
window, by default three core diameters or six mode-field radii, whichever is wider), and the seed
needs no transverse profile (the fibre's mode carries it).
"""
from __future__ import annotations

import dataclasses

from ampmodel.config import schema as S
from ampmodel.config.checks import Problems, allowed_keys, check_table, did_you_mean, given_keys, join_path, quoted_list
from ampmodel.config.schema import FIBRE_MEDIUM, FIBRE_PUMP
from ampmodel.description import Fibre, FibrePump, Grid, Medium, Seed, Step
from ampmodel.kernels import fibre_modes as fm
from ampmodel.materials.material import Material
from ampmodel.units import to_si

BULK_MEDIUM_KEYS = {"length_mm": "length_m", "diameter_mm": "core_diameter_um", "width_mm": "core_diameter_um",
                    "loss_per_cm": "loss_per_m", "small_signal_gain": "a [medium.pump]",
                    "stored_energy_J": "a [medium.pump]"}
BULK_PUMP_KEYS = ("geometry", "energy_J", "duration_us", "profile", "diameter_mm", "order", "absorption_per_cm",
                  "back_reflectance", "absorbed_fraction", "transfer_efficiency", "quantum_efficiency")
FIBRE_STEPS = ("pass", "loss")
FIBRE_GRID_POINTS = 64


def all_fibre(raw: dict) -> bool:
    """True when the config has media and every one of them says ``kind = "fibre"``."""
    items = raw.get("medium")
    return (isinstance(items, list) and bool(items)
            and all(isinstance(m, dict) and m.get("kind") == "fibre" for m in items))


def any_fibre(raw: dict) -> bool:
    items = raw.get("medium")
    return isinstance(items, list) and any(isinstance(m, dict) and m.get("kind") == "fibre" for m in items)


def _unknown(key: str) -> str:
    if key in BULK_MEDIUM_KEYS:
        return f"is a key of bulk media; a fibre takes {BULK_MEDIUM_KEYS[key]}"
    return f"unknown key{did_you_mean(key, FIBRE_MEDIUM) or allowed_keys(FIBRE_MEDIUM)}"


def fibre_medium(p: Problems, item: dict, path: str, name: str, material: Material | None) -> Medium | None:
    """One fibre medium: its keys, the material it needs, its pump."""
    before = len(p)
    v = check_table(p, item, path, FIBRE_MEDIUM, skip=("material",), unknown=_unknown)
    mode_field = (path, "give exactly one of core_na (the mode field from Marcuse's formula) and "
                        "mode_field_diameter_um")
    given_keys(p, item, ("core_na", "mode_field_diameter_um"), none=mode_field, several=mode_field)
    core, clad = v.get("core_diameter_um"), v.get("cladding_diameter_um")
    if core is not None and clad is not None and clad <= core:
        p.add(join_path(path, "cladding_diameter_um"), f"must be larger than the core diameter ({core:g} um)", clad)
    if v.get("rings", 1) > 1:
        for key in ("signal_overlap", "pump_overlap"):
            if key in item:
                p.add(join_path(path, key), "overrides the overlap model only (rings = 1): with rings the "
                                            "overlaps come from the mode across the rings", item[key])
    band = v.get("ase_band_nm")
    if band is not None and not band[0] < band[1]:
        p.add(join_path(path, "ase_band_nm"), "give [shortest, longest] wavelength, shortest first", item["ase_band_nm"])
    if material is not None:
        if "doping_per_m3" not in item and not material.doping_per_m3:
            p.add(join_path(path, "doping_per_m3"), f"missing: material '{material.name}' gives no typical "
                                                    "doping; give the core's ion density")
        spectrum = material.spectrum
        if v.get("ase"):
            if spectrum is None:
                p.add(join_path(path, "ase"), f"ASE needs cross-section spectra and material '{material.name}' has "
                                              "none; give a [medium.material.spectrum] table or ase = false", True)
            elif band is not None and band[0] < band[1] and not (spectrum.covers(band[0] * 1e-9)
                                                                and spectrum.covers(band[1] * 1e-9)):
                p.add(join_path(path, "ase_band_nm"), f"outside the material's spectrum ({spectrum.range_nm})",
                      item["ase_band_nm"])
    pump = None
    if isinstance(item.get("pump"), dict):
        pump = _fibre_pump(p, item["pump"], join_path(path, "pump"), material)
        if pump is not None and pump.cladding and clad is None and "pump_overlap" not in item:
            p.add(join_path(path, "cladding_diameter_um"), "missing: a pump launched into the cladding needs the "
                                                           "inner cladding's diameter (or give pump_overlap)")
    if len(p) > before or material is None:
        return None
    fibre = Fibre(
        core_diameter_m=to_si("core_diameter_um", core),
        cladding_diameter_m=to_si("cladding_diameter_um", clad) if clad is not None else None,
        core_na=v.get("core_na"),
        mode_field_diameter_m=to_si("mode_field_diameter_um", v["mode_field_diameter_um"])
        if "mode_field_diameter_um" in v else None,
        ase=v["ase"], ase_band_m=(band[0] * 1e-9, band[1] * 1e-9) if band is not None else None,
        ase_bins=v["ase_bins"], signal_overlap=v.get("signal_overlap"), pump_overlap=v.get("pump_overlap"),
        rings=v["rings"], pump=pump)
    return Medium(name=name, material=material, length_m=v["length_m"], diameter_m=fibre.core_diameter_m,
                  slices=v["slices"], loss_per_m=v["loss_per_m"], doping_per_m3=v.get("doping_per_m3"),
                  kind="fibre", fibre=fibre)


def _fibre_pump(p: Problems, table: dict, path: str, material: Material | None) -> FibrePump | None:
    before = len(p)

    def unknown(key: str) -> str:
        if key in BULK_PUMP_KEYS:
            return "is a key of a bulk medium's pump; a fibre's pump takes " + ", ".join(FIBRE_PUMP)
        return f"unknown key{did_you_mean(key, FIBRE_PUMP) or allowed_keys(FIBRE_PUMP)}"

    v = check_table(p, table, path, FIBRE_PUMP, unknown=unknown)
    wavelength_nm = v.get("wavelength_nm")
    if material is not None:
        if wavelength_nm is None:
            if material.pump_wavelength_m is None:
                p.add(join_path(path, "wavelength_nm"), f"missing: material '{material.name}' gives no pump "
                                                        "wavelength; give wavelength_nm")
            else:
                wavelength_nm = material.pump_wavelength_m / 1e-9
        if wavelength_nm is not None:
            wl = wavelength_nm * 1e-9
            if material.spectrum is not None:
                if not material.spectrum.covers(wl):
                    p.add(join_path(path, "wavelength_nm"), f"outside the material's cross-section spectrum "
                                                            f"({material.spectrum.range_nm})", wavelength_nm)
            elif not material.pump_absorption_cross_section_m2:
                p.add(path, f"material '{material.name}' gives no pump absorption cross-section; give "
                            "pump_absorption_cross_section_cm2 or a spectrum in the material")
            elif material.pump_wavelength_m is None or abs(wl / material.pump_wavelength_m - 1) > 1e-9:
                known = material.pump_wavelength_m
                p.add(join_path(path, "wavelength_nm"), "the material's pump cross-sections hold at "
                      + (f"{known / 1e-9:g} nm" if known else "its pump wavelength")
                      + " only; give that wavelength or a spectrum in the material", wavelength_nm)
    if len(p) > before or wavelength_nm is None:
        return None
    return FibrePump(wavelength_m=wavelength_nm * 1e-9, power_W=v["power_W"], direction=v["direction"],
                     cladding=v["cladding"])


# --- the layout --------------------------------------------------------------------------------------

def check_layout(p: Problems, raw: dict, media: list[Medium] | None, steps: list[Step] | None,
                 seed: Seed | None, mode: str | None) -> None:
    """A layout with fibres: fibres only, pass and loss steps, each fibre passed once, the seed
    wavelength inside each fibre's cross-sections, no [solver] table (the fibre solver iterates to its own
    stated tolerance)."""
    if isinstance(raw.get("solver"), dict):
        p.add("solver", "the [solver] table sets the bulk cw iteration; a fibre's steady state is solved to a "
                        "relative change of 1e-9 by its own relaxation and Newton steps: remove it", raw["solver"])
    items = raw.get("medium") if isinstance(raw.get("medium"), list) else []
    for i, item in enumerate(items):
        if isinstance(item, dict) and item.get("kind", "bulk") != "fibre":
            p.add(f"medium[{i}].kind", 'a layout with a fibre is made of fibres only (kind = "fibre"); model '
                                       "bulk stages in a run of their own", item.get("kind", "bulk"))
    for i, item in enumerate(raw.get("step") if isinstance(raw.get("step"), list) else []):
        if not isinstance(item, dict):
            continue
        kind = item.get("kind")
        if isinstance(kind, str) and kind not in FIBRE_STEPS and kind in S.STEP_KIND_NAMES:
            p.add(f"step[{i}].kind", f"a fibre layout takes {quoted_list(FIBRE_STEPS)} steps (the fibre's mode "
                                     "carries the beam)", kind)
        if kind == "pass" and item.get("reverse") is True:
            p.add(f"step[{i}].reverse", "a fibre is passed from z = 0; launch its pump backward instead "
                                        '(pump.direction = "backward")', True)
    if steps is not None:
        seen: dict[str, int] = {}
        for s in steps:
            if s.kind == "pass":
                if s.medium in seen:
                    p.add(f"step[{s.index}].medium", f"fibre '{s.medium}' is already passed in step[{seen[s.medium]}]; "
                                                     "a fibre is passed once", s.medium)
                seen.setdefault(s.medium, s.index)
    if seed is not None and media is not None:
        for m in media:
            if m.kind != "fibre":
                continue
            spec = m.material.spectrum
            if spec is not None and not spec.covers(seed.wavelength_m):
                p.add("seed.wavelength_nm", f"outside the cross-section spectrum of fibre '{m.name}' "
                                            f"({spec.range_nm})", seed.wavelength_m / 1e-9)
            elif spec is None and abs(seed.wavelength_m / m.material.wavelength_m - 1) > 1e-9:
                p.add("seed.wavelength_nm", f"fibre '{m.name}' has cross-sections at "
                                            f"{m.material.wavelength_m / 1e-9:g} nm only; give that wavelength or "
                                            "a spectrum in its material", seed.wavelength_m / 1e-9)


SEED_TRANSVERSE = ("profile", "order", "diameter_mm", "waist_mm", "curvature_mm", "m_squared", "phase_screen_seed")


def check_seed(p: Problems, table: dict, fibre_layout: bool, mode: str | None) -> float | None:
    """The seed keys that depend on fibres: no transverse profile in a fibre layout; a repetition rate
    only for pulses (a bulk train's own checks are in config/timing.py). Returns the repetition rate in
    Hz (None when not given)."""
    if fibre_layout:
        for key in SEED_TRANSVERSE:
            if key in table:
                p.add(join_path("seed", key), "a fibre's mode carries the signal: remove the transverse keys "
                                              f"({', '.join(SEED_TRANSVERSE)})", table[key])
    rates = given_keys(p, table, ("repetition_rate_Hz", "repetition_rate_kHz"),
                       several=("seed", "both repetition_rate_Hz and repetition_rate_kHz given: give one"))
    if len(rates) != 1:
        return None
    key = rates[0]
    if mode == "cw":
        p.add(join_path("seed", key), 'applies to pulses (mode = "pulsed"); a cw seed takes power_W', table[key])
    value = table[key]
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0:
        return to_si(key, value)
    return None


def grid(p: Problems, raw: dict, media: list[Medium] | None, seed: Seed | None) -> Grid | None:
    """The [grid] of a fibre layout: every key optional."""
    table = raw.get("grid", {})
    if not isinstance(table, dict):
        return None
    schema = {k: dataclasses.replace(s, required=False) for k, s in S.GRID.items()}
    before = len(p)
    v = check_table(p, table, "grid", schema)
    if len(p) > before or media is None or seed is None:
        return None
    points = v["points"] if "points" in table else FIBRE_GRID_POINTS
    if "width_mm" in v:
        width = to_si("width_mm", v["width_mm"])
    else:
        width = 0.0
        for m in media:
            fib = m.fibre
            w = float(fm.mode_radius(fib.core_diameter_m / 2, seed.wavelength_m, fib.core_na, fib.mode_field_diameter_m))
            width = max(width, 3 * fib.core_diameter_m, 6 * w)
    return Grid(points=points, width_m=width, time_slices=v["time_slices"], diffraction=v["diffraction"])

