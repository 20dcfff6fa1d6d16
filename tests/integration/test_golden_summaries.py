"""Golden summaries: every example config, run at a small grid, gives the summary stored beside it.

The stored summaries (tests/data/golden/NAME.json) were written by this module's ``--write`` and
are the safety net for changes that must not change any result (moving code, splitting functions,
renaming internals): every figure must match to a relative 1e-12 (the comparison of ``ampmodel
rerun``; figures that are themselves round-off, such as an energy balance error, match to an
absolute 1e-12). A change of physics or of the summary's contents is a reason to write them again,
and the diff of the JSON files shows what changed:

    python tests/integration/test_golden_summaries.py --write
"""
from __future__ import annotations

import json
import re
import sys
import tempfile
from pathlib import Path

import pytest

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib  # type: ignore[no-redef]

ROOT = Path(__file__).resolve().parents[2]
CONFIGS = sorted((ROOT / "configs").glob("*.toml"))
GOLDEN = ROOT / "tests" / "data" / "golden"
RTOL = 1e-12
SMALL = ["grid.points=32", "grid.time_slices=12"]
SMALL_CW = ["grid.points=32"]          # a cw run has no time slices


def small_overrides(config: Path) -> list[str]:
    cw = re.search(r'^mode\s*=\s*"cw"', config.read_text(), re.MULTILINE) is not None
    return SMALL_CW if cw else SMALL


def earlier_stage(config: Path) -> Path | None:
    """The example config whose result a chained stage takes (``seed.from = "../runs/NAME/result.h5"``:
    configs/NAME.toml, as ``ampmodel run`` names its folder), or None."""
    source = tomllib.loads(config.read_text()).get("seed", {}).get("from")
    return ROOT / "configs" / f"{Path(source).parent.name}.toml" if source else None


# seed_from entries that name the earlier stage's file (a temporary one here): they change from run to run
FILE_ENTRIES = ("file", "sha256", "created_utc", "software_version")


def summary_of(config: Path) -> dict:
    """The summary of ``config`` at the small grid, as summary.json holds it; a chained stage runs its
    earlier stage first, at the same small grid, into a temporary folder."""
    from ampmodel import load_config, simulate
    overrides = small_overrides(config)
    earlier = earlier_stage(config)
    with tempfile.TemporaryDirectory() as folder:
        if earlier is not None:
            first = simulate(load_config(earlier, small_overrides(earlier)), progress=False)
            first.save(Path(folder) / "earlier", plots=False)
            overrides = overrides + [f'seed.from = "{Path(folder) / "earlier" / "result.h5"}"']
        result = simulate(load_config(config, overrides), progress=False)
    summary = json.loads(json.dumps(result.summary))
    if "seed_from" in summary:
        summary["seed_from"] = {k: v for k, v in summary["seed_from"].items() if k not in FILE_ENTRIES}
    return summary


def test_every_example_config_has_a_golden_summary():
    stored = {p.stem for p in GOLDEN.glob("*.json")}
    assert stored == {c.stem for c in CONFIGS}, "write the golden summaries again (module docstring)"


@pytest.mark.parametrize("config", CONFIGS, ids=[c.stem for c in CONFIGS])
def test_summary_matches_the_golden_one(config):
    from ampmodel.output.summary import compare_summaries
    golden = json.loads((GOLDEN / f"{config.stem}.json").read_text())
    compared, differences = compare_summaries(golden, summary_of(config), rtol=RTOL)
    assert compared > 20
    assert not differences, "\n".join(d.text() for d in differences)


def write_golden() -> None:
    GOLDEN.mkdir(parents=True, exist_ok=True)
    for config in CONFIGS:
        path = GOLDEN / f"{config.stem}.json"
        path.write_text(json.dumps(summary_of(config), indent=1, sort_keys=True) + "\n")
        print(f"wrote {path.relative_to(ROOT)}")


if __name__ == "__main__":
    if sys.argv[1:] != ["--write"]:
        sys.exit(__doc__)
    write_golden()
