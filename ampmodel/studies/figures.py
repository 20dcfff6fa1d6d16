"""Figures of a run: any number in summary.json, named by a dotted path (used by size, sweeps and spreads).

A figure path names

- a top-level key: ``output_energy_J``, ``b_integral_rad``, ``worst_damage_margin``;
- a key of a nested object: ``train.average_power_W``, ``seed_beam.fill_factor``;
- a step's key by the step's index in the summary's ``steps`` list: ``steps.3.peak_fluence_J_cm2``;
  a repeat's inner steps are ``steps.N.steps.M.KEY``;
- a medium's key by the medium's name (its ``name`` field in the ``media`` list):
  ``media.rod.stored_energy_J``.

The grammar is checked where a config loads (``ampmodel.config.sweep.figure_parts``). Before any run
a path can be checked further (:func:`check_before_run`): its last key against the names a summary
can hold at that level (:data:`SUMMARY_KEYS`, where the level is one of those listed), a step index
against the config's steps and a medium's name against its media. After a run :func:`resolve` gives
the number or a :class:`FigureError` with a did-you-mean over the keys at that level.

:func:`flatten` lists every number of a summary by its path, the tables of sweeps and tolerance runs
(lists other than ``steps`` and ``media``, such as a train's pulse energies, are left out; so is each
step's own ``index``).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Iterable, Mapping, Sequence

from ampmodel.config.checks import ConfigError, close_matches, quoted_list, show
from ampmodel.config.sweep import figure_parts, split_limit
from ampmodel.output.summary import is_number


class FigureError(ValueError):
    """A figure path that does not name a number of the summary; the message says why."""


def _names(text: str) -> frozenset[str]:
    return frozenset(text.split())


# The numbers a summary can hold at each level, by key name (README "Summary"). Keep in step with the
# summaries: tests/unit/test_figures.py checks every number of every example's summary against it.
SUMMARY_KEYS: dict[str, frozenset[str]] = {
    "top": _names("""
        absorbed_pump_power_W ase_backward_W ase_forward_W average_power_W b_integral_rad cw_damping_final
        cw_iterations cw_residual energy_balance_error extracted_energy_J extracted_power_W extraction_efficiency
        b_integral_margin output_duration_ns
        gain gain_dB input_energy_J input_power_W layout_time_ns lost_energy_J lost_power_W noise_figure_dB
        optical_efficiency output_bandwidth_nm output_centre_nm output_energy_J output_peak_power_W
        output_power_W output_pulse_duration_ns output_transform_limit_ps peak_fluence_J_cm2
        peak_intensity_W_cm2 photon_balance_error power_balance_error pulse_duration_ns pump_power_W
        pump_power_out_W repetition_rate_Hz stored_energy_J stored_energy_final_J time_slice_ns
        worst_damage_margin edge_absorbed_power_W"""),
    "step": _names("""
        b_integral_rad bandwidth_nm build_up_time_ns centre_nm clipped_energy_J clipped_power_W count
        d4sigma_x_mm d4sigma_y_mm damage_margin delay_ns edge_absorbed_energy_J energy_in_J energy_out_J
        extracted_energy_J extracted_power_W fill_factor gain gain_dB max_count modulation_peak_to_mean
        passive_loss_J passive_loss_W peak_fluence_J_cm2 peak_intensity_W_cm2 peak_power_W power_in_W
        power_out_W round_trip_count round_trip_ns peak_fluence_in_J_cm2 damage_fluence_J_cm2 damage_intensity_W_cm2
        b_integral_margin edge_absorbed_power_W pinhole_transmission
        output_duration_ns"""),
    "medium": _names("""
        absorbed_pump_energy_J absorbed_pump_fraction absorbed_pump_photons_per_s absorbed_pump_power_W
        ase_backward_W ase_forward_W b_integral_rad critical_power_W decayed_energy_J effective_length_m
        extracted_energy_J extracted_power_W gain_dB internal_slices length_m mode_field_diameter_um
        noise_figure_dB peak_power_W period_residual periods photon_balance_error pump_energy_J pump_overlap
        pump_photon_balance_error pump_photons_lost_to_quantum_efficiency_per_s pump_power_W pump_power_out_W
        pump_power_transmitted_W pump_settling_iterations pump_stored_energy_J rings saturated_gain_on_axis
        saturation_energy_J saturation_fluence_J_cm2 saturation_intensity_W_cm2 signal_overlap
        signal_photons_added_per_s small_signal_gain_dB small_signal_gain_on_axis
        small_signal_gain_on_axis_final solver_change solver_iterations solver_newton_steps solver_tolerance
        spontaneous_decays_per_s storage_efficiency stored_energy_J stored_energy_final_J
        transmitted_pump_energy_J transmitted_pump_power_W upper_state_fraction_max v_number
        heat_W heat_fraction heat_balance_error fluorescence_power_W coolant_C temperature_max_C
        temperature_rise_max_K thermal_focal_length_m depolarisation_estimate absorbed_pump_average_power_W"""),
    "train": _names("""
        average_power_W decay_power_W direct_pulse_energy_J energy_balance_error extracted_power_W
        fixed_point_pulse_evaluations fixed_point_residual input_average_power_W layout_time_s period_s
        pulse_energy_J pulses_to_steady_state pump_stored_power_W repetition_rate_Hz
        stored_energy_before_pulse_J tolerance fixed_point_pulse_energy_J cycle_length pulse_energy_mean_J
        cycle_fixed_point_evaluations cycle_fixed_point_residual heat_balance_error"""),
    "seed_beam": _names("d4sigma_x_mm d4sigma_y_mm fill_factor modulation_peak_to_mean"),
}


def parts(path: str) -> list[tuple[str, Any]]:
    """The parts of a figure path (see ``config.sweep.figure_parts``); FigureError when malformed."""
    try:
        return figure_parts(path)
    except ValueError as exc:
        raise FigureError(str(exc)) from None


def _level(found: list[tuple[str, Any]]) -> str | None:
    """The level of the last key in SUMMARY_KEYS (None: a nested object not listed there)."""
    if len(found) == 1:
        return "top"
    kind, value = found[-2]
    if kind == "step":
        return "step"
    if kind == "medium":
        return "medium"
    if len(found) == 2 and value in SUMMARY_KEYS and value not in ("top", "step", "medium"):
        return value
    return None


def check_before_run(path: str, config: Any = None) -> str | None:
    """What is wrong with a figure path before any run (None: nothing known to be wrong).

    The form; the last key against :data:`SUMMARY_KEYS` at its level; with a ``config`` (a validated
    Config), a step index against its steps (a repeat's inner steps too) and a medium's name against
    its media."""
    try:
        found = parts(path)
    except FigureError as exc:
        return str(exc)
    level = _level(found)
    last = found[-1][1]
    if level is not None and last not in SUMMARY_KEYS[level]:
        where = {"top": "summary.json", "step": "a step", "medium": "a medium"}.get(level, level)
        hits = close_matches(last, SUMMARY_KEYS[level])
        hint = f"; did you mean {quoted_list(hits)}?" if hits else ""
        return f"{where} has no figure {last!r}{hint}"
    if config is not None:
        return _check_against_config(found, config)
    return None


def _check_against_config(found: list[tuple[str, Any]], config: Any) -> str | None:
    steps = list(getattr(config, "steps", ()))
    where = "the config"
    for kind, value in found:
        if kind == "step":
            if value >= len(steps):
                span = f"steps 0 to {len(steps) - 1}" if steps else "no steps"
                return f"{where} has {span}, not step {value}"
            step = steps[value]
            steps = list(step.steps) if getattr(step, "kind", "") == "repeat" else []
            where = f"step {value} ({getattr(step, 'kind', '?')})"
        elif kind == "medium":
            names = [m.name for m in getattr(config, "media", ())]
            if value not in names:
                hits = close_matches(value, names)
                hint = f"; did you mean {quoted_list(hits)}?" if hits else ""
                return f"no medium {value!r} in the config{hint} (media: {', '.join(names)})"
    return None


def _keys_here(node: Mapping[str, Any]) -> list[str]:
    """The keys at one level that a path can go on with: numbers and nested objects (and steps, media)."""
    return [k for k, v in node.items() if (is_number(v) and k != "index") or isinstance(v, Mapping) or
            (k in ("steps", "media") and isinstance(v, list) and v)]


def _missing(key: str, node: Mapping[str, Any], where: str) -> FigureError:
    keys = _keys_here(node)
    hits = close_matches(key, keys)
    hint = f"; did you mean {quoted_list(hits)}?" if hits else ""
    listing = ", ".join(keys[:12]) + (", ..." if len(keys) > 12 else "")
    return FigureError(f"{where} has no figure {key!r}{hint} (there: {listing})")


def resolve(summary: Mapping[str, Any], path: str) -> float:
    """The number a figure path names in a summary.json dict.

    Raises
    ------
    FigureError : the path is malformed, leads nowhere (with a did-you-mean over the keys at the
        level where it stops), or names something that is not a number.
    """
    node: Any = summary
    where = "summary.json"
    trail: list[str] = []
    for kind, value in parts(path):
        if kind == "key":
            if not isinstance(node, Mapping) or value not in node:
                raise _missing(value, node if isinstance(node, Mapping) else {}, where)
            node = node[value]
            trail.append(value)
        elif kind == "step":
            steps = node.get("steps") if isinstance(node, Mapping) else None
            if not isinstance(steps, list) or not steps:
                raise FigureError(f"{where} has no steps")
            if value >= len(steps):
                raise FigureError(f"{where} has steps 0 to {len(steps) - 1}, not step {value}")
            node = steps[value]
            trail += ["steps", str(value)]
        else:
            media = node.get("media") if isinstance(node, Mapping) else None
            if not isinstance(media, list) or not media:
                raise FigureError(f"{where} has no media")
            names = [m.get("name") for m in media if isinstance(m, Mapping)]
            if value not in names:
                hits = close_matches(value, [n for n in names if isinstance(n, str)])
                hint = f"; did you mean {quoted_list(hits)}?" if hits else ""
                raise FigureError(f"{where} has no medium {value!r}{hint} (media: {', '.join(map(str, names))})")
            node = media[names.index(value)]
            trail += ["media", value]
        where = ".".join(trail)
    if not is_number(node):
        raise FigureError(f"{path} is {show(node, 40)}, not a number")
    return float(node)


def flatten(summary: Mapping[str, Any] | None) -> dict[str, float]:
    """Every number of a summary by its figure path: top-level keys first, then nested objects,
    steps (``steps.N.KEY``, a repeat's ``steps.N.steps.M.KEY``) and media (``media.NAME.KEY``)."""
    out: dict[str, float] = {}
    if summary:
        top = {k: v for k, v in summary.items() if is_number(v)}
        out.update((k, float(v)) for k, v in top.items())
        _flatten(summary, "", out, skip=set(top))
    return out


def _flatten(node: Mapping[str, Any], prefix: str, out: dict[str, float], skip: Iterable[str] = (),
             in_step: bool = False) -> None:
    for k, v in node.items():
        if k in skip:
            continue
        if is_number(v):
            if not (in_step and k == "index"):       # a step's index is its place in the path
                out[prefix + k] = float(v)
        elif isinstance(v, Mapping):
            _flatten(v, f"{prefix}{k}.", out)
        elif k == "steps" and isinstance(v, list):
            for i, step in enumerate(v):
                if isinstance(step, Mapping):
                    _flatten(step, f"{prefix}steps.{i}.", out, in_step=True)
        elif k == "media" and isinstance(v, list):
            for medium in v:
                if isinstance(medium, Mapping) and isinstance(medium.get("name"), str):
                    _flatten(medium, f"{prefix}media.{medium['name']}.", out)


def figure_keys(flat: Sequence[Mapping[str, float] | None]) -> list[str]:
    """The figure paths of flattened summaries, in the order they first appear, top-level keys first."""
    seen: dict[str, None] = {}
    for f in flat:
        seen.update(dict.fromkeys(f or ()))
    keys = list(seen)
    return [k for k in keys if "." not in k] + [k for k in keys if "." in k]


# ----------------------------------------------------------------------------------------------
# Limits: a bound on a figure
# ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Limit:
    """A bound on a summary figure: ``figure op value`` with op "<=" or ">=" (figure: a figure path)."""

    figure: str
    op: str
    value: float

    def margin(self, x: float) -> float:
        """How far ``x`` is inside the bound (negative: crossed), in the figure's unit."""
        return self.value - x if self.op == "<=" else x - self.value

    def holds(self, x: float) -> bool:
        """The bound holds at ``x`` (a NaN never holds)."""
        return self.margin(x) >= 0

    def __str__(self) -> str:
        return f"{self.figure}{self.op}{self.value:g}"


def parse_limit(text: str, option: str = "--limit") -> Limit:
    """``"steps.3.peak_fluence_J_cm2<=5"`` -> Limit; ``<`` and ``>`` read as ``<=`` and ``>=``.

    Raises ConfigError naming ``option`` and the text."""
    try:
        return Limit(*split_limit(text))
    except ValueError as exc:
        raise ConfigError([f"{option} {text}: {exc}"]) from None


def check_in_summary(named: Sequence[tuple[str, str]], summary: Mapping[str, Any], source: str,
                     what: str) -> None:
    """Resolve every (label, figure path) in a summary; all problems at once as a ConfigError.

    ``label`` names where the path was given ("--limit steps.0.gain>=2", "spread.figures[1]"); ``what``
    which run the summary is of ("the run at medium.rod.small_signal_gain = 2")."""
    problems = []
    for label, path in named:
        try:
            resolve(summary, path)
        except FigureError as exc:
            problems.append(f"{source}: {label}: {path} is not a figure of {what}: {exc}")
    if problems:
        raise ConfigError(problems)


def figure_check(named: Sequence[tuple[str, str]], source: str) -> Callable[[Mapping[str, Any], str], None]:
    """The check a sweep or a tolerance run makes on its first summary (``run_points(first_check=...)``):
    every named (label, figure path) must be a figure of it."""
    def check(summary: Mapping[str, Any], what: str) -> None:
        check_in_summary(named, summary, source, what)
    return check


def with_figures(summaries: Sequence[Mapping[str, Any] | None], paths: Sequence[str]) -> list[dict | None]:
    """The summaries with the named figures added as top-level entries under their paths (what the
    plots of top-level scalars then show too); a path a summary lacks is left out of it."""
    out: list[dict | None] = []
    for s in summaries:
        if s is None:
            out.append(None)
            continue
        extra = {}
        for path in paths:
            try:
                extra[path] = resolve(s, path)
            except FigureError:
                pass
        out.append({**s, **extra})
    return out
