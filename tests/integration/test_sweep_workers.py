"""A sweep shuts its worker processes down before its serial work (table, plots): none is left idle,
so a parent killed while it plots leaves no worker holding the caller's output streams (loky keeps
idle workers for minutes for reuse otherwise)."""
from __future__ import annotations

from sweep_helpers import write_config

import ampmodel as api


def _live_workers() -> list:
    from joblib.externals.loky import reusable_executor
    executor = reusable_executor._executor
    processes = getattr(executor, "_processes", None) or {}
    return [p for p in processes.values() if p.is_alive()]


def test_no_worker_is_left_when_a_sweep_returns(tmp_path):
    config = write_config(tmp_path, '\n[sweep]\n"seed.energy_J" = [0.002, 0.005, 0.01, 0.02]\n')
    result = api.run_sweep(config, tmp_path / "sw", jobs=2, plots=False)
    assert len(result.summaries) == 4 and not result.failed
    assert not _live_workers()
