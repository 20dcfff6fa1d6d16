"""The cw field path (mode = "cw", grid.diffraction = true) against Gaussian-beam optics, Fresnel
diffraction, the cw intensity path where diffraction is negligible, and conservation of power.

References
----------
H. Kogelnik and T. Li, "Laser beams and resonators", Appl. Opt. 5, 1550 (1966): w(z) = w0·sqrt(1 +
(z/zR)²), zR = π·w0²/λ; the q-law of a thin lens 1/q' = 1/q − 1/f, of free space q' = q + d, and of a
slab of index n, q' = q + L/n.
J. W. Goodman, Introduction to Fourier Optics, Fresnel diffraction by a circular aperture: on the axis
behind a hole of radius a lit by a plane wave, I(z)/I0 = 4·sin²(π·a²/(2λz)).
"""
from __future__ import annotations

import copy
import math

import numpy as np
import pytest

from ampmodel.config.load import load_config
from ampmodel.cw.run import simulate_cw

WAVELENGTH = 1064e-9        # Nd:YAG's line, the material's default signal wavelength
INDEX = 1.82                # Nd:YAG's refractive index in the material file


def config(points: int, width_mm: float, seed: dict, steps: list[dict], medium: dict | None = None,
           diffraction: bool = True) -> dict:
    """A cw config: one Nd:YAG medium (by default 1 mm long with a gain of 1.001, wider than the
    window so that it clips nothing) and the steps."""
    m = {"name": "rod", "material": "Nd:YAG", "length_mm": 1.0, "diameter_mm": 1.5 * width_mm, "slices": 4,
         "small_signal_gain": 1.001}
    m.update(medium or {})
    return {"title": "cw field check", "mode": "cw",
            "grid": {"points": points, "width_mm": width_mm, "diffraction": diffraction},
            "medium": [m], "seed": {"power_W": 1e-6, **seed}, "step": steps}


def run(raw: dict):
    return simulate_cw(load_config(copy.deepcopy(raw)))


def radius_mm(entry: dict) -> float:
    return 0.25 * (entry["d4sigma_x_mm"] + entry["d4sigma_y_mm"])


# ------------------------------------------------------------------------------------------------
# Gaussian beams (Kogelnik & Li 1966)
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("z_m", [0.3, 0.6])
def test_gaussian_radius_after_free_space(z_m):
    """A cw Gaussian seed at its waist (w0 = 0.3 mm): after the 1 mm medium (L/n of free space) and a
    space step of z, the D4σ radius equals w0·sqrt(1 + (z_eff/zR)²) (Kogelnik & Li) within 1 %."""
    w0 = 0.3e-3
    raw = config(128, 6.0, {"diameter_mm": 2e3 * w0}, [{"kind": "pass", "medium": "rod"},
                                                        {"kind": "space", "length_mm": z_m * 1e3}])
    result = run(raw)
    z_r = math.pi * w0 ** 2 / WAVELENGTH
    z = z_m + 1e-3 / INDEX
    expected = w0 * math.sqrt(1.0 + (z / z_r) ** 2)
    assert radius_mm(result.summary["steps"][1]) * 1e-3 == pytest.approx(expected, rel=1e-2)
    assert radius_mm(result.summary["seed_beam"]) * 1e-3 == pytest.approx(w0, rel=1e-2)


def test_gaussian_focus_behind_a_lens_follows_the_q_law():
    """A lens of f = 0.5 m behind the medium focuses the seed (w0 = 1 mm at the start): the waist's
    position and radius from a parabola fitted to w²(z) at five planes around the focus (w² is exactly
    quadratic in z for a Gaussian beam) equal the q-law's (Kogelnik & Li) within 1 %."""
    w0, f = 1.0e-3, 0.5
    z_r = math.pi * w0 ** 2 / WAVELENGTH
    q = 1j * z_r + 1e-3 / INDEX                        # the seed's q after the medium
    q_lens = 1.0 / (1.0 / q - 1.0 / f)
    waist_at = -q_lens.real                            # distance behind the lens where Re q = 0
    waist = math.sqrt(WAVELENGTH * q_lens.imag / math.pi)
    start, step = 0.46, 0.01
    steps = [{"kind": "pass", "medium": "rod"}, {"kind": "lens", "focal_mm": f * 1e3},
             {"kind": "space", "length_mm": start * 1e3}]
    steps += [{"kind": "space", "length_mm": step * 1e3} for _ in range(4)]
    result = run(config(256, 8.0, {"diameter_mm": 2e3 * w0}, steps))
    z = start + step * np.arange(5)
    w2 = np.array([(radius_mm(e) * 1e-3) ** 2 for e in result.summary["steps"][2:]])
    c, b, a = np.polyfit(z, w2, 2)
    assert -b / (2 * c) == pytest.approx(waist_at, rel=1e-2)
    assert math.sqrt(a - b * b / (4 * c)) == pytest.approx(waist, rel=1e-2)
    assert not [w for w in result.summary["warnings"] if "lens-sampling" in w]


# ------------------------------------------------------------------------------------------------
# Fresnel diffraction by a circular hole (Goodman)
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("fresnel_number", [1.0, 1.5])
def test_on_axis_intensity_behind_a_circular_hole(fresnel_number):
    """A wide flat seed (super-Gaussian of order 20, 7 mm across) through a hard hole of radius a = 1 mm,
    then z = a²/(λN): the on-axis intensity over the seed's is 4·sin²(π·N/2) (Goodman) within 5 %.
    Grid: 512 points over 10 mm (19.5 µm pixels, 51 across the hole's radius). The window's centre lies
    between four pixels at r = dx/√2, where the pattern differs from the axis by far less than 1 %."""
    a = 1.0e-3
    z = a * a / (WAVELENGTH * fresnel_number)
    seed = {"profile": "supergaussian", "order": 20.0, "diameter_mm": 7.0}
    steps = [{"kind": "pass", "medium": "rod"}, {"kind": "aperture", "diameter_mm": 2e3 * a},
             {"kind": "space", "length_mm": z * 1e3}]
    result = run(config(512, 10.0, seed, steps))
    n = 512 // 2
    i0 = result.seed_intensity_W_m2[n - 1:n + 1, n - 1:n + 1].mean()
    on_axis = result.steps[2].intensity_W_m2[n - 1:n + 1, n - 1:n + 1].mean()
    expected = 4.0 * math.sin(math.pi * fresnel_number / 2.0) ** 2
    assert on_axis / i0 == pytest.approx(expected, rel=5e-2)


# ------------------------------------------------------------------------------------------------
# The intensity path where diffraction is negligible; power balance; the steady state
# ------------------------------------------------------------------------------------------------

WIDE = dict(points=64, width_mm=16.0, seed={"diameter_mm": 4.0, "power_W": 200.0})


def _both(steps: list[dict], medium: dict):
    raw = config(WIDE["points"], WIDE["width_mm"], WIDE["seed"], steps, medium)
    return run(raw), run({**raw, "grid": {**raw["grid"], "diffraction": False}})


def _compare(field, intensity, power_rtol: float = 1e-6, map_rtol: float = 1e-4, gain_rtol: float = 1e-6):
    fs, isum = field.summary, intensity.summary
    assert fs["output_power_W"] == pytest.approx(isum["output_power_W"], rel=power_rtol)
    for a, b in zip(field.steps, intensity.steps, strict=True):
        assert np.max(np.abs(a.intensity_W_m2 - b.intensity_W_m2)) <= map_rtol * b.intensity_W_m2.max()
    for name, m in intensity.media.items():
        g = field.media[name].gain_final_per_m
        assert np.max(np.abs(g - m.gain_final_per_m)) <= gain_rtol * np.abs(m.gain_initial_per_m).max()


def test_wide_beam_in_a_short_medium_equals_the_intensity_path():
    """A Gaussian seed of w = 2 mm (zR = 11.8 m) saturating a 5 mm rod (zR/L > 2000; the window holds
    all but about 1e-9 of the power inside its clear region): the field path's output power within
    1e-6, intensity maps within 1e-4 of the peak and saturated gain maps within 1e-6 of the intensity
    path's (the gain of the steady state is the same kernel, so what differs is diffraction)."""
    medium = {"length_mm": 5.0, "slices": 8, "small_signal_gain": 3.0, "diameter_mm": 15.0}
    field, intensity = _both([{"kind": "pass", "medium": "rod"}], medium)
    assert field.summary["steps"][0]["gain"] < 0.9 * 3.0            # saturated
    _compare(field, intensity)


def test_double_pass_equals_the_intensity_path_and_power_balance_closes():
    """Two passes through one medium (there and back, a loss between them, passive loss in the rod):
    the passes saturate the rod together, the field path iterates to the same steady state as the
    intensity path (same tolerance, its residual below it), and every watt is counted: input plus
    extracted equals output plus passive loss, clipping and the window's absorbing edge (1e-9)."""
    medium = {"length_mm": 5.0, "slices": 8, "small_signal_gain": 3.0, "diameter_mm": 15.0, "loss_per_cm": 0.01}
    steps = [{"kind": "pass", "medium": "rod"}, {"kind": "loss", "transmission": 0.9},
             {"kind": "pass", "medium": "rod", "reverse": True}]
    field, intensity = _both(steps, medium)
    s = field.summary
    assert s["cw_iterations"] > 1 and s["cw_residual"] <= 1e-9      # the solver's default tolerance
    _compare(field, intensity)
    assert abs(s["power_balance_error"]) < 1e-9
    gained = s["input_power_W"] + s["extracted_power_W"]
    lost = sum(e["clipped_power_W"] + e["passive_loss_W"] + e["edge_absorbed_power_W"] for e in s["steps"])
    assert gained == pytest.approx(s["output_power_W"] + lost, rel=1e-9)


def test_power_balance_counts_the_window_edge():
    """A beam that overfills a small window loses power to the absorbing edge as it diffracts in a long
    medium and free space; the balance still closes, with that power counted (edge_absorbed_power_W)."""
    raw = config(64, 2.0, {"diameter_mm": 0.3, "power_W": 5.0},
                 [{"kind": "pass", "medium": "rod"}, {"kind": "space", "length_mm": 500.0}],
                 {"length_mm": 40.0, "slices": 10, "small_signal_gain": 2.0, "diameter_mm": 3.0})
    s = run(raw).summary
    assert s["edge_absorbed_power_W"] > 1e-3 * s["input_power_W"]
    assert abs(s["power_balance_error"]) < 1e-9
    assert any("absorbing edge" in w for w in s["warnings"])


def test_phase_map_hook_is_applied_at_the_middle_of_the_pass():
    """A medium's phase map (CwMedium.phase_rad) acts as a thin lens at the middle of the pass: a
    parabolic phase −k·r²/(2f) focuses the beam as a lens of focal length f placed at L/2 would
    (same D4σ after free space as the layout with that lens and the medium in two halves)."""
    from ampmodel.cw import medium as cw_medium
    from ampmodel.kernels import beam_shapes

    f = 2.0
    base = config(128, 6.0, {"diameter_mm": 1.6}, [{"kind": "pass", "medium": "rod"},
                                                    {"kind": "space", "length_mm": 1000.0}],
                  {"length_mm": 20.0, "slices": 4})
    original = cw_medium.build_medium

    def with_lens(medium, x_m, y_m, solver, wavelength_m=None):
        st = original(medium, x_m, y_m, solver, wavelength_m)
        r2 = beam_shapes.radius_map(x_m, y_m) ** 2
        st.phase_rad = -2.0 * math.pi / WAVELENGTH * r2 / (2.0 * f)
        return st

    import ampmodel.cw.run as cw_run
    cw_run.build_medium = with_lens
    try:
        lensed = run(base).summary["steps"][1]
    finally:
        cw_run.build_medium = original
    plain = run(base).summary["steps"][1]
    # the q-law: the seed at its waist, 10 mm of rod (L/2n), the lens, 10 mm of rod, 1 m of air
    w0 = 0.8e-3
    q = 1j * math.pi * w0 ** 2 / WAVELENGTH + 0.01 / INDEX
    q = 1.0 / (1.0 / q - 1.0 / f) + 0.01 / INDEX + 1.0
    expected = math.sqrt(-WAVELENGTH / (math.pi * (1.0 / q).imag))
    assert radius_mm(lensed) * 1e-3 == pytest.approx(expected, rel=1e-2)
    assert radius_mm(lensed) < 0.9 * radius_mm(plain)


def test_result_file_holds_the_output_field_and_the_beam_figures(tmp_path):
    """result.h5 of a cw run with diffraction: /output/field (1, Ny, Nx) complex, |E|² the last step's
    intensity map (W/m²); summary.json: each step's beam figures and absorbed-edge power; the plots."""
    import h5py

    raw = config(32, 4.0, {"diameter_mm": 1.0, "power_W": 2.0},
                 [{"kind": "pass", "medium": "rod"}, {"kind": "lens", "focal_mm": 300.0},
                  {"kind": "space", "length_mm": 100.0}])
    result = run(raw)
    result.save(tmp_path / "run")
    with h5py.File(tmp_path / "run" / "result.h5") as f:
        field = f["output/field"][...]
        assert f["output/field"].attrs["units"] == "sqrt(W/m^2)"
        last = f["steps/002/intensity"][...]
    assert field.shape == (1, 32, 32) and np.iscomplexobj(field)
    np.testing.assert_allclose(np.abs(field[0]) ** 2, last, rtol=1e-12, atol=1e-12 * last.max())
    entry = result.summary["steps"][2]
    assert {"d4sigma_x_mm", "modulation_peak_to_mean", "fill_factor", "edge_absorbed_power_W"} <= set(entry)
    assert result.summary["diffraction"] is True
    assert (tmp_path / "run" / "plots" / "beam_steps.png").exists()


def test_kerr_phase_is_the_b_integral_of_the_amplified_intensity():
    """Unsaturated uniform gain g over L, a wide flat beam: the B-integral on the axis is
    k0·n2·∫I dz = k0·n2·I0·(e^(gL) − 1)/g (the definition of the B-integral with I = I0·e^(gz); the
    material's n2), within 1e-3 (the slices' mean intensity is exact for the exponential)."""
    raw = config(64, 16.0, {"profile": "supergaussian", "order": 10.0, "diameter_mm": 10.0, "power_W": 1e-3},
                 [{"kind": "pass", "medium": "rod"}],
                 {"length_mm": 10.0, "slices": 5, "small_signal_gain": 2.0, "diameter_mm": 15.0})
    result = run(raw)
    n2 = load_config(copy.deepcopy(raw)).media[0].material.n2_m2_W
    assert n2 > 0
    i0 = float(result.seed_intensity_W_m2.max())
    g, length = math.log(2.0) / 1e-2, 1e-2
    expected = 2.0 * math.pi / WAVELENGTH * n2 * i0 * math.expm1(g * length) / g
    assert result.summary["b_integral_rad"] == pytest.approx(expected, rel=1e-3)


def test_filter_relay_and_soft_aperture_keep_the_power_balance():
    """The field-only steps in cw (a spatial filter, a 4f relay of magnification 1.5, a soft aperture)
    after a pass, with an M² = 1.5 seed: every watt counted (balance 1e-12), the filter's pinhole
    transmission at least its power out over in (the window also takes the rings outside it) and
    within 1e-3 of it, and its clipping warned of."""
    raw = config(64, 6.0, {"diameter_mm": 1.5, "power_W": 1.0, "m_squared": 1.5},
                 [{"kind": "pass", "medium": "rod"},
                  {"kind": "filter", "focal_mm": 200.0, "pinhole_diameter_mm": 0.3},
                  {"kind": "relay", "magnification": 1.5}, {"kind": "aperture", "diameter_mm": 3.0, "order": 10.0}])
    s = run(raw).summary
    assert abs(s["power_balance_error"]) < 1e-12
    f = s["steps"][1]
    ratio = f["power_out_W"] / f["power_in_W"]
    assert ratio - 1e-12 <= f["pinhole_transmission"] <= ratio + 1e-3
    assert f["pinhole_transmission"] < 0.999
    assert any("step 1 (filter)" in w for w in s["warnings"])


def test_chained_cw_stage_with_diffraction_takes_the_field(tmp_path):
    """A cw stage chained (seed.from) after a cw run with diffraction continues from its stored field
    (/output/field): the two stages equal the one-config layout of both (round-off), phase included,
    where an intensity with a flat phase would not (the first stage ends converging behind a lens)."""
    first = [{"kind": "pass", "medium": "rod"}, {"kind": "lens", "focal_mm": 400.0},
             {"kind": "space", "length_mm": 100.0}]
    raw1 = config(64, 6.0, {"diameter_mm": 1.5, "power_W": 2.0}, first, {"small_signal_gain": 2.0})
    run(raw1).save(tmp_path / "one")
    second = {"name": "slab", "material": "Nd:YAG", "length_mm": 3.0, "diameter_mm": 9.0, "slices": 4,
              "small_signal_gain": 1.5}
    raw2 = {**copy.deepcopy(raw1), "medium": [second], "seed": {"from": str(tmp_path / "one" / "result.h5")},
            "step": [{"kind": "pass", "medium": "slab"}, {"kind": "space", "length_mm": 200.0}]}
    chained = run(raw2)
    both = copy.deepcopy(raw1)
    both["medium"].append(second)
    both["step"] += raw2["step"]
    whole = run(both)
    assert chained.summary["seed_from"]["beam"] == "intensity, with its field"
    assert chained.summary["output_power_W"] == pytest.approx(whole.summary["output_power_W"], rel=1e-12)
    a, b = chained.steps[-1].intensity_W_m2, whole.steps[-1].intensity_W_m2
    assert np.max(np.abs(a - b)) <= 1e-10 * b.max()
    assert chained.summary["steps"][-1]["d4sigma_x_mm"] < 0.9 * chained.summary["seed_beam"]["d4sigma_x_mm"]


def test_the_thermal_lens_acts_on_the_cw_field_path():
    """An end-pumped Nd:YVO4 rod with diffraction: the steady state's heat gives each pass the phase of
    its thermal lens (thermal_lens_applied), which focuses the output: after 300 mm of free space its
    D4σ differs from the run with thermal_lens = false, whose heat and focal length are the same
    figures of the pump; the focal length falls as 1/P_heat (doubling the pump about halves it)."""
    from pathlib import Path

    from ampmodel.config.load import load_config
    from ampmodel.simulation import simulate
    config = Path(__file__).resolve().parents[2] / "configs" / "cw_thermal_lens_sweep.toml"
    small = ["grid.points=64", "medium.rod.slices=8"]
    on = simulate(load_config(config, small)).summary
    off = simulate(load_config(config, small + ["medium.rod.thermal_lens=false"])).summary
    assert on["media"][0]["thermal_lens_applied"] is True and off["media"][0]["thermal_lens_applied"] is False
    assert on["steps"][-1]["d4sigma_x_mm"] != pytest.approx(off["steps"][-1]["d4sigma_x_mm"], rel=0.02)
    double = simulate(load_config(config, small + ["medium.rod.pump.power_W=20"])).summary
    ratio = on["media"][0]["thermal_focal_length_m"] / double["media"][0]["thermal_focal_length_m"]
    heat_ratio = double["media"][0]["heat_W"] / on["media"][0]["heat_W"]
    assert ratio == pytest.approx(heat_ratio, rel=0.05)
