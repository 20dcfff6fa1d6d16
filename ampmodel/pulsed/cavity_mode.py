"""The cavity mode of a regenerative amplifier on the fluence path, and the warning of a repeat without one.

Without diffraction every pixel is amplified on its own, round trip after round trip: the centre of a
Gaussian beam, where the gain is highest, grows fastest, and the beam narrows (or, once saturation
flattens its top, widens) from one round trip to the next. A real cavity re-forms its mode every
round trip: the mode is set by the resonator's mirrors, not by the gain. A repeat with
``mode_diameter_m`` does that on the fluence path: after each round trip (after its inner steps) the
fluence of every time slice is redistributed over the mode, a Gaussian of that 1/e² diameter centred
on the grid, each time slice keeping its energy (:func:`reform`; the mode selects the shape, the round
trip the energy, the spectrum of a stretched pulse is kept slice by slice).

What the re-forming means for the rest of the round trip:

- **B-integral**: the (Nt, Ny, Nx) array is left as accumulated, pixel by pixel: neither reset nor
  redistributed. The B-integral of a pulse is the nonlinear phase summed along its path; a pulse that
  re-forms each round trip still travels the whole path, and with the mode fixed the on-axis value is
  the sum of the on-axis B-integral of every pass, the figure a regenerative amplifier is judged by.
  Redistributing it with the fluence would mix the phase of different pixels; resetting it would
  drop the round trips before.
- **Apertures inside the repeat**: the energy an aperture clips is lost in its step (``clipped_J``,
  counted in the energy balance) before the re-forming, which redistributes only what is left.
- ``until = "peak"``: the re-forming comes before the round trip's energy is compared with the one
  before; the copy taken before a round trip holds the re-formed beam, so the pulse dumped after the
  peak round trip has the mode's profile. The energies are those of the round trips as run.
- **Pulse trains**: each pulse's repeat re-forms its round trips alike; the gain maps carry between
  pulses the saturation of the mode's profile. The mode couples the pixels, so a train's direct
  per-pixel solution does not apply (``train_direct.py``).

With ``grid.diffraction = true`` the field path forms the cavity's mode itself from the lenses of the
round trip (the config refuses ``mode_diameter_mm`` there).

Without a mode and without diffraction :func:`no_mode_warning` warns, once per repeat, when the beam's
D4σ diameter in a round trip kept differs from that after the first round trip by more than
``limits.cavity_beam_change_fraction`` (5 %, common practice: a few per cent of diameter is about
twice that of peak fluence), with the numbers that change and the fix.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ampmodel.description import Limits
from ampmodel.kernels import beam_shapes
from ampmodel.kernels.beam_figures import d4sigma
from ampmodel.notices import warning


def mode_shape(x_m: np.ndarray, y_m: np.ndarray, diameter_m: float) -> np.ndarray:
    """(Ny, Nx) the cavity mode on the grid: a Gaussian exp(−2r²/w²), 2w = ``diameter_m``, centred on
    the grid and normalised so that its pixels sum to 1 (the energy of a time slice is kept to
    round-off)."""
    shape = beam_shapes.transverse_profile(x_m, y_m, "gaussian", diameter_m)
    total = shape.sum()
    if not total > 0.0:
        raise ValueError("the cavity mode has no pixel on the grid")
    return shape / total


def reform(fluence: np.ndarray, shape: np.ndarray) -> None:
    """Redistribute the fluence of every time slice of a (Nt, Ny, Nx) beam over ``shape`` (Ny, Nx,
    summing to 1), each slice keeping its energy; in place, without a beam-sized temporary."""
    energies = fluence.sum(axis=(1, 2))
    np.multiply(energies[:, None, None], shape[None, :, :], out=fluence)


def mode_grid_warnings(shape: np.ndarray, diameter_m: float, dx_m: float, width_m: float,
                       limits: Limits) -> list[str]:
    """The grid's warnings about the mode (as for the seed): too few pixels across its diameter, and
    more than 1e-3 of its peak at the window's edge."""
    warnings = []
    pixels = diameter_m / dx_m
    if pixels < limits.pixels_across_beam:
        warnings.append(warning("cavity-mode", f"only {pixels:.1f} pixels across the cavity mode (mode_diameter_mm "
                                f"= {diameter_m * 1e3:g}; fewer than {limits.pixels_across_beam:g}); raise "
                                f"grid.points or narrow grid.width_mm"))
    edge = max(shape[0, :].max(), shape[-1, :].max(), shape[:, 0].max(), shape[:, -1].max())
    if edge > 1e-3 * shape.max():
        warnings.append(warning("cavity-mode", f"the cavity mode (mode_diameter_mm = {diameter_m * 1e3:g}) "
                                f"reaches the edge of the {width_m * 1e3:g} mm window ({edge / shape.max():.1e} of "
                                f"its peak there) and is cut by it; widen grid.width_mm"))
    return warnings


@dataclass(frozen=True)
class RoundTripBeam:
    """The beam after one round trip: its D4σ diameters (m) and peak fluence (J/m², summed over the
    time slices), and its energy (J)."""

    d4sigma_x_m: float
    d4sigma_y_m: float
    peak_fluence_J_m2: float
    energy_J: float

    @classmethod
    def of(cls, fluence_map: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, pixel_area_m2: float) -> RoundTripBeam:
        """The figures of a (Ny, Nx) fluence map (J/m²)."""
        dx4, dy4 = d4sigma(fluence_map, x_m, y_m)
        peak = float(fluence_map.max()) if fluence_map.size else 0.0
        return cls(dx4, dy4, peak, float(fluence_map.sum() * pixel_area_m2))

    @property
    def d4sigma_m(self) -> float:
        """The mean of the x and y diameters (m)."""
        return 0.5 * (self.d4sigma_x_m + self.d4sigma_y_m)


def beam_change(first: RoundTripBeam, other: RoundTripBeam) -> float:
    """The relative change of the D4σ diameter (the larger of x and y) from ``first`` to ``other``,
    with its sign."""
    changes = [b / a - 1.0 for a, b in ((first.d4sigma_x_m, other.d4sigma_x_m),
                                        (first.d4sigma_y_m, other.d4sigma_y_m)) if a > 0.0]
    return max(changes, key=abs, default=0.0)


def no_mode_warning(figures: list[RoundTripBeam], dump: int, limits: Limits) -> str | None:
    """The one-line warning of a repeat without a cavity mode whose beam changes size (None when it
    does not): when the D4σ diameter of a round trip kept differs from that after round trip 1 by more
    than ``limits.cavity_beam_change_fraction``. It gives the D4σ after the first and after the dump
    round trip (``dump``, counted from 1) and at its extreme, the growth of the peak fluence beside that
    of the energy, and the fix."""
    kept = figures[:dump]
    if len(kept) < 2 or not (kept[0].energy_J > 0.0 and kept[0].peak_fluence_J_m2 > 0.0):
        return None
    first, last = kept[0], kept[-1]
    changes = [beam_change(first, f) if f.energy_J > 0.0 else 0.0 for f in kept]
    worst = max(range(len(kept)), key=lambda k: abs(changes[k]))
    if abs(changes[worst]) <= limits.cavity_beam_change_fraction or not last.energy_J > 0.0:
        return None
    through = (f", through {kept[worst].d4sigma_m * 1e3:.3g} mm (round trip {worst + 1})"
               if 0 < worst < len(kept) - 1 else "")
    peak_growth = last.peak_fluence_J_m2 / first.peak_fluence_J_m2
    relative = peak_growth / (last.energy_J / first.energy_J)
    return warning("cavity-mode", (
        f"no cavity mode: the beam's D4σ goes from {first.d4sigma_m * 1e3:.3g} mm (round trip 1) to "
        f"{last.d4sigma_m * 1e3:.3g} mm (round trip {dump}, the dump){through}, up to {100 * changes[worst]:+.0f} %, "
        f"and its peak fluence grows {peak_growth:.3g}×, {relative:.2f}× as much as its energy: the figures follow "
        f"the gain's profile, not the cavity's; give the repeat mode_diameter_mm, or set grid.diffraction = true "
        f"with the cavity's lenses"))


def fluence_map(beam) -> np.ndarray:
    """(Ny, Nx) fluence of a fluence or field beam summed over the time slices (J/m²); a field beam
    slice by slice, without a beam-sized temporary."""
    if hasattr(beam, "field"):
        out = np.zeros(beam.field.shape[1:])
        for sl in beam.field:
            out += sl.real ** 2 + sl.imag ** 2
        return out
    return beam.fluence.sum(axis=0)
