"""A doped fibre in steady state (cw): the two-point boundary-value problem of its channels.

Boundary-value problem. Forward channels (signal, forward pump, forward ASE) are given at z = 0,
backward channels (backward pump, backward ASE) at z = L. It is solved by relaxation: a forward
sweep (slice by slice from z = 0, the forward channels propagated while the backward channels'
slice-mean powers are held at their last values, the populations of each slice solved together
with the forward channels passing through it) followed by a backward sweep (the same from z = L),
repeated with Anderson mixing of the iterates until the largest change of any channel's power
(relative to that channel's largest power) and of any population falls below 1e-6; Newton's method
on the discretised equations (newton.py) then finishes to the tolerance (1e-9) and one step
more. A layout without backward channels needs one forward sweep, which is exact. When the sweeps do
not settle, the launched powers are lowered until they do and raised back in stages solved by
Newton's method (see :func:`solve_cw`). The method, the iterations and the last change are reported.

References
----------
C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991): rate and propagation equations.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ampmodel.fibre.model import PROBE_BANDWIDTH_HZ, FibreModel
from ampmodel.fibre.newton import newton
from ampmodel.kernels import fibre_rates as fr

DEFAULT_TOLERANCE = 1e-9


DEFAULT_MAX_ITERATIONS = 60


POLISH_FROM = 1e-6


@dataclass
class CWSolution:
    """The steady state of one fibre.

    power_W : (K, Nz + 1) power of every channel at the slice boundaries z_i = i·h (both directions)
    mean_power_W : (K, Nz) mean power of every channel in each slice
    n2 : (R, Nz) upper-state fraction of each ring in each slice
    iterations : relaxation iterations (forward + backward sweep) done; change : the last change
    method : "relaxation" (a layout without backward channels: one sweep), "relaxation, then Newton"
    (the sweeps to 1e-6, Newton's method to the tolerance), or "relaxation, then Newton continuation"
    when the sweeps alone did not settle (``newton_steps`` Newton steps over ``continuation_stages``
    stages of launched power)
    """

    model: FibreModel
    signal_in_W: float
    power_W: np.ndarray
    mean_power_W: np.ndarray
    n2: np.ndarray
    iterations: int
    change: float
    converged: bool
    tolerance: float
    method: str = "relaxation"
    newton_steps: int = 0
    continuation_stages: int = 0

    @property
    def z_m(self) -> np.ndarray:
        return np.linspace(0.0, self.model.length_m, self.model.slices + 1)


def _sweep(model: FibreModel, swept: np.ndarray, counter: np.ndarray, power: np.ndarray,
           mean: np.ndarray, n2: np.ndarray, forward: bool, inner_tolerance: float = 1e-14) -> int:
    """One relaxation sweep of the channels ``swept`` (all of one direction), in place.

    Slice by slice in their direction of travel, the populations of the slice and the swept channels'
    passage through it are solved together (fixed-point iteration to ``inner_tolerance`` in n2,
    started from the last populations), with the counter-propagating channels' slice-mean powers
    held. Returns the largest number of inner iterations a slice needed.
    """
    h = model.slice_length_m
    inv_tau = 1.0 / model.lifetime_s
    up_c = model.rate_up[counter].T @ mean[counter]            # (R, Nz)
    tot_c = model.rate_total[counter].T @ mean[counter]
    up_s, tot_s = model.rate_up[swept].T, model.rate_total[swept].T     # (R, Ks)
    gw, a0 = model.gain_weight[swept], model.absorption_per_m[swept] + model.loss_per_m[swept]
    sw = model.source_weight[swept]
    worst = 0
    order = range(model.slices) if forward else range(model.slices - 1, -1, -1)
    for j in order:
        p0 = power[swept, j] if forward else power[swept, j + 1]
        x = n2[:, j]
        for inner in range(1, 201):
            p1, pm = fr.slice_transfer(p0, gw @ x - a0, sw @ x, h)
            xn = (up_s @ pm + up_c[:, j]) / (inv_tau + tot_s @ pm + tot_c[:, j])
            step = float(np.max(np.abs(xn - x)))
            if step <= inner_tolerance:
                break
            # an average of old and new damps the rare slice where plain substitution overshoots
            x = xn if inner < 20 else 0.5 * (x + xn)
        worst = max(worst, inner)
        if forward:
            power[swept, j + 1] = p1
        else:
            power[swept, j] = p1
        mean[swept, j] = pm
        n2[:, j] = x
    return worst


def _change(new: np.ndarray, old: np.ndarray) -> float:
    """Largest change of each channel's powers relative to that channel's largest power."""
    scale = np.max(np.abs(new), axis=1)
    diff = np.max(np.abs(new - old), axis=1)
    ok = scale > 0
    return float(np.max(diff[ok] / scale[ok])) if ok.any() else 0.0


def anderson_step(ys: list[np.ndarray], gs: list[np.ndarray]) -> np.ndarray:
    """The next iterate of Anderson mixing (type II, full step) from the last iterates y_i and their
    images g_i = S(y_i): y = g_k − Σ γ_i·(g_{i+1} − g_i), γ minimising |f_k − Σ γ_i·(f_{i+1} − f_i)|,
    f = g − y (D. G. Anderson, J. ACM 12, 547 (1965); H. F. Walker, P. Ni, SIAM J. Numer. Anal. 49,
    1715 (2011))."""
    f = [g - y for y, g in zip(ys, gs, strict=True)]
    if len(f) < 2:
        return gs[-1]
    df = np.stack([b - a for a, b in zip(f[:-1], f[1:], strict=True)], axis=1)
    dg = np.stack([b - a for a, b in zip(gs[:-1], gs[1:], strict=True)], axis=1)
    if not (np.all(np.isfinite(df)) and np.all(np.isfinite(f[-1]))):
        return gs[-1]                       # a non-finite difference: the plain step
    try:
        gamma = np.linalg.lstsq(df, f[-1], rcond=1e-12)[0]
    except np.linalg.LinAlgError:           # the least-squares solve failed: the plain step
        return gs[-1]
    step = gs[-1] - dg @ gamma
    return step if np.all(np.isfinite(step)) else gs[-1]


def solve_cw(model: FibreModel, signal_power_W: float, tolerance: float = DEFAULT_TOLERANCE,
             max_iterations: int = DEFAULT_MAX_ITERATIONS,
             tick: Callable[[], None] | None = None) -> CWSolution:
    """Solve the steady state of a fibre: relaxation, with Newton continuation when it does not settle.

    One relaxation iteration is a forward sweep followed by a backward sweep; it maps the backward
    channels' slice-mean powers onto new ones, and the iterations are accelerated by Anderson mixing
    of the last eight iterates (in the logarithm of the powers). When they have not settled after
    ``max_iterations`` (a strongly absorbed, saturated pump running against a strongly amplified
    signal makes plain relaxation swing between two states), the launched powers are scaled down until
    relaxation settles, then raised back in stages, each solved by Newton's method on the discretised
    equations (newton.py) from the stage before.

    Parameters
    ----------
    model : from :func:`build_model`
    signal_power_W : signal power launched at z = 0 (W)
    tolerance : relaxation: stop when the largest change between an iteration's start and end
        (relative to each channel's largest power; absolute for the populations) is below this;
        Newton: the largest residual of the discretised equations, on the same scales
    max_iterations : relaxation iterations before switching to Newton continuation
    tick : called after every iteration (progress)

    Returns
    -------
    CWSolution
    """
    launch = model.launch_W.copy()
    launch[model.signal] = signal_power_W
    sol = _relax(model, launch, max(tolerance, POLISH_FROM), max_iterations, tick)
    if sol.converged and sol.change <= tolerance:
        return sol
    if sol.converged:             # Newton's method finishes from here (quadratic convergence)
        power, n2, steps, err = newton(model, launch, sol.power_W, sol.n2, tolerance)
        if err < tolerance:
            return CWSolution(model=model, signal_in_W=float(signal_power_W), power_W=power,
                              mean_power_W=_slice_means(model, power, n2), n2=n2, iterations=sol.iterations,
                              change=float(err), converged=True, tolerance=tolerance,
                              method="relaxation, then Newton", newton_steps=steps)
        sol = _relax(model, launch, tolerance, max_iterations, tick)
        if sol.converged:
            return sol
    iterations = sol.iterations
    scale, stage = 1.0, None
    while scale > 1e-6:                           # a launch weak enough for the sweeps to settle
        scale *= 0.1
        stage = _relax(model, launch * scale, tolerance, 60, tick)
        iterations += stage.iterations
        if stage.converged:
            break
    power, n2 = stage.power_W, stage.n2
    steps, stages, factor, err = 0, 0, 3.0, np.inf
    while True:
        target = min(1.0, scale * factor)
        last = target == 1.0
        p_try, n_try, taken, err = newton(model, launch * target, power * (target / scale), n2,
                                          tolerance if last else max(tolerance, 1e-7))
        steps += taken
        stages += 1
        if tick is not None:
            tick()
        if err < (tolerance if last else max(tolerance, 1e-7)):
            power, n2, scale = p_try, n_try, target
            if last:
                break
            factor = min(factor * 2.0, 30.0)
        else:
            factor = factor ** 0.5
            if factor < 1.02:
                break
    converged = scale == 1.0 and err < tolerance
    mean = _slice_means(model, power, n2)
    return CWSolution(model=model, signal_in_W=float(signal_power_W), power_W=power, mean_power_W=mean,
                      n2=n2, iterations=iterations, change=float(err), converged=converged, tolerance=tolerance,
                      method="relaxation, then Newton continuation", newton_steps=steps,
                      continuation_stages=stages)


def _slice_means(model: FibreModel, power: np.ndarray, n2: np.ndarray) -> np.ndarray:
    """(K, Nz) slice-mean powers for node powers and populations (the exact passage of each slice)."""
    h = model.slice_length_m
    entry = np.where(model.direction[:, None] > 0, power[:, :-1], power[:, 1:])
    return fr.slice_transfer(entry, model.growth(n2), model.source(n2), h)[1]


def _relax(model: FibreModel, launch: np.ndarray, tolerance: float, max_iterations: int,
           tick: Callable[[], None] | None) -> CWSolution:
    """Relaxation sweeps with Anderson mixing (see :func:`solve_cw`)."""
    k, nz, r = model.wavelength_m.size, model.slices, model.rings
    signal_in = float(launch[model.signal])
    fwd = np.flatnonzero(model.direction > 0)
    bwd = np.flatnonzero(model.direction < 0)
    power = np.zeros((k, nz + 1))
    mean = np.zeros((k, nz))
    n2 = np.zeros((r, nz))
    power[fwd, 0] = launch[fwd]
    power[bwd, nz] = launch[bwd]
    if not bwd.size:
        _sweep(model, fwd, bwd, power, mean, n2, forward=True)
        if tick is not None:
            tick()
        return CWSolution(model=model, signal_in_W=signal_in, power_W=power, mean_power_W=mean,
                          n2=n2, iterations=1, change=0.0, converged=True, tolerance=tolerance)
    # start: the backward channels through the unpumped fibre (n2 = 0)
    absorb = -(model.absorption_per_m[bwd] + model.loss_per_m[bwd])
    _, means = fr.propagate_frozen(launch[bwd], np.repeat(absorb[:, None], nz, axis=1),
                                   np.zeros((bwd.size, nz)), model.slice_length_m)
    mean[bwd] = means[:, ::-1]
    floor = 1e-300
    ceiling = np.log(1e3 * max(float(launch.sum()), 1e-30))
    y = np.log(np.maximum(mean[bwd], floor))
    ys: list[np.ndarray] = []
    gs: list[np.ndarray] = []
    change, iterations, best = np.inf, 0, np.inf
    best_at: dict[int, float] = {}
    last_power, last_n2 = power.copy(), n2.copy()
    for iterations in range(1, max_iterations + 1):
        mean[bwd] = np.exp(y)
        start_means = mean[bwd].copy()
        inner = min(1e-8, max(1e-14, 1e-5 * change))
        _sweep(model, fwd, bwd, power, mean, n2, forward=True, inner_tolerance=inner)
        _sweep(model, bwd, fwd, power, mean, n2, forward=False, inner_tolerance=inner)
        g = np.log(np.maximum(mean[bwd], floor))
        change = max(_change(mean[bwd], start_means), _change(power, last_power),
                     float(np.max(np.abs(n2 - last_n2))))
        last_power, last_n2 = power.copy(), n2.copy()
        if tick is not None:
            tick()
        if change < tolerance:
            break
        if iterations >= 20 and (change > 1e-2 or change > 0.5 * best_at.get(iterations - 10, np.inf)):
            break                        # not settling: leave it to the Newton continuation
        best_at[iterations] = min(best, change)
        if change > 100 * best:          # extrapolation went astray: restart the mixing from here
            ys, gs = [], []
        best = min(best, change)
        ys.append(y.ravel())
        gs.append(g.ravel())
        ys, gs = ys[-8:], gs[-8:]
        y = np.minimum(anderson_step(ys, gs), ceiling).reshape(g.shape)
    return CWSolution(model=model, signal_in_W=signal_in, power_W=power, mean_power_W=mean,
                      n2=n2, iterations=iterations, change=change, converged=change < tolerance,
                      tolerance=tolerance)


def output_figures(sol: CWSolution) -> dict[str, float]:
    """The summary figures of one fibre's steady state (SI, units in the names).

    ``noise_figure``: NF = (1 + S_ASE/(hν))/G, with S_ASE the forward spontaneous-emission spectral
    density (both polarisations, W/Hz) that reaches the output at the signal frequency, carried by
    the noise probe. For a uniform inversion this is NF = (1 + 2·n_sp·(G − 1))/G, n_sp =
    σe·N2/(σe·N2 − σa·N1) (E. Desurvire, Erbium-Doped Fiber Amplifiers: Principles and
    Applications, Wiley (1994), ch. 2, from memory — verify).
    """
    m, p = sol.model, sol.power_W
    s_out = float(p[m.signal, -1])
    gain = s_out / sol.signal_in_W if sol.signal_in_W > 0 else np.exp(np.sum(m.growth(sol.n2, [m.signal])) *
                                                                         m.slice_length_m)
    gain = float(gain)
    pump_in = pump_out = 0.0
    if m.pump_forward is not None:
        pump_in += float(p[m.pump_forward, 0])
        pump_out += float(p[m.pump_forward, -1])
    if m.pump_backward is not None:
        pump_in += float(p[m.pump_backward, -1])
        pump_out += float(p[m.pump_backward, 0])
    probe_density = float(p[m.probe, -1]) / PROBE_BANDWIDTH_HZ
    nf = (1.0 + probe_density / m.photon_energy_J[m.probe]) / gain if gain > 0 else float("inf")
    return {
        "signal_in_W": sol.signal_in_W,
        "signal_out_W": s_out,
        "gain": gain,
        "gain_dB": 10 * np.log10(gain) if gain > 0 else None,
        "pump_in_W": pump_in,
        "pump_out_W": pump_out,
        "pump_absorbed_W": pump_in - pump_out,
        "ase_forward_W": float(p[m.ase_forward, -1].sum()),
        "ase_backward_W": float(p[m.ase_backward, 0].sum()),
        "noise_figure": nf,
        "noise_figure_dB": 10 * np.log10(nf),
        "photon_balance_error": photon_balance(sol)["relative_error"],
    }


def photon_balance(sol: CWSolution) -> dict[str, float]:
    """Photon bookkeeping of a steady state (photons per second).

    absorbed pump photons = signal photons added + ASE photons leaving both ends
                            − spontaneous photons emitted into the ASE bins
                            + spontaneous decays ∫ Σ_j A_j·Nt_j·n2_j/τ dz + photons lost to background loss

    (the ASE bins' spontaneous source is part of the decays N2/τ, so it is taken off once). The noise
    probe does not act on the ions and is left out. ``relative_error`` is the imbalance divided by the
    absorbed pump photons.
    """
    m = sol.model
    h = m.slice_length_m
    q = m.photon_energy_J
    feeds = np.flatnonzero(m.feeds)
    entry = np.where(m.direction > 0, 0, -1)
    leave = np.where(m.direction > 0, -1, 0)
    flow_in = sol.power_W[feeds, entry[feeds]] / q[feeds]
    flow_out = sol.power_W[feeds, leave[feeds]] / q[feeds]
    decays = float(h * np.sum((m.ring_area_m2 * m.doping_per_m3)[:, None] * sol.n2) / m.lifetime_s)
    spont = float(h * np.sum(m.source(sol.n2, feeds) / q[feeds, None]))
    lost = float(h * np.sum(m.loss_per_m[feeds, None] * sol.mean_power_W[feeds] / q[feeds, None]))
    net_in = float(np.sum(flow_in) - np.sum(flow_out))          # photons the fibre kept
    residual = net_in - (decays - spont + lost)
    pumps = [i for i in (m.pump_forward, m.pump_backward) if i is not None]
    absorbed = sum(float((sol.power_W[i, entry[i]] - sol.power_W[i, leave[i]]) / q[i]) for i in pumps)
    scale = max(abs(absorbed), decays, 1e-300)
    return {"absorbed_pump": absorbed, "decays": decays, "spontaneous_into_bins": spont,
            "background_loss": lost, "residual": residual, "relative_error": residual / scale}


def ase_spectra(sol: CWSolution) -> dict[str, np.ndarray]:
    """ASE spectra leaving the fibre: bin centres (m), bin widths (m), forward (at z = L) and backward
    (at z = 0) power per bin (W)."""
    m = sol.model
    edges = m.ase_bin_edges_m
    return {"wavelength_m": 0.5 * (edges[1:] + edges[:-1]), "bin_width_m": np.diff(edges),
            "forward_W": sol.power_W[m.ase_forward, -1], "backward_W": sol.power_W[m.ase_backward, 0]}
