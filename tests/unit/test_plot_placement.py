"""What a reader sees in the run figures: the B-integral each step adds as the summary gives it, the
fill factor explained on the figure, fibre power axes that follow the data, and legends that cover no
data and no text.

Small runs of the example configs (coarse grids, few slices), drawn in-process: each figure is caught
before it is written, drawn once, and its legends' boxes in display coordinates are compared with
the points of every line, marker and bar and with every text of the figure.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from matplotlib.legend import Legend
from matplotlib.patches import Rectangle
from matplotlib.text import Text

import ampmodel
from ampmodel.plots import beam, cw, fibre, gain, layout, maps, spectra, trains
from ampmodel.plots.fibre import power_axis
from ampmodel.plots.layout import b_integrals
from ampmodel.plots.run import make_plots

CONFIGS = Path(__file__).resolve().parents[2] / "configs"
SMALL = {
    "four_pass_relay_filter": ["grid.points=32", "grid.time_slices=8"],
    "fibre_yb_cw": ["medium.power.slices=40", "medium.power.ase_bins=8"],
    "fibre_yb_pulsed": ["grid.time_slices=16", "medium.pre.slices=40", "medium.pre.ase_bins=8",
                        "medium.power.slices=40", "medium.power.ase_bins=8"],
    "stretched_measured_spectrum": ["grid.points=16", "grid.time_slices=16"],
    "regen_ti_sapphire": ["grid.points=16", "grid.time_slices=8"],
    "khz_end_pumped_train": ["grid.points=16", "grid.time_slices=8"],
    "cw_end_pumped_yb_yag": ["grid.points=16"],
}
_RUNS: dict[str, ampmodel.Result] = {}


def run(name: str):
    """The example config ``name`` on a small grid, simulated once per test session."""
    if name not in _RUNS:
        _RUNS[name] = ampmodel.simulate(ampmodel.load_config(CONFIGS / f"{name}.toml", SMALL[name]))
    return _RUNS[name]


def figures_of(result, tmp_path: Path, monkeypatch) -> dict[str, object]:
    """The run's figures, file name -> Figure, caught before they are written (no file is made)."""
    caught = {}

    def catch(fig, path):
        caught[Path(path).name] = fig
        return Path(path)

    for module in (beam, cw, fibre, gain, layout, maps, spectra, trains):
        monkeypatch.setattr(module, "save_png", catch)
    make_plots(result, tmp_path, workers=1)   # in this process: the figures are caught here
    return caught


def _data_points(fig) -> np.ndarray:
    """Display coordinates of every drawn data point: line vertices, markers, bar tops (inside their axes)."""
    points = []
    for ax in fig.axes:
        shown = []
        for line in ax.get_lines():
            if line.get_visible():
                xy = np.asarray(line.get_xydata(), dtype=float)
                xy = line.get_transform().transform(xy[np.isfinite(xy).all(axis=1)])
                if len(xy) > 1:          # the segments too, not only their ends: 16 points along each
                    f = np.linspace(0.0, 1.0, 16)[:, None, None]
                    xy = (xy[:-1][None] * (1 - f) + xy[1:][None] * f).reshape(-1, 2)
                shown.append(xy)
        for coll in ax.collections:
            offsets = np.asarray(coll.get_offsets(), dtype=float)
            if offsets.size:
                shown.append(coll.get_offset_transform().transform(offsets[np.isfinite(offsets).all(axis=1)]))
        for patch in ax.patches:
            if isinstance(patch, Rectangle) and patch.get_visible():
                box = patch.get_window_extent()
                shown.append(np.array([[box.x0, box.y1], [box.x1, box.y1], [(box.x0 + box.x1) / 2, box.y1]]))
        for xy in shown:
            points.append(xy[[ax.bbox.contains(x, y) for x, y in xy]] if len(xy) else xy)
    return np.concatenate(points) if points else np.zeros((0, 2))


def _texts(fig, legend: Legend) -> list[Text]:
    """Every visible, non-empty text of the figure that is not part of ``legend``."""
    inside = {id(t) for t in legend.findobj(Text)}
    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip() and id(t) not in inside]


def legend_faults(fig) -> list[str]:
    """What the figure's legends cover: data points (lines, markers, bar tops) or texts."""
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    legends = [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None] + list(fig.legends)
    points = _data_points(fig)
    faults = []
    for legend in legends:
        box = legend.get_window_extent(renderer)
        inside = (points[:, 0] > box.x0) & (points[:, 0] < box.x1) & (points[:, 1] > box.y0) & (points[:, 1] < box.y1)
        if inside.any():
            faults.append(f"legend {[t.get_text() for t in legend.get_texts()]} covers {int(inside.sum())} data points")
        for text in _texts(fig, legend):
            if box.overlaps(text.get_window_extent(renderer)):
                faults.append(f"legend {[t.get_text() for t in legend.get_texts()]} covers the text {text.get_text()!r}")
    return faults


@pytest.mark.parametrize("name", sorted(SMALL))
def test_legends_cover_no_data_and_no_text(name, tmp_path, monkeypatch):
    figures = figures_of(run(name), tmp_path, monkeypatch)
    assert figures
    with_legend = 0
    for file_name, fig in figures.items():
        with_legend += any(ax.get_legend() for ax in fig.axes) or bool(fig.legends)
        assert legend_faults(fig) == [], file_name
    assert with_legend >= 1


def test_the_check_sees_a_legend_on_a_peak(tmp_path, monkeypatch):
    """The check itself: a legend in the upper right corner over a curve that peaks there is found."""
    fig = figures_of(run("four_pass_relay_filter"), tmp_path, monkeypatch)["b_integral.png"]
    ax = fig.axes[0]
    ax.plot([0.0, 10.0], [0.0, ax.get_ylim()[1] * 0.9], label="a ramp to the corner")
    ax.legend(loc="upper right")
    assert any("covers" in fault for fault in legend_faults(fig))


def test_b_integral_bars_are_the_summary_values_and_zero_at_relays(tmp_path, monkeypatch):
    """A relay images the beam: it adds no B-integral (summary: 0), so the figure draws no bar there, even
    when the map it carries is moved against the map before it (an inverted, off-centre beam)."""
    name = "four_pass_relay_filter"        # a run of its own: its maps are changed below
    result = ampmodel.simulate(ampmodel.load_config(CONFIGS / f"{name}.toml", SMALL[name]))
    kinds = [r.kind for r in result.steps]
    relays = [i for i, k in enumerate(kinds) if k == "relay"]
    assert relays
    for i in relays:             # the relay's map, shifted by two pixels as an image of an off-axis beam
        result.steps[i].b_integral_rad = np.roll(result.steps[i - 1].b_integral_rad, 2, axis=1)
    summary_added = [e["b_integral_rad"] for e in result.summary["steps"]]
    total, added = b_integrals(result)
    assert added.tolist() == summary_added
    assert all(added[i] == 0.0 for i in relays)
    assert max(added) > 0.0
    fig = figures_of(result, tmp_path, monkeypatch)["b_integral.png"]
    bars = [p for p in fig.axes[0].patches if isinstance(p, Rectangle)]
    assert [b.get_height() for b in bars] == summary_added
    # the accumulated line still reads the maps: the largest B-integral after each step
    assert total[-1] == pytest.approx(result.summary["b_integral_rad"], rel=1e-12)


def test_fill_factor_is_explained_and_drawn_as_pale_bars(tmp_path, monkeypatch):
    result = run("four_pass_relay_filter")
    fig = figures_of(result, tmp_path, monkeypatch)["beam_size.png"]
    texts = " ".join(t.get_text() for t in fig.findobj(Text))
    assert "clear aperture of the medium it meets next" in texts
    assert "expected, not a fault" in texts
    fill = [e["fill_factor"] for e in [result.summary["seed_beam"]] + result.summary["steps"]]
    bar_axes = [ax for ax in fig.axes if any(isinstance(p, Rectangle) for p in ax.patches)]
    assert len(bar_axes) == 1
    bars = [p for p in bar_axes[0].patches if isinstance(p, Rectangle)]
    assert [b.get_height() for b in bars] == fill
    assert all(b.get_facecolor() == bars[0].get_facecolor() for b in bars)   # one colour: no alarm
    assert not any(np.asarray(line.get_ydata()).tolist() == fill for ax in fig.axes for line in ax.get_lines())


@pytest.mark.parametrize("name", ["fibre_yb_cw", "fibre_yb_pulsed"])
def test_fibre_power_axis_follows_the_data(name, tmp_path, monkeypatch):
    result = run(name)
    figures = figures_of(result, tmp_path, monkeypatch)
    for fibre_name in result.fibres:
        ax = figures[f"fibre_{fibre_name}_powers.png"].axes[0]
        shown = np.concatenate([np.ravel(line.get_ydata()) for line in ax.get_lines()])
        hi = float(shown.max())
        bottom, top = ax.get_ylim()
        assert ax.get_yscale() == "log"          # signal and pump in W, ASE in mW or less: decades apart
        assert hi <= top <= hi * 10 ** (0.06 * np.log10(top / bottom) + 1e-9)   # a margin, not decades
        assert bottom >= hi * 1e-6 * 0.5
        positive = shown[shown > 0]
        assert bottom <= max(positive.min(), hi * 1e-6)


def test_power_axis_linear_when_the_data_span_little_and_log_when_decades():
    scale, bottom, top = power_axis(np.array([2.0, 3.0, 5.0]), np.array([4.0]))
    assert (scale, bottom) == ("linear", 0.0) and top == pytest.approx(5.0 * 1.05)
    scale, bottom, top = power_axis(np.array([1e-3, 10.0]), np.array([0.0, np.nan]))
    assert scale == "log"
    assert top == pytest.approx(10.0 * 1e4 ** 0.05) and bottom == pytest.approx(1e-3 / 1e4 ** 0.05)
    scale, bottom, top = power_axis(np.array([1e-15, 1.0]))      # a tail falling to nothing: cut at 1e-6
    assert bottom == pytest.approx(1e-6 / 1e6 ** 0.05)
