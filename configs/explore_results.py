"""From Python: load a run's result, draw a lineout, and run a small sweep.

A worked example in plain Python (paste it cell by cell into a notebook if you prefer). Run it from the
repository's top folder:

    python configs/explore_results.py [OUT_FOLDER]

It runs the demo (configs/single_pass_rod.toml) into OUT_FOLDER (default runs/explore), reads the result
back twice (with ampmodel's API, and with h5py as any HDF5 reader would), draws the output fluence along
x through the axis against the seed's, and sweeps the seed energy from Python.
"""
from __future__ import annotations

import sys
from pathlib import Path

import h5py
import matplotlib

matplotlib.use("Agg")                       # files, no window: works on a server too
import matplotlib.pyplot as plt  # noqa: E402

import ampmodel  # noqa: E402

HERE = Path(__file__).resolve().parent
out = Path(sys.argv[1]) if len(sys.argv) > 1 else Path("runs") / "explore"
out.mkdir(parents=True, exist_ok=True)

# 1. one run, kept in memory and written to a folder of its own (never over an earlier one)
config = ampmodel.load_config(HERE / "single_pass_rod.toml", ["grid.points=64"])
result = ampmodel.simulate(config)
folder = result.save(out / "demo")
summary = result.summary
print(f"output {summary['output_energy_J'] * 1e3:.2f} mJ, peak fluence {summary['peak_fluence_J_cm2']:.3g} J/cm2, "
      f"worst damage margin {summary['worst_damage_margin']:.2f}, warnings {len(summary['warnings'])}")

# 2. the same result read back with h5py: SI units, a `units` attribute on every dataset
with h5py.File(Path(folder) / "result.h5", "r") as f:
    x_mm = f["grid/x"][()] * 1e3
    seed = f["seed/fluence"][()] * 1e-4                  # J/m2 -> J/cm2
    last = sorted(f["steps"])[-1]
    output = f[f"steps/{last}/fluence"][()] * 1e-4
    print(f"/steps/{last}/fluence is in {f[f'steps/{last}/fluence'].attrs['units']}")

# 3. a lineout along x through the axis
row = len(x_mm) // 2
fig, ax = plt.subplots(figsize=(6, 4))
ax.plot(x_mm, seed[row], label="seed")
ax.plot(x_mm, output[row], "--", label=f"after step {int(last)}")
ax.set_xlabel("x (mm)")
ax.set_ylabel("fluence (J/cm²)")
ax.legend()
fig.tight_layout()
fig.savefig(out / "lineout.png", dpi=120)
print(f"wrote {out / 'lineout.png'}")

# 4. a small sweep from Python: the same machinery as `ampmodel sweep`, in parallel, resumable
raw = config.raw | {"sweep": {"seed.energy_J": [0.005, 0.01, 0.02, 0.04]}}
sweep = ampmodel.run_sweep(raw, out / "sweep", jobs=2, plots=False)
for values, s in zip(sweep.values, sweep.summaries, strict=True):
    print(f"seed {values['seed.energy_J'] * 1e3:5.1f} mJ -> output {s['output_energy_J'] * 1e3:6.2f} mJ")
print("Laser safety: these are Class 4 energies; follow local regulations and your laser safety officer.")
