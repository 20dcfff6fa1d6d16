"""Where a legend goes: in a band between an axes and its title, never over the data.

A legend inside the axes sits on a curve sooner or later (a fixed corner meets a peak, and
``loc="best"`` searches every line at each draw, which is slow and still fails when the curves fill
the box). Here the legend is anchored just above the axes' top edge, in columns that fit the axes'
width, and the title is lifted by the legend's height, which is known in points before any drawing
(rows of text of a known font size): no draw, no search, and the data keep the whole axes.
"""
from __future__ import annotations

from typing import Sequence

from matplotlib.legend import Legend
from matplotlib.transforms import ScaledTranslation

FONT_PT = 8.3               # "small" at matplotlib's default 10 pt
CHAR_EM = 0.56              # mean width of a character of the default sans-serif font, in em
ENTRY_EM = 2.0 + 0.8 + 1.6  # handle length, handle-to-text pad and the space between columns, in em
ROW_EM = 1.25               # height of one row of text, in em
ROW_GAP_EM = 0.4            # space between rows, in em
TOP_AXIS_PT = 30.0          # height of a secondary x axis on top: ticks, tick labels and its label
OFFSET_TEXT_PT = 40.0       # kept free at each end of the band: an axis' offset or exponent ("1e−7")


def columns_that_fit(labels: Sequence[str], width_pt: float, font_pt: float = FONT_PT) -> int:
    """The most columns (at most one per label) whose rows of ``labels`` fit in ``width_pt`` points."""
    n = len(labels)
    for ncol in range(n, 1, -1):
        widths = [max(len(s) for s in labels[c::ncol]) * CHAR_EM + ENTRY_EM for c in range(ncol)]
        if sum(widths) * font_pt <= width_pt:
            return ncol
    return 1


def legend_height_pt(rows: int, font_pt: float = FONT_PT) -> float:
    """Height in points of a frameless legend of ``rows`` rows (text, gaps and its border pad)."""
    return (rows * ROW_EM + max(rows - 1, 0) * ROW_GAP_EM + 0.8) * font_pt


def legend_above(ax, title: str = "", handles=None, labels: Sequence[str] | None = None, *,
                 font_pt: float = FONT_PT, width_in: float | None = None,
                 lift_pt: float = 0.0) -> Legend | None:
    """Put the legend of ``ax`` in a band between the axes' top edge and its title.

    The legend is centred, in as many columns as fit the axes' width less ``OFFSET_TEXT_PT`` at each
    end, where matplotlib writes an axis' exponent or offset.

    Parameters
    ----------
    ax : the axes (for twin axes, the one that holds the title; pass the handles of both)
    title : the axes' title, set above the legend (empty: none)
    handles, labels : the legend's entries; by default those of ``ax``
    font_pt : the legend's font size in points
    width_in : the width the legend may take, in inches; by default the axes' width as laid out
        before drawing
    lift_pt : points between the axes' top edge and the legend: the height of a secondary x axis on
        top (``TOP_AXIS_PT``); the title is lifted by as much

    Returns
    -------
    Legend or None : the legend (None when there is nothing to show)
    """
    if handles is None:
        handles, found = ax.get_legend_handles_labels()
        labels = found if labels is None else labels
    elif labels is None:
        labels = [h.get_label() for h in handles]
    labels = list(labels)
    if not labels:
        if title:
            ax.set_title(title)
        return None
    fig = ax.get_figure()
    if width_in is None:
        width_in = ax.get_position().width * fig.get_figwidth()
    ncol = columns_that_fit(labels, width_in * 72.0 - 2 * OFFSET_TEXT_PT, font_pt)
    rows = -(-len(labels) // ncol)
    anchor = ax.transAxes + ScaledTranslation(0.0, lift_pt / 72.0, fig.dpi_scale_trans)
    legend = ax.legend(handles, labels, loc="lower center", bbox_to_anchor=(0.5, 1.0),
                       bbox_transform=anchor, ncols=ncol,
                       fontsize=font_pt, frameon=False, borderaxespad=0.2, borderpad=0.4,
                       labelspacing=ROW_GAP_EM, columnspacing=1.6)
    if title:
        ax.set_title(title, pad=lift_pt + legend_height_pt(rows, font_pt) + 8.0)
    return legend
