"""The direct solution of a pulse train's steady state, pixel by pixel: where every pixel is
independent (no diffraction, one medium, no passive loss inside it, a pump that does not bleach), a
pixel's pulse depends only on its column ∫N2 dz, and the fixed point of the column map is found per
pixel by bisection (``trains.py`` explains where it applies and how it starts the iteration).
"""
from __future__ import annotations

import numpy as np

from ampmodel.description import Config, Step, passed_media
from ampmodel.kernels import beam_shapes
from ampmodel.kernels.frantz_nodvik import fn_total
from ampmodel.kernels.inversion import relax_inversion
from ampmodel.pulsed.clocks import MediumClock, unseeded_n2


def direct_not_applicable(config: Config, clocks: dict[str, MediumClock]) -> str | None:
    """Why the direct per-pixel solution does not apply to this config (None: it applies)."""
    if config.train.method == "iterate":
        return 'not used (train.method = "iterate")'
    if config.grid.diffraction:
        return "diffraction couples the pixels"
    media = passed_media(config.steps)
    if len(media) != 1:
        return "the layout passes through more than one medium"
    medium = config.medium(media[0])
    if medium.loss_per_m > 0.0:
        return (f"medium {medium.name} has passive loss inside (loss_per_cm): the energies then depend on "
                f"where along the medium the gain is")
    if any(s.kind == "repeat" and s.until is not None for s in config.steps):
        return 'a repeat stops at the peak: the dump round trip couples the pixels'
    if any(s.kind == "repeat" and s.mode_diameter_m is not None for s in config.steps):
        return "a repeat re-forms the cavity mode each round trip (mode_diameter_mm): the mode couples the pixels"
    seed, mat = config.seed, medium.material
    if seed.bandwidth_m or abs(seed.wavelength_m - mat.wavelength_m) > 1e-9 * mat.wavelength_m:
        return "the seed's time slices meet the medium away from its wavelength (their own cross-sections)"
    c = clocks[medium.name]
    if c.pump is not None and c.pump.bleach_m2 > 0.0:
        return (f"the pump bleaches medium {medium.name} (its absorption follows the inversion along each "
                f"column, so a column's pumping is not a function of its ∫N2 dz)")
    return None


def _column_pulse(steps: tuple[Step, ...], column: np.ndarray, fluence: np.ndarray, c: MediumClock,
                  q: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, fsat: float,
                  until_elapsed: list[float]) -> tuple[np.ndarray, np.ndarray]:
    """One pulse through the layout per pixel, on the column ∫N2 dz (ions/m²) of the one medium:
    returns (column after, fluence after) and adds the layout's time to ``until_elapsed[0]``."""
    hv = c.photon_energy_J
    length = c.slice_length_m * c.rate_per_m3_s.shape[0] if c.rate_per_m3_s is not None else 0.0
    sum_cs, offset = c.sum_cross_section_m2, c.absorption_offset_per_m
    def one(s: Step, column: np.ndarray, fluence: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if s.kind == "pass":
            ln_g = sum_cs * column - offset * length
            out = fn_total(fluence, ln_g, fsat)
            column = np.maximum(column - (out - fluence) / hv, 0.0)    # N2 >= 0 (round-off at G = 1)
            fluence = out
        elif s.kind == "loss":
            fluence = fluence * s.transmission
        elif s.kind == "aperture":
            fluence = fluence * beam_shapes.aperture_mask(x_m, y_m, s.shape, s.diameter_m)[c.mask]
        until_elapsed[0] += s.delay_s
        return _column_relax(column, c, q, s.delay_s, c.continuous), fluence

    for step in steps:
        if step.kind == "repeat":
            rest = step.round_trip_time_s - sum(s.delay_s for s in step.steps)
            for _ in range(step.count):
                for s in step.steps:
                    column, fluence = one(s, column, fluence)
                column = _column_relax(column, c, q, rest, c.continuous)
                until_elapsed[0] += rest
            column = _column_relax(column, c, q, step.delay_s, c.continuous)
            until_elapsed[0] += step.delay_s
        else:
            column, fluence = one(step, column, fluence)
    return column, fluence


def _column_relax(column: np.ndarray, c: MediumClock, q: np.ndarray, duration_s: float, on: bool) -> np.ndarray:
    if duration_s <= 0.0:
        return column
    return relax_inversion(column, q if on else 0.0, c.lifetime_s, duration_s)[0]


def direct_columns(config: Config, c: MediumClock, seed_fluence: np.ndarray, x_m: np.ndarray,
                   y_m: np.ndarray) -> tuple[np.ndarray, float]:
    """The periodic steady state per pixel of the one medium's column ∫N2 dz (ions/m²), by bisection
    on Phi(S) − S (decreasing), and the steady output energy (J) it gives."""
    period = 1.0 / config.seed.repetition_rate_Hz
    dz = c.slice_length_m
    q = c.rate_per_m3_s.sum(axis=0) * dz if c.rate_per_m3_s is not None else np.zeros(int(c.mask.sum()))
    fsat = c.photon_energy_J / c.sum_cross_section_m2
    f0 = seed_fluence[c.mask]
    area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))

    def phi(column: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        elapsed = [0.0]
        after, fluence = _column_pulse(config.steps, column, f0, c, q, x_m, y_m, fsat, elapsed)
        rest = period - elapsed[0]
        if c.continuous:
            after = _column_relax(after, c, q, rest, True)
        else:
            after = _column_relax(after, c, q, rest - c.pump_duration_s, False)
            after = _column_relax(after, c, q, c.pump_duration_s, True)
        return after, fluence

    unseeded = unseeded_n2(c, period)
    transparency = c.absorption_offset_per_m / c.sum_cross_section_m2 * dz * unseeded.shape[0]
    lo = np.zeros_like(q)
    top = np.maximum(unseeded.sum(axis=0) * dz, transparency)
    hi = top * (1 + 1e-9) + 1e-9 * max(float(top.max()), 1.0)    # room for round-off where there is no gain
    if np.any(phi(lo)[0] < lo) or np.any(phi(hi)[0] > hi):
        raise ArithmeticError("the bracket of the direct solution does not hold")
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        up = phi(mid)[0] > mid
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
        if np.all(hi - lo <= 4e-16 * hi):
            break
    column = 0.5 * (lo + hi)
    fluence = phi(column)[1]
    return column, float(fluence.sum() * area)
