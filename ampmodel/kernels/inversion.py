"""Upper-state population over an interval without a signal pulse: pumping and spontaneous decay.

For a constant pump rate R (ions per m³ per s) and upper-state lifetime tau, the rate equation
dN2/dt = R − N2/tau has the exact solution

    N2(t) = N_inf + (N2(0) − N_inf)·exp(−t/tau),    N_inf = R·tau,

and over the interval the pump adds R·t ions and spontaneous decay removes
∫ N2/tau dt = N_inf·t/tau + (N2(0) − N_inf)·(1 − exp(−t/tau)) ions (per m³), so that
N2(t) − N2(0) = pumped − decayed exactly.

An optional cap N2 <= N2_max holds the quasi-three-level bleaching limit at the pump wavelength (the
same cap the gain maps of ``media/gain_maps.py`` use): the trajectory is monotonic, reaches the cap at
t* = tau·ln[(N_inf − N2(0))/(N_inf − N2_max)] and stays there; from then on the pump only replaces
the decays (the rest of it is not absorbed).

The functions are linear in (N2, R), so they apply unchanged to sums and integrals of N2 (a column
∫N2 dz with the column's ∫R dz), provided the cap never acts.

References
----------
Exact solution of the linear rate equation dN/dt = R − N/tau (textbook, e.g. W. Koechner,
Solid-State Laser Engineering, Springer, chapter on pumping and storage efficiency; the same solution
gives the storage efficiency of a square pump pulse, (tau/tp)·(1 − exp(−tp/tau))).
"""
from __future__ import annotations

import numpy as np


def relax_inversion(n2: np.ndarray, rate: np.ndarray | float, lifetime_s: float, duration_s: float,
                    n2_max: np.ndarray | float | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Evolve the upper-state density over ``duration_s`` under a constant pump rate and decay.

    Parameters
    ----------
    n2 : array, upper-state density at the start (ions/m³, or ions/m² for a column integral); not changed
    rate : array or float broadcastable to ``n2``, pump rate (ions/m³/s; ions/m²/s for columns), >= 0
    lifetime_s : upper-state lifetime tau (s), > 0
    duration_s : length of the interval (s), >= 0
    n2_max : optional cap (same unit as ``n2``), e.g. the quasi-three-level bleaching limit; the
        starting density must not exceed it

    Returns
    -------
    n2_end : array, density at the end of the interval
    pumped : array, ions added by the pump over the interval (same unit as ``n2``)
    decayed : array, ions lost by spontaneous decay over the interval (same unit as ``n2``)

    ``n2_end − n2 == pumped − decayed`` to round-off.

    References
    ----------
    Exact solution of dN2/dt = R − N2/tau (see the module docstring).
    """
    n2 = np.asarray(n2, dtype=float)
    rate = np.broadcast_to(np.asarray(rate, dtype=float), n2.shape)
    ratio = duration_s / lifetime_s
    one_minus = -np.expm1(-ratio)                  # 1 − exp(−t/tau), accurate for short intervals
    n_inf = rate * lifetime_s
    n_end = n2 + (n_inf - n2) * one_minus
    pumped = rate * duration_s
    decayed = n_inf * ratio + (n2 - n_inf) * one_minus
    if n2_max is None:
        return n_end, pumped, decayed
    cap = np.broadcast_to(np.asarray(n2_max, dtype=float), n2.shape)
    over = n_end > cap
    if np.any(over):
        n0, r, ni, cp = n2[over], rate[over], n_inf[over], cap[over]
        # time at which the cap is reached (N_inf > cap >= n0 where the end value is above the cap)
        t_star = lifetime_s * np.log1p(np.maximum(cp - n0, 0.0) / (ni - cp))
        p = r * t_star + (cp / lifetime_s) * (duration_s - t_star)
        pumped = pumped.copy()
        decayed = decayed.copy()
        pumped[over] = p
        decayed[over] = p - (cp - n0)
        n_end[over] = cp
    return n_end, pumped, decayed
