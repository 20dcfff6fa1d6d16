"""The run-config schema as data: for every table, its keys with type, range, default and meaning.

``load.py``, ``medium.py`` and ``steps.py`` walk a config against these tables. Each key is a
:class:`~ampmodel.config.keys.Key`; the checks that involve several keys at once (exactly one gain
specification, keys that depend on the pump geometry or the step kind, ...) live with the tables
they check. What every check shares (Problems, show, did_you_mean, check_value, check_table) is in
``checks.py``, Key and its builders in ``keys.py``; this module adds the arrays of tables and the
dotted value paths (:func:`walk`).
"""
from __future__ import annotations

import dataclasses
from typing import Any, Mapping

from ampmodel.config.checks import PathError, Problems, did_you_mean, join_path, show, type_name
from ampmodel.config.keys import Key, choice, flag, integer, number, quantity, text
from ampmodel.description import Limits, Solver
from ampmodel.materials.material import BROADENINGS, MATERIAL_KEYS
from ampmodel.notices import CODES as NOTICE_CODES

# ----------------------------------------------------------------------------------------------
# The tables
# ----------------------------------------------------------------------------------------------

MODES = ("pulsed", "cw")
TOP: dict[str, Key] = {
    "title": text("a title for the run"),
    "mode": choice("run mode", MODES, default="pulsed"),
    "grid": Key("table", "the transverse window and time slicing", required=True),
    "medium": Key("tables", "the gain media", required=True),
    "seed": Key("table", "the input pulse", required=True),
    "step": Key("tables", "the layout, step by step", required=True),
    "limits": Key("table", "thresholds of the warnings"),
    "solver": Key("table", "settings of the cw steady-state iteration"),
    "sweep": Key("table", "values to sweep"),
    "train": Key("table", "how a pulse train is solved (with seed.repetition_rate_Hz)"),
    "spread": Key("table", "distributions of values for a tolerance run"),
}
SECTION_HINTS = {
    "grid": "[grid] with width_mm (and optionally points, time_slices)",
    "medium": "at least one [[medium]] with name, material, length_mm, diameter_mm and a gain specification",
    "seed": "[seed] with energy_J, duration_ns and diameter_mm",
    "step": 'at least one [[step]], e.g. kind = "pass", medium = "<name>"',
}

GRID: dict[str, Key] = {
    "points": integer("transverse points per axis", 8, 4096, default=128),
    "width_mm": quantity("full width of the square transverse window", ge=1e-3, le=1e4, required=True),
    "time_slices": integer("slices across the pulse", 1, 100000, default=64),
    "diffraction": flag("split-step diffraction", default=False),
    "fft_workers": integer("threads of the field path (FFTs and gain steps); -1: all cores", -1, 4096,
                           nonzero=True, default=-1),
}

MEDIUM_KINDS = ("bulk", "fibre")
GAIN_KEYS = ("small_signal_gain", "stored_energy_J", "pump")
GAIN_NAMES = {"small_signal_gain": "small_signal_gain", "stored_energy_J": "stored_energy_J",
              "pump": "[medium.pump]"}
_DOPING = MATERIAL_KEYS["doping_per_m3"]
MEDIUM: dict[str, Key] = {
    "name": text("medium name (steps refer to it)"),
    "kind": choice("medium kind (fibre media take the keys of FIBRE_MEDIUM)", MEDIUM_KINDS,
                   default="bulk"),
    "material": Key("material", 'a built-in material name or a [medium.material] table', required=True),
    "length_mm": quantity("length along the beam", ge=1e-3, le=1e4, required=True),
    "diameter_mm": quantity("clear-aperture diameter (round)", gt=0, le=1e4),
    "width_mm": quantity("clear-aperture side (square)", gt=0, le=1e4),
    "slices": integer("slices along z", 1, 100000, default=20),
    "loss_per_cm": quantity("passive loss coefficient", ge=0, le=100, default=0.0),
    "doping_per_m3": quantity("active-ion density", ge=_DOPING.low, le=_DOPING.high),
    "small_signal_gain": number("single-pass small-signal gain G0", ge=1, lt=1e30),
    "stored_energy_J": quantity("extractable stored energy", gt=0, le=1e6),
    "pump": Key("table", "a pump description that builds the gain map"),
    "cooling": choice("how the medium is cooled: its barrel held at coolant_C (a rod) or its back face "
                      "(a disc)", ("barrel", "face"), default="barrel"),
    "coolant_C": number("temperature of the cooled surface (degrees Celsius)", ge=-200, le=500, default=20.0),
    "thermal_lens": flag("apply the thermal lens's phase on the field path's passes", default=True),
}

GEOMETRIES = ("end", "side")
PUMP_PROFILES = ("flat", "gaussian", "supergaussian", "parabolic")
DIRECTIONS = ("forward", "backward", "both")
PUMP: dict[str, Key] = {
    "geometry": choice("pump geometry", GEOMETRIES, required=True),
    "energy_J": quantity("pump energy in one pump pulse", gt=0, le=1e7),
    "power_W": quantity("pump power during the pump pulse", gt=0, le=1e9),
    "duration_us": quantity("pump pulse length (pulsed mode)", ge=1e-3, le=1e7),
    "continuous": flag("a CW pump, on all the time (give power_W)", default=False),
    "wavelength_nm": quantity("pump wavelength", ge=150.0, le=20000.0),
    "profile": choice("transverse pump profile", PUMP_PROFILES, default="flat"),
    "diameter_mm": quantity("pumped diameter", gt=0, le=1e4),
    "order": number("supergaussian order", ge=2, le=1000, default=8.0),
    "absorption_per_cm": quantity("pump absorption coefficient", gt=0, le=1e4),
    "back_reflectance": number("end pumping: fraction of the transmitted pump sent back", ge=0, le=1),
    "direction": choice("end pumping: where the pump enters: z = 0 (forward), z = L (backward) or both ends "
                        "(energy_J or power_W at each)", DIRECTIONS, default="forward"),
    "absorbed_fraction": number("side pumping: fraction of the pump absorbed", gt=0, le=1),
    "transfer_efficiency": number("pump delivery efficiency", gt=0, le=1, default=1.0),
    "quantum_efficiency": number("upper-state ions per absorbed pump photon", gt=0, le=1, default=1.0),
}
END_ONLY = ("back_reflectance", "absorption_per_cm", "direction")
SIDE_ONLY = ("absorbed_fraction",)

MATERIAL_TABLE: dict[str, Key] = {
    key: quantity(spec.meaning, required=spec.required, ge=spec.low, le=spec.high, zero_ok=spec.allow_zero)
    for key, spec in MATERIAL_KEYS.items()
}
MATERIAL_TABLE.update({
    "name": text("material name"),
    "broadening": choice("line broadening", BROADENINGS, default="homogeneous"),
    "base": text("a built-in material to start from"),
    "spectrum": Key("table", "cross-section spectra: wavelength_nm, emission_cm2, absorption_cm2 arrays"),
})

PULSE_SHAPES = ("gaussian", "flat", "sech2", "file")
BEAM_PROFILES = ("gaussian", "flat", "supergaussian", "file")
DURATION_KEYS = ("duration_ns", "duration_ps", "duration_fs", "duration_us")
DURATION_RANGES = {"duration_ns": (1e-6, 1e7), "duration_ps": (1e-3, 1e10), "duration_fs": (1.0, 1e13),
                   "duration_us": (1e-9, 1e4)}        # 1 fs to 10 ms in each unit
PULSED_SEED_KEYS = ("energy_J", "shape", "bandwidth_nm", "chirp", "measured_pulse", "measured_spectrum") + DURATION_KEYS
CHIRPS = ("up", "down")
CW_SEED_KEYS = ("power_W",)
SEED: dict[str, Key] = {
    "wavelength_nm": quantity("seed wavelength", ge=150.0, le=20000.0),
    "energy_J": quantity("pulse energy", gt=0, le=1e6),
    "power_W": quantity("beam power", gt=0, le=1e9),
    **{key: quantity("pulse duration (FWHM; full width for a flat pulse), 1 fs to 10 ms", ge=low, le=high)
       for key, (low, high) in DURATION_RANGES.items()},
    "shape": choice("temporal pulse shape", PULSE_SHAPES, default="gaussian"),
    "profile": choice("transverse profile", BEAM_PROFILES, default="gaussian"),
    "order": number("supergaussian order", ge=2, le=1000, default=8.0),
    "diameter_mm": quantity("beam diameter 2w (1/e^2 intensity)", gt=0, le=1e4),
    "waist_mm": quantity("distance from the start plane to the seed's waist (> 0: downstream)", ge=-1e8, le=1e8),
    "curvature_mm": quantity("wavefront radius at the start plane (> 0 diverging, < 0 converging)",
                             nonzero=True, ge=-1e9, le=1e9),
    "m_squared": number("beam quality factor M^2", ge=1, le=50, default=1.0),
    "phase_screen_seed": integer("random seed of the M^2 phase screen", 0, 2**31 - 1, default=0),
    "repetition_rate_Hz": quantity("pulses per second: a pulse train (bulk or fibre layouts)", gt=0, le=1e10),
    "repetition_rate_kHz": quantity("thousands of pulses per second: a pulse train (bulk or fibre layouts)", gt=0,
                                    le=1e7),
    "bandwidth_nm": quantity("FWHM of the spectrum of a stretched (linearly chirped) pulse", gt=0, le=2000.0),
    "chirp": choice("direction of the chirp: up, longer wavelengths later; down, shorter", CHIRPS, default="up"),
    "measured_pulse": Key("table", 'a measured pulse shape (with shape = "file"): file, background, window_ns'),
    "measured_spectrum": Key("table", "a measured spectrum of a stretched seed: file, background"),
    "measured_profile": Key("table", 'the measured profile of profile = "file": a camera frame and its pixel pitch'),
    # chained stages (config/chain.py): the seed is the beam of an earlier run's result file
    "from": text("an earlier run's result.h5 whose beam is the seed (relative to the config file's folder)"),
    "from_step": integer("the step of that run after which its beam is taken (default: the last)", 0, 100_000),
}
# [seed.measured_profile] (config/profile.py reads the files; README, "A measured seed profile")
PHASE_UNITS = ("rad", "waves")
MEASURED_PROFILE: dict[str, Key] = {
    "file": text("the camera frame: CSV, .npy, greyscale PNG or TIFF, or HDF5 (with dataset)"),
    "dataset": text("the dataset of an HDF5 file, e.g. /frames/0"),
    "pixel_um": quantity("camera pixel pitch at the seed plane (x; y too unless pixel_y_um)", ge=0.05, le=1e4,
                         required=True),
    "pixel_y_um": quantity("camera pixel pitch at the seed plane along y", ge=0.05, le=1e4),
    "background": number("counts subtracted from every pixel", ge=0, le=1e12, default=0.0),
    "dark_file": text("a dark frame (same shape and formats) subtracted instead of a number"),
    "dark_dataset": text("the dataset of an HDF5 dark_file"),
    "clip": number("noise floor: values below this fraction of the peak are set to zero", ge=0, lt=0.5,
                   default=1e-3),
    "phase_file": text("a measured wavefront (same shape and pitch as the frame; grid.diffraction = true)"),
    "phase_dataset": text("the dataset of an HDF5 phase_file"),
    "phase_unit": choice("unit of the phase map", PHASE_UNITS, default="rad"),
}
# arrays given inline instead of files (what sweep points and reruns carry: README)
MEASURED_PROFILE_ARRAYS = {"image": "file", "dark": "dark_file", "phase": "phase_file"}
SEED_WAVEFRONT_KEYS = ("waist_mm", "curvature_mm")
SEED_FIELD_KEYS = SEED_WAVEFRONT_KEYS + ("m_squared", "phase_screen_seed")

TRAIN: dict[str, Key] = {
    "tolerance": number("relative difference at which the pulses repeat", gt=0, lt=0.1, default=1e-6),
    "max_pulses": integer("pulses run one after another from the start of the train", 1, 1_000_000,
                          default=200),
    "method": choice("how the periodic steady state is found", ("auto", "iterate"), default="auto"),
}

STEP_KIND_NAMES = ("pass", "loss", "aperture", "space", "lens", "filter", "relay", "repeat")
FIELD_ONLY_KINDS = ("filter",)   # step kinds that act on the field: they need grid.diffraction = true
INNER_STEP_KIND_NAMES = tuple(k for k in STEP_KIND_NAMES if k != "repeat")
STEP_COMMON: dict[str, Key] = {
    "kind": choice("step kind", STEP_KIND_NAMES, required=True),
    "name": text("step name"),
}
STEP_TIME: dict[str, Key] = {   # every step kind takes these, after its own keys
    "delay_ns": quantity("time the step takes before the next step (the media are pumped and decay)", ge=0,
                         le=1e10),
}
INNER_STEP_KIND = choice("step kind inside a repeat", INNER_STEP_KIND_NAMES, required=True)
UNTIL_RULES = ("peak",)
MAX_COUNT_DEFAULT = 1000
_DAMAGE: dict[str, Key] = {
    key: quantity(meaning, ge=MATERIAL_KEYS[key].low, le=MATERIAL_KEYS[key].high) for key, meaning in (
        ("damage_fluence_J_cm2", "damage fluence of the optic (pulsed mode)"),
        ("damage_pulse_ns", "pulse length the damage fluence was quoted at (pulsed mode)"),
        ("damage_intensity_W_cm2", "cw damage intensity of the optic (cw mode)"))
}
APERTURE_SHAPES = ("round", "square")
STEP_KINDS: dict[str, dict[str, Key]] = {
    "pass": {
        "medium": Key("ref", "the medium this step passes through", required=True),
        "reverse": flag("traverse from the far end", default=False),
    },
    "loss": {
        "transmission": number("power transmission", gt=0, le=1, required=True),
        **_DAMAGE,
    },
    "aperture": {
        "shape": choice("aperture shape", APERTURE_SHAPES),
        "diameter_mm": quantity("aperture diameter (round)", gt=0, le=1e4),
        "width_mm": quantity("aperture side (square)", gt=0, le=1e4),
        "order": number("super-Gaussian order of a soft edge; leave it out for a hard edge", ge=2, le=1000),
        **_DAMAGE,
    },
    "space": {"length_mm": quantity("free-space length", ge=0, le=1e7, required=True)},
    "lens": {"focal_mm": quantity("focal length", nonzero=True, ge=-1e8, le=1e8, required=True), **_DAMAGE},
    "filter": {
        "focal_mm": quantity("focal length of the filter's two lenses", gt=0, le=1e5, required=True),
        "pinhole_diameter_mm": quantity("pinhole diameter in the focal plane", gt=0, le=1e3, required=True),
        **_DAMAGE,
    },
    "relay": {
        "magnification": number("image magnification of the 4f relay", ge=0.01, le=100, default=1.0),
        **_DAMAGE,
    },
    "repeat": {
        "steps": Key("tables", "the steps of one round trip", required=True),
        "count": integer("number of round trips", 1, 1_000_000),
        "until": choice("stop rule: 'peak' dumps after the round trip of largest energy", UNTIL_RULES),
        "max_count": integer("safety limit on the round trips with until = 'peak'", 1, 1_000_000),
        "round_trip_ns": quantity("time of one round trip", gt=0, le=1e9),
        "mode_diameter_mm": quantity("the cavity's TEM00 mode, 1/e^2 intensity diameter: the beam is re-formed on "
                                     "it after each round trip (without diffraction)", gt=0, le=1e4),
    },
}

_LIMIT_MEANINGS = {
    "damage_fraction": "warn above this fraction of the damage fluence",
    "damage_scaling_exponent": "damage fluence scales as (pulse length)**exponent",
    "b_integral_step_rad": "B-integral warning level per step",
    "b_integral_total_rad": "B-integral warning level for the layout",
    "clipped_fraction": "warn when an aperture clips more than this fraction",
    "pixels_across_beam": "warn with fewer pixels across the beam",
    "transverse_gain_length": "warn above this transverse gain-length product",
    "window_edge_fraction": "warn when this energy fraction reaches the absorbing window edge",
    "sampling_limit_fraction": "warn when this energy fraction nears the grid's sampling limit",
    "ase_fraction": "fibres: warn when the ASE leaving a fibre exceeds this fraction of its signal",
    "gain_without_ase_dB": "fibres with ase = false: warn above this small-signal gain (dB)",
    "cavity_beam_change_fraction": "repeats without a cavity mode: warn when the beam's D4σ in a round trip "
                                   "kept differs from that after the first by more than this fraction",
    "pulse_clipped_fraction": "measured pulse: warn when the time window leaves out more than this fraction of "
                              "its trace's energy",
    "pulse_end_fraction": "measured pulse: warn when its trace ends above this fraction of its peak",
    "self_focusing_length_factor": "self-focusing is a warning when the collapse distance is below this many "
                                   "times the path through the medium, else a note",
}
LIMITS: dict[str, Key] = {
    f.name: number(_LIMIT_MEANINGS.get(f.name, f.name.replace("_", " ")), gt=0, default=f.default)
    for f in dataclasses.fields(Limits) if f.name != "mute"
}
LIMITS["mute"] = Key("strs", "notice codes to leave out of the warnings and notes", choices=tuple(NOTICE_CODES),
                     default=[])

_SOLVER_DEFAULTS = Solver()
SOLVER: dict[str, Key] = {
    "max_iterations": integer("sweeps of the layout before the cw iteration gives up", 1, 1000000,
                              default=_SOLVER_DEFAULTS.max_iterations),
    "tolerance": number("largest relative change of the gain in one sweep at convergence", gt=0, le=1e-3,
                        default=_SOLVER_DEFAULTS.tolerance),
    "damping": number("under-relaxation factor of the first sweeps (1: none)", gt=0, le=1,
                      default=_SOLVER_DEFAULTS.damping),
}

COMBINES = ("grid", "zip")
SWEEP_COMBINE = choice("how the swept lists combine", COMBINES, default="grid")
# Keys of [sweep] that are not value paths: how the lists combine, and summary figures to plot
# besides the top-level ones (figure paths, config/sweep.py checks their form).
SWEEP_OWN = ("combine", "figures")

# [spread]: its own keys, and one table per value path giving that value's distribution.
SPREAD: dict[str, Key] = {
    "samples": integer("number of random samples", 1, 100000, required=True),
    "random_seed": Key("int", "seed of the random-number generator", ge=0, default=0),
}
# [spread] arrays of texts: summary figures to plot and rank (figures), bounds on figures whose
# yield the run reports (limits, as `size --limit`).
SPREAD_LISTS = ("figures", "limits")
DISTRIBUTIONS: dict[str, Key] = {
    "normal": number("relative standard deviation of a normal distribution around the config's value",
                     gt=0, le=0.5),
    "uniform": Key("bounds", "lower and upper bound, in the unit of the value"),
}
SPREAD_HINT = '"seed.energy_J" = { normal = 0.05 } or "medium.rod.length_mm" = { uniform = [79.5, 80.5] }'


# A fibre medium's keys and its pump's (config/fibre.py checks them across keys).
FIBRE_MEDIUM: dict[str, Key] = {
    "name": text("medium name (steps refer to it)"),
    "kind": choice("medium kind", ("bulk", "fibre")),
    "material": Key("material", "a built-in material name or a [medium.material] table", required=True),
    "length_m": quantity("fibre length", gt=0, le=1e3, required=True),
    "core_diameter_um": quantity("doped core diameter", ge=1, le=5000, required=True),
    "cladding_diameter_um": quantity("inner (pump) cladding diameter", gt=0, le=10000),
    "core_na": number("core numerical aperture", gt=0, lt=1),
    "mode_field_diameter_um": quantity("mode-field diameter of the signal (1/e² intensity)", gt=0, le=10000),
    "doping_per_m3": quantity("active-ion density in the core", ge=_DOPING.low, le=_DOPING.high),
    "slices": integer("slices along the fibre", 1, 100000, default=200),
    "loss_per_m": quantity("background loss coefficient (every wavelength)", ge=0, le=100, default=0.0),
    "ase": flag("amplified spontaneous emission in both directions, in spectral bins", default=False),
    "ase_band_nm": Key("floats", "shortest and longest wavelength of the ASE bins", ge=150.0, le=20000.0, size=2,
                       plausible=True),
    "ase_bins": integer("spectral bins of the ASE", 1, 2000, default=40),
    "signal_overlap": number("overlap of the signal (and ASE) mode with the doped core", gt=0, le=1),
    "pump_overlap": number("overlap of the pump with the doped core", gt=0, le=1),
    "rings": integer("rings the doped core is cut into (1: the overlap model)", 1, 500, default=1),
    "pump": Key("table", "the fibre's pump: wavelength_nm, power_W, direction, cladding"),
}
FIBRE_PUMP: dict[str, Key] = {
    "wavelength_nm": quantity("pump wavelength", ge=150.0, le=20000.0),
    "power_W": quantity("pump power launched at each pumped end", gt=0, le=1e5, required=True),
    "direction": choice("where the pump is launched: z = 0 (forward), z = L (backward) or both ends",
                        DIRECTIONS, default="forward"),
    "cladding": flag("launched into the inner cladding (true) or the core (false)", default=False),
}


def array_of_tables(p: Problems, raw: dict, key: str) -> list | None:
    """The array of tables under ``key``, or None (with a problem) when it is missing or malformed."""
    if key not in raw:
        p.add(key, f"missing: give {SECTION_HINTS[key]}")
        return None
    items = raw[key]
    if isinstance(items, dict):
        p.add(key, f"must be an array of tables: write [[{key}]] (double brackets) for each {key}", items)
        return None
    if not isinstance(items, list) or not items:
        p.add(key, f"must be a non-empty array of tables: give {SECTION_HINTS[key]}", items)
        return None
    bad = [i for i, item in enumerate(items) if not isinstance(item, dict)]
    for i in bad:
        p.add(f"{key}[{i}]", f"must be a table ([[{key}]]), not {type_name(items[i])}", items[i])
    return items


def split_path(path: str) -> list[str]:
    """Split a dotted value path; parts in double quotes may hold dots (``sweep."seed.energy_J"``)."""
    parts, buf, quoted, was_quoted = [], "", False, False
    for ch in path:
        if ch == '"':
            quoted, was_quoted = not quoted, True
        elif ch == "." and not quoted:
            parts.append((buf, was_quoted))
            buf, was_quoted = "", False
        else:
            buf += ch
    parts.append((buf, was_quoted))
    if quoted:
        raise PathError(f"unbalanced quote in {path!r}")
    segs = [p if q else p.strip() for p, q in parts]
    if any(not s for s, (_, q) in zip(segs, parts, strict=True) if not q):
        raise PathError(f"empty part in {path!r}; write the path like medium.rod.length_mm")
    return segs


def item_names(items: list, list_key: Any) -> list[str]:
    """The names of the tables in an array of tables (media without a name: ``medium<i>``)."""
    names = []
    for i, item in enumerate(items):
        name = item.get("name") if isinstance(item, dict) else None
        names.append(name if isinstance(name, str) else (f"medium{i}" if list_key == "medium" else ""))
    return names


def select_item(items: list, seg: str, list_key: Any, where: str) -> int:
    """The index of the item named ``seg`` (a name first, then a plain index)."""
    if not items:
        raise PathError(f"{where} is empty")
    names = item_names(items, list_key)
    if seg in names:
        return names.index(seg)
    if seg.isdigit() and int(seg) < len(items):
        return int(seg)
    named = [n for n in names if n]
    listing = f"; names: {', '.join(named)}" if named else ""
    raise PathError(f"no item '{seg}' in {where} (indices 0 to {len(items) - 1}{listing})"
                    f"{did_you_mean(seg, named)}")


def walk(raw: dict, path: str, create: frozenset = frozenset()) -> tuple[Any, Any, list]:
    """Follow a dotted value path through a config dict.

    Parameters
    ----------
    raw : dict
        The config as read.
    path : str
        Dotted path, media and steps by name or index.
    create : frozenset of str
        Table names that are created (empty) where the path runs through one that is absent.

    Returns
    -------
    (container, key, trail) : tuple
        ``container[key]`` is the value named; ``trail`` the keys and list indices on the way.

    Raises
    ------
    PathError
        When a part does not resolve.
    """
    segs = split_path(path)
    node: Any = raw
    trail: list = []
    for n, seg in enumerate(segs):
        last = n == len(segs) - 1
        where = ".".join(str(t) for t in trail) or "the top level"
        if isinstance(node, dict):
            if last:
                return node, seg, trail + [seg]
            if seg not in node:
                if seg in create:
                    node[seg] = {}
                else:
                    raise PathError(f"no key '{seg}' in {where}{did_you_mean(seg, node)}")
            child = node[seg]
            if not isinstance(child, (dict, list)):
                raise PathError(f"{join_path(where if trail else '', seg)} is {show(child)}, not a table")
            node = child
            trail.append(seg)
        elif isinstance(node, list):
            idx = select_item(node, seg, trail[-1] if trail else None, where)
            if last:
                return node, idx, trail + [idx]
            node = node[idx]
            trail.append(idx)
        else:
            raise PathError(f"{where} is {show(node)}, not a table")
    raise PathError(f"cannot resolve {path!r}")  # pragma: no cover - the loop always returns


def leaf_schema(raw: dict, trail: list) -> Mapping[str, Key] | None:
    """The schema table the last key of a resolved value path belongs to (None: not a value path)."""
    sections = {"grid": GRID, "seed": SEED, "limits": LIMITS, "solver": SOLVER, "train": TRAIN}
    if trail[0] in ("sweep", "spread"):
        return None
    if len(trail) == 1:
        return {k: s for k, s in TOP.items() if s.kind not in ("table", "tables")}
    if len(trail) == 2 and trail[0] in sections:
        return sections[trail[0]]
    if len(trail) == 3 and trail[:2] == ["seed", "measured_profile"]:
        return MEASURED_PROFILE
    fibre = trail[0] == "medium" and isinstance(trail[1], int) and isinstance(raw["medium"][trail[1]], dict) \
        and raw["medium"][trail[1]].get("kind") == "fibre"
    if trail[0] == "medium" and len(trail) == 3 and isinstance(trail[1], int):
        return {k: s for k, s in (FIBRE_MEDIUM if fibre else MEDIUM).items() if k != "pump"}
    if trail[0] == "medium" and len(trail) == 4 and trail[2] in ("pump", "material"):
        if trail[2] == "pump":
            return FIBRE_PUMP if fibre else PUMP
        return {k: s for k, s in MATERIAL_TABLE.items() if k != "spectrum"}
    if trail[0] == "step" and len(trail) == 3 and isinstance(trail[1], int):
        kind = raw["step"][trail[1]].get("kind")
        schema = {**STEP_COMMON, **STEP_KINDS.get(kind, {}), **STEP_TIME} if isinstance(kind, str) else None
        return {k: s for k, s in schema.items() if k != "steps"} if schema else None
    if trail[0] == "step" and len(trail) == 5 and trail[2] == "steps" and isinstance(trail[3], int):
        kind = raw["step"][trail[1]]["steps"][trail[3]].get("kind")
        return {**STEP_COMMON, **STEP_KINDS.get(kind, {}), **STEP_TIME} \
            if isinstance(kind, str) and kind in INNER_STEP_KIND_NAMES else None
    return None
