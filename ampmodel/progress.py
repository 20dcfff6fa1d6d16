"""The one progress bar of long work: a tqdm bar on stderr, shown on an interactive terminal.

Used by the paths (z-slice passes, pulses of a train, steady-state sweeps) and the studies; it writes
nothing to stdout and nothing when stderr is not a terminal, unless forced on.
"""
from __future__ import annotations

import sys
from contextlib import nullcontext

# Fewer counts than this are not worth a bar (they finish before it is read).
MIN_TOTAL = 50


def progress_bar(enabled: bool | None, *, total: int | None = None, unit: str, desc: str,
                 min_total: int = MIN_TOTAL, bar_format: str | None = None):
    """A context manager giving a tqdm bar, or None when no bar is shown.

    Parameters
    ----------
    enabled : True shows the bar, False hides it, None shows it when stderr is an interactive terminal
    total : the count expected, or None when it is not known in advance (a counter); a total below
        ``min_total`` shows no bar
    unit, desc : what is counted ("slice", "pulse", "sweep") and the bar's label
    bar_format : tqdm's layout of the bar, when the default does not suit
    """
    if enabled is None:
        enabled = sys.stderr.isatty()
    if not enabled or (total is not None and total < min_total):
        return nullcontext(None)
    from tqdm import tqdm
    return tqdm(total=total, unit=unit, desc=desc, leave=False, file=sys.stderr, bar_format=bar_format)
