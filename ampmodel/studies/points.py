"""The points of a study: the value sets of a [sweep] table, one config per point, and what a worker
runs for a point (it writes the point's file, atomically, and reports its outcome as plain data).

Order of the points: ``combine = "grid"`` takes every combination with the *last* path of the
table varying fastest (nested loops in the order the paths are written); ``combine = "zip"`` takes
the lists side by side (point i has the i-th value of each list).
"""
from __future__ import annotations

import copy
import dataclasses
import itertools
import os
import signal
import time
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from ampmodel.config.checks import ConfigError
from ampmodel.config.load import load_config
from ampmodel.config.text import resolve_path
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
    paths = [k for k in table if k != "combine"]
    lists = [list(table[p]) for p in paths]
    # "zip": the config check made the lists equally long
    combos = zip(*lists, strict=True) if table.get("combine", "grid") == "zip" else itertools.product(*lists)
    return paths, [dict(zip(paths, c, strict=True)) for c in combos]


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


def _leave_interrupts_to_the_parent() -> None:
    """In a local worker: ignore SIGINT. Ctrl-C in a terminal reaches the whole process group; the
    parent stops the sweep and ends its workers, and a worker interrupted on its own could print a
    stray traceback (an interrupt that lands in a clean-up callback) over the parent's message."""
    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:        # not the worker's main thread: nothing to change
        pass


def run_point(task: PointTask) -> PointOutcome:
    """Run one point and write its file (``points/NNNN.h5``: result.h5's content, its summary, and
    root attributes ``sweep_index``, ``sweep_values``, ``sweep_config_hash``), atomically.

    Runs in a worker process; never raises: a failure comes back as ``PointOutcome.error``. A local
    worker whose parent is gone (the sweep was killed outright) leaves instead of computing the
    points still queued for nobody."""
    if task.parent_pid and os.getpid() != task.parent_pid:
        if os.getppid() != task.parent_pid:
            os._exit(0)
        _leave_interrupts_to_the_parent()
    start = time.perf_counter()
    try:
        from ampmodel.output.hdf5 import write_hdf5
        from ampmodel.simulation import simulate
        config = dataclasses.replace(load_config(task.raw), text=task.text, source=task.source)
        result = simulate(config, progress=False)
        write_hdf5(result, Path(task.path), attrs=task.attrs)
        return PointOutcome(task.index, result.summary, time.perf_counter() - start, None, where())
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
