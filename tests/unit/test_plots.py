"""Figures of a run: every PNG is written, readable and not blank, on ordinary and awkward runs.

The Result is built by hand (no solver): a Gaussian beam and pulse amplified by a simple slice-by-slice
Frantz–Nodvik update, so that the figures show what a real run looks like.
"""
from __future__ import annotations

import math
import warnings
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

from ampmodel.description import Config, Grid, Limits, Medium, Seed, Step, step_label
from ampmodel.materials.material import Material
from ampmodel.output.result import MediumRecord, Result, StepRecord
from ampmodel.plots.run import make_plots
from ampmodel.units import photon_energy_J

WAVELENGTH_M = 1064e-9


def _material(n2_m2_W: float) -> Material:
    return Material(name="test-Nd", wavelength_m=WAVELENGTH_M, emission_cross_section_m2=2.8e-23,
                    upper_lifetime_s=230e-6, refractive_index=1.82, n2_m2_W=n2_m2_W)


def synthetic_result(points: int = 32, time_slices: int = 16, slices: int = 5,
                     layout: tuple[tuple, ...] = (("pass", "rod", False), ("loss", 0.9),
                                                  ("pass", "rod", True)),
                     energy_J: float = 5e-3, duration_s: float = 10e-9, n2_m2_W: float = 0.0,
                     extra_media: tuple[str, ...] = (), with_summary: bool = True) -> Result:
    """A hand-made Result: Gaussian beam through passes of one rod (Frantz–Nodvik slices) and losses.

    Parameters
    ----------
    points : transverse pixels per axis; time_slices : Nt; slices : Nz of the rod
    layout : ("pass", medium, reverse) or ("loss", transmission) entries, in order
    energy_J : seed energy; duration_s : seed FWHM; n2_m2_W : nonlinear index (B-integral)
    extra_media : names of further media that no step passes
    """
    width_m, length_m, diameter_m, g0_total = 8e-3, 0.1, 6e-3, 8.0
    mat = _material(n2_m2_W)
    fsat = photon_energy_J(WAVELENGTH_M) / mat.emission_cross_section_m2        # J/m²
    x = (np.arange(points) - (points - 1) / 2) * (width_m / points)
    xx, yy = np.meshgrid(x, x)
    w = 1.5e-3
    seed_f = 2 * energy_J / (math.pi * w**2) * np.exp(-2 * (xx**2 + yy**2) / w**2)   # J/m²
    t = (np.arange(time_slices) - (time_slices - 1) / 2) * (3 * duration_s / time_slices)
    dt = float(t[1] - t[0]) if time_slices > 1 else duration_s
    shape = np.exp(-4 * math.log(2) * (t / duration_s) ** 2)
    shape /= shape.sum()
    area = (width_m / points) ** 2

    dz = length_m / slices
    inside = (xx**2 + yy**2) <= (diameter_m / 2) ** 2
    g = np.repeat((math.log(g0_total) / length_m * inside)[None], slices, axis=0)
    g_initial = g.copy()

    beam = seed_f[None] * shape[:, None, None]                                      # (Nt, Ny, Nx)
    b_acc = np.zeros_like(seed_f)
    records, entries = [], []
    for index, spec in enumerate(layout):
        e_in = float(beam.sum() * area)
        if spec[0] == "pass":
            order = range(slices - 1, -1, -1) if spec[2] else range(slices)
            peak_i = np.zeros_like(seed_f)
            for k in order:
                for j in range(time_slices):
                    f_in = beam[j]
                    gain = np.exp(g[k] * dz)
                    f_out = fsat * np.log1p(gain * np.expm1(f_in / fsat))
                    g[k] -= (f_out - f_in) / (fsat * dz)
                    beam[j] = f_out
                    peak_i = np.maximum(peak_i, f_out / dt)
            b_acc = b_acc + 2 * math.pi / WAVELENGTH_M * n2_m2_W * peak_i * length_m
            medium = spec[1]
        else:
            beam = beam * spec[1]
            medium = None
        fluence = beam.sum(axis=0)
        e_out = float(fluence.sum() * area)
        records.append(StepRecord(index=index, kind=spec[0], medium=medium, fluence_J_m2=fluence.copy(),
                                  power_W=beam.sum(axis=(1, 2)) * area / dt, b_integral_rad=b_acc.copy()))
        entries.append({"index": index, "kind": spec[0], "medium": medium, "energy_in_J": e_in,
                        "energy_out_J": e_out, "gain": e_out / e_in if e_in > 0 else None,
                        "peak_fluence_J_cm2": float(fluence.max()) / 1e4,
                        "b_integral_rad": float(b_acc.max())})

    media = {"rod": MediumRecord(name="rod", gain_initial_per_m=g_initial, gain_final_per_m=g,
                                 slice_length_m=dz, saturation_fluence_J_m2=fsat,
                                 saturation_intensity_W_m2=fsat / mat.upper_lifetime_s,
                                 material=mat.name)}
    cfg_media = [Medium(name="rod", material=mat, length_m=length_m, diameter_m=diameter_m,
                        slices=slices, small_signal_gain=g0_total)]
    for name in extra_media:
        media[name] = MediumRecord(name=name, gain_initial_per_m=g_initial.copy(),
                                   gain_final_per_m=g_initial.copy(), slice_length_m=dz,
                                   saturation_fluence_J_m2=fsat,
                                   saturation_intensity_W_m2=fsat / mat.upper_lifetime_s,
                                   material=mat.name)
        cfg_media.append(Medium(name=name, material=mat, length_m=length_m, diameter_m=diameter_m,
                                slices=slices, small_signal_gain=g0_total))
    steps = tuple(Step(kind="pass", index=i, medium=s[1], reverse=s[2]) if s[0] == "pass"
                  else Step(kind="loss", index=i, transmission=s[1]) for i, s in enumerate(layout))
    config = Config(title="synthetic rod amplifier", mode="pulsed",
                    grid=Grid(points=points, width_m=width_m, time_slices=time_slices),
                    media=tuple(cfg_media),
                    seed=Seed(wavelength_m=WAVELENGTH_M, energy_J=energy_J, duration_s=duration_s,
                              diameter_m=2 * w),
                    steps=steps, limits=Limits())
    summary = {"mode": "pulsed", "input_energy_J": float(seed_f.sum() * area),
               "output_energy_J": entries[-1]["energy_out_J"] if entries else float(seed_f.sum() * area),
               "steps": entries} if with_summary else {}
    return Result(config=config, x_m=x, y_m=x.copy(), t_s=t, seed_fluence_J_m2=seed_f,
                  seed_power_W=seed_f.sum() * area * shape / dt, steps=records, media=media,
                  summary=summary)


def _check_png(path: Path) -> None:
    assert path.is_file(), path
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", path
    img = mpimg.imread(path)
    assert img.ndim == 3 and img.shape[0] > 200 and img.shape[1] > 300, (path, img.shape)
    assert float(np.ptp(img[..., :3])) > 0.1, f"{path} is a single colour"


def test_plots_written_and_readable(tmp_path):
    result = synthetic_result(n2_m2_W=3e-18)
    paths = make_plots(result, tmp_path / "plots")
    names = sorted(p.name for p in paths)
    assert names == sorted(["fluence_maps.png", "energy_per_step.png", "pulse_power.png",
                            "gain_rod.png", "b_integral.png"])
    for p in paths:
        assert p.parent == tmp_path / "plots"
        _check_png(p)
    assert not list((tmp_path / "plots").glob(".*.part")), "no temporary files left behind"


def test_no_b_integral_plot_without_n2(tmp_path):
    paths = make_plots(synthetic_result(n2_m2_W=0.0), tmp_path)
    assert "b_integral.png" not in {p.name for p in paths}


def test_step_labels():
    result = synthetic_result()
    assert [step_label(result.config.steps, r.index, short=True) for r in result.steps] == ["0 pass rod", "1 loss", "2 pass rod (rev)"]


def test_zero_energy_step_single_time_slice_no_warnings(tmp_path):
    result = synthetic_result(time_slices=1, layout=(("pass", "rod", False), ("loss", 0.0),
                                                     ("pass", "rod", True)),
                              extra_media=("idle slab",))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        paths = make_plots(result, tmp_path / "p")
    for p in paths:
        _check_png(p)
    assert (tmp_path / "p" / "gain_idle_slab.png").is_file()


@pytest.mark.parametrize("points, n_steps, with_summary", [(8, 1, True), (1024, 2, False), (24, 20, True)])
def test_awkward_sizes_no_warnings(tmp_path, points, n_steps, with_summary):
    layout = tuple(("pass", "rod", bool(i % 4 == 2)) if i % 2 == 0 else ("loss", 0.97)
                   for i in range(n_steps))
    result = synthetic_result(points=points, time_slices=4 if points > 512 else 16, layout=layout,
                              energy_J=1e-4, n2_m2_W=1e-19, with_summary=with_summary)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        paths = make_plots(result, tmp_path)
    for p in paths:
        _check_png(p)


def test_all_zero_seed_no_warnings(tmp_path):
    result = synthetic_result(energy_J=0.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        paths = make_plots(result, tmp_path)
    assert {p.name for p in paths} >= {"fluence_maps.png", "energy_per_step.png", "pulse_power.png"}
    for p in paths:
        assert p.is_file()


def test_cw_run_has_no_pulse_figure(tmp_path):
    import dataclasses

    result = synthetic_result()
    result = dataclasses.replace(result, config=dataclasses.replace(result.config, mode="cw"), summary={})
    names = {p.name for p in make_plots(result, tmp_path)}
    assert names == {"intensity_maps.png", "power_per_step.png", "gain_rod.png"}
