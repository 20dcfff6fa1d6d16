"""The spectrum of a chirped pulse: the seed and the output, in absolute units (J/nm) and each
normalised to its peak, so that gain narrowing and gain pulling show at a glance."""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ampmodel.plots.common import (
    ENERGY_UNITS,
    OUTPUT_COLOUR,
    SEED_COLOUR,
    finite_max,
    new_figure,
    save_png,
    title_suffix,
    unit_prefix,
)
from ampmodel.plots.placement import legend_above

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def has_spectrum(result: Result) -> bool:
    return getattr(result, "seed_spectrum_J_m", None) is not None and bool(result.steps)


def plot_spectra(result: Result, path: Path) -> Path:
    """The seed's spectrum and the output's (after the last step): absolute (energy per nm, one scale
    for both, the output's on a second axis when they differ by more than 20 times) and normalised,
    with the centres and widths of the summary in the legend.

    Parameters
    ----------
    result : a run with a chirped seed (``seed_spectrum_J_m``; each step's ``spectrum`` dataset)
    path : PNG file to write
    """
    nm = np.asarray(result.wavelength_m, dtype=float) * 1e9
    seed = np.asarray(result.seed_spectrum_J_m, dtype=float) * 1e-9          # J/nm
    out = np.asarray(result.steps[-1].datasets["spectrum"][0], dtype=float) * 1e-9
    order = np.argsort(nm)
    nm, seed, out = nm[order], seed[order], out[order]
    summary = result.summary or {}
    fig = new_figure(8.0, 7.0)
    ax, ax_n = fig.subplots(2, 1, sharex=True)
    f_out, u_out = unit_prefix(finite_max(out), ENERGY_UNITS)
    f_seed, u_seed = unit_prefix(finite_max(seed), ENERGY_UNITS)
    seed_label = f"seed ({result.config.seed.bandwidth_m * 1e9:.3g} nm FWHM)" if result.config.seed.bandwidth_m else "seed"
    out_label = (f"output ({summary.get('output_bandwidth_nm', float('nan')):.3g} nm FWHM, centre "
                 f"{summary.get('output_centre_nm') or float('nan'):.5g} nm)")
    ax.plot(nm, out / f_out, color=OUTPUT_COLOUR, label=out_label)
    ax.set_ylabel(f"output ({u_out}/nm)")
    twin = ax.twinx()
    twin.plot(nm, seed / f_seed, color=SEED_COLOUR, label=seed_label)
    twin.set_ylabel(f"seed ({u_seed}/nm)", color=SEED_COLOUR)
    twin.tick_params(axis="y", colors=SEED_COLOUR)
    for a in (ax, twin):
        a.set_ylim(bottom=0.0)
    legend_above(ax, "Spectral energy density", handles=ax.get_lines() + twin.get_lines())
    ax.grid(alpha=0.3)
    for values, colour, label in ((seed, SEED_COLOUR, "seed"), (out, OUTPUT_COLOUR, "output")):
        peak = finite_max(values)
        if peak > 0:
            ax_n.plot(nm, values / peak, color=colour, label=label)
    measured = getattr(result.config.seed, "spectrum_trace", None)
    if measured is not None:         # the measured spectrum the seed was mapped onto, as read
        ax_n.plot(np.asarray(measured[0]) * 1e9, np.asarray(measured[1]), color="0.3", linestyle="--",
                  linewidth=0.8, label="measured (file)")
    ax_n.axhline(0.5, color="0.6", linestyle=":", linewidth=0.8)
    ax_n.set_ylim(0.0, 1.05)
    ax_n.set_ylabel("normalised to its peak")
    ax_n.set_xlabel("wavelength (nm)")
    legend_above(ax_n, "Shape (gain narrowing and pulling); dotted: half maximum")
    ax_n.grid(alpha=0.3)
    fig.suptitle("Spectrum of the chirped pulse" + title_suffix(result))
    return save_png(fig, path)
