"""report.html of a folder: which kind of folder it is, what its files hold, and the page written.

The files are read here (the edge); ``html_report.build_html`` makes the page from what they hold; the
page is written atomically (``output/atomic.py``). The report is derived from the stored results, never
a result itself: writing it again replaces only report.html.

Kinds, by the files that mark them: ``fit.json`` a fit; ``spread.json`` or a manifest of kind "spread"
a tolerance run; ``sweep.h5`` or a manifest of kind "sweep" a sweep; ``size.json`` a sizing;
``summary.json`` with ``result.h5`` a run (``rerun`` folders too).
"""
from __future__ import annotations

import json
import os
import sys
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from ampmodel._version import __version__
from ampmodel.output.atomic import write_text
from ampmodel.studies.html_report import ReportData, build_html

REPORT = "report.html"


class NotAResultFolder(Exception):
    """A folder that holds no run, sweep, tolerance run, sizing or fit (or does not exist)."""


def _json(path: Path) -> Any:
    with open(path, encoding="utf-8") as fh:
        return json.load(fh)


def folder_kind(folder: str | os.PathLike) -> str:
    """The kind of result folder ``folder`` is: "run", "sweep", "spread", "size" or "fit".

    Raises
    ------
    NotAResultFolder : it is missing, not a folder, or none of these
    """
    d = Path(folder)
    if not d.is_dir():
        raise NotAResultFolder(f"{d}: no such folder; give the folder a run, sweep, spread, size --out or fit wrote "
                               f"(e.g. runs/NAME)")
    manifest = None
    if (d / "manifest.json").is_file():
        try:
            manifest = _json(d / "manifest.json").get("kind")
        except (OSError, ValueError, AttributeError):
            manifest = None
    if (d / "fit.json").is_file():
        return "fit"
    if (d / "spread.json").is_file() or (manifest == "spread" and (d / "samples.h5").is_file()):
        return "spread"
    if (d / "sweep.h5").is_file() or (manifest == "sweep" and (d / "sweep.h5").is_file()):
        return "sweep"
    if (d / "size.json").is_file():
        return "size"
    if (d / "summary.json").is_file() and (d / "result.h5").is_file():
        return "run"
    raise NotAResultFolder(f"{d}: not a result folder: it holds none of summary.json with result.h5 (a run), "
                           f"sweep.h5 (a sweep), spread.json (a tolerance run), size.json (a sizing) or fit.json "
                           f"(a fit); give the folder one of these commands wrote")


def _text(value: Any) -> str:
    return value.decode() if isinstance(value, bytes) else str(value)


def _h5_attrs(path: Path) -> dict[str, Any]:
    import h5py
    with h5py.File(path, "r") as f:
        return {k: (_text(v) if isinstance(v, (bytes, str)) else v) for k, v in f.attrs.items()}


def _materials(result_file: Path) -> dict[str, Any]:
    from ampmodel.output.hdf5 import read_provenance
    try:
        return dict(read_provenance(result_file).get("materials") or {})
    except (OSError, ValueError, KeyError):
        return {}


def _files(d: Path) -> list[tuple[str, int]]:
    """Every file of the folder (hidden ones and report.html left out), by path."""
    out = []
    for root, dirs, names in os.walk(d):
        dirs[:] = sorted(x for x in dirs if not x.startswith("."))
        for name in sorted(names):
            p = Path(root) / name
            rel = p.relative_to(d).as_posix()
            if name.startswith(".") or rel == REPORT:
                continue
            out.append((rel, p.stat().st_size))
    return sorted(out)


# The figures of a run in the order a run writes them (plots/run.py), names (stems) or prefixes ending in
# "_"; a study's overview first; anything else after them, by name.
FIGURE_ORDER = ("overview", "fluence_maps", "intensity_maps", "energy_per_step", "power_per_step", "pulse_power",
                "gain_", "heat_", "fibre_", "b_integral", "beam_steps", "beam_size", "round_trips", "train",
                "spectrum")


def _figure_rank(name: str) -> tuple[int, str]:
    stem = name.removesuffix(".png")
    for k, head in enumerate(FIGURE_ORDER):
        if stem == head or (head.endswith("_") and stem.startswith(head)):
            return k, name
    return len(FIGURE_ORDER), name


def _figures(d: Path) -> tuple[list[tuple[str, bytes]], bool]:
    plots = d / "plots"
    if not plots.is_dir():
        return [], False
    pngs = sorted(plots.glob("*.png"), key=lambda p: _figure_rank(p.name))
    return [(p.name, p.read_bytes()) for p in pngs if not p.name.startswith(".")], True


def _stamp(path: Path) -> str:
    return datetime.fromtimestamp(path.stat().st_mtime, timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _run_data(d: Path, kind: str) -> ReportData:
    summary = _json(d / "summary.json") if (d / "summary.json").is_file() else None
    attrs = _h5_attrs(d / "result.h5") if (d / "result.h5").is_file() else {}
    size = _json(d / "size.json") if kind == "size" else None
    title = (summary or {}).get("title") or attrs.get("title", "")
    return ReportData(kind=kind, title=title, created=attrs.get("created_utc", ""),
                      version=attrs.get("software_version", ""), summary=summary, config_text=attrs.get("config", ""),
                      materials=_materials(d / "result.h5") if attrs else {}, size=size)


def _points_data(d: Path, kind: str) -> ReportData:
    import h5py

    from ampmodel.studies.store import read_point, read_table
    table_file = d / ("samples.h5" if kind == "spread" else "sweep.h5")
    attrs = _h5_attrs(table_file)
    columns = read_table(table_file)
    with h5py.File(table_file, "r") as f:
        linked = set(f["points"]) if "points" in f else set()
    paths = json.loads(attrs.get("paths", "[]"))
    n = len(columns["index"])
    done = [f"{i:04d}" in linked for i in range(n)]
    summaries = []
    for i in range(n):
        found = read_point(d / "points" / f"{i:04d}.h5") if done[i] else None
        summaries.append(found["summary"] if found else None)
    first = next((d / "points" / f"{i:04d}.h5" for i in range(n) if summaries[i] is not None), None)
    title = next((s.get("title") for s in summaries if s and s.get("title")), "")
    spread = _json(d / "spread.json") if kind == "spread" and (d / "spread.json").is_file() else None
    if spread and spread.get("title"):
        title = spread["title"]
    return ReportData(kind=kind, title=title or _config_title(attrs.get("config", "")),
                      created=attrs.get("created_utc", ""), version=attrs.get("software_version", ""),
                      config_text=attrs.get("config", ""), materials=_materials(first) if first else {},
                      paths=paths, table={k: list(v) for k, v in columns.items()}, done=done,
                      point_summaries=summaries, spread=spread)


def _config_title(text: str) -> str:
    from ampmodel.config.checks import Problems
    from ampmodel.config.text import parse_toml
    parsed = parse_toml(text, Problems("config")) if text else None
    return str(parsed.get("title", "")) if isinstance(parsed, dict) else ""


def _fit_data(d: Path) -> ReportData:
    fit = _json(d / "fit.json")
    return ReportData(kind="fit", title=_config_title(fit.get("config", "")) or "fit", created=_stamp(d / "fit.json"),
                      config_text=fit.get("config", ""), fit=fit)


def read_folder(folder: str | os.PathLike) -> ReportData:
    """What the report of ``folder`` shows, read from its files (NotAResultFolder: not a result folder)."""
    d = Path(folder)
    kind = folder_kind(d)
    if kind in ("run", "size"):
        data = _run_data(d, kind)
    elif kind in ("sweep", "spread"):
        data = _points_data(d, kind)
    else:
        data = _fit_data(d)
    data.figures, data.plots_folder = _figures(d)
    data.files = _files(d)
    return data


def now_utc() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def report_text(folder: str | os.PathLike) -> str:
    """The report page of ``folder`` (read, then built; nothing written)."""
    return build_html(read_folder(folder), now_utc(), __version__)


def write_report(folder: str | os.PathLike, out: str | os.PathLike | None = None) -> Path:
    """Write the report of ``folder`` to ``out`` (default ``folder/report.html``, replaced when it
    exists: it is derived from the results), atomically; return its path."""
    target = Path(out) if out is not None else Path(folder) / REPORT
    write_text(target, report_text(folder))
    return target


def write_report_keeping_results(folder: str | os.PathLike) -> bool:
    """Write ``folder/report.html`` at the end of a command; return whether it was written.

    The report is derived: a page that cannot be built (a fault of ampmodel) must not cost the results
    it describes. Such a fault is said on stderr, with the command that builds the page again, and the
    command goes on; an output that cannot be written (a full disk, no permission) is raised as for
    any other file of the folder."""
    from ampmodel.output.atomic import is_write_error
    try:
        write_report(folder)
        return True
    except Exception as exc:  # noqa: BLE001 - any fault of the page; the results stay
        if is_write_error(exc):
            raise
        print(f"ampmodel: internal error while building report.html ({type(exc).__name__}: {exc}); the results "
              f"are kept (please report it with the folder); `ampmodel report DIR` builds the page again",
              file=sys.stderr)
        return False


def rebuild(folder: str | os.PathLike, out: str | os.PathLike | None = None) -> Path:
    """``ampmodel report DIR [--out FILE]``: write the report of ``folder`` again; return its path.

    Only report.html is replaced (or ``out`` written, which must not exist yet).

    Raises
    ------
    ConfigError : ``folder`` is not a result folder, or ``out`` exists or lies in no folder; nothing
        is written then
    """
    from ampmodel.config.checks import ConfigError
    problems = []
    try:
        folder_kind(folder)
    except NotAResultFolder as exc:
        problems.append(f"ampmodel report: {exc}")
    if out is not None:
        target = Path(out)
        if os.path.lexists(target):
            problems.append(f"--out {target}: exists; the report never overwrites a file: give a new file name, or "
                            f"leave --out out to replace {Path(folder) / REPORT}")
        elif not target.parent.is_dir():
            problems.append(f"--out {target}: the folder {target.parent} does not exist: create it or give another "
                            f"path")
    if problems:
        raise ConfigError(problems)
    return write_report(folder, out)
