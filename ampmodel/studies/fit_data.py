"""Measured data for a fit (``ampmodel fit --data DATA.csv``): reading the table and naming its columns.

The file is plain text, read as data (nothing in it is evaluated): blank lines and lines starting
with ``#`` are skipped; the first other line is the header, one name per column, separated by
commas; every further line is one measurement (a row). A cell may be empty: a figure not measured
in that row, or a condition that takes the config's value.

Each column is one of

- a **condition**: a value path of the config (``seed.energy_J``, ``medium.rod.pump.energy_J``,
  ``step.1.transmission``), in the config's units, checked as ``--set`` paths are (the path must
  resolve and name a key of the table it ends in);
- a **figure**: a figure path of summary.json (``output_energy_J``, ``steps.0.energy_out_J``; see
  ``figures.py``), the measured value in the unit its name carries;
- ``sigma_<figure>``: the uncertainty (one standard deviation, > 0) of that figure's measured values.

Anything else is bad input, with a did-you-mean over the config's keys and the figure names. Every
problem names the file and, for a cell, its line; a cell is shown by a short excerpt only. Only a
regular file of at most :data:`MAX_BYTES` is read.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

from ampmodel.config.checks import PathError, close_matches, quoted_list, show
from ampmodel.config.schema import leaf_schema, walk
from ampmodel.description import Config
from ampmodel.studies.figures import SUMMARY_KEYS, check_before_run

MAX_BYTES = 2**20
MAX_ROWS = 2000
SIGMA_PREFIX = "sigma_"


@dataclass
class FitData:
    """A measured table whose columns are named (:func:`read_data`).

    conditions : the condition columns (value paths), in the order of the file
    figures : the measured figure columns (figure paths), in the order of the file
    rows : one {condition path: value} per row (an empty cell is left out: the config's value)
    measured : one {figure path: value} per row (a figure not measured in that row is left out)
    sigma : one {figure path: sigma} per row (where a sigma_ cell is given)
    lines : the line of each row in the file (1-based)
    source : the file's name (or "<table>"); text : its text (kept with the fit's results)
    """

    conditions: list[str]
    figures: list[str]
    rows: list[dict[str, float]]
    measured: list[dict[str, float]]
    sigma: list[dict[str, float]]
    lines: list[int]
    source: str = "<table>"
    text: str = ""
    sigma_columns: list[str] = field(default_factory=list)

    def count(self) -> int:
        """How many measured values the table holds."""
        return sum(len(m) for m in self.measured)

    def all_have_sigma(self) -> bool:
        """Every measured value has its sigma."""
        return all(set(m) <= set(s) for m, s in zip(self.measured, self.sigma, strict=True))


def read_text(path: str | os.PathLike) -> tuple[str | None, str | None]:
    """The text of a data file, or (None, why not): a regular file of at most MAX_BYTES, UTF-8."""
    p = Path(path).expanduser()
    if not p.exists():
        return None, f"--data {path}: no such file"
    if not p.is_file():
        return None, f"--data {path}: not a file (a folder or a device); give a CSV file"
    try:
        if p.stat().st_size > MAX_BYTES:
            return None, f"--data {path}: larger than {MAX_BYTES // 2**20} MiB; a table of measurements needs far less"
        data = p.read_bytes()
    except OSError as exc:
        return None, f"--data {path}: cannot be read ({exc.strerror or exc}); check the file's permissions"
    try:
        return data.decode("utf-8-sig"), None
    except UnicodeDecodeError as exc:
        return None, f"--data {path}: not UTF-8 text ({exc.reason} at byte {exc.start}); save it as plain text (CSV)"


def is_condition(config: Config, path: str) -> bool:
    """``path`` is a value path of the config (it resolves, and its last key belongs to the table there)."""
    try:
        _, leaf, trail = walk(dict(config.raw), path)
    except PathError:
        return False
    if trail and trail[0] in ("sweep", "spread"):
        return False
    schema = leaf_schema(dict(config.raw), trail)
    return schema is not None and leaf in schema


def _quoted(name: str) -> str:
    """A column's name for a message: quoted, a long one cut short (the file is not echoed)."""
    return repr(name) if len(name) <= 60 else show(name, 60)


def _figure_names() -> list[str]:
    return sorted(set().union(*SUMMARY_KEYS.values()))


def _config_table(config: Config, name: str) -> bool:
    """``name`` starts with a table of the config (not one that summary.json has too, like ``train``)."""
    first = name.split(".")[0]
    return "." in name and first in config.raw and isinstance(config.raw[first], (dict, list)) and \
        first != "train"


def is_figure(config: Config, name: str) -> bool:
    """``name`` is a figure path (of good form, a known key) that is not in a table of the config."""
    return not _config_table(config, name) and check_before_run(name, config) is None


def _unknown_column(config: Config, name: str) -> str:
    """Why a column is neither a condition nor a figure, with a did-you-mean."""
    if _config_table(config, name):
        try:
            _, leaf, trail = walk(dict(config.raw), name)
        except PathError as exc:
            return f"column {_quoted(name)}: not a value path of this config: {exc}"
        schema = leaf_schema(dict(config.raw), trail)
        hits = close_matches(leaf, schema) if schema else []
        prefix = name.rsplit(".", 1)[0] + "."
        hint = f"; did you mean {quoted_list(prefix + h for h in hits)}?" if hits else ""
        return f"column {_quoted(name)}: not a value of this config{hint}"
    problem = check_before_run(name, config)
    if "." not in name:
        hits = close_matches(name, _figure_names())
        problem = f"did you mean {quoted_list(hits)}?" if hits else "no such figure"
    return (f"column {_quoted(name)}: neither a value path of the config (the condition of a measurement, e.g. "
            f"seed.energy_J) nor a figure of summary.json (what was measured, e.g. output_energy_J), nor "
            f"sigma_<figure>: {problem}")


def name_columns(header: Sequence[str], config: Config) -> tuple[list[str], list[str], list[str], list[str]]:
    """(conditions, figures, sigma columns, problems) of a header; a column is a condition if it is a
    value path of the config, a figure if it is a figure path, ``sigma_<figure>`` for a figure present."""
    conditions, figures, sigmas, problems = [], [], [], []
    for name in header:
        if not name:
            problems.append("the header has an empty column name")
        elif header.count(name) > 1:
            if not any(name in p for p in problems):
                problems.append(f"column {_quoted(name)} appears {header.count(name)} times; name each column once")
        elif name.startswith(SIGMA_PREFIX):
            sigmas.append(name)
        elif is_condition(config, name):
            conditions.append(name)
        elif is_figure(config, name):
            figures.append(name)
        else:
            problems.append(_unknown_column(config, name))
    for name in sigmas:
        figure = name[len(SIGMA_PREFIX):]
        if figure not in figures:
            hint = f"; did you mean {quoted_list(SIGMA_PREFIX + h for h in close_matches(figure, figures))}?" \
                if close_matches(figure, figures) else ""
            problems.append(f"column {_quoted(name)}: the uncertainty of a figure the table does not measure (there "
                            f"is no column {figure!r}){hint}")
    if not figures and not problems:
        problems.append("no measured figure: name at least one column by a figure path of summary.json, "
                        "e.g. output_energy_J")
    return conditions, figures, sigmas, problems


def _cell(text: str) -> float | None | str:
    """A cell's number, None when empty, or the reason it is not one."""
    t = text.strip()
    if not t:
        return None
    try:
        value = float(t)
    except ValueError:
        return f"{show(t, 24)} is not a number"
    if not math.isfinite(value):
        return f"{t}: nan and inf are not allowed (leave the cell empty when there is no value)"
    return value


def parse_table(text: str, config: Config, source: str = "<table>") -> tuple[FitData | None, list[str]]:
    """The named table of a data file's text, and its problems (all of them, each naming the line)."""
    header: list[str] | None = None
    problems: list[str] = []
    rows: list[list[Any]] = []
    lines: list[int] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = [f.strip() for f in stripped.split(",")]
        if header is None:
            header = fields
            continue
        if len(fields) != len(header):
            problems.append(f"line {number}: {len(fields)} cells, the header names {len(header)}: "
                            f"{show(stripped, 60)}")
            continue
        cells = []
        for name, cell in zip(header, fields, strict=True):
            value = _cell(cell)
            if isinstance(value, str):
                problems.append(f"line {number}: {name} = {value}")
                value = None                  # reported; the other checks go on without it
            cells.append(value)
        rows.append(cells)
        lines.append(number)
        if len(rows) > MAX_ROWS:
            problems.append(f"more than {MAX_ROWS} rows: a fit runs every row at each step; thin the table out")
            break
    if header is None:
        return None, ["the file is empty: give a header line naming the columns (conditions, figures, "
                      "sigma_<figure>), then one line per measurement"]
    conditions, figures, sigmas, named = name_columns(header, config)
    problems = named + problems
    if not rows:
        problems.append("no data rows after the header: give one line per measurement")
    if named or not rows:
        return None, problems
    data = _columns(header, rows, lines, conditions, figures, sigmas, problems)
    data.source, data.text = source, text
    return data, problems


def _columns(header: Sequence[str], rows: list[list[Any]], lines: list[int], conditions: list[str],
             figures: list[str], sigmas: list[str], problems: list[str]) -> FitData:
    """The rows by column kind; a sigma that is not > 0, or given without its measured value, is a problem."""
    data = FitData(conditions, figures, [], [], [], lines, sigma_columns=sigmas)
    for cells, number in zip(rows, lines, strict=True):
        row = dict(zip(header, cells, strict=True))
        data.rows.append({c: row[c] for c in conditions if row[c] is not None})
        data.measured.append({f: row[f] for f in figures if row[f] is not None})
        sigma = {}
        for s in sigmas:
            figure, value = s[len(SIGMA_PREFIX):], row[s]
            if value is None:
                continue
            if not value > 0:
                problems.append(f"line {number}: {s} = {value:g}: an uncertainty must be > 0")
            elif row[figure] is None:
                problems.append(f"line {number}: {s} = {value:g} is given but {figure} is not measured there")
            else:
                sigma[figure] = value
        for f in figures:
            if row[f] == 0 and f not in sigma and row.get(SIGMA_PREFIX + f) is None:
                problems.append(f"line {number}: {f} = 0 has no {SIGMA_PREFIX}{f}: a value without a sigma is "
                                f"compared relatively, which needs a value other than 0; give {SIGMA_PREFIX}{f}")
        data.sigma.append(sigma)
    if data.count() == 0:
        problems.append("no measured value: every figure cell is empty")
    return data


def table_from_columns(columns: Mapping[str, Sequence[Any]]) -> str:
    """CSV text from {column: values} (None or NaN: an empty cell), for data given from Python."""
    names = list(columns)
    lengths = {len(v) for v in columns.values()}
    if len(lengths) > 1:
        raise ValueError(f"the columns have different lengths: {sorted(lengths)}")
    n = lengths.pop() if lengths else 0

    def cell(v: Any) -> str:
        return "" if v is None or (isinstance(v, float) and math.isnan(v)) else repr(float(v))

    return "\n".join([",".join(names)] + [",".join(cell(columns[c][i]) for c in names) for i in range(n)]) + "\n"
