"""Transverse grid, beam profiles, apertures and temporal pulse shapes (pure numpy).

Time-window rule (stated in the README): the window holds all but about 1e-7 of the pulse energy:
±2.5 FWHM for a Gaussian pulse (power at the edge 3e-8 of the peak), ±5 FWHM for sech² (edge power
1e-7 of the peak), and exactly the pulse for a flat (square) pulse. The window is cut into
``time_slices`` equal slices; each slice carries the exact integral of the pulse shape over its
interval, and the slices are normalised so that their sum is the seed energy.

A measured pulse (shape "file") is a trace ``(x, p)``: times in units of its FWHM from its peak,
strictly increasing, and its power (any scale), straight between the points (kernels/traces.py). Its
window is the span of the trace (the config cuts the trace to the window asked for); its integrals
are exact.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

from ampmodel.kernels import diffraction as kd
from ampmodel.kernels import traces
from ampmodel.kernels.beam_figures import m_squared as measure_m2

# Half-width of the time window in units of the FWHM (see the module docstring).
HALF_WINDOW_FWHM = {"gaussian": 2.5, "sech2": 5.0, "flat": 0.5}
SECH2_FWHM_FACTOR = 2.0 * math.acosh(math.sqrt(2.0))   # sech²(t/T) has FWHM = 1.7627·T


def pixel_centres(points: int, width_m: float) -> np.ndarray:
    """Pixel centres (m) of ``points`` pixels across a window of full width ``width_m``, centred on 0."""
    dx = width_m / points
    return (np.arange(points) - (points - 1) / 2.0) * dx


def radius_map(x_m: np.ndarray, y_m: np.ndarray) -> np.ndarray:
    """(Ny, Nx) distance of each pixel centre from the axis (m)."""
    return np.hypot(x_m[np.newaxis, :], y_m[:, np.newaxis])


def aperture_mask(x_m: np.ndarray, y_m: np.ndarray, shape: str, size_m: float) -> np.ndarray:
    """(Ny, Nx) bool, True inside a hard-edged centred aperture.

    shape : "round" (size = diameter) or "square" (size = side)
    """
    if shape == "square":
        half = size_m / 2.0
        return (np.abs(x_m)[np.newaxis, :] <= half) & (np.abs(y_m)[:, np.newaxis] <= half)
    return radius_map(x_m, y_m) <= size_m / 2.0


def transverse_profile(x_m: np.ndarray, y_m: np.ndarray, profile: str, diameter_m: float,
                       order: float = 8.0) -> np.ndarray:
    """(Ny, Nx) relative transverse fluence (or intensity) profile, peak 1.

    profile : "gaussian" I ~ exp(−2 r²/w²); "supergaussian" I ~ exp(−2 (r/w)^order);
              "flat" 1 inside the diameter, 0 outside; "parabolic" 1 − (r/R)² inside, 0 outside
    diameter_m : 2w (1/e² diameter) for gaussian and supergaussian; the hard-edged diameter otherwise
    """
    r = radius_map(x_m, y_m)
    half = diameter_m / 2.0
    if profile == "gaussian":
        return np.exp(-2.0 * (r / half) ** 2)
    if profile == "supergaussian":
        return np.exp(-2.0 * (r / half) ** order)
    if profile == "flat":
        return (r <= half).astype(float)
    if profile == "parabolic":
        return np.clip(1.0 - (r / half) ** 2, 0.0, None)
    raise ValueError(f"unknown transverse profile {profile!r}")


Trace = tuple  # (x, p): a measured pulse, times in units of its FWHM from its peak, and its power


def window_edges(shape: str, n: int, trace: Trace | None = None) -> np.ndarray:
    """(n + 1,) the edges of the time slices in units of the FWHM: the window of the module's rule
    around the peak, or the span of a measured trace (shape "file")."""
    if shape == "file":
        x = np.asarray(trace[0], dtype=float)
        return np.linspace(x[0], x[-1], n + 1)
    half = HALF_WINDOW_FWHM[shape]
    return np.linspace(-half, half, n + 1)


def _cumulative(shape: str, t_over_fwhm: np.ndarray, trace: Trace | None = None) -> np.ndarray:
    """Fraction of the pulse energy before time t (t in units of the FWHM, pulse centred on 0)."""
    if shape == "file":
        return traces.cumulative(trace[0], trace[1], t_over_fwhm)
    if shape == "gaussian":
        # P ~ exp(−4 ln2 t²/τ²): cumulative = (1 + erf(2·sqrt(ln 2)·t/τ))/2
        return 0.5 * (1.0 + erf(2.0 * math.sqrt(math.log(2.0)) * t_over_fwhm))
    if shape == "sech2":
        # P ~ sech²(t/T), T = τ/1.7627: cumulative = (1 + tanh(t/T))/2
        return 0.5 * (1.0 + np.tanh(SECH2_FWHM_FACTOR * t_over_fwhm))
    if shape == "flat":
        return np.clip(t_over_fwhm + 0.5, 0.0, 1.0)
    raise ValueError(f"unknown temporal shape {shape!r}")


def time_slices(shape: str, duration_s: float, n: int,
                trace: Trace | None = None) -> tuple[np.ndarray, np.ndarray, float]:
    """Cut a pulse into ``n`` equal time slices covering the window rule of this module.

    Parameters
    ----------
    shape : "gaussian" | "sech2" (duration = FWHM) | "flat" (duration = full width) | "file" (a
        measured trace, duration = its FWHM)
    duration_s : pulse duration (s)
    n : number of slices
    trace : shape "file": the measured trace (see the module docstring)

    Returns
    -------
    t_s : (n,) slice centres (s), centred on the pulse peak
    weights : (n,) fraction of the energy in each slice, summing to 1
    dt_s : slice width (s)
    """
    edges = window_edges(shape, n, trace)
    cum = _cumulative(shape, edges, trace)
    weights = np.diff(cum)
    weights /= weights.sum()
    dt = (edges[-1] - edges[0]) * duration_s / n
    t = 0.5 * (edges[:-1] + edges[1:]) * duration_s
    return t, weights, dt


def _density(shape: str, t_over_fwhm: np.ndarray, trace: Trace | None = None) -> np.ndarray:
    """The pulse's power relative to its energy (per unit of t/FWHM): the derivative of :func:`_cumulative`."""
    if shape == "file":
        return traces.density(trace[0], trace[1], t_over_fwhm)
    if shape == "gaussian":
        c = 2.0 * math.sqrt(math.log(2.0))
        return c / math.sqrt(math.pi) * np.exp(-(c * t_over_fwhm) ** 2)
    if shape == "sech2":
        return 0.5 * SECH2_FWHM_FACTOR / np.cosh(SECH2_FWHM_FACTOR * t_over_fwhm) ** 2
    if shape == "flat":
        return ((t_over_fwhm >= -0.5) & (t_over_fwhm <= 0.5)).astype(float)
    raise ValueError(f"unknown temporal shape {shape!r}")


def slice_peak_factors(shape: str, n: int, trace: Trace | None = None) -> np.ndarray:
    """(n,) the largest power inside each time slice of :func:`time_slices` over the slice's mean power.

    A time slice carries the mean power of its interval; the pulse's true peak lies inside a slice. With
    the pulse's own shape inside each slice (exact in the small-signal limit, where the shape is only
    scaled), the true peak power, intensity and B-integral of slice t are its mean ones times this
    factor. The shapes rise to their peak at t = 0 and fall after it, so the largest power in a slice
    is at the point of the slice nearest t = 0. At any n the largest of (mean x factor) is the pulse's
    peak power: 0.9394·E/τ (Gaussian, FWHM τ), 0.8814·E/τ (sech²), E/τ (flat). A measured trace
    (shape "file") takes the largest value of the trace itself inside each slice (at a point of the
    trace or at the slice's edge: it is straight between its points).
    """
    edges = window_edges(shape, n, trace)
    lo, hi = edges[:-1], edges[1:]
    mean = np.diff(_cumulative(shape, edges, trace)) / (hi - lo)
    if shape == "file":
        peak = traces.interval_maxima(trace[0], trace[1], edges) / traces.node_integrals(*trace)[-1]
    else:
        peak = _density(shape, np.clip(0.0, lo, hi))
    out = np.ones(n)
    np.divide(peak, mean, out=out, where=mean > 0.0)
    return np.maximum(out, 1.0)


def slice_wavelengths(t_s: np.ndarray, duration_s: float, wavelength_m: float, bandwidth_m: float | None,
                      chirp: str = "up") -> np.ndarray:
    """(Nt,) wavelength of each time slice (m): a stretched, linearly chirped pulse sweeps
    λ(t) = λ0 ± bandwidth·t/duration across it (t from the pulse centre; "up": longer wavelengths
    later), so that its spectrum has the pulse's shape and a FWHM of ``bandwidth_m``; a narrowband
    pulse (``bandwidth_m`` None) is at λ0 in every slice."""
    t = np.asarray(t_s, dtype=float)
    if not bandwidth_m:
        return np.full(t.shape, float(wavelength_m))
    sign = 1.0 if chirp == "up" else -1.0
    return wavelength_m + sign * bandwidth_m * t / duration_s


def measured_spectrum_wavelengths(shape: str, n: int, spectrum: Trace, chirp: str = "up",
                                  trace: Trace | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(centres, widths) (m) of the wavelengths the time slices of :func:`time_slices` carry when a
    stretched pulse's spectrum is measured: ``spectrum`` is (wavelength (m), spectral density (any
    scale)), a trace of kernels/traces.py. A linear chirp maps energy in time onto energy in
    wavelength in order: the point at which a fraction F of the pulse's energy has passed carries the
    wavelength below which the fraction F of the spectrum's energy lies ("up": longer wavelengths
    later; "down": the fraction 1 − F). Slice k spans the wavelengths between the images of its edges
    (``widths``, so that its energy over its width is the spectral density there) and is centred on
    the image of its middle fraction of the energy."""
    edges = window_edges(shape, n, trace)
    cum = _cumulative(shape, edges, trace)
    cum = (cum - cum[0]) / (cum[-1] - cum[0])
    middle = 0.5 * (cum[:-1] + cum[1:])
    if chirp != "up":
        cum, middle = 1.0 - cum, 1.0 - middle
    wl_edges = traces.inverse_cumulative(spectrum[0], spectrum[1], cum)
    centres = traces.inverse_cumulative(spectrum[0], spectrum[1], middle)
    return centres, np.abs(np.diff(wl_edges))


def wavelength_span_m(shape: str, wavelength_m: float, bandwidth_m: float | None, trace: Trace | None = None,
                      spectrum: Trace | None = None) -> tuple[float, float]:
    """The shortest and longest wavelength a pulse's time slices reach (m): the window of
    :func:`time_slices` swept by the chirp of :func:`slice_wavelengths`; with a measured ``spectrum``
    the span where it is above zero (:func:`measured_spectrum_wavelengths` maps the pulse onto it)."""
    if spectrum is not None:
        return traces.support(spectrum[0], spectrum[1])
    if shape == "file":
        x = np.asarray(trace[0], dtype=float) * (bandwidth_m or 0.0)
        return wavelength_m - max(-x[0], x[-1]), wavelength_m + max(-x[0], x[-1])
    half = HALF_WINDOW_FWHM[shape] * (bandwidth_m or 0.0)
    return wavelength_m - half, wavelength_m + half


def seed_fluence(x_m: np.ndarray, y_m: np.ndarray, profile: str, diameter_m: float, order: float,
                 energy_J: float, shape: np.ndarray | None = None) -> np.ndarray:
    """(Ny, Nx) seed fluence (J/m²) whose sum over the grid times the pixel area equals ``energy_J``;
    ``shape``: a relative profile on the grid (a measured one) instead of ``profile``."""
    if shape is None:
        shape = transverse_profile(x_m, y_m, profile, diameter_m, order)
    pixel_area = abs(x_m[1] - x_m[0]) * abs(y_m[1] - y_m[0]) if len(x_m) > 1 else 1.0
    total = shape.sum() * pixel_area
    if total <= 0.0:
        raise ValueError("the seed profile has no energy on the grid: the beam is smaller than one pixel")
    return shape * (energy_J / total)


# ----------------------------------------------------------------------------------------------
# The seed as a field at the start plane (waist position, wavefront curvature, beam quality)
# ----------------------------------------------------------------------------------------------

def phase_screen(x_m: np.ndarray, y_m: np.ndarray, correlation_m: float, seed: int) -> np.ndarray:
    """(Ny, Nx) random phase pattern with unit rms and a Gaussian correlation of length ``correlation_m``.

    White Gaussian noise filtered in the Fourier domain by exp(−k²ℓ²/8), so that the pattern's
    autocorrelation is exp(−d²/ℓ²) (d the separation of two points); reproducible from ``seed``.
    """
    from scipy import fft

    rng = np.random.default_rng(seed)
    noise = rng.standard_normal((len(y_m), len(x_m)))
    kx = 2.0 * math.pi * fft.fftfreq(len(x_m), d=float(x_m[1] - x_m[0]))
    ky = 2.0 * math.pi * fft.fftfreq(len(y_m), d=float(y_m[1] - y_m[0]))
    filt = np.exp(-(kx[np.newaxis, :] ** 2 + ky[:, np.newaxis] ** 2) * correlation_m ** 2 / 8.0)
    screen = fft.ifft2(fft.fft2(noise) * filt).real
    screen -= screen.mean()
    return screen / screen.std()


# Correlation length of the M² phase screen, in units of the seed's radius (see seed_start_field).
SCREEN_CORRELATION_RADII = 0.25


def seed_start_field(x_m: np.ndarray, y_m: np.ndarray, profile: str, diameter_m: float, order: float,
                     energy_J: float, wavelength_m: float, waist_m: float | None = None,
                     curvature_m: float | None = None, m_squared: float = 1.0,
                     screen_seed: int = 0, shape: np.ndarray | None = None,
                     phase: np.ndarray | None = None) -> np.ndarray:
    """(Ny, Nx) complex seed field at the start plane, |E|² the fluence (J/m²) summing to ``energy_J``.

    The profile (:func:`transverse_profile`) is taken at the seed's waist with a flat wavefront,
    E = sqrt(profile). Then, in this order:

    - ``m_squared`` > 1: a random phase screen (:func:`phase_screen`, correlation length a quarter of
      the seed radius) is applied at the waist, its rms phase chosen (scipy.optimize.brentq) so that
      the second-moment M² of the field (mean of x and y, ISO 11146 definition, measured on the grid)
      equals the value asked. The intensity at the waist is unchanged; the beam diverges M² times
      faster than a coherent beam of that size, as the embedded-Gaussian picture of a multimode beam
      has it. Limits: one coherent realisation, not an ensemble: its near field stays smooth at the
      waist but develops speckle-like modulation as it propagates, and its far field is speckled
      (a real multimode or partially coherent beam is smoother); the M² is exact, the details of the
      modulation depend on ``screen_seed``.
    - ``waist_m`` (distance from the start plane to the waist, > 0 downstream): the field is carried
      back to the start plane. A Gaussian seed (M² = 1) uses the closed form of Kogelnik & Li
      (:func:`~ampmodel.kernels.diffraction.gaussian_beam`); any other seed one exact
      angular-spectrum step of −waist_m in air.
    - ``curvature_m`` (wavefront radius at the start plane, > 0 diverging, < 0 converging): the phase
      exp(+i·k·r²/(2R)) is applied (the convention E·exp(+ikz) of ``kernels/diffraction.py``: the
      phase of a thin lens of focal length −R).

    Without these keys the field is sqrt(:func:`seed_fluence`) with a flat phase. A measured seed
    gives its relative profile on the grid as ``shape`` (instead of ``profile``) and may give its
    measured wavefront as ``phase`` (rad, on the grid), applied first, at the start plane.

    References
    ----------
    H. Kogelnik and T. Li, Appl. Opt. 5, 1550 (1966); ISO 11146-1 (second-moment widths and M²).
    """

    if shape is None and profile == "gaussian" and m_squared == 1.0 and waist_m is not None:
        field = kd.gaussian_beam(x_m, y_m, diameter_m / 2.0, wavelength_m, -waist_m)
    else:
        if shape is None:
            shape = transverse_profile(x_m, y_m, profile, diameter_m, order)
        field = np.sqrt(shape).astype(complex)
        if phase is not None:
            field = field * np.exp(1j * phase)
        if m_squared > 1.0:
            field = _apply_m_squared(field, x_m, y_m, diameter_m, m_squared, screen_seed, measure_m2)
        if waist_m is not None and waist_m != 0.0:
            kx = kd.angular_frequencies(len(x_m), float(x_m[1] - x_m[0]) * len(x_m))
            ky = kd.angular_frequencies(len(y_m), float(y_m[1] - y_m[0]) * len(y_m))
            field = kd.propagate(field, kd.transfer_function(kx, ky, wavelength_m, 1.0, -waist_m))
    if curvature_m is not None:
        field = field * kd.lens_phase(x_m, y_m, wavelength_m, -curvature_m)
    pixel_area = abs(x_m[1] - x_m[0]) * abs(y_m[1] - y_m[0]) if len(x_m) > 1 else 1.0
    total = float((np.abs(field) ** 2).sum() * pixel_area)
    if total <= 0.0:
        raise ValueError("the seed profile has no energy on the grid: the beam is smaller than one pixel")
    return field * math.sqrt(energy_J / total)


def _apply_m_squared(field: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, diameter_m: float,
                     target: float, seed: int, measure) -> np.ndarray:
    """Multiply ``field`` by exp(i·σ·screen) with σ (rad rms) such that the mean M² is ``target``."""
    from scipy.optimize import brentq

    screen = phase_screen(x_m, y_m, SCREEN_CORRELATION_RADII * diameter_m / 2.0, seed)

    def excess(sigma: float) -> float:
        mx, my = measure(field * np.exp(1j * sigma * screen), x_m, y_m)
        return 0.5 * (mx + my) - target

    hi = 0.5
    while excess(hi) < 0.0:
        hi *= 2.0
        if hi > 256.0:
            raise ValueError(f"the grid cannot hold a seed of M² = {target:g}: its angular spectrum "
                             "reaches the sampling limit; raise grid.points")
    sigma = brentq(excess, 0.0, hi, xtol=1e-10, rtol=1e-10)
    return field * np.exp(1j * sigma * screen)
