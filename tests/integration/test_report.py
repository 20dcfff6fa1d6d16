"""report.html through the command line: written by run and sweep (and spread, fit), rebuilt by
`ampmodel report DIR` to the same page apart from its time stamp, and bad input refused (exit 2,
nothing written)."""
from __future__ import annotations

import json
import re
from html import escape
from pathlib import Path

import h5py
import pytest
from sweep_helpers import ROOT, ampmodel, write_config

from ampmodel.output.tables import run_report_lines
from ampmodel.studies.html_report import STAMP_CLASS

SMALL = ["--set", "grid.points=32", "--set", "grid.time_slices=8"]


def without_stamp(page: str) -> str:
    stamp = re.compile(rf'<p class="{STAMP_CLASS}">report written [^<]*</p>')
    assert len(stamp.findall(page)) == 1
    return stamp.sub("", page)


def embedded(page: str) -> list[str]:
    return re.findall(r'src="(data:image/png;base64,[^"]+)"', page)


def mtimes(folder: Path) -> dict[str, int]:
    return {p.relative_to(folder).as_posix(): p.stat().st_mtime_ns for p in folder.rglob("*")
            if p.is_file() and p.name != "report.html"}


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory) -> tuple[Path, str]:
    tmp = tmp_path_factory.mktemp("report_run")
    out = tmp / "rod"
    proc = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(out), "--quiet", *SMALL,
                    cwd=tmp)
    assert proc.returncode == 0, proc.stderr
    return out, proc.stdout


def test_a_run_writes_its_report_with_every_figure_the_table_and_the_config(run_folder):
    out, stdout = run_folder
    assert f"wrote {out}/ (result.h5, summary.json, plots/, report.html)" in stdout
    page = (out / "report.html").read_text(encoding="utf-8")
    summary = json.loads((out / "summary.json").read_text())
    pngs = sorted((out / "plots").glob("*.png"))
    assert len(pngs) >= 5 and len(embedded(page)) == len(pngs)
    for p in pngs:
        assert f"<code>plots/{p.name}</code>" in page
    printed = [line for line in run_report_lines(summary) if not line.startswith(("warnings:", "notes:", "  - "))]
    for line in printed:                                         # the table the command printed, safety note too
        assert escape(line) in page and line in stdout
    for n in summary["notices"]:
        assert f"<code>{n['code']}</code>" in page and escape(n["text"]) in page
    with h5py.File(out / "result.h5", "r") as f:
        as_run = f.attrs["config"]
    assert f"<pre>{escape(as_run)}</pre>" in page                  # the config as run, whole
    assert "grid.points=32" in as_run and "points = 32" in as_run  # with the --set it ran with
    assert "<h3>medium rod</h3>" in page and "source: " in page
    for name in ("result.h5", "summary.json", "plots/fluence_maps.png"):
        assert f"<td>{name}</td>" in page
    assert "http://" not in page and "https://" not in page


def test_report_rebuilds_the_same_page_and_touches_nothing_else(run_folder, tmp_path):
    out, _ = run_folder
    before = (out / "report.html").read_text(encoding="utf-8")
    files = mtimes(out)
    proc = ampmodel("report", str(out), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == f"wrote {out / 'report.html'}"
    assert without_stamp((out / "report.html").read_text(encoding="utf-8")) == without_stamp(before)
    assert mtimes(out) == files and not list(out.glob(".*"))    # only report.html written, no leftovers
    copy = tmp_path / "copy.html"
    proc = ampmodel("report", str(out), "--out", str(copy), cwd=tmp_path)
    assert proc.returncode == 0 and without_stamp(copy.read_text(encoding="utf-8")) == without_stamp(before)
    proc = ampmodel("report", str(out), "--out", str(copy), cwd=tmp_path)   # never over an existing file
    assert proc.returncode == 2 and f"--out {copy}: exists" in proc.stderr
    assert "nothing was run or written" in proc.stderr


@pytest.mark.parametrize("what", ["missing", "empty", "plots"])
def test_a_folder_that_holds_no_results_is_bad_input(run_folder, tmp_path, what):
    folder = {"missing": tmp_path / "nowhere", "empty": tmp_path / "empty", "plots": run_folder[0] / "plots"}[what]
    if what == "empty":
        folder.mkdir()
    before = sorted(p.name for p in tmp_path.iterdir())
    plots_before = sorted(p.name for p in (run_folder[0] / "plots").iterdir())
    proc = ampmodel("report", str(folder), cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert str(folder) in proc.stderr and ("no such folder" in proc.stderr or "not a result folder" in proc.stderr)
    assert "Traceback" not in proc.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert sorted(p.name for p in (run_folder[0] / "plots").iterdir()) == plots_before


def test_a_run_without_plots_says_the_figures_were_not_drawn(tmp_path):
    out = tmp_path / "bare"
    proc = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(out), "--no-plots",
                    "--quiet", *SMALL, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert f"wrote {out}/ (result.h5, summary.json, report.html)" in proc.stdout
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "the figures were not drawn (--no-plots)" in page and "<img" not in page


def test_a_run_never_overwrites_an_earlier_one_and_its_report_is_its_own(run_folder, tmp_path):
    base = tmp_path / "rod"
    first = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(base), "--quiet",
                     *SMALL, "--no-plots", cwd=tmp_path)
    second = ampmodel("run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(base), "--quiet",
                      *SMALL, "--set", "seed.energy_J=0.01", cwd=tmp_path)
    assert first.returncode == second.returncode == 0
    assert "seed.energy_J=0.01" not in (base / "report.html").read_text(encoding="utf-8")
    assert "seed.energy_J=0.01" in (tmp_path / "rod-2" / "report.html").read_text(encoding="utf-8")


def test_a_sweep_writes_its_report_and_report_rebuilds_it(tmp_path):
    config = write_config(tmp_path)
    out = tmp_path / "sweep"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "report.html)" in proc.stdout.splitlines()[-1]
    page = (out / "report.html").read_text(encoding="utf-8")
    assert len(embedded(page)) == len(list((out / "plots").glob("*.png"))) > 0
    rows = re.findall(r"<tr[^>]*><td class=\"num\">(\d{4})</td>", page)
    assert rows == [f"{i:04d}" for i in range(8)]
    for i in range(8):
        assert f"points/{i:04d}.h5" in page
    assert "Every point has its result file." in page and "<h3>medium rod</h3>" in page
    proc = ampmodel("report", str(out), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert without_stamp((out / "report.html").read_text(encoding="utf-8")) == without_stamp(page)


def test_a_sweep_with_a_failed_point_marks_it(tmp_path):
    config = ROOT / "configs" / "cw_double_pass_single_frequency.toml"
    out = tmp_path / "out"
    proc = ampmodel("sweep", str(config), "--out", str(out), "--jobs", "1", "--quiet", "--no-plots", "--set",
                    "grid.points=16", "--set", 'sweep."solver.max_iterations"=[2, 1000]', cwd=tmp_path)
    assert proc.returncode == 1, proc.stderr
    page = (out / "report.html").read_text(encoding="utf-8")
    assert re.search(r'<tr class="failed"><td class="num">0000</td><td class="num">2</td>', page)
    assert "1 of 2 points failed" in page and "points/0001.h5" in page
    assert "the figures were not drawn (--no-plots)" in page


def test_a_report_that_cannot_be_built_costs_no_results(tmp_path, monkeypatch, capsys):
    from ampmodel import cli
    from ampmodel.studies import report_files

    def broken(*args, **kwargs):
        raise RuntimeError("a fault of the page")

    monkeypatch.setattr(report_files, "build_html", broken)
    out = tmp_path / "kept"
    code = cli.main(["run", str(ROOT / "configs" / "single_pass_rod.toml"), "--out", str(out), "--quiet",
                     "--no-plots", *SMALL])
    printed = capsys.readouterr()
    assert code == 0
    assert (out / "result.h5").is_file() and (out / "summary.json").is_file() and not (out / "report.html").exists()
    assert "internal error while building report.html (RuntimeError: a fault of the page)" in printed.err
    assert "`ampmodel report DIR` builds the page again" in printed.err
    assert f"wrote {out}/ (result.h5, summary.json)" in printed.out
    assert not list(out.glob(".*"))                                  # no partial file left
