"""Newton's method on the fibre's discretised boundary-value problem (the finisher of the relaxation).

The unknowns are every channel's power at every slice boundary, P (K, Nz + 1), and every ring's
upper-state fraction in every slice, n2 (R, Nz). The equations are those the relaxation sweeps solve
one slice at a time (steady_state.py): for each channel and slice, the exact passage through the slice,

    P_leave − (P_enter·exp(x) + s·h·φ1(x)) = 0,      x = (g − l)·h,

the launched powers at each channel's entry end, and for each slice the steady-state populations set
by the slice-mean powers, n2·(1/τ + Σ_k (σa + σe)·Γ·P̄_k/(hν·A)) − Σ_k σa·Γ·P̄_k/(hν·A) = 0. The
Jacobian is sparse (each slice couples its two boundaries and its own populations) and is factorised
with scipy.sparse.linalg.splu; each Newton step is damped by backtracking until the scaled residual
falls. The converged state is the same discrete solution the relaxation converges to.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from ampmodel.kernels import fibre_rates as fr


def _dphi2(x: np.ndarray) -> np.ndarray:
    """dφ2/dx = (φ1 − 2·φ2)/x, by its series near 0."""
    x = np.minimum(np.asarray(x, dtype=float), 700.0)
    small = np.abs(x) < 1e-2
    safe = np.where(small, 1.0, x)
    series = 1 / 6 + x * (1 / 12 + x * (1 / 40 + x * (1 / 180 + x / 1008)))
    return np.where(small, series, (fr.phi1(safe) - 2 * fr.phi2(safe)) / safe)


class DiscreteProblem:
    """The residual and Jacobian of the discretised fibre equations for one model and launch."""

    def __init__(self, model, launch_W: np.ndarray):
        self.m = model
        self.launch = launch_W
        k, nz, r = model.wavelength_m.size, model.slices, model.rings
        self.k, self.nz, self.r = k, nz, r
        self.n_power = k * (nz + 1)
        self.size = self.n_power + r * nz
        fwd = model.direction > 0
        j = np.arange(nz)
        # entry and exit node of channel k in slice j
        self.enter = np.where(fwd[:, None], j[None, :], j[None, :] + 1)
        self.leave = np.where(fwd[:, None], j[None, :] + 1, j[None, :])
        self.boundary = np.where(fwd, 0, nz)

    def split(self, u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return u[: self.n_power].reshape(self.k, self.nz + 1), u[self.n_power:].reshape(self.r, self.nz)

    def join(self, power: np.ndarray, n2: np.ndarray) -> np.ndarray:
        return np.concatenate([power.ravel(), n2.ravel()])

    def _parts(self, power, n2):
        m, h = self.m, self.m.slice_length_m
        rows = np.arange(self.k)[:, None]
        pe = power[rows, self.enter]                                   # (K, Nz)
        pl = power[rows, self.leave]
        a = m.growth(n2)                                               # (K, Nz)
        s = m.source(n2)
        x = np.minimum(a * h, 700.0)
        e = np.exp(x)
        p1, p2 = fr.phi1(x), fr.phi2(x)
        mean = pe * p1 + s * h * p2
        return pe, pl, s, x, e, p1, p2, mean

    def residual(self, u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(residual, scale): the equations in the order transfer (K·Nz), launch (K), populations (R·Nz),
        and the scale that makes each a relative error (channel: its largest power; populations:
        their total rate)."""
        m, h = self.m, self.m.slice_length_m
        power, n2 = self.split(u)
        pe, pl, s, x, e, p1, p2, mean = self._parts(power, n2)
        transfer = pl - (pe * e + s * h * p1)
        launch = power[np.arange(self.k), self.boundary] - self.launch
        total = 1.0 / m.lifetime_s + m.rate_total.T @ mean              # (R, Nz)
        up = m.rate_up.T @ mean
        pops = n2 * total - up
        pscale = np.maximum(np.max(np.abs(power), axis=1), 1e-30)
        scale = np.concatenate([np.repeat(pscale, self.nz), pscale, total.ravel()])
        return np.concatenate([transfer.ravel(), launch, pops.ravel()]), scale

    def jacobian(self, u: np.ndarray) -> sp.csc_matrix:
        m, h = self.m, self.m.slice_length_m
        k, nz, r = self.k, self.nz, self.r
        power, n2 = self.split(u)
        pe, pl, s, x, e, p1, p2, mean = self._parts(power, n2)
        d1 = p1 - p2                          # dφ1/dx
        d2 = _dphi2(x)                        # dφ2/dx
        gw, sw = m.gain_weight, m.source_weight          # (K, R)
        chan = np.arange(k)[:, None] * np.ones((1, nz), dtype=int)
        slc = np.ones((k, 1), dtype=int) * np.arange(nz)[None, :]
        row_t = (chan * nz + slc)                                       # transfer equation index
        col_leave = chan * (nz + 1) + self.leave
        col_enter = chan * (nz + 1) + self.enter
        rows, cols, vals = [row_t.ravel(), row_t.ravel()], [col_leave.ravel(), col_enter.ravel()], \
            [np.ones(k * nz), (-e).ravel()]
        # d transfer / d n2[q, j]
        for q in range(r):
            dval = -(pe * e * h * gw[:, q, None] + h * sw[:, q, None] * p1 + s * h * d1 * h * gw[:, q, None])
            rows.append(row_t.ravel())
            cols.append((self.n_power + q * nz + slc).ravel())
            vals.append(dval.ravel())
        # launch equations
        base = k * nz
        rows.append(base + np.arange(k))
        cols.append(np.arange(k) * (nz + 1) + self.boundary)
        vals.append(np.ones(k))
        # population equations: Q[q, j] = n2[q, j]·(1/τ + Σ tot·mean) − Σ up·mean
        base = k * nz + k
        total = 1.0 / m.lifetime_s + m.rate_total.T @ mean
        coef = n2[:, None, :] * m.rate_total.T[:, :, None] - m.rate_up.T[:, :, None]     # (R, K, Nz)
        dmean_dpe = p1                                                                    # (K, Nz)
        for q in range(r):
            row_q = base + q * nz + np.arange(nz)
            # d/d P_enter of each channel
            rows.append(np.repeat(row_q[None, :], k, axis=0).ravel())
            cols.append(col_enter.ravel())
            vals.append((coef[q] * dmean_dpe).ravel())
            for q2 in range(r):
                dmean = pe * d1 * h * gw[:, q2, None] + h * sw[:, q2, None] * p2 + s * h * d2 * h * gw[:, q2, None]
                v = np.sum(coef[q] * dmean, axis=0)
                if q2 == q:
                    v = v + total[q]
                rows.append(row_q)
                cols.append(self.n_power + q2 * nz + np.arange(nz))
                vals.append(v)
        return sp.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                             shape=(self.size, self.size))


def newton(model, launch_W: np.ndarray, power: np.ndarray, n2: np.ndarray, tolerance: float,
           max_iterations: int = 60) -> tuple[np.ndarray, np.ndarray, int, float]:
    """Solve the discretised equations by damped Newton steps from (power, n2).

    Returns
    -------
    (power, n2, iterations, error) : the solution, the Newton steps taken and the largest scaled
    residual left (relative to each channel's largest power; n2 units for the populations).
    """
    prob = DiscreteProblem(model, launch_W)
    u = prob.join(power, n2)
    res, scale = prob.residual(u)
    err = float(np.max(np.abs(res) / scale))
    merit = float(np.sum((res / scale) ** 2))
    steps, extra = 0, 1            # one step more once within the tolerance: it costs little and
    while steps < max_iterations:  # leaves the residual at round-off (quadratic convergence)
        if err < tolerance:
            if extra == 0:
                break
            extra -= 1
        try:
            step = splu(prob.jacobian(u)).solve(-res)
        except RuntimeError:          # singular: no Newton step from here
            break
        t = 1.0
        for _ in range(30):
            trial = u + t * step
            p, q = prob.split(trial)
            np.clip(p, 0.0, None, out=p)
            np.clip(q, 0.0, 1.0, out=q)
            r2, s2 = prob.residual(trial)
            m2 = float(np.sum((r2 / s2) ** 2))
            if np.isfinite(m2) and m2 < merit:
                break
            t *= 0.5
        else:
            break
        u, res, scale, merit = trial, r2, s2, m2
        err = float(np.max(np.abs(res) / scale))
        steps += 1
    power, n2 = prob.split(u)
    return power.copy(), n2.copy(), steps, err
