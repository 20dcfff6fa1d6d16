"""Heat of the pumped media of a pulse train, averaged over the period, and their temperature,
thermal lens and depolarisation estimate (``media/thermal.py``).

Each medium's clock (``pulsed/clocks.py: MediumClock.evolve``) counts, while its pump is on, the heat
each voxel keeps: h·νp·(pump photons absorbed) − h·νs·(upper-state ions created), the quantum defect of
every ion the pump creates (whether it is later extracted or decays) and the whole photon where the
quantum efficiency η < 1. Over the recorded period of the train's steady state (of a cycle: the period
of its largest pulse) times the repetition rate, that is the average heat power. Balance over the
period, all media: absorbed pump = extracted + heat + fluorescence (the decays, h·νs each) + the change
of the upper-state energy, which is zero in the periodic steady state: the error is the train's.

With diffraction (``grid.diffraction = true``) the lens is applied on the train's own passes by one
update: the train is solved without it, its heat gives each medium's phase (``lens_phases``), and the
train is solved again with the phase at the middle of every pass (``pulsed/field_pass.py``); the heat
reported is that of the second solve. For a four-level material the heat does not depend on the
extraction (h·νp·absorbed − h·νs·created), so the update is exact up to the pump's bleaching; for a
quasi-three-level one it is not iterated to self-consistency.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from ampmodel.media import thermal


def heat_density(train, name: str, mask: np.ndarray, rate_Hz: float) -> np.ndarray | None:
    """(Nz, Ny, Nx) average heat density (W/m³) of medium ``name`` over the train's recorded period
    (None without a pump)."""
    _, _, heat_map = train.heat.get(name, (0.0, 0.0, None))
    if heat_map is None:
        return None
    heat = np.zeros((heat_map.shape[0],) + mask.shape)
    heat[:, mask] = heat_map * rate_Hz
    return heat


def lens_phases(config, train, masks: dict[str, np.ndarray], x_m: np.ndarray) -> dict[str, np.ndarray]:
    """The thermal-lens phase (Ny, Nx) rad of every medium with heat, thermal data and
    ``thermal_lens = true``, from the train's heat (``media/thermal.py: thermal_phase_rad``)."""
    out = {}
    for m in config.media:
        heat = heat_density(train, m.name, masks[m.name], config.seed.repetition_rate_Hz)
        if heat is not None and m.thermal_lens and thermal.has_thermal_data(m):
            out[m.name] = thermal.thermal_phase_rad(m, heat, x_m, x_m, config.seed.wavelength_m)
    return out


def add_train_heat(config, train, summary: dict[str, Any], media: dict, x_m: np.ndarray, wavelength_m: float) -> None:
    """Each pumped medium's average heat (W), heat fraction, fluorescence and thermal figures into its
    summary entry and record (heat (Nz, Ny, Nx) W/m³, temperature rise, OPD); the balance over the
    period of all media into ``summary["train"]["heat_balance_error"]``."""
    rate = config.seed.repetition_rate_Hz
    area = float((x_m[1] - x_m[0]) ** 2)
    absorbed_all = heat_all = fluorescence_all = 0.0
    for entry in summary["media"]:
        absorbed_J, decayed_J, _ = train.heat.get(entry["name"], (0.0, 0.0, None))
        medium, rec = config.medium(entry["name"]), media[entry["name"]]
        heat = heat_density(train, entry["name"], rec.mask, rate)
        if heat is None:
            continue
        heat_W = float(heat.sum()) * area * rec.slice_length_m
        absorbed_W = absorbed_J * rate
        absorbed_all += absorbed_W
        heat_all += heat_W
        fluorescence_all += decayed_J * rate
        entry.update({"absorbed_pump_average_power_W": absorbed_W, "heat_W": heat_W,
                      "heat_fraction": heat_W / absorbed_W if absorbed_W > 0 else 0.0,
                      "fluorescence_power_W": decayed_J * rate})
        figures, rise, opd = thermal.thermal_figures(medium, heat, x_m, x_m, rec.mask, wavelength_m,
                                                     applied=config.grid.diffraction)
        entry.update(figures)
        rec.heat_W_m3, rec.temperature_rise_K, rec.opd_m = heat, rise, opd
    if absorbed_all > 0:
        extracted = summary["train"]["extracted_power_W"]
        summary["train"]["heat_balance_error"] = (absorbed_all - extracted - heat_all - fluorescence_all) / absorbed_all
