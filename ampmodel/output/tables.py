"""What the command line prints of a run: its tables (media, steps, totals) built from summary.json,
as lines of text; ``cli.py`` prints them."""
from __future__ import annotations

import math

from ampmodel.safety import SAFETY_NOTE


def quantity_text(value: float, unit: str) -> str:
    """``value`` with the SI prefix that suits it: ``quantity_text(0.0123, "J")`` is ``"12.3 mJ"``."""
    for scale, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n")):
        if abs(value) >= scale:
            return f"{value / scale:.4g} {prefix}{unit}"
    return f"{value:.3g} {unit}"


def media_lines(summary: dict) -> list[str]:
    """One line per bulk medium: its small-signal gain, stored energy (cw: saturated gain) and pump."""
    out: list[str] = []
    cw = summary["mode"] == "cw"
    for m in summary["media"]:
        line = f"  medium {m['name']} ({m['material']}): on-axis small-signal gain {m['small_signal_gain_on_axis']:.4g}"
        if cw:
            line += f", saturated {m['saturated_gain_on_axis']:.4g}"
            if "absorbed_pump_power_W" in m:
                line += (f", absorbed pump {quantity_text(m['absorbed_pump_power_W'], 'W')} of "
                         f"{quantity_text(m['pump_power_W'], 'W')}, photon balance error {m['photon_balance_error']:.1e}")
        else:
            line += f", stored energy {quantity_text(m['stored_energy_J'], 'J')}"
            if "absorbed_pump_energy_J" in m:
                line += f", absorbed pump {quantity_text(m['absorbed_pump_energy_J'], 'J')}"
        out.append(line)
    return out


def cw_table_lines(summary: dict) -> list[str]:
    """The steps of a cw run in power, and its totals."""
    out: list[str] = []
    out.append(f"{'step':>4}  {'kind':<8} {'medium':<10} {'power in':>11} {'power out':>11} {'gain':>8} {'peak W/cm²':>10} "
               f"{'damage':>6}")
    for s in summary["steps"]:
        kind = s["kind"] + (" rev" if s.get("reverse") else "")
        margin = s.get("damage_margin")
        out.append(f"{s['index']:>4}  {kind:<8} {(s['medium'] or ''):<10} {quantity_text(s['power_in_W'], 'W'):>11} "
                   f"{quantity_text(s['power_out_W'], 'W'):>11} {s['gain']:>8.4g} {s['peak_intensity_W_cm2']:>10.3g} "
                   f"{'-' if margin is None else f'{margin:.2f}':>6}")
    line = (f"input {quantity_text(summary['input_power_W'], 'W')} -> output {quantity_text(summary['output_power_W'], 'W')} "
            f"(gain {summary['gain']:.4g})")
    if "optical_efficiency" in summary:
        line += (f"; absorbed pump {quantity_text(summary['absorbed_pump_power_W'], 'W')}, optical-to-optical efficiency "
                 f"{100 * summary['optical_efficiency']:.1f} %")
    out.append(line)
    out.append(f"peak intensity {summary['peak_intensity_W_cm2']:.3g} W/cm², steady state after {summary['cw_iterations']} "
               f"sweeps (residual {summary['cw_residual']:.1e}), power balance error {summary['power_balance_error']:.1e}")
    out.append(damage_line(summary))
    return out


def _db(value: float | None) -> str:
    """A gain in dB, or what a null one means (nothing leaves the fibre)."""
    return "none: nothing leaves" if value is None else f"{value:.2f} dB"


def fibre_lines(summary: dict) -> list[str]:
    """The table of a layout of fibres (cw or pulsed)."""
    out: list[str] = []
    cw = summary["mode"] == "cw"
    for m in summary["media"]:
        when = "with the pump alone" if cw else "before a pulse"
        line = (f"  fibre {m['name']} ({m['material']}, {m['length_m']:g} m): mode-field diameter "
                f"{m['mode_field_diameter_um']:.3g} µm, overlap {m['signal_overlap']:.3f}, small-signal gain "
                f"{m['small_signal_gain_dB']:.1f} dB {when}")
        if "pump_power_W" in m:
            line += f", pump {quantity_text(m['pump_power_W'], 'W')} (absorbed {quantity_text(m['absorbed_pump_power_W'], 'W')})"
        out.append(line)
    unit, key = ("W", "power") if cw else ("J", "energy")
    out.append(f"{'step':>4}  {'kind':<8} {'medium':<10} {key + ' in':>11} {key + ' out':>11} {'gain dB':>8}")
    for s in summary["steps"]:
        gain = 10 * math.log10(s["gain"]) if s["gain"] > 0 else float("-inf")
        out.append(f"{s['index']:>4}  {s['kind']:<8} {(s['medium'] or ''):<10} {quantity_text(s[key + '_in_' + unit], unit):>11} "
                   f"{quantity_text(s[key + '_out_' + unit], unit):>11} {gain:>8.2f}")
    if cw:
        out.append(f"input {quantity_text(summary['input_power_W'], 'W')} -> output {quantity_text(summary['output_power_W'], 'W')} "
                   f"(gain {_db(summary['gain_dB'])}, noise figure {summary['noise_figure_dB']:.2f} dB); residual pump "
                   f"{quantity_text(summary['pump_power_out_W'], 'W')}, ASE forward {quantity_text(summary['ase_forward_W'], 'W')}, "
                   f"backward {quantity_text(summary['ase_backward_W'], 'W')}")
        out.append(f"steady state: {summary['cw_iterations']} iterations, last change {summary['cw_residual']:.1e}; "
                   f"photon balance error {summary['photon_balance_error']:.1e}")
        return out
    rate = summary.get("repetition_rate_Hz")
    out.append(f"input {quantity_text(summary['input_energy_J'], 'J')} -> output {quantity_text(summary['output_energy_J'], 'J')} "
               f"(gain {_db(summary['gain_dB'])}), peak power {quantity_text(summary['output_peak_power_W'], 'W')}, "
               f"FWHM {summary['output_pulse_duration_ns']:.3g} ns"
               + (f", mean power {quantity_text(summary['output_power_W'], 'W')} at {quantity_text(rate, 'Hz')}" if rate else
               " (a single pulse)"))
    out.append(f"stored {quantity_text(summary['stored_energy_J'], 'J')} -> {quantity_text(summary['stored_energy_final_J'], 'J')}, "
               f"B-integral {summary['b_integral_rad']:.3g} rad, peak fluence {summary['peak_fluence_J_cm2']:.3g} J/cm² "
               f"(axis), residual pump {quantity_text(summary['pump_power_out_W'], 'W')}, ASE forward "
               f"{quantity_text(summary['ase_forward_W'], 'W')}, backward {quantity_text(summary['ase_backward_W'], 'W')}, energy balance "
               f"error {summary['energy_balance_error']:.1e}")
    return out


def table_lines(summary: dict) -> list[str]:
    """The steps of a bulk run (energy; cw: power), repeats, a pulse train, and its totals."""
    if summary["mode"] == "cw":
        return cw_table_lines(summary)
    out: list[str] = []
    out.append(f"{'step':>4}  {'kind':<8} {'medium':<10} {'energy in':>11} {'energy out':>11} {'gain':>8} "
               f"{'peak J/cm²':>10} {'B rad':>6} {'damage':>6}")
    for s in summary["steps"]:
        kind = s["kind"] + (" rev" if s.get("reverse") else "")
        margin = s.get("damage_margin")
        out.append(f"{s['index']:>4}  {kind:<8} {(s['medium'] or ''):<10} {quantity_text(s['energy_in_J'], 'J'):>11} "
                   f"{quantity_text(s['energy_out_J'], 'J'):>11} {s['gain']:>8.4g} {s['peak_fluence_J_cm2']:>10.3g} "
                   f"{s['b_integral_rad']:>6.2f} {'-' if margin is None else f'{margin:.2f}':>6}")
    out.append(f"input {quantity_text(summary['input_energy_J'], 'J')} -> output {quantity_text(summary['output_energy_J'], 'J')} "
               f"(gain {summary['gain']:.4g}); stored {quantity_text(summary['stored_energy_J'], 'J')} -> "
               f"{quantity_text(summary['stored_energy_final_J'], 'J')}, extraction {100 * summary['extraction_efficiency']:.1f} %")
    for s in summary["steps"]:
        if s["kind"] == "repeat":
            rule = "at the peak" if s.get("until") == "peak" else "after the count"
            out.append(f"step {s['index']} repeat: {s['round_trip_count']} round trips of {s['round_trip_ns']:.4g} ns, "
                       f"dumped {rule}; build-up time {s['build_up_time_ns']:.4g} ns")
    train = summary.get("train")
    if train:
        out.append(train_line(train))
    if "output_transform_limit_ps" in summary:
        out.append(f"spectrum: centre {summary['output_centre_nm']:.5g} nm, FWHM {summary['output_bandwidth_nm']:.4g} nm; "
                   f"it supports pulses down to {summary['output_transform_limit_ps'] * 1e3:.4g} fs (transform "
                   f"limit of a Gaussian spectrum, an estimate)")
    out.append(f"peak fluence {summary['peak_fluence_J_cm2']:.3g} J/cm², peak intensity "
               f"{summary['peak_intensity_W_cm2']:.3g} W/cm², B-integral {summary['b_integral_rad']:.3f} rad, "
               f"energy balance error {summary['energy_balance_error']:.1e}")
    if summary.get("output_duration_ns") is not None:
        out.append(f"output pulse: FWHM {summary['output_duration_ns']:.4g} ns, peak power "
                   f"{quantity_text(summary['output_peak_power_W'], 'W')}")
    out.append(damage_line(summary))
    return out


def damage_line(summary: dict) -> str:
    """The worst damage margin (peak fluence over the scaled damage fluence) and where, and the
    B-integral against its budget."""
    worst = summary.get("worst_damage_margin")
    what = "damage intensity" if summary["mode"] == "cw" else "damage fluence"
    line = (f"damage margin: no surface the beam meets has a {what}" if worst is None else
            f"damage margin (peak {'intensity over the damage intensity' if summary['mode'] == 'cw' else 'fluence over the scaled damage fluence'}; each step's in the table): worst "
            f"{worst:.2g}, at {summary['worst_damage_step']}")
    if summary.get("b_integral_margin") is not None:
        line += f"; B-integral at {summary['b_integral_margin']:.2g} of its budget"
    return line


def notes_lines(summary: dict) -> list[str]:
    """The run's warnings, then its notes, one line each."""
    out: list[str] = []
    for key in ("warnings", "notes"):
        if summary.get(key):
            out.append(f"{key}:")
            out += [f"  - {text}" for text in summary[key]]
    return out


def train_line(train: dict) -> str:
    """The line of a pulse train: its steady pulse, or the cycle of pulses it settles to, and the pulses
    the train from its start takes to reach it."""
    n = train["pulses_to_steady_state"]
    if n is None:
        settle = "the pulses do not settle to it (see the warnings)"
    else:
        est = " (estimated)" if train["pulses_to_steady_state_estimated"] else ""
        settle = f"within {train['tolerance']:g} after {n} pulse{'s' if n != 1 else ''}{est}"
    rate = quantity_text(train['repetition_rate_Hz'], 'Hz')
    average = quantity_text(train['average_power_W'], 'W')
    cycle = train.get("cycle_pulse_energies_J") or []
    if len(cycle) > 1:
        energies = ", ".join(quantity_text(e, "J") for e in cycle)
        return (f"pulse train at {rate}: cycle of {len(cycle)} pulses: {energies}, average {average}; stored "
                f"before the largest pulse {quantity_text(train['stored_energy_before_pulse_J'], 'J')} (the "
                f"pulse the table describes); {settle}")
    return (f"pulse train at {rate}: steady state {quantity_text(train['pulse_energy_J'], 'J')} per pulse, "
            f"{average} average; stored before each pulse "
            f"{quantity_text(train['stored_energy_before_pulse_J'], 'J')}; {settle}")


def seed_from_line(origin: dict) -> str:
    """Where a chained stage's seed came from (summary ``seed_from``)."""
    steps = origin.get("step_count")
    return (f"seed: from {origin.get('file')}, the beam after its step {origin.get('step')} ({origin.get('step_kind')}; "
            f"steps 0 to {steps - 1 if isinstance(steps, int) else '?'}): {origin.get('beam')} (written "
            f"{origin.get('created_utc')} by ampmodel {origin.get('software_version')}; sha256 "
            f"{str(origin.get('sha256'))[:12]}...)")


def run_report_lines(s: dict) -> list[str]:
    """What `ampmodel run` prints of a run: its table, its warnings and the safety note."""
    out: list[str] = [seed_from_line(s["seed_from"])] if isinstance(s.get("seed_from"), dict) else []
    if s.get("layout") == "fibre":
        out += fibre_lines(s)
    else:
        out += media_lines(s) + table_lines(s)
    out += notes_lines(s)
    out.append(SAFETY_NOTE)
    return out
