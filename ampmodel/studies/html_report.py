"""report.html: one self-contained page for a run, a sweep, a tolerance run, a sizing or a fit folder.

A pure function from stored data to text: :class:`ReportData` holds what the folder's files hold
(read by ``report_files.py``, at the edge), :func:`build_html` turns it into the page. The page needs
no network and no script: the CSS is inline, every figure of ``plots/`` is embedded once as a
``data:image/png;base64`` URI, and every text taken from the files is HTML-escaped. ``@media print``
keeps figures and tables whole on paper; on screen wide tables scroll in their own box and long
lines of the config wrap.
"""
from __future__ import annotations

import base64
import math
import re
from dataclasses import dataclass, field
from html import escape
from typing import Any, Mapping, Sequence

from ampmodel.materials.material import material_from_dict
from ampmodel.materials.registry import material_lines
from ampmodel.output.summary import is_number
from ampmodel.output.tables import fibre_lines, media_lines, quantity_text, seed_from_line, table_lines
from ampmodel.safety import SAFETY_NOTE
from ampmodel.studies.report import limit_state

KINDS = ("run", "sweep", "spread", "size", "fit")
KIND_WORDS = {"run": "run", "sweep": "parameter sweep", "spread": "tolerance run", "size": "sizing",
              "fit": "fit to measured data"}
NUM = ' class="num"'
STAMP_CLASS = "stamp"       # the one element that changes when a report is built again

# The main figures of a table of points (as the printed sweep table), in this order, where present.
POINT_FIGURES = ("output_energy_J", "output_power_W", "gain", "extraction_efficiency", "optical_efficiency",
                 "peak_fluence_J_cm2", "peak_intensity_W_cm2", "b_integral_rad", "worst_damage_margin")
QUIET_FIGURES = ("energy_balance_error", "power_balance_error", "photon_balance_error", "cw_residual",
                 "cw_iterations", "cw_damping_final")

CSS = """
*{box-sizing:border-box}
body{margin:0;font-family:system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif;
 font-size:15px;line-height:1.45;color:#1a1a1a;background:#fff}
main{max-width:62rem;margin:0 auto;padding:1rem 1.25rem 3rem}
h1{font-size:1.6rem;margin:.5rem 0 .25rem}
h2{font-size:1.2rem;margin:2rem 0 .5rem;border-bottom:1px solid #ccc;padding-bottom:.2rem}
h3{font-size:1.05rem;margin:1.2rem 0 .4rem}
p.meta,p.stamp{color:#555;margin:.2rem 0}
.safety{border:3px solid #b00020;background:#fff3f3;padding:.7rem 1rem;margin:1rem 0;font-weight:600}
.safety strong{color:#b00020;text-transform:uppercase;letter-spacing:.04em}
pre{white-space:pre-wrap;overflow-wrap:anywhere;word-break:break-word;background:#f6f6f6;
 border:1px solid #ddd;padding:.6rem .8rem;font-size:13px;line-height:1.35}
table{border-collapse:collapse;margin:.4rem 0;font-size:14px}
th,td{border:1px solid #ccc;padding:.25rem .5rem;text-align:left;vertical-align:top}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
th{background:#eee}
.wide{overflow-x:auto;max-width:100%}
figure{margin:1rem 0;break-inside:avoid;page-break-inside:avoid}
img{max-width:100%;height:auto;display:block;border:1px solid #ddd}
figcaption{font-size:13px;color:#333;margin-top:.2rem}
figcaption code{color:#555}
.sev{display:inline-block;padding:0 .4rem;border-radius:3px;font-size:12px;font-weight:700;white-space:nowrap}
tr.warning td{background:#fff4e5}
tr.warning .sev{background:#d35400;color:#fff}
tr.note .sev{background:#dfe6ee;color:#1a1a1a}
tr.muted td{color:#777}
.failed{color:#b00020;font-weight:600}
.none{color:#555;font-style:italic}
@media print{
 body{font-size:11pt}
 main{max-width:none;padding:0}
 .wide{overflow:visible}
 table,figure,pre,.safety{break-inside:avoid;page-break-inside:avoid}
 h2,h3{break-after:avoid;page-break-after:avoid}
 img{max-width:100%;height:auto}
}
"""


@dataclass
class ReportData:
    """What one folder's files hold, as the report needs it (read by ``report_files.read_folder``).

    kind : one of :data:`KINDS`; title : the config's title; created : when the results were written
    (UTC text, from the files); version : the ampmodel version that wrote them
    summary : a run's summary.json (run, size)
    config_text : the config as run; materials : medium name -> material data as the run stored it
    (``materials.material_to_dict``)
    figures : (file name in plots/, PNG bytes), in file-name order; plots_folder : whether plots/ exists
    files : (path relative to the folder, bytes), the folder's files
    paths : swept or spread value paths; table : column name -> values (the points table)
    done : per point whether its result file exists; point_summaries : per point its summary or None
    spread : spread.json; fit : fit.json; size : size.json
    """

    kind: str
    title: str
    created: str = ""
    version: str = ""
    summary: dict[str, Any] | None = None
    config_text: str = ""
    materials: dict[str, Any] = field(default_factory=dict)
    figures: list[tuple[str, bytes]] = field(default_factory=list)
    plots_folder: bool = False
    files: list[tuple[str, int]] = field(default_factory=list)
    paths: list[str] = field(default_factory=list)
    table: dict[str, list] = field(default_factory=dict)
    done: list[bool] = field(default_factory=list)
    point_summaries: list[dict[str, Any] | None] = field(default_factory=list)
    spread: dict[str, Any] | None = None
    fit: dict[str, Any] | None = None
    size: dict[str, Any] | None = None


# ----------------------------------------------------------------------------------------------
# Small pieces
# ----------------------------------------------------------------------------------------------

def _e(value: Any) -> str:
    return escape(str(value), quote=True)


def _num(value: Any, digits: int = 5) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool) or not is_number(value):
        return str(value)
    v = float(value)
    if math.isnan(v):
        return "-"
    if float(value).is_integer() and abs(v) < 1e15 and not isinstance(value, float):
        return str(int(value))
    return f"{v:.{digits}g}"


def _pct(value: float | None) -> str:
    return "-" if value is None else f"{100 * value:.1f} %"


def _table(header: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[bool] | None = None,
           row_classes: Sequence[str] | None = None, raw: bool = False) -> str:
    """An HTML table in a box that scrolls sideways on screen; cells escaped unless ``raw``."""
    numeric = numeric or [False] * len(header)
    out = ['<div class="wide"><table>', "<thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in header) + "</tr></thead>",
           "<tbody>"]
    for i, row in enumerate(rows):
        cls = f' class="{_e(row_classes[i])}"' if row_classes and row_classes[i] else ""
        cells = "".join(f"<td{NUM if numeric[j] else ''}>{c if raw else _e(c)}</td>" for j, c in enumerate(row))
        out.append(f"<tr{cls}>{cells}</tr>")
    out.append("</tbody></table></div>")
    return "\n".join(out)


def _pre(lines: Sequence[str] | str) -> str:
    text = lines if isinstance(lines, str) else "\n".join(lines)
    return f"<pre>{_e(text)}</pre>"


def _section(title: str, body: str, anchor: str) -> str:
    return f'<section id="{_e(anchor)}">\n<h2>{_e(title)}</h2>\n{body}\n</section>'


_UNIT_WORDS = {"J": "J", "W": "W", "ns": "ns", "rad": "rad", "J_cm2": "J/cm²", "W_cm2": "W/cm²", "mm": "mm",
               "nm": "nm", "ps": "ps", "Hz": "Hz", "dB": "dB", "um": "µm", "m": "m"}
_FIGURE_TITLES = {
    "fluence_maps": "fluence maps at the steps", "intensity_maps": "intensity maps at the steps",
    "energy_per_step": "energy after each step", "power_per_step": "power after each step",
    "pulse_power": "pulse power in time", "b_integral": "B-integral along the layout",
    "beam_steps": "beam size, modulation and fill factor after each step", "beam_size": "beam size along the layout",
    "round_trips": "energy over the round trips", "train": "pulse train to its steady state",
    "spectrum": "spectrum of the seed and the output", "overview": "overview of the main figures",
    "sensitivity": "sensitivity: rank correlation of the figures with the spread values",
}


def figure_title(file_name: str) -> str:
    """A few words for a figure from its file name: ``gain_rod.png`` -> "gain of medium rod",
    ``output_energy_J.png`` -> "output energy (J)", ``hist_gain.png`` -> "histogram of gain"."""
    stem = file_name.rsplit(".", 1)[0]
    if stem in _FIGURE_TITLES:
        return _FIGURE_TITLES[stem]
    for prefix, words in (("hist_", "histogram of "), ("fit_", "fit: measured and modelled "),
                          ("heat_", "heat and temperature in medium "), ("gain_", "gain of medium "),
                          ("round_trips_step", "round trips of step ")):
        if stem.startswith(prefix):
            return words + _figure_words(stem[len(prefix):])
    if stem.startswith("fibre_") and stem.endswith(("_powers", "_ase")):
        name, what = stem[len("fibre_"):].rsplit("_", 1)
        return f"{'powers along' if what == 'powers' else 'ASE spectra of'} fibre {name}"
    return _figure_words(stem)


def _figure_words(stem: str) -> str:
    for suffix in sorted(_UNIT_WORDS, key=len, reverse=True):
        if stem.endswith("_" + suffix) and len(stem) > len(suffix) + 1:
            return f"{stem[: -len(suffix) - 1].replace('_', ' ').replace('.', ' ')} ({_UNIT_WORDS[suffix]})"
    return stem.replace("_", " ").replace(".", " ")


# ----------------------------------------------------------------------------------------------
# Sections
# ----------------------------------------------------------------------------------------------

_HEADLINES: tuple[tuple[str, str, str], ...] = (
    # key, words, how: a unit for quantity_text, "%" a fraction in percent, or a format
    ("input_energy_J", "input energy", "J"), ("output_energy_J", "output energy", "J"),
    ("input_power_W", "input power", "W"), ("output_power_W", "output power", "W"),
    ("gain", "gain", ".4g"), ("gain_dB", "gain, dB", ".2f"),
    ("extraction_efficiency", "extraction efficiency", "%"), ("optical_efficiency", "optical-to-optical efficiency", "%"),
    ("stored_energy_J", "stored energy before the pulse", "J"), ("absorbed_pump_power_W", "absorbed pump power", "W"),
    ("output_peak_power_W", "output peak power", "W"), ("output_duration_ns", "output pulse FWHM, ns", ".4g"),
    ("peak_fluence_J_cm2", "peak fluence, J/cm²", ".3g"), ("peak_intensity_W_cm2", "peak intensity, W/cm²", ".3g"),
    ("b_integral_rad", "B-integral, rad", ".3g"), ("b_integral_margin", "B-integral as a fraction of its budget", ".2g"),
    ("energy_balance_error", "energy balance error", ".1e"), ("power_balance_error", "power balance error", ".1e"),
)


def headline_rows(summary: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The headline figures of a run as (words, value text), those the summary has."""
    rows = []
    for key, words, how in _HEADLINES:
        v = summary.get(key)
        if not is_number(v) or isinstance(v, bool):
            continue
        text = (quantity_text(v, how) if how in ("J", "W") else _pct(v) if how == "%" else format(v, how))
        rows.append((words, text))
    if "worst_damage_margin" in summary:
        worst = summary["worst_damage_margin"]
        rows.append(("worst damage margin (peak over the damage threshold)",
                     "no surface with a damage threshold" if worst is None else
                     f"{worst:.2g} at {summary.get('worst_damage_step')}"))
    return rows


def _headlines(summary: Mapping[str, Any]) -> str:
    rows = headline_rows(summary)
    if not rows:
        return '<p class="none">no headline figures in the summary</p>'
    return _table(["figure", "value"], rows, numeric=[False, True])


def step_lines(summary: Mapping[str, Any]) -> list[str]:
    """The table of a run as ``ampmodel run`` prints it (media, steps, totals), without the warnings."""
    out = [seed_from_line(summary["seed_from"])] if isinstance(summary.get("seed_from"), dict) else []
    if summary.get("layout") == "fibre":
        return out + fibre_lines(dict(summary))
    return out + media_lines(dict(summary)) + table_lines(dict(summary))


def _notices_rows(notices: Sequence[Mapping[str, Any]]) -> str:
    if not notices:
        return '<p class="none">no warnings and no notes</p>'
    rows, classes = [], []
    for n in sorted(notices, key=lambda n: n.get("severity") != "warning"):
        sev = n.get("severity", "warning")
        label = f'<span class="sev">{_e(sev.upper() if sev == "warning" else sev)}</span>'
        muted = " (muted)" if n.get("muted") else ""
        where = f" ({_e(n['where'])})" if n.get("where") else ""
        rows.append([label + _e(muted), f"<code>{_e(n.get('code', 'other'))}</code>", _e(n.get("text", "")) + where])
        classes.append(sev + (" muted" if n.get("muted") else ""))
    return _table(["severity", "code", "message"], rows, row_classes=classes, raw=True)


def run_notices(summary: Mapping[str, Any]) -> list[dict[str, Any]]:
    """A summary's messages with their code and severity (``notices``; older summaries: from
    ``warnings`` and ``notes``, code "other")."""
    if isinstance(summary.get("notices"), list):
        return [dict(n) for n in summary["notices"]]
    return ([{"code": "other", "severity": "warning", "text": t} for t in summary.get("warnings", [])] +
            [{"code": "other", "severity": "note", "text": t} for t in summary.get("notes", [])])


def point_notices(summaries: Sequence[Mapping[str, Any] | None], label: str) -> list[dict[str, Any]]:
    """The messages of many points, each kind once (numbers aside), with the first point that gave it
    and how many did."""
    kinds: dict[tuple[str, str, str], dict[str, Any]] = {}
    for i, s in enumerate(summaries):
        for n in run_notices(s) if s else ():
            kind = (n.get("code", "other"), n.get("severity", "warning"),
                    re.sub(r"[-+]?\d[\d.]*(e[-+]?\d+)?", "#", n.get("text", "")))
            if kind in kinds:
                kinds[kind]["count"] += 1
            else:
                kinds[kind] = {**n, "count": 1, "first": i}
    for k in kinds.values():
        more = f" and {k['count'] - 1} more" if k["count"] > 1 else ""
        k["where"] = f"first at {label} {k['first']:04d}{more}"
    return list(kinds.values())


def _figures(data: ReportData, no_figures_why: str) -> str:
    if not data.figures:
        why = (no_figures_why if not data.plots_folder else "plots/ holds no PNG figure")
        return f'<p class="none">No figures: {_e(why)}.</p>'
    out = []
    for name, png in data.figures:
        uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
        out.append(f'<figure>\n<img src="{uri}" alt="{_e(figure_title(name))}">\n'
                   f"<figcaption><code>plots/{_e(name)}</code>: {_e(figure_title(name))}</figcaption>\n</figure>")
    return "\n".join(out)


def _materials(data: ReportData) -> str:
    if not data.materials:
        return ('<p class="none">No material data are stored in this folder (a fit keeps no run file); the '
                "config as run names them, and <code>ampmodel media NAME</code> shows a built-in one with its "
                "sources.</p>")
    blocks = []
    for medium, stored in data.materials.items():
        try:
            lines = material_lines(material_from_dict(stored))
        except (KeyError, TypeError, ValueError) as exc:
            lines = [f"(the stored material data cannot be read: {exc})"]
        blocks.append(f"<h3>medium {_e(medium)}</h3>\n{_pre(lines)}")
    return ("<p>The material data each medium used, as stored with the results: values in config units, "
            "each with its source.</p>\n" + "\n".join(blocks))


def _files(data: ReportData) -> str:
    if not data.files:
        return '<p class="none">no files</p>'
    rows = [[name, quantity_text(size, "B") if size else "0 B"] for name, size in data.files]
    return (f"<p>{len(data.files)} files besides report.html.</p>\n" +
            _table(["file", "size"], rows, numeric=[False, True]))


def _config(data: ReportData) -> str:
    if not data.config_text:
        return '<p class="none">the folder holds no config text</p>'
    return "<p>The config text as run (with its comments).</p>\n" + _pre(data.config_text)


def _points_table(data: ReportData, label: str) -> str:
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
        vals = [_num(data.table[p][i]) if p in data.table else "-" for p in data.paths]
        if data.done[i]:
            figs = [_num(data.table[k][i]) for k in keys]
            warn = str(len(s.get("warnings", []))) if s else "-"
            rows.append([f"{i:04d}", *vals, *figs, warn, f"points/{i:04d}.h5"])
            classes.append("")
        else:
            rows.append([f"{i:04d}", *vals, *(["-"] * len(keys)), "-", "FAILED: no result"])
            classes.append("failed")
    return _table(header, rows, numeric=[True] * (1 + len(data.paths) + len(keys)) + [True, False],
                  row_classes=classes)


def _failed(data: ReportData, label: str) -> str:
    failed = [i for i, d in enumerate(data.done) if not d]
    if not failed:
        return f"<p>Every {label} has its result file.</p>"
    items = ", ".join(f"{label} {i:04d} (" + ", ".join(f"{p} = {_num(data.table[p][i])}" for p in data.paths
                                                         if p in data.table) + ")" for i in failed)
    return (f'<p class="failed">{len(failed)} of {len(data.done)} {label}s failed or were not computed: '
            f"{_e(items)}.</p><p>Their error texts were printed when the command ran; the same command "
            f"started again on this folder retries only them.</p>")


def _spread_sections(sp: Mapping[str, Any]) -> list[str]:
    out = []
    dists = sp.get("distributions", {})
    rows = []
    for path, d in dists.items():
        if "normal" in d:
            rows.append([path, "normal", f"relative std {d['normal']:g} around {d.get('nominal', 0):g}"])
        else:
            lo, hi = d.get("uniform", [None, None])
            rows.append([path, "uniform", f"in [{lo:g}, {hi:g}]"])
    head = (f"<p>{_e(sp.get('samples_ran'))} of {_e(sp.get('samples'))} samples ran (random_seed "
            f"{_e(sp.get('random_seed'))}). Percentiles: {_e(sp.get('percentile_method', ''))}.</p>\n")
    out.append(_section("Spread values", head + _table(["value path", "distribution", "parameters"], rows),
                        "distributions"))
    percentiles = sp.get("percentiles", {})
    named = sp.get("figures", [])
    shown = list(dict.fromkeys([k for k in percentiles if "." not in k] + [k for k in named if k in percentiles]))
    shown = [k for k in shown if k not in QUIET_FIGURES]
    prow = [[k, p.get("unit", ""), _num(p["p5"]), _num(p["p50"]), _num(p["p95"]), _num(p["mean"]), _num(p["std"]),
             _num(p["min"]), _num(p["max"])] for k in shown if (p := percentiles[k]) and p.get("max") != p.get("min")]
    out.append(_section("Percentiles", "<p>The figures that vary (spread.json and spread.csv hold every figure, "
                        "steps and media too).</p>\n" +
                        _table(["figure", "unit", "5 %", "50 %", "95 %", "mean", "std", "min", "max"], prow,
                               numeric=[False, False] + [True] * 7), "percentiles"))
    yields = sp.get("yield") or {}
    if yields.get("limits"):
        yrows = [[y["limit"], str(y["ran"]), str(y["met"]), _pct(y["share"]),
                  f"{_pct(y['ci95'][0])} to {_pct(y['ci95'][1])}" if y.get("ci95") else "-"]
                 for y in [*yields["limits"], yields["all"]]]
        body = ("<p>The samples that meet each limit, and all together (95 % interval: Wilson score).</p>\n" +
                _table(["limit", "ran", "met", "share", "95 % interval"], yrows, numeric=[False, True, True, True, True]))
    else:
        body = '<p class="none">no limits were given (<code>[spread] limits</code> or <code>--limit</code>)</p>'
    out.append(_section("Yield against the limits", body, "yield"))
    sens = (sp.get("sensitivity") or {}).get("figures", {})
    srows = []
    for k in shown:
        ranked = [r for r in sens.get(k, ()) if r.get("rho") is not None]
        if ranked:
            srows.append([k, ", ".join(f"{r['path']} {r['rho']:+.2f}" for r in ranked)])
    method = (sp.get("sensitivity") or {}).get("method", "")
    body = (f"<p>{_e(method)}</p>\n" if method else "") + (
        _table(["figure", "spread values, strongest first (rank correlation)"], srows) if srows else
        '<p class="none">no figure varies with the spread values</p>')
    out.append(_section("Sensitivity", body, "sensitivity"))
    return out


def _fit_sections(fit: Mapping[str, Any]) -> list[str]:
    paths = fit.get("paths", list(fit.get("values", {})))
    errors = fit.get("standard_errors", {})
    rows = [[p, _num(fit["values"].get(p), 8), _num(errors.get(p), 3), "[{:g}, {:g}]".format(*fit["ranges"][p])
             if p in fit.get("ranges", {}) else "-", _num(fit.get("start", {}).get(p), 6)] for p in paths]
    status = fit.get("status", "")
    body = (f'<p class="{"" if status == "ok" else "failed"}">{_e(fit.get("message", ""))}</p>\n' +
            _table(["value path", "fitted", "standard error", "range", "start"], rows,
                   numeric=[False, True, True, False, True]) +
            f"\n<p>Residual rms {_num(fit.get('residual_rms'), 4)} (weighting: {_e(fit.get('weighting', ''))}); "
            f"{_e(fit.get('evaluations'))} evaluations, {_e(fit.get('runs'))} runs.</p>")
    out = [_section("Fitted values", body, "fitted")]
    corr = fit.get("correlation") or []
    if corr and len(paths) > 1:
        crow = [[p] + [_num(c, 3) for c in corr[i]] for i, p in enumerate(paths)]
        out.append(_section("Correlation of the fitted values", _table([""] + paths, crow,
                                                                       numeric=[False] + [True] * len(paths)),
                            "correlation"))
    prow = []
    for p in fit.get("points", []):
        cond = ", ".join(f"{k} = {_num(v)}" for k, v in p.get("conditions", {}).items()) or "-"
        for f, m in p.get("measured", {}).items():
            r = p.get("residual", {}).get(f)
            prow.append([str(p.get("line")), cond, f, _num(m), _num(p.get("modelled", {}).get(f)),
                         "-" if r is None else f"{r:+.3g}"])
    out.append(_section("Residuals per measurement", _table(["line", "conditions", "figure", "measured", "modelled",
                                                             "residual"], prow,
                                                            numeric=[True, False, False, True, True, True]),
                        "residuals"))
    if fit.get("data"):
        out.append(_section("Measured data", f"<p>{_e(fit.get('data_file', ''))}</p>\n" + _pre(fit["data"]), "data"))
    return out


def _size_section(size: Mapping[str, Any]) -> str:
    rows = [["status", str(size.get("status"))], ["varied", str(size.get("vary"))],
            ["within", ", ".join(_num(v) for v in size.get("within", []))],
            ["target", f"{size.get('target_figure')} = {_num(size.get('target'))}"],
            ["value found", _num(size.get("value"), 10)], ["runs", str(size.get("runs"))]]
    margins = [[m["figure"], m["op"], _num(m["limit"]), _num(m["value"], 6), _num(m["margin"], 4),
                _pct(m.get("relative_margin")), limit_state(m)] for m in size.get("margins") or []]
    body = f"<p>{_e(size.get('message', ''))}</p>\n" + _table(["", ""], rows)
    if margins:
        body += "\n<h3>Limits at the answer</h3>\n" + _table(
            ["figure", "", "limit", "value", "margin", "of the limit", "state"], margins,
            numeric=[False, False, True, True, True, True, False])
    return _section("Sizing", body, "sizing")


# ----------------------------------------------------------------------------------------------
# The page
# ----------------------------------------------------------------------------------------------

def build_html(data: ReportData, written_utc: str, report_version: str) -> str:
    """The report of ``data`` as one HTML page (text).

    Parameters
    ----------
    data : what the folder holds (:class:`ReportData`)
    written_utc : when the report is written (the one part that changes when it is built again)
    report_version : the ampmodel version that writes the report
    """
    if data.kind not in KINDS:
        raise ValueError(f"unknown report kind {data.kind!r}")
    title = data.title or "(no title)"
    label = "sample" if data.kind == "spread" else "point"
    sections: list[str] = []
    no_figures = "the figures were not drawn (--no-plots)"
    if data.kind in ("run", "size"):
        s = data.summary or {}
        if data.kind == "size" and data.size is not None:
            sections.append(_size_section(data.size))
        if s:
            sections.append(_section("Headline figures", _headlines(s), "headlines"))
            sections.append(_section("Steps", "<p>The table <code>ampmodel run</code> prints.</p>\n" +
                                     _pre(step_lines(s)), "steps"))
            sections.append(_section("Warnings and notes", _notices_rows(run_notices(s)), "notices"))
    elif data.kind in ("sweep", "spread"):
        if data.kind == "spread" and data.spread is not None:
            sections += _spread_sections(data.spread)
        sections.append(_section(f"{label.capitalize()}s", _points_table(data, label), "points"))
        sections.append(_section(f"Failed {label}s", _failed(data, label), "failed"))
        sections.append(_section("Warnings and notes",
                                 f"<p>Each kind of message once, with the first {label} that gave it.</p>\n" +
                                 _notices_rows(point_notices(data.point_summaries, label)), "notices"))
    elif data.kind == "fit" and data.fit is not None:
        sections += _fit_sections(data.fit)
        notes = [{"code": "other", "severity": "note", "text": t} for t in data.fit.get("notes", [])]
        sections.append(_section("Warnings and notes", _notices_rows(notes), "notices"))
    sections.append(_section("Figures", _figures(data, no_figures), "figures"))
    sections.append(_section("Inputs as run", _config(data), "config"))
    sections.append(_section("Materials", _materials(data), "materials"))
    sections.append(_section("Files in this folder", _files(data), "files"))
    made = f"results written {_e(data.created)}" if data.created else "results"
    made += f" by ampmodel {_e(data.version)}" if data.version else ""
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}: ampmodel {_e(KIND_WORDS[data.kind])} report</title>",
        f"<style>{CSS}</style>", "</head>", "<body>", "<main>",
        f"<h1>{_e(title)}</h1>",
        f'<p class="meta">ampmodel {_e(KIND_WORDS[data.kind])} report; {made}</p>',
        f'<p class="{STAMP_CLASS}">report written {_e(written_utc)} by ampmodel {_e(report_version)}</p>',
        f'<div class="safety" role="note"><strong>Laser safety</strong><br>{_e(SAFETY_NOTE)}</div>',
        *sections,
        f'<div class="safety" role="note">{_e(SAFETY_NOTE)}</div>',
        "</main>", "</body>", "</html>", ""])
