"""Pumping by the rate equations, with bleaching: the pump through columns of voxels, and the
upper-state density of each voxel under it.

A column is a pixel's stack of Nz slices of length dz along the pump (end pumping; side pumping has no
propagation). Per voxel, with the pump's photon flux Φ (photons/(m²·s), all its passes summed),

    dN2/dt = η·σa,p·Φ·(Nt − N2) − σe,p·Φ·N2 − N2/τ,       dΦ/dz = −α·Φ,   α = σa,p·(Nt − N2) − σe,p·N2,

written with α0 = σa,p·Nt, b = σa,p + σe,p (the bleaching of the pump's absorption) and
c = η·σa,p + σe,p as dN2/dt = A − B·N2, A = η·α0·Φ, B = c·Φ + 1/τ, α = α0 − b·N2. Four-level media
have σe,p = 0 and still bleach (the ground state empties); where Nt is not known b = c = 0 (the ground
state taken as undepleted) and nothing limits N2.

The pump crosses each slice as exp(−α·dz) with α of that slice, and the voxel sees the exact mean of
the exponential over the slice (the absorbed photons are α·mean·dz, so photons are conserved slice by
slice); a back reflector at the far face sends a fraction R of what reaches it back through the
slices, and a pump from both ends enters at z = 0 and at z = L, the two crossing each other. For
a frozen flux the voxel's equation is linear and solved exactly, N2(t) = A/B + (N2(0) − A/B)·e^(−B·t);
over a pump interval the flux is re-evaluated at the middle of each time step (explicit midpoint:
second order in the step), the steps short against the fastest voxel's 1/B. The steady state under a
continuous pump is the fixed point N2 = A(Φ(N2))/B(Φ(N2)).

Optically thin check: for a flat pump that the medium barely attenuates, N2(t) = N∞·(1 − e^(−t/τeff)),
1/τeff = 1/τ + c·Φ, N∞ = η·α0·Φ·τeff.

References
----------
T. Y. Fan and R. L. Byer, Modeling and CW operation of a quasi-three-level 946 nm Nd:YAG laser, IEEE
J. Quantum Electron. 23, 605 (1987) (quasi-three-level rate equations; from memory — verify);
C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991) (the same two-level equations with
a propagating pump); Beer–Lambert absorption.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

# A time step is at most this fraction of the fastest voxel's time constant 1/B (the flux changes on
# that scale); measured against a method-of-lines solution (tests/physics/test_pump_rates.py).
STEP_FRACTION = 0.1
MIN_STEPS = 8
MAX_STEPS = 4000


class PumpedColumns(NamedTuple):
    """What a pump interval did to a set of columns (per m² of column cross-section, over the interval).

    n2 : (Nz, C) upper-state density at the end (1/m³)
    absorbed : (C,) pump photons absorbed in each column (photons/m²)
    transmitted : (C,) pump photons that left each column through its faces (photons/m²)
    created : (Nz, C) upper-state ions created by the pump in each voxel (1/m³)
    decayed : (Nz, C) ions lost by spontaneous decay in each voxel (1/m³)
    absorbed_voxels : (Nz, C) pump photons absorbed in each voxel (photons/m² of column; summed over
        z: ``absorbed``)
    """

    n2: np.ndarray
    absorbed: np.ndarray
    transmitted: np.ndarray
    created: np.ndarray
    decayed: np.ndarray
    absorbed_voxels: np.ndarray | None = None


def slice_mean(y: np.ndarray) -> np.ndarray:
    """expm1(y)/y, 1 where y = 0: the mean of exp(s) over s in [0, y], relative to its start."""
    out = np.ones_like(y)
    nz = y != 0.0
    out[nz] = np.expm1(y[nz]) / y[nz]
    return out


def march(alpha_per_m: np.ndarray, flux_in: np.ndarray, dz_m: float, back_reflectance: float = 0.0,
          direction: str = "forward") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """An end pump through columns whose slices absorb ``alpha_per_m``.

    Parameters
    ----------
    alpha_per_m : (Nz, C) absorption coefficient of each voxel at the pump (1/m; < 0 where it amplifies)
    flux_in : (C,) photon flux entering at each pumped face (any unit of flux: the outputs follow it)
    dz_m : slice length (m)
    back_reflectance : fraction of the flux reaching the far face sent back through the slices
        (one pumped face only)
    direction : "forward" (the pump enters at z = 0), "backward" (at z = L) or "both" (``flux_in``
        at each face, the two counter-propagating)

    Returns
    -------
    mean_flux : (Nz, C) mean flux in each voxel, all passes summed
    absorbed : (Nz, C) flux absorbed in each voxel per unit column area (flux·dz·α·mean)
    transmitted : (C,) flux leaving the column through its faces
    """
    if direction == "backward":
        mean, absorbed, transmitted = march(alpha_per_m[::-1], flux_in, dz_m, back_reflectance)
        return mean[::-1], absorbed[::-1], transmitted
    nz = alpha_per_m.shape[0]
    mean = np.empty_like(alpha_per_m)
    absorbed = np.empty_like(alpha_per_m)
    flux = np.array(flux_in, dtype=float, copy=True)
    for k in range(nz):
        y = -alpha_per_m[k] * dz_m
        mean[k] = flux * slice_mean(y)
        out = flux * np.exp(y)
        absorbed[k] = flux - out
        flux = out
    transmitted = flux
    if back_reflectance > 0.0 or direction == "both":
        transmitted = (1.0 - back_reflectance) * flux
        flux = flux * back_reflectance
        if direction == "both":
            flux = flux + np.asarray(flux_in, dtype=float)      # the second pump enters at z = L
        for k in range(nz - 1, -1, -1):
            y = -alpha_per_m[k] * dz_m
            mean[k] += flux * slice_mean(y)
            out = flux * np.exp(y)
            absorbed[k] += flux - out
            flux = out
        transmitted = transmitted + flux
    return mean, absorbed, transmitted


def relax(n2: np.ndarray, mean_flux: np.ndarray, create_a_per_m: float, create_b_m2: float, lifetime_s: float,
          duration_s: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each voxel over ``duration_s`` under a frozen pump flux: dN2/dt = A − B·N2, exactly.

    Parameters
    ----------
    n2 : (...) upper-state density at the start (1/m³)
    mean_flux : (...) pump photon flux in the voxel (photons/(m²·s))
    create_a_per_m : η·α0 = η·σa,p·Nt (1/m): A = create_a·Φ (1/(m³·s))
    create_b_m2 : c = η·σa,p + σe,p (m²): B = c·Φ + 1/τ
    lifetime_s : τ; duration_s : the interval

    Returns
    -------
    (n2 at the end, ions created by the pump, ions lost by decay), each (...) in 1/m³;
    end − start = created − decayed to round-off.
    """
    a = create_a_per_m * mean_flux
    b = create_b_m2 * mean_flux + 1.0 / lifetime_s
    n_inf = a / b
    one_minus = -np.expm1(-b * duration_s)
    end = n2 + (n_inf - n2) * one_minus
    integral = n_inf * duration_s + (n2 - n_inf) * one_minus / b        # ∫ N2 dt over the interval
    decayed = integral / lifetime_s
    created = end - n2 + decayed
    return end, created, decayed


def steps_for(duration_s: float, peak_flux: float, create_b_m2: float, bleach_m2: float, alpha0_per_m: float,
              lifetime_s: float) -> int:
    """Time steps for a pump interval: each at most STEP_FRACTION of the fastest voxel's 1/B (B at the
    largest flux, which back reflection can nearly double), between MIN_STEPS and MAX_STEPS; a pump
    whose absorption does not depend on the populations (no bleaching) needs one."""
    if bleach_m2 <= 0.0 or alpha0_per_m <= 0.0 or duration_s <= 0.0:
        return 1
    fastest = 2.0 * create_b_m2 * peak_flux + 1.0 / lifetime_s
    return int(min(MAX_STEPS, max(MIN_STEPS, np.ceil(duration_s * fastest / STEP_FRACTION))))


def pump_interval(n2: np.ndarray, flux_in: np.ndarray, dz_m: float, duration_s: float, alpha0_per_m: float,
                  bleach_m2: float, create_b_m2: float, quantum_efficiency: float, lifetime_s: float,
                  back_reflectance: float = 0.0, side: bool = False, steps: int | None = None,
                  direction: str = "forward") -> PumpedColumns:
    """Columns pumped for ``duration_s`` (a pump pulse, or a pump window between pulses of a train).

    Parameters
    ----------
    n2 : (Nz, C) upper-state density at the start (1/m³); not changed
    flux_in : (C,) end pumping: the photon flux entering at each pumped face (photons/(m²·s)); side
        pumping: the flux every voxel of the column sees (uniform along z, no propagation)
    dz_m : slice length (m)
    duration_s : the interval (s)
    alpha0_per_m : α0 = σa,p·Nt, the unbleached pump absorption (1/m)
    bleach_m2 : σa,p + σe,p (0: no bleaching); create_b_m2 : η·σa,p + σe,p (0 likewise)
    quantum_efficiency : η, upper-state ions per absorbed pump photon
    lifetime_s : τ
    back_reflectance : end pumping: the fraction of the pump sent back from the far face
    side : side pumping (``flux_in`` is the flux in every voxel)
    steps : time steps (None: :func:`steps_for`)
    direction : end pumping: where the pump enters (:func:`march`)

    Returns
    -------
    PumpedColumns
    """
    n2 = np.asarray(n2, dtype=float)
    flux_in = np.asarray(flux_in, dtype=float)
    create_a = quantum_efficiency * alpha0_per_m
    if steps is None:
        peak = float(flux_in.max()) if flux_in.size else 0.0
        steps = steps_for(duration_s, peak, create_b_m2, bleach_m2, alpha0_per_m, lifetime_s)
    dt = duration_s / steps
    absorbed = np.zeros(flux_in.shape)
    transmitted = np.zeros(flux_in.shape)
    created = np.zeros(n2.shape)
    decayed = np.zeros(n2.shape)
    absorbed_voxels = np.zeros(n2.shape)
    state = n2.copy()

    def flux(density: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        alpha = alpha0_per_m - bleach_m2 * density
        if side:
            mean = np.broadcast_to(flux_in, density.shape)
            taken = alpha * mean * dz_m
            return mean, taken, np.zeros(flux_in.shape)
        return march(alpha, flux_in, dz_m, back_reflectance, direction)

    for _ in range(steps):
        if steps > 1:
            half, _, _ = relax(state, flux(state)[0], create_a, create_b_m2, lifetime_s, 0.5 * dt)
            mean, taken, out = flux(half)
        else:
            mean, taken, out = flux(state)
        state, made, lost = relax(state, mean, create_a, create_b_m2, lifetime_s, dt)
        created += made
        decayed += lost
        absorbed_voxels += taken * dt
        transmitted += out * dt
    absorbed = absorbed_voxels.sum(axis=0)
    return PumpedColumns(state, absorbed, transmitted, created, decayed, absorbed_voxels)


def steady_columns(flux_in: np.ndarray, dz_m: float, nz: int, alpha0_per_m: float, bleach_m2: float,
                   create_b_m2: float, quantum_efficiency: float, lifetime_s: float, back_reflectance: float = 0.0,
                   side: bool = False, tolerance: float = 1e-12, max_iterations: int = 500,
                   direction: str = "forward") -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """The steady state under a continuous pump: N2 = A/B in every voxel with the flux its own
    populations let through, by fixed-point iteration (damped when it does not contract).

    Parameters as :func:`pump_interval` (``nz`` slices per column). Returns (n2 (Nz, C) in 1/m³,
    mean flux (Nz, C), absorbed photons per second (Nz, C) per m² of column, the iterations used).
    """
    flux_in = np.asarray(flux_in, dtype=float)
    create_a = quantum_efficiency * alpha0_per_m
    n2 = np.zeros((nz,) + flux_in.shape)
    scale = max(alpha0_per_m / bleach_m2 if bleach_m2 > 0.0 else 1.0, 1e-300)
    damping, previous = 1.0, np.inf
    for iteration in range(1, max_iterations + 1):
        alpha = alpha0_per_m - bleach_m2 * n2
        if side:
            mean = np.broadcast_to(flux_in, n2.shape)
            absorbed = alpha * mean * dz_m
        else:
            mean, absorbed, _ = march(alpha, flux_in, dz_m, back_reflectance, direction)
        target = create_a * mean / (create_b_m2 * mean + 1.0 / lifetime_s)
        change = float(np.max(np.abs(target - n2))) / scale if n2.size else 0.0
        if change > previous:
            damping = max(damping / 2.0, 1.0 / 64.0)
        previous = change
        n2 = n2 + damping * (target - n2)
        if change <= tolerance or bleach_m2 <= 0.0:
            return n2, mean, absorbed, iteration
    return n2, mean, absorbed, max_iterations
