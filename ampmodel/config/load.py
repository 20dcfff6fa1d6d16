"""Run configs: TOML file (or dict) -> validated :class:`~ampmodel.description.Config`.

The whole config is checked against the schema in ``config_schema.py`` before anything runs. Every
problem is collected, and :class:`ConfigError` carries them all, one line each::

    <file>: <key path> = <value>: <what is wrong / what is allowed>[; did you mean 'x'?]

Key paths name media and steps by position and name (``medium[0] (rod).material.wavelength_nm``,
``step[2].transmission``). Values given in config units (``length_mm``, ``duration_ns``) are
converted to SI here, once, with :func:`ampmodel.units.to_si`.

Value paths for ``--set`` and sweeps are dotted, media and steps by name or index:
``seed.energy_J``, ``medium.rod.length_mm``, ``medium.0.slices``, ``step.1.transmission``; a key
holding a dot is written in double quotes (``sweep."seed.energy_J"``).
"""
from __future__ import annotations

import dataclasses
import os
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping, Sequence

from ampmodel.config import cw as config_cw, fibre as config_fibre, files as config_files, timing as config_timing
from ampmodel.config import schema as S
from ampmodel.config.checks import ConfigError
from ampmodel.config.schema import PathError, Problems, array_of_tables, check_table, check_value, did_you_mean, expected, item_names, join_path, quoted_list
from ampmodel.config.text import apply_into, apply_overrides, dump_toml, parse_toml, plain_config, resolve_path
from ampmodel.config.text import tomllib  # noqa: F401  (tomllib, or tomli on Python 3.10, for those who read TOML)
from ampmodel.config.sweep import check_spread, check_sweep
from ampmodel.description import Config, Grid, Limits, Medium, Pump, Seed, Step, Train
from ampmodel.materials.material import MATERIAL_KEYS, SPECTRUM_STANDS_IN, Material, check_spectrum, config_values, material_from_values
from ampmodel.units import LIGHT_SPEED_M_S, si_name, to_si

__all__ = ["ConfigError", "PathError", "load_config", "apply_overrides", "resolve_path", "dump_toml"]

STAND_IN_KEYS = frozenset(key for key, _, _ in SPECTRUM_STANDS_IN)



# ----------------------------------------------------------------------------------------------
# Loading
# ----------------------------------------------------------------------------------------------

def load_config(source: str | os.PathLike | Mapping, overrides: Sequence[str] = (), *,
                folder: str | os.PathLike | None = None,
                builtin_materials: Mapping[str, Material] | None = None) -> Config:
    """Read, override and validate a run config.

    Parameters
    ----------
    source : str, os.PathLike or Mapping
        A path to a TOML file, or the config as a dict (shown as ``<dict>`` in problems).
    overrides : sequence of str
        ``"PATH=VALUE"`` strings (``--set``), applied before validation.
    folder : str or os.PathLike, optional
        Where relative paths of data files in the config are taken from; default the config file's
        folder (for a dict: the working directory).
    builtin_materials : mapping of name -> Material, optional
        Built-in materials to use instead of the material files (a rerun uses the data its result
        file recorded).

    Returns
    -------
    Config
        Every quantity SI. ``text`` is the file text (after overrides: the modified config as TOML,
        headed by a comment listing them), ``raw`` the (modified) dict, ``source`` the path,
        ``folder`` the folder of relative paths, ``builtin_materials`` the built-in materials it
        used and ``data_files`` the data files it read (path as written -> text).

    Raises
    ------
    ConfigError
        With every problem found, one line each.
    """
    overrides = [overrides] if isinstance(overrides, str) else list(overrides)
    if isinstance(source, Mapping):
        name, title, text = "<dict>", "untitled", None
        base = Path(folder) if folder is not None else Path.cwd()
        problems = Problems(name, base.absolute(), builtin_materials)
        raw = plain_config(source, "", problems)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        name, title = str(source), path.stem
        base = Path(folder) if folder is not None else path.parent
        problems = Problems(name, base.absolute(), builtin_materials)
        try:
            data = path.read_bytes()
            text = data.decode("utf-8-sig")
        except FileNotFoundError:
            raise ConfigError([f"{name}: no such config file"]) from None
        except IsADirectoryError:
            raise ConfigError([f"{name}: cannot read the config: it is a directory, not a TOML file"]) from None
        except UnicodeDecodeError as exc:
            start = exc.start + (3 if data.startswith(b"\xef\xbb\xbf") else 0)
            line = data[:start].count(b"\n") + 1
            column = start - (data.rfind(b"\n", 0, start) + 1) + 1
            raise ConfigError([f"{name}: cannot read the config: not UTF-8 text ({exc.reason} at line {line}, "
                               f"column {column}, byte {start}); save the file as UTF-8"]) from None
        except OSError as exc:
            raise ConfigError([f"{name}: cannot read the config: {exc.strerror or exc}"]) from None
        raw = parse_toml(text, problems)
        if raw is None:
            raise ConfigError(problems.lines)
    else:
        raise TypeError(f"load_config takes a path or a mapping, not {type(source).__name__}")

    if overrides:
        raw = apply_into(raw, overrides, problems)
    config = _validate(raw, problems, title)
    if problems.lines:
        raise ConfigError(problems.lines)
    if overrides:
        listing = "; ".join(" ".join(str(o).split()) for o in overrides)
        text = f"# overrides (--set): {listing}\n" + dump_toml(raw)
    elif text is None:
        try:
            text = dump_toml(raw)
        except (TypeError, ValueError) as exc:
            raise ConfigError([f"{name}: cannot write the config as TOML: {exc}"]) from None
    return dataclasses.replace(config, text=text, source=name, raw=raw, folder=str(problems.folder),
                               builtin_materials=MappingProxyType(dict(problems.used_builtin)),
                               data_files=MappingProxyType(dict(problems.data_files)))


# ----------------------------------------------------------------------------------------------
# Validation
# ----------------------------------------------------------------------------------------------

def _validate(raw: dict, p: Problems, default_title: str) -> Config | None:
    """Check the whole config; return the Config (text, source, raw not yet set) or None with problems."""
    fibre_layout = config_fibre.any_fibre(raw)        # a layout with a fibre (checked to be fibres only)
    only_fibres = config_fibre.all_fibre(raw)
    top = check_table(p, raw, "", S.TOP, skip=("medium", "step", "grid", "seed", "limits", "solver", "sweep",
                                              "train", "spread"))
    for key in ("grid", "seed", "limits", "solver", "sweep", "train", "spread"):
        if key in raw and not isinstance(raw[key], dict):
            p.add(key, f"must be a table [{key}], not {S.type_name(raw[key])}", raw[key])
    for key in ("grid", "seed"):
        if key not in raw and not (key == "grid" and only_fibres):
            p.add(key, f"missing section [{key}]: give {S.SECTION_HINTS[key]}")
    mode = top.get("mode")
    grid = _grid(p, raw["grid"]) if isinstance(raw.get("grid"), dict) and not only_fibres else None
    config_cw.grid_keys(p, raw, mode)
    media, names = _media(p, raw, mode)
    seed = _seed(p, raw["seed"], mode, media, fibre_layout) if isinstance(raw.get("seed"), dict) else None
    steps = _steps(p, raw, names, mode)
    solver = config_cw.solver(p, raw, mode)
    if fibre_layout:
        config_fibre.check_layout(p, raw, media, steps, seed, mode)
    if only_fibres:
        grid = config_fibre.grid(p, raw, media, seed)
    limits = Limits(**check_table(p, raw["limits"], "limits", S.LIMITS)) \
        if isinstance(raw.get("limits"), dict) else Limits()
    train = Train(**check_table(p, raw["train"], "train", S.TRAIN)) \
        if isinstance(raw.get("train"), dict) else Train()
    if isinstance(raw.get("sweep"), dict):
        check_sweep(p, raw, _builtin)
    if isinstance(raw.get("spread"), dict):
        check_spread(p, raw)
    if mode == "cw" and grid is not None and grid.diffraction:
        p.add("grid.diffraction", 'split-step diffraction is available for mode = "pulsed" only in this version; '
                                  "set grid.diffraction = false", True)
    if mode == "cw" and isinstance(raw.get("seed"), dict):
        for key in S.SEED_FIELD_KEYS:
            if key in raw["seed"]:
                p.add(join_path("seed", key), 'applies to mode = "pulsed" only in this version (a cw seed is taken '
                                              "at its waist with a flat wavefront); remove it", raw["seed"][key])
    if grid is not None and not grid.diffraction and isinstance(raw.get("step"), list):
        for path, item in config_timing.all_step_tables(raw["step"]):
            if item.get("kind") in S.FIELD_ONLY_KINDS:
                p.add(f"{path}.kind", f"a '{item['kind']}' step acts on the optical field: set "
                                      "grid.diffraction = true (or remove the step)", item["kind"])
    if len(p) or grid is None or seed is None or media is None or steps is None:
        return None
    config_timing.check(p, raw, media, seed, tuple(steps))
    if len(p):
        return None
    return Config(title=top.get("title", default_title), mode=mode, grid=grid, media=tuple(media),
                  seed=seed, steps=tuple(steps), limits=limits, solver=solver, train=train)


def _grid(p: Problems, table: dict) -> Grid | None:
    """The [grid] table."""
    before = len(p)
    v = check_table(p, table, "grid", S.GRID)
    if len(p) > before:
        return None
    return Grid(points=v["points"], width_m=to_si("width_mm", v["width_mm"]),
                time_slices=v["time_slices"], diffraction=v["diffraction"], fft_workers=v["fft_workers"])


# --- media ------------------------------------------------------------------------------------

def _media(p: Problems, raw: dict, mode: str | None = "pulsed") -> tuple[list[Medium] | None, list[str]]:
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
    if "diameter_mm" in item and "width_mm" in item:
        p.add(path, "both diameter_mm and width_mm given: give diameter_mm (round aperture) "
                    "or width_mm (square aperture), not both")
    elif "diameter_mm" not in item and "width_mm" not in item:
        p.add(join_path(path, "diameter_mm"), "missing: the clear aperture, diameter_mm (round) "
                                              "or width_mm (square), a number > 0")
    aperture_key = "width_mm" if "width_mm" in item else "diameter_mm"
    gains = [k for k in S.GAIN_KEYS if k in item]
    if len(gains) > 1:
        p.add(path, f"two gain specifications ({', '.join(S.GAIN_NAMES[g] for g in gains)}): "
                    "give exactly one of small_signal_gain, stored_energy_J, [medium.pump]")
    elif not gains:
        p.add(path, "no gain specification: give exactly one of small_signal_gain, stored_energy_J, "
                    "[medium.pump]")
    pump = None
    if isinstance(item.get("pump"), dict):
        doping = item.get("doping_per_m3") if isinstance(item.get("doping_per_m3"), (int, float)) else None
        pump = _pump(p, item["pump"], join_path(path, "pump"), material, doping, mode)
    if len(p) > before or material is None:
        return None
    return Medium(
        name=name, material=material, length_m=to_si("length_mm", v["length_mm"]),
        diameter_m=to_si(aperture_key, v[aperture_key]),
        aperture="square" if aperture_key == "width_mm" else "round",
        slices=v["slices"], loss_per_m=to_si("loss_per_cm", v["loss_per_cm"]),
        small_signal_gain=v.get("small_signal_gain"),
        stored_energy_J=v.get("stored_energy_J"), pump=pump,
        doping_per_m3=v.get("doping_per_m3"), kind=v["kind"])


def _registry():
    """The built-in materials (imported when first needed)."""
    from ampmodel.materials import registry
    return registry


def _builtin(p: Problems, path: str, name: str) -> Material | None:
    """A built-in material by name; an unknown name is a problem listing the close ones."""
    try:
        registry = _registry()
    except ImportError:
        p.add(path, "the built-in materials cannot be loaded in this installation; give a "
                    "[medium.material] table instead", name)
        return None
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
        return _builtin(p, mpath, value)
    if not isinstance(value, dict):
        p.add(mpath, f"must be {expected(S.MEDIUM['material'])}, not {S.type_name(value)}", value)
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
    base = _builtin(p, join_path(mpath, "base"), base_name) if isinstance(base_name, str) else None
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
    if len(p) > before or material is None:
        return None
    if mode == "cw" or continuous:
        duration_s, energy_J, power_W = None, None, v["power_W"]
    else:
        duration_s = to_si("duration_us", v["duration_us"])
        energy_J, power_W = (v["energy_J"] if "energy_J" in v else v["power_W"] * duration_s), None
    return Pump(
        geometry=geometry, energy_J=energy_J, duration_s=duration_s,
        wavelength_m=to_si("wavelength_nm", wavelength_nm), profile=v["profile"],
        diameter_m=to_si("diameter_mm", v["diameter_mm"]) if "diameter_mm" in v else None,
        order=v["order"],
        absorption_per_m=to_si("absorption_per_cm", v["absorption_per_cm"]) if "absorption_per_cm" in v else None,
        back_reflectance=v.get("back_reflectance", 0.0), absorbed_fraction=v.get("absorbed_fraction", 1.0),
        transfer_efficiency=v["transfer_efficiency"], quantum_efficiency=v["quantum_efficiency"],
        power_W=power_W, continuous=continuous or mode == "cw")


# --- seed -------------------------------------------------------------------------------------

def _seed(p: Problems, table: dict, mode: str | None, media: list[Medium] | None,
          fibre_layout: bool = False) -> Seed | None:
    """The [seed] table; pulsed and cw seeds take different keys; in a fibre layout the fibre's mode
    carries the seed (no transverse profile) and pulses may come at a repetition rate."""
    before = len(p)
    v = check_table(p, table, "seed", S.SEED)
    if not fibre_layout and "diameter_mm" not in table:
        p.add("seed.diameter_mm", f"missing: {S.SEED['diameter_mm'].meaning}, {expected(S.SEED['diameter_mm'])}")
    rate_Hz = config_fibre.check_seed(p, table, fibre_layout, mode)
    durations = [k for k in S.DURATION_KEYS if k in table]
    if mode == "pulsed":
        for key in S.CW_SEED_KEYS:
            if key in table:
                p.add(join_path("seed", key), 'is a key of a cw seed (mode = "cw"); a pulsed seed takes energy_J',
                      table[key])
        if "energy_J" not in table:
            p.add("seed.energy_J", f"missing: the pulse energy, {expected(S.SEED['energy_J'])} "
                                   '(required when mode = "pulsed")')
        if len(durations) > 1:
            p.add("seed", f"several durations ({', '.join(durations)}): give exactly one of "
                          f"{', '.join(S.DURATION_KEYS)}")
        elif not durations:
            p.add("seed.duration_ns", "missing: the pulse duration (FWHM), a number > 0; or duration_ps, "
                                      "duration_fs, duration_us")
    elif mode == "cw":
        for key in S.PULSED_SEED_KEYS:
            if key in table:
                p.add(join_path("seed", key), 'is a key of a pulsed seed (mode = "pulsed"); a cw seed takes power_W',
                      table[key])
        if "power_W" not in table:
            p.add("seed.power_W", f"missing: the beam power, {expected(S.SEED['power_W'])}")
    wavefront = [k for k in S.SEED_WAVEFRONT_KEYS if k in table]
    if len(wavefront) > 1:
        p.add("seed", "both waist_mm and curvature_mm given: give one (the waist position fixes the "
                      "wavefront curvature of a Gaussian seed)")
    wavelength_nm = v.get("wavelength_nm")
    if "wavelength_nm" not in table and media is not None:
        wavelength_nm = media[0].material.wavelength_m / 1e-9
    if len(p) > before or wavelength_nm is None or mode is None:
        return None
    duration_s = to_si(durations[0], v[durations[0]]) if mode == "pulsed" else None
    return Seed(wavelength_m=to_si("wavelength_nm", wavelength_nm), energy_J=v.get("energy_J"),
                power_W=v.get("power_W"), duration_s=duration_s, shape=v["shape"], profile=v["profile"],
                order=v["order"], diameter_m=to_si("diameter_mm", v["diameter_mm"]) if "diameter_mm" in v else 0.0,
                waist_m=to_si("waist_mm", v["waist_mm"]) if "waist_mm" in v else None,
                curvature_m=to_si("curvature_mm", v["curvature_mm"]) if "curvature_mm" in v else None,
                m_squared=v["m_squared"], phase_screen_seed=v["phase_screen_seed"], repetition_rate_Hz=rate_Hz)


# --- steps ------------------------------------------------------------------------------------

def _steps(p: Problems, raw: dict, names: list[str], mode: str | None = "pulsed") -> list[Step] | None:
    """Every [[step]], in order."""
    items = array_of_tables(p, raw, "step")
    if items is None:
        return None
    steps = []
    for i, item in enumerate(items):
        if isinstance(item, dict):
            steps.append(_step(p, i, item, names, mode))
    if len(steps) < len(items) or any(s is None for s in steps):
        return None
    return steps


def _wrong_kind_message(kind: str, schema: Mapping[str, S.Key]):
    """The message for a key that a step of this kind does not take."""
    def message(key: str) -> str:
        owners = [k for k, keys in S.STEP_KINDS.items() if key in keys]
        if owners:
            return (f"'{key}' is not a key of a '{kind}' step (it belongs to {quoted_list(owners)} steps); "
                    f"keys: {', '.join(schema)}")
        return f"unknown key{did_you_mean(key, schema) or S.allowed_keys(schema)}"
    return message


def _step(p: Problems, i: int, item: dict, names: list[str], mode: str | None = "pulsed",
          parent: tuple[int, str] | None = None) -> Step | None:
    """One [[step]] (or, with ``parent`` = (index, path) of a repeat, one of its [[step.steps]]):
    its kind decides which keys it takes."""
    before = len(p)
    name = item.get("name") if isinstance(item.get("name"), str) else ""
    where = f"{parent[1]}.steps[{i}]" if parent else f"step[{i}]"
    path = f"{where} ({name})" if name else where
    kind = item.get("kind")
    kind_key = S.INNER_STEP_KIND if parent else S.STEP_COMMON["kind"]
    if "kind" not in item:
        p.add(join_path(path, "kind"), f"missing: the step kind, {expected(kind_key)}")
        return None
    _, message = check_value(kind, kind_key)
    if message:
        if parent and kind == "repeat":
            message += "; a repeat cannot hold another repeat (write the inner steps out, or use count)"
        p.add(join_path(path, "kind"), message, kind)
        return None
    if mode == "cw" and (kind == "repeat" or "delay_ns" in item):
        what, value = ("kind", kind) if kind == "repeat" else ("delay_ns", item["delay_ns"])
        p.add(join_path(path, what), 'applies to mode = "pulsed" only: a cw beam is steady, so steps take no '
                                     'time and are not repeated round trip by round trip', value)
        return None
    schema = {**S.STEP_COMMON, **S.STEP_KINDS[kind], **S.STEP_TIME}
    v = check_table(p, item, path, schema, unknown=_wrong_kind_message(kind, schema), skip=("steps",))
    fields: dict[str, Any] = {}
    if kind == "pass" and "medium" in v:
        ref = v["medium"]
        if isinstance(ref, int) and 0 <= ref < len(names):
            fields["medium"] = names[ref]
        elif isinstance(ref, str) and ref in names:
            fields["medium"] = ref
        elif names:
            hint = did_you_mean(ref, names) if isinstance(ref, str) else ""
            p.add(join_path(path, "medium"), f"no such medium; media: {', '.join(names)} "
                                             f"(or an index from 0 to {len(names) - 1}){hint}", ref)
        fields["reverse"] = v["reverse"]
    elif kind == "loss" and "transmission" in v:
        fields["transmission"] = v["transmission"]
    elif kind == "aperture":
        shape = v.get("shape") or ("square" if "width_mm" in item and "diameter_mm" not in item else "round")
        need, other = ("diameter_mm", "width_mm") if shape == "round" else ("width_mm", "diameter_mm")
        if other in item:
            p.add(join_path(path, other), f"a {shape} aperture takes {need}, not {other}", item[other])
        elif need not in item:
            p.add(join_path(path, need), f"missing: the {shape} aperture's {need}, a number > 0")
        if need in v:
            fields.update(shape=shape, diameter_m=to_si(need, v[need]))
        if "order" in v:
            fields["order"] = v["order"]
    elif kind == "space" and "length_mm" in v:
        fields["length_m"] = to_si("length_mm", v["length_mm"])
        if mode != "cw":   # a path takes time: length/c (in air, index 1) unless delay_ns says otherwise
            fields["delay_s"] = fields["length_m"] / LIGHT_SPEED_M_S
    elif kind == "lens" and "focal_mm" in v:
        fields["focal_m"] = to_si("focal_mm", v["focal_mm"])
    elif kind == "filter":
        if "focal_mm" in v:
            fields["focal_m"] = to_si("focal_mm", v["focal_mm"])
        if "pinhole_diameter_mm" in v:
            fields["pinhole_diameter_m"] = to_si("pinhole_diameter_mm", v["pinhole_diameter_mm"])
    elif kind == "relay" and "magnification" in v:
        fields["magnification"] = v["magnification"]
    elif kind == "repeat":
        fields.update(config_timing.repeat(p, i, item, v, path, names, mode, _step))
    config_cw.step_keys(p, item, path, mode)
    fields.update(config_cw.cw_fields(v))
    damage = [k for k in ("damage_fluence_J_cm2", "damage_pulse_ns") if k in item]
    if len(damage) == 1 and config_cw.damage_pair_needed(mode):
        missing = "damage_pulse_ns" if damage[0] == "damage_fluence_J_cm2" else "damage_fluence_J_cm2"
        p.add(join_path(path, missing), f"missing: {damage[0]} is given; give both damage_fluence_J_cm2 and "
                                        "damage_pulse_ns (the pulse length the fluence was quoted at), or neither")
    for key in damage:
        if key in v:
            fields[si_name(key)] = to_si(key, v[key])
    if "delay_ns" in v:
        fields["delay_s"] = to_si("delay_ns", v["delay_ns"])
    if len(p) > before:
        return None
    return Step(kind=kind, index=i, name=name, parent=parent[0] if parent else None, **fields)

