"""The points of a study: the value sets of a [sweep] table, one config per point, and what a worker
runs for a point (it writes the point's file, atomically, and reports its outcome as plain data);
the first point, run by the parent to check the figures a table names before the folder is touched.

Order of the points: ``combine = "grid"`` takes every combination with the *last* path of the
table varying fastest (nested loops in the order the paths are written); ``combine = "zip"`` takes
the lists side by side (point i has the i-th value of each list).
"""
from __future__ import annotations

import copy
import dataclasses
import itertools
import json
import os
import signal
import sys
import time
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.config.schema import SWEEP_OWN
from ampmodel.config.text import resolve_path, tomllib
from ampmodel.description import Config
from ampmodel.output.atomic import describe_write_error, is_write_error
from ampmodel.studies import store
from ampmodel.studies.backends import where


def sweep_points(table: Mapping[str, Any]) -> tuple[list[str], list[dict[str, Any]]]:
    """The swept paths and the points of a (validated) [sweep] table.

    Returns
    -------
    paths : list of str, in the order of the table
    points : list of {path: value}; "grid": every combination, the last path varying fastest;
        "zip": the i-th value of every list
    """
    paths = [k for k in table if k not in SWEEP_OWN]
    lists = [list(table[p]) for p in paths]
    # "zip": the config check made the lists equally long
    combos = zip(*lists, strict=True) if table.get("combine", "grid") == "zip" else itertools.product(*lists)
    return paths, [dict(zip(paths, c, strict=True)) for c in combos]


def own_sweep_paths(config: str | os.PathLike | Mapping | Config) -> list[str]:
    """The value paths of the config's own [sweep] table, as written (those that --vary replaces)."""
    if isinstance(config, Config):
        raw: Any = config.raw
    elif isinstance(config, Mapping):
        raw = config
    else:
        try:
            raw = tomllib.loads(Path(config).read_text(encoding="utf-8-sig"))
        except (OSError, ValueError):
            return []
    table = raw.get("sweep")
    return [k for k in table if k not in SWEEP_OWN] if isinstance(table, Mapping) else []


def vary_record(table: Mapping[str, Any]) -> dict[str, Any]:
    """What a sweep folder's manifest records of a sweep given by --vary: the paths with their values
    and ``combine`` (compared on a resume), and the options as text (for messages)."""
    paths = {k: v for k, v in table.items() if k not in SWEEP_OWN}
    combine = table.get("combine", "grid")
    options = " ".join(f"--vary {k}={','.join(json.dumps(x, default=str) for x in v)}" for k, v in paths.items())
    return {"paths": paths, "combine": combine, "options": f"{options} --combine {combine}"}


def point_raw(raw: Mapping[str, Any], values: Mapping[str, Any], title: str) -> dict:
    """The config dict of one point: ``raw`` without [sweep] and [spread], with ``values`` set."""
    out = copy.deepcopy({k: v for k, v in raw.items() if k not in store.NOT_HASHED})
    for path, value in values.items():
        container, key = resolve_path(out, path)
        container[key] = copy.deepcopy(value)
    out.setdefault("title", title)
    return out


def describe(values: Mapping[str, Any]) -> str:
    """"seed.energy_J = 0.01, medium.rod.small_signal_gain = 4.0"."""
    from ampmodel.config.checks import show
    return ", ".join(f"{p} = {show(v, 30)}" for p, v in values.items())


@dataclass(frozen=True)
class PointTask:
    """What a worker needs for one point (plain data: pickled to loky or dask workers)."""

    index: int
    raw: dict
    text: str
    source: str
    path: str
    attrs: dict
    parent_pid: int = 0       # the process that started the sweep (0: do not check)


@dataclass
class PointOutcome:
    """What a worker sends back: the summary, or the error of a point that failed."""

    index: int
    summary: dict | None
    seconds: float
    error: str | None = None
    where: str = ""
    write_error: bool = False     # the point file could not be written (full disk, no permission)
    result: Any = None            # the Result itself, when asked for (a point the parent runs itself)


def _leave_interrupts_to_the_parent() -> None:
    """In a local worker: ignore SIGINT. Ctrl-C in a terminal reaches the whole process group; the
    parent stops the sweep and ends its workers, and a worker interrupted on its own could print a
    stray traceback (an interrupt that lands in a clean-up callback) over the parent's message."""
    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:        # not the worker's main thread: nothing to change
        pass


def run_point(task: PointTask, write: bool = True) -> PointOutcome:
    """Run one point and write its file (``points/NNNN.h5``: result.h5's content, its summary, and
    root attributes ``sweep_index``, ``sweep_values``, ``sweep_config_hash``), atomically.

    Runs in a worker process; never raises: a failure comes back as ``PointOutcome.error``. A local
    worker whose parent is gone (the sweep was killed outright) leaves instead of computing the
    points still queued for nobody. ``write`` False (the parent, checking the first point before
    the folder is touched): no file; the Result comes back in ``PointOutcome.result`` for
    :func:`write_point`."""
    if task.parent_pid and os.getpid() != task.parent_pid:
        if os.getppid() != task.parent_pid:
            os._exit(0)
        _leave_interrupts_to_the_parent()
    start = time.perf_counter()
    try:
        from ampmodel.simulation import simulate
        config = dataclasses.replace(load_config(task.raw), text=task.text, source=task.source)
        result = simulate(config, progress=False)
        if write:
            write_point(task, result)
        return PointOutcome(task.index, result.summary, time.perf_counter() - start, None, where(),
                            result=None if write else result)
    except Exception as exc:   # noqa: BLE001 - reported by the parent, point by point
        if is_write_error(exc):                   # the folder or the disk, not the point: the parent stops
            return PointOutcome(task.index, None, time.perf_counter() - start,
                                describe_write_error(exc, task.path), where(), write_error=True)
        if isinstance(exc, ConfigError):          # e.g. a cw iteration that does not converge here
            error = "; ".join(line.replace("<dict>: ", f"{task.source}: ", 1) for line in exc.problems)
        else:                                     # an internal failure: keep the traceback for a report
            detail = "".join(traceback.format_exception_only(type(exc), exc)).strip()
            error = f"{detail}\n{traceback.format_exc()}"
        return PointOutcome(task.index, None, time.perf_counter() - start, error, where())


def write_point(task: PointTask, result: Any) -> None:
    """Write a point's file from its Result, atomically."""
    from ampmodel.output.hdf5 import write_hdf5
    write_hdf5(result, Path(task.path), attrs=task.attrs, full_beam=False)   # no /output/fluence (README)


def point_tasks(kind: str, base: Config, raws: list[dict], texts: list[str], values: Sequence[Mapping[str, Any]],
                todo: list[int], out: Path, hash_: str, backend: str) -> list[PointTask]:
    """What the workers get for the points ``todo``: each point's config and the file to write."""
    # absolute paths: workers on other machines have working directories of their own
    return [PointTask(i, raws[i], texts[i], base.source, str(store.point_path(out.absolute(), i)),
                      store.point_attrs(kind, i, values[i], hash_),
                      parent_pid=os.getpid() if backend == "loky" else 0) for i in todo]


def first_point(check: Callable[[Mapping[str, Any], str], None], kind: str, base: Config, raws: list[dict],
                texts: list[str], values: Sequence[Mapping[str, Any]], out: Path, hash_: str,
                progress: bool) -> tuple[PointTask, PointOutcome] | None:
    """Check the figures the table names on one summary before the folder is touched (ConfigError).

    The first point already done in the folder serves. When there is none, or its summary lacks a
    figure and points are left to compute (a point file of an earlier version, whose summary had
    fewer figures), the first point still to do runs here and its outcome is returned, to be kept
    (:func:`keep_first`). A point that fails there is kept as failed, and the check left out."""
    label = "sample" if kind == "spread" else "point"
    done = store.done_summaries(out, values, hash_)
    if done:
        first = min(done)
        try:
            check(done[first], f"{label} {store.point_name(first)}")
            return None
        except ConfigError:
            if len(done) == len(values):
                raise
    index = next(i for i in range(len(values)) if i not in done)
    if progress:
        print(f"{kind}: {label} {store.point_name(index)} first, to check the figures the table names",
              file=sys.stderr, flush=True)
    task = point_tasks(kind, base, raws, texts, values, [index], out, hash_, "dask")[0]
    outcome = run_point(task, write=False)
    if outcome.error is None:
        check(outcome.summary, f"{label} {store.point_name(index)} ({describe(values[index])})")
    return task, outcome


def keep_first(early: tuple[PointTask, PointOutcome] | None, todo: list[int], summaries: list, failed: dict,
               seconds: dict) -> list[int]:
    """The point :func:`first_point` ran, when it is still to do: its file written from its result (or
    its failure recorded). Returns the points still to compute."""
    if early is None or early[0].index not in todo:
        return list(todo)
    task, outcome = early
    seconds[task.index] = outcome.seconds
    if outcome.error is not None:
        failed[task.index] = outcome.error
    else:
        write_point(task, outcome.result)
        outcome.result = None
        summaries[task.index] = outcome.summary
    return [i for i in todo if i != task.index]
