"""The layout of a config: each [[step]] checked against its kind's keys (a misplaced key is named with
the kinds that take it), the media it passes, and the steps of a repeat.
"""
from __future__ import annotations

from typing import Any, Mapping

from ampmodel.config import cw as config_cw
from ampmodel.config import schema as S
from ampmodel.config import timing as config_timing
from ampmodel.config.checks import (
    Key,
    Problems,
    allowed_keys,
    check_table,
    check_value,
    did_you_mean,
    expected,
    given_keys,
    join_path,
    quoted_list,
)
from ampmodel.config.schema import array_of_tables
from ampmodel.description import Step
from ampmodel.units import LIGHT_SPEED_M_S, si_name, to_si


def check_steps(p: Problems, raw: dict, names: list[str], mode: str | None = "pulsed") -> list[Step] | None:
    """Every [[step]], in order."""
    items = array_of_tables(p, raw, "step")
    if items is None:
        return None
    steps = []
    for i, item in enumerate(items):
        if isinstance(item, dict):
            steps.append(_step(p, i, item, names, mode))
    if len(steps) < len(items) or any(s is None for s in steps):
        return None
    return steps


def _wrong_kind_message(kind: str, schema: Mapping[str, Key]):
    """The message for a key that a step of this kind does not take."""
    def message(key: str) -> str:
        owners = [k for k, keys in S.STEP_KINDS.items() if key in keys]
        if owners:
            return (f"'{key}' is not a key of a '{kind}' step (it belongs to {quoted_list(owners)} steps); "
                    f"keys: {', '.join(schema)}")
        return f"unknown key{did_you_mean(key, schema) or allowed_keys(schema)}"
    return message


def _step(p: Problems, i: int, item: dict, names: list[str], mode: str | None = "pulsed",
          parent: tuple[int, str] | None = None) -> Step | None:
    """One [[step]] (or, with ``parent`` = (index, path) of a repeat, one of its [[step.steps]]):
    its kind decides which keys it takes."""
    before = len(p)
    name = item.get("name") if isinstance(item.get("name"), str) else ""
    where = f"{parent[1]}.steps[{i}]" if parent else f"step[{i}]"
    path = f"{where} ({name})" if name else where
    kind = item.get("kind")
    if not _kind_allowed(p, item, path, mode, parent):
        return None
    schema = {**S.STEP_COMMON, **S.STEP_KINDS[kind], **S.STEP_TIME}
    v = check_table(p, item, path, schema, unknown=_wrong_kind_message(kind, schema), skip=("steps",))
    fields = _kind_fields(p, i, item, v, path, names, mode)
    config_cw.step_keys(p, item, path, mode)
    fields.update(config_cw.cw_fields(v))
    fields.update(_damage_fields(p, item, v, path, mode))
    if "delay_ns" in v:
        fields["delay_s"] = to_si("delay_ns", v["delay_ns"])
    if len(p) > before:
        return None
    return Step(kind=kind, index=i, name=name, parent=parent[0] if parent else None, **fields)


def _kind_allowed(p: Problems, item: dict, path: str, mode: str | None, parent: tuple[int, str] | None) -> bool:
    """Whether the step's kind is given, is a kind (no repeat inside a repeat) and suits the mode."""
    kind = item.get("kind")
    kind_key = S.INNER_STEP_KIND if parent else S.STEP_COMMON["kind"]
    if "kind" not in item:
        p.add(join_path(path, "kind"), f"missing: the step kind, {expected(kind_key)}")
        return False
    _, message = check_value(kind, kind_key)
    if message:
        if parent and kind == "repeat":
            message += "; a repeat cannot hold another repeat (write the inner steps out, or use count)"
        p.add(join_path(path, "kind"), message, kind)
        return False
    if mode == "cw" and (kind == "repeat" or "delay_ns" in item):
        what, value = ("kind", kind) if kind == "repeat" else ("delay_ns", item["delay_ns"])
        p.add(join_path(path, what), 'applies to mode = "pulsed" only: a cw beam is steady, so steps take no '
                                     'time and are not repeated round trip by round trip', value)
        return False
    return True


def _kind_fields(p: Problems, i: int, item: dict, v: dict, path: str, names: list[str],
                 mode: str | None) -> dict[str, Any]:
    """The fields of the Step that its kind's own keys give (SI units), from the checked values ``v``."""
    kind = item["kind"]
    fields: dict[str, Any] = {}
    if kind == "pass" and "medium" in v:
        fields.update(_pass_fields(p, v, path, names))
    elif kind == "loss" and "transmission" in v:
        fields["transmission"] = v["transmission"]
    elif kind == "aperture":
        fields.update(_aperture_fields(p, item, v, path))
    elif kind == "space" and "length_mm" in v:
        fields["length_m"] = to_si("length_mm", v["length_mm"])
        if mode != "cw":   # a path takes time: length/c (in air, index 1) unless delay_ns says otherwise
            fields["delay_s"] = fields["length_m"] / LIGHT_SPEED_M_S
    elif kind == "lens" and "focal_mm" in v:
        fields["focal_m"] = to_si("focal_mm", v["focal_mm"])
    elif kind == "filter":
        if "focal_mm" in v:
            fields["focal_m"] = to_si("focal_mm", v["focal_mm"])
        if "pinhole_diameter_mm" in v:
            fields["pinhole_diameter_m"] = to_si("pinhole_diameter_mm", v["pinhole_diameter_mm"])
    elif kind == "relay" and "magnification" in v:
        fields["magnification"] = v["magnification"]
    elif kind == "repeat":
        fields.update(config_timing.repeat(p, i, item, v, path, names, mode, _step))
    return fields


def _pass_fields(p: Problems, v: dict, path: str, names: list[str]) -> dict[str, Any]:
    """A pass's medium, by name (an index names it too), and its direction."""
    fields: dict[str, Any] = {}
    ref = v["medium"]
    if isinstance(ref, int) and 0 <= ref < len(names):
        fields["medium"] = names[ref]
    elif isinstance(ref, str) and ref in names:
        fields["medium"] = ref
    elif names:
        hint = did_you_mean(ref, names) if isinstance(ref, str) else ""
        p.add(join_path(path, "medium"), f"no such medium; media: {', '.join(names)} "
                                         f"(or an index from 0 to {len(names) - 1}){hint}", ref)
    fields["reverse"] = v.get("reverse", False)      # a bad value is already a problem
    return fields


def _aperture_fields(p: Problems, item: dict, v: dict, path: str) -> dict[str, Any]:
    """An aperture's shape, its size (m: the diameter, or the width of a square) and its edge order."""
    fields: dict[str, Any] = {}
    shape = v.get("shape") or ("square" if "width_mm" in item and "diameter_mm" not in item else "round")
    need, other = ("diameter_mm", "width_mm") if shape == "round" else ("width_mm", "diameter_mm")
    if other in item:
        p.add(join_path(path, other), f"a {shape} aperture takes {need}, not {other}", item[other])
    elif need not in item:
        p.add(join_path(path, need), f"missing: the {shape} aperture's {need}, a number > 0")
    if need in v:
        fields.update(shape=shape, diameter_m=to_si(need, v[need]))
    if "order" in v:
        fields["order"] = v["order"]
    return fields


DAMAGE_PAIR = ("damage_fluence_J_cm2", "damage_pulse_ns")


def _damage_fields(p: Problems, item: dict, v: dict, path: str, mode: str | None) -> dict[str, Any]:
    """An optic's damage fluence (J/m²) and the pulse length it was quoted at (s), given together."""
    half_pair = _half_damage_pair(path) if config_cw.damage_pair_needed(mode) else None
    fields: dict[str, Any] = {}
    for key in given_keys(p, item, DAMAGE_PAIR, one=half_pair):
        if key in v:
            fields[si_name(key)] = to_si(key, v[key])
    return fields


def _half_damage_pair(path: str):
    """The problem of a step that gives one of its damage fluence and pulse length without the other."""
    def problem(given: list[str]) -> tuple[str, str]:
        missing = "damage_pulse_ns" if given[0] == "damage_fluence_J_cm2" else "damage_fluence_J_cm2"
        return join_path(path, missing), (f"missing: {given[0]} is given; give both damage_fluence_J_cm2 and "
                                          "damage_pulse_ns (the pulse length the fluence was quoted at), or neither")
    return problem
