"""Chunks of time slices worked on by a few threads: the field path's passes and propagations.

The field's time slices diffract independently of each other, but in a gain medium slice t meets a
z-slice after slice t − 1 has left it (Frantz–Nodvik depletes the gain in time order). A pass therefore
runs as a wavefront: chunk c (consecutive time slices) goes through the stages (a diffraction step, a
gain step, the next diffraction step, ...) in order, and a gain step of chunk c starts only after
chunk c − 1 has done the same gain step. Thread i takes chunks i, i + T, i + 2T, ... (T threads). Every
element sees the same operations in the same order whatever the number of threads, so the results do
not depend on it.

On two cores the two threads settle out of phase: one thread's gain step (many short numpy calls, which
hold the interpreter lock between them) runs while the other thread transforms (scipy.fft releases the
lock for the whole transform), so the gain steps do not compete for the lock as long as a gain step
takes less time than a diffraction step.
"""
from __future__ import annotations

import os
import threading
from concurrent.futures import ThreadPoolExecutor
from typing import Callable


def thread_count(workers: int) -> int:
    """Threads for a ``workers`` setting as scipy.fft reads it: n > 0 threads, −1 all cores, −2 all but
    one, and so on (at least one)."""
    cpus = os.cpu_count() or 1
    return max(1, workers if workers > 0 else cpus + 1 + workers)


def run_chunks(chunks: int, stages: int, work: Callable[[int, int, int], None], threads: int,
               ordered: bool | Callable[[int], bool] = True,
               after_stage: Callable[[int], None] | None = None) -> None:
    """Call ``work(thread, chunk, stage)`` for every chunk and stage, in ``threads`` threads.

    Each chunk's stages run in order in one thread (thread i takes chunks i, i + T, ...). An ordered
    stage s of chunk c also waits for stage s of chunk c − 1 (a wavefront); ``ordered`` says which
    stages are (True: all, False: none, or a function of the stage). ``after_stage(stage)`` is called
    after each, one call at a time. The first exception raised by ``work`` (or an interrupt of the
    caller) stops the other threads at their next stage and is raised here.
    """
    is_ordered = ordered if callable(ordered) else (lambda s: bool(ordered))
    threads = max(1, min(threads, chunks))
    if threads == 1:
        for c in range(chunks):
            for s in range(stages):
                work(0, c, s)
                if after_stage is not None:
                    after_stage(s)
        return
    done = [0] * chunks                     # stages completed per chunk
    failed: list[BaseException] = []
    cond = threading.Condition()

    def run(i: int) -> None:
        try:
            for c in range(i, chunks, threads):
                for s in range(stages):
                    wait = c > 0 and is_ordered(s)
                    with cond:
                        while wait and done[c - 1] <= s and not failed:
                            cond.wait()
                        if failed:
                            return
                    work(i, c, s)
                    with cond:
                        done[c] = s + 1
                        if after_stage is not None:
                            after_stage(s)
                        cond.notify_all()
        except BaseException as exc:        # noqa: BLE001 - handed to the caller below
            with cond:
                failed.append(exc)
                cond.notify_all()

    with ThreadPoolExecutor(max_workers=threads, thread_name_prefix="ampmodel-chunk") as pool:
        futures = [pool.submit(run, i) for i in range(threads)]
        try:
            for future in futures:
                future.result()
        except BaseException as exc:        # an interrupt here: the threads stop at their next stage
            with cond:
                failed.append(exc)
                cond.notify_all()
            raise
    if failed:
        raise failed[0]
