"""The output folder of a sweep or a tolerance run: manifest, lock, point files and the table.

Layout of a folder (README "Sweeps, sizing and tolerance runs")::

    manifest.json        what the folder holds: kind, the hash of the config without its [sweep] and
                         [spread] tables, that normalised config, the table, the point count
    points/NNNN.h5       one file per point, written by the worker that computed it
    <table>.h5           the table (sweep.h5 or samples.h5), written by the parent process
    <table>.csv          the same table as text
    .lock                held (flock) while a process works in the folder

One writer per file: a point file is written only by the worker that computed the point, under a
temporary name that is renamed into place when complete (``results.write_hdf5``); the table files
and the manifest only by the parent, which holds the folder's lock. HDF5 file locking stays on.

Resume: a point counts as done when ``points/NNNN.h5`` opens, carries a summary, and records the
same values and the same config hash as point NNNN of the current run; anything else (a missing,
partial or foreign file) is computed again.
"""
from __future__ import annotations

import csv
import hashlib
import json
import os
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterator, Mapping, Sequence

import numpy as np

from ampmodel._version import __version__
from ampmodel.output import atomic
from ampmodel.output.summary import is_number, scalar_keys
from ampmodel.studies.figures import figure_keys, flatten
from ampmodel.units import unit_of

MANIFEST = "manifest.json"
LOCK = ".lock"
POINTS = "points"
PLOTS = "plots"
# Keys of a run config that do not change what a point computes (the point's values are stored with it).
NOT_HASHED = ("sweep", "spread")


# summary.json entries that are not scalars of the table.
class FolderError(Exception):
    """An output folder that cannot be used (another config's sweep, not a sweep folder, busy)."""


def point_name(index: int) -> str:
    """``0003`` for point 3 (four digits, more when needed)."""
    return f"{index:04d}"


def point_path(out: Path, index: int) -> Path:
    return out / POINTS / f"{point_name(index)}.h5"


# ----------------------------------------------------------------------------------------------
# The manifest: which config a folder belongs to
# ----------------------------------------------------------------------------------------------

def _normalise(value: Any) -> Any:
    """Numbers as floats (``1`` and ``1.0`` configure the same), tables with sorted keys."""
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, (int, float)):
        return float(value)
    if isinstance(value, Mapping):
        return {str(k): _normalise(v) for k, v in sorted(value.items())}
    if isinstance(value, (list, tuple)):
        return [_normalise(v) for v in value]
    return str(value)   # dates and times of TOML


def normalised_config(raw: Mapping[str, Any]) -> dict:
    """The config as the manifest compares it: without [sweep] and [spread], numbers as floats."""
    return _normalise({k: v for k, v in raw.items() if k not in NOT_HASHED})


def config_hash(raw: Mapping[str, Any]) -> str:
    """SHA-256 of the normalised config (see :func:`normalised_config`), hex."""
    text = json.dumps(normalised_config(raw), sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode()).hexdigest()


def _show(value: Any) -> str:
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    text = json.dumps(value, default=str)
    return text if len(text) <= 40 else text[:37] + "..."


def _differences(old: Any, new: Any, path: str = "", out: list | None = None) -> list[str]:
    """Up to a few "path: old -> new" lines between two normalised configs."""
    out = [] if out is None else out
    if isinstance(old, dict) and isinstance(new, dict):
        for k in sorted(set(old) | set(new)):
            sub = f"{path}.{k}" if path else k
            if k not in old:
                out.append(f"{sub}: added ({_show(new[k])})")
            elif k not in new:
                out.append(f"{sub}: removed (was {_show(old[k])})")
            else:
                _differences(old[k], new[k], sub, out)
    elif isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        for i, (a, b) in enumerate(zip(old, new, strict=True)):
            _differences(a, b, f"{path}[{i}]", out)
    elif old != new:
        out.append(f"{path}: {_show(old)} -> {_show(new)}")
    return out


def _now() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _sweep_given(record: Mapping[str, Any] | None) -> str:
    return record.get("options", "--vary") if record else "the config's own [sweep] table (no --vary)"


def _same_command_line(old: Mapping[str, Any] | None, new: Mapping[str, Any] | None) -> bool:
    """Whether two --vary records (``points.vary_record``; None: none given) name the same points."""
    if not old or not new:
        return not old and not new
    return all(_normalise(old.get(k)) == _normalise(new.get(k)) for k in ("paths", "combine"))


def check_folder(out: Path, kind: str, raw: Mapping[str, Any], source: str,
                 command_line: Mapping[str, Any] | None = None) -> dict | None:
    """Check that ``out`` may hold this run; nothing is written.

    ``command_line``: the --vary paths, values and combine of a sweep given them (None: not), which
    must be those the folder was started with.

    Returns the existing manifest (a resumed run), or None for a new or empty folder.

    Raises
    ------
    FolderError
        ``out`` is a file; or a folder that is neither empty nor one of ours; or ours for another
        kind of run or another config (the message lists the differences).
    """
    if out.exists() and not out.is_dir():
        raise FolderError(f"{out}: exists and is not a folder; give another --out")
    manifest_path = out / MANIFEST
    if not manifest_path.exists():
        if out.exists() and any(p.name != LOCK for p in out.iterdir()):
            raise FolderError(f"{out}: exists and is not a sweep or spread folder (no {MANIFEST}); "
                              f"give another --out, or an empty folder")
        return None
    try:
        manifest = json.loads(manifest_path.read_text())
        old_kind, old_hash = manifest["kind"], manifest["config_hash"]
    except (OSError, ValueError, KeyError, TypeError):
        raise FolderError(f"{manifest_path}: cannot be read; give another --out, or remove the folder") from None
    if old_kind != kind:
        raise FolderError(f"{out}: holds a {old_kind} run, not a {kind} run; give another --out")
    new_hash = config_hash(raw)
    if old_hash != new_hash:
        diffs = _differences(manifest.get("config", {}), normalised_config(raw))
        listing = "".join(f"\n  {d}" for d in diffs[:8]) + ("\n  ..." if len(diffs) > 8 else "")
        raise FolderError(
            f"{out}: holds a {kind} of a different config ({manifest.get('source', '?')}, config hash "
            f"{old_hash[:12]}; this config {source} hashes to {new_hash[:12]}). A {kind} resumes only "
            f"when everything outside its [{kind}] table is the same. "
            f"Give another --out, or remove the folder. Differences:{listing}")
    if not _same_command_line(manifest.get("vary"), command_line):
        raise FolderError(
            f"{out}: holds a {kind} started with {_sweep_given(manifest.get('vary'))}; this start gives "
            f"{_sweep_given(command_line)}. A {kind} resumes only with the values it was started with: "
            f"give the same --vary and --combine options as its first start, or another --out.")
    return manifest


def write_manifest(out: Path, kind: str, raw: Mapping[str, Any], source: str, table: Any, points: int,
                   previous: dict | None, command_line: Mapping[str, Any] | None = None) -> None:
    """Write (or update) ``manifest.json``, atomically (``command_line``: a sweep's --vary, as ``vary``)."""
    manifest = {
        "kind": kind, "config_hash": config_hash(raw), "source": source,
        "software_version": __version__,
        "created_utc": previous.get("created_utc", _now()) if previous else _now(),
        "updated_utc": _now(), "points": points, "table": table,
        "config": normalised_config(raw),
    }
    if command_line:
        manifest["vary"] = dict(command_line)
    atomic.write_text(out / MANIFEST, json.dumps(manifest, indent=2, default=str) + "\n")


@contextmanager
def folder_lock(out: Path) -> Iterator[None]:
    """Hold ``out/.lock`` (an advisory flock) so that only one process works in the folder.

    The lock goes with the process that holds it, so a killed sweep never leaves a stale lock."""
    try:
        import fcntl
    except ImportError:        # not POSIX: no lock, one sweep per folder is then the user's care
        yield
        return
    fd = os.open(out / LOCK, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise FolderError(f"{out}: another sweep or spread is working in this folder; wait for it "
                              f"to finish, or give another --out") from None
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        yield
    finally:
        os.close(fd)


def undo_new_folder(out: Path, created: bool) -> None:
    """Remove what a start that computed nothing left in a folder that was new (or empty) before it."""
    if any((out / POINTS).glob("*.h5")):
        return
    for name in (MANIFEST, LOCK):
        (out / name).unlink(missing_ok=True)
    for folder in ((out / POINTS, out) if created else (out / POINTS,)):
        try:
            folder.rmdir()
        except OSError:
            pass


def make_points_folder(out: Path) -> None:
    """Create ``out`` and its points/; a write error (full disk, no permission) as an OutputError."""
    try:
        (out / POINTS).mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        if atomic.is_write_error(exc):
            raise atomic.OutputError(atomic.describe_write_error(exc, out), out) from None
        raise


def remove_stale_parts(out: Path) -> int:
    """Delete temporary files left by writers that were killed (the caller holds the folder's lock):
    in the folder, its points/ and its plots/."""
    return atomic.remove_parts(out, out / POINTS, out / PLOTS)


def reset_folder(out: Path, table_stem: str, derived: Sequence[str]) -> None:
    """Remove the temporary files, the table and the files derived from it (the caller holds the lock)."""
    remove_stale_parts(out)
    # the table and what is derived from it are written again at the end: until then no
    # earlier table may stand for this start's points
    for name in (f"{table_stem}.h5", f"{table_stem}.csv", *derived):
        (out / name).unlink(missing_ok=True)


# ----------------------------------------------------------------------------------------------
# Point files
# ----------------------------------------------------------------------------------------------

def values_key(values: Mapping[str, Any]) -> str:
    """The values of a point as a canonical JSON text (compared when resuming)."""
    return json.dumps(dict(values), sort_keys=True, default=str)


def point_attrs(kind: str, index: int, values: Mapping[str, Any], hash_: str) -> dict[str, Any]:
    """Root attributes that identify a point file."""
    return {"sweep_kind": kind, "sweep_index": index, "sweep_values": values_key(values),
            "sweep_config_hash": hash_}


def read_point(path: Path) -> dict | None:
    """The identity and summary of a point file, or None when it is missing, partial (no root attribute
    ``complete = True``, which the writer sets last) or not a point file."""
    import h5py
    try:
        with h5py.File(path, "r") as f:
            if not f.attrs.get(atomic.COMPLETE_ATTR, False) or "steps" not in f or "grid" not in f:
                return None
            return {"values": str(f.attrs["sweep_values"]), "config_hash": str(f.attrs["sweep_config_hash"]),
                    "summary": json.loads(f.attrs["summary"])}
    except Exception:   # a truncated or foreign file: h5py raises OSError, KeyError, ValueError, ...
        return None


def point_matches(found: dict | None, hash_: str, values: Mapping[str, Any]) -> bool:
    """Whether a point file (as :func:`read_point` reads it) was made for this config and these values."""
    return bool(found) and found["config_hash"] == hash_ and found["values"] == values_key(values)


def found_points(out: Path, values: Sequence[Mapping[str, Any]], hash_: str) -> tuple[list[dict | None], list[int]]:
    """The summaries of the points done (None for others) and the points to compute; stale point files removed."""
    summaries: list[dict | None] = [None] * len(values)
    todo: list[int] = []
    for i, v in enumerate(values):
        path = point_path(out, i)
        found = read_point(path) if path.exists() else None
        if point_matches(found, hash_, v):
            summaries[i] = found["summary"]
        else:
            if path.exists():
                path.unlink()     # partial, or made for other values: computed again
            todo.append(i)
    return summaries, todo


def done_summaries(out: Path, values: Sequence[Mapping[str, Any]], hash_: str) -> dict[int, dict]:
    """The summaries of the points done in the folder for these values, by index; read only."""
    done = {}
    for i, v in enumerate(values):
        path = point_path(out, i)
        found = read_point(path) if path.exists() else None
        if point_matches(found, hash_, v):
            done[i] = found["summary"]
    return done


def collect_late_points(out: Path, todo: Sequence[int], values: Sequence[Mapping[str, Any]], hash_: str,
                        summaries: list, failed: Mapping[int, str]) -> None:
    """Add to ``summaries`` the points of ``todo`` whose files are done but were neither reported nor failed."""
    for i in todo:
        if summaries[i] is None and i not in failed:
            found = read_point(point_path(out, i))
            if point_matches(found, hash_, values[i]):
                summaries[i] = found["summary"]


# ----------------------------------------------------------------------------------------------
# The table: sweep.h5 / samples.h5 and their CSV
# ----------------------------------------------------------------------------------------------

@dataclass
class Column:
    """One column of the table: a swept path or a summary scalar, in the unit its name carries."""

    name: str
    values: list
    units: str
    group: str              # "swept" or "summary"


def table_columns(paths: Sequence[str], values: Sequence[Mapping[str, Any]],
                  summaries: Sequence[Mapping[str, Any] | None]) -> list[Column]:
    """The columns of the table, one row per point: each path; each top-level summary scalar (NaN
    where a point has none); ``warning_count``; then every other number of the summaries by its figure
    path (``steps.N.KEY``, ``media.NAME.KEY``, ``train.KEY``, ...; ``figures.flatten``), read from the
    summaries themselves, so a table of older point files has a column only where their summaries do."""
    cols = [Column(p, [v[p] for v in values], unit_of(p.rsplit(".", 1)[-1]), "swept") for p in paths]
    for key in scalar_keys(summaries):
        cols.append(Column(key, [float(s[key]) if s and is_number(s.get(key)) else float("nan")
                                 for s in summaries], unit_of(key), "summary"))
    cols.append(Column("warning_count", [len(s["warnings"]) if s else -1 for s in summaries], "1", "summary"))
    flat = [flatten(s) if s else None for s in summaries]
    for key in figure_keys(flat):
        if "." in key:
            cols.append(Column(key, [f.get(key, float("nan")) if f else float("nan") for f in flat], unit_of(key),
                               "summary"))
    return cols


def _as_array(values: list) -> tuple[np.ndarray, bool]:
    """Numbers as float64 (int64 when all are ints), booleans as bool, anything else as UTF-8 text."""
    if all(isinstance(v, (bool, np.bool_)) for v in values):
        return np.array(values, dtype=bool), False
    if all(is_number(v) for v in values):
        if all(isinstance(v, (int, np.integer)) for v in values):
            return np.array(values, dtype=np.int64), False
        return np.array(values, dtype=np.float64), False
    text = [v if isinstance(v, str) else json.dumps(v, default=str) for v in values]
    return np.array(text, dtype=object), True


def write_table(out: Path, stem: str, kind: str, columns: Sequence[Column], done: Sequence[bool],
                attrs: Mapping[str, Any]) -> tuple[Path, Path]:
    """Write ``<stem>.h5`` and ``<stem>.csv`` atomically (the parent process only).

    ``<stem>.h5``: ``/index``; ``/swept/<path>`` and ``/summary/<figure path>``, one row per point, in the
    unit their name carries (as in the config and summary.json), stated by a ``units`` attribute;
    ``/points/NNNN``: external links to the point files (relative, so the folder may move).
    """
    import h5py
    n = len(done)
    h5_path, csv_path = out / f"{stem}.h5", out / f"{stem}.csv"
    with atomic.hdf5_file(h5_path) as f:
        f.attrs["software_version"] = __version__
        f.attrs["kind"] = kind
        f.attrs["created_utc"] = _now()
        for k, v in attrs.items():
            f.attrs[k] = v
        ds = f.create_dataset("index", data=np.arange(n, dtype=np.int64))
        ds.attrs["units"] = "1"
        groups = {"swept": f.create_group("swept"), "summary": f.create_group("summary")}
        for col in columns:
            data, is_text = _as_array(col.values)
            if is_text:
                ds = groups[col.group].create_dataset(col.name, data=data, dtype=h5py.string_dtype())
            else:
                ds = groups[col.group].create_dataset(col.name, data=data)
            ds.attrs["units"] = "" if is_text else col.units
        links = f.create_group("points")
        for i in range(n):
            if done[i]:
                links[point_name(i)] = h5py.ExternalLink(f"{POINTS}/{point_name(i)}.h5", "/")
        f.attrs["points_done"] = int(sum(bool(d) for d in done))
        f.attrs["points_total"] = n
        f.attrs["all_points_done"] = bool(all(done))
        f.attrs[atomic.COMPLETE_ATTR] = True      # last: the file is whole (not: every point is done)

    with atomic.target(csv_path) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["index"] + [c.name for c in columns] + ["point_file"])
            for i in range(n):
                row = [i]
                for c in columns:
                    v = c.values[i]
                    row.append(repr(float(v)) if isinstance(v, (float, np.floating)) else
                               v if isinstance(v, (str, int)) and not isinstance(v, bool) else
                               json.dumps(v, default=str))
                row.append(f"{POINTS}/{point_name(i)}.h5" if done[i] else "")
                w.writerow(row)
    return h5_path, csv_path


def read_table(path: str | os.PathLike) -> dict[str, np.ndarray]:
    """Read the columns of a sweep.h5 / samples.h5 table: {name: array}, swept paths and summary keys."""
    import h5py
    out: dict[str, np.ndarray] = {}
    with h5py.File(path, "r") as f:
        out["index"] = f["index"][()]
        for group in ("swept", "summary"):
            for name, ds in f[group].items():
                data = ds[()]
                if data.dtype.kind == "O":
                    data = np.array([d.decode() if isinstance(d, bytes) else d for d in data], dtype=object)
                out[name] = data
    return out
