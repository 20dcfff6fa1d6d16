"""Repeat a run from what its result file recorded, and say whether the figures match.

``ampmodel rerun runs/X/result.h5`` (a sweep's ``points/NNNN.h5`` too) reads the config as run (the
root attribute ``config``), the material data the run used (``/provenance``: the built-in materials it
named and each medium's resolved material) and the data files it read, runs it again with this
version of ampmodel, and compares every figure of the new summary.json with the stored one.

Material data: the rerun uses the *stored* data, never the material files of today, so that it
answers one question: does this code reproduce that result? Where today's files (or today's
resolution of the config's material tables) differ from the stored data, the differences are listed
(``RerunReport.material_differences``); ``current_materials=True`` runs with today's files instead.
Data files (a spectrum file) are taken from the stored copies as well, and so is the seed of a
chained stage (``seed.from``: the beam it took, ``/seed/from``): the earlier result file is not needed.

Comparison: figure by figure, as :func:`ampmodel.output.summary.compare_summaries` does (relative
tolerance rtol, default 1e-9; round-off figures such as balance errors to an absolute rtol).
"""
from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ampmodel._version import __version__
from ampmodel.config.chain import SourceProblem, read_copy
from ampmodel.config.checks import ConfigError, Problems
from ampmodel.config.load import load_config
from ampmodel.config.measured import inline_stored_files
from ampmodel.config.text import parse_toml
from ampmodel.materials import registry
from ampmodel.materials.material import (
    material_differences,
    material_from_dict,
    material_to_dict,
    stored_material_problems,
)
from ampmodel.output.atomic import write_json
from ampmodel.output.hdf5 import read_provenance
from ampmodel.output.run_folder import claim, partial_folder
from ampmodel.output.summary import DEFAULT_RTOL, Difference, compare_summaries, plain
from ampmodel.studies.report_files import write_report_keeping_results


@dataclass
class RerunReport:
    """What a rerun found.

    original : the result file; out : the new run's folder; rtol : the tolerance used
    compared : number of figures compared; differences : those that do not match
    material_differences : medium or built-in material -> lines "key: stored -> now"
    used : "stored" or "current" material data; stored_version : the version that wrote the file
    notes : remarks (an older file without material data or completeness marker, ...)
    """

    original: Path
    out: Path | None
    rtol: float
    compared: int
    differences: list[Difference]
    material_differences: dict[str, list[str]]
    used: str
    stored_version: str
    notes: list[str] = field(default_factory=list)

    @property
    def matched(self) -> bool:
        return not self.differences

    def as_dict(self) -> dict[str, Any]:
        return {"original": str(self.original), "matched": self.matched, "rtol": self.rtol,
                "compared": self.compared, "differences": [d.text() for d in self.differences],
                "material_data": self.used, "material_differences": self.material_differences,
                "stored_version": self.stored_version, "version": __version__, "notes": self.notes}


# ----------------------------------------------------------------------------------------------
# Reading the result file and running again
# ----------------------------------------------------------------------------------------------

def _problem(path: Path, message: str) -> ConfigError:
    return ConfigError([f"{path}: {message}"])


def read_stored(path: Path) -> tuple[dict[str, Any], list[str]]:
    """The recorded config, summary and provenance of a result file, and notes about what it lacks.

    Raises
    ------
    ConfigError
        The file is missing, not HDF5, incomplete (no ``complete = True`` while it has other
        markers of this version) or not a result file (no config or summary).
    """
    if not path.is_file():
        raise _problem(path, "no such result file; give the result.h5 of a run (or a sweep's points/NNNN.h5)")
    try:
        stored = read_provenance(path)
    except Exception:   # noqa: BLE001 - h5py raises OSError and others for a file that is not HDF5
        raise _problem(path, "cannot be read as HDF5: not a result file, or a truncated one") from None
    notes = []
    if "config" not in stored or "summary" not in stored:
        raise _problem(path, "holds no config or summary: not a result file of ampmodel")
    _check_structure(path, stored)
    if stored.get("complete") is not True:
        if "materials" in stored:
            raise _problem(path, "is not complete (no attribute complete = True): it was cut short while "
                                 "written or copied; nothing to compare with")
        notes.append("the file predates the completeness marker and the recorded material data: the "
                     "current material files are used")
    return stored, notes


def _check_structure(path: Path, stored: dict[str, Any]) -> None:
    """The recorded entries a rerun uses, of the types this version writes (a damaged or crafted file
    is bad input, not a traceback); stored material data checked as a config's (ranges included)."""
    complete = stored.get("complete", False)
    if isinstance(complete, np.bool_):
        complete = bool(complete)
    if not isinstance(complete, bool):
        raise _problem(path, "its attribute complete is not true or false: a damaged file")
    stored["complete"] = complete
    if not isinstance(stored["config"], str):
        raise _problem(path, "its attribute config is not a text: a damaged file")
    for key in ("builtin_materials", "materials", "data_files"):
        value = stored.get(key)
        if value is not None and not isinstance(value, dict):
            raise _problem(path, f"/provenance/{key} is not a table: a damaged file")
    if any(not isinstance(v, str) for v in (stored.get("data_files") or {}).values()):
        raise _problem(path, "/provenance/data_files holds a file that is not text: a damaged file")
    for key in ("builtin_materials", "materials"):
        for name, data in (stored.get(key) or {}).items():
            problems = stored_material_problems(data)
            if problems:
                raise _problem(path, f"/provenance/{key}: the material data of {name} are not valid: "
                                     f"{'; '.join(problems[:3])}")


def _load_stored(path: Path, stored: Mapping[str, Any], current_materials: bool):
    """The Config of the stored run (material data and data files as recorded unless
    ``current_materials``)."""
    text = stored["config"]
    problems = Problems(str(path))
    raw = parse_toml(text, problems)
    if raw is None:
        raise _problem(path, f"the stored config is not valid TOML ({'; '.join(problems.lines)})")
    builtin = None
    if not current_materials and stored.get("builtin_materials"):
        builtin = {name: material_from_dict(d) for name, d in stored["builtin_materials"].items()}
    raw = inline_stored_files(raw, stored.get("data_files") or {})
    label = f"{path} (its stored config)"
    try:
        config = load_config(raw, builtin_materials=builtin, stored_seeds=_stored_seed(path, raw))
    except ConfigError as err:
        raise ConfigError([line.replace("<dict>: ", f"{label}: ", 1) for line in err.problems] +
                          [f"{label}: the stored config is not valid in ampmodel {__version__} (stored by "
                           f"{stored.get('software_version', '?')}); run that version, or edit the config"]) from None
    if not current_materials and stored.get("materials"):
        # each medium's material exactly as it was resolved then (a material table read by older code
        # may resolve differently now: the difference is reported, the stored data used)
        media = tuple(dataclasses.replace(m, material=material_from_dict(stored["materials"][m.name]))
                      if m.name in stored["materials"] else m for m in config.media)
        config = dataclasses.replace(config, media=media)
    return dataclasses.replace(config, text=text, source=str(stored.get("config_source", label)))


def _stored_seed(path: Path, raw: Mapping[str, Any]) -> dict[str, Any]:
    """A chained run's seed (seed.from) as its result file stored it: the earlier file is not read."""
    seed = raw.get("seed")
    if not isinstance(seed, dict) or not isinstance(seed.get("from"), str):
        return {}
    try:
        taken = read_copy(path)
    except (SourceProblem, OSError, ValueError, KeyError) as exc:
        raise _problem(path, f"the seed it took from {seed['from']} (/seed/from) cannot be read: {exc}") from None
    if taken is None:
        raise _problem(path, f"a chained run (seed.from = {seed['from']!r}) whose file holds no copy of that seed "
                             "(/seed/from): it cannot be run again from this file alone")
    return {seed["from"]: taken}


def _material_report(path: Path, stored: Mapping[str, Any]) -> dict[str, list[str]]:
    """Differences between the stored material data and what today's files and code give."""
    out: dict[str, list[str]] = {}
    recorded = stored.get("builtin_materials") or {}
    if recorded:
        for name, data in recorded.items():
            try:
                now = material_to_dict(registry.get(name))
            except KeyError:
                out[f"built-in {name}"] = ["no longer a built-in material"]
                continue
            lines = material_differences(data, now)
            if lines:
                out[f"built-in {name}"] = lines
    if stored.get("materials"):
        try:
            today = _load_stored(path, stored, current_materials=True)
        except ConfigError:
            return out
        for m in today.media:
            data = stored["materials"].get(m.name)
            if data is not None:
                lines = material_differences(data, material_to_dict(m.material))
                if lines:
                    out[f"medium {m.name}"] = lines
    return out


def default_out(path: Path) -> Path:
    """``runs/X-rerun`` beside ``runs/X/result.h5``; ``runs/S-NNNN-rerun`` for ``runs/S/points/NNNN.h5``."""
    folder = path.absolute().parent
    if folder.name == "points":
        return folder.parent.parent / f"{folder.parent.name}-{path.stem}-rerun"
    return folder.parent / f"{folder.name}-rerun"


def rerun(path: str | os.PathLike, out: str | os.PathLike | None = None, *, rtol: float = DEFAULT_RTOL,
          plots: bool = True, progress: bool | None = False, current_materials: bool = False,
          write: bool = True) -> tuple[RerunReport, Any]:
    """Run a stored result again and compare its figures.

    Parameters
    ----------
    path : a result.h5 (or a sweep's point file)
    out : the new run's folder (default :func:`default_out`; never overwritten: -2, -3, ... appended)
    rtol : relative tolerance of the comparison (module docstring)
    plots : write the new run's plots
    current_materials : use today's material files instead of the stored data
    write : write the new run (result.h5, summary.json, plots, rerun.json); False: compare only

    Returns
    -------
    (RerunReport, Result)

    Raises
    ------
    ConfigError : not a complete result file, or its config is not valid in this version
    OutputError : the new folder cannot be written
    """
    from ampmodel.simulation import simulate
    path = Path(path)
    stored, notes = read_stored(path)
    materials = _material_report(path, stored) if stored.get("materials") else {}
    if not stored.get("materials"):
        current_materials = True
        if bool(stored.get("complete", False)):
            notes.append("the file records no material data (written before it was recorded): the current "
                         "material files are used")
    config = _load_stored(path, stored, current_materials)
    report = RerunReport(original=path, out=None, rtol=rtol, compared=0, differences=[],
                         material_differences=materials, used="current" if current_materials else "stored",
                         stored_version=str(stored.get("software_version", "?")), notes=notes)
    if report.stored_version != __version__:
        notes.append(f"stored by ampmodel {report.stored_version}, run again with {__version__}")
    if not write:
        result = simulate(config, progress=progress)
        report.compared, report.differences = compare_summaries(stored["summary"], plain(result.summary), rtol)
        return report, result
    base = Path(out) if out is not None else default_out(path)
    with partial_folder(base) as tmp:
        result = simulate(config, progress=progress)
        report.compared, report.differences = compare_summaries(stored["summary"], plain(result.summary), rtol)
        result.save(tmp, plots=plots)
        write_json(report.as_dict(), tmp / "rerun.json")
        write_report_keeping_results(tmp)         # the new run's page (a run folder with its rerun.json)
        report.out = claim(tmp, base)
    return report, result
