"""Pulses in a doped fibre: Frantz–Nodvik slices, and the inversion between pulses at a repetition rate.

A pulse is much shorter than the upper-state lifetime and than the time between pulses, so neither
the pump nor spontaneous emission acts during it. It crosses the fibre slice by slice; in each slice
and each ring j of the core it meets the gain ln G_j = h·Γ_j·[(σe + σa)·n2_j − σa]·Nt and the
saturation energy

    E_sat,j = hν·A_j/(Γ_j·(σe + σa))        (one ring: E_sat = hν·A/(Γ·(σe + σa))),

and is amplified by the Frantz–Nodvik map (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346
(1963)) applied to its cumulative energy, which gives every time slice of the pulse at once:
U_out(t) = E_sat·ln[1 + G·(exp(U_in(t)/E_sat) − 1)]. The rings of a slice act one after the other
(exact for one ring; for several rings the order within one thin slice matters at second order in
its length). Background loss is split symmetrically around the gain step, as in the bulk solver.
These maps compose exactly in time, so the output energy and the inversion left behind do not depend
on the number of time slices; the time slices give the pulse shape, its peak power and the B-integral.

Between pulses the pump (and, with ``ase``, the spontaneous emission and ASE in both directions)
rebuilds the inversion. The powers follow the populations instantly (the light crosses the fibre in
nanoseconds); each time step propagates them through the populations at the step's middle and moves
every population by the exact solution of dn2/dt = W_up − (1/τ + W_up + W_down)·n2 for those rates
(a second-order midpoint step). At a repetition rate the inversion profile just before a pulse is the
fixed point of "amplify one pulse, then recover for one period"; it is found by Anderson-accelerated
iteration over periods, started from the steady state with the mean signal power (energy x rate).
Without a repetition rate the single pulse meets the fibre in its pumped steady state.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ampmodel.fibre.model import FibreModel
from ampmodel.fibre.steady_state import anderson_step, output_figures, solve_cw
from ampmodel.kernels import fibre_rates as fr
from ampmodel.kernels.fibre_modes import effective_area
from ampmodel.kernels.fn_pass import log_mean
from ampmodel.kernels.frantz_nodvik import fn_total


@dataclass
class PulseResult:
    """One pulse through one fibre.

    energy_out_J : (Nt,) energy in each time slice leaving the fibre
    energy_z_J : (Nz + 1,) pulse energy at each slice boundary
    n2_after : (R, Nz) populations the pulse leaves
    b_integral_rad : (Nt,) nonlinear phase k0·n2·∫P/A_eff dz of each time slice
    extracted_J : energy the pulse took from the ions; loss_J : energy lost to background loss
    """

    energy_out_J: np.ndarray
    energy_z_J: np.ndarray
    n2_after: np.ndarray
    b_integral_rad: np.ndarray
    extracted_J: float
    loss_J: float


def amplify_pulse(model: FibreModel, n2_before: np.ndarray, energy_J: np.ndarray,
                  dt_s: float | None = None, n2_index_m2_W: float = 0.0) -> PulseResult:
    """Amplify one pulse (time slices ``energy_J``) through the fibre whose populations are ``n2_before``.

    Parameters
    ----------
    model : the fibre (its signal channel carries the pulse)
    n2_before : (R, Nz) upper-state fractions before the pulse
    energy_J : (Nt,) energy of each time slice of the pulse, in time order (J)
    dt_s : time-slice length (s), for the B-integral (None: no B-integral)
    n2_index_m2_W : nonlinear refractive index n2 (m²/W)

    References
    ----------
    Frantz & Nodvik, J. Appl. Phys. 34, 2346 (1963); B = (2π/λ)·n2·∫P/A_eff dz, A_eff = π·w² (G. P.
    Agrawal, Nonlinear Fiber Optics, ch. 2 and 4).
    """
    m, s = model, model.signal
    h = m.slice_length_m
    e = np.array(energy_J, dtype=float)
    n2 = n2_before.copy()
    sig = m.sigma_e_m2[s] + m.sigma_a_m2[s]
    coef = h * m.overlap[s] * sig * m.doping_per_m3                     # d lnG / d n2, per ring
    base = h * m.overlap[s] * m.sigma_a_m2[s] * m.doping_per_m3
    esat = m.saturation_energy_J(s)
    ions = m.photon_energy_J[s] * m.ring_area_m2 * m.doping_per_m3 * h   # J per unit n2 in one slice
    rings = [r for r in range(m.rings) if m.overlap[s, r] > 0]
    half = math.exp(-0.5 * m.loss_per_m[s] * h)
    b_coef = 0.0
    if dt_s is not None and n2_index_m2_W > 0:
        b_coef = 2 * math.pi / m.wavelength_m[s] * n2_index_m2_W * h / (effective_area(m.mode_radius_m) * dt_s)
    b = np.zeros_like(e)
    nodes = np.empty(m.slices + 1)
    nodes[0] = e.sum()
    lost = 0.0
    for j in range(m.slices):
        entering = e
        if half != 1.0:
            lost += float(e.sum()) * (1 - half)
            e = e * half
        for r in rings:
            u_in = np.cumsum(e)
            u_out = fn_total(u_in, coef[r] * n2[r, j] - base[r], esat[r])
            e = np.diff(u_out, prepend=0.0)
            n2[r, j] -= (u_out[-1] - u_in[-1]) / ions[r]
        if half != 1.0:
            lost += float(e.sum()) * (1 - half)
            e = e * half
        if b_coef:
            b += b_coef * log_mean(entering, e)
        nodes[j + 1] = e.sum()
    extracted = float(np.sum(ions[:, None] * (n2_before - n2)))
    return PulseResult(energy_out_J=e, energy_z_J=nodes, n2_after=n2, b_integral_rad=b, extracted_J=extracted,
                       loss_J=lost)


def pump_ase_channels(model: FibreModel) -> np.ndarray:
    return np.array([k for k in range(len(model.labels)) if k not in (model.signal, model.probe)], dtype=int)


def between_pulse_powers(model: FibreModel, n2: np.ndarray, ch: np.ndarray):
    """Nodes (Kc, Nz + 1) and slice means (Kc, Nz) of the pump and ASE channels for populations n2
    (indexed by position z for both directions)."""
    h = model.slice_length_m
    a, s = model.growth(n2, ch), model.source(n2, ch)
    nodes = np.zeros((ch.size, model.slices + 1))
    means = np.zeros((ch.size, model.slices))
    fwd = model.direction[ch] > 0
    if fwd.any():
        nodes[fwd], means[fwd] = fr.propagate_frozen(model.launch_W[ch[fwd]], a[fwd], s[fwd], h)
    if (~fwd).any():
        nb, mb = fr.propagate_frozen(model.launch_W[ch[~fwd]], a[~fwd][:, ::-1], s[~fwd][:, ::-1], h)
        nodes[~fwd], means[~fwd] = nb[:, ::-1], mb[:, ::-1]
    return nodes, means


@dataclass
class Recovery:
    """The fibre between two pulses (period averages in W; populations at the end; a trace in time)."""

    n2_end: np.ndarray
    pump_out_W: float
    ase_forward_W: float
    ase_backward_W: float
    pump_absorbed_W: float
    t_s: np.ndarray
    mean_n2: np.ndarray
    steps: int


def recover(model: FibreModel, n2_start: np.ndarray, period_s: float, steps: int) -> Recovery:
    """Let the pump (and ASE) rebuild the inversion for ``period_s`` after a pulse, in ``steps`` steps."""
    m = model
    ch = pump_ase_channels(m)
    inv_tau = 1.0 / m.lifetime_s
    up, tot = m.rate_up[ch].T, m.rate_total[ch].T              # (R, Kc)
    fwd = m.direction[ch] > 0
    out_end = np.where(fwd, -1, 0)
    is_pump = np.array([m.labels[k].startswith("pump") for k in ch], dtype=bool)
    is_ase_f = np.isin(ch, m.ase_forward)
    is_ase_b = np.isin(ch, m.ase_backward)
    dt = period_s / steps
    n2 = n2_start.copy()
    sums = np.zeros(4)
    trace = [float(n2.mean())]

    def settle(n2_from, means, tau_step):
        w_up, w_tot = up @ means, tot @ means
        rate = inv_tau + w_tot
        target = w_up / rate
        return target + (n2_from - target) * np.exp(-rate * tau_step)

    for _ in range(steps):
        _, means = between_pulse_powers(m, n2, ch)
        mid = settle(n2, means, 0.5 * dt)
        nodes, means = between_pulse_powers(m, mid, ch)
        n2 = settle(n2, means, dt)
        leaving = nodes[np.arange(ch.size), out_end]
        entering = m.launch_W[ch]
        sums += dt * np.array([leaving[is_pump].sum(), leaving[is_ase_f].sum(), leaving[is_ase_b].sum(),
                               (entering - leaving)[is_pump].sum()])
        trace.append(float(n2.mean()))
    avg = sums / period_s
    return Recovery(n2_end=n2, pump_out_W=avg[0], ase_forward_W=avg[1], ase_backward_W=avg[2],
                    pump_absorbed_W=avg[3], t_s=np.linspace(0.0, period_s, steps + 1), mean_n2=np.array(trace),
                    steps=steps)


def recovery_steps(model: FibreModel, n2: np.ndarray, period_s: float) -> int:
    """Time steps for one period: at least 8, and at least sixteen per shortest population time
    constant 1/(1/τ + W_up + W_down) met in the fibre, at most 20000 (the midpoint steps are second
    order: sixteen per time constant keep the pulse energy within about 1e-4 of the converged value)."""
    ch = pump_ase_channels(model)
    _, means = between_pulse_powers(model, n2, ch)
    fastest = float(np.max(1.0 / model.lifetime_s + model.rate_total[ch].T @ means))
    return int(min(20000, max(8, math.ceil(16 * period_s * fastest))))


@dataclass(frozen=True)
class PeriodFigures:
    """The pump and the ASE averaged over the period between pulses (W)."""

    pump_out_W: float
    ase_forward_W: float
    ase_backward_W: float
    pump_absorbed_W: float


@dataclass
class PulseTrainSolution:
    """A pulse train (or single pulse) through one fibre in its periodic steady state.

    n2_before, n2_after : (R, Nz) populations just before and just after a pulse
    pulse : the pulse's passage (time-resolved); energy_in_J : (Nt,) input time slices
    recovery : the period between pulses (None for a single pulse)
    periods : fixed-point iterations (each one period simulated); residual : largest population change
    of the last one; converged : residual below the tolerance
    between : the pump and ASE averaged over the period between pulses
    """

    model: FibreModel
    repetition_rate_Hz: float | None
    energy_in_J: np.ndarray
    dt_s: float
    n2_before: np.ndarray
    n2_after: np.ndarray
    pulse: PulseResult
    recovery: Recovery | None
    periods: int
    residual: float
    converged: bool
    tolerance: float
    between: PeriodFigures


def solve_pulse_train(model: FibreModel, energy_J: np.ndarray, dt_s: float, repetition_rate_Hz: float | None,
                      n2_index_m2_W: float = 0.0, tolerance: float = 1e-9, max_periods: int = 300,
                      tick=None) -> PulseTrainSolution:
    """The pulse train's periodic steady state and one pulse through it.

    Parameters
    ----------
    model : the fibre
    energy_J : (Nt,) energy of each time slice of one input pulse (J)
    dt_s : time-slice length (s)
    repetition_rate_Hz : pulses per second; None: a single pulse into the pumped steady state
    n2_index_m2_W : nonlinear index for the B-integral
    tolerance : largest change of any population over one period at the fixed point
    max_periods : give up (``converged`` False) after this many periods
    tick : called after every period (progress)
    """
    total = float(np.sum(energy_J))
    if repetition_rate_Hz is None:
        cw = solve_cw(model, 0.0)
        x = cw.n2
        fig = output_figures(cw)
        between = PeriodFigures(fig["pump_out_W"], fig["ase_forward_W"], fig["ase_backward_W"],
                                fig["pump_absorbed_W"])
        pulse = amplify_pulse(model, x, energy_J, dt_s, n2_index_m2_W)
        return PulseTrainSolution(model=model, repetition_rate_Hz=None, energy_in_J=np.asarray(energy_J),
                                  dt_s=dt_s, n2_before=x, n2_after=pulse.n2_after, pulse=pulse, recovery=None,
                                  periods=0, residual=cw.change, converged=cw.converged, tolerance=tolerance,
                                  between=between)
    period = 1.0 / repetition_rate_Hz
    start = solve_cw(model, total * repetition_rate_Hz)
    x = start.n2
    steps = recovery_steps(model, x, period)
    shape = x.shape
    ys, gs = [], []
    residual, periods, rec = np.inf, 0, None
    while periods < max_periods:
        periods += 1
        after = amplify_pulse(model, x, np.array([total])).n2_after
        rec = recover(model, after, period, steps)
        g = rec.n2_end
        residual = float(np.max(np.abs(g - x)))
        if tick is not None:
            tick()
        if residual < tolerance:
            break
        ys.append(x.ravel())
        gs.append(g.ravel())
        ys, gs = ys[-8:], gs[-8:]
        x = np.clip(anderson_step(ys, gs), 0.0, 1.0).reshape(shape)
    pulse = amplify_pulse(model, x, energy_J, dt_s, n2_index_m2_W)
    between = PeriodFigures(rec.pump_out_W, rec.ase_forward_W, rec.ase_backward_W, rec.pump_absorbed_W)
    return PulseTrainSolution(model=model, repetition_rate_Hz=repetition_rate_Hz, energy_in_J=np.asarray(energy_J),
                              dt_s=dt_s, n2_before=x, n2_after=pulse.n2_after, pulse=pulse, recovery=rec,
                              periods=periods, residual=residual, converged=residual < tolerance,
                              tolerance=tolerance, between=between)
