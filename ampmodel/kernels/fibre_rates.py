"""Two-level rate equations of a doped fibre (pure numpy, SI units).

The light in the fibre is a set of channels k: the signal, the pump, and the amplified spontaneous
emission (ASE) in spectral bins, each travelling forward (+z) or backward (−z). The doped core is
a set of rings j (one ring: the overlap model), each with its own upper-state fraction
n2_j = N2_j/Nt_j. Channel k overlaps ring j with the fraction Γ_kj of its power (Σ_j Γ_kj = Γ_k,
the overlap of the channel with the doped core).

Steady-state population of ring j (stimulated rates per ion, photon flux Γ_kj·P_k/(hν_k·A_j)):

    n2_j = Σ_k σa,k·Γ_kj·P_k/(hν_k·A_j) / (1/τ + Σ_k (σa,k + σe,k)·Γ_kj·P_k/(hν_k·A_j))

Growth of channel k along its own direction of travel ζ (dP/dz = u_k·dP/dζ, u_k = ±1):

    dP_k/dζ = g_k·P_k + s_k − l_k·P_k,
    g_k = Σ_j Γ_kj·[(σe,k + σa,k)·n2_j − σa,k]·Nt_j        (gain coefficient, 1/m)
    s_k = 2·hν_k·Δν_k·σe,k·Σ_j Γ_kj·n2_j·Nt_j               (spontaneous emission into the bin, W/m)

With one ring these are the equations of C. R. Giles and E. Desurvire, "Modeling erbium-doped fiber
amplifiers", J. Lightwave Technol. 9, 271 (1991); the factor 2 counts the two polarisations.

Through a slice of length h in which the populations are uniform, g, s and l are constant and the
power has the exact solution (``slice_transfer``):

    P_out = P_in·exp(x) + s·h·φ1(x),      mean over the slice  P̄ = P_in·φ1(x) + s·h·φ2(x),
    x = (g − l)·h,  φ1(x) = (eˣ − 1)/x,  φ2(x) = (eˣ − 1 − x)/x²,

stable for any gain or absorption per slice. When the populations of a slice are set from the
slice-mean powers P̄, photons are conserved exactly slice by slice: over a slice of length h,

    Σ_k (Φ_k,leaving − Φ_k,entering) = h·[Σ_k s_k/(hν_k) − Σ_j A_j·Nt_j·n2_j/τ − Σ_k l_k·P̄_k/(hν_k)],

(Φ = P/hν, sums over the channels that act on the ions): what the ions lose to spontaneous decay
beyond the guided spontaneous emission, and the background loss, is what the light loses.
"""
from __future__ import annotations

import numpy as np

_X_MAX = 700.0   # exp(700) ~ 1e304: larger growth per slice is clipped (never met in a real fibre)


def interpolate_cross_sections(table_wavelength_m: np.ndarray, table_emission_m2: np.ndarray,
                               table_absorption_m2: np.ndarray,
                               wavelength_m: float | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Emission and absorption cross-sections at ``wavelength_m``, linearly interpolated in a table.

    Parameters
    ----------
    table_wavelength_m : (M,) strictly increasing wavelengths of the table (m)
    table_emission_m2, table_absorption_m2 : (M,) cross-sections at those wavelengths (m²)
    wavelength_m : scalar or array of wavelengths (m), inside the table's range

    Returns
    -------
    (sigma_e, sigma_a) : arrays shaped like ``wavelength_m`` (m²)

    Raises
    ------
    ValueError
        For a wavelength outside the table (no extrapolation).
    """
    wl = np.asarray(wavelength_m, dtype=float)
    lo, hi = float(table_wavelength_m[0]), float(table_wavelength_m[-1])
    if np.any(wl < lo * (1 - 1e-12)) or np.any(wl > hi * (1 + 1e-12)):
        raise ValueError(f"wavelength outside the cross-section table ({lo * 1e9:g} to {hi * 1e9:g} nm)")
    return (np.interp(wl, table_wavelength_m, table_emission_m2),
            np.interp(wl, table_wavelength_m, table_absorption_m2))


def transition_rates(overlap: np.ndarray, sigma_e_m2: np.ndarray, sigma_a_m2: np.ndarray,
                     photon_energy_J: np.ndarray, ring_area_m2: np.ndarray,
                     feeds: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Stimulated transition rates per ion and per watt of channel power.

    Parameters
    ----------
    overlap : (K, R) fraction of channel k's power in ring j
    sigma_e_m2, sigma_a_m2 : (K,) cross-sections at each channel's wavelength (m²)
    photon_energy_J : (K,) hν of each channel (J)
    ring_area_m2 : (R,) area of each ring (m²)
    feeds : (K,) bool or None; False marks a channel that does not act on the populations (a probe)

    Returns
    -------
    (up, total) : (K, R) arrays in 1/(W·s): absorption rate σa·Γ/(hν·A) and (σa + σe)·Γ/(hν·A)
    """
    flux = overlap / (photon_energy_J[:, None] * ring_area_m2[None, :])
    if feeds is not None:
        flux = flux * np.asarray(feeds, dtype=float)[:, None]
    return sigma_a_m2[:, None] * flux, (sigma_a_m2 + sigma_e_m2)[:, None] * flux


def upper_fraction(power_W: np.ndarray, rate_up: np.ndarray, rate_total: np.ndarray,
                   lifetime_s: float) -> np.ndarray:
    """Steady-state upper-state fraction n2 = N2/Nt of each ring.

    Parameters
    ----------
    power_W : (K,) or (K, Nz) channel powers (W)
    rate_up, rate_total : (K, R) from :func:`transition_rates`
    lifetime_s : upper-state lifetime τ (s)

    Returns
    -------
    (R,) or (R, Nz) array, 0 <= n2 < 1.

    References
    ----------
    Giles & Desurvire, J. Lightwave Technol. 9, 271 (1991), steady state of the two-level system.
    """
    up = np.tensordot(rate_up, power_W, axes=(0, 0))
    total = np.tensordot(rate_total, power_W, axes=(0, 0))
    return up / (1.0 / lifetime_s + total)


def gain_coefficients(n2: np.ndarray, overlap: np.ndarray, sigma_e_m2: np.ndarray,
                      sigma_a_m2: np.ndarray, doping_per_m3: np.ndarray) -> np.ndarray:
    """Gain coefficient g_k = Σ_j Γ_kj·[(σe,k + σa,k)·n2_j − σa,k]·Nt_j of every channel (1/m).

    Parameters
    ----------
    n2 : (R,) or (R, Nz) upper-state fractions
    overlap : (K, R); sigma_e_m2, sigma_a_m2 : (K,) (m²); doping_per_m3 : (R,) ion density Nt_j

    Returns
    -------
    (K,) or (K, Nz) array (1/m), background loss not included.
    """
    weighted = overlap * doping_per_m3[None, :]                       # (K, R)
    inverted = np.tensordot(weighted, n2, axes=(1, 0))                # Σ_j Γ Nt n2
    total = weighted.sum(axis=1)
    shape = (-1,) + (1,) * (np.ndim(n2) - 1)
    return ((sigma_e_m2 + sigma_a_m2).reshape(shape) * inverted
            - (sigma_a_m2 * total).reshape(shape))


def spontaneous_power(n2: np.ndarray, overlap: np.ndarray, sigma_e_m2: np.ndarray,
                      doping_per_m3: np.ndarray, photon_energy_J: np.ndarray,
                      bandwidth_Hz: np.ndarray) -> np.ndarray:
    """Spontaneous emission captured by each channel, s_k = 2·hν_k·Δν_k·σe,k·Σ_j Γ_kj·n2_j·Nt_j (W/m).

    Channels with zero bandwidth (signal, pump) get none.

    References
    ----------
    Giles & Desurvire, J. Lightwave Technol. 9, 271 (1991): the source term of the ASE equations.
    """
    inverted = np.tensordot(overlap * doping_per_m3[None, :], n2, axes=(1, 0))
    shape = (-1,) + (1,) * (np.ndim(n2) - 1)
    return (2.0 * photon_energy_J * bandwidth_Hz * sigma_e_m2).reshape(shape) * inverted


def power_derivative(power_W: np.ndarray, direction: np.ndarray, overlap: np.ndarray,
                     sigma_e_m2: np.ndarray, sigma_a_m2: np.ndarray, photon_energy_J: np.ndarray,
                     bandwidth_Hz: np.ndarray, loss_per_m: np.ndarray, ring_area_m2: np.ndarray,
                     doping_per_m3: np.ndarray, lifetime_s: float,
                     feeds: np.ndarray | None = None) -> np.ndarray:
    """dP_k/dz of every channel at given powers, with the populations in their local steady state.

    Parameters
    ----------
    power_W : (K,) or (K, Nz) powers at one or several positions (W)
    direction : (K,) +1 forward, −1 backward
    overlap : (K, R); sigma_e_m2, sigma_a_m2 : (K,) m²; photon_energy_J : (K,) J
    bandwidth_Hz : (K,) bin width of ASE channels, 0 for signal and pump
    loss_per_m : (K,) background loss (1/m); ring_area_m2 : (R,) m²; doping_per_m3 : (R,)
    lifetime_s : τ (s); feeds : see :func:`transition_rates`

    Returns
    -------
    Array shaped like ``power_W`` (W/m).

    References
    ----------
    Giles & Desurvire, J. Lightwave Technol. 9, 271 (1991), eqs. for dP_k/dz with overlap factors.
    """
    up, total = transition_rates(overlap, sigma_e_m2, sigma_a_m2, photon_energy_J, ring_area_m2, feeds)
    n2 = upper_fraction(power_W, up, total, lifetime_s)
    g = gain_coefficients(n2, overlap, sigma_e_m2, sigma_a_m2, doping_per_m3)
    s = spontaneous_power(n2, overlap, sigma_e_m2, doping_per_m3, photon_energy_J, bandwidth_Hz)
    shape = (-1,) + (1,) * (np.ndim(power_W) - 1)
    return direction.reshape(shape) * ((g - loss_per_m.reshape(shape)) * power_W + s)


def phi1(x: np.ndarray) -> np.ndarray:
    """(eˣ − 1)/x, finite at x = 0 (value 1); x is clipped at 700."""
    x = np.minimum(np.asarray(x, dtype=float), _X_MAX)
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, x)
    return np.where(small, 1.0 + 0.5 * x, np.expm1(safe) / safe)


def phi2(x: np.ndarray) -> np.ndarray:
    """(eˣ − 1 − x)/x², finite at x = 0 (value 1/2); x is clipped at 700."""
    x = np.minimum(np.asarray(x, dtype=float), _X_MAX)
    small = np.abs(x) < 1e-3
    safe = np.where(small, 1.0, x)
    series = 0.5 + x * (1.0 / 6.0 + x * (1.0 / 24.0 + x / 120.0))
    return np.where(small, series, (np.expm1(safe) - safe) / (safe * safe))


def slice_transfer(power_in_W: np.ndarray, growth_per_m: np.ndarray, source_W_m: np.ndarray,
                   length_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact passage through a slice of uniform populations: dP/dζ = a·P + s with a, s constant.

    Parameters
    ----------
    power_in_W : (K, ...) power entering the slice (W)
    growth_per_m : a = g − l (1/m), same shape; source_W_m : s (W/m), same shape
    length_m : slice length h (m)

    Returns
    -------
    (power_out_W, mean_power_W) : the power leaving the slice and its mean over the slice,
    P_out = P_in·eˣ + s·h·φ1(x) and P̄ = P_in·φ1(x) + s·h·φ2(x), x = a·h.
    """
    x = np.minimum(growth_per_m * length_m, _X_MAX)
    small = np.abs(x) < 1e-3
    xs = np.where(small, 1.0, x)
    em1 = np.expm1(xs)
    p1 = np.where(small, 1.0 + x * (0.5 + x * (1.0 / 6.0 + x / 24.0)), em1 / xs)
    p2 = np.where(small, 0.5 + x * (1.0 / 6.0 + x * (1.0 / 24.0 + x / 120.0)), (em1 - xs) / (xs * xs))
    sh = source_W_m * length_m
    return power_in_W * np.exp(x) + sh * p1, power_in_W * p1 + sh * p2


def propagate_frozen(power_in_W: np.ndarray, growth_per_m: np.ndarray, source_W_m: np.ndarray,
                     length_m: float) -> tuple[np.ndarray, np.ndarray]:
    """Channels through a chain of slices whose populations are given (vectorised along the chain).

    Slice i turns P_i into P_{i+1} = P_i·exp(a_i·h) + s_i·h·φ1(a_i·h); the recursion is evaluated in
    the log domain as a cumulative log-sum-exp, so that powers from 1e-300 W up stay exact.

    Parameters
    ----------
    power_in_W : (K,) power entering the first slice met (W, >= 0)
    growth_per_m, source_W_m : (K, Nz) a = g − l (1/m) and s (W/m, >= 0) of each slice, in the
        order the channel meets them
    length_m : slice length h (m)

    Returns
    -------
    (nodes, means) : (K, Nz + 1) powers at the slice boundaries in the order met, (K, Nz) mean power
    in each slice.
    """
    x = np.minimum(growth_per_m * length_m, _X_MAX)
    k, nz = x.shape
    p1 = phi1(x)
    cum = np.concatenate([np.zeros((k, 1)), np.cumsum(x, axis=1)], axis=1)   # ln A_n
    with np.errstate(divide="ignore"):
        terms = np.empty((k, nz + 1))
        terms[:, 0] = np.log(power_in_W)
        terms[:, 1:] = np.log(source_W_m * length_m * p1) - cum[:, 1:]
    acc = np.logaddexp.accumulate(terms, axis=1)
    nodes = np.exp(np.minimum(cum + acc, _X_MAX))
    means = nodes[:, :-1] * p1 + source_W_m * length_m * phi2(x)
    return nodes, means
