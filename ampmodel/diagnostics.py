"""What the summaries of every path share: unit factors, the damage fluence scaled
to the pulse, and the warnings about the grid and the transverse gain.

Warning thresholds are common practice; each can be changed in the config's [limits] table
(``description.Limits``).
"""
from __future__ import annotations

import numpy as np

J_CM2 = 1e-4   # J/m² -> J/cm²
W_CM2 = 1e-4   # W/m² -> W/cm²


def scaled_damage_fluence(damage_J_m2: float, quoted_pulse_s: float | None, pulse_s: float,
                          exponent: float) -> float:
    """Damage fluence scaled from the quoted pulse length: F·(tau/tau_ref)^exponent (common practice)."""
    if not quoted_pulse_s:
        return damage_J_m2
    return damage_J_m2 * (pulse_s / quoted_pulse_s) ** exponent


def transverse_gain_warnings(name: str, gain_per_m: np.ndarray, diameter_m: float, limits) -> list[str]:
    """A warning when the transverse gain-length product g0·D of a medium is above the limit (the
    risk of parasitic oscillation across the rod; common practice)."""
    g_peak = float(np.max(gain_per_m)) if np.size(gain_per_m) else 0.0
    if g_peak * diameter_m > limits.transverse_gain_length:
        return [f"medium {name}: transverse gain-length product g0·D = {g_peak * diameter_m:.2g} "
                f"above {limits.transverse_gain_length:g} (common practice): risk of parasitic "
                f"oscillation; consider edge cladding or a lower gain"]
    return []


def seed_grid_warnings(diameter_m: float, dx_m: float, seed_map: np.ndarray, width_m: float, limits) -> list[str]:
    """The grid's two warnings about the seed: too few pixels across its diameter, and a seed map
    (fluence or intensity, (Ny, Nx)) with more than 1e-3 of its peak at the window's edge."""
    warnings = []
    pixels = diameter_m / dx_m
    if pixels < limits.pixels_across_beam:
        warnings.append(f"grid: only {pixels:.1f} pixels across the seed diameter (fewer than "
                        f"{limits.pixels_across_beam:g}); raise grid.points or narrow grid.width_mm")
    edge = max(seed_map[0, :].max(), seed_map[-1, :].max(), seed_map[:, 0].max(), seed_map[:, -1].max())
    if edge > 1e-3 * seed_map.max():
        warnings.append(f"grid: the seed reaches the edge of the {width_m * 1e3:g} mm window "
                        f"({edge / seed_map.max():.1e} of its peak there) and is cut by it; widen grid.width_mm")
    return warnings
