"""A measured pulse shape and a measured spectrum of the seed, from CSV files (or inline arrays).

``[seed.measured_pulse]`` (with ``seed.shape = "file"``)::

    file = "oscillator_pulse.csv"   # header: time_<unit>, power[_<unit>]; unit s, ms, us, ns, ps or fs
    background = "ends"             # or a power level in the file's unit; default 0
    window_ns = [-5.0, 60.0]        # optional: the part of the trace the run's time window covers

``[seed.measured_spectrum]``::

    file = "stretched_spectrum.csv" # header: wavelength_nm (or wavelength_um), power[_<unit>]
    background = 0.0

The files are read as data by ``config/files.py`` (size limit, regular files, UTF-8): blank lines and
lines starting with ``#`` are skipped; the first other line names the two columns, the abscissa with
its unit; the power column's unit is free (only the shape is used). Instead of ``file`` a table may
give the arrays inline in SI units (``time_s`` and ``power``; ``wavelength_m`` and ``power``): this is how
sweep workers and reruns get them (exactly the numbers the file gave, converted once).

What is made of them (stated in the README):

- background: subtracted from every point; ``"ends"`` takes the mean of the first and last
  :data:`END_POINTS` points. Points that fall below zero afterwards by less than
  :data:`NEGATIVE_TOLERANCE` of the peak are noise and set to zero; further below is refused.
- the pulse: straight lines between the points; its FWHM (first to last crossing of half the peak)
  is the seed's duration; its window the span of the trace, or ``window_ns`` (the trace cut there).
- the spectrum: straight lines between the points; the seed's wavelength is its centroid and its
  bandwidth its FWHM.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ampmodel.config import files
from ampmodel.config.checks import Problems, join_path, show
from ampmodel.config.files import MAX_ROWS, FileProblem, read_data_file
from ampmodel.kernels import traces
from ampmodel.kernels.pulse_shape import fwhm_s

TIME_UNITS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9, "ps": 1e-12, "fs": 1e-15}
WAVELENGTH_UNITS = {"nm": 1e-9, "um": 1e-6}
MIN_POINTS = 5
END_POINTS = 5
NEGATIVE_TOLERANCE = 0.02
PULSE_KEYS = ("file", "background", "window_ns", "time_s", "power", "source")
SPECTRUM_KEYS = ("file", "background", "wavelength_m", "power", "source")
# the abscissa's name, its units, and the inline array key (SI, so that inlining is exact) of each kind
KINDS = {"pulse": ("time", TIME_UNITS, "time_s"), "spectrum": ("wavelength", WAVELENGTH_UNITS, "wavelength_m")}


def _header(fields: list[str], number: int, kind: str) -> tuple[int, float]:
    """(index of the abscissa column, its unit in SI) from the header line; FileProblem otherwise."""
    name, units, _ = KINDS[kind]
    want = f"{name}_<unit>, power (unit {', '.join(units)}; the power's unit is free, e.g. power_W)"
    if len(fields) != 2:
        raise FileProblem(f"line {number}: the header must name two columns with their units: {want}; got "
                          f"{len(fields)} field{'s' if len(fields) != 1 else ''}")
    lower = [f.lower() for f in fields]
    powers = [i for i, f in enumerate(lower) if f == "power" or f.startswith("power_")]
    axes = [i for i, f in enumerate(lower) if f == name or f.startswith(name + "_")]
    if len(powers) != 1 or len(axes) != 1:
        raise FileProblem(f"line {number}: the header must be {want}, not {show(', '.join(fields), 32)}")
    unit = lower[axes[0]][len(name) + 1:]
    if unit not in units:
        raise FileProblem(f"line {number}: the {name} column {show(fields[axes[0]], 30)} must carry its unit: "
                          f"{', '.join(name + '_' + u for u in units)}")
    return axes[0], units[unit]


def parse_trace_csv(text: str, kind: str) -> tuple[list[float], list[float]]:
    """(abscissa in SI, power) of a pulse ("pulse": time) or spectrum ("spectrum": wavelength) file.

    Raises
    ------
    FileProblem
        No header, a header without the columns or units, a row that is not two finite numbers, too few
        or too many rows, the abscissa not strictly increasing (naming the line).
    """
    axis: int | None = None
    scale = 1.0
    xs: list[float] = []
    ps: list[float] = []
    previous_line = 0
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = [f.strip() for f in stripped.split(",")]
        if axis is None:
            axis, scale = _header(fields, number, kind)
            continue
        if len(fields) != 2:
            raise FileProblem(f"line {number}: expected 2 numbers separated by a comma, got {len(fields)} "
                              f"field{'s' if len(fields) != 1 else ''}: {show(stripped, 32)}")
        try:
            values = [float(f) for f in fields]
        except ValueError:
            raise FileProblem(f"line {number}: not two numbers: {show(stripped, 32)}") from None
        if not all(math.isfinite(v) for v in values):
            raise FileProblem(f"line {number}: {show(stripped, 32)}: nan and inf are not allowed")
        x = values[axis] * scale
        if xs and not x > xs[-1]:
            raise FileProblem(f"line {number}: the {KINDS[kind][0]} {show(fields[axis], 30)} is not above that of "
                              f"line {previous_line}: the {KINDS[kind][0]}s must increase strictly")
        xs.append(x)
        ps.append(values[1 - axis])
        previous_line = number
        if len(xs) > MAX_ROWS:
            raise FileProblem(f"more than {MAX_ROWS} rows: thin the trace out")
    if axis is None:
        raise FileProblem(f"no header line: the first line must name the columns, {KINDS[kind][0]}_<unit>, power")
    if len(xs) < MIN_POINTS:
        raise FileProblem(f"{len(xs)} data rows: at least {MIN_POINTS} are needed")
    return xs, ps


def _arrays(p: Problems, table: Mapping[str, Any], path: str, kind: str) -> tuple[np.ndarray, np.ndarray] | None:
    """The trace of a table: read from its ``file`` (kept in ``p.data_files``) or its inline arrays."""
    _, _, inline = KINDS[kind]
    name = table.get("file")
    given = [k for k in (inline, "power") if k in table]
    if name is not None and given:
        p.add(path, f"both file and {', '.join(given)} given: give the trace in the file or inline, not both")
        return None
    if name is None:
        if len(given) < 2:
            p.add(join_path(path, "file"), f"missing: the CSV file of the measured {kind} (or both {inline} and "
                                           "power as arrays)")
            return None
        return _inline_arrays(p, table, path, kind)
    where = join_path(path, "file")
    text = read_data_file(p, where, name)
    if text is None:
        return None
    try:
        xs, ps = parse_trace_csv(text, kind)
    except FileProblem as exc:
        p.add(where, f"{exc}", name)
        return None
    p.data_files[name] = text
    return np.array(xs), np.array(ps)


def _inline_arrays(p: Problems, table: Mapping[str, Any], path: str, kind: str):
    _, _, inline = KINDS[kind]
    x, power = table[inline], table["power"]
    for key, values in ((inline, x), ("power", power)):
        if not (isinstance(values, list) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                 and math.isfinite(v) for v in values)):
            p.add(join_path(path, key), "must be an array of finite numbers", values)
            return None
    if len(x) != len(power) or len(x) < MIN_POINTS:
        p.add(path, f"{inline} and power must be arrays of the same length, at least {MIN_POINTS}")
        return None
    xs = np.array(x, dtype=float)
    if np.any(np.diff(xs) <= 0.0):
        p.add(join_path(path, inline), "must increase strictly", x)
        return None
    return xs, np.array(power, dtype=float)


def _clean(p: Problems, table: Mapping[str, Any], path: str, power: np.ndarray) -> np.ndarray | None:
    """The power with the background subtracted and noise below zero set to zero; None with a problem."""
    where = join_path(path, "file" if "file" in table else "power")
    background = table.get("background", 0.0)
    if background == "ends":
        k = min(END_POINTS, power.size // 4) or 1
        background = 0.5 * (float(power[:k].mean()) + float(power[-k:].mean()))
    elif isinstance(background, bool) or not isinstance(background, (int, float)) or not math.isfinite(background):
        p.add(join_path(path, "background"), 'must be a power level in the unit of the trace, or "ends" (the mean '
                                             f"of the first and last {END_POINTS} points)", background)
        return None
    power = power - float(background)
    peak = float(power.max())
    if not peak > 0.0:
        p.add(where, "no power above the background: the trace is zero or negative everywhere; check the power "
                     "column and background", table.get("file"))
        return None
    low = int(np.argmin(power))
    if power[low] < -NEGATIVE_TOLERANCE * peak:
        p.add(where, f"the power at point {low + 1} is {-power[low] / peak:.1%} of the peak below the background "
                     f"(more than {NEGATIVE_TOLERANCE:.0%}: not noise); check the sign of the trace and "
                     "background", table.get("file"))
        return None
    return np.maximum(power, 0.0)


def _window(p: Problems, table: Mapping[str, Any], path: str, t: np.ndarray, power: np.ndarray):
    """The trace cut to ``window_ns`` (interpolated at its ends) and the fraction of the energy left out."""
    window = table.get("window_ns")
    if window is None:
        return t, power, 0.0
    where = join_path(path, "window_ns")
    ok = (isinstance(window, list) and len(window) == 2 and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                                  and math.isfinite(v) for v in window))
    if not ok or not window[0] < window[1]:
        p.add(where, "must be [start, end] in ns on the trace's own clock, start below end", window)
        return None
    start, end = window[0] * 1e-9, window[1] * 1e-9
    if start < t[0] or end > t[-1]:
        p.add(where, f"must lie within the trace, {t[0] * 1e9:.6g} to {t[-1] * 1e9:.6g} ns", window)
        return None
    inside = (t > start) & (t < end)
    cut_t = np.concatenate(([start], t[inside], [end]))
    cut_p = np.interp(cut_t, t, power)
    kept = traces.node_integrals(cut_t, cut_p)[-1] / traces.node_integrals(t, power)[-1]
    if not kept > 0.0 or cut_t.size < MIN_POINTS:
        p.add(where, f"holds {'no power' if not kept > 0.0 else f'{cut_t.size} points'} of the trace: the window must "
                     f"cover the pulse, with at least {MIN_POINTS} points", window)
        return None
    return cut_t, cut_p, max(0.0, 1.0 - float(kept))


def _cleaned_trace(p: Problems, table: Any, path: str, kind: str, keys: tuple[str, ...],
                   takes: str) -> tuple[np.ndarray, np.ndarray] | None:
    """The (x, y) arrays of a ``[seed.measured_pulse]`` or ``[seed.measured_spectrum]`` table (``kind``
    "pulse" or "spectrum"), read and with its background removed; None with problems: not a table, a
    key not among ``keys``, an unusable file or array."""
    name = path.rsplit(".", 1)[-1]
    if not isinstance(table, dict):
        p.add(path, f"must be a table [seed.{name}] with {takes}", table)
        return None
    unknown = [key for key in table if key not in keys]
    for key in unknown:
        p.add(join_path(path, key), f"unknown key; [seed.{name}] takes {', '.join(keys)}", table[key])
    if unknown:
        return None
    arrays = _arrays(p, table, path, kind)
    if arrays is None:
        return None
    x, y = arrays
    y = _clean(p, table, path, y)
    return None if y is None else (x, y)


def measured_pulse(p: Problems, table: Any, path: str = "seed.measured_pulse") -> dict | None:
    """The Seed fields of a measured pulse: ``duration_s`` (the trace's FWHM), ``pulse_trace`` (times in
    units of the FWHM from the peak, power relative to the peak, cut to the window) and
    ``pulse_trace_outside`` (the fraction of the trace's energy outside the window); None with problems."""
    trace = _cleaned_trace(p, table, path, "pulse", PULSE_KEYS, "file (and optionally background, window_ns)")
    if trace is None:
        return None
    t, power = trace
    cut = _window(p, table, path, t, power)
    if cut is None:
        return None
    t, power, outside = cut
    width = fwhm_s(t, power)
    where = join_path(path, "file" if "file" in table else "time_s")
    if not 1e-15 <= width <= 1e-2:
        p.add(where, f"the trace's FWHM is {width:.3g} s: it must lie between 1 fs and 10 ms (check the time "
                     "unit in the header)", table.get("file"))
        return None
    peak = int(np.argmax(power))
    x = (t - t[peak]) / width
    return {"duration_s": float(width), "pulse_trace": (tuple(x.tolist()), tuple((power / power[peak]).tolist())),
            "pulse_trace_outside": outside}


def measured_spectrum(p: Problems, table: Any, path: str = "seed.measured_spectrum") -> dict | None:
    """The Seed fields of a measured spectrum: ``spectrum_trace`` (wavelengths (m), density relative to
    the peak), ``wavelength_m`` (its centroid) and ``bandwidth_m`` (its FWHM); None with problems."""
    trace = _cleaned_trace(p, table, path, "spectrum", SPECTRUM_KEYS, "file (and optionally background)")
    if trace is None:
        return None
    wl, density = trace
    where = join_path(path, "file" if "file" in table else "wavelength_m")
    if wl[0] < 150e-9 or wl[-1] > 20e-6:
        p.add(where, f"wavelengths from {wl[0] * 1e9:.6g} to {wl[-1] * 1e9:.6g} nm: they must lie within 150 nm to "
                     "20 µm (check the unit in the header)", table.get("file"))
        return None
    # the centroid of the piecewise-linear density, exact: per segment h·(x0·(2p0 + p1) + x1·(p0 + 2p1))/6
    h = np.diff(wl)
    moment = float((h * (wl[:-1] * (2 * density[:-1] + density[1:]) + wl[1:] * (density[:-1] + 2 * density[1:]))
                    ).sum() / 6.0)
    centroid = moment / traces.node_integrals(wl, density)[-1]
    peak = float(density.max())
    return {"spectrum_trace": (tuple(wl.tolist()), tuple((density / peak).tolist())), "wavelength_m": centroid,
            "bandwidth_m": float(fwhm_s(wl, density))}


def inline_table(table: dict, text: str, kind: str) -> None:
    """Replace a measured trace table's ``file`` by its arrays (SI: time_s or wavelength_m), in place."""
    xs, ps = parse_trace_csv(text, kind)
    table.pop("file")
    table[KINDS[kind][2]] = list(xs)
    table["power"] = list(ps)


# ----------------------------------------------------------------------------------------------
# Configs with the files' contents inline (sweep workers, reruns)
# ----------------------------------------------------------------------------------------------

def _seed_tables(raw: Mapping[str, Any]):
    """(table, kind) of each measured trace of the seed that names a file."""
    seed = raw.get("seed")
    if not isinstance(seed, dict):
        return
    for key, kind in (("measured_pulse", "pulse"), ("measured_spectrum", "spectrum")):
        table = seed.get(key)
        if isinstance(table, dict) and isinstance(table.get("file"), str):
            yield table, kind


def inline_files(raw: Mapping[str, Any], folder: str | Path | None,
                 stored: Mapping[str, str] | None = None) -> dict:
    """A copy of a *validated* config dict with every data file replaced by its arrays
    (config/files.inline_files, with a measured profile's frames from ``stored`` where they are there,
    then the seed's measured traces), so that it can be run where the files are not."""
    out = files.inline_files(raw, folder, stored)
    for table, kind in _seed_tables(out):
        path = Path(table["file"]).expanduser()
        if not path.is_absolute() and folder:
            path = Path(folder) / path
        inline_table(table, path.read_bytes().decode("utf-8-sig"), kind)
    return out


def inline_stored_files(raw: Mapping[str, Any], stored: Mapping[str, str]) -> dict:
    """A copy of a config dict with every data file replaced by the arrays of its stored text
    (``stored``: path as written -> text, as result.h5 records them); files not stored stay."""
    out = files.inline_stored_files(raw, stored)
    for table, kind in _seed_tables(out):
        if table["file"] in stored:
            inline_table(table, stored[table["file"]], kind)
    return out


def seed_fields(p: Problems, table: Mapping[str, Any], fibre_layout: bool = False) -> dict:
    """The Seed fields the measured traces of a pulsed [seed] table set (empty without them); the keys
    they replace are refused: a duration with ``shape = "file"`` (the FWHM is the trace's), and
    ``bandwidth_nm`` or ``wavelength_nm`` with a measured spectrum (its FWHM and centroid)."""
    out: dict[str, Any] = {}
    is_file = table.get("shape") == "file"
    if is_file and "measured_pulse" not in table:
        p.add("seed.measured_pulse", 'missing: shape = "file" takes the pulse from a table [seed.measured_pulse] '
                                     'with file = "<trace>.csv" (columns time_ns, power)')
    elif "measured_pulse" in table and not is_file:
        p.add("seed.shape", 'must be "file" with a [seed.measured_pulse] table (or remove the table)',
              table.get("shape", "gaussian"))
    elif is_file:
        durations = [k for k in table if k.startswith("duration_")]
        for key in durations:
            p.add(join_path("seed", key), 'a measured pulse (shape = "file") has the FWHM of its trace: remove '
                                          f"{key}", table[key])
        pulse = measured_pulse(p, table["measured_pulse"])
        if pulse is not None:
            out.update(pulse)
    if "measured_spectrum" in table and fibre_layout:
        p.add("seed.measured_spectrum", "a fibre layout carries a narrowband seed at seed.wavelength_nm: remove "
                                        "the table")
    elif "measured_spectrum" in table:
        for key, what in (("bandwidth_nm", "its FWHM"), ("wavelength_nm", "its centroid")):
            if key in table:
                p.add(join_path("seed", key), f"a measured spectrum sets the seed's {key.split('_')[0]} ({what}): "
                                              f"remove {key} or the [seed.measured_spectrum] table", table[key])
        spectrum = measured_spectrum(p, table["measured_spectrum"])
        if spectrum is not None:
            out.update(spectrum)
    return out
