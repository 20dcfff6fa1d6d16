"""The report page builder (studies/html_report.py): a pure function from stored data to text.

Checked here on data made in the test: every text escaped, every figure embedded once as a data URI
and nowhere else, nothing that reaches out of the page (no URL, no script, no external source), the
safety note, the warnings and notes with their codes and severities, and each kind's own sections.
"""
from __future__ import annotations

import base64
import re
import struct
import zlib
from html import escape

import pytest

import ampmodel as api
from ampmodel.materials import registry
from ampmodel.materials.material import material_to_dict
from ampmodel.output.tables import table_lines
from ampmodel.safety import SAFETY_NOTE
from ampmodel.studies.html_report import ReportData, build_html, figure_title, headline_rows, step_lines

HOSTILE = '<script>alert("x")</script> & <b>bold</b> "quoted" \'single\''
TINY = {
    "title": "tiny rod <for> the report & its tests",
    "grid": {"points": 16, "width_mm": 8.0, "time_slices": 8},
    "medium": [{"name": "rod", "material": "Nd:YAG", "length_mm": 80.0, "diameter_mm": 5.0, "slices": 4,
                "small_signal_gain": 6.0}],
    "seed": {"energy_J": 0.02, "duration_ns": 10.0, "diameter_mm": 4.8},
    "step": [{"kind": "pass", "medium": "rod"}, {"kind": "loss", "transmission": 0.9}],
}


def png(rgb: tuple[int, int, int], size: int = 3) -> bytes:
    """A valid PNG of one colour (8-bit RGB), made by hand: signature, IHDR, IDAT, IEND."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    rows = b"".join(b"\x00" + bytes(rgb) * size for _ in range(size))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", size, size, 8, 2, 0, 0, 0)) +
            chunk(b"IDAT", zlib.compress(rows)) + chunk(b"IEND", b""))


@pytest.fixture(scope="module")
def summary():
    return api.simulate(api.load_config(TINY)).summary


def run_data(summary, **changes) -> ReportData:
    data = ReportData(kind="run", title=summary["title"], created="2026-01-02T03:04:05Z", version="0.1.0",
                      summary=summary, config_text=f"title = 'x'\n# {HOSTILE}\n",
                      materials={"rod": material_to_dict(registry.get("Nd:YAG"))},
                      figures=[("fluence_maps.png", png((200, 10, 10))), ("gain_rod.png", png((10, 200, 10))),
                               ("b_integral.png", png((10, 10, 200)))], plots_folder=True,
                      files=[("result.h5", 1234), ("summary.json", 99), (f"plots/{HOSTILE}.png", 5)])
    for k, v in changes.items():
        setattr(data, k, v)
    return data


def outside_references(page: str) -> list[str]:
    """Every attribute that loads or links something, and every URL, that is not a data: URI."""
    refs = re.findall(r'\b(?:src|href|srcset|poster|data|action)\s*=\s*"([^"]*)"', page, flags=re.I)
    bad = [r for r in refs if not r.startswith("data:")]
    bad += re.findall(r"(?:https?|ftp)://\S+", page) + re.findall(r"url\(", page) + re.findall(r"@import", page)
    return bad


def test_every_text_from_the_files_is_escaped(summary):
    page = build_html(run_data(summary, title=HOSTILE), "2026-01-02T03:04:06Z", "0.1.0")
    assert "<script" not in page.lower() and "<b>bold" not in page
    assert escape(HOSTILE) in page                                       # the config comment and the file name
    assert page.count(escape(HOSTILE)) >= 3                               # title, config, file list
    assert f"<title>{escape(HOSTILE)}" in page


def test_every_figure_is_embedded_once_as_a_png_data_uri_and_nothing_points_outside(summary):
    data = run_data(summary)
    page = build_html(data, "2026-01-02T03:04:06Z", "0.1.0")
    uris = re.findall(r'<img src="(data:image/png;base64,[A-Za-z0-9+/=]+)"', page)
    assert len(uris) == len(data.figures) == page.count("data:image/png;base64,")
    for name, content in data.figures:
        encoded = base64.b64encode(content).decode()
        assert page.count(encoded) == 1, name
        assert f"<code>plots/{name}</code>" in page
    assert sorted(base64.b64decode(u.split(",", 1)[1]) for u in uris) == sorted(c for _, c in data.figures)
    assert outside_references(page) == []
    assert "<script" not in page and "<link" not in page


def test_the_safety_note_is_at_the_top_in_its_own_box(summary):
    page = build_html(run_data(summary), "now", "0.1.0")
    box = page.index('<div class="safety"')
    assert escape(SAFETY_NOTE) in page[box:box + 600]
    assert box < page.index("<h2>")                                      # before any section


def test_warnings_and_notes_show_their_code_and_severity_and_look_different(summary):
    notices = [{"code": "damage-fluence", "severity": "warning", "text": "step 0 (pass rod): fluence < damage & so on",
                "muted": False},
               {"code": "self-focusing", "severity": "note", "text": "medium rod: peak power below critical",
                "muted": False},
               {"code": "clipping", "severity": "warning", "text": "step 1: clips 2 %", "muted": True}]
    page = build_html(run_data({**summary, "notices": notices}), "now", "0.1.0")
    rows = re.findall(r'<tr class="([^"]+)">(.*?)</tr>', page, flags=re.S)
    kinds = {cls: body for cls, body in rows if cls in ("warning", "note", "warning muted")}
    assert "<code>damage-fluence</code>" in kinds["warning"] and "fluence &lt; damage &amp; so on" in kinds["warning"]
    assert "<code>self-focusing</code>" in kinds["note"]
    assert "(muted)" in kinds["warning muted"] and "<code>clipping</code>" in kinds["warning muted"]
    assert "WARNING" in kinds["warning"] and "WARNING" not in kinds["note"]
    css = page[page.index("<style>"):page.index("</style>")]
    assert "tr.warning" in css and "tr.note" in css


def test_the_step_table_is_the_printed_one_and_the_headlines_come_from_the_summary(summary):
    page = build_html(run_data(summary), "now", "0.1.0")
    for line in table_lines(summary):
        assert escape(line) in page
    assert step_lines(summary)[-len(table_lines(summary)):] == table_lines(summary)
    words = dict(headline_rows(summary))
    assert words["gain"] == f"{summary['gain']:.4g}"
    assert words["peak fluence, J/cm²"] == f"{summary['peak_fluence_J_cm2']:.3g}"
    assert words["B-integral, rad"] == f"{summary['b_integral_rad']:.3g}"
    assert summary["worst_damage_step"] in words["worst damage margin (peak over the damage threshold)"]


def test_materials_show_values_with_their_sources(summary):
    page = build_html(run_data(summary), "now", "0.1.0")
    for line in registry.material_lines(registry.get("Nd:YAG")):
        assert escape(line) in page
    assert "source: " in page


def test_without_figures_the_report_says_they_were_not_drawn(summary):
    page = build_html(run_data(summary, figures=[], plots_folder=False), "now", "0.1.0")
    assert "the figures were not drawn (--no-plots)" in page and "<img" not in page


def test_a_sweep_lists_its_points_and_marks_the_failed_one():
    data = ReportData(kind="sweep", title="a sweep", paths=["seed.energy_J"],
                      table={"index": [0, 1, 2], "seed.energy_J": [0.001, 0.002, 0.004],
                             "output_energy_J": [0.01, float("nan"), 0.03], "gain": [10.0, float("nan"), 7.5]},
                      done=[True, False, True],
                      point_summaries=[{"warnings": ["w 1"], "notices": [{"code": "clipping", "severity": "warning",
                                                                          "text": "step 0: clips 1.5 %"}]},
                                       None,
                                       {"warnings": ["w 2"], "notices": [{"code": "clipping", "severity": "warning",
                                                                          "text": "step 0: clips 2.5 %"}]}])
    page = build_html(data, "now", "0.1.0")
    assert re.search(r'<tr class="failed"><td class="num">0001</td><td class="num">0.002</td>', page)
    assert "FAILED: no result" in page and "1 of 3 points failed" in page
    assert "<td class=\"num\">0.03</td>" in page and "points/0002.h5" in page
    assert "first at point 0000 and 1 more" in page                      # one kind of warning, two points


def test_a_fit_shows_values_errors_correlation_and_rms():
    fit = {"status": "ok", "message": "converged", "paths": ["a.b", "c.d"], "values": {"a.b": 4.5, "c.d": 0.97},
           "standard_errors": {"a.b": 0.25, "c.d": None}, "ranges": {"a.b": [2, 20], "c.d": [0.5, 1]},
           "start": {"a.b": 6, "c.d": 0.9}, "correlation": [[1.0, -0.98], [-0.98, 1.0]], "residual_rms": 0.99,
           "weighting": "sigma", "points": [{"line": 3, "conditions": {"seed.energy_J": 0.01},
                                              "measured": {"output_energy_J": 0.04},
                                              "modelled": {"output_energy_J": 0.041},
                                              "residual": {"output_energy_J": 0.5}}],
           "evaluations": 7, "runs": 40, "notes": ["a note <here>"], "data": "x,y\n1,2\n", "data_file": "d.csv"}
    page = build_html(ReportData(kind="fit", title="fit", fit=fit), "now", "0.1.0")
    assert "<td class=\"num\">4.5</td><td class=\"num\">0.25</td>" in page
    assert "<td class=\"num\">-0.98</td>" in page and "Residual rms 0.99" in page
    assert "+0.5" in page and "a note &lt;here&gt;" in page


def test_an_unknown_kind_is_refused():
    with pytest.raises(ValueError, match="unknown report kind"):
        build_html(ReportData(kind="movie", title="x"), "now", "0.1.0")


@pytest.mark.parametrize("name, words", [("gain_rod.png", "gain of medium rod"),
                                         ("output_energy_J.png", "output energy (J)"),
                                         ("hist_peak_fluence_J_cm2.png", "histogram of peak fluence (J/cm²)"),
                                         ("fluence_maps.png", "fluence maps at the steps"),
                                         ("fibre_pre_amp_powers.png", "powers along fibre pre_amp"),
                                         ("fibre_power_ase.png", "ASE spectra of fibre power"),
                                         ("steps.0.gain.png", "steps 0 gain")])
def test_figure_titles(name, words):
    assert figure_title(name) == words


def test_a_runs_figures_come_in_the_order_the_run_writes_them():
    from ampmodel.studies.report_files import _figure_rank
    names = ["b_integral.png", "beam_size.png", "energy_per_step.png", "fluence_maps.png", "gain_rod.png",
             "hist_gain.png", "overview.png", "pulse_power.png", "spectrum.png", "b_integral_rad.png"]
    assert sorted(names, key=_figure_rank) == [
        "overview.png", "fluence_maps.png", "energy_per_step.png", "pulse_power.png", "gain_rod.png",
        "b_integral.png", "beam_size.png", "spectrum.png", "b_integral_rad.png", "hist_gain.png"]
