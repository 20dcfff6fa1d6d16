"""Figures of a run: fluence maps, energy per step, pulse power, gain cuts, B-integral.

Each figure is a :class:`matplotlib.figure.Figure` drawn on its own Agg canvas (no pyplot, no global
state, no display needed) and written as a PNG, atomically, into the plot folder of a run.

Arrays in a :class:`~ampmodel.output.result.Result` are SI; the figures show them in the units a laser
engineer reads: mm across the beam and along the medium, J/cm² for fluence, 1/cm for the gain
coefficient, and time, power and energy in the prefix that suits their size (ps/ns/µs, W/kW/MW/GW,
µJ/mJ/J). In a cw run the transverse maps hold intensity (W/m², shown in W/cm²), the step figure
shows power, and there is no pulse figure.
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.beam import has_beam_figures, plot_beam_size, plot_beam_steps
from ampmodel.plots.common import (
    finite_max,
    is_cw,
    safe_name,
)
from ampmodel.plots.cw import plot_cw_gain
from ampmodel.plots.drawing import LIGHT, MAPS, PANELS, FigureJob, draw_all
from ampmodel.plots.fibre import fibre_jobs
from ampmodel.plots.gain import plot_medium_gain
from ampmodel.plots.layout import b_integrals, plot_b_integral, plot_energy_per_step, plot_pulse_power
from ampmodel.plots.maps import plot_fluence_maps
from ampmodel.plots.spectra import has_spectrum, plot_spectra
from ampmodel.plots.thermal import has_heat, plot_heat
from ampmodel.plots.trains import plot_round_trips, plot_train

if TYPE_CHECKING:
    from ampmodel.output.result import Result


# ----------------------------------------------------------------------------------------------


def make_plots(result: Result, directory: Path, workers: int | None = None) -> list[Path]:
    """Write the figures of a run as PNG files into ``directory`` (created if needed), drawn by
    ``workers`` processes at once (drawing.py).

    Files: ``fluence_maps.png``, ``energy_per_step.png``, ``pulse_power.png`` (pulsed runs),
    ``gain_<medium>.png`` for each medium, ``b_integral.png`` when any step has a non-zero
    B-integral, ``beam_steps.png`` and ``beam_size.png`` when the summary holds the beam figures
    (``beam.py``), ``round_trips.png`` for a repeat step (``round_trips_step<N>.png`` when
    there are several), ``train.png`` for a pulse train (``trains.py``) and ``spectrum.png`` for a
    chirped seed (``spectra.py``). A cw run writes
    ``intensity_maps.png``, ``power_per_step.png`` and ``gain_<medium>.png`` (the steady-state gain
    along z and the intensity of each pass; cw.py) and, for a pumped medium (cw, or a pulse train),
    ``heat_<medium>.png`` (heat density and temperature; thermal.py).
    A layout of fibres writes the maps (``intensity_maps.png`` and ``power_per_step.png``
    in cw) and the pulse, then per fibre ``fibre_<name>_powers.png``, ``gain_<name>.png`` (gain and
    inversion along it) and ``fibre_<name>_ase.png`` (fibre.py).

    Parameters
    ----------
    result : the run (all arrays SI: m, s, J/m², W, 1/m, rad)
    directory : folder for the PNG files
    workers : processes that draw the figures (default: the cores this process may use; 1: one after
        another in this process; ``drawing.py``)

    Returns
    -------
    list of Path : the files written, in the order above
    """
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    return draw_all(figure_jobs(result, out), workers)


def figure_jobs(result: Result, out: Path) -> list[FigureJob]:
    """The figures of a run as jobs (file, drawing function, expected cost), in the order of
    :func:`make_plots`; nothing is drawn yet."""
    cw = is_cw(result)

    def job(fn, path: Path, *args, weight: float = LIGHT) -> FigureJob:
        return FigureJob(path, lambda: fn(result, *args, path), weight)

    jobs = [job(plot_fluence_maps, out / ("intensity_maps.png" if cw else "fluence_maps.png"), weight=MAPS),
            job(plot_energy_per_step, out / ("power_per_step.png" if cw else "energy_per_step.png"))]
    if not cw and np.asarray(result.t_s).size:
        jobs.append(job(plot_pulse_power, out / "pulse_power.png"))
    if getattr(result, "fibres", None):
        return jobs + fibre_jobs(result, out)
    used: set[str] = set()
    for name in result.media:
        stem = safe_name(name)
        while stem in used:
            stem += "_"
        used.add(stem)
        jobs.append(job(plot_cw_gain if cw else plot_medium_gain, out / f"gain_{stem}.png", name, weight=PANELS))
        if has_heat(result, name):
            jobs.append(job(plot_heat, out / f"heat_{stem}.png", name, weight=PANELS))
    if not cw and result.steps and finite_max(b_integrals(result)[0]) > 0:
        jobs.append(job(plot_b_integral, out / "b_integral.png"))
    if result.steps and has_beam_figures(result):
        jobs.append(job(plot_beam_steps, out / "beam_steps.png", weight=PANELS))
        jobs.append(job(plot_beam_size, out / "beam_size.png"))
    repeats = [e for e in (result.summary or {}).get("steps", []) if isinstance(e, dict) and e.get("kind") == "repeat"]
    for entry in repeats:
        name = "round_trips.png" if len(repeats) == 1 else f"round_trips_step{entry.get('index')}.png"
        jobs.append(job(plot_round_trips, out / name, entry, weight=PANELS))
    if isinstance((result.summary or {}).get("train"), dict):
        jobs.append(job(plot_train, out / "train.png", weight=PANELS))
    if has_spectrum(result):
        jobs.append(job(plot_spectra, out / "spectrum.png", weight=PANELS))
    return jobs
