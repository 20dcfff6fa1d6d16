"""Diagnostics of a pulsed run: energies, extraction, peaks, B-integral, energy balance, warnings.

The summary dict is what summary.json holds (README, "Reading the outputs"); its keys carry their units.

Warning thresholds are common practice (each can be changed in the config's [limits] table):
peak fluence above half the damage fluence scaled to the pulse length by (tau/tau_ref)^0.5; B-integral
above 2 rad in one step or 3 rad over the layout; more than 1 % of the energy clipped; fewer than 8
pixels across the beam; a transverse gain-length product g0·D above 3 (parasitic oscillation).
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from ampmodel.beam.state import BeamState, StepOutcome
from ampmodel.description import Config, Step, step_label
from ampmodel.diagnostics import (
    J_CM2,
    W_CM2,
    scaled_damage_fluence,
    seed_grid_warnings,
    transverse_gain_warnings,
    worst_damage,
)
from ampmodel.kernels.diffraction import critical_power_W, self_focusing_length_m
from ampmodel.kernels.pulse_shape import true_peak_map
from ampmodel.media import gain_maps
from ampmodel.notices import Notice, note, warning
from ampmodel.output.result import MediumRecord
from ampmodel.pulsed.measured import trace_warnings
from ampmodel.safety import SAFETY_NOTE

# What a clipping step does, in the clipping warning.
_CLIP_WORDS = {"filter": "the pinhole rejects", "relay": "the window cuts off",
               "pass": "the clear aperture clips"}


def _step_entry(config: Config, step: Step, oc: StepOutcome) -> dict[str, Any]:
    """A step's summary entry (index, kind, medium, energies in and out, gain, peaks, B-integral,
    clipped, passive and extracted energy, delay, beam figures, peak power); a repeat adds its round
    trips and the entries of its steps in the dump round trip."""
    entry = {"index": step.index, "kind": step.kind, "medium": step.medium,
             "energy_in_J": oc.energy_in_J, "energy_out_J": oc.energy_out_J,
             "gain": oc.energy_out_J / oc.energy_in_J if oc.energy_in_J > 0 else 0.0,
             "peak_fluence_J_cm2": oc.peak_fluence_J_m2 * J_CM2,
             "peak_fluence_in_J_cm2": oc.peak_fluence_in_J_m2 * J_CM2,
             "peak_intensity_W_cm2": oc.peak_intensity_W_m2 * W_CM2,
             "b_integral_rad": oc.b_integral_step_rad,
             "b_integral_margin": oc.b_integral_step_rad / config.limits.b_integral_step_rad,
             "clipped_energy_J": oc.clipped_J, "passive_loss_J": oc.passive_loss_J,
             "extracted_energy_J": oc.extracted_J, "delay_ns": step.delay_s * 1e9}
    check = damage_check(config, step, oc)
    entry["damage_fluence_J_cm2"] = check["scaled"] * J_CM2 if check else None
    entry["damage_margin"] = check["margin"] if check else None
    if config.grid.diffraction:
        entry["edge_absorbed_energy_J"] = oc.edge_absorbed_J
    if oc.beam is not None:
        entry.update(oc.beam.as_dict())
    if oc.peak_power_W is not None:
        entry["peak_power_W"] = oc.peak_power_W
    if oc.duration_s is not None:
        entry["output_duration_ns"] = oc.duration_s * 1e9
    if step.kind == "pass":
        entry["reverse"] = step.reverse
    if step.kind == "repeat":
        rt = oc.repeat
        energies = rt.round_trip_energies_J
        round_trip_s = rt.round_trip_s
        dump = rt.dump_round_trip
        before = [oc.energy_in_J] + list(energies[:-1])
        round_trips = [{"round_trip": k, "energy_J": e, "time_ns": k * round_trip_s * 1e9,
                        "gain": e / b if b > 0 else 0.0, "kept": k <= dump, "dumped": k == dump}
                       for k, (e, b) in enumerate(zip(energies, before, strict=True), start=1)]
        entry.update({
            "round_trip_count": dump,
            "until": step.until, "count": step.count,
            "round_trip_ns": round_trip_s * 1e9,
            "build_up_time_ns": dump * round_trip_s * 1e9,
            "energy_per_round_trip_J": list(energies),
            "round_trips": round_trips,
            "steps": [_step_entry(config, s, o) for s, o in zip(step.steps, rt.inner, strict=True)],
        })
        if step.until is not None:
            entry["peak_found"] = rt.peak_found
            entry["max_count"] = step.max_count
    return entry


def damage_check(config: Config, step: Step, oc: StepOutcome) -> dict[str, Any] | None:
    """A step's surfaces against their damage fluence: a pass's medium faces and bulk (the material's
    damage fluence), an optic with its own damage fluence (loss, aperture, filter, lens, relay); None
    for a step without damage data. The fluence checked is the largest the step's surfaces meet: the
    beam reaching the step, inside a medium and leaving it. The damage fluence is scaled to the pulse
    length by (τ/τ_ref)^exponent (common practice). ``damage_margin`` = fluence / scaled damage fluence
    (1: at the estimated damage fluence)."""
    damage, quoted, what = None, None, ""
    if step.kind == "pass":
        mat = config.medium(step.medium).material
        damage, quoted, what = mat.damage_fluence_J_m2, mat.damage_pulse_s, mat.name
    elif step.kind != "repeat" and step.damage_fluence_J_m2:
        damage, quoted, what = step.damage_fluence_J_m2, step.damage_pulse_s, "this optic"
    if not damage:
        return None
    pulse_s = oc.duration_s or config.seed.duration_s     # the pulse the step gives (FWHM)
    scaled = scaled_damage_fluence(damage, quoted, pulse_s, config.limits.damage_scaling_exponent)
    fluence = max(oc.peak_fluence_J_m2, oc.peak_fluence_in_J_m2)
    return {"fluence": fluence, "damage": damage, "quoted": quoted, "scaled": scaled, "what": what,
            "pulse": pulse_s, "margin": fluence / scaled}


def _step_warnings(config: Config, step: Step, oc: StepOutcome, label: str) -> list[str]:
    """Clipping, window-edge, B-integral and damage warnings of one step (a repeat's own steps are
    checked one by one, not the repeat as a whole)."""
    limits = config.limits
    warnings = [n.prefixed(label) if isinstance(n, Notice) else f"{label}: {n}" for n in oc.warnings]
    edge_lost = oc.edge_absorbed_J
    if step.kind != "repeat" and oc.energy_in_J > 0:
        if oc.clipped_J > limits.clipped_fraction * oc.energy_in_J:
            what = _CLIP_WORDS.get(step.kind, "the aperture clips")
            warnings.append(warning("clipping", f"{label}: {what} {100 * oc.clipped_J / oc.energy_in_J:.1f} % of the "
                                    f"energy (more than {100 * limits.clipped_fraction:g} %)"))
        if edge_lost > limits.clipped_fraction * oc.energy_in_J:
            warnings.append(warning("window-edge", f"{label}: the absorbing window edge takes "
                                    f"{100 * edge_lost / oc.energy_in_J:.1f} % of the energy (more than "
                                    f"{100 * limits.clipped_fraction:g} %); widen grid.width_mm"))
    if step.kind != "repeat" and oc.b_integral_step_rad > limits.b_integral_step_rad:
        warnings.append(warning("b-integral-step", f"{label}: B-integral {oc.b_integral_step_rad:.2f} rad in this "
                                f"step, above {limits.b_integral_step_rad:g} rad (common practice): self-focusing "
                                f"and beam break-up risk"))
    check = damage_check(config, step, oc)
    if check is not None and check["margin"] > limits.damage_fraction:
        quoted_txt = f" quoted at {check['quoted'] * 1e9:g} ns" if check["quoted"] else ""
        warnings.append(warning("damage-fluence", (
            f"{label}: peak fluence {check['fluence'] * J_CM2:.3g} J/cm² is {100 * check['margin']:.0f} % of the "
            f"damage fluence of {check['what']} ({check['damage'] * J_CM2:g} J/cm²{quoted_txt}, estimated "
            f"{check['scaled'] * J_CM2:.3g} J/cm² at {check['pulse'] * 1e9:.3g} ns), above "
            f"{100 * limits.damage_fraction:g} %; damage thresholds are estimates: verify with your optics' data")))
    return warnings


def summarise(config: Config, beam: BeamState, seed_map: np.ndarray, outcomes: list[StepOutcome],
              media: Mapping[str, MediumRecord], maps: Mapping[str, gain_maps.GainMap],
              seed_beam: Mapping[str, float] | None = None,
              extra_warnings: list[str] | None = None) -> dict[str, Any]:
    """Build the summary.json dict of a pulsed run.

    ``beam`` is the final beam (fluence path ``beam.state.BeamState`` or field path
    ``beam.field.FieldBeam``); ``seed_beam`` the seed's beam figures; ``extra_warnings`` are added as
    they are (grid checks).
    """
    limits, seed = config.limits, config.seed
    pixel_area = beam.pixel_area_m2
    e_in = float(seed_map.sum() * pixel_area)
    e_out = beam.energy_J()
    warnings: list[str] = []
    media_summary, stored_before, stored_after = _media_entries(config, media, maps, pixel_area, warnings)
    steps, lost, peak_fluence, peak_intensity = _step_entries(config, outcomes, float(seed_map.max()), warnings)
    warnings.extend(_self_focusing_warnings(config, outcomes))
    b_total = float(true_peak_map(beam.b_integral, beam.peak_factor).max()) if beam.b_integral.size else 0.0
    if b_total > limits.b_integral_total_rad:
        warnings.append(warning("b-integral-total", f"layout: accumulated B-integral {b_total:.2f} rad, above "
                                f"{limits.b_integral_total_rad:g} rad in total (common practice)"))
    dx = float(beam.x_m[1] - beam.x_m[0])
    warnings.extend(seed_grid_warnings(seed.diameter_m, dx, seed_map, config.grid.width_m, limits))
    warnings.extend(extra_warnings or ())
    warnings.extend(trace_warnings(config))
    if seed.shape != "flat" and config.grid.time_slices < 16:
        warnings.append(note("time-slices", f"grid: {config.grid.time_slices} time slices resolve the "
                             f"{'measured' if seed.shape == 'file' else seed.shape} "
                             f"pulse's reshaping by saturation coarsely; 16 or more are advised for the output "
                             f"pulse shape"))

    # The balance uses the energy each pass took from its gain, summed from the beam (exact FN
    # bookkeeping, precise relative to the beam energy); the media's gain-map differences give the
    # same figure to round-off relative to the stored energy.
    gained = sum(oc.extracted_J for oc in outcomes)
    balance = (e_in + gained - e_out - lost) / e_out if e_out > 0 else 0.0
    return {
        "mode": "pulsed",
        "title": config.title,
        "input_energy_J": e_in,
        "output_energy_J": e_out,
        "gain": e_out / e_in if e_in > 0 else 0.0,
        "stored_energy_J": stored_before,
        "stored_energy_final_J": stored_after,
        "extracted_energy_J": gained,
        "extraction_efficiency": (e_out - e_in) / stored_before if stored_before > 0 else 0.0,
        "lost_energy_J": lost,
        "peak_fluence_J_cm2": peak_fluence * J_CM2,
        "peak_intensity_W_cm2": peak_intensity * W_CM2,
        "b_integral_rad": b_total,
        "b_integral_margin": b_total / limits.b_integral_total_rad,
        **worst_damage(config, steps),
        "energy_balance_error": balance,
        "pulse_duration_ns": seed.duration_s * 1e9,
        "time_slice_ns": beam.dt_s * 1e9,
        "diffraction": config.grid.diffraction,
        "seed_beam": dict(seed_beam or {}),
        "warnings": warnings,
        "steps": steps,
        "media": media_summary,
        "safety": SAFETY_NOTE,
    }


def _media_entries(config: Config, media: Mapping[str, MediumRecord], maps: Mapping[str, gain_maps.GainMap],
                   pixel_area: float, warnings: list[str]) -> tuple[list[dict[str, Any]], float, float]:
    """Each medium's summary entry (gain, stored and extracted energy, pump), with its warnings added
    to ``warnings``; and the stored energy of all media before and after (J)."""
    entries = []
    stored_before = stored_after = 0.0
    for m in config.media:
        rec = media[m.name]
        voxel = rec.slice_length_m * pixel_area
        s0 = gain_maps.stored_energy_J(rec.gain_initial_per_m, rec.saturation_fluence_J_m2, voxel)
        s1 = gain_maps.stored_energy_J(rec.gain_final_per_m, rec.saturation_fluence_J_m2, voxel)
        # Energy given to the beam: Fsat·∫ (g_before − g_after) dV over every voxel (also absorbing ones).
        ext = rec.saturation_fluence_J_m2 * voxel * sum(         # slice by slice: no (Nz, Ny, Nx) temporary
            float((g0 - g1).sum()) for g0, g1 in zip(rec.gain_initial_per_m, rec.gain_final_per_m, strict=True))
        stored_before, stored_after = stored_before + s0, stored_after + s1
        g0_axis = gain_maps.on_axis_gain(rec.gain_initial_per_m, rec.slice_length_m)
        entry = {"name": m.name, "material": m.material.name,
                 "small_signal_gain_on_axis": g0_axis,
                 "small_signal_gain_on_axis_final": gain_maps.on_axis_gain(rec.gain_final_per_m, rec.slice_length_m),
                 "stored_energy_J": s0, "stored_energy_final_J": s1, "extracted_energy_J": ext,
                 "saturation_fluence_J_cm2": rec.saturation_fluence_J_m2 * J_CM2,
                 "quasi_three_level": m.material.quasi_three_level}
        if m.material.n2_m2_W > 0:
            entry["critical_power_W"] = critical_power_W(m.material.wavelength_m, m.material.refractive_index,
                                                         m.material.n2_m2_W)
        if rec.pumped_J or rec.decayed_J:
            # time passed in the layout: the gain map also changed by pumping and decay
            entry["extracted_energy_J"] = ext + rec.pumped_J - rec.decayed_J
            entry["pump_stored_energy_J"] = rec.pumped_J
            entry["decayed_energy_J"] = rec.decayed_J
        gm = maps[m.name]
        entry.update(_pump_entry(m, gm))
        if gm.ions is not None and gm.ions.nt_per_m3:
            # N2 grows with g: the largest fraction is that of the largest gain (no copy of the map)
            g_max = float(np.max(rec.gain_initial_per_m, where=gm.mask[None, :, :], initial=-np.inf))
            entry["upper_state_fraction_max"] = float(gm.ions.upper_fraction(g_max)) if np.isfinite(g_max) else 0.0
        entries.append(entry)
        warnings.extend(transverse_gain_warnings(m.name, rec.gain_initial_per_m, m.diameter_m, config.limits))
    return entries, stored_before, stored_after


def _pump_entry(m, gm: gain_maps.GainMap) -> dict[str, Any]:
    """A pumped medium's pump figures: energy (a continuous pump: power) delivered, absorbed and
    leaving; a pump pulse's storage efficiency (ions still excited at its end over ions it created)
    and the pump's photon balance (delivered − absorbed − leaving, relative)."""
    if m.pump is None:
        return {}
    if m.pump.continuous:
        return {"pump_power_W": m.pump.power_W, "absorbed_pump_power_W": gm.absorbed_pump_W,
                "transmitted_pump_power_W": gm.transmitted_pump_W}
    delivered = m.pump.energy_J * m.pump.transfer_efficiency
    stored = gm.pumped_ions - gm.decayed_ions
    return {"pump_energy_J": m.pump.energy_J, "absorbed_pump_energy_J": gm.absorbed_pump_J,
            "transmitted_pump_energy_J": gm.transmitted_pump_J,
            "storage_efficiency": stored / gm.pumped_ions if gm.pumped_ions > 0 else 0.0,
            "pump_photon_balance_error": (delivered - gm.absorbed_pump_J - gm.transmitted_pump_J) / delivered}


def _step_entries(config: Config, outcomes: list[StepOutcome], peak_fluence: float,
                  warnings: list[str]) -> tuple[list[dict[str, Any]], float, float, float]:
    """Each step's summary entry, with its warnings added to ``warnings``; the energy lost on the way
    (clipped, passive loss, window edge; J) and the peak fluence (J/m², from the seed's
    ``peak_fluence`` on) and intensity (W/m²) over the layout."""
    steps = []
    lost = peak_intensity = 0.0        # every step records the peaks of the beam entering it
    for step, oc in zip(config.steps, outcomes, strict=True):
        peak_fluence = max(peak_fluence, oc.peak_fluence_J_m2, oc.peak_fluence_in_J_m2)
        peak_intensity = max(peak_intensity, oc.peak_intensity_W_m2)
        lost += oc.clipped_J + oc.passive_loss_J + oc.edge_absorbed_J
        steps.append(_step_entry(config, step, oc))
        label = step_label(config.steps, step.index)
        warnings.extend(_step_warnings(config, step, oc, label))
        if step.kind == "repeat":
            for inner, ioc in zip(step.steps, oc.repeat.inner, strict=True):
                warnings.extend(_step_warnings(config, inner, ioc, step_label(config.steps, step.index, inner.index)))
            if step.until is not None and not oc.repeat.peak_found and oc.energy_out_J > 0:
                warnings.append(warning("repeat", f"{label}: the energy still rose after max_count = "
                                        f"{step.max_count} round trips; the pulse was dumped after the last; raise "
                                        f"max_count or check the cavity's gain and loss"))
    return steps, lost, peak_fluence, peak_intensity


def _self_focusing_warnings(config: Config, outcomes: list[StepOutcome]) -> list[str]:
    """Per medium with n2 whose peak power exceeds the critical power for self-focusing, one line: a
    warning when Marburger's collapse distance for a smooth beam of its size is within
    ``limits.self_focusing_length_factor`` times the path through the medium above the critical power
    (every pass and round trip above it), else a note (collapse far off: the small-scale self-focusing
    of ripples is what the B-integral measures)."""
    worst_of: dict[str, list] = {}   # medium -> [largest P/P_cr, its step, outcome, path above it (m)]
    for step, oc in zip(config.steps, outcomes, strict=True):
        if oc.peak_power_W is None:
            continue
        for name, count in _passes(step, oc).items():
            medium = config.medium(name)
            mat = medium.material
            if mat.n2_m2_W <= 0:
                continue
            ratio = oc.peak_power_W / critical_power_W(mat.wavelength_m, mat.refractive_index, mat.n2_m2_W)
            if ratio <= 1.0:
                continue
            worst = worst_of.setdefault(name, [0.0, step.index, oc, 0.0])
            worst[3] += count * medium.length_m
            if ratio > worst[0]:
                worst[:3] = [ratio, step.index, oc]
    return [_self_focusing_line(config, name, *worst) for name, worst in worst_of.items()]


def _passes(step: Step, oc: StepOutcome) -> dict[str, int]:
    """The media a step passes and how often: a pass's own once; a repeat's, every round trip kept."""
    if step.kind == "pass":
        return {step.medium: 1}
    trips = oc.repeat.dump_round_trip if oc.repeat is not None else 1
    out: dict[str, int] = {}
    for inner in step.steps:
        if inner.kind == "pass":
            out[inner.medium] = out.get(inner.medium, 0) + trips
    return out


def _self_focusing_line(config: Config, name: str, ratio: float, index: int, oc: StepOutcome, path: float) -> Notice:
    """The one line of :func:`_self_focusing_warnings` for a medium."""
    mat = config.medium(name).material
    p_cr = critical_power_W(mat.wavelength_m, mat.refractive_index, mat.n2_m2_W)
    radius = 0.25e-3 * (oc.beam.d4sigma_x_mm + oc.beam.d4sigma_y_mm) if oc.beam is not None else 0.0
    z_sf = self_focusing_length_m(mat.wavelength_m, mat.refractive_index, radius, ratio) if radius > 0 else np.inf
    head = (f"medium {name}: peak power {oc.peak_power_W:.3g} W in {step_label(config.steps, index)} is "
            f"{ratio:.2g} × the critical power for self-focusing ({p_cr:.3g} W)")
    factor = config.limits.self_focusing_length_factor
    if np.isfinite(z_sf) and z_sf < factor * path:
        return warning("self-focusing", (
            f"{head}; Marburger's collapse distance, about {z_sf:.3g} m, is within {factor:g} × the "
            f"{path:.3g} m of medium travelled above it: the beam may collapse; " +
            ("the field path includes the Kerr phase" if config.grid.diffraction else
             "set grid.diffraction = true to model the Kerr phase")))
    far = f"collapse distance about {z_sf:.3g} m" if np.isfinite(z_sf) else "no collapse distance"
    return note("self-focusing", f"{head}; {far} against {path:.3g} m of medium travelled above it: the B-integral "
                                 f"measures the small-scale self-focusing")
