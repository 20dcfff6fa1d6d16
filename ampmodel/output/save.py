"""A run's folder: result.h5, summary.json and the figures, written from a Result."""
from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

from ampmodel.output import hdf5
from ampmodel.output.atomic import write_json

if TYPE_CHECKING:
    from ampmodel.output.result import Result


def save_run(result: Result, directory: str | os.PathLike, plots: bool = True) -> Path:
    """Write result.h5, summary.json and (optionally) plots/*.png into ``directory``.

    The directory is created; existing result files in it are never overwritten (FileExistsError).
    """
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    for name in ("result.h5", "summary.json"):
        if (out / name).exists():
            raise FileExistsError(f"{out / name} exists: a run never overwrites another")
    hdf5.write_hdf5(result, out / "result.h5")
    write_json(result.summary, out / "summary.json")
    if plots:
        from ampmodel.plots.run import make_plots  # matplotlib only where it is used
        make_plots(result, out / "plots")
    return out
