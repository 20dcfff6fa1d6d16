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
import re
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

from ampmodel.materials.material import material_from_dict
from ampmodel.materials.registry import material_lines
from ampmodel.output.summary import is_number
from ampmodel.output.tables import fibre_lines, media_lines, quantity_text, seed_from_line, table_lines
from ampmodel.safety import SAFETY_NOTE
from ampmodel.studies.html_parts import CSS, esc, fmt_pct, html_table, pre_block, section
from ampmodel.studies.html_studies import failed_points, fit_sections, points_table, size_section, spread_sections
from ampmodel.units import shown_unit, split_unit, unit_of

KINDS = ("run", "sweep", "spread", "size", "fit")
KIND_WORDS = {"run": "run", "sweep": "parameter sweep", "spread": "tolerance run", "size": "sizing",
              "fit": "fit to measured data"}
STAMP_CLASS = "stamp"       # the one element that changes when a report is built again


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
    """A summary figure's words and unit from its key: ``output_energy_J`` -> "output energy (J)"."""
    unit = unit_of(stem)
    base = stem[:-3] if unit == "dB" else split_unit(stem)[0]
    words = base.replace("_", " ").replace(".", " ")
    return words if unit == "1" else f"{words} ({shown_unit(unit)})"


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
        text = (quantity_text(v, how) if how in ("J", "W") else fmt_pct(v) if how == "%" else format(v, how))
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
    return html_table(["figure", "value"], rows, numeric=[False, True])


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
        label = f'<span class="sev">{esc(sev.upper() if sev == "warning" else sev)}</span>'
        muted = " (muted)" if n.get("muted") else ""
        where = f" ({esc(n['where'])})" if n.get("where") else ""
        rows.append([label + esc(muted), f"<code>{esc(n.get('code', 'other'))}</code>", esc(n.get("text", "")) + where])
        classes.append(sev + (" muted" if n.get("muted") else ""))
    return html_table(["severity", "code", "message"], rows, row_classes=classes, raw=True)


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
        return f'<p class="none">No figures: {esc(why)}.</p>'
    out = []
    for name, png in data.figures:
        uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
        out.append(f'<figure>\n<img src="{uri}" alt="{esc(figure_title(name))}">\n'
                   f"<figcaption><code>plots/{esc(name)}</code>: {esc(figure_title(name))}</figcaption>\n</figure>")
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
        blocks.append(f"<h3>medium {esc(medium)}</h3>\n{pre_block(lines)}")
    return ("<p>The material data each medium used, as stored with the results: values in config units, "
            "each with its source.</p>\n" + "\n".join(blocks))


def _files(data: ReportData) -> str:
    if not data.files:
        return '<p class="none">no files</p>'
    rows = [[name, quantity_text(size, "B") if size else "0 B"] for name, size in data.files]
    return (f"<p>{len(data.files)} files besides report.html.</p>\n" +
            html_table(["file", "size"], rows, numeric=[False, True]))


def _config(data: ReportData) -> str:
    if not data.config_text:
        return '<p class="none">the folder holds no config text</p>'
    return "<p>The config text as run (with its comments).</p>\n" + pre_block(data.config_text)



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
            sections.append(size_section(data.size))
        if s:
            sections.append(section("Headline figures", _headlines(s), "headlines"))
            sections.append(section("Steps", "<p>The table <code>ampmodel run</code> prints.</p>\n" +
                                    pre_block(step_lines(s)), "steps"))
            sections.append(section("Warnings and notes", _notices_rows(run_notices(s)), "notices"))
    elif data.kind in ("sweep", "spread"):
        if data.kind == "spread" and data.spread is not None:
            sections += spread_sections(data.spread)
        sections.append(section(f"{label.capitalize()}s", points_table(data, label), "points"))
        sections.append(section(f"Failed {label}s", failed_points(data, label), "failed"))
        sections.append(section("Warnings and notes",
                                f"<p>Each kind of message once, with the first {label} that gave it.</p>\n" +
                                _notices_rows(point_notices(data.point_summaries, label)), "notices"))
    elif data.kind == "fit" and data.fit is not None:
        sections += fit_sections(data.fit)
        notes = [{"code": "other", "severity": "note", "text": t} for t in data.fit.get("notes", [])]
        sections.append(section("Warnings and notes", _notices_rows(notes), "notices"))
    sections.append(section("Figures", _figures(data, no_figures), "figures"))
    sections.append(section("Inputs as run", _config(data), "config"))
    sections.append(section("Materials", _materials(data), "materials"))
    sections.append(section("Files in this folder", _files(data), "files"))
    made = f"results written {esc(data.created)}" if data.created else "results"
    made += f" by ampmodel {esc(data.version)}" if data.version else ""
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{esc(title)}: ampmodel {esc(KIND_WORDS[data.kind])} report</title>",
        f"<style>{CSS}</style>", "</head>", "<body>", "<main>",
        f"<h1>{esc(title)}</h1>",
        f'<p class="meta">ampmodel {esc(KIND_WORDS[data.kind])} report; {made}</p>',
        f'<p class="{STAMP_CLASS}">report written {esc(written_utc)} by ampmodel {esc(report_version)}</p>',
        f'<div class="safety" role="note"><strong>Laser safety</strong><br>{esc(SAFETY_NOTE)}</div>',
        *sections,
        f'<div class="safety" role="note">{esc(SAFETY_NOTE)}</div>',
        "</main>", "</body>", "</html>", ""])
