"""Diagnostics of a cw run: powers, extracted power, pump absorption, photon balance, warnings.

The summary dict is a pulsed run's with power in place of energy (summary.json keys carry
their units). Warning thresholds are common practice and come from the config's [limits] table:
peak intensity above ``damage_fraction`` (0.5) of a damage intensity given by the material or by an
optic; more than ``clipped_fraction`` of the power clipped; fewer than ``pixels_across_beam`` pixels
across the seed; a transverse gain-length product above ``transverse_gain_length``.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from ampmodel.cw.medium import CwMedium
from ampmodel.cw.steady_state import Sweep
from ampmodel.description import Config, step_label
from ampmodel.diagnostics import W_CM2, seed_grid_warnings, transverse_gain_warnings, worst_damage
from ampmodel.media import gain_maps
from ampmodel.notices import warning
from ampmodel.output.result import MediumRecord
from ampmodel.safety import SAFETY_NOTE


def extracted_power_W(st: CwMedium, pixel_area_m2: float) -> float:
    """Power the gain gives the signal, Σ over voxels of g·S̄·dV with S̄ the mean intensity of all
    passes in the voxel: Σ T·(exp(g·dz) − 1)·A, T the intensities entering the voxel's gain step.
    (Negative in voxels that absorb.)"""
    if st.forward is None:
        return 0.0
    total = st.forward + st.backward
    return float((total * np.expm1(st.gain * st.dz_m)).sum() * pixel_area_m2)


def photon_balance(st: CwMedium, pixel_area_m2: float) -> dict[str, float]:
    """Photon rates (1/s) of a pumped medium in the steady state and the relative balance error.

    absorbed pump photons = signal photons added + spontaneous decays (∫ N2/τ dV) + pump photons
    absorbed without creating an upper-state ion (quantum efficiency below 1).
    """
    assert st.pump is not None and st.pump_field is not None
    pump, levels, field = st.pump, st.levels, st.pump_field
    dv = st.dz_m * pixel_area_m2
    absorbed = float(field.absorbed.sum() * pixel_area_m2)
    n2 = np.where(st.mask, levels.n2_per_m3(st.gain), 0.0)
    decays = float(n2.sum() * dv / levels.lifetime_s)
    added = extracted_power_W(st, pixel_area_m2) / levels.photon_energy_J
    sigma_ap = (pump.bleach_m2 - pump.create_b_m2) / (1.0 - pump.quantum_efficiency) \
        if pump.quantum_efficiency < 1.0 and pump.bleach_m2 > 0.0 else 0.0
    ground = np.where(st.mask, pump.alpha0_per_m - sigma_ap * n2, 0.0)
    lost = float((1.0 - pump.quantum_efficiency) * (ground * field.mean_flux).sum() * dv)
    error = (absorbed - added - decays - lost) / absorbed if absorbed > 0 else 0.0
    return {"absorbed_pump_photons_per_s": absorbed, "signal_photons_added_per_s": added,
            "spontaneous_decays_per_s": decays, "pump_photons_lost_to_quantum_efficiency_per_s": lost,
            "photon_balance_error": error}


def summarise(config: Config, seed: np.ndarray, sweep: Sweep, states: dict[str, CwMedium],
              media: dict[str, MediumRecord], x_m: np.ndarray) -> dict[str, Any]:
    """Build the summary.json dict of a cw run."""
    dx = float(x_m[1] - x_m[0])
    area = dx * dx
    p_in = float(seed.sum() * area)
    p_out = sweep.outcomes[-1].power_out_W if sweep.outcomes else p_in
    warnings: list[str] = []
    media_summary, extracted, absorbed_total, pump_total, photon_errors = _media_entries(
        config, states, media, area, warnings)
    steps, lost, peak = _step_entries(config, sweep, float(seed.max()), warnings)
    warnings.extend(seed_grid_warnings(config.seed.diameter_m, dx, seed, config.grid.width_m, config.limits))

    balance = (p_in + extracted - p_out - lost) / p_out if p_out > 0 else 0.0
    summary: dict[str, Any] = {
        "mode": "cw",
        "title": config.title,
        "input_power_W": p_in,
        "output_power_W": p_out,
        "gain": p_out / p_in if p_in > 0 else 0.0,
        "extracted_power_W": extracted,
        "lost_power_W": lost,
        "absorbed_pump_power_W": absorbed_total,
        "pump_power_W": pump_total,
    }
    if pump_total > 0:
        summary["optical_efficiency"] = (p_out - p_in) / pump_total
        summary["photon_balance_error"] = max(photon_errors, key=abs)
    summary.update({
        "peak_intensity_W_cm2": peak * W_CM2,
        "b_integral_rad": 0.0,
        **worst_damage(config, steps),
        "power_balance_error": balance,
        "energy_balance_error": balance,
        "cw_iterations": sweep.iterations,
        "cw_residual": sweep.residual,
        "cw_damping_final": sweep.damping,
        "warnings": warnings,
        "steps": steps,
        "media": media_summary,
        "safety": SAFETY_NOTE,
    })
    return summary


def _media_entries(config: Config, states: dict[str, CwMedium], media: dict[str, MediumRecord], area: float,
                   warnings: list[str]) -> tuple[list[dict[str, Any]], float, float, float, list[float]]:
    """Each medium's summary entry (gains, extracted power, pump and its photon balance), with its
    warnings added to ``warnings``; the extracted, absorbed pump and pump power of all media (W) and
    the photon balance error of each pumped one."""
    entries, extracted, absorbed_total, pump_total, photon_errors = [], 0.0, 0.0, 0.0, []
    for m in config.media:
        st, rec = states[m.name], media[m.name]
        ext = extracted_power_W(st, area)
        extracted += ext
        entry: dict[str, Any] = {
            "name": m.name, "material": m.material.name, "broadening": m.material.broadening,
            "small_signal_gain_on_axis": gain_maps.on_axis_gain(rec.gain_initial_per_m, rec.slice_length_m),
            "saturated_gain_on_axis": gain_maps.on_axis_gain(rec.gain_final_per_m, rec.slice_length_m),
            "saturation_intensity_W_cm2": rec.saturation_intensity_W_m2 * W_CM2,
            "extracted_power_W": ext, "quasi_three_level": m.material.quasi_three_level,
            "internal_slices": int(st.gain.shape[0])}
        if st.pump is not None:
            field = st.pump_field
            absorbed_W = float(field.absorbed.sum() * area * st.pump.photon_energy_J)
            absorbed_total += absorbed_W
            pump_total += st.pump.power_W
            balance = photon_balance(st, area)
            photon_errors.append(balance["photon_balance_error"])
            entry.update({"pump_power_W": st.pump.power_W, "absorbed_pump_power_W": absorbed_W,
                          "absorbed_pump_fraction": absorbed_W / st.pump.power_W,
                          "pump_power_transmitted_W": field.transmitted_W,
                          "pump_settling_iterations": st.initial_iterations, **balance})
        if st.levels.nt_per_m3:
            # the largest N2/Nt without the signal (N2 grows with g, so that of the largest gain)
            g_max = float(np.max(rec.gain_initial_per_m, where=st.mask[None, :, :], initial=-np.inf))
            entry["upper_state_fraction_max"] = float(st.levels.upper_fraction(g_max)) if np.isfinite(g_max) else 0.0
        entries.append(entry)
        warnings.extend(transverse_gain_warnings(m.name, rec.gain_initial_per_m, m.diameter_m, config.limits))
    return entries, extracted, absorbed_total, pump_total, photon_errors


def _step_entries(config: Config, sweep: Sweep, peak: float,
                  warnings: list[str]) -> tuple[list[dict[str, Any]], float, float]:
    """Each step's summary entry in power, with its clipping and damage warnings added to
    ``warnings``; the power lost on the way (W) and the peak intensity (W/m², from the seed's ``peak``)."""
    limits = config.limits
    steps, lost = [], 0.0
    for step, oc in zip(config.steps, sweep.outcomes, strict=True):
        lost += oc.clipped_W + oc.passive_loss_W + oc.edge_absorbed_W
        peak = max(peak, oc.peak_intensity_W_m2)
        entry = {"index": step.index, "kind": step.kind, "medium": step.medium,
                 "power_in_W": oc.power_in_W, "power_out_W": oc.power_out_W,
                 "gain": oc.power_out_W / oc.power_in_W if oc.power_in_W > 0 else 0.0,
                 "peak_intensity_W_cm2": oc.peak_intensity_W_m2 * W_CM2, "b_integral_rad": 0.0,
                 "clipped_power_W": oc.clipped_W, "passive_loss_W": oc.passive_loss_W}
        if step.kind == "pass":
            entry.update(reverse=step.reverse, extracted_power_W=oc.extracted_W)
        steps.append(entry)
        label = step_label(config.steps, step.index)
        if oc.power_in_W > 0 and oc.clipped_W > limits.clipped_fraction * oc.power_in_W:
            warnings.append(warning("clipping", f"{label}: the aperture clips {100 * oc.clipped_W / oc.power_in_W:.1f} "
                                    f"% of the power (more than {100 * limits.clipped_fraction:g} %)"))
        damage, what = None, ""
        if step.kind == "pass":
            mat = config.medium(step.medium).material
            damage, what = mat.damage_intensity_W_m2, mat.name
        elif step.damage_intensity_W_m2:
            damage, what = step.damage_intensity_W_m2, "this optic"
        entry["damage_intensity_W_cm2"] = damage * W_CM2 if damage else None
        entry["damage_margin"] = oc.peak_intensity_W_m2 / damage if damage else None
        if damage and oc.peak_intensity_W_m2 > limits.damage_fraction * damage:
            warnings.append(warning("damage-intensity", f"{label}: peak intensity {oc.peak_intensity_W_m2 * W_CM2:.3g} "
                                    f"W/cm² is above {100 * limits.damage_fraction:g} % of the cw damage intensity of "
                                    f"{what} ({damage * W_CM2:.3g} W/cm²; common practice); damage thresholds are "
                                    f"estimates: verify with your optics' data"))
    return steps, lost, peak


def add_field_figures(summary: dict[str, Any], sweep: Sweep, seed_beam: dict[str, float],
                      figures: list[dict[str, float]], grid_warnings: list[str]) -> None:
    """With diffraction: each step's beam figures, the power the window's absorbing edge took and the
    B-integral (the largest of a pixel after the step), the seed's beam figures, the grid's warnings
    and the steps' own (an undersampled lens phase, a pinhole wider than the grid)."""
    for entry, oc, beam in zip(summary["steps"], sweep.outcomes, figures, strict=True):
        entry.update(beam)
        entry["edge_absorbed_power_W"] = oc.edge_absorbed_W
        entry["b_integral_rad"] = oc.b_integral_rad
        if oc.pinhole_transmission is not None:
            entry["pinhole_transmission"] = oc.pinhole_transmission
        summary["warnings"].extend(oc.warnings)
    summary["b_integral_rad"] = max([oc.b_integral_rad for oc in sweep.outcomes] + [0.0])
    summary["edge_absorbed_power_W"] = sum(oc.edge_absorbed_W for oc in sweep.outcomes)
    summary["diffraction"] = True
    summary["seed_beam"] = seed_beam
    summary["warnings"].extend(grid_warnings)
