"""Drawing many figures at once: the figures of a run, a sweep or a tolerance run are independent, so
they are shared among forked worker processes, each drawing its part and writing its PNG files.

A figure is a :class:`FigureJob`: the file it writes and a function of no arguments that draws it and
writes the file (a closure over the Result or the summaries: a forked child sees the parent's memory,
nothing is pickled). :func:`draw_all` hands the jobs out heaviest first (``weight``) to the calling process
and its forked children, each taking the next when it has finished one. Jobs that a failed child did
not finish are drawn again by the parent, one after another, so an error surfaces in the parent with
its own traceback and message.

Forking is used only where it is safe and cheap: on Linux, from a process that runs a single thread
(a dask client, a progress-bar monitor or any other thread makes the drawing serial: a thread holding
a lock at the moment of the fork would leave it held in the child). Elsewhere, and for one worker, the
jobs run one after another in the calling process, in order.
"""
from __future__ import annotations

import glob
import os
import signal
import sys
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Sequence

from ampmodel.output.atomic import PART_SUFFIX
from ampmodel.plots import common

# Expected cost of a figure relative to a one-panel line plot (measured on the examples); only the
# balance between workers depends on it, never a result.
LIGHT, PANELS, MAPS = 1.0, 2.0, 3.0
PIPE_CAPACITY = 65536           # bytes a pipe holds on Linux: the job queue is written before any fork


@dataclass(frozen=True)
class FigureJob:
    """One figure: ``draw()`` builds it and writes ``path`` (a job may find nothing to draw and write
    no file: :func:`draw_all` lists its path all the same; the caller keeps the paths that exist)."""

    path: Path
    draw: Callable[[], Path]
    weight: float = LIGHT


def default_workers() -> int:
    """The cores this process may use (its CPU affinity where the platform tells it)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def can_fork() -> bool:
    """Whether figures may be drawn in forked children: Linux, and this process runs one thread."""
    return sys.platform.startswith("linux") and hasattr(os, "fork") and threading.active_count() == 1


def _take(queue: int) -> int | None:
    """The next job index from the queue pipe (4 bytes: a read of at most PIPE_BUF bytes is atomic, so
    two processes never take the same job), or None when it is empty."""
    data = os.read(queue, 4)
    return int.from_bytes(data, "little") if len(data) == 4 else None


def _work(jobs: Sequence[FigureJob], queue: int, finished: Callable[[int], object]) -> None:
    """Draw jobs taken from the queue until it is empty, calling ``finished`` with each one's index."""
    while (i := _take(queue)) is not None:
        jobs[i].draw()
        finished(i)


def _child(jobs: Sequence[FigureJob], queue: int, done: int) -> None:
    """Run in a forked child: draw from the queue and leave at once (no clean-up of the parent's state)."""
    code = 1
    try:
        signal.signal(signal.SIGINT, signal.SIG_DFL)
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        _work(jobs, queue, lambda i: os.write(done, i.to_bytes(4, "little")))
        code = 0
    except BaseException:     # noqa: BLE001 - the parent draws what was left and reports the error
        code = 1
    finally:
        os._exit(code)


def _remove_parts(jobs: Sequence[FigureJob]) -> None:
    """Remove the temporary files a child killed while writing left beside the jobs' files."""
    for job in jobs:
        for part in Path(job.path).parent.glob(f".{glob.escape(Path(job.path).name)}.*{PART_SUFFIX}"):
            part.unlink(missing_ok=True)


def draw_all(jobs: Sequence[FigureJob], workers: int | None = None,
             writing: common.PngWriting | None = None) -> list[Path]:
    """Draw every job; return the paths written, in the jobs' order.

    The job indices, heaviest first, go into a pipe that this process and its forked children read
    from, each taking the next job when it has finished one: the work balances itself. Each child
    reports the jobs it finished on a second pipe; whatever no process finished (a child that failed)
    is drawn here afterwards, one after another, so that an error is raised here with its traceback.

    Parameters
    ----------
    jobs : the figures
    workers : processes to share them among (default: the cores this process may use); 1 draws them
        one after another in this process
    writing : how the PNG files are written (default: common.PngWriting(): zlib level 1, not cleared)
    """
    if writing is not None:
        token = common.png_writing.set(writing)
        try:
            return draw_all(jobs, workers)
        finally:
            common.png_writing.reset(token)
    jobs = list(jobs)
    n = min(default_workers() if workers is None else max(1, int(workers)), len(jobs))
    if n <= 1 or not can_fork() or 4 * len(jobs) > PIPE_CAPACITY:
        for job in jobs:
            job.draw()
        return [job.path for job in jobs]
    queue, feed = os.pipe()
    done_r, done_w = os.pipe()
    for i in sorted(range(len(jobs)), key=lambda i: -jobs[i].weight):
        os.write(feed, i.to_bytes(4, "little"))
    os.close(feed)
    children: list[int] = []
    finished: set[int] = set()
    try:
        for _ in range(n - 1):
            pid = os.fork()
            if pid == 0:                    # pragma: no cover - runs in the child, which never returns
                os.close(done_r)
                _child(jobs, queue, done_w)
            children.append(pid)
        os.close(done_w)
        done_w = -1
        _work(jobs, queue, finished.add)    # this process's part
        for pid in children:
            os.waitpid(pid, 0)
        children = []
        while chunk := os.read(done_r, 4096):
            finished.update(int.from_bytes(chunk[k:k + 4], "little") for k in range(0, len(chunk), 4))
    except BaseException:
        for pid in children:                # Ctrl-C, or an error in this process's own part
            try:
                os.kill(pid, signal.SIGTERM)
                os.waitpid(pid, 0)
            except OSError:
                pass
        _remove_parts(jobs)
        raise
    finally:
        for fd in (queue, done_r, done_w):
            if fd >= 0:
                os.close(fd)
    for i in range(len(jobs)):
        if i not in finished:               # a child failed: its error shows here
            jobs[i].draw()
    return [job.path for job in jobs]
