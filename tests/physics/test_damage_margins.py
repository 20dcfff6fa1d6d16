"""Figures to size against: the fluence after a step that changes the beam, the damage margin of every
surface, the self-focusing check as a note or a warning, and the codes and severities of the messages.

References
----------
Geometrical image of a 4f relay of magnification M: F_out(x) = F_in(−x/M)/M² (energy conserved), so a
Gaussian beam of 1/e² radius w and energy E has the peak fluence 2E/(π·M²·w²) after it.
Damage fluence scaled to the pulse length: F_d(τ) = F_d(τ_ref)·(τ/τ_ref)^0.5 (common practice, the
diffusion-limited scaling of ns damage; e.g. B. C. Stuart et al., Phys. Rev. B 53, 1749 (1996) for where it holds).
Critical power and collapse distance: J. H. Marburger, Prog. Quantum Electron. 4, 35 (1975):
P_cr = 3.77·λ²/(8π·n0·n2), z_c = 0.367·k·a² / sqrt((sqrt(P/P_cr) − 0.852)² − 0.0219).
"""
from __future__ import annotations

import copy
import math
import re
from pathlib import Path

import pytest

from ampmodel import notices
from ampmodel.config.load import load_config
from ampmodel.simulation import simulate

J_CM2 = 1e-4
CONFIGS = Path(__file__).resolve().parents[2] / "configs"


def relay_config(magnification: float = 0.3, energy_J: float = 0.035, relay_damage: float | None = None) -> dict:
    """A 4 mm Gaussian beam demagnified by a relay onto a short Nd:YAG rod (damage 10 J/cm² at 10 ns);
    256 pixels across 12 mm: 25 across the 1.2 mm image."""
    relay = {"kind": "relay", "magnification": magnification}
    if relay_damage is not None:
        relay |= {"damage_fluence_J_cm2": relay_damage, "damage_pulse_ns": 10.0}
    return {
        "title": "relay onto a rod",
        "grid": {"width_mm": 12.0, "points": 256, "time_slices": 16},
        "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 20.0, "diameter_mm": 6.0, "slices": 4,
                    "small_signal_gain": 1.2}],
        "seed": {"energy_J": energy_J, "duration_ns": 10.0, "shape": "gaussian", "profile": "gaussian",
                 "diameter_mm": 4.0},
        "step": [relay, {"kind": "pass", "medium": "rod"}],
    }


def by_code(summary: dict, code: str, severity: str | None = None) -> list[dict]:
    return [n for n in summary["notices"] if n["code"] == code and (severity is None or n["severity"] == severity)]


def test_a_relay_reports_the_fluence_after_it_and_the_medium_after_it_is_warned():
    """M = 0.3: the relay's peak fluence is 1/M² = 11.1 times its input's, within 1.5 % (the peak pixel
    lies dx/2 off the axis in x and y: exp(−(dx/(M·w))²) = 0.994 of the axis value at the image's
    size), and exactly the sampled closed form 2E/(π·M²·w²)·exp(−(dx/(M·w))²) within 0.5 %; the rod after it (61 % of its damage fluence) is warned
    about, the relay (no damage data) is not checked and the beam before it (5.6 %) is harmless."""
    summary = simulate(load_config(relay_config())).summary
    relay, rod = summary["steps"]
    w = 2e-3
    f_in_closed = 2 * 0.035 / (math.pi * w ** 2) * J_CM2
    assert relay["peak_fluence_in_J_cm2"] == pytest.approx(f_in_closed, rel=0.02)
    assert relay["peak_fluence_J_cm2"] / relay["peak_fluence_in_J_cm2"] == pytest.approx(1 / 0.3 ** 2, rel=0.015)
    dx = 12e-3 / 256
    sampled = f_in_closed / 0.3 ** 2 * math.exp(-(dx / (0.3 * w)) ** 2)
    assert relay["peak_fluence_J_cm2"] == pytest.approx(sampled, rel=0.005)
    assert relay["damage_margin"] is None
    assert rod["peak_fluence_in_J_cm2"] == pytest.approx(relay["peak_fluence_J_cm2"], rel=1e-12)
    damage = by_code(summary, "damage-fluence", "warning")
    assert len(damage) == 1 and damage[0]["text"].startswith("step 1 (pass rod): peak fluence")
    assert damage[0]["text"] in summary["warnings"]
    assert rod["damage_margin"] > 0.5
    # the same beam without the relay stays far below the warning
    raw = relay_config(magnification=1.0)
    quiet = simulate(load_config(raw)).summary
    assert not by_code(quiet, "damage-fluence") and quiet["worst_damage_margin"] < 0.1


def test_damage_margins_are_the_peak_over_the_scaled_damage_fluence():
    """Each step's damage_margin = max(fluence entering, fluence inside and leaving) / (F_d·(τ/τ_ref)^0.5),
    τ the FWHM of the pulse the step gives; a relay with its own damage fluence is checked on the
    demagnified beam; worst_damage_margin is the largest, at its step."""
    summary = simulate(load_config(relay_config(relay_damage=20.0))).summary
    relay, rod = summary["steps"]
    for entry, quoted in ((relay, 20.0), (rod, 10.0)):
        tau = entry["output_duration_ns"]
        scaled = quoted * (tau / 10.0) ** 0.5
        assert entry["damage_fluence_J_cm2"] == pytest.approx(scaled, rel=1e-12)
        peak = max(entry["peak_fluence_J_cm2"], entry["peak_fluence_in_J_cm2"])
        assert entry["damage_margin"] == pytest.approx(peak / scaled, rel=1e-12)
    worst = max(relay["damage_margin"], rod["damage_margin"])
    assert summary["worst_damage_margin"] == worst
    assert summary["worst_damage_step"] == ("step 1 (pass rod)" if rod["damage_margin"] == worst else "step 0 (relay)")
    assert summary["b_integral_margin"] == pytest.approx(summary["b_integral_rad"] / 3.0, rel=1e-12)
    assert rod["b_integral_margin"] == pytest.approx(rod["b_integral_rad"] / 2.0, rel=1e-12)


def test_a_muted_code_leaves_warnings_but_stays_in_notices():
    raw = relay_config()
    raw["limits"] = {"mute": ["damage-fluence"]}
    summary = simulate(load_config(raw)).summary
    assert not any("damage fluence" in w for w in summary["warnings"])
    (muted,) = by_code(summary, "damage-fluence")
    assert muted["muted"] is True and muted["severity"] == "warning"


# ------------------------------------------------------------------------------------------------
# self-focusing
# ------------------------------------------------------------------------------------------------

def long_rod_config(factor: float | None = None) -> dict:
    """Invented case: 100 ps, 10 mJ pulses through a 150 mm Nd:YAG rod twice, in a 2 mm beam: peak power
    about 100 × P_cr, a collapse distance of a few tenths of a metre against 0.3 m of rod."""
    raw = {
        "title": "long rod, short pulse",
        "grid": {"width_mm": 8.0, "points": 64, "time_slices": 16},
        "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 150.0, "diameter_mm": 6.0, "slices": 8,
                    "small_signal_gain": 3.0}],
        "seed": {"energy_J": 0.010, "duration_ns": 0.1, "shape": "gaussian", "profile": "gaussian",
                 "diameter_mm": 2.0},
        "step": [{"kind": "pass", "medium": "rod"}, {"kind": "pass", "medium": "rod", "reverse": True}],
    }
    if factor is not None:
        raw["limits"] = {"self_focusing_length_factor": factor}
    return raw


def marburger_m(wavelength_m: float, index: float, radius_m: float, ratio: float) -> float:
    k = 2 * math.pi * index / wavelength_m
    return 0.367 * k * radius_m ** 2 / math.sqrt((math.sqrt(ratio) - 0.852) ** 2 - 0.0219)


def test_a_long_high_power_case_is_warned_about_self_focusing():
    """The collapse distance, recomputed here from the step's peak power over P_cr and its D4σ radius,
    is below twice the 0.3 m of rod: a warning, one line, with the path; with [limits] self_focusing_length_factor small it is a note."""
    summary = simulate(load_config(long_rod_config())).summary
    (sf,) = by_code(summary, "self-focusing")
    assert sf["severity"] == "warning" and "\n" not in sf["text"] and sf["text"] in summary["warnings"]
    step = summary["steps"][1]                     # the second pass has the larger power
    assert "in step 1 (pass rod, reverse)" in sf["text"]
    ratio = step["peak_power_W"] / summary["media"][0]["critical_power_W"]
    radius = 0.25e-3 * (step["d4sigma_x_mm"] + step["d4sigma_y_mm"])   # saturation widens it: 2.4 mm
    z_quoted = float(re.search(r"collapse distance, about ([0-9.e+-]+) m", sf["text"]).group(1))
    assert ratio > 50
    assert z_quoted == pytest.approx(marburger_m(1064e-9, 1.82, radius, ratio), rel=2e-3)   # 3 digits quoted
    assert z_quoted < 2 * 0.3 and "0.3 m of medium travelled above it" in sf["text"]
    relaxed = simulate(load_config(long_rod_config(factor=0.1))).summary
    (sf,) = by_code(relaxed, "self-focusing")
    assert sf["severity"] == "note" and sf["text"] in relaxed["notes"] and sf["text"] not in relaxed["warnings"]


def test_the_demo_gives_a_self_focusing_note_not_a_warning():
    """The demo (10 ns, 5 × P_cr, collapse distance about 14 m against its 80 mm rod) notes it."""
    summary = simulate(load_config(CONFIGS / "single_pass_rod.toml")).summary
    (sf,) = by_code(summary, "self-focusing")
    assert sf["severity"] == "note" and sf["text"] in summary["notes"]
    assert not any("self-focusing" in w for w in summary["warnings"])


# ------------------------------------------------------------------------------------------------
# the messages themselves
# ------------------------------------------------------------------------------------------------

def test_notices_sort_into_warnings_and_notes_with_their_codes():
    msgs = [notices.warning("clipping", "step 0 (aperture): clips 3 %"), notices.note("time-slices", "grid: few"),
            notices.warning("clipping", "step 0 (aperture): clips 3 %"), "an older message without a code"]
    out = notices.sort_out(msgs, mute=["time-slices"])
    assert out["warnings"] == ["step 0 (aperture): clips 3 %", "an older message without a code"]
    assert out["notes"] == []
    assert [(n["code"], n["severity"], n["muted"]) for n in out["notices"]] == [
        ("clipping", "warning", False), ("time-slices", "note", True), ("other", "warning", False)]
    with pytest.raises(ValueError):
        notices.warning("no-such-code", "x")


def test_settle_keeps_the_summary_order_and_puts_notes_after_warnings():
    summary = {"a": 1, "warnings": [notices.note("repeat", "r"), notices.warning("pinhole", "p")], "z": 2}
    settled = notices.settle(copy.deepcopy(summary))
    assert list(settled) == ["a", "warnings", "notes", "notices", "z"]
    assert settled["warnings"] == ["p"] and settled["notes"] == ["r"]


def test_a_notice_survives_pickling_with_its_code():
    import pickle
    n = pickle.loads(pickle.dumps(notices.note("train", "train: a cycle of 2")))
    assert isinstance(n, notices.Notice) and (n.code, n.severity, str(n)) == ("train", "note", "train: a cycle of 2")
    assert n.prefixed("step 1").code == "train"
