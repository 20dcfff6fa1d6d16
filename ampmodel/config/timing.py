"""The checks of a run config that involve time, kept apart from ``load.py``: a ``repeat`` step's own
keys and its nested ``[[step.steps]]`` (checked with the same step check as the layout's steps, with
key paths like ``step[3].steps[1].transmission``), a pulse train's pumps and period, and the ion
density a quasi-three-level medium needs once time passes between steps.
"""
from __future__ import annotations

from typing import Any, Callable

from ampmodel.config import schema as S
from ampmodel.config.checks import Problems, given_keys, join_path, type_name
from ampmodel.description import Grid, Medium, Seed, Step, longest_layout_time_s, passed_media
from ampmodel.units import to_si

RATE_KEYS = ("repetition_rate_Hz", "repetition_rate_kHz")


def all_step_tables(items: list) -> list[tuple[str, dict]]:
    """(key path, table) of every step table as read, those inside repeats included."""
    out = []
    for i, item in enumerate(items):
        if isinstance(item, dict):
            out.append((f"step[{i}]", item))
            inner = item.get("steps") if item.get("kind") == "repeat" else None
            for j, sub in enumerate(inner if isinstance(inner, list) else ()):
                if isinstance(sub, dict):
                    out.append((f"step[{i}].steps[{j}]", sub))
    return out


def check(p: Problems, raw: dict, media: list[Medium], seed: Seed, steps: tuple[Step, ...]) -> None:
    """Checks that involve time: a pulse train's pumps and period, and the ion density that a
    quasi-three-level medium needs once time passes between steps. A layout of fibres solves its own
    pulse train (fibre/pulsed.py, checked in config/fibre.py): its steps take no time here."""
    path_of = {m.name: f"medium[{i}] ({m.name})" for i, m in enumerate(media)}
    passed = passed_media(steps)
    train = seed.repetition_rate_Hz is not None
    rate_key = next((k for k in RATE_KEYS if k in raw.get("seed", {})), RATE_KEYS[0])
    if "train" in raw and not (train and not any(m.kind == "fibre" for m in media)):
        p.add("train", "applies to pulse trains of bulk media only: give seed.repetition_rate_Hz, or remove the "
                       "[train] table")
    if any(m.kind == "fibre" for m in media):
        for path, item in all_step_tables(raw.get("step", [])):
            if "delay_ns" in item:
                p.add(join_path(path, "delay_ns"), "applies to bulk media only: the passes of a fibre layout take "
                                                   "no time of their own (remove it)", item["delay_ns"])
        return
    layout = longest_layout_time_s(steps)    # > 0 when any step or round trip takes time
    time_passes = train or layout > 0
    for m in media:
        if time_passes and m.material.quasi_three_level and not (m.doping_per_m3 or m.material.doping_per_m3):
            p.add(join_path(path_of[m.name], "doping_per_m3"),
                  "missing: time passes in this layout (delays, round trips or a pulse train), and a "
                  "quasi-three-level medium then relaxes towards absorption -sigma_a·Nt; give its ion "
                  "density doping_per_m3 in the medium or the material")
    if not train:
        return
    by_name = {m.name: m for m in media}
    for name in passed:
        if by_name[name].pump is None:
            p.add(path_of[name], f"a pulse train (seed.{rate_key}) needs a pump that restores the gain "
                                 "between pulses: give a [medium.pump] table (continuous = true for a CW pump)")
    period = 1.0 / seed.repetition_rate_Hz
    pump_s = max((m.pump.duration_s for m in media if m.name in passed and m.pump is not None
                  and not m.pump.continuous), default=0.0)
    if layout + pump_s > period:
        parts = []
        if layout > 0:
            parts.append(f"the layout's longest time ({_duration(layout)}: delays, spaces at length/c, repeats "
                         f"at their most round trips)")
        if pump_s:
            parts.append(f"the pump pulse ({_duration(pump_s)})")
        p.add(f"seed.{rate_key}", f"the period ({_duration(period)}) is shorter than "
                                  f"{' plus '.join(parts)}; lower the repetition rate (or a repeat's "
                                  f"max_count, or the pump's duration_us)", raw["seed"][rate_key])


def cavity_modes(p: Problems, raw: dict, grid: Grid) -> None:
    """A repeat's ``mode_diameter_mm`` against the grid: the fluence path only (the field path forms
    its own mode from the cavity's lenses), and a mode that fits the window."""
    items = raw.get("step") if isinstance(raw.get("step"), list) else []
    for i, item in enumerate(items):
        if not (isinstance(item, dict) and item.get("kind") == "repeat" and "mode_diameter_mm" in item):
            continue
        name = item.get("name") if isinstance(item.get("name"), str) else ""
        key = join_path(f"step[{i}] ({name})" if name else f"step[{i}]", "mode_diameter_mm")
        value = item["mode_diameter_mm"]
        if grid.diffraction:
            p.add(key, "applies without diffraction only: with grid.diffraction = true the field path forms the "
                       "cavity's own mode from its lenses (lens steps standing for the curved mirrors) round trip "
                       "after round trip; remove mode_diameter_mm, or set grid.diffraction = false", value)
        elif isinstance(value, (int, float)) and to_si("mode_diameter_mm", value) < 0.5 * grid.width_m / grid.points:
            p.add(key, f"the cavity mode is narrower than half a pixel ({grid.width_m / grid.points * 1e3:.3g} mm): "
                       "it would light no pixel; check the mode's diameter (1/e^2, in mm) or make the pixels finer",
                  value)
        elif isinstance(value, (int, float)) and to_si("mode_diameter_mm", value) > grid.width_m:
            p.add(key, f"the cavity mode is wider than the grid's window ({grid.width_m * 1e3:g} mm): the window "
                       "would cut it; widen grid.width_mm, or check the mode's diameter (1/e^2, in mm)", value)


def _duration(seconds: float) -> str:
    """A time in the unit that suits it: "12.5 ns", "250 us", "1 ms"."""
    for scale, unit in ((1e-3, "ms"), (1e-6, "us"), (1e-9, "ns")):
        if seconds >= scale:
            return f"{seconds / scale:.4g} {unit}"
    return f"{seconds / 1e-12:.4g} ps"


def repeat(p: Problems, i: int, item: dict, v: dict, path: str, names: list[str], mode: str | None,
           step: Callable[..., Step | None]) -> dict[str, Any]:
    """A repeat's own keys and its [[step.steps]] (each checked by ``step``, config._step): the fields
    of its Step."""
    fields: dict[str, Any] = {}
    given_keys(p, item, ("count", "until"),
               none=(join_path(path, "count"), 'missing: the number of round trips count, an integer >= 1; or '
                                               'until = "peak" (with max_count, the safety limit)'),
               several=(path, 'both count and until given: give count (a fixed number of round trips) or '
                              'until = "peak" (stop after the round trip of largest energy), not both'))
    if "max_count" in item and "until" not in item:
        p.add(join_path(path, "max_count"), 'applies with until = "peak" only (the safety limit on the round '
                                            "trips); with count, remove it", item["max_count"])
    fields["count"] = v.get("count")
    fields["until"] = v.get("until")
    fields["max_count"] = v.get("max_count", S.MAX_COUNT_DEFAULT)
    if "mode_diameter_mm" in v:
        fields["mode_diameter_m"] = to_si("mode_diameter_mm", v["mode_diameter_mm"])
    items = item.get("steps")
    spath = join_path(path, "steps")
    inner: list[Step | None] = []
    if items is None:
        p.add(spath, "missing: the steps of one round trip; write them as [[step.steps]] tables after the "
                     "repeat's [[step]]")
    elif isinstance(items, dict):
        p.add(spath, "must be an array of tables: write [[step.steps]] (double brackets) for each step", items)
    elif not isinstance(items, list) or not items:
        p.add(spath, "must be a non-empty array of tables: write [[step.steps]] for each step of a round trip",
              items)
    else:
        for j, sub in enumerate(items):
            if not isinstance(sub, dict):
                p.add(f"{spath}[{j}]", f"must be a table ([[step.steps]]), not {type_name(sub)}", sub)
                inner.append(None)
            else:
                inner.append(step(p, j, sub, names, mode, parent=(i, f"step[{i}]")))
    if inner and all(s is not None for s in inner):
        fields["steps"] = tuple(inner)
        if "round_trip_ns" in v:
            fields["round_trip_s"] = to_si("round_trip_ns", v["round_trip_ns"])
            inside = sum(s.delay_s for s in fields["steps"])
            if inside > fields["round_trip_s"] * (1 + 1e-12):
                p.add(join_path(path, "round_trip_ns"),
                      f"shorter than the time the steps inside take ({inside * 1e9:.6g} ns: their delay_ns, and "
                      f"length/c for each space); give at least that, or remove round_trip_ns to use the sum",
                      item["round_trip_ns"])
    return fields
