"""Diagnostics of a layout of fibres: the summary.json dict and its warnings.

Formulas (SI inside, units in the key names):

- gain_dB = 10·log10(output/input) of the signal (cw: power; pulsed: pulse energy).
- Noise figure (cw) of each fibre: NF = (1 + S_ASE/(hν))/G, S_ASE the forward spontaneous-emission
  density at the signal (steady_state.output_figures); of the layout by Friis' cascade, F = F1 + (F2 − 1)/G1 +
  ..., a loss step counting with G = T and F = 1/T (H. T. Friis, Proc. IRE 32, 419 (1944), from memory —
  verify; the same cascade holds for optical amplifiers, E. Desurvire's textbook).
- Peak intensity and fluence on the fibre's axis: 2P/(πw²) and 2E/(πw²) for a Gaussian mode.
- B-integral of the guided mode: B = (2π/λ)·n2·∫P/A_eff dz, A_eff = π·w² (G. P. Agrawal, Nonlinear
  Fiber Optics); in a cw run this is the nonlinear phase of the signal.
- Self-focusing: critical power P_cr ≈ 3.77·λ²/(8π·n0·n2) for a Gaussian beam (J. H. Marburger,
  Prog. Quantum Electron. 4, 35 (1975), from memory — verify).
- Stimulated Raman threshold: P_th ≈ 16·A_eff/(g_R·L_eff) (R. G. Smith, Appl. Opt. 11, 2489 (1972)),
  with the effective length of an amplifier L_eff = ∫P dz / P_out (the length that, at the output power,
  gives the same ∫P dz).
- Stored energy of a fibre before a pulse (down to transparency): Σ E_sat,j·ln G_j over the slices and
  rings where ln G_j > 0, E_sat,j = hν·A_j/(Γ_j·(σe + σa)).

Warning thresholds marked "common practice" are fields of the config's [limits] table.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ampmodel.description import Config, Step, step_label
from ampmodel.diagnostics import J_CM2, W_CM2, scaled_damage_fluence
from ampmodel.fibre import model as F
from ampmodel.fibre import steady_state
from ampmodel.fibre.pulsed import PulseTrainSolution
from ampmodel.kernels import beam_shapes, pulse_shape
from ampmodel.kernels.diffraction import critical_power_W
from ampmodel.kernels.fibre_modes import MARCUSE_VALID_V, SINGLE_MODE_CUTOFF_V, effective_area
from ampmodel.kernels.pulse_shape import true_peak
from ampmodel.notices import warning
from ampmodel.pulsed.measured import trace_warnings
from ampmodel.safety import SAFETY_NOTE


def raman_threshold_W(effective_area_m2: float, raman_gain_m_W: float, effective_length_m: float) -> float:
    """Stimulated-Raman threshold power 16·A_eff/(g_R·L_eff) (R. G. Smith, Appl. Opt. 11, 2489 (1972))."""
    return 16 * effective_area_m2 / (raman_gain_m_W * effective_length_m)


def _integral(values: np.ndarray, z: np.ndarray) -> float:
    """∫ values dz by the trapezoid rule."""
    return float(np.sum(0.5 * (values[1:] + values[:-1]) * np.diff(z)))


@dataclass
class FibreStage:
    """One step of a layout of fibres, as the run computed it: a loss, or a fibre with its solution.

    step : the step; input : the signal entering it (cw: power in W; pulsed: energy of each time
    slice, (Nt,) J); model : the fibre (None for a loss); cw: solution (with the signal) and
    pump_only (the pump alone, no signal); pulsed: train (the periodic steady state and its pulse)
    """

    step: Step
    input: float | np.ndarray
    model: F.FibreModel | None = None
    solution: steady_state.CWSolution | None = None
    pump_only: steady_state.CWSolution | None = None
    train: PulseTrainSolution | None = None


@dataclass
class StageFigures:
    """What the summary reads of one fibre: the signal out (W; pulsed: the mean power, or the pulse
    energy for a single pulse), the ASE leaving each end (W), the peak power (W), the small-signal gain
    before the signal (dB), the effective length (m) and the on-axis peak per unit power of the mode
    2/(πw²) (1/m²); cw: the output figures of the steady state."""

    signal_out: float
    ase_forward_W: float
    ase_backward_W: float
    peak_power_W: float
    gain_free_dB: float
    effective_length_m: float
    peak_axis_per_m2: float
    output: dict[str, float] | None = None


def _peak_factor(config: Config) -> np.ndarray | None:
    """The pulse's true peak over each time slice's mean (kernels/beam_shapes.slice_peak_factors)."""
    if config.mode == "cw" or config.seed.duration_s is None:
        return None
    return beam_shapes.slice_peak_factors(config.seed.shape, config.grid.time_slices, config.seed.pulse_trace)


def stage_figures(stage: FibreStage, cw: bool, factor: np.ndarray | None = None) -> StageFigures:
    """The figures of one fibre stage (both modes), SI; pulsed peaks at the pulse's true peak inside
    each time slice (``factor``)."""
    model = stage.model
    s = model.signal
    z = np.linspace(0.0, model.length_m, model.slices + 1)
    w2 = math.pi * model.mode_radius_m ** 2
    if cw:
        fig = steady_state.output_figures(stage.solution)
        profile = stage.solution.power_W[s]
        values = dict(signal_out=fig["signal_out_W"], ase_forward_W=fig["ase_forward_W"],
                      ase_backward_W=fig["ase_backward_W"], peak_power_W=float(profile.max()),
                      gain_free_dB=model.signal_gain_dB(stage.pump_only.n2), output=fig)
    else:
        train = stage.train
        profile = train.pulse.energy_z_J
        values = dict(signal_out=float(train.pulse.energy_out_J.sum()) * (train.repetition_rate_Hz or 1.0),
                      ase_forward_W=train.between.ase_forward_W, ase_backward_W=train.between.ase_backward_W,
                      peak_power_W=true_peak(train.pulse.energy_out_J / train.dt_s, factor),
                      gain_free_dB=model.signal_gain_dB(train.n2_before))
    length = _integral(profile, z) / profile[-1] if profile[-1] > 0 else model.length_m
    return StageFigures(effective_length_m=length, peak_axis_per_m2=2.0 / w2, **values)


def _fibre_warnings(config: Config, stage: FibreStage, fig: StageFigures, warnings: list[str]) -> None:
    """The warnings of one fibre: modes (V number), ASE, self-focusing and stimulated Raman."""
    model = stage.model
    medium = config.medium(model.name)
    v = model.v_number
    if v is not None and v > SINGLE_MODE_CUTOFF_V:
        warnings.append(warning("fibre-modes", f"medium {model.name}: V = {v:.2f} at the signal: the core guides more than the fundamental "
                        f"mode; the model assumes the signal in the fundamental mode alone (a Gaussian of "
                        f"Marcuse's width, fitted for V from {MARCUSE_VALID_V[0]:g} to {MARCUSE_VALID_V[1]:g})"))
    elif v is not None and v < MARCUSE_VALID_V[0]:
        warnings.append(warning("fibre-modes", f"medium {model.name}: V = {v:.2f} at the signal: weakly guided; Marcuse's mode-field "
                        f"formula is fitted for V from {MARCUSE_VALID_V[0]:g} to {MARCUSE_VALID_V[1]:g}"))
    if not medium.fibre.ase and fig.gain_free_dB > config.limits.gain_without_ase_dB:
        warnings.append(warning("ase", f"medium {model.name}: ase = false, and the small-signal gain before the signal is "
                        f"{fig.gain_free_dB:.1f} dB (above {config.limits.gain_without_ase_dB:g} dB, common "
                        f"practice): ASE would take much of the pump; set ase = true"))
    ase = fig.ase_forward_W + fig.ase_backward_W
    comparable = config.mode == "cw" or config.seed.repetition_rate_Hz is not None   # mean powers on both sides
    if comparable and ase > config.limits.ase_fraction * max(fig.signal_out, 1e-300):
        warnings.append(warning("ase", f"medium {model.name}: ASE leaving the fibre ({ase:.3g} W, both ends) is "
                        f"{100 * ase / max(fig.signal_out, 1e-300):.0f} % of the signal's output (above "
                        f"{100 * config.limits.ase_fraction:g} %)"))
    mat = medium.material
    peak = fig.peak_power_W
    if mat.n2_m2_W > 0:
        pcr = critical_power_W(model.wavelength_m[model.signal], mat.refractive_index, mat.n2_m2_W)
        if peak > pcr:
            warnings.append(warning("self-focusing", f"medium {model.name}: peak power {peak:.3g} W above the self-focusing critical power "
                            f"{pcr:.3g} W (Marburger): the fibre's core would collapse the beam"))
    if mat.raman_gain_m_W:
        pth = raman_threshold_W(effective_area(model.mode_radius_m), mat.raman_gain_m_W, fig.effective_length_m)
        if peak > pth:
            warnings.append(warning("raman", f"medium {model.name}: peak power {peak:.3g} W above the stimulated-Raman threshold "
                            f"{pth:.3g} W (16·A_eff/(g_R·L_eff), L_eff = {fig.effective_length_m:.3g} m; the README's "
                            f"fibre section gives the source): power would move to the Stokes wavelength"))


def _stored_J(model: F.FibreModel, n2: np.ndarray) -> float:
    s, h = model.signal, model.slice_length_m
    ln_g = h * model.overlap[s][:, None] * ((model.sigma_e_m2[s] + model.sigma_a_m2[s]) * n2
                                            - model.sigma_a_m2[s]) * model.doping_per_m3[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        esat = np.where(model.overlap[s] > 0, model.saturation_energy_J(s), 0.0)
    return float(np.sum(esat[:, None] * np.clip(ln_g, 0.0, None)))


def _medium_entry(config: Config, stage: FibreStage, fig: StageFigures, cw: bool) -> dict[str, Any]:
    """A fibre's entry in the summary's ``media``."""
    model = stage.model
    medium = config.medium(model.name)
    s = model.signal
    entry: dict[str, Any] = {
        "name": model.name, "kind": "fibre", "material": medium.material.name, "length_m": model.length_m,
        "rings": model.rings, "mode_field_diameter_um": 2e6 * model.mode_radius_m,
        "signal_overlap": float(model.overlap[s].sum()),
        "saturation_energy_J": model.modal_saturation_energy_J(s),
        "small_signal_gain_dB": fig.gain_free_dB, "small_signal_gain_on_axis": 10 ** (fig.gain_free_dB / 10),
        "ase_forward_W": fig.ase_forward_W, "ase_backward_W": fig.ase_backward_W,
        "peak_power_W": fig.peak_power_W, "effective_length_m": fig.effective_length_m,
    }
    if model.v_number is not None:
        entry["v_number"] = model.v_number
    pumps = [i for i in (model.pump_forward, model.pump_backward) if i is not None]
    if pumps:
        entry["pump_overlap"] = float(model.overlap[pumps[0]].sum())
        entry["pump_power_W"] = float(model.launch_W[pumps].sum())
    if cw:
        out, sol = fig.output, stage.solution
        entry.update({"gain_dB": out["gain_dB"], "noise_figure_dB": out["noise_figure_dB"],
                      "pump_power_out_W": out["pump_out_W"], "absorbed_pump_power_W": out["pump_absorbed_W"],
                      "photon_balance_error": out["photon_balance_error"], "solver": sol.method,
                      "solver_iterations": sol.iterations, "solver_newton_steps": sol.newton_steps,
                      "solver_change": sol.change, "solver_tolerance": sol.tolerance})
    else:
        train = stage.train
        e_in = float(np.sum(stage.input))
        e_out = float(train.pulse.energy_out_J.sum())
        entry.update({"gain_dB": decibels(e_out, e_in),
                      "stored_energy_J": _stored_J(model, train.n2_before),
                      "stored_energy_final_J": _stored_J(model, train.n2_after),
                      "extracted_energy_J": train.pulse.extracted_J,
                      "pump_power_out_W": train.between.pump_out_W,
                      "absorbed_pump_power_W": train.between.pump_absorbed_W,
                      "b_integral_rad": true_peak(train.pulse.b_integral_rad, _peak_factor(config)),
                      "periods": train.periods, "period_residual": train.residual})
    return entry


@dataclass
class _Walk:
    """The signal followed through the layout: its value entering the next step (W or J), the on-axis
    peak per unit power of the mode it is in (1/m²), its peak power (pulsed, W), and the sums."""

    value: float
    axis: float
    peak_in: float
    lost: float = 0.0
    extracted: float = 0.0
    peak_axis: float = 0.0
    peak_fluence: float = 0.0
    chain: list = field(default_factory=list)   # (gain, noise factor) of each element, for Friis


def decibels(out: float, into: float) -> float | None:
    """10·log10(out/into), or None (null in summary.json) when either is not above zero: a signal that
    leaves nothing has no gain in dB."""
    return 10.0 * math.log10(out / into) if out > 0 and into > 0 else None


def summarise_fibre(config: Config, stages: list[FibreStage], x_m: np.ndarray) -> dict[str, Any]:
    """The summary.json dict of a layout of fibres (cw or pulsed)."""
    cw = config.mode == "cw"
    seed = config.seed
    warnings: list[str] = list(trace_warnings(config))     # a measured pulse (none in cw)
    steps, media = [], []
    fibres = [st for st in stages if st.model is not None]
    # on-axis peak per unit power or energy, 2/(πw²), of the mode the beam is in (before a fibre: the first's)
    walk = _Walk(value=float(seed.power_W) if cw else float(seed.energy_J),
                 axis=2.0 / (math.pi * fibres[0].model.mode_radius_m ** 2),
                 peak_in=0.0 if cw else true_peak(np.asarray(stages[0].input), _peak_factor(config))
                 / fibres[0].train.dt_s)
    figures = []
    for st in stages:
        if st.model is None:
            steps.append(_loss_entry(config, st.step, walk, cw, warnings))
            continue
        fig = stage_figures(st, cw, _peak_factor(config))
        figures.append(fig)
        media.append(_medium_entry(config, st, fig, cw))
        _fibre_warnings(config, st, fig, warnings)
        walk.peak_axis = max(walk.peak_axis, fig.peak_power_W * fig.peak_axis_per_m2)
        steps.append((_cw_fibre_entry if cw else _pulsed_fibre_entry)(config, st, fig, walk, warnings))
        walk.axis = fig.peak_axis_per_m2
    summary: dict[str, Any] = {"mode": config.mode, "title": config.title, "layout": "fibre"}
    pump_in = sum(m.get("pump_power_W", 0.0) for m in media)
    common = {"pump_power_W": pump_in,
              "pump_power_out_W": sum(m.get("pump_power_out_W", 0.0) for m in media),
              "absorbed_pump_power_W": sum(m.get("absorbed_pump_power_W", 0.0) for m in media),
              "ase_forward_W": figures[-1].ase_forward_W if figures else 0.0,
              "ase_backward_W": figures[0].ase_backward_W if figures else 0.0,
              "peak_intensity_W_cm2": walk.peak_axis * W_CM2}
    if cw:
        summary.update(_cw_totals(config, fibres, walk, steps, media, pump_in), **common)
    else:
        summary.update(_pulsed_totals(config, stages, fibres, walk, media, warnings), **common)
    summary.update({"warnings": warnings, "steps": steps, "media": media, "safety": SAFETY_NOTE})
    return summary


def _loss_entry(config: Config, step: Step, walk: _Walk, cw: bool, warnings: list[str]) -> dict[str, Any]:
    """A loss step's summary entry; the signal walks on through it."""
    value = walk.value
    out = value * step.transmission
    entry = {"index": step.index, "kind": "loss", "medium": None, "gain": step.transmission,
             "b_integral_rad": 0.0}
    if cw:
        entry.update(power_in_W=value, power_out_W=out, passive_loss_W=value - out,
                     peak_intensity_W_cm2=value * walk.axis * W_CM2)
    else:
        entry.update(energy_in_J=value, energy_out_J=out, peak_fluence_J_cm2=value * walk.axis * J_CM2,
                     peak_intensity_W_cm2=walk.peak_in * walk.axis * W_CM2, clipped_energy_J=0.0,
                     passive_loss_J=value - out)
        walk.peak_in *= step.transmission
    _optic_damage(config, step, value * walk.axis, walk.peak_in * walk.axis, warnings)
    walk.chain.append((step.transmission, 1.0 / step.transmission))
    walk.lost += value - out
    walk.value = out
    return entry


def _cw_fibre_entry(config: Config, st: FibreStage, fig: StageFigures, walk: _Walk,
                    warnings: list[str]) -> dict[str, Any]:
    """A cw fibre's step entry (power in and out, gain, peak intensity, nonlinear phase, loss), its
    damage warning, and its share of the power balance and the noise cascade."""
    model, sol, out = st.model, st.solution, fig.output
    s = model.signal
    z = np.linspace(0.0, model.length_m, model.slices + 1)
    b = (2 * math.pi / model.wavelength_m[s] * config.medium(model.name).material.n2_m2_W
         * _integral(sol.power_W[s], z) / effective_area(model.mode_radius_m))
    walk.chain.append((out["gain"], out["noise_figure"]))
    # the signal's power balance, slice by slice: P_out − P_in = h·Σ (g − l)·P̄
    passive = float(model.slice_length_m * np.sum(model.loss_per_m[s] * sol.mean_power_W[s]))
    walk.extracted += float(model.slice_length_m * np.sum((model.growth(sol.n2, [s])[0] + model.loss_per_m[s])
                                                          * sol.mean_power_W[s]))
    walk.lost += passive
    damage = config.medium(model.name).material.damage_intensity_W_m2
    limits = config.limits
    peak_i = fig.peak_power_W * fig.peak_axis_per_m2
    if damage and peak_i > limits.damage_fraction * damage:
        warnings.append(warning("damage-intensity", f"{step_label(config.steps, st.step.index)}: peak intensity on the fibre's axis "
                        f"{peak_i * W_CM2:.3g} W/cm² is above {100 * limits.damage_fraction:g} % of the cw "
                        f"damage intensity of {config.medium(model.name).material.name} "
                        f"({damage * W_CM2:.3g} W/cm², common practice)"))
    entry = {"index": st.step.index, "kind": "pass", "medium": model.name, "power_in_W": walk.value,
             "power_out_W": out["signal_out_W"], "gain": out["gain"], "gain_dB": out["gain_dB"],
             "peak_intensity_W_cm2": peak_i * W_CM2, "b_integral_rad": b, "passive_loss_W": passive}
    walk.value = out["signal_out_W"]
    return entry


def _pulsed_fibre_entry(config: Config, st: FibreStage, fig: StageFigures, walk: _Walk,
                        warnings: list[str]) -> dict[str, Any]:
    """A pulsed fibre's step entry (energy in and out, gain, peaks, B-integral, loss) and its warnings."""
    model, train, value = st.model, st.train, walk.value
    out = float(train.pulse.energy_out_J.sum())
    b = true_peak(train.pulse.b_integral_rad, _peak_factor(config))
    peak_f = float(np.max(train.pulse.energy_z_J)) * fig.peak_axis_per_m2
    walk.peak_fluence = max(walk.peak_fluence, peak_f)
    walk.lost += train.pulse.loss_J
    walk.extracted += train.pulse.extracted_J
    entry = {"index": st.step.index, "kind": "pass", "medium": model.name, "energy_in_J": value,
             "energy_out_J": out, "gain": out / value if value > 0 else 0.0,
             "gain_dB": decibels(out, value),
             "peak_fluence_J_cm2": peak_f * J_CM2,
             "peak_intensity_W_cm2": fig.peak_power_W * fig.peak_axis_per_m2 * W_CM2,
             "b_integral_rad": b, "clipped_energy_J": 0.0, "passive_loss_J": train.pulse.loss_J}
    _pulse_warnings(config, st.step, model, peak_f, b, warnings)
    walk.peak_in = fig.peak_power_W
    walk.value = out
    return entry


def _cw_totals(config: Config, fibres: list[FibreStage], walk: _Walk, steps: list[dict], media: list[dict],
               pump_in: float) -> dict[str, Any]:
    """The layout's figures of a cw run: gain, noise figure (Friis), efficiency, balances, solver."""
    p_in, value, chain = float(config.seed.power_W), walk.value, walk.chain
    noise = chain[0][1] + sum((f - 1) / np.prod([g for g, _ in chain[:i]]) for i, (_, f) in enumerate(chain)
                              if i > 0)
    return {
        "input_power_W": p_in, "output_power_W": value, "gain": value / p_in,
        "gain_dB": decibels(value, p_in),
        "b_integral_rad": sum(st_["b_integral_rad"] for st_ in steps),
        "noise_figure_dB": 10 * math.log10(noise),
        "optical_efficiency": (value - p_in) / pump_in if pump_in > 0 else 0.0,
        "power_balance_error": (p_in + walk.extracted - value - walk.lost) / value,
        "photon_balance_error": max((abs(m["photon_balance_error"]) for m in media), default=0.0),
        "cw_iterations": sum(st.solution.iterations for st in fibres),
        "cw_residual": max((st.solution.change for st in fibres), default=0.0)}


def _pulsed_totals(config: Config, stages: list[FibreStage], fibres: list[FibreStage], walk: _Walk,
                   media: list[dict], warnings: list[str]) -> dict[str, Any]:
    """The layout's figures of a pulsed run: energies, stored and extracted energy, the output pulse,
    the B-integral (with its warning) and the energy balance."""
    seed, limits, value = config.seed, config.limits, walk.value
    e_in = float(seed.energy_J)
    rate = seed.repetition_rate_Hz
    last = fibres[-1].train
    out_power = last.pulse.energy_out_J / last.dt_s * math.prod(
        st.step.transmission for st in stages[stages.index(fibres[-1]) + 1:])
    duration = pulse_shape.fwhm_s(*pulse_shape.resampled(out_power, seed.shape, seed.duration_s,
                                                                   trace=seed.pulse_trace))
    b_total = true_peak(sum(st.train.pulse.b_integral_rad for st in fibres), _peak_factor(config))
    if b_total > limits.b_integral_total_rad:
        warnings.append(warning("b-integral-total", f"layout: accumulated B-integral {b_total:.2f} rad, above {limits.b_integral_total_rad:g} "
                        f"rad in total (common practice)"))
    stored = sum(m["stored_energy_J"] for m in media)
    return {
        "input_energy_J": e_in, "output_energy_J": value, "gain": value / e_in if e_in > 0 else 0.0,
        "gain_dB": decibels(value, e_in),
        "stored_energy_J": stored, "stored_energy_final_J": sum(m["stored_energy_final_J"] for m in media),
        "extracted_energy_J": walk.extracted,
        "extraction_efficiency": (value - e_in) / stored if stored > 0 else 0.0,
        "lost_energy_J": walk.lost, "peak_fluence_J_cm2": walk.peak_fluence * J_CM2, "b_integral_rad": b_total,
        "energy_balance_error": (e_in + walk.extracted - value - walk.lost) / value if value > 0 else 0.0,
        "pulse_duration_ns": seed.duration_s * 1e9, "time_slice_ns": last.dt_s * 1e9,
        "repetition_rate_Hz": rate,
        "input_power_W": e_in * rate if rate else None, "output_power_W": value * rate if rate else None,
        "output_peak_power_W": true_peak(out_power, _peak_factor(config)),
        "output_pulse_duration_ns": duration * 1e9, "output_duration_ns": duration * 1e9}


def _optic_damage(config: Config, step, axis_value: float, axis_peak_W_m2: float, warnings: list[str]) -> None:
    """A loss step's optic against its damage data: the on-axis fluence (pulsed, scaled to the pulse
    length) or intensity (cw) of the beam reaching it."""
    limits = config.limits
    if config.mode == "cw":
        damage = step.damage_intensity_W_m2
        if damage and axis_value > limits.damage_fraction * damage:
            warnings.append(warning("damage-intensity", f"{step_label(config.steps, step.index)}: peak intensity {axis_value * W_CM2:.3g} W/cm² is above "
                            f"{100 * limits.damage_fraction:g} % of the cw damage intensity of this optic "
                            f"({damage * W_CM2:.3g} W/cm², common practice)"))
        return
    if step.damage_fluence_J_m2:
        scaled = scaled_damage_fluence(step.damage_fluence_J_m2, step.damage_pulse_s, config.seed.duration_s,
                                       limits.damage_scaling_exponent)
        if axis_value > limits.damage_fraction * scaled:
            warnings.append(warning("damage-fluence", f"{step_label(config.steps, step.index)}: peak fluence {axis_value * J_CM2:.3g} J/cm² on the axis "
                            f"is above {100 * limits.damage_fraction:g} % of the damage fluence of this optic "
                            f"(estimated {scaled * J_CM2:.3g} J/cm² at {config.seed.duration_s * 1e9:g} ns, "
                            f"common practice)"))


def _pulse_warnings(config: Config, step, model: F.FibreModel, peak_fluence_J_m2: float, b_rad: float,
                    warnings: list[str]) -> None:
    limits, seed = config.limits, config.seed
    mat = config.medium(model.name).material
    if mat.damage_fluence_J_m2:
        scaled = scaled_damage_fluence(mat.damage_fluence_J_m2, mat.damage_pulse_s, seed.duration_s,
                                       limits.damage_scaling_exponent)
        if peak_fluence_J_m2 > limits.damage_fraction * scaled:
            warnings.append(warning("damage-fluence", f"{step_label(config.steps, step.index)}: peak fluence on the fibre's axis "
                            f"{peak_fluence_J_m2 * J_CM2:.3g} J/cm² is above {100 * limits.damage_fraction:g} % of "
                            f"the damage fluence of {mat.name} (estimated {scaled * J_CM2:.3g} J/cm² at "
                            f"{seed.duration_s * 1e9:g} ns, common practice); the output facet is most at risk"))
    if b_rad > limits.b_integral_step_rad:
        warnings.append(warning("b-integral-step", f"{step_label(config.steps, step.index)}: B-integral {b_rad:.2f} rad, above "
                        f"{limits.b_integral_step_rad:g} rad (common practice): self-phase modulation broadens the "
                        f"spectrum; a larger mode area or a longer (stretched) pulse lowers it"))
