"""Diffraction and thin optics on a square grid: pure numpy/scipy functions on complex fields.

A field ``E`` is a complex array whose last two axes are (y, x) on the pixel centres of a square
window of full width W with N pixels (pitch dx = W/N, centres symmetric about 0). Leading axes
(time slices) are carried along: every transform is one batched 2-D FFT over the last two axes.

Sign convention: a field varies as E·exp(i(k z − ω t)), so a wave travelling towards +x carries
exp(+i kx x), a positive index change adds phase exp(+i k0 Δn dz) and a converging lens multiplies by
exp(−i k r²/(2f)).

References
----------
J. W. Goodman, Introduction to Fourier Optics (McGraw-Hill), chapters 3–5: the angular spectrum of
plane waves and its transfer function H = exp(i·dz·kz), kz = sqrt(k² − kx² − ky²); the thin-lens
phase exp(−i k r²/(2f)); the Fourier-transforming property of a lens (focal plane coordinate
u = f·kx/k).
"""
from __future__ import annotations

import math

import numpy as np
import scipy.fft

# Absorbing window edge: amplitude mask m(u) = exp(−EDGE_STRENGTH·u^EDGE_ORDER) per axis, with
# u = |x|/(W/2). m is 1 − 7e-4 at u = 0.8, 0.93 at u = 0.9 and 1e-2 (intensity 1e-4) at the window
# edge: the outer tenth of the window on each side absorbs, the central CLEAR_FRACTION is clear.
EDGE_ORDER = 40
EDGE_STRENGTH = math.log(100.0)
CLEAR_FRACTION = 0.8


def angular_frequencies(points: int, width_m: float) -> np.ndarray:
    """(N,) transverse angular spatial frequencies kx (rad/m) of the FFT of ``points`` samples.

    In FFT order (0, dk, 2dk, ..., −dk), dk = 2π/W; the largest is the sampling limit π/dx.
    """
    return 2.0 * math.pi * scipy.fft.fftfreq(points, d=width_m / points)


def transfer_function(kx: np.ndarray, ky: np.ndarray, wavelength_m: float, index: float,
                      dz_m: float) -> np.ndarray:
    """Angular-spectrum transfer function of a step dz in a medium of index n, with the carrier removed.

    H = exp(i·dz·(kz − k)), kz = sqrt(k² − kx² − ky²), k = 2π·n/λ0. Evanescent components
    (kx² + ky² > k²) are damped as exp(−|dz|·sqrt(kx² + ky² − k²)). kz − k is evaluated as
    −kt²/(k + kz), free of cancellation for small angles.

    Parameters
    ----------
    kx, ky : (Nx,), (Ny,) angular spatial frequencies (rad/m), FFT order
    wavelength_m : vacuum wavelength λ0 (m)
    index : refractive index n of the medium (1 for free space)
    dz_m : step length (m); negative steps propagate backwards

    Returns
    -------
    (Ny, Nx) complex128

    References
    ----------
    Goodman, Introduction to Fourier Optics, section 3.10 (angular spectrum propagation).
    """
    k = 2.0 * math.pi * index / wavelength_m
    kt2 = kx[np.newaxis, :] ** 2 + ky[:, np.newaxis] ** 2
    propagating = kt2 <= k * k
    kz = np.sqrt(np.where(propagating, k * k - kt2, 0.0))
    phase = np.where(propagating, -kt2 / (k + kz), -k)
    decay = np.where(propagating, 0.0, np.sqrt(np.where(propagating, 0.0, kt2 - k * k)))
    return np.exp(1j * dz_m * phase - abs(dz_m) * decay)


def propagate(field: np.ndarray, transfer: np.ndarray, workers: int = -1) -> np.ndarray:
    """One angular-spectrum step: IFFT2[ FFT2[E] · H ] over the last two axes (batched).

    Parameters
    ----------
    field : (..., Ny, Nx) complex128 field; not changed
    transfer : (Ny, Nx) complex transfer function (:func:`transfer_function`)
    workers : threads for scipy.fft (−1: all cores)

    Returns
    -------
    (..., Ny, Nx) complex128, the propagated field (a new array). With |H| = 1 the power is conserved
    to round-off (Parseval).
    """
    spectrum = scipy.fft.fft2(field, axes=(-2, -1), workers=workers)
    spectrum *= transfer
    return scipy.fft.ifft2(spectrum, axes=(-2, -1), workers=workers, overwrite_x=True)


def edge_mask(x_m: np.ndarray, y_m: np.ndarray, width_m: float) -> np.ndarray:
    """(Ny, Nx) amplitude mask of the absorbing window edge (super-Gaussian in x times in y).

    m = exp(−a·u^p) per axis, u = |x|/(W/2), p = EDGE_ORDER, a = EDGE_STRENGTH: 1 to within 7e-4 over
    the central 80 % of the window, 1e-2 (intensity 1e-4) at its edge.
    """
    half = width_m / 2.0
    mx = np.exp(-EDGE_STRENGTH * (np.abs(x_m) / half) ** EDGE_ORDER)
    my = np.exp(-EDGE_STRENGTH * (np.abs(y_m) / half) ** EDGE_ORDER)
    return my[:, np.newaxis] * mx[np.newaxis, :]


def disc_fraction(x_m: np.ndarray, y_m: np.ndarray, radius_m: float, supersample: int = 8) -> np.ndarray:
    """(Ny, Nx) fraction of each pixel's area inside a centred disc of the given radius.

    Pixels wholly inside are 1, wholly outside 0; the pixels the rim crosses are sampled on a
    ``supersample`` x ``supersample`` sub-grid. A grey rim keeps the disc's area right on a coarse
    grid, so its diffraction (Fresnel zones) does not depend on where the rim falls between pixels.
    """
    dx = abs(float(x_m[1] - x_m[0])) if len(x_m) > 1 else 1.0
    dy = abs(float(y_m[1] - y_m[0])) if len(y_m) > 1 else 1.0
    r = np.hypot(x_m[np.newaxis, :], y_m[:, np.newaxis])
    reach = 0.5 * math.hypot(dx, dy)
    out = (r <= radius_m).astype(float)
    rim = np.abs(r - radius_m) <= reach
    if rim.any():
        iy, ix = np.nonzero(rim)
        offsets = (np.arange(supersample) + 0.5) / supersample - 0.5
        sx = x_m[ix][:, None, None] + offsets[None, None, :] * dx
        sy = y_m[iy][:, None, None] + offsets[None, :, None] * dy
        out[iy, ix] = (np.hypot(sx, sy) <= radius_m).mean(axis=(1, 2))
    return out


def aperture_amplitude(x_m: np.ndarray, y_m: np.ndarray, shape: str, size_m: float,
                       order: float | None = None) -> np.ndarray:
    """(Ny, Nx) amplitude transmission of a centred aperture (its square is the intensity transmission).

    Parameters
    ----------
    x_m, y_m : pixel centres (m)
    shape : "round" (size = diameter) or "square" (size = side)
    size_m : diameter or side (m)
    order : None for a hard edge: each pixel's amplitude is the fraction of its area inside the
            opening (1 inside, 0 outside, grey on the rim: the pixel-averaged field of a hard
            edge, which keeps the opening's area and so its diffraction right on a coarse grid);
            else a soft (super-Gaussian) edge of this order with intensity transmission
            T = exp(−ln 2·(2r/D)^order) (round) or the product of exp(−ln 2·(2|x|/D)^order) and the
            same in y (square): T = 1/2 on the given diameter or side.
    """
    half = size_m / 2.0
    if order is not None:
        if shape == "square":
            tx = np.exp(-0.5 * math.log(2.0) * (np.abs(x_m) / half) ** order)
            ty = np.exp(-0.5 * math.log(2.0) * (np.abs(y_m) / half) ** order)
            return ty[:, np.newaxis] * tx[np.newaxis, :]
        r = np.hypot(x_m[np.newaxis, :], y_m[:, np.newaxis])
        return np.exp(-0.5 * math.log(2.0) * (r / half) ** order)
    if shape == "square":
        dx = abs(float(x_m[1] - x_m[0])) if len(x_m) > 1 else 1.0
        dy = abs(float(y_m[1] - y_m[0])) if len(y_m) > 1 else 1.0
        fx = np.clip((half - np.abs(x_m)) / dx + 0.5, 0.0, 1.0)
        fy = np.clip((half - np.abs(y_m)) / dy + 0.5, 0.0, 1.0)
        return fy[:, np.newaxis] * fx[np.newaxis, :]
    return disc_fraction(x_m, y_m, half)


def lens_phase(x_m: np.ndarray, y_m: np.ndarray, wavelength_m: float, focal_m: float) -> np.ndarray:
    """(Ny, Nx) complex transmission of a thin lens in air, exp(−i·k·r²/(2f)), k = 2π/λ0.

    References
    ----------
    Goodman, Introduction to Fourier Optics, section 5.1 (thin-lens phase transformation).
    """
    k = 2.0 * math.pi / wavelength_m
    r2 = x_m[np.newaxis, :] ** 2 + y_m[:, np.newaxis] ** 2
    return np.exp(-1j * k * r2 / (2.0 * focal_m))


def pinhole_filter(field: np.ndarray, width_m: float, wavelength_m: float, focal_m: float,
                   pinhole_radius_m: float, workers: int = -1, min_pixels: float = 8.0,
                   max_padding: int = 8, chunk_bytes: int = 1 << 28) -> tuple[np.ndarray, int, float]:
    """A 4f spatial filter: lens, pinhole in the common focal plane, lens; the output is the filtered,
    inverted image of the input.

    The focal plane of a lens holds the Fourier transform of the field in its front focal plane:
    the point u of the focal plane receives the plane-wave component of transverse wavenumber
    k_t = k·u/f (Goodman, section 5.2). So the pinhole is applied exactly as a mask on the angular
    spectrum, passing |k_t| <= k·a/f (a the pinhole radius, k = 2π/λ0 in air), and the second lens
    transforms back, inverting the image (x -> −x). This needs no grid in the focal plane, where a
    focus would be undersampled. The angular spectrum of the window is sampled at dk = 2π/W; when the
    pinhole spans fewer than ``min_pixels`` samples in radius, the field is zero-padded (by up to
    ``max_padding`` times) so that the pinhole's edge is resolved, and the rim samples are grey:
    they pass the fraction of their area inside the pinhole in power (amplitude its square root),
    which gets the transmitted energy right to 2e-4 at 8 samples across the radius (a Gaussian spot:
    T = 1 − exp(−2a²/w_f²)). The output is cropped to the window: light that the
    pinhole's diffraction throws outside the window is lost with the rejected light.

    Parameters
    ----------
    field : (..., N, N) complex field on the window (input plane); not changed
    width_m : window width W (m)
    wavelength_m : vacuum wavelength (m)
    focal_m : focal length of both lenses (m, > 0)
    pinhole_radius_m : pinhole radius a (m)
    workers : scipy.fft threads
    min_pixels, max_padding, chunk_bytes : resolution of the pinhole in the spectrum, largest padding
        factor, size of the padded work arrays (the time slices are filtered in chunks)

    Returns
    -------
    (filtered field (..., N, N) complex, padding factor used, fraction of the energy the pinhole
    passes: Σ|mask·spectrum|² / Σ|spectrum|² before the crop to the window)

    References
    ----------
    Goodman, Introduction to Fourier Optics, sections 5.2 (Fourier transform by a lens) and 8.3
    (spatial filtering in the 4f system).
    """
    n = field.shape[-1]
    dx = width_m / n
    k = 2.0 * math.pi / wavelength_m
    k_cut = k * pinhole_radius_m / focal_m
    dk = 2.0 * math.pi / width_m
    pad = 1
    if k_cut / dk < min_pixels:
        pad = min(max_padding, math.ceil(min_pixels * dk / max(k_cut, 1e-30)))
    m = scipy.fft.next_fast_len(pad * n) if pad > 1 else n
    kf = 2.0 * math.pi * scipy.fft.fftfreq(m, d=dx)
    # grey rim: each spectral sample passes its area fraction inside |k| <= k_cut in power (FFT order)
    mask = np.sqrt(disc_fraction(scipy.fft.fftshift(kf), scipy.fft.fftshift(kf), k_cut))
    mask = scipy.fft.ifftshift(mask)
    flat = field.reshape((-1, n, n))
    out = np.empty_like(flat)
    per = max(1, chunk_bytes // (16 * m * m))
    total = passed = 0.0
    for start in range(0, flat.shape[0], per):
        part = flat[start:start + per]
        spectrum = scipy.fft.fft2(part, s=(m, m), axes=(-2, -1), workers=workers)
        total += float((spectrum.real ** 2 + spectrum.imag ** 2).sum())
        spectrum *= mask
        passed += float((spectrum.real ** 2 + spectrum.imag ** 2).sum())
        back = scipy.fft.ifft2(spectrum, axes=(-2, -1), workers=workers, overwrite_x=True)
        out[start:start + per] = back[:, :n, :n][:, ::-1, ::-1]
    return out.reshape(field.shape), pad, (passed / total if total > 0 else 1.0)


def image_scaled(values: np.ndarray, x_m: np.ndarray, magnification: float, order: int = 3) -> np.ndarray:
    """The inverted image of a map at magnification M on the same grid: out(x, y) = in(−x/M, −y/M).

    M = 1 is an exact flip of the pixels (the centres are symmetric about 0). Otherwise each output
    pixel samples the input at −x/M by spline interpolation (order ``order``; real and imaginary
    parts of a complex field separately); outside the input window the value is 0. The caller
    rescales the amplitude (1/M for a field, 1/M² for a fluence) and the energy.

    Parameters
    ----------
    values : (..., N, N) real or complex map on the pixel centres ``x_m`` (both axes)
    x_m : (N,) pixel centres (m)
    magnification : M > 0
    """
    if magnification == 1.0:
        return values[..., ::-1, ::-1].copy()
    from scipy.ndimage import map_coordinates

    n = len(x_m)
    dx = float(x_m[1] - x_m[0])
    src = (-x_m / magnification - x_m[0]) / dx            # fractional input index of each output pixel
    yy, xx = np.meshgrid(src, src, indexing="ij")
    coords = np.array([yy.ravel(), xx.ravel()])
    flat = values.reshape((-1, n, n))
    out = np.empty_like(flat)

    def sample(a: np.ndarray) -> np.ndarray:
        return map_coordinates(a, coords, order=order, mode="constant", cval=0.0).reshape(n, n)

    for i in range(flat.shape[0]):
        if np.iscomplexobj(flat):
            out[i] = sample(flat[i].real) + 1j * sample(flat[i].imag)
        else:
            out[i] = sample(flat[i])
    return out.reshape(values.shape)


def gaussian_beam(x_m: np.ndarray, y_m: np.ndarray, waist_radius_m: float, wavelength_m: float,
                  distance_from_waist_m: float, index: float = 1.0) -> np.ndarray:
    """(Ny, Nx) complex field of a TEM00 Gaussian beam at a distance z from its waist (peak-normalised
    at the waist, Gouy phase dropped): E = (w0/w)·exp(−r²/w²)·exp(+i·k·r²/(2R)).

    With q = z + i·zR, zR = π·w0²·n/λ0, k = 2π·n/λ0 and 1/q = 1/R − i·λ0/(π·n·w²) (Kogelnik & Li),
    written for this module's convention E·exp(+ikz), in which a diverging wave (R > 0, z > 0) has
    the phase exp(+i·k·r²/(2R)): E = (w0/w)·exp(+i·k·r²·conj(1/q)/2).

    References
    ----------
    H. Kogelnik and T. Li, "Laser beams and resonators", Appl. Opt. 5, 1550 (1966), eqs. for the
    fundamental mode and the complex beam parameter q (there written for exp(−ikz)).
    """
    k = 2.0 * math.pi * index / wavelength_m
    z_r = math.pi * waist_radius_m ** 2 * index / wavelength_m
    inv_q = 1.0 / complex(distance_from_waist_m, z_r)
    r2 = x_m[np.newaxis, :] ** 2 + y_m[:, np.newaxis] ** 2
    amplitude = abs(z_r * inv_q)
    return amplitude * np.exp(0.5j * k * r2 * inv_q.conjugate())


def kerr_phase(intensity_W_m2: np.ndarray, wavelength_m: float, n2_m2_W: float, dz_m: float) -> np.ndarray:
    """Self-phase k0·n2·I·dz (rad) picked up over dz at intensity I (n = n0 + n2·I).

    References
    ----------
    B-integral B = (2π/λ0)·∫ n2·I dz (e.g. W. Koechner, Solid-State Laser Engineering).
    """
    return (2.0 * math.pi / wavelength_m) * n2_m2_W * dz_m * intensity_W_m2


def critical_power_W(wavelength_m: float, index: float, n2_m2_W: float) -> float:
    """Critical power for whole-beam self-focusing of a Gaussian beam, P_cr ≈ 3.77·λ0²/(8π·n0·n2).

    References
    ----------
    J. H. Marburger, "Self-focusing: theory", Prog. Quantum Electron. 4, 35 (1975) (from memory —
    verify). Consistent with the Townes-profile value 1.8962·λ0²/(4π·n0·n2) quoted by G. Fibich and
    A. L. Gaeta, Opt. Lett. 25, 335 (2000) (from memory — verify): the two differ by 0.6 %.
    """
    return 3.77 * wavelength_m ** 2 / (8.0 * math.pi * index * n2_m2_W)


def self_focusing_length_m(wavelength_m: float, index: float, beam_radius_m: float, power_ratio: float) -> float:
    """Distance at which a collimated Gaussian beam of power P = ratio·P_cr collapses (inf at or below
    the threshold of the formula): z_sf = 0.367·k·a² / sqrt((sqrt(P/P_cr) − 0.852)² − 0.0219),
    k = 2π·n0/λ0, a the 1/e² intensity radius.

    References
    ----------
    J. H. Marburger, Prog. Quantum Electron. 4, 35 (1975) (from memory — verify, including which
    beam radius a denotes); an estimate for whole-beam collapse of a smooth beam, not for small-scale
    self-focusing, which the B-integral measures.
    """
    k = 2.0 * math.pi * index / wavelength_m
    root = math.sqrt(max(power_ratio, 0.0))
    inner = (root - 0.852) ** 2 - 0.0219
    if root <= 0.852 or inner <= 0.0:
        return math.inf
    return 0.367 * k * beam_radius_m ** 2 / math.sqrt(inner)


# Taylor coefficients of cos and sin in powers of φ² (through φ⁸ and φ⁹): below SMALL_PHASE rad the
# truncation error is under 3e-17, round-off level.
SMALL_PHASE = 0.1
_COS = (1.0, -1.0 / 2, 1.0 / 24, -1.0 / 720, 1.0 / 40320)
_SIN = (1.0, -1.0 / 6, 1.0 / 120, -1.0 / 5040, 1.0 / 362880)
_NEGLIGIBLE = 1e-17       # Taylor terms of the phase factor below this are dropped


def amplitude_phase(amplitude: np.ndarray, phase_rad: np.ndarray) -> np.ndarray:
    """Complex factor amplitude·exp(i·phase), elementwise, in a new array (:func:`phase_factor_into`)."""
    phase = np.asarray(phase_rad, dtype=float)
    amp = np.broadcast_to(np.asarray(amplitude, dtype=float), phase.shape)
    scratch = [np.empty(phase.shape) for _ in range(3)]
    return phase_factor_into(phase, np.empty(phase.shape, dtype=np.complex128), *scratch, amp)


def _taylor_terms(largest: float) -> int:
    """Terms of the cos and sin series kept for phases up to ``largest`` (<= SMALL_PHASE): the last term
    kept is the first whose size at ``largest`` is not below _NEGLIGIBLE of 1."""
    terms = len(_COS)
    while terms > 1 and largest ** (2 * (terms - 1)) * abs(_COS[terms - 1]) < _NEGLIGIBLE:
        terms -= 1
    return terms


def phase_factor_into(phase: np.ndarray, out: np.ndarray, p2: np.ndarray, acc: np.ndarray, acc2: np.ndarray,
                      amplitude: np.ndarray | None = None, largest: float | None = None) -> np.ndarray:
    """out = amplitude·exp(i·phase), elementwise, into a complex array (p2, acc, acc2: real scratch of
    phase's shape; amplitude real of that shape, or None for 1).

    Kerr phases per slice are small: when every |phase| <= SMALL_PHASE the cosine and sine are summed
    from their Taylor series (Horner, exact to round-off there, several times faster than the complex
    exponential), cut at the first term below 1e-17 for the largest |phase| (for phases of 1e-3 rad,
    after φ⁴ and φ⁵); larger phases: numpy's cos and sin. ``largest``: a bound on |phase| that the
    caller knows (else the phases are searched).

    With a = amplitude, φ² = p2 and t = a·p2, the series are summed as a·cos φ = a + t·(C1 + p2·(C2 + ...))
    and a·sin φ = φ·(a + t·(S1 + p2·(S2 + ...))), each written into the complex array by its last
    operation (a write into the real or imaginary part of a complex array costs about three
    multiplications of contiguous ones).
    """
    if largest is None:
        largest = float(max(phase.max(), -phase.min())) if phase.size else 0.0
    terms = _taylor_terms(largest) if largest <= SMALL_PHASE else 0
    a = 1.0 if amplitude is None else amplitude
    if terms == 0:
        np.cos(phase, out=acc)
        np.sin(phase, out=p2)
        np.multiply(acc, a, out=out.real)
        np.multiply(p2, a, out=out.imag)
        return out
    if terms == 1:                                          # cos φ = 1, sin φ = φ to round-off
        out.real[...] = a
        np.multiply(phase, a, out=out.imag)
        return out
    np.multiply(phase, phase, out=p2)
    t = p2 if amplitude is None else np.multiply(p2, amplitude, out=acc2)
    for coefs, part in ((_COS, out.real), (_SIN, out.imag)):
        if terms == 2:
            np.multiply(t, coefs[1], out=acc)
        else:
            np.multiply(p2, coefs[terms - 1], out=acc)
            for j in range(terms - 2, 1, -1):               # Horner: C1 + p2·(C2 + p2·(...))
                acc += coefs[j]
                acc *= p2
            acc += coefs[1]
            acc *= t
        if coefs is _COS:
            np.add(acc, a, out=part)                        # a·cos φ
        else:
            acc += a
            np.multiply(acc, phase, out=part)               # a·sin φ
    return out

