"""Heat conduction in a cooled gain medium, its thermal lens and the stress-birefringence estimate.

Pure numpy/scipy functions on arrays (SI): the steady temperature rise of each z-slice of a rod
cooled on its barrel (2-D heat equation, plane strain, no axial heat flow, K constant), of a disc
cooled on one face (1-D axial flow, no radial flow), the optical path difference it gives through
dn/dT, a paraxial (parabolic) fit of the OPD and the focal length of that fit, and the depolarisation
of a linearly polarised beam filling a uniformly heated rod.

Sign conventions: ΔT is the rise above the cooled surface (K); OPD(x, y) is the extra optical path
(m), so a thin lens of focal length f has OPD = c0 − r²/(2·f): f > 0 focuses (OPD largest on axis,
as for dn/dT > 0 and a hot axis).

References
----------
W. Koechner, Solid-State Laser Engineering, 6th ed., Springer (2006), ch. 7 (thermal effects: the
parabolic temperature of a uniformly heated rod ΔT(r) = Q·(r0² − r²)/(4K), the thermal lens
f = K·A/P_h·(½·dn/dT + α·C_r,φ·n0³ + α·r0·(n0 − 1)/L)⁻¹, the stress-birefringence constant
C_B = (1 + ν)·(p11 − p12 + 4·p44)/(48·(1 − ν)) and the depolarisation of a uniformly pumped rod
D = ¼·[1 − sin(C_T·P_h)/(C_T·P_h)]) (from memory — verify the equation numbers); the
Shortley–Weller difference formula on an irregular boundary: G. H. Shortley and R. Weller, J. Appl.
Phys. 9, 334 (1938) (from memory — verify).
"""
from __future__ import annotations

import math

import numpy as np
import scipy.sparse
import scipy.sparse.linalg

_MIN_FRACTION = 1e-6


def boundary_fractions(x_m: np.ndarray, y_m: np.ndarray, shape: str, size_m: float) -> np.ndarray:
    """(4, Ny, Nx): for each pixel centre, the distance to the aperture's edge towards +x, −x, +y, −y
    in pixel pitches, capped at 1 (1: the neighbour pixel is inside, or the pixel is outside).

    shape : "round" (size = diameter) or "square" (size = side); pixels on a uniform grid.
    """
    dx = float(x_m[1] - x_m[0])
    xx, yy = np.meshgrid(x_m, y_m)
    half = size_m / 2.0
    if shape == "square":
        ex = np.full_like(xx, half)
        ey = np.full_like(yy, half)
    else:
        ex = np.sqrt(np.maximum(half * half - yy * yy, 0.0))     # |x| of the edge on this row
        ey = np.sqrt(np.maximum(half * half - xx * xx, 0.0))     # |y| of the edge on this column
    out = np.stack([(ex - xx) / dx, (ex + xx) / dx, (ey - yy) / dx, (ey + yy) / dx])
    return np.clip(out, _MIN_FRACTION, 1.0)


def _laplacian(mask: np.ndarray, fractions: np.ndarray, dx: float) -> tuple[scipy.sparse.csc_matrix, np.ndarray]:
    """The 5-point Laplacian (1/m²) on the pixels inside ``mask``, with u = 0 on the edge at the
    distances ``fractions`` (Shortley–Weller: the non-uniform 3-point formula, exact for quadratics)."""
    ny, nx = mask.shape
    index = -np.ones(mask.shape, dtype=np.int64)
    inside = np.flatnonzero(mask.ravel())
    index.ravel()[inside] = np.arange(inside.size)
    jj, ii = np.unravel_index(inside, mask.shape)
    rows, cols, vals = [], [], []
    diag = np.zeros(inside.size)
    for plus, minus, dj, di in ((0, 1, 0, 1), (2, 3, 1, 0)):
        hp = fractions[plus].ravel()[inside] * dx
        hm = fractions[minus].ravel()[inside] * dx
        a_p = 2.0 / (hp * (hp + hm))
        a_m = 2.0 / (hm * (hp + hm))
        diag -= a_p + a_m
        for a, sign, h in ((a_p, 1, fractions[plus]), (a_m, -1, fractions[minus])):
            nj, ni = jj + sign * dj, ii + sign * di
            ok = (nj >= 0) & (nj < ny) & (ni >= 0) & (ni < nx)
            ok[ok] &= mask[nj[ok], ni[ok]] & (h.ravel()[inside][ok] >= 1.0)
            rows.append(np.flatnonzero(ok))
            cols.append(index[nj[ok], ni[ok]])
            vals.append(a[ok])
    rows.append(np.arange(inside.size))
    cols.append(np.arange(inside.size))
    vals.append(diag)
    matrix = scipy.sparse.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                                     shape=(inside.size, inside.size))
    return matrix, inside


def barrel_cooled_rise(heat_W_m3: np.ndarray, mask: np.ndarray, fractions: np.ndarray, dx_m: float,
                       conductivity_W_mK: float) -> np.ndarray:
    """Temperature rise above the barrel (K) of each z-slice of a rod cooled on its barrel.

    Solves K·∇²ΔT = −Q in each slice (plane strain, no axial heat flow, K constant) with ΔT = 0 on
    the clear aperture's edge, by a sparse 5-point Laplacian (Shortley–Weller at the edge), factorised
    once (scipy.sparse.linalg.splu) for all slices.

    Parameters
    ----------
    heat_W_m3 : (Nz, Ny, Nx) heat density (W/m³); what lies outside ``mask`` is ignored
    mask : (Ny, Nx) bool, the clear aperture; fractions : (4, Ny, Nx) from :func:`boundary_fractions`
    dx_m : pixel pitch (m); conductivity_W_mK : thermal conductivity K (W/(m·K))

    Returns
    -------
    (Nz, Ny, Nx) ΔT (K), 0 outside the aperture.
    """
    nz = heat_W_m3.shape[0]
    out = np.zeros(heat_W_m3.shape)
    if not mask.any():
        return out
    matrix, inside = _laplacian(mask, fractions, dx_m)
    rhs = -heat_W_m3.reshape(nz, -1)[:, inside].T / conductivity_W_mK
    solution = scipy.sparse.linalg.splu(matrix).solve(np.ascontiguousarray(rhs))
    out.reshape(nz, -1)[:, inside] = solution.T
    return out


def face_cooled_rise(heat_W_m3: np.ndarray, dz_m: float, conductivity_W_mK: float,
                     cooled_face: str = "back") -> np.ndarray:
    """Temperature rise above the cooled face (K) of a disc cooled on one face, the other insulated:
    1-D axial heat flow in each column (no radial flow, K constant), slice by slice.

    The heat flux crossing the boundary between slices is the heat of the slices behind it; each
    slice's mean rise is that of the exact piecewise-quadratic profile of uniform heat per slice.

    Parameters
    ----------
    heat_W_m3 : (Nz, Ny, Nx) heat density (W/m³); dz_m : slice length (m)
    cooled_face : "back" (z = L, the face the beam leaves through on a forward pass) or "front" (z = 0)
    """
    q = heat_W_m3 if cooled_face == "back" else heat_W_m3[::-1]
    flux_out = np.cumsum(q, axis=0) * dz_m                 # W/m² leaving each slice towards the cooled face
    flux_in = flux_out - q * dz_m
    # rise at each slice's far boundary (towards the cooled face), accumulated from the cooled face
    drop = (flux_in + flux_out) * 0.5 * dz_m / conductivity_W_mK   # across each slice
    at_far = np.cumsum(drop[::-1], axis=0)[::-1] - drop
    # mean over the slice of T(s) = at_far + (flux_in·(dz − s) + q·(dz² − s²)/2... ): exact for uniform q
    mean = at_far + (flux_in * dz_m / 2.0 + q * dz_m * dz_m / 3.0) / conductivity_W_mK
    return mean if cooled_face == "back" else mean[::-1]


def opd_m(rise_K: np.ndarray, dz_m: float, dn_dT_per_K: float) -> np.ndarray:
    """(Ny, Nx) optical path difference (m) of one trip through the medium: Σ_z dn/dT·ΔT·dz (the
    dn/dT term alone: the photo-elastic and end-face terms are left out)."""
    return dn_dT_per_K * rise_K.sum(axis=0) * dz_m


def phase_rad(opd: np.ndarray, wavelength_m: float) -> np.ndarray:
    """(Ny, Nx) phase (rad) of an OPD map (m) at a vacuum wavelength: k0·OPD, k0 = 2π/λ0."""
    return (2.0 * math.pi / wavelength_m) * opd


def parabolic_fit(opd: np.ndarray, x_m: np.ndarray, y_m: np.ndarray, region: np.ndarray) -> tuple[float, float]:
    """Least-squares fit OPD = c0 + c2·r² over the pixels of ``region`` (Ny, Nx bool).

    Returns (c0 (m), c2 (1/m)); (0, 0) when the region has fewer than 2 distinct radii.
    """
    r2 = (x_m[np.newaxis, :] ** 2 + y_m[:, np.newaxis] ** 2)[region]
    values = opd[region]
    if r2.size < 2 or np.ptp(r2) == 0.0:
        return 0.0, 0.0
    design = np.stack([np.ones_like(r2), r2], axis=1)
    (c0, c2), *_ = np.linalg.lstsq(design, values, rcond=None)
    return float(c0), float(c2)


def focal_length_m(c2_per_m: float) -> float:
    """Focal length (m) of OPD = c0 + c2·r²: f = −1/(2·c2) (> 0 focusing); inf when c2 = 0."""
    return -1.0 / (2.0 * c2_per_m) if c2_per_m != 0.0 else math.inf


def birefringence_constant(poisson: float, p11: float, p12: float, p44: float) -> float:
    """Koechner's C_B = (1 + ν)·(p11 − p12 + 4·p44)/(48·(1 − ν)) of a [111] cubic rod (dimensionless)."""
    return (1.0 + poisson) * (p11 - p12 + 4.0 * p44) / (48.0 * (1.0 - poisson))


def depolarisation(heat_W: float, wavelength_m: float, index: float, expansion_per_K: float,
                   conductivity_W_mK: float, c_b: float) -> float:
    """Depolarised fraction of a linearly polarised beam that fills a uniformly heated rod (the
    average over the rod's cross-section, the rod's whole heat ``heat_W``):

    D = ¼·[1 − sin(C_T·P_h)/(C_T·P_h)],  C_T = 2·n0³·α·|C_B|/(λ·K)  (1/W)

    from the radial–tangential phase difference δ(r) = C_T·P_h·(r/r0)² averaged with sin²(2φ)·sin²(δ/2)
    over the face (Koechner, ch. 7). Independent of the rod's length and diameter.
    """
    x = 2.0 * index ** 3 * expansion_per_K * abs(c_b) / (wavelength_m * conductivity_W_mK) * heat_W
    if x == 0.0:
        return 0.0
    return 0.25 * (1.0 - math.sin(x) / x)
