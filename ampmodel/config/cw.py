"""The checks of a run config that depend on the mode (pulsed or cw), kept apart from ``load.py``.

In cw mode the seed is a continuous beam (``power_W``), a pump is continuous (``power_W``, no
``duration_us`` or ``energy_J``), optics carry a damage intensity rather than a damage fluence, the
grid has no time slices, and the steady-state iteration takes its settings from a ``[solver]``
table. In pulsed mode the cw-only keys are refused, so that a key never silently does nothing.
"""
from __future__ import annotations

from typing import Any

from ampmodel.config import schema as S
from ampmodel.config.checks import Problems, check_table, expected, given_keys, join_path
from ampmodel.description import Solver
from ampmodel.materials.material import Material
from ampmodel.units import si_name, to_si

PULSED_ONLY_STEP_KEYS = ("damage_fluence_J_cm2", "damage_pulse_ns")
CW_ONLY_STEP_KEYS = ("damage_intensity_W_cm2",)


def grid_keys(p: Problems, raw: dict, mode: str | None) -> None:
    """grid.time_slices slices a pulse: refused in cw mode."""
    grid = raw.get("grid")
    if mode == "cw" and isinstance(grid, dict) and "time_slices" in grid:
        p.add("grid.time_slices", 'applies to pulsed mode only (a cw beam has no time slices); remove it '
                                  'or set mode = "pulsed"', grid["time_slices"])


def solver(p: Problems, raw: dict, mode: str | None) -> Solver:
    """The [solver] table (cw only): max_iterations, tolerance, damping."""
    table = raw.get("solver")
    if not isinstance(table, dict):
        return Solver()
    if mode == "pulsed":
        p.add("solver", 'the [solver] table sets the cw steady-state iteration and applies to mode = "cw" only; '
                        "remove it for a pulsed run", table)
        return Solver()
    v = check_table(p, table, "solver", S.SOLVER)
    return Solver(max_iterations=v.get("max_iterations", Solver.max_iterations),
                  tolerance=v.get("tolerance", Solver.tolerance), damping=v.get("damping", Solver.damping))


def pump_keys(p: Problems, table: dict, path: str, mode: str | None, material: Material | None) -> None:
    """Which of energy_J, power_W, duration_us a pump takes in each mode."""
    if mode == "cw":
        for key in ("energy_J", "duration_us"):
            if key in table:
                p.add(join_path(path, key), "applies to pulsed mode only: a cw pump is continuous; give its "
                                            "power as power_W", table[key])
        if "power_W" not in table:
            p.add(join_path(path, "power_W"), f"missing: the continuous pump power, {expected(S.PUMP['power_W'])}"
                                              " (cw mode)")
        if material is not None and material.broadening == "inhomogeneous":
            p.add(path, f"a cw pump is modelled for homogeneously broadened materials only, and material "
                        f"'{material.name}' is inhomogeneously broadened; give the medium a small_signal_gain "
                        "instead of [medium.pump], or a material with broadening = \"homogeneous\"")
        return
    given_keys(p, table, ("energy_J", "power_W"),
               none=(join_path(path, "energy_J"), "missing: the pump energy energy_J (or power_W), a number > 0"),
               several=(path, "both energy_J and power_W given: give one (power_W is multiplied by duration_us)"))
    if "duration_us" not in table:
        p.add(join_path(path, "duration_us"), f"missing: {S.PUMP['duration_us'].meaning}, "
                                              f"{expected(S.PUMP['duration_us'])}; or continuous = true "
                                              "with power_W for a continuous pump")


def step_keys(p: Problems, item: dict, path: str, mode: str | None) -> None:
    """Damage data of an optic: a damage fluence in pulsed mode, a damage intensity in cw mode."""
    refused = PULSED_ONLY_STEP_KEYS if mode == "cw" else CW_ONLY_STEP_KEYS if mode == "pulsed" else ()
    for key in refused:
        if key in item:
            other = "damage_intensity_W_cm2" if mode == "cw" else "damage_fluence_J_cm2 with damage_pulse_ns"
            p.add(join_path(path, key), f'applies to mode = "{"pulsed" if mode == "cw" else "cw"}" only; '
                                        f"in this {mode} run give {other}", item[key])


def damage_pair_needed(mode: str | None) -> bool:
    """The damage fluence and its pulse length are checked as a pair only in pulsed mode."""
    return mode != "cw"


def cw_fields(values: dict[str, Any]) -> dict[str, Any]:
    """The Step fields of the cw-only keys among the checked ``values``."""
    return {si_name(k): to_si(k, values[k]) for k in CW_ONLY_STEP_KEYS if k in values}
