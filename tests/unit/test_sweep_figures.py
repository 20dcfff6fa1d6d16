"""What the sweep and tolerance-run figures show: the damage and B-integral lines of the config's
[limits] and a run's bounds (plots/limits.py), no figure of a swept input against itself, heat-map cells
of equal size whose labels never overlap, titles inside the figure, legends beside the data."""
from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from ampmodel.description import Limits
from ampmodel.plots.histograms import histogram_jobs
from ampmodel.plots.limits import _echoes, limit_lines
from ampmodel.plots.sweep import sweep_jobs
from ampmodel.studies.figures import Limit

ENERGIES = [0.001, 0.005, 0.015, 0.040]          # uneven steps, as a user sweeps oscillators
GAINS = [5.0, 9.0]


def _summary(e: float, g: float) -> dict:
    out = e * g * 0.8
    return {"input_energy_J": 0.98 * e, "output_energy_J": out, "peak_fluence_J_cm2": 4 * out,
            "b_integral_rad": 30 * out, "lost_energy_J": e * e, "gain": 0.8 * g,   # lost energy: a log axis
            "warnings": ["W"] if e > 0.03 and g > 6 else [],
            "steps": [{"index": 0, "damage_fluence_J_cm2": 8.0, "b_integral_rad": 10 * out},
                      {"index": 1, "damage_fluence_J_cm2": 6.0, "b_integral_rad": 20 * out}]}


def _sweep(tmp_path: Path):
    values = [{"seed.energy_J": e, "medium.rod.small_signal_gain": g} for e in ENERGIES for g in GAINS]
    summaries = [_summary(v["seed.energy_J"], v["medium.rod.small_signal_gain"]) for v in values]
    return SimpleNamespace(paths=["seed.energy_J", "medium.rod.small_signal_gain"], values=values,
                           summaries=summaries, title="test sweep", out=tmp_path)


def _figure_of(job):
    """Draw a job's figure without writing it: the figure save_png was given."""
    import ampmodel.plots.histograms as histogram_module
    import ampmodel.plots.sweep as sweep_module
    seen = {}
    original = sweep_module.save_png
    for module in (sweep_module, histogram_module):
        module.save_png = lambda fig, path: seen.setdefault("fig", fig) and path
    try:
        job.draw()
    finally:
        for module in (sweep_module, histogram_module):
            module.save_png = original
    fig = seen["fig"]
    fig.canvas.draw()
    return fig


def test_limit_lines_follow_the_limits_table_and_the_bounds():
    summaries = [_summary(0.01, 5.0)]
    limits = Limits(b_integral_total_rad=2.5, b_integral_step_rad=1.5, damage_fraction=0.4)
    damage = limit_lines("peak_fluence_J_cm2", summaries, limits)
    assert [round(x.value, 12) for x in damage] == [6.0, 2.4]      # the lowest step's, and 0.4 of it
    assert [x.value for x in limit_lines("steps.0.peak_fluence_J_cm2", summaries, limits)] == [8.0, 3.2]
    assert [x.value for x in limit_lines("b_integral_rad", summaries, limits)] == [2.5]
    assert [x.value for x in limit_lines("steps.1.b_integral_rad", summaries, limits)] == [1.5]
    assert [x.value for x in limit_lines("worst_damage_margin", summaries, limits)] == [1.0, 0.4]
    assert limit_lines("output_energy_J", summaries, limits) == []
    assert limit_lines("peak_fluence_J_cm2", summaries, None) == []
    bound = limit_lines("output_energy_J", summaries, None, [Limit("output_energy_J", ">=", 0.03)])
    assert [(x.value, x.label) for x in bound] == [(0.03, "bound ≥")]


def test_a_swept_input_is_not_drawn_against_itself(tmp_path):
    sweep = _sweep(tmp_path)
    names = {j.path.name for j in sweep_jobs(sweep, "grid", tmp_path)}
    assert "input_energy_J.png" not in names                       # 0.98 x the swept seed energy
    assert {"output_energy_J.png", "gain.png", "overview.png"} <= names
    y = np.array([s["input_energy_J"] for s in sweep.summaries])
    assert _echoes("input_energy_J", y, sweep.values, sweep.paths)
    assert not _echoes("output_energy_J", np.array([s["output_energy_J"] for s in sweep.summaries]),
                       sweep.values, sweep.paths)                  # not an input, even when proportional
    assert not _echoes("input_energy_J", y * np.linspace(1, 1.1, y.size), sweep.values, sweep.paths)


def test_limit_lines_are_drawn_and_named_in_the_legend(tmp_path):
    jobs = {j.path.name: j for j in sweep_jobs(_sweep(tmp_path), "grid", tmp_path, Limits(b_integral_total_rad=1.0))}
    fig = _figure_of(jobs["b_integral_rad.png"])
    ax = fig.axes[0]
    drawn = [line for line in ax.get_lines() if line.get_gid() == "limit"]
    assert len(drawn) == 1 and drawn[0].get_ydata()[0] == pytest.approx(1.0)
    assert any("B-integral limit" in t.get_text() for t in ax.get_legend().get_texts())
    # the damage fluence (6 J/cm²) is far above the peak fluences (at most 1.2): named, not drawn
    fig = _figure_of(jobs["peak_fluence_J_cm2.png"])
    texts = [" ".join(t.get_text().split()) for t in fig.axes[0].get_legend().get_texts()]
    assert any("damage fluence" in t and "off the axis" in t for t in texts)


def _boxes_overlap(a, b) -> bool:
    return a.x0 < b.x1 and b.x0 < a.x1 and a.y0 < b.y1 and b.y0 < a.y1


def test_heat_map_cells_are_equal_and_their_labels_do_not_overlap(tmp_path):
    jobs = {j.path.name: j for j in sweep_jobs(_sweep(tmp_path), "grid", tmp_path)}
    fig = _figure_of(jobs["output_energy_J.png"])
    heat = fig.axes[1]
    labels = [t for t in heat.texts]
    assert len(labels) == len(ENERGIES) * len(GAINS)
    renderer = fig.canvas.get_renderer()
    boxes = [t.get_window_extent(renderer) for t in labels]
    assert not any(_boxes_overlap(a, b) for i, a in enumerate(boxes) for b in boxes[i + 1:])
    xs = sorted({round(t.get_position()[0], 9) for t in labels})
    assert np.allclose(np.diff(xs), 1.0)                            # equal cells, whatever the values' steps
    assert [t.get_text() for t in heat.get_xticklabels()] == ["1", "5", "15", "40"]


def _inside(fig, artist) -> bool:
    box = artist.get_window_extent(fig.canvas.get_renderer())
    return box.x0 >= 0 and box.y0 >= 0 and box.x1 <= fig.bbox.width + 0.5 and box.y1 <= fig.bbox.height + 0.5


def test_titles_and_legends_stay_inside_the_figure_and_off_the_data(tmp_path):
    sweep = _sweep(tmp_path)
    long_title = "a very long title of a tolerance run that a user typed " * 3
    pct = {k: {"p5": 0.0, "p50": 0.0, "p95": 0.0} for k in ("output_energy_J", "peak_fluence_J_cm2")}
    for k in pct:
        y = np.array([s[k] for s in sweep.summaries])
        pct[k] = {"p5": np.percentile(y, 5), "p50": np.percentile(y, 50), "p95": np.percentile(y, 95)}
    jobs = histogram_jobs(sweep.summaries, pct, tmp_path, long_title, Limits(),
                          [Limit("peak_fluence_J_cm2", "<=", 1.0)])
    assert {j.path.name for j in jobs} == {"hist_output_energy_J.png", "hist_peak_fluence_J_cm2.png"}
    for job in jobs + sweep_jobs(sweep, "grid", tmp_path, Limits()):
        fig = _figure_of(job)
        assert _inside(fig, fig._suptitle), job.path.name
        ax = fig.axes[0]
        legend = ax.get_legend() or (fig.legends[0] if fig.legends else None)
        assert legend is not None and _inside(fig, legend), job.path.name
        assert not _boxes_overlap(legend.get_window_extent(fig.canvas.get_renderer()),
                                  ax.get_window_extent(fig.canvas.get_renderer())), job.path.name


@pytest.mark.parametrize("combine", ["grid", "zip"])
def test_a_shared_canvas_draws_what_a_canvas_of_its_own_draws(tmp_path, combine):
    """The sweep's figures on one canvas shown again for each (only what differs replaced) are the
    same files, byte for byte, as each drawn on a canvas built for it alone."""
    from ampmodel.plots.drawing import draw_all
    sweep = _sweep(tmp_path)
    if combine == "zip":
        sweep.values = sweep.values[::2]
        sweep.summaries = sweep.summaries[::2]
    fresh = draw_all(sweep_jobs(sweep, combine, tmp_path / "fresh", Limits(), shared=False), workers=1)
    shared = draw_all(sweep_jobs(sweep, combine, tmp_path / "shared", Limits(), shared=True), workers=1)
    assert len(fresh) >= 4
    for a, b in zip(fresh, shared, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name
