"""Heat of a pumped medium in the cw steady state, and its temperature, thermal lens and
depolarisation estimate (``media/thermal.py``).

Each voxel's heat density comes from its rates in the steady state (``media/cw_pump.py``):

    Q = h·νp·(1 − η)·σa,p·N1·Φp + (h·νp − h·νs)·(S + N2/τ)

the pump photons absorbed without creating an upper-state ion (quantum efficiency η < 1) are heat
whole; each ion the pump creates leaves either by stimulated emission (S, the net signal photons the
voxel adds, negative where it absorbs) or by spontaneous decay (N2/τ), and leaves the quantum defect
h·νp − h·νs as heat. The fluorescence (h·νs per decay) escapes the medium and is not heat. The
fluorescence photon is taken at the signal wavelength (its mean wavelength differs by a few per cent
in quasi-three-level materials: the heat is then underestimated by that much of the fluorescence).

Power balance of the medium: absorbed pump = extracted + heat + fluorescence; its error is the
steady state's photon balance error (to round-off once the iteration has converged).
"""
from __future__ import annotations

from typing import Any

import numpy as np

from ampmodel.cw.diagnostics import extracted_power_W
from ampmodel.cw.medium import CwMedium
from ampmodel.media import thermal


def heat_density(st: CwMedium, pixel_area_m2: float) -> tuple[np.ndarray, dict[str, float]]:
    """Heat density (W/m³) of each voxel of a pumped medium, on its slices (Nz, Ny, Nx), and the
    medium's power balance (W): absorbed pump, extracted, heat, fluorescence and the relative error."""
    assert st.pump is not None and st.pump_field is not None
    pump, levels, field = st.pump, st.levels, st.pump_field
    hnu_p, hnu_s = pump.photon_energy_J, levels.photon_energy_J
    n2 = np.where(st.mask, levels.n2_per_m3(st.gain), 0.0)
    decays = n2 / levels.lifetime_s                                              # 1/(m³·s)
    if st.forward is None:
        added = np.zeros_like(n2)
    else:
        added = (st.forward + st.backward) * np.expm1(st.gain * st.dz_m) / st.dz_m / hnu_s
    sigma_ap = (pump.bleach_m2 - pump.create_b_m2) / (1.0 - pump.quantum_efficiency) \
        if pump.quantum_efficiency < 1.0 and pump.bleach_m2 > 0.0 else 0.0
    ground = np.where(st.mask, pump.alpha0_per_m - sigma_ap * n2, 0.0)
    lost = (1.0 - pump.quantum_efficiency) * ground * field.mean_flux           # 1/(m³·s)
    heat = hnu_p * lost + (hnu_p - hnu_s) * (added + decays)
    dv = st.dz_m * pixel_area_m2
    absorbed_W = float(field.absorbed.sum() * pixel_area_m2 * hnu_p)
    extracted_W = extracted_power_W(st, pixel_area_m2)
    heat_W = float(heat.sum() * dv)
    fluorescence_W = float(decays.sum() * dv * hnu_s)
    error = (absorbed_W - extracted_W - heat_W - fluorescence_W) / absorbed_W if absorbed_W > 0 else 0.0
    return st.coarse(heat), {"heat_W": heat_W, "heat_fraction": heat_W / absorbed_W if absorbed_W > 0 else 0.0,
                             "fluorescence_power_W": fluorescence_W, "heat_balance_error": error}


def apply_lenses(states: dict[str, CwMedium], x_m: np.ndarray, y_m: np.ndarray, wavelength_m: float) -> bool:
    """Give each pumped medium with thermal data and ``thermal_lens`` on the phase of its thermal lens
    from its present heat (``CwMedium.phase_rad``, applied by the cw field path at the middle of each
    pass); True if any medium got one."""
    area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    applied = False
    for st in states.values():
        if st.pump is None or not st.medium.thermal_lens or not thermal.has_thermal_data(st.medium):
            continue
        heat, _ = heat_density(st, area)
        st.phase_rad = thermal.thermal_phase_rad(st.medium, heat, x_m, y_m, wavelength_m)
        applied = True
    return applied


def heat_entries(st: CwMedium, x_m: np.ndarray, y_m: np.ndarray, wavelength_m: float, applied: bool = False
                 ) -> tuple[dict[str, Any], np.ndarray, np.ndarray | None, np.ndarray | None]:
    """A pumped medium's heat, temperature and lens: its summary entries, the heat density
    (Nz, Ny, Nx) W/m³, the temperature rise (Nz, Ny, Nx) K and the OPD (Ny, Nx) m (None without
    thermal data)."""
    area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    heat, balance = heat_density(st, area)
    figures, rise, opd = thermal.thermal_figures(st.medium, heat, x_m, y_m, st.mask, wavelength_m,
                                                 applied=applied and st.phase_rad is not None)
    return {**balance, **figures}, heat, rise, opd
