"""Data files a run config refers to: cross-section spectra from a CSV file.

A ``[medium.material.spectrum]`` table may give its arrays in a file instead of inline::

    [medium.material.spectrum]
    file = "yb_spectrum.csv"          # relative paths are taken from the config file's folder
    source = "where the numbers come from"

The file is plain text, read as data (nothing in it is evaluated): blank lines and lines starting
with ``#`` are skipped; the first other line names the columns with their units, exactly
``wavelength_nm, emission_cm2, absorption_cm2`` (in any order); every further line holds three
numbers separated by commas. The arrays then go through the same checks as inline arrays (at least
two rows, wavelengths strictly increasing within 150 nm to 20 µm, cross-sections from 0 to 1e-16 cm²).

Every problem names the config key, the file and the line. The text of each file read is kept with
the config (``Config.data_files``) and stored in result.h5, so that a run can be repeated without it.
Sweep points and sizing runs get the arrays inline (``inline_files``): their workers need no access
to the file. (An earlier run's result file, ``seed.from``, is the exception: ``inline_files`` makes
its path absolute and the workers read it, see ``config/chain.py``.)
"""
from __future__ import annotations

import copy
import math
import os
import stat
from pathlib import Path
from typing import Any, Iterator, Mapping

from ampmodel.config.checks import Problems, join_path, show
from ampmodel.config.profile import inline_profile
from ampmodel.materials.material import CROSS_SECTION_COLUMNS, Spectrum, check_spectrum

COLUMNS = tuple(CROSS_SECTION_COLUMNS)            # wavelength_nm, emission_cm2, absorption_cm2
MAX_BYTES = 10 * 2**20
MAX_ROWS = 100_000


class FileProblem(Exception):
    """A data file that cannot be used; the message names the line where it can."""


def read_regular(path: Path, limit: int) -> bytes:
    """The bytes of ``path`` if it is a regular file of at most ``limit`` bytes; FileProblem otherwise.

    The file is opened without waiting (O_NONBLOCK: a device, a pipe or a kernel file that would block
    is refused, never waited on) and checked on the opened descriptor (not a path that may change)."""
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise FileProblem("no such file; a relative path is taken from the config file's folder") from None
    except OSError as exc:
        raise FileProblem(f"cannot be opened ({exc.strerror or type(exc).__name__})") from None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            raise FileProblem("not a regular file (a folder, a device or a pipe); give a data file")
        if info.st_size > limit:
            raise FileProblem(f"the file is larger than {limit / 2**20:.3g} MiB; a data table needs far less")
        chunks, total = [], 0
        while True:
            chunk = os.read(fd, 1 << 20)
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > limit:
                raise FileProblem(f"the file is larger than {limit / 2**20:.3g} MiB; a data table needs far less")
        return b"".join(chunks)
    except BlockingIOError:
        raise FileProblem("cannot be read without waiting (not a plain data file)") from None
    except OSError as exc:
        raise FileProblem(f"cannot be read ({exc.strerror or type(exc).__name__})") from None
    finally:
        os.close(fd)


def parse_spectrum_csv(text: str) -> dict[str, list[float]]:
    """The three columns of a spectrum file (config units: nm, cm²).

    Raises
    ------
    FileProblem
        No header line, a header without exactly the three column names (wrong units included), a
        row that is not three comma-separated finite numbers, no data rows, too many rows.
    """
    header: list[str] | None = None
    columns: dict[str, list[float]] = {}
    rows = 0
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = [f.strip() for f in stripped.split(",")]
        if header is None:
            if sorted(fields) != sorted(COLUMNS):
                raise FileProblem(
                    f"line {number}: the header (the first line that is not a comment) must name the columns with "
                    f"their units: "
                    f"{', '.join(COLUMNS)} (wavelengths in nm, cross-sections in cm2), not "
                    f"{show(stripped, 32)}")
            header = fields
            columns = {name: [] for name in header}
            continue
        if len(fields) != len(header):
            raise FileProblem(f"line {number}: expected {len(header)} numbers separated by commas "
                              f"({', '.join(header)}), got {len(fields)} field{'s' if len(fields) != 1 else ''}: "
                              f"{show(stripped, 32)}")
        for name, text_value in zip(header, fields, strict=True):
            try:
                value = float(text_value)
            except ValueError:
                raise FileProblem(f"line {number}: {name} = {show(text_value, 30)} is not a number") from None
            if not math.isfinite(value):
                raise FileProblem(f"line {number}: {name} = {text_value}: nan and inf are not allowed")
            columns[name].append(value)
        rows += 1
        if rows > MAX_ROWS:
            raise FileProblem(f"more than {MAX_ROWS} rows: thin the table out")
    if header is None:
        raise FileProblem(f"no header line: the first line must be {', '.join(COLUMNS)}, then one row per "
                          "wavelength")
    if rows < 2:
        raise FileProblem(f"{rows} data row{'s' if rows != 1 else ''}: at least 2 are needed")
    return {name: columns[name] for name in COLUMNS}


def shorten(text: str, limit: int = 120) -> str:
    """A path or name cut to ``limit`` characters for a message."""
    return text if len(text) <= limit else text[: limit - 20] + f"...({len(text)} characters)"


def read_data_file(p: Problems, where: str, name: Any) -> str | None:
    """The text of the data file ``name`` (relative to the config's folder): a regular file of at most
    MAX_BYTES of UTF-8 text; None with a problem on the key ``where``."""
    if not isinstance(name, str) or not name.strip():
        p.add(where, "must be the path of a CSV file (a string), relative to the config file's folder", name)
        return None
    path = Path(name).expanduser()
    if not path.is_absolute() and p.folder is not None:
        path = Path(p.folder) / path
    try:
        data = read_regular(path, MAX_BYTES)
    except FileProblem as exc:
        p.add(where, f"{exc} ({shorten(str(path))})", name)
        return None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        p.add(where, f"not UTF-8 text ({exc.reason} at byte {exc.start}); save it as plain text (CSV)", name)
        return None


def spectrum_from_file(p: Problems, table: Mapping[str, Any], path: str) -> Spectrum | None:
    """The Spectrum of a ``[...spectrum]`` table that gives ``file`` (and optionally ``source``).

    Problems name ``<path>.file``, the file and its line; the file's text is recorded in
    ``p.data_files``."""
    where = join_path(path, "file")
    name = table.get("file")
    others = [k for k in table if k in CROSS_SECTION_COLUMNS]
    unknown = [k for k in table if k not in ("file", "source") and k not in CROSS_SECTION_COLUMNS]
    for key in unknown:
        p.add(join_path(path, key), "unknown key; a spectrum read from a file takes file and source", table[key])
    if others:
        p.add(path, f"both file and {', '.join(others)} given: give the arrays in the file or in the table, "
                    "not both")
        return None
    if unknown:
        return None
    text = read_data_file(p, where, name)
    if text is None:
        return None
    try:
        arrays = parse_spectrum_csv(text)
    except FileProblem as exc:
        p.add(where, f"{exc}", name)
        return None
    source = table.get("source", f"the file {name}")
    spectrum, problems = check_spectrum({**arrays, "source": source}, need_source=False)
    for key, _, message in problems:
        if key == "source":
            p.add(join_path(path, "source"), message, source)
        else:
            p.add(where, f"column {key}: {message}" if key else message, name)
    if spectrum is not None:
        p.data_files[name] = text
    return spectrum


# ----------------------------------------------------------------------------------------------
# Configs with the file contents inline (sweep workers, reruns)
# ----------------------------------------------------------------------------------------------

def _spectrum_tables(raw: Mapping[str, Any]) -> Iterator[dict]:
    media = raw.get("medium")
    if not isinstance(media, list):
        return
    for item in media:
        material = item.get("material") if isinstance(item, dict) else None
        spectrum = material.get("spectrum") if isinstance(material, dict) else None
        if isinstance(spectrum, dict) and isinstance(spectrum.get("file"), str):
            yield spectrum


def _inline(table: dict, text: str) -> None:
    arrays = parse_spectrum_csv(text)
    name = table.pop("file")
    table.setdefault("source", f"the file {name}")
    table.update(arrays)


def inline_files(raw: Mapping[str, Any], folder: str | Path | None,
                 stored: Mapping[str, str] | None = None) -> dict:
    """A copy of a *validated* config dict with each spectrum file replaced by its arrays (read from
    ``folder`` for relative paths), so that it can be run where the file is not; the frames of a
    measured seed profile (config/profile.py) are taken from ``stored`` (``Config.data_files``: what
    the config read) where they are there, else read again."""
    out = copy.deepcopy(dict(raw))
    for table in _spectrum_tables(out):
        path = Path(table["file"]).expanduser()
        if not path.is_absolute() and folder:
            path = Path(folder) / path
        _inline(table, path.read_bytes().decode("utf-8-sig"))
    seed = out.get("seed")
    if isinstance(seed, dict) and isinstance(seed.get("from"), str) and folder:
        # an earlier run's result file (config/chain.py) is read by the worker itself: its path made absolute
        path = Path(seed["from"]).expanduser()
        seed["from"] = str(path if path.is_absolute() else (Path(folder) / path).absolute())
    inline_profile(out, stored, folder)
    return out


def inline_stored_files(raw: Mapping[str, Any], files: Mapping[str, str]) -> dict:
    """A copy of a config dict with each spectrum file replaced by the arrays of its stored text
    (``files``: path as written -> text, as result.h5 records them); files not stored stay as they are."""
    out = copy.deepcopy(dict(raw))
    for table in _spectrum_tables(out):
        if table["file"] in files:
            _inline(table, files[table["file"]])
    inline_profile(out, files, read=False)
    return out
