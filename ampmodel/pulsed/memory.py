"""The memory a pulsed run needs: its arrays counted before anything is allocated.

The estimate is checked against the measured peak resident memory in ``ampmodel bench`` (the
``memory_ratio`` figure); the dispatcher (:mod:`ampmodel.simulation`) refuses a run that would not
fit.
"""
from __future__ import annotations

import numpy as np

from ampmodel.description import Config
from ampmodel.pulsed.passes import block_pixels
from ampmodel.pulsed.trains import ANDERSON_DEPTH


def _lit_pixels(config: Config) -> int:
    """Upper bound of the pixels a pass computes: those inside the largest clear aperture."""
    points, width = config.grid.points, config.grid.width_m
    largest = 0.0
    for m in config.media:
        side = min(m.diameter_m / width, 1.0)
        largest = max(largest, side * side * (1.0 if m.aperture == "square" else np.pi / 4.0))
    return min(points * points, int(np.ceil(largest * points * points)) + 4 * points)


def required_array_bytes(config: Config) -> dict[str, int]:
    """Bytes of the arrays a pulsed run must hold at once (float64), by what they are for:

    beam : the fluence of every time slice, (Nt, Ny, Nx) (with diffraction the complex field)
    b_integral : the B-integral of every time slice, (Nt, Ny, Nx), when a medium has n2 (else its
        zero pages are never written and take no memory)
    gain : per medium the initial and the working (then final) gain, 2 x (Nz, Ny, Nx)
    records : per step the fluence and the B-integral map (2 x (Ny, Nx)) and the power (Nt)
    seed : the seed map
    """
    pixels = config.grid.points ** 2
    nt = config.grid.time_slices
    # a chained seed (seed.from) brings its B-integral: the beam's copy of it is written even without n2
    has_n2 = any(m.material.n2_m2_W for m in config.media) or config.seed.beam is not None
    return {"beam": (16 if config.grid.diffraction else 8) * nt * pixels,   # the field path: complex
            "b_integral": 8 * nt * pixels if has_n2 else 0,
            "gain": 8 * sum(2 * m.slices * pixels for m in config.media),
            "records": 8 * len(config.steps) * (2 * pixels + nt),
            "seed": 8 * pixels}


def memory_estimate_bytes(config: Config) -> int:
    """Peak bytes of a run's arrays (the interpreter and its modules not included).

    The larger of two phases: building the gain maps (the maps so far, and a pumped map's construction
    temporaries, up to four (Nz, Ny, Nx) arrays), and the run (:func:`required_array_bytes` plus the
    block of a pass, (3·Nt + 5·Nz + 10) rows of its pixels; passes.block_pixels). Checked against the
    measured peak resident memory of runs from 64² to 512² pixels (16 to 256 time slices, 10 to 80
    z-slices, pumped or not, with or without n2 and loss): 2 to 31 % above it, never below
    (docs/performance.md, memory). A repeat that stops at the peak keeps a copy of the beam and the gain
    maps, and a pulse train the fixed-point history. The fibre, cw and field (diffraction) paths have
    their own counts.
    """
    pixels = config.grid.points ** 2
    nt = config.grid.time_slices
    nz = max((m.slices for m in config.media), default=0)
    voxels = sum(m.slices * pixels for m in config.media)
    extra = 0                          # repeats stopped at the peak, pulse trains (float64 values)
    if any(s.kind == "repeat" and s.until is not None for s in config.steps):
        # the copy kept of the round trip before (a complex field counts twice)
        extra += (4 if config.grid.diffraction else 2) * nt * pixels + voxels
    if config.seed.repetition_rate_Hz is not None:      # the fixed-point history and working states
        extra += (2 * ANDERSON_DEPTH + 8) * voxels
    if config.grid.diffraction:
        # the field path holds a complex field, its transform and the gain step's temporaries besides
        return 8 * (12 * nt * pixels + 3 * voxels + 2 * len(config.steps) * pixels + extra)
    built, building = 0, 0                        # the gain maps are built before the beam
    for m in config.media:
        temporaries = 4 if m.pump is not None else 1
        building = max(building, built + 8 * (1 + temporaries) * m.slices * pixels)
        built += 8 * 2 * m.slices * pixels
    block = min(block_pixels(nt, nz), _lit_pixels(config))
    running = sum(required_array_bytes(config).values()) + 8 * block * (3 * nt + 5 * nz + 10) + 8 * extra
    return int(max(building, running))


