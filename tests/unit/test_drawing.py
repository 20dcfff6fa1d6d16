"""Figures drawn in forked workers (plots/drawing.py): the same files as one after another, byte for
byte; a failed worker's figures drawn again by the parent; an error that is real still raised; serial
drawing where forking is not safe."""
from __future__ import annotations

import os
import threading
from pathlib import Path

import pytest

from ampmodel.plots import common
from ampmodel.plots.common import new_figure, save_png
from ampmodel.plots.drawing import FigureJob, can_fork, draw_all

FORK = pytest.mark.skipif(not can_fork(), reason="forked drawing needs Linux and a single-threaded process")


def _line_figure(path: Path, k: int) -> Path:
    fig = new_figure(4.0, 3.0)
    ax = fig.add_subplot(1, 1, 1)
    ax.plot([0, 1, 2], [k, k * k, 1 + k])
    ax.set_title(f"figure {k}")
    return save_png(fig, path)


def _jobs(folder: Path, n: int = 6) -> list[FigureJob]:
    folder.mkdir(parents=True, exist_ok=True)
    return [FigureJob(folder / f"f{k}.png", lambda k=k: _line_figure(folder / f"f{k}.png", k), 1.0 + k % 3)
            for k in range(n)]


@FORK
def test_workers_write_the_same_files_as_one_process(tmp_path):
    serial = draw_all(_jobs(tmp_path / "one"), workers=1)
    parallel = draw_all(_jobs(tmp_path / "two"), workers=2)
    assert [p.name for p in serial] == [p.name for p in parallel] == [f"f{k}.png" for k in range(6)]
    for a, b in zip(serial, parallel, strict=True):
        assert a.read_bytes() == b.read_bytes()
    assert not [p for p in (tmp_path / "two").iterdir() if p.suffix == ".part"]


@FORK
def test_a_failed_worker_leaves_its_figures_to_the_parent(tmp_path):
    parent = os.getpid()

    def flaky(k: int) -> Path:
        if os.getpid() != parent:
            raise RuntimeError("only in a worker")
        return _line_figure(tmp_path / f"g{k}.png", k)

    jobs = [FigureJob(tmp_path / f"g{k}.png", lambda k=k: flaky(k)) for k in range(5)]
    paths = draw_all(jobs, workers=2)
    assert all(p.exists() for p in paths) and len(paths) == 5


@FORK
def test_an_error_in_every_process_is_raised_here(tmp_path):
    def broken() -> Path:
        raise ValueError("this figure cannot be drawn")

    jobs = _jobs(tmp_path) + [FigureJob(tmp_path / "bad.png", broken)]
    with pytest.raises(ValueError, match="cannot be drawn"):
        draw_all(jobs, workers=2)


def test_a_second_thread_makes_the_drawing_serial(tmp_path):
    stop = threading.Event()
    t = threading.Thread(target=stop.wait)
    t.start()
    try:
        assert not can_fork()
        seen = []
        jobs = [FigureJob(tmp_path / f"h{k}.png", lambda k=k: seen.append((k, os.getpid())) or tmp_path)
                for k in range(4)]
        draw_all(jobs, workers=2)
        assert seen == [(k, os.getpid()) for k in range(4)]       # in order, in this process
    finally:
        stop.set()
        t.join()


def test_writing_as_before_uses_level_6_and_clears(tmp_path):
    figs = []

    def job() -> Path:
        fig = new_figure(3.0, 2.0)
        fig.add_subplot(1, 1, 1).plot([0, 1], [1, 0])
        figs.append(fig)
        return save_png(fig, tmp_path / "a.png")

    draw_all([FigureJob(tmp_path / "a.png", job)], workers=1, writing=common.AS_BEFORE)
    assert not figs[0].axes                                      # cleared after writing
    assert common.png_writing.get() == common.AS_NOW             # the context is restored
    draw_all([FigureJob(tmp_path / "a.png", job)], workers=1)
    assert figs[1].axes



@FORK
def test_an_interrupted_drawing_leaves_no_partial_files(tmp_path):
    import time
    parent = os.getpid()

    def job(k: int) -> Path:
        if os.getpid() == parent:                    # Ctrl-C here while a worker is writing
            time.sleep(0.5)
            raise KeyboardInterrupt
        part = tmp_path / f".f{k}.png.x{k}.part"     # as a worker killed while writing leaves it
        part.write_bytes(b"partial")
        time.sleep(30)
        return part

    jobs = [FigureJob(tmp_path / f"f{k}.png", lambda k=k: job(k)) for k in range(2)]
    with pytest.raises(KeyboardInterrupt):
        draw_all(jobs, workers=2)
    assert not list(tmp_path.iterdir())
