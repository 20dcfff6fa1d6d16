"""Chained stages: a seed taken from an earlier run's result file (``seed.from``, ``seed.from_step``).

::

    [seed]
    from = "../runs/stage1_preamp/result.h5"   # relative paths are taken from the config file's folder
    from_step = 2                              # optional: the beam after step 2 (default: after the last)

The seed is then the earlier run's beam, and everything else about it is that run's: its energy (or
cw power), wavelength, pulse shape and duration (the time grid), a chirped seed's bandwidth and
chirp. Any other ``[seed]`` key beside ``from`` is refused (it would contradict the file); only
``from_step`` and a repetition rate (``repetition_rate_Hz``/``_kHz``: the stage's pulse train of
that pulse) may be given.

What is taken:

- **pulsed, after the last step** (the default): the full beam result.h5 holds, ``/output/fluence``
  (Nt, Ny, Nx) and ``/output/b_integral`` (Nt, Ny, Nx), so that the stage continues exactly where the
  earlier run stopped (the B-integral too); with ``/output/field`` (a run with diffraction) and this
  run with diffraction, the field itself. The chained run equals the one-config layout of both stages
  to round-off.
- **pulsed, after an earlier step** (``from_step``): result.h5 keeps only the fluence map
  ``/steps/NNN/fluence`` and the pulse ``/steps/NNN/power`` there, so the beam is rebuilt separable,
  F_t(y, x) = F(y, x)·P_t/ΣP (the step's energy and fluence map kept exactly, every pixel with the
  same pulse shape), and the B-integral of each time slice is bounded by the stored map (the largest
  over the slices at each pixel, at the true peak); a note (code ``seed-from``) says so.
- **a field wanted, none stored** (this run with diffraction, the earlier one without, or an earlier
  step): the field is sqrt(fluence) with a flat phase, with a note.
- **cw**: the intensity map after the step (``/steps/NNN/intensity``): complete at every step; for a
  run with diffraction, after the last step the field itself (``/output/field``, a run with
  diffraction), else sqrt(intensity) with a flat phase, with a note.

The grid must be the stored one (``grid.points``, ``grid.width_mm`` and, pulsed, ``grid.time_slices``):
a chained stage continues on the same pixels and time slices, and a different grid is refused with
the values to set (no resampling: it would be a silent approximation of the beam).

Refused (bad input, the key named): a missing file, a folder, a file over :data:`MAX_BYTES`, a file
that is not HDF5 or not an ampmodel result (no config, summary or /seed attributes, wrong types), an
incomplete one (no ``complete = True``), a result of the other mode or of a layout of fibres, a step
out of range, a beam with no energy.

The file is read once, when the config is loaded. Its path, SHA-256, creation time, software version
and the step taken go into summary.json (``seed_from``) and result.h5 (``/provenance/seed_from``);
the beam used is stored in the new result.h5 (``/seed/from``), so that ``ampmodel rerun`` needs no
access to the earlier file (the rerun passes that copy in, ``Problems.stored_seeds``). Sweep and
sizing points read the file themselves (its path made absolute by ``files.inline_files``): a result
file is never overwritten by ampmodel, each point records the SHA-256 it read, and the sweep folder's
config hash holds it (``studies/sweeps.py``: a sweep is not resumed on another earlier stage).
"""
from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ampmodel.config.checks import Problems, join_path
from ampmodel.description import Grid, Seed, SeedBeam
from ampmodel.kernels import beam_shapes
from ampmodel.kernels.beam_figures import d4sigma
from ampmodel.notices import note

MAX_BYTES = 64 * 2**30                # a result file larger than this is refused (memory)
ALLOWED = ("from", "from_step", "repetition_rate_Hz", "repetition_rate_kHz")
COPY_GROUP = "seed/from"              # where a chained run's result.h5 keeps the beam it used


class SourceProblem(Exception):
    """The result file cannot give a seed; the message says why (the caller names the key)."""


@dataclass
class Taken:
    """A beam taken from a result file (or from a chained run's stored copy), before it is checked
    against this run: the beam, the seed's own attributes (SI), the file's mode and grid."""

    beam: SeedBeam
    attrs: dict[str, Any]
    mode: str
    x_m: np.ndarray
    time_slices: int


# ----------------------------------------------------------------------------------------------
# Reading a result file defensively
# ----------------------------------------------------------------------------------------------

def _attr(obj, key: str, kind: type, where: str) -> Any:
    """An attribute of an HDF5 object of the type ``kind`` (bytes read as text); SourceProblem if absent
    or of another type."""
    if key not in obj.attrs:
        raise SourceProblem(f"no attribute {key} on {where}: not a result file of ampmodel (or one written by a "
                            f"version before chained stages: run it again)")
    value = obj.attrs[key]
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if kind is str and isinstance(value, str):
        return value
    if kind is bool and isinstance(value, (bool, np.bool_)):
        return bool(value)
    if kind is float and isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
            value, (bool, np.bool_)) and math.isfinite(float(value)):
        return float(value)
    raise SourceProblem(f"attribute {key} of {where} is {type(value).__name__}, not {kind.__name__}: not a result "
                        f"file of ampmodel, or a damaged one")


def _array(f, name: str, shape: tuple[int, ...] | None = None, complex_ok: bool = False) -> np.ndarray:
    """A finite numeric dataset ``name`` (of ``shape`` when given); SourceProblem otherwise."""
    import h5py
    ds = f.get(name)
    if not isinstance(ds, h5py.Dataset):
        raise SourceProblem(f"no dataset /{name}: not a result file of ampmodel of this kind (or a damaged one)")
    kinds = "fiuc" if complex_ok else "fiu"
    if ds.dtype.kind not in kinds or (shape is not None and ds.shape != shape):
        raise SourceProblem(f"/{name} is {ds.dtype} of shape {ds.shape}"
                            + (f", not numbers of shape {shape}" if shape is not None else ", not numbers"))
    data = np.asarray(ds[()], dtype=complex if ds.dtype.kind == "c" else float)
    if not np.all(np.isfinite(data)):
        raise SourceProblem(f"/{name} holds nan or inf: a damaged result file")
    return data


def _seed_attrs(f, mode: str) -> dict[str, Any]:
    """The seed's own attributes /seed.{wavelength, duration, shape, bandwidth, chirp} in SI."""
    import h5py
    if not isinstance(f.get("seed"), h5py.Group):
        raise SourceProblem("no group /seed: not a result file of ampmodel")
    g = f["seed"]
    out = {"wavelength": _attr(g, "wavelength", float, "/seed")}
    if mode == "pulsed":
        out.update(duration=_attr(g, "duration", float, "/seed"), shape=_attr(g, "shape", str, "/seed"),
                   bandwidth=_attr(g, "bandwidth", float, "/seed"), chirp=_attr(g, "chirp", str, "/seed"))
        out.update(_traces(f, g, out["shape"]))
        if (out["shape"] not in (*beam_shapes.HALF_WINDOW_FWHM, "file") or out["duration"] <= 0
                or out["bandwidth"] < 0 or out["chirp"] not in ("up", "down")):
            raise SourceProblem(f"/seed: shape {out['shape']!r}, duration {out['duration']:g} s, bandwidth "
                                f"{out['bandwidth']:g} m: not a seed ampmodel writes")
    if not out["wavelength"] > 0:
        raise SourceProblem("/seed: the wavelength is not > 0: not a seed ampmodel writes")
    return out


def _trace(f, first: str, second: str) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """A stored trace (two finite rows of one length, the first increasing, the second >= 0)."""
    x, y = _array(f, f"seed/{first}"), _array(f, f"seed/{second}")
    if x.ndim != 1 or x.shape != y.shape or x.size < 2 or np.any(np.diff(x) <= 0) or np.any(y < 0):
        raise SourceProblem(f"/seed/{first} and /seed/{second} are not a trace ampmodel writes: a damaged file")
    return tuple(x.tolist()), tuple(y.tolist())


def _traces(f, g, shape: str) -> dict[str, Any]:
    """The Seed fields of a measured pulse and spectrum the earlier run used (output/hdf5.py writes them)."""
    out: dict[str, Any] = {}
    if shape == "file":
        if "pulse_trace_time" not in g:
            raise SourceProblem("/seed: a measured pulse without its trace (/seed/pulse_trace_time): written by "
                                "an earlier version; run that stage again")
        out["pulse_trace"] = _trace(f, "pulse_trace_time", "pulse_trace_power")
        out["pulse_trace_outside"] = _attr(g, "pulse_trace_outside", float, "/seed")
    if "spectrum_trace_wavelength" in g:
        out["spectrum_trace"] = _trace(f, "spectrum_trace_wavelength", "spectrum_trace_density")
    return out


def _root(f) -> dict[str, Any]:
    """The root attributes a source must have: complete, mode, software_version, created_utc, title."""
    for key in ("config", "summary"):
        if key not in f.attrs:
            raise SourceProblem(f"no attribute {key}: not a result file of ampmodel")
    complete = f.attrs.get("complete")
    if not isinstance(complete, (bool, np.bool_)) or not bool(complete):
        raise SourceProblem("the file is not complete (no attribute complete = True): its run was cut short "
                            "while it was written, or the file while it was copied; run that stage again")
    if "fibre" in f:
        raise SourceProblem("a result of a layout of fibres: it holds no beam on a grid to take as a seed")
    out = {key: _attr(f, key, str, "the file") for key in ("mode", "software_version", "created_utc")}
    out["title"] = _attr(f, "title", str, "the file") if "title" in f.attrs else ""
    if out["mode"] not in ("pulsed", "cw"):
        raise SourceProblem(f"mode {out['mode']!r}: not a result file of ampmodel")
    return out


def _steps(f) -> list[str]:
    import h5py
    steps = f.get("steps")
    if not isinstance(steps, h5py.Group):
        raise SourceProblem("no group /steps: not a result file of ampmodel")
    names = sorted(n for n in steps if n.isdigit())
    if [int(n) for n in names] != list(range(len(names))):
        raise SourceProblem(f"the steps stored ({', '.join(names[:6])}...) are not numbered 000, 001, ...: a "
                            "damaged result file")
    if not names:
        raise SourceProblem("the run has no steps: its beam is its own seed; take that seed instead")
    return names


def _cw_beam(f, intensity: np.ndarray, last: bool, diffraction: bool) -> tuple[SeedBeam, str, list[str]]:
    """The cw beam after a step: its intensity map and, for this run with diffraction, the earlier
    run's field after the last step (``/output/field``, (1, Ny, Nx)) or sqrt(intensity) with a flat
    phase and a note."""
    if not diffraction:
        return SeedBeam(intensity_W_m2=intensity), "intensity", []
    if last and "output" in f and "field" in f["output"]:
        field = _array(f, "output/field", (1,) + intensity.shape, complex_ok=True)[0].astype(np.complex128)
        return (SeedBeam(intensity_W_m2=field.real ** 2 + field.imag ** 2, complex_field=field),
                "intensity, with its field", [])
    text = ("seed: the earlier run stored no field for this beam (a cw field is stored after the last step of a "
            "run with diffraction): the field is taken as sqrt(intensity) with a flat phase (a beam at its waist)")
    return (SeedBeam(intensity_W_m2=intensity, complex_field=np.sqrt(intensity).astype(np.complex128),
                     notes=(note("seed-from", text),)), "intensity", [text])


def _pulsed_beam(f, step: int, last: bool, diffraction: bool, shape: tuple[int, int, int],
                 factors: np.ndarray) -> tuple[SeedBeam, str, list[str]]:
    """The pulsed beam after ``step``: full after the last step, separable before it."""
    nt, ny, nx = shape
    notes: list[str] = []
    field = None
    if last and "output" in f and "fluence" in f["output"]:
        fluence = _array(f, "output/fluence", shape)
        b_integral = _array(f, "output/b_integral", shape)
        how = "full"
        if diffraction and "field" in f["output"]:
            field = _array(f, "output/field", shape, complex_ok=True).astype(np.complex128)
            fluence = field.real ** 2 + field.imag ** 2
            how = "full, with its field"
    elif last:
        raise SourceProblem("no /output/fluence (the full beam): a sweep's point file leaves it out; give "
                            "seed.from_step to take the separable beam of a step, or `ampmodel rerun` the point for "
                            "a result.h5 that holds it")
    else:
        group = f"steps/{step:03d}"
        fluence_map = _array(f, f"{group}/fluence", (ny, nx))
        power = _array(f, f"{group}/power", (nt,))
        b_map = _array(f, f"{group}/b_integral", (ny, nx))
        if power.sum() <= 0.0:
            raise SourceProblem(f"the beam after step {step} carries no energy")
        fluence = fluence_map[None, :, :] * (power / power.sum())[:, None, None]
        b_integral = b_map[None, :, :] / factors[:, None, None]
        how = "separable"
        notes.append(f"seed: the beam after step {step} of the earlier run is rebuilt from its stored fluence map and "
                     f"pulse power (a separable beam: one pulse shape at every pixel; the B-integral of each time "
                     f"slice set to the stored largest); the full beam is stored after the last step only")
    if np.any(fluence < 0.0):
        raise SourceProblem("a negative fluence: a damaged result file")
    if diffraction and field is None:
        field = np.sqrt(fluence).astype(np.complex128)
        notes.append("seed: the earlier run stored no field for this beam: the field is taken as sqrt(fluence) with "
                     "a flat phase (a beam at its waist)")
    return SeedBeam(fluence_J_m2=fluence, b_integral_rad=b_integral, complex_field=field,
                    notes=tuple(note("seed-from", n) for n in notes)), how, notes


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(2**22), b""):
            digest.update(block)
    return digest.hexdigest()


def read_source(path: Path, name: str, step: int | None, mode: str, grid: Grid) -> Taken:
    """The beam of the result file ``path`` (``name`` as the config wrote it) after ``step`` (None:
    the last) for a run of ``mode`` on ``grid``. Raises SourceProblem."""
    import h5py
    try:
        f = h5py.File(path, "r")
    except Exception:   # noqa: BLE001 - h5py raises OSError and others for a file that is not HDF5
        raise SourceProblem("cannot be read as HDF5: not a result file, or a truncated one") from None
    with f:
        root = _root(f)
        names = _steps(f)
        index = len(names) - 1 if step is None else step
        if index >= len(names):
            raise IndexError(len(names))
        x = _array(f, "grid/x")
        if x.ndim != 1 or x.size < 2 or not x[1] > x[0]:
            raise SourceProblem(f"/grid/x of shape {x.shape} is not a row of increasing pixel centres: a damaged "
                                "result file")
        attrs = _seed_attrs(f, root["mode"])
        if root["mode"] != mode:
            return Taken(SeedBeam(), attrs, root["mode"], x, 0)
        kind = _attr(f[f"steps/{names[index]}"], "kind", str, f"/steps/{names[index]}")
        if mode == "cw":
            nt = 0
            intensity = _array(f, f"steps/{names[index]}/intensity", (x.size, x.size))
            if np.any(intensity < 0.0):
                raise SourceProblem("a negative intensity: a damaged result file")
            beam, how, notes = _cw_beam(f, intensity, index == len(names) - 1, grid.diffraction)
        else:
            nt = _array(f, "grid/t").size
            if x.size != grid.points or nt != grid.time_slices:
                return Taken(SeedBeam(), attrs, mode, x, nt)
            factors = beam_shapes.slice_peak_factors(attrs["shape"], nt, attrs.get("pulse_trace"))
            beam, how, notes = _pulsed_beam(f, index, index == len(names) - 1, grid.diffraction,
                                            (nt, x.size, x.size), factors)
    origin = {"file": name, "sha256": _sha256(path), "created_utc": root["created_utc"],
              "software_version": root["software_version"], "title": root["title"], "step": index,
              "step_kind": kind, "step_count": len(names), "beam": how}
    return Taken(SeedBeam(beam.fluence_J_m2, beam.b_integral_rad, beam.complex_field, beam.intensity_W_m2, origin,
                          beam.notes), attrs, mode, x, nt)


def read_copy(path: str | Path) -> Taken | None:
    """The beam a chained run used, from its own result.h5 (``/seed/from``; written by output/hdf5.py),
    for a rerun; None if the file holds none."""
    import h5py
    with h5py.File(path, "r") as f:
        if COPY_GROUP not in f:
            return None
        g = f[COPY_GROUP]
        mode = _attr(f, "mode", str, "the file")
        arrays = {k: _array(f, f"{COPY_GROUP}/{k}", complex_ok=True)
                  for k in ("fluence", "b_integral", "field", "intensity") if k in g}
        needed = ("intensity",) if mode == "cw" else ("fluence", "b_integral")
        if any(k not in arrays for k in needed):
            raise SourceProblem(f"/{COPY_GROUP} lacks {', '.join(k for k in needed if k not in arrays)}: a damaged file")
        if "field" in arrays:
            arrays["field"] = arrays["field"].astype(np.complex128)
        origin = json.loads(_attr(g, "origin", str, f"/{COPY_GROUP}"))
        notes = tuple(note("seed-from", str(t)) for t in json.loads(_attr(g, "notes", str, f"/{COPY_GROUP}")))
        beam = SeedBeam(arrays.get("fluence"), arrays.get("b_integral"), arrays.get("field"),
                        arrays.get("intensity"), origin, notes)
        nt = _array(f, "grid/t").size if mode == "pulsed" else 0
        return Taken(beam, _seed_attrs(f, mode), mode, _array(f, "grid/x"), nt)


# ----------------------------------------------------------------------------------------------
# The [seed] table with from
# ----------------------------------------------------------------------------------------------

def _resolve(p: Problems, name: Any) -> Path | None:
    where = "seed.from"
    if not isinstance(name, str) or not name.strip():
        p.add(where, "must be the path of an earlier run's result.h5 (a string), relative to the config file's "
                     "folder", name)
        return None
    path = Path(name).expanduser()
    if not path.is_absolute() and p.folder is not None:
        path = Path(p.folder) / path
    if not path.exists():
        p.add(where, f"no such file ({path}); run the earlier stage first (a relative path is taken from the "
                     "config file's folder)", name)
        return None
    if not path.is_file():
        p.add(where, f"not a file ({path} is a folder or a device); give the result.h5 of the earlier run", name)
        return None
    if path.stat().st_size > MAX_BYTES:
        p.add(where, f"the file is larger than {MAX_BYTES // 2**30} GiB: not a result file this run can take", name)
        return None
    return path


def _grid_problems(p: Problems, taken: Taken, grid: Grid, name: str) -> bool:
    """Problems naming the grid keys where this run's grid is not the stored one; True if any."""
    x = taken.x_m
    width = float((x[1] - x[0]) * x.size) if x.size > 1 else 0.0
    wrong = []
    if x.size != grid.points:
        wrong.append(f"grid.points = {x.size}")
    if not math.isclose(width, grid.width_m, rel_tol=1e-9):
        wrong.append(f"grid.width_mm = {width * 1e3:.9g}")
    if taken.mode == "pulsed" and taken.time_slices != grid.time_slices:
        wrong.append(f"grid.time_slices = {taken.time_slices}")
    if wrong:
        p.add("grid", f"the grid differs from the one of seed.from = {name!r}: set {', '.join(wrong)} (a chained "
                      "stage continues on the earlier run's pixels and time slices; nothing is resampled)")
    return bool(wrong)


def seed_from(p: Problems, table: Mapping[str, Any], values: Mapping[str, Any], mode: str | None,
              grid: Grid | None, fibre_layout: bool, rate_Hz: float | None) -> Seed | None:
    """The Seed of a ``[seed]`` table that gives ``from`` (module docstring); None with problems."""
    before = len(p)
    for key in table:
        if key not in ALLOWED:
            p.add(join_path("seed", key), "the seed comes from the earlier run's result (seed.from): its energy, "
                                          "wavelength, pulse and profile are that run's; remove this key (to scale "
                                          "the seed, add a loss step)", table[key])
    if fibre_layout:
        p.add("seed.from", "a layout of fibres takes no seed from a result file in this version; give the seed's "
                           "keys instead", table.get("from"))
    name = table.get("from")
    if len(p) > before or mode is None or grid is None:
        return None
    step = values.get("from_step")
    stored = p.stored_seeds.get(name)
    path = None if stored is not None else _resolve(p, name)
    if stored is None and path is None:
        return None
    try:
        taken = stored if stored is not None else read_source(path, name, step, mode, grid)
    except IndexError as exc:
        p.add("seed.from_step", f"out of range: {name} holds the beam after steps 0 to {exc.args[0] - 1}", step)
        return None
    except (SourceProblem, OSError) as exc:
        p.add("seed.from", f"{exc}", name)
        return None
    except (KeyError, ValueError, TypeError) as exc:     # h5py on a damaged structure
        p.add("seed.from", f"cannot be read as a result file of ampmodel ({exc}): a damaged file", name)
        return None
    if taken.mode != mode:
        p.add("seed.from", f"a result of a {taken.mode} run, and this run is mode = {mode!r}: a {mode} stage takes its "
                           f"seed from a {mode} run", name)
        return None
    if _grid_problems(p, taken, grid, name):
        return None
    return _seed(p, taken, rate_Hz, name)


def _seed(p: Problems, taken: Taken, rate_Hz: float | None, name: str) -> Seed | None:
    """The Seed with the file's own figures (energy or power from its beam, the diameter its D4σ)."""
    beam, attrs, x = taken.beam, taken.attrs, taken.x_m
    area = float((x[1] - x[0]) ** 2)
    seed_map = beam.intensity_W_m2 if taken.mode == "cw" else beam.fluence_J_m2.sum(axis=0)
    total = float(seed_map.sum() * area)
    if not total > 0.0:
        p.add("seed.from", "the beam taken carries no energy (or power); take another step (seed.from_step)", name)
        return None
    diameter = float(np.mean(d4sigma(seed_map, x, x)))
    if taken.mode == "cw":
        return Seed(wavelength_m=attrs["wavelength"], power_W=total, diameter_m=diameter, beam=beam)
    return Seed(wavelength_m=attrs["wavelength"], energy_J=total, duration_s=attrs["duration"],
                shape=attrs["shape"], diameter_m=diameter, repetition_rate_Hz=rate_Hz,
                bandwidth_m=attrs["bandwidth"] or None, chirp=attrs["chirp"], beam=beam,
                pulse_trace=attrs.get("pulse_trace"), pulse_trace_outside=attrs.get("pulse_trace_outside", 0.0),
                spectrum_trace=attrs.get("spectrum_trace"))
