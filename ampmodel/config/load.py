"""Run configs: TOML file (or dict) -> validated :class:`~ampmodel.description.Config`.

The whole config is checked against the schema in ``schema.py`` before anything runs. Every
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
import json
import os
from pathlib import Path
from types import MappingProxyType
from typing import Mapping, Sequence

import numpy as np

from ampmodel.config import chain as config_chain
from ampmodel.config import cw as config_cw
from ampmodel.config import fibre as config_fibre
from ampmodel.config import measured as config_measured
from ampmodel.config import profile as config_profile
from ampmodel.config import schema as S
from ampmodel.config import timing as config_timing
from ampmodel.config.checks import (
    ConfigError,
    Problems,
    check_table,
    expected,
    given_keys,
    join_path,
    type_name,
)
from ampmodel.config.files import FileProblem, read_regular, shorten
from ampmodel.config.medium import builtin_material, check_media, check_seed_spectrum
from ampmodel.config.steps import check_steps
from ampmodel.config.sweep import check_spread, check_sweep, with_vary
from ampmodel.config.text import (
    apply_into,
    dump_toml,
    parse_toml,
    plain_config,
)
from ampmodel.description import Config, Grid, Limits, Medium, Seed, Train
from ampmodel.materials.material import (
    Material,
)
from ampmodel.units import to_si

# ----------------------------------------------------------------------------------------------
# Loading
# ----------------------------------------------------------------------------------------------

MAX_CONFIG_BYTES = 256 * 2**20     # a config with inline measured frames can be large; none is larger


def _config_text(path: Path, name: str) -> str:
    """The text of a config file (a regular UTF-8 file of at most MAX_CONFIG_BYTES); ConfigError else."""
    try:
        if path.is_dir():
            raise IsADirectoryError
        data = read_regular(path, MAX_CONFIG_BYTES)
    except IsADirectoryError:
        raise ConfigError([f"{name}: cannot read the config: it is a directory, not a TOML file"]) from None
    except FileProblem as exc:
        message = "no such config file" if str(exc).startswith("no such file") else f"cannot read the config: {exc}"
        raise ConfigError([f"{shorten(name)}: {message}"]) from None
    except OSError as exc:
        raise ConfigError([f"{shorten(name)}: cannot read the config: {exc.strerror or exc}"]) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        start = exc.start + (3 if data.startswith(b"\xef\xbb\xbf") else 0)
        line = data[:start].count(b"\n") + 1
        column = start - (data.rfind(b"\n", 0, start) + 1) + 1
        raise ConfigError([f"{name}: cannot read the config: not UTF-8 text ({exc.reason} at line {line}, "
                           f"column {column}, byte {start}); save the file as UTF-8"]) from None


def load_config(source: str | os.PathLike | Mapping, overrides: Sequence[str] = (), *,
                folder: str | os.PathLike | None = None,
                builtin_materials: Mapping[str, Material] | None = None, stored_seeds: Mapping | None = None,
                vary: Mapping[str, Sequence] | Sequence[str] | None = None, combine: str | None = None) -> Config:
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
    stored_seeds : ``seed.from`` as written -> the beam a chained run took (a rerun: from its own file)
    vary : ``"PATH=V1,V2,..."`` strings (``sweep --vary``) or a mapping ``{path: [values]}``, optional
        The [sweep] table's value paths, in place of the config's own (its ``combine`` and ``figures``
        kept); checked as the table is, problems naming ``--vary PATH``.
    combine : "grid" or "zip", optional
        The [sweep] table's ``combine`` (``sweep --combine``).

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
        problems = Problems(name, base.absolute(), builtin_materials, stored_seeds)
        raw = plain_config(source, "", problems)
    elif isinstance(source, (str, os.PathLike)):
        path = Path(source)
        name, title = str(source), path.stem
        base = Path(folder) if folder is not None else path.parent
        problems = Problems(name, base.absolute(), builtin_materials, stored_seeds)
        text = _config_text(path, name)
        raw = parse_toml(text, problems)
        if raw is None:
            raise ConfigError(problems.lines)
    else:
        raise TypeError(f"load_config takes a path or a mapping, not {type(source).__name__}")

    if overrides:
        raw = apply_into(raw, overrides, problems)
    labels: dict[str, str] = {}
    if vary is not None or combine is not None:
        raw, labels, _ = with_vary(problems, raw, vary, combine)
    config = _validate(raw, problems, title, labels)
    if problems.lines:
        raise ConfigError(problems.lines)
    if overrides or labels:
        listing = "; ".join(" ".join(str(o).split()) for o in overrides)
        text = (f"# overrides (--set): {listing}\n" if overrides else "") + \
            (f"# the [sweep] table from the command line: {_sweep_line(raw['sweep'], labels)}\n" if labels else "") + \
            dump_toml(raw)
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

def _sweep_line(table: Mapping, labels: Mapping[str, str]) -> str:
    """The --vary and --combine options of a [sweep] table, as one line (the text's header)."""
    parts = [f"--vary {k}={','.join(json.dumps(v, default=str) for v in table[k])}"
             for k in labels if k != "combine"]
    if "combine" in labels:
        parts.append(f"--combine {table['combine']}")
    return " ".join(parts)


def _validate(raw: dict, p: Problems, default_title: str, labels: Mapping[str, str] | None = None) -> Config | None:
    """Check the whole config; return the Config (text, source, raw not yet set) or None with problems."""
    fibre_layout = config_fibre.any_fibre(raw)        # a layout with a fibre (checked to be fibres only)
    only_fibres = config_fibre.all_fibre(raw)
    top = check_table(p, raw, "", S.TOP, skip=("medium", "step", "grid", "seed", "limits", "solver", "sweep",
                                              "train", "spread"))
    for key in ("grid", "seed", "limits", "solver", "sweep", "train", "spread"):
        if key in raw and not isinstance(raw[key], dict):
            p.add(key, f"must be a table [{key}], not {type_name(raw[key])}", raw[key])
    for key in ("grid", "seed"):
        if key not in raw and not (key == "grid" and only_fibres):
            p.add(key, f"missing section [{key}]: give {S.SECTION_HINTS[key]}")
    mode = top.get("mode")
    grid = _grid(p, raw["grid"]) if isinstance(raw.get("grid"), dict) and not only_fibres else None
    config_cw.grid_keys(p, raw, mode)
    media, names = check_media(p, raw, mode)
    seed = _seed(p, raw["seed"], mode, media, fibre_layout, grid) if isinstance(raw.get("seed"), dict) else None
    steps = check_steps(p, raw, names, mode)
    solver = config_cw.solver(p, raw, mode)
    if fibre_layout:
        config_fibre.check_layout(p, raw, media, steps, seed, mode)
    if only_fibres:
        grid = config_fibre.grid(p, raw, media, seed)
    limits = _limits(check_table(p, raw["limits"], "limits", S.LIMITS)) \
        if isinstance(raw.get("limits"), dict) else Limits()
    train = Train(**check_table(p, raw["train"], "train", S.TRAIN)) \
        if isinstance(raw.get("train"), dict) else Train()
    if isinstance(raw.get("sweep"), dict):
        check_sweep(p, raw, builtin_material, labels)
    if isinstance(raw.get("spread"), dict):
        check_spread(p, raw)
    if media is not None and seed is not None and not fibre_layout and len(p) == 0:
        before = len(p)
        check_seed_spectrum(p, media, seed)
        if seed.beam is not None:     # the seed's wavelengths are the earlier run's, not keys of this config
            p.lines[before:] = [f"{line} (seed.from gives the seed's wavelengths: give the medium a cross-section "
                                "spectrum that covers them)" for line in p.lines[before:]]
    if mode == "cw" and isinstance(raw.get("seed"), dict) and not (grid is not None and grid.diffraction):
        for key in S.SEED_FIELD_KEYS:
            if key in raw["seed"]:
                p.add(join_path("seed", key), "shapes the seed's optical field: a cw seed takes it with "
                                              "grid.diffraction = true (without diffraction it is taken at its "
                                              "waist with a flat wavefront); set grid.diffraction = true or "
                                              "remove it", raw["seed"][key])
    if grid is not None and not grid.diffraction and isinstance(raw.get("step"), list):
        for path, item in config_timing.all_step_tables(raw["step"]):
            if item.get("kind") in S.FIELD_ONLY_KINDS:
                p.add(f"{path}.kind", f"a '{item['kind']}' step acts on the optical field: set "
                                      "grid.diffraction = true (or remove the step)", item["kind"])
    if grid is not None and seed is not None and seed.measured is not None:
        config_profile.check_with_grid(p, grid, seed.measured, mode)
    if grid is not None and steps is not None:
        config_timing.cavity_modes(p, raw, grid)
    if grid is not None and media is not None and not only_fibres:
        _apertures_on_grid(p, grid, media, seed)
    if len(p) or grid is None or seed is None or media is None or steps is None:
        return None
    config_timing.check(p, raw, media, seed, tuple(steps))
    if len(p):
        return None
    return Config(title=top.get("title", default_title), mode=mode, grid=grid, media=tuple(media),
                  seed=seed, steps=tuple(steps), limits=limits, solver=solver, train=train)


def _apertures_on_grid(p: Problems, grid: Grid, media: list[Medium], seed: Seed | None) -> None:
    """Each bulk medium's clear aperture, its pump's profile and the seed's profile must light a pixel
    of the grid (else no gain, no pump, no beam: a slip of unit)."""
    from ampmodel.kernels import beam_shapes
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    if seed is not None and seed.measured is None and seed.beam is None and seed.diameter_m > 0:
        if not np.any(beam_shapes.transverse_profile(x, x, seed.profile, seed.diameter_m, seed.order) > 0.0):
            p.add("seed.diameter_mm", f"the seed's profile covers no pixel of the grid (pixels of "
                  f"{grid.width_m / grid.points * 1e3:.3g} mm): widen the seed or make the pixels finer",
                  seed.diameter_m * 1e3)
    pixel = f"(pixels of {grid.width_m / grid.points * 1e3:.3g} mm): make it wider or the pixels finer (grid.points, " \
            f"grid.width_mm)"
    for i, m in enumerate(media):
        if m.kind == "fibre":
            continue
        inside = beam_shapes.aperture_mask(x, x, m.aperture, m.diameter_m)
        if not inside.any():
            p.add(f"medium[{i}] ({m.name}).diameter_mm", f"the clear aperture covers no pixel of the grid {pixel}",
                  m.diameter_m * 1e3)
        elif m.pump is not None and m.pump.diameter_m is not None:
            profile = beam_shapes.transverse_profile(x, x, m.pump.profile, m.pump.diameter_m, m.pump.order)
            if not np.any(profile[inside] > 0.0):
                p.add(f"medium[{i}] ({m.name}).pump.diameter_mm", f"the pump's profile covers no pixel of the clear "
                      f"aperture {pixel}", m.pump.diameter_m * 1e3)


def _grid(p: Problems, table: dict) -> Grid | None:
    """The [grid] table."""
    before = len(p)
    v = check_table(p, table, "grid", S.GRID)
    if len(p) > before:
        return None
    return Grid(points=v["points"], width_m=to_si("width_mm", v["width_mm"]),
                time_slices=v["time_slices"], diffraction=v["diffraction"], fft_workers=v["fft_workers"])


# --- media ------------------------------------------------------------------------------------


# --- seed -------------------------------------------------------------------------------------

def _seed(p: Problems, table: dict, mode: str | None, media: list[Medium] | None,
          fibre_layout: bool = False, grid: Grid | None = None) -> Seed | None:
    """The [seed] table; pulsed and cw seeds take different keys; in a fibre layout the fibre's mode
    carries the seed (no transverse profile) and pulses may come at a repetition rate; with ``from``
    the seed is an earlier run's beam (config/chain.py)."""
    before = len(p)
    v = check_table(p, table, "seed", S.SEED)
    if "from_step" in table and "from" not in table:
        p.add("seed.from_step", "applies to a seed taken from an earlier run's result: give seed.from too, or "
                                "remove from_step", table["from_step"])
    if "from" in table:
        rate_Hz = config_fibre.check_seed(p, table, fibre_layout, mode)
        return config_chain.seed_from(p, table, v, mode, grid, fibre_layout, rate_Hz) if len(p) == before else None
    profile = _measured(p, table, fibre_layout)
    if not fibre_layout and "diameter_mm" not in table and table.get("profile") != "file":
        p.add("seed.diameter_mm", f"missing: {S.SEED['diameter_mm'].meaning}, {expected(S.SEED['diameter_mm'])}")
    rate_Hz = config_fibre.check_seed(p, table, fibre_layout, mode)
    durations: list[str] = []          # the pulsed seed's duration key, checked below
    traces: dict = {}                  # the Seed fields of its measured traces (config/measured.py)
    if mode == "pulsed":
        for key in S.CW_SEED_KEYS:
            if key in table:
                p.add(join_path("seed", key), 'is a key of a cw seed (mode = "cw"); a pulsed seed takes energy_J',
                      table[key])
        if "energy_J" not in table:
            p.add("seed.energy_J", f"missing: the pulse energy, {expected(S.SEED['energy_J'])} "
                                   '(required when mode = "pulsed")')
        traces = config_measured.seed_fields(p, table, fibre_layout)       # a measured pulse or spectrum
        if table.get("shape") != "file":
            durations = given_keys(p, table, S.DURATION_KEYS,
                                   none=("seed.duration_ns", "missing: the pulse duration (FWHM), a number > 0; or "
                                                             "duration_ps, duration_fs, duration_us"),
                                   several=lambda given: ("seed", f"several durations ({', '.join(given)}): give "
                                                                  f"exactly one of {', '.join(S.DURATION_KEYS)}"))
    elif mode == "cw":
        for key in S.PULSED_SEED_KEYS:
            if key in table:
                p.add(join_path("seed", key), 'is a key of a pulsed seed (mode = "pulsed"); a cw seed takes power_W',
                      table[key])
        if "power_W" not in table:
            p.add("seed.power_W", f"missing: the beam power, {expected(S.SEED['power_W'])}")
    given_keys(p, table, S.SEED_WAVEFRONT_KEYS,
               several=("seed", "both waist_mm and curvature_mm given: give one (the waist position fixes the "
                                "wavefront curvature of a Gaussian seed)"))
    wavelength_nm = v.get("wavelength_nm")
    if "wavelength_nm" not in table and media is not None:
        wavelength_nm = media[0].material.wavelength_m / 1e-9
    if len(p) > before or wavelength_nm is None or mode is None:
        return None
    duration_s = to_si(durations[0], v[durations[0]]) if durations else None
    if profile is not None:       # the measured beam's D4σ (mean of x and y) is the seed's diameter
        v["diameter_mm"] = 0.5 * sum(profile.d4sigma_m()) / 1e-3
    seed = Seed(wavelength_m=to_si("wavelength_nm", wavelength_nm), energy_J=v.get("energy_J"),
                power_W=v.get("power_W"), duration_s=duration_s, shape=v["shape"], profile=v["profile"],
                order=v["order"], diameter_m=to_si("diameter_mm", v["diameter_mm"]) if "diameter_mm" in v else 0.0,
                waist_m=to_si("waist_mm", v["waist_mm"]) if "waist_mm" in v else None,
                curvature_m=to_si("curvature_mm", v["curvature_mm"]) if "curvature_mm" in v else None,
                m_squared=v["m_squared"], phase_screen_seed=v["phase_screen_seed"], repetition_rate_Hz=rate_Hz,
                bandwidth_m=to_si("bandwidth_nm", v["bandwidth_nm"]) if "bandwidth_nm" in v else None,
                chirp=v["chirp"], measured=profile)
    return dataclasses.replace(seed, **traces)


def _measured(p: Problems, table: dict, fibre_layout: bool):
    """The measured profile of ``profile = "file"`` (config/profile.py); None otherwise or with problems."""
    if fibre_layout:
        if "measured_profile" in table:
            p.add("seed.measured_profile", "a fibre's mode carries the signal: remove the measured profile",
                  table["measured_profile"])
        return None
    if table.get("profile") != "file":
        if "measured_profile" in table:
            p.add("seed.measured_profile", 'applies to profile = "file": set seed.profile = "file" or remove it',
                  table["measured_profile"])
        return None
    if "diameter_mm" in table:
        p.add("seed.diameter_mm", 'with profile = "file" the measured beam\'s D4σ is its diameter: remove '
                                  "diameter_mm", table["diameter_mm"])
    return config_profile.measured_profile(p, table.get("measured_profile"))


# --- steps ------------------------------------------------------------------------------------


def _limits(values: dict) -> Limits:
    """The [limits] table as Limits (the muted codes as a tuple)."""
    values = dict(values)
    values["mute"] = tuple(values.get("mute") or ())
    return Limits(**values)
