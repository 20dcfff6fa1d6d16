"""The sections of a report page that studies add: the points of a sweep or a tolerance run and the
failed ones, a tolerance run's spread values, percentiles, yield and sensitivity, a fit's values,
correlation and residuals, a sizing's answer and limits (``html_report.build_html`` puts them in order).
"""
from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping

from ampmodel.studies.html_parts import esc, fmt_num, fmt_pct, html_table, pre_block, section
from ampmodel.studies.report import limit_state

if TYPE_CHECKING:
    from ampmodel.studies.html_report import ReportData

# The main figures of a table of points (as the printed sweep table), in this order, where present.
POINT_FIGURES = ("output_energy_J", "output_power_W", "gain", "extraction_efficiency", "optical_efficiency",
                 "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad", "worst_damage_margin")
QUIET_FIGURES = ("energy_balance_error", "power_balance_error", "photon_balance_error", "cw_residual",
                 "cw_iterations", "cw_damping_final")


def points_table(data: ReportData, label: str) -> str:
    """The table of points: the values, the main figures, the warning count and the point file; a
    point without its file is marked failed."""
    n = len(data.done)
    present = [k for k in POINT_FIGURES if k in data.table]
    if "peak_fluence_J_cm2" in present and "peak_intensity_W_cm2" in present:
        present.remove("peak_intensity_W_cm2")
    named = [k for k in (data.spread or {}).get("figures", []) if k in data.table and k not in present]
    keys = present + named
    header = [label] + data.paths + keys + ["warnings", "result file"]
    rows, classes = [], []
    for i in range(n):
        s = data.point_summaries[i] if i < len(data.point_summaries) else None
        vals = [fmt_num(data.table[p][i]) if p in data.table else "-" for p in data.paths]
        if data.done[i]:
            figs = [fmt_num(data.table[k][i]) for k in keys]
            warn = str(len(s.get("warnings", []))) if s else "-"
            rows.append([f"{i:04d}", *vals, *figs, warn, f"points/{i:04d}.h5"])
            classes.append("")
        else:
            rows.append([f"{i:04d}", *vals, *(["-"] * len(keys)), "-", "FAILED: no result"])
            classes.append("failed")
    return html_table(header, rows, numeric=[True] * (1 + len(data.paths) + len(keys)) + [True, False],
                      row_classes=classes)


def failed_points(data: ReportData, label: str) -> str:
    """The points without a result file, with their values, and how to retry them."""
    failed = [i for i, d in enumerate(data.done) if not d]
    if not failed:
        return f"<p>Every {label} has its result file.</p>"
    items = ", ".join(f"{label} {i:04d} (" + ", ".join(f"{p} = {fmt_num(data.table[p][i])}" for p in data.paths
                                                         if p in data.table) + ")" for i in failed)
    return (f'<p class="failed">{len(failed)} of {len(data.done)} {label}s failed or were not computed: '
            f"{esc(items)}.</p><p>Their error texts were printed when the command ran; the same command "
            f"started again on this folder retries only them.</p>")


def spread_sections(sp: Mapping[str, Any]) -> list[str]:
    """A tolerance run's sections from spread.json: the spread values, the percentiles of the figures
    that vary, the yield against the limits and the sensitivity ranking."""
    out = []
    dists = sp.get("distributions", {})
    rows = []
    for path, d in dists.items():
        if "normal" in d:
            rows.append([path, "normal", f"relative std {d['normal']:g} around {d.get('nominal', 0):g}"])
        else:
            lo, hi = d.get("uniform", [None, None])
            rows.append([path, "uniform", f"in [{lo:g}, {hi:g}]"])
    head = (f"<p>{esc(sp.get('samples_ran'))} of {esc(sp.get('samples'))} samples ran (random_seed "
            f"{esc(sp.get('random_seed'))}). Percentiles: {esc(sp.get('percentile_method', ''))}.</p>\n")
    out.append(section("Spread values", head + html_table(["value path", "distribution", "parameters"], rows),
                       "distributions"))
    percentiles = sp.get("percentiles", {})
    named = sp.get("figures", [])
    shown = list(dict.fromkeys([k for k in percentiles if "." not in k] + [k for k in named if k in percentiles]))
    shown = [k for k in shown if k not in QUIET_FIGURES]
    prow = [[k, p.get("unit", ""), fmt_num(p["p5"]), fmt_num(p["p50"]), fmt_num(p["p95"]), fmt_num(p["mean"]), fmt_num(p["std"]),
             fmt_num(p["min"]), fmt_num(p["max"])] for k in shown if (p := percentiles[k]) and p.get("max") != p.get("min")]
    out.append(section("Percentiles", "<p>The figures that vary (spread.json and spread.csv hold every figure, "
                       "steps and media too).</p>\n" +
                       html_table(["figure", "unit", "5 %", "50 %", "95 %", "mean", "std", "min", "max"], prow,
                                  numeric=[False, False] + [True] * 7), "percentiles"))
    yields = sp.get("yield") or {}
    if yields.get("limits"):
        yrows = [[y["limit"], str(y["ran"]), str(y["met"]), fmt_pct(y["share"]),
                  f"{fmt_pct(y['ci95'][0])} to {fmt_pct(y['ci95'][1])}" if y.get("ci95") else "-"]
                 for y in [*yields["limits"], yields["all"]]]
        body = ("<p>The samples that meet each limit, and all together (95 % interval: Wilson score).</p>\n" +
                html_table(["limit", "ran", "met", "share", "95 % interval"], yrows,
                           numeric=[False, True, True, True, True]))
    else:
        body = '<p class="none">no limits were given (<code>[spread] limits</code> or <code>--limit</code>)</p>'
    out.append(section("Yield against the limits", body, "yield"))
    sens = (sp.get("sensitivity") or {}).get("figures", {})
    srows = []
    for k in shown:
        ranked = [r for r in sens.get(k, ()) if r.get("rho") is not None]
        if ranked:
            srows.append([k, ", ".join(f"{r['path']} {r['rho']:+.2f}" for r in ranked)])
    method = (sp.get("sensitivity") or {}).get("method", "")
    body = (f"<p>{esc(method)}</p>\n" if method else "") + (
        html_table(["figure", "spread values, strongest first (rank correlation)"], srows) if srows else
        '<p class="none">no figure varies with the spread values</p>')
    out.append(section("Sensitivity", body, "sensitivity"))
    return out


def fit_sections(fit: Mapping[str, Any]) -> list[str]:
    """A fit's sections from fit.json: the fitted values with their standard errors, the correlation,
    the residual of each measurement and the measured data."""
    paths = fit.get("paths", list(fit.get("values", {})))
    errors = fit.get("standard_errors", {})
    rows = [[p, fmt_num(fit["values"].get(p), 8), fmt_num(errors.get(p), 3), "[{:g}, {:g}]".format(*fit["ranges"][p])
             if p in fit.get("ranges", {}) else "-", fmt_num(fit.get("start", {}).get(p), 6)] for p in paths]
    status = fit.get("status", "")
    body = (f'<p class="{"" if status == "ok" else "failed"}">{esc(fit.get("message", ""))}</p>\n' +
            html_table(["value path", "fitted", "standard error", "range", "start"], rows,
                       numeric=[False, True, True, False, True]) +
            f"\n<p>Residual rms {fmt_num(fit.get('residual_rms'), 4)} (weighting: {esc(fit.get('weighting', ''))}); "
            f"{esc(fit.get('evaluations'))} evaluations, {esc(fit.get('runs'))} runs.</p>")
    out = [section("Fitted values", body, "fitted")]
    corr = fit.get("correlation") or []
    if corr and len(paths) > 1:
        crow = [[p] + [fmt_num(c, 3) for c in corr[i]] for i, p in enumerate(paths)]
        table = html_table([""] + paths, crow, numeric=[False] + [True] * len(paths))
        out.append(section("Correlation of the fitted values", table, "correlation"))
    prow = []
    for p in fit.get("points", []):
        cond = ", ".join(f"{k} = {fmt_num(v)}" for k, v in p.get("conditions", {}).items()) or "-"
        for f, m in p.get("measured", {}).items():
            r = p.get("residual", {}).get(f)
            prow.append([str(p.get("line")), cond, f, fmt_num(m), fmt_num(p.get("modelled", {}).get(f)),
                         "-" if r is None else f"{r:+.3g}"])
    table = html_table(["line", "conditions", "figure", "measured", "modelled", "residual"], prow,
                       numeric=[True, False, False, True, True, True])
    out.append(section("Residuals per measurement", table, "residuals"))
    if fit.get("data"):
        out.append(section("Measured data", f"<p>{esc(fit.get('data_file', ''))}</p>\n" + pre_block(fit["data"]), "data"))
    return out


def size_section(size: Mapping[str, Any]) -> str:
    """A sizing's answer from size.json and the state of each limit there."""
    rows = [["status", str(size.get("status"))], ["varied", str(size.get("vary"))],
            ["within", ", ".join(fmt_num(v) for v in size.get("within", []))],
            ["target", f"{size.get('target_figure')} = {fmt_num(size.get('target'))}"],
            ["value found", fmt_num(size.get("value"), 10)], ["runs", str(size.get("runs"))]]
    margins = [[m["figure"], m["op"], fmt_num(m["limit"]), fmt_num(m["value"], 6), fmt_num(m["margin"], 4),
                fmt_pct(m.get("relative_margin")), limit_state(m)] for m in size.get("margins") or []]
    body = f"<p>{esc(size.get('message', ''))}</p>\n" + html_table(["", ""], rows)
    if margins:
        body += "\n<h3>Limits at the answer</h3>\n" + html_table(
            ["figure", "", "limit", "value", "margin", "of the limit", "state"], margins,
            numeric=[False, False, True, True, True, True, False])
    return section("Sizing", body, "sizing")

