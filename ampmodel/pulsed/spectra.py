"""The spectrum of a pulsed run: each time slice carries its wavelength (a stretched, linearly chirped
seed sweeps λ(t) = λ0 ± bandwidth·t/duration), so the energy of each slice after a step is the
spectrum there, in steps of Δλ = bandwidth·dt/duration. With a measured spectrum the chirp maps the
pulse's energy onto the spectrum's in order (kernels/beam_shapes.measured_spectrum_wavelengths): each
slice then has its own wavelength interval. A narrowband seed's spectrum is not resolved: its centre
is the seed's wavelength and its width the transform limit of its pulse shape.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from ampmodel.description import Config
from ampmodel.diagnostics import (
    spectral_centre_and_width,
    spectrum_J_m,
    transform_limit_bandwidth_m,
    transform_limit_duration_s,
)
from ampmodel.kernels import beam_shapes
from ampmodel.notices import warning
from ampmodel.output.result import StepRecord
from ampmodel.pulsed.passes import MediumState

# A share of the seed's energy above this outside a material's cross-section table is worth a warning.
OUTSIDE_WARNING = 0.01


def wavelength_step_m(config: Config, dt_s: float) -> float | np.ndarray:
    """Δλ between neighbouring time slices of a chirped seed (m); with a measured spectrum, (Nt,) the
    wavelength interval of each slice."""
    seed = config.seed
    if seed.spectrum_trace is not None:
        return _measured(config)[1]
    return seed.bandwidth_m * dt_s / seed.duration_s


def slice_wavelengths(config: Config, t_s: np.ndarray) -> np.ndarray:
    """(Nt,) the wavelength of each time slice of the seed (m): a linear sweep across the pulse, the
    measured spectrum mapped onto it, or the seed's wavelength (narrowband)."""
    seed = config.seed
    if seed.spectrum_trace is not None:
        return _measured(config)[0]
    return beam_shapes.slice_wavelengths(t_s, seed.duration_s, seed.wavelength_m, seed.bandwidth_m, seed.chirp)


def _measured(config: Config) -> tuple[np.ndarray, np.ndarray]:
    seed = config.seed
    return beam_shapes.measured_spectrum_wavelengths(seed.shape, config.grid.time_slices, seed.spectrum_trace,
                                                     seed.chirp, seed.pulse_trace)


def add_spectra(config: Config, summary: dict[str, Any], records: list[StepRecord], wavelengths_m: np.ndarray,
                seed_power_W: np.ndarray, dt_s: float, states: dict[str, MediumState]) -> np.ndarray | None:
    """Add the spectral figures to the summary (per step ``centre_nm`` and ``bandwidth_nm``;
    ``output_centre_nm``, ``output_bandwidth_nm`` and, for a chirped seed, ``output_transform_limit_ps``)
    and, for a chirped seed, each step's spectrum (J/m) to its record; return the seed's spectrum (J/m),
    or None for a narrowband seed."""
    seed = config.seed
    if not seed.bandwidth_m:
        width = transform_limit_bandwidth_m(seed.shape, seed.duration_s, seed.wavelength_m, seed.pulse_trace)
        figures = [(seed.wavelength_m, width)] * len(records)
        seed_spectrum = None
    else:
        step = wavelength_step_m(config, dt_s)
        widths = step if seed.spectrum_trace is not None else None
        figures = []
        for rec in records:
            energies = rec.power_W * dt_s
            rec.datasets["spectrum"] = (spectrum_J_m(energies, step), "J/m")
            figures.append(spectral_centre_and_width(energies, wavelengths_m, widths))
        seed_spectrum = spectrum_J_m(seed_power_W * dt_s, step)
        _outside_warnings(config, summary, wavelengths_m, seed_power_W, states)
    def nm(value: float) -> float | None:             # a pulse with no energy left has no spectrum: null
        return value * 1e9 if math.isfinite(value) else None
    for entry, (centre, width) in zip(summary["steps"], figures, strict=True):
        entry["centre_nm"], entry["bandwidth_nm"] = nm(centre), nm(width)
    centre, width = figures[-1] if figures else (seed.wavelength_m, 0.0)
    summary["output_centre_nm"], summary["output_bandwidth_nm"] = nm(centre), nm(width)
    if seed.bandwidth_m and width > 0.0:
        summary["output_transform_limit_ps"] = transform_limit_duration_s(width, centre) * 1e12
    return seed_spectrum


def _outside_warnings(config: Config, summary: dict[str, Any], wavelengths_m: np.ndarray, seed_power_W: np.ndarray,
                      states: dict[str, MediumState]) -> None:
    """A warning per medium whose cross-section table misses more than OUTSIDE_WARNING of the seed."""
    total = float(seed_power_W.sum())
    for name, st in states.items():
        if st.spectral is None or total <= 0.0:
            continue
        share = float(seed_power_W[st.spectral.outside].sum()) / total
        if share > OUTSIDE_WARNING:
            spectrum = config.medium(name).material.spectrum
            summary["warnings"].append(warning("spectrum-table",
                f"medium {name}: {100 * share:.1f} % of the seed's energy lies at wavelengths outside the "
                f"cross-section table of {config.medium(name).material.name} ({spectrum.range_nm}), where "
                f"it is neither amplified nor absorbed; the seed spans {wavelengths_m.min() * 1e9:.4g} to "
                f"{wavelengths_m.max() * 1e9:.4g} nm"))
