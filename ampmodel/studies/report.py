"""What ``ampmodel check``, ``sweep``, ``spread``, ``size`` and ``fit`` print, and their exit codes (the CLI stays
thin)."""
from __future__ import annotations

import re
import sys
from typing import Any, Sequence

from ampmodel.config.checks import show
from ampmodel.output.summary import is_number, scalar_keys
from ampmodel.output.tables import quantity_text
from ampmodel.safety import SAFETY_NOTE
from ampmodel.studies.figures import with_figures

EXIT_OK, EXIT_FAILED_POINTS, EXIT_NO_SOLUTION = 0, 1, 3
TABLE_KEYS = ("output_energy_J", "output_power_W", "gain", "extraction_efficiency", "optical_efficiency",
              "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad")
MAX_ROWS = 40
# Numerical checks of the solver: in the files, not in the terminal table of a tolerance run.
QUIET_FIGURES = ("energy_balance_error", "power_balance_error", "photon_balance_error", "cw_residual",
                 "cw_iterations", "cw_damping_final")


def _num(v: Any) -> str:
    if not is_number(v):
        return show(v, 16)
    if v != v:
        return "-"
    return f"{v:.5g}"


def _table(header: Sequence[str], rows: Sequence[Sequence[str]]) -> None:
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    print("  ".join(h.rjust(w) for h, w in zip(header, widths, strict=True)))
    for r in rows:
        print("  ".join(c.rjust(w) for c, w in zip(r, widths, strict=True)))


def _safety() -> None:
    print(SAFETY_NOTE)


def _warnings_and_failures(result, label: str) -> None:
    """Each kind of warning once (numbers aside), with the first point that gave it; failed points."""
    warned = [(i, s["warnings"]) for i, s in enumerate(result.summaries) if s and s.get("warnings")]
    if warned:
        print(f"warnings at {len(warned)} of {len(result.summaries)} {label}s (warning_count in the table; "
              f"the texts are in each point file's summary); each kind once:")
        kinds: dict[str, tuple[int, str, int]] = {}
        for i, texts in warned:
            for t in texts:
                kind = re.sub(r"[-+]?\d[\d.]*(e[-+]?\d+)?", "#", t)
                first = kinds.get(kind)
                kinds[kind] = (first[0], first[1], first[2] + 1) if first else (i, t, 1)
        for n, (i, t, count) in enumerate(kinds.values()):
            if n == 8:
                print(f"  ... {len(kinds) - 8} more kinds")
                break
            print(f"  - {label} {i:04d}" + (f" (and {count - 1} more)" if count > 1 else "") +
                  f": {t if len(t) < 200 else t[:197] + '...'}")
    for i, err in sorted(result.failed.items()):
        print(f"{label} {i:04d} FAILED ({_describe_values(result.values[i])}): {err.splitlines()[0]}")
    internal = [(i, err) for i, err in sorted(result.failed.items()) if "Traceback" in err]
    if internal:
        i, err = internal[0]
        print(f"details of the first internal failure ({label} {i:04d}; please report it with the config):\n"
              f"{err}", file=sys.stderr)


def _describe_values(values: dict) -> str:
    return ", ".join(f"{p} = {show(v, 24)}" for p, v in values.items())


def _head(result, label: str) -> None:
    n = len(result.values)
    if not (result.computed or result.failed):
        where = "nothing to compute"
    elif result.backend == "loky" and result.jobs == 1:
        where = "one after another in this process"
    else:
        where = f"{result.jobs} {result.backend} worker{'s' if result.jobs != 1 else ''}"
    print(f"{n} {label}s: computed {len(result.computed)}, found {len(result.reused)} already done"
          + (f", {len(result.failed)} failed" if result.failed else "") + f" ({where}, {result.seconds:.1f} s)")
    for note in result.notes:
        print(f"note: {note}")


def print_sweep(result, quiet: bool = False) -> int:
    """Print a sweep's outcome: counts, a table of the points (up to 40), warnings, files."""
    print(f"ampmodel sweep: {result.title}")
    _head(result, "point")
    if not quiet and len(result.values) <= MAX_ROWS:
        summaries = with_figures(result.summaries, result.figures)     # the figures named in [sweep] too
        present = set(scalar_keys(summaries))
        keys = [k for k in TABLE_KEYS if k in present]
        if "peak_fluence_J_cm2" in keys:        # pulsed: the fluence is the figure to watch
            keys.remove("peak_intensity_W_cm2")
        keys += [k for k in result.figures if k in present and k not in keys]
        rows = [[f"{i:04d}"] + [_num(v[p]) for p in result.paths] +
                [_num(s.get(k)) if s else "FAILED" for k in keys] + [str(len(s["warnings"])) if s else "-"]
                for i, (v, s) in enumerate(zip(result.values, summaries, strict=True))]
        _table(["point"] + result.paths + keys + ["warnings"], rows)
    elif not quiet:
        print(f"(the table of {len(result.values)} points is in {result.table_csv})")
    _warnings_and_failures(result, "point")
    _safety()
    _files(result)
    if result.failed:
        print(f"{len(result.failed)} points failed; start the same command again to retry only them.")
        return EXIT_FAILED_POINTS
    return EXIT_OK


def _files(result, extra: Sequence[str] = ()) -> None:
    names = [result.table_h5.name, result.table_csv.name, *extra, "points/"]
    if result.plots:
        names.append(f"plots/ ({len(result.plots)} PNG)")
    if (result.out / "report.html").is_file():
        names.append("report.html")
    print(f"wrote {result.out}/ ({', '.join(names)})")


def print_spread(result, quiet: bool = False) -> int:
    """Print a tolerance run's outcome: counts, the percentile table of the top-level figures and those
    named in figures and limits, the yield, the sensitivity ranking, warnings, files."""
    print(f"ampmodel spread: {result.title}")
    _head(result, "sample")
    print(f"distributions (random_seed {result.random_seed}): " +
          "; ".join(f"{p}: {_dist(d)}" for p, d in result.distributions.items()))
    shown = [k for k in _shown(result.percentiles, result.figures) if k not in QUIET_FIGURES]
    rows = [[k, p["unit"], _num(p["p5"]), _num(p["p50"]), _num(p["p95"]), _num(p["mean"]), _num(p["std"])]
            for k in shown if (p := result.percentiles[k])["max"] > p["min"]]
    print("the figures that vary (spread.csv and spread.json hold every figure, steps and media too):")
    _table(["figure", "unit", "5 %", "50 %", "95 %", "mean", "std"], rows)
    if result.yields:
        _print_yield(result.yields)
    _print_sensitivity(result.sensitivity, shown)
    _warnings_and_failures(result, "sample")
    _safety()
    _files(result, ["spread.json", "spread.csv"])
    if result.failed:
        print(f"{len(result.failed)} samples failed (the percentiles, the yield and the sensitivity leave them "
              f"out); start the same command again to retry only them.")
        return EXIT_FAILED_POINTS
    return EXIT_OK


def _shown(percentiles: dict, named: Sequence[str]) -> list[str]:
    """The top-level figures, then the named ones (each once, those the run has)."""
    return list(dict.fromkeys([k for k in percentiles if "." not in k] + [k for k in named if k in percentiles]))


def _pct(x: float | None) -> str:
    return "-" if x is None else f"{100 * x:.1f} %"


def _print_yield(yields: dict) -> None:
    """The yield table: per limit and for all together, with the 95 % Wilson score interval."""
    print("yield: the samples that meet each limit (95 % interval: Wilson score):")
    rows = [[y["limit"], str(y["ran"]), str(y["met"]), _pct(y["share"]),
             f"{_pct(y['ci95'][0])} to {_pct(y['ci95'][1])}" if y["ci95"] else "-"]
            for y in [*yields["limits"], yields["all"]]]
    _table(["limit", "ran", "met", "share", "95 % interval"], rows)


def _print_sensitivity(sensitivity: dict, shown: Sequence[str], paths_shown: int = 3) -> None:
    """For each figure shown that varies: the spread values that move it most, by Spearman's rho."""
    lines = []
    for k in shown:
        ranked = [r for r in sensitivity.get(k, ()) if r["rho"] is not None]
        if ranked:
            more = f", ... ({len(ranked) - paths_shown} more)" if len(ranked) > paths_shown else ""
            lines.append(f"  {k}: " + ", ".join(f"{r['path']} {r['rho']:+.2f}" for r in ranked[:paths_shown])
                         + more)
    if lines:
        print("sensitivity: Spearman's rank correlation of each figure with each spread value, strongest first "
              "(monotone association; spread.json has every figure):")
        print("\n".join(lines))


def _dist(d: dict) -> str:
    if "normal" in d:
        return f"normal, relative std {d['normal']:g} around {d['nominal']:g}"
    lo, hi = d["uniform"]
    return f"uniform in [{lo:g}, {hi:g}]"


def print_sizing(result) -> int:
    """Print the answer of ``size`` (value, figures there, margins); return 0, or 3 without a solution."""
    print(result.message)
    if result.summary is not None:
        s = result.summary
        print(f"figures at {result.vary} = {result.value:.10g}:")
        for k in ("input_energy_J", "output_energy_J", "input_power_W", "output_power_W", "gain",
                  "extraction_efficiency", "stored_energy_J", "optical_efficiency", "absorbed_pump_power_W",
                  "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad"):
            if k in s:
                print(f"  {k} = {s[k]:.6g}")
        if result.margins:
            print("limits:")
            for m in result.margins:
                print(f"  {m['figure']} {m['op']} {m['limit']:g}: {m['value']:.6g}, margin {m['margin']:.4g} "
                      f"({100 * m['relative_margin']:.1f} % of the limit), {limit_state(m)}")
        if s.get("warnings"):
            print("warnings there:")
            for w in s["warnings"]:
                print(f"  - {w}")
        _safety()
    return EXIT_OK if result.status == "ok" else EXIT_NO_SOLUTION


def limit_state(m: dict) -> str:
    """A limit at a sizing's answer in words: met (binding) within a millionth of the limit, holds, or CROSSED."""
    tiny = 1e-6 * max(abs(m["limit"]), 1e-300)
    return "met (binding)" if abs(m["margin"]) <= tiny else "holds" if m["margin"] > 0 else "CROSSED"


def print_fit(result) -> int:
    """Print a fit: the fitted values with their standard errors, the residuals per row, the outcome;
    return 0, or 3 when the fit did not converge, ends at a bound or leaves a value undetermined."""
    for note in result.notes:
        print(f"note: {note}")
    print(result.message)
    rows = [[v.path, f"{result.values[v.path]:.8g}",
             "-" if result.standard_errors.get(v.path) is None else f"{result.standard_errors[v.path]:.3g}",
             f"[{v.low:g}, {v.high:g}]", f"{s:.6g}"] for v, s in zip(result.vary, result.start, strict=True)]
    _table(("value path", "fitted", "std error", "range", "start"), rows)
    weighting = {"sigma": "(model - measured)/sigma", "relative": "(model - measured)/|measured|",
                 "mixed": "(model - measured)/sigma, or /|measured| without a sigma"}[result.weighting]
    print(f"residuals {weighting}; rms {result.residual_rms:.4g} ({result.evaluations} evaluations, "
          f"{result.runs} runs):")
    table = []
    for p in result.points[:MAX_ROWS]:
        cond = ", ".join(f"{k} = {_num(v)}" for k, v in p["conditions"].items()) or "-"
        for f, m in p["measured"].items():
            table.append([str(p["line"]), cond, f, _num(m), _num(p["modelled"].get(f)), f"{p['residual'][f]:+.3g}"])
    _table(("line", "conditions", "figure", "measured", "modelled", "residual"), table)
    if len(result.points) > MAX_ROWS:
        print(f"... {len(result.points) - MAX_ROWS} more rows (fit.json lists them all)")
    return EXIT_OK if result.status == "ok" else EXIT_NO_SOLUTION


def check_lines(config) -> list[str]:
    """What `check` says of each medium: its small-signal gain (and stored energy or absorbed pump)."""
    from ampmodel.kernels import beam_shapes
    from ampmodel.media import gain_maps
    if any(m.kind == "fibre" for m in config.media):
        from ampmodel.fibre.run import describe_fibres
        return list(describe_fibres(config))
    x = beam_shapes.pixel_centres(config.grid.points, config.grid.width_m)
    lines = []
    if config.mode == "cw":
        from ampmodel.cw.medium import build_medium
        for m in config.media:
            st = build_medium(m, x, x, config.solver, config.seed.wavelength_m)
            g = st.coarse(st.g0)
            line = (f"  medium {m.name} ({m.material.name}): on-axis small-signal gain "
                    f"{gain_maps.on_axis_gain(g, m.length_m / m.slices):.4g}")
            if st.pump_field is not None:
                absorbed = st.pump_field.absorbed.sum() * (x[1] - x[0]) ** 2 * st.pump.photon_energy_J
                line += f", absorbed pump {quantity_text(absorbed, 'W')} of {quantity_text(st.pump.power_W, 'W')} (no signal)"
            lines.append(line)
        return lines
    from ampmodel.pulsed.measured import describe
    lines.extend(describe(config))              # a measured pulse or spectrum
    for m in config.media:
        gm = gain_maps.gain_map(m, x, x)
        stored = gain_maps.stored_energy_J(gm.gain_per_m, m.material.saturation_fluence_J_m2,
                                         gm.slice_length_m * (x[1] - x[0]) ** 2)
        lines.append(f"  medium {m.name} ({m.material.name}): on-axis small-signal gain "
                     f"{gain_maps.on_axis_gain(gm.gain_per_m, gm.slice_length_m):.4g}, stored energy "
                     f"{quantity_text(stored, 'J')}")
    return lines
