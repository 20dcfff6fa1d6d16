"""A measured pulse shape (seed.shape = "file") and a measured spectrum ([seed.measured_spectrum]).

References
----------
- Energy of a piecewise-linear trace over an interval: scipy.integrate.quad of numpy.interp (an
  independent quadrature), and scipy.integrate.trapezoid over the points (exact for straight lines).
- FWHM of a Gaussian exp(−4 ln2 t²/τ²): τ (definition); of any trace: the first and last crossing of
  half its peak, found here by brute force on a dense grid with numpy.
- Peak power of a pulse of energy E and power shape p(t): P0 = E·max p/∫p dt (definition); small
  signal, flat beam of area A: I_peak = G0·P0/A after the pass (the shape is only scaled).
- Frantz–Nodvik saturation (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963)): a Gaussian
  trace and shape = "gaussian" must give the same run (the trace's straight lines differ from the
  Gaussian by at most h²/8·max|p''| ≈ 1e-6 of the peak at the spacing used).
- A linear chirp maps energy in time onto energy in wavelength in order (the stretched pulse's
  wavelength is a monotonic function of time): the fraction F of the pulse's energy that has passed
  carries the wavelengths below which the fraction F of the spectrum lies.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad, trapezoid

from ampmodel import load_config, simulate
from ampmodel.config.checks import Problems
from ampmodel.config.measured import measured_pulse
from ampmodel.kernels import beam_shapes, pulse_shape

LN2 = math.log(2.0)


def gaussian(t: np.ndarray, tau: float) -> np.ndarray:
    return np.exp(-4.0 * LN2 * (t / tau) ** 2)


def qswitch(t: np.ndarray) -> np.ndarray:
    """An invented Q-switched pulse: a fast rise (1.3 ns) and a slow tail (5 ns), peak near t = 0."""
    return 2.0 / (np.exp(-t / 1.3e-9) + np.exp(t / 5e-9))


def trace_fields(t: np.ndarray, p: np.ndarray, **more) -> dict:
    problems = Problems("<test>")
    fields = measured_pulse(problems, {"time_s": list(map(float, t)), "power": list(map(float, p)), **more})
    assert problems.lines == []
    return fields


def dense_fwhm(t: np.ndarray, p: np.ndarray) -> float:
    """FWHM by brute force: the straight-line trace on a grid 1e6 points fine, first to last sample at or
    above half the peak (accurate to one grid step)."""
    grid = np.linspace(t[0], t[-1], 1_000_001)
    values = np.interp(grid, t, p)
    above = grid[values >= 0.5 * values.max()]
    return float(above[-1] - above[0])


def test_a_fine_gaussian_trace_has_the_gaussian_fwhm():
    tau = 8e-9
    t = np.linspace(-3 * tau, 3 * tau, 2001)
    fields = trace_fields(t, gaussian(t, tau))
    assert fields["duration_s"] == pytest.approx(tau, rel=0.01)
    assert fields["duration_s"] == pytest.approx(tau, rel=1e-5)     # straight lines at 0.3 % of τ spacing


def test_an_asymmetric_trace_has_its_own_fwhm_and_its_peak_at_zero():
    t = np.linspace(-10e-9, 50e-9, 301)
    p = qswitch(t)
    fields = trace_fields(t, p)
    reference = dense_fwhm(t, p)
    assert fields["duration_s"] == pytest.approx(reference, abs=2 * 60e-9 / 1e6)
    x, rel = (np.asarray(a) for a in fields["pulse_trace"])
    assert x[np.argmax(rel)] == 0.0 and rel.max() == 1.0
    assert np.allclose(x * fields["duration_s"] + t[np.argmax(p)], t, rtol=0, atol=1e-21)


@pytest.mark.parametrize("slices", [7, 16, 64])
def test_each_slice_carries_the_integral_of_the_trace_over_it(slices):
    t = np.linspace(-10e-9, 50e-9, 301)
    p = qswitch(t)
    fields = trace_fields(t, p)
    tau, trace = fields["duration_s"], fields["pulse_trace"]
    centres, weights, dt = beam_shapes.time_slices("file", tau, slices, trace)
    assert dt * slices == pytest.approx(t[-1] - t[0], rel=1e-12)      # the window: the span of the trace
    assert weights.sum() == pytest.approx(1.0, rel=1e-14)
    shift = t[np.argmax(p)]
    total = trapezoid(p, t)
    for k in range(slices):
        lo, hi = centres[k] - dt / 2 + shift, centres[k] + dt / 2 + shift
        inside = t[(t > lo) & (t < hi)]
        energy, _ = quad(lambda s: np.interp(s, t, p), lo, hi, points=inside[:49] if inside.size else None,
                         limit=200, epsabs=1e-9 * total * 1e-9)
        assert weights[k] == pytest.approx(energy / total, rel=1e-7, abs=1e-12)


def test_the_resampled_pulse_keeps_the_seed_energy_and_the_trace_fwhm():
    t = np.linspace(-10e-9, 50e-9, 301)
    fields = trace_fields(t, qswitch(t))
    tau, trace = fields["duration_s"], fields["pulse_trace"]
    energy = 0.02
    _, weights, dt = beam_shapes.time_slices("file", tau, 64, trace)
    power = weights * energy / dt
    assert (power * dt).sum() == pytest.approx(energy, rel=1e-14)
    fine_t, fine_p = pulse_shape.resampled(power, "file", tau, trace=trace)
    assert pulse_shape.fwhm_s(fine_t, fine_p) == pytest.approx(tau, rel=1e-9)
    # the fine resampling holds the energy too: the mean of each slice's samples-by-trapezoid is its energy
    assert trapezoid(fine_p.reshape(64, -1), fine_t.reshape(64, -1), axis=1).sum() == pytest.approx(energy, rel=1e-4)


# ------------------------------------------------------------------------------------------------
# Whole runs
# ------------------------------------------------------------------------------------------------

def rod(seed: dict, time_slices: int = 32, gain: float = 6.0, points: int = 12) -> dict:
    """A flat beam through one Nd:YAG-like rod (config units)."""
    material = {"wavelength_nm": 1064.0, "emission_cross_section_cm2": 2.8e-19, "upper_lifetime_us": 230.0,
                "refractive_index": 1.82, "n2_m2_W": 7e-20}
    medium = {"name": "rod", "length_mm": 50.0, "diameter_mm": 3.9, "slices": 8, "small_signal_gain": gain,
              "material": material}
    base = {"energy_J": 0.03, "profile": "flat", "diameter_mm": 3.0}
    base.update(seed)
    return {"title": "measured pulse test", "grid": {"points": points, "width_mm": 4.0, "time_slices": time_slices},
            "medium": [medium], "seed": base, "step": [{"kind": "pass", "medium": "rod"}]}


def test_a_gaussian_trace_runs_as_the_gaussian_shape():
    """Saturated (output about 3·Fsat·area): energy and true peak power of the output within 1e-4 (the
    straight lines between 4001 points deviate from the Gaussian by 1e-6 of its peak; the rest is the
    window: the analytic shape's ±2.5 FWHM, the trace's exactly the same span)."""
    tau = 10e-9
    t = np.linspace(-2.5 * tau, 2.5 * tau, 4001)
    trace = {"shape": "file", "measured_pulse": {"time_s": t.tolist(), "power": gaussian(t, tau).tolist()}}
    analytic = simulate(load_config(rod({"shape": "gaussian", "duration_ns": 10.0})))
    measured = simulate(load_config(rod(trace)))
    a, m = analytic.summary, measured.summary
    assert m["pulse_duration_ns"] == pytest.approx(10.0, rel=1e-6)
    assert m["output_energy_J"] == pytest.approx(a["output_energy_J"], rel=1e-4)
    assert m["gain"] > 1.5 and m["gain"] < 5.5                       # saturated: below the small-signal 6
    assert m["output_peak_power_W"] == pytest.approx(a["output_peak_power_W"], rel=1e-4)
    assert m["output_duration_ns"] == pytest.approx(a["output_duration_ns"], rel=1e-4)
    assert m["peak_intensity_W_cm2"] == pytest.approx(a["peak_intensity_W_cm2"], rel=1e-4)


def test_true_peak_intensity_of_a_measured_shape_at_16_slices():
    t = np.linspace(-10e-9, 50e-9, 601)
    p = qswitch(t)
    raw = rod({"shape": "file", "energy_J": 1e-9, "measured_pulse": {"time_s": t.tolist(), "power": p.tolist()}},
              time_slices=16, gain=10.0, points=16)
    config = load_config(raw)
    res = simulate(config)
    x = (np.arange(16) - 7.5) * 4e-3 / 16
    area = (4e-3 / 16) ** 2 * np.count_nonzero(np.hypot(x[None, :], x[:, None]) <= 1.5e-3)
    p0 = 1e-9 * p.max() / trapezoid(p, t)
    expected = 10.0 * p0 / area * 1e-4                                # W/cm²
    assert res.summary["peak_intensity_W_cm2"] == pytest.approx(expected, rel=0.02)
    assert res.summary["output_peak_power_W"] == pytest.approx(10.0 * p0, rel=0.02)
    # and the slice means are well below it at this slicing (what the true peak corrects)
    assert float(res.steps[0].power_W.max()) < 0.97 * 10.0 * p0


# ------------------------------------------------------------------------------------------------
# Measured spectrum
# ------------------------------------------------------------------------------------------------

TABLE_NM = np.linspace(740.0, 860.0, 241)


def stretched(seed: dict, time_slices: int = 64) -> dict:
    """A weak chirped seed through a crystal whose cross-section table covers 740–860 nm."""
    material = {"wavelength_nm": 800.0, "emission_cross_section_cm2": 3e-19, "upper_lifetime_us": 3.2,
                "refractive_index": 1.76,
                "spectrum": {"wavelength_nm": TABLE_NM.tolist(),
                             "emission_cm2": (3e-19 * np.exp(-((TABLE_NM - 800.0) / 40.0) ** 2)).tolist(),
                             "absorption_cm2": (0.0 * TABLE_NM).tolist()}}
    medium = {"name": "xtal", "length_mm": 10.0, "diameter_mm": 3.9, "slices": 4, "small_signal_gain": 10.0,
              "material": material}
    base = {"energy_J": 1e-6, "duration_ns": 1.0, "shape": "gaussian", "profile": "flat", "diameter_mm": 2.0}
    base.update(seed)
    return {"title": "measured spectrum test", "grid": {"points": 8, "width_mm": 4.0, "time_slices": time_slices},
            "medium": [medium], "seed": base, "step": [{"kind": "pass", "medium": "xtal"}]}


def two_peaks(nm: np.ndarray) -> np.ndarray:
    """An invented stretcher output: a main peak at 795 nm and a shoulder at 812 nm."""
    return np.exp(-((nm - 795.0) / 6.0) ** 2) + 0.45 * np.exp(-((nm - 812.0) / 4.0) ** 2)


@pytest.mark.parametrize("chirp", ["up", "down"])
def test_the_seed_spectrum_follows_the_measured_one(chirp):
    """The seed's spectrum in the result against the file's normalised to the seed energy: within 1 % of
    the peak at 256 slices. A slice's density is the mean of the measured one over its wavelength
    interval, and the slices near the pulse's peak carry most of its energy: where they meet the dip
    between the two peaks their intervals are widest (5 nm at 64 slices, 1.2 nm at 256), and the mean
    over the dip differs from its middle value by 4.5 % of the peak at 64 slices, 0.4 % at 256.
    Its energy (density × each slice's interval) is the seed's to round-off."""
    nm = np.linspace(770.0, 830.0, 601)
    raw = stretched({"chirp": chirp,
                     "measured_spectrum": {"wavelength_m": (nm * 1e-9).tolist(), "power": two_peaks(nm).tolist()}},
                    time_slices=256)
    config = load_config(raw)
    res = simulate(config)
    wl, density = np.asarray(res.wavelength_m), np.asarray(res.seed_spectrum_J_m)
    reference = 1e-6 * np.interp(wl, nm * 1e-9, two_peaks(nm)) / trapezoid(two_peaks(nm), nm * 1e-9)
    assert np.max(np.abs(density - reference)) < 0.01 * reference.max()
    assert float(np.sum(density * _widths(config))) == pytest.approx(1e-6, rel=1e-9)
    # an up-chirp puts the shorter wavelengths first
    assert (wl[0] < wl[-1]) == (chirp == "up")
    # the seed's wavelength and bandwidth are the spectrum's centroid and FWHM
    assert config.seed.wavelength_m == pytest.approx(trapezoid(nm * two_peaks(nm), nm) / trapezoid(two_peaks(nm), nm)
                                                     * 1e-9, rel=1e-6)
    assert config.seed.bandwidth_m * 1e9 == pytest.approx(dense_fwhm(nm, two_peaks(nm)), abs=1e-4)


@pytest.mark.parametrize("chirp", ["up", "down"])
@pytest.mark.parametrize("shape", ["gaussian", "sech2", "flat"])
@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")   # round-off on the flat pulse's even shares
def test_each_slice_carries_its_share_of_the_measured_spectrum(shape, chirp):
    """The defining property of the mapping at 64 slices: the measured spectrum's energy over each
    slice's wavelength interval (scipy quad of the straight-line spectrum) is the slice's share of the
    pulse energy, whatever the pulse shape."""
    nm = np.linspace(770.0, 830.0, 601)
    raw = stretched({"shape": shape, "chirp": chirp,
                     "measured_spectrum": {"wavelength_m": (nm * 1e-9).tolist(), "power": two_peaks(nm).tolist()}})
    config = load_config(raw)
    _, weights, _ = beam_shapes.time_slices(shape, 1e-9, 64)
    assert_shares(config, nm, two_peaks(nm), weights, chirp)


def assert_shares(config, nm: np.ndarray, s: np.ndarray, weights: np.ndarray, chirp: str) -> None:
    widths = _widths(config) * 1e9
    order = slice(None) if chirp == "up" else slice(None, None, -1)
    edges = nm[0] + np.concatenate(([0.0], np.cumsum(widths[order])))    # the spectrum is > 0 from its start
    total = trapezoid(s, nm)
    shares = [quad(lambda v: np.interp(v, nm, s), a, b, points=nm[(nm > a) & (nm < b)][:100], limit=400)[0] / total
              if b > a else 0.0 for a, b in zip(edges[:-1], edges[1:], strict=True)]
    assert np.allclose(shares, weights[order], rtol=1e-6, atol=1e-12)


def _widths(config) -> np.ndarray:
    from ampmodel.pulsed.spectra import wavelength_step_m
    return np.asarray(wavelength_step_m(config, 0.0))


def test_a_measured_spectrum_maps_onto_a_measured_pulse():
    """Both measured: the shares of the spectrum follow the trace's slices, and the energy is the seed's."""
    t = np.linspace(-10e-9, 50e-9, 301)
    nm = np.linspace(770.0, 830.0, 601)
    raw = stretched({"shape": "file", "measured_pulse": {"time_s": t.tolist(), "power": qswitch(t).tolist()},
                     "measured_spectrum": {"wavelength_m": (nm * 1e-9).tolist(), "power": two_peaks(nm).tolist()}})
    del raw["seed"]["duration_ns"]
    config = load_config(raw)
    res = simulate(config)
    _, weights, _ = beam_shapes.time_slices("file", config.seed.duration_s, 64, config.seed.pulse_trace)
    assert_shares(config, nm, two_peaks(nm), weights, "up")
    assert float(np.sum(np.asarray(res.seed_spectrum_J_m) * _widths(config))) == pytest.approx(1e-6, rel=1e-9)
