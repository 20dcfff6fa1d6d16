"""Orchestration of a layout of doped fibres: description -> each fibre's solution in step order -> Result.

The steps are passes through fibres and lumped losses between them. The signal goes from stage to
stage; the ASE does not (an isolator and a band-pass filter between stages are assumed), and each
fibre's backward ASE and residual pump leave it at its own ends. CW: each fibre's steady state for the
signal power reaching it (steady_state.py). Pulsed: each fibre's pulse-train steady state for the pulse
reaching it (pulsed.py).

The transverse maps of the Result are the fibre's Gaussian mode (Marcuse's
mode-field radius at the signal wavelength) on the grid, normalised so that they hold the power (cw)
or energy (pulsed) exactly; a medium's gain maps are the local gain coefficient at the signal,
g = σe·N2 − σa·N1, of the ring each pixel of the core lies in (zero outside the doped core).
"""
from __future__ import annotations

import numpy as np

from ampmodel.config.checks import ConfigError
from ampmodel.description import Config, Medium
from ampmodel.fibre import model as F
from ampmodel.fibre import pulsed as FP
from ampmodel.fibre import steady_state
from ampmodel.fibre.diagnostics import FibreStage, summarise_fibre
from ampmodel.kernels import beam_shapes
from ampmodel.output.result import FibreRecord, MediumRecord, Result, StepRecord
from ampmodel.progress import progress_bar


def mode_map(x_m: np.ndarray, mode_radius_m: float) -> np.ndarray:
    """(Ny, Nx) Gaussian mode exp(−2r²/w²), normalised so that its sum times the pixel area is 1 (1/m²);
    taken relative to the pixel nearest the axis, so that a mode far narrower than a pixel still lands
    in the centre pixels instead of underflowing to nothing."""
    r2 = x_m[None, :] ** 2 + x_m[:, None] ** 2
    m = np.exp(-2.0 * (r2 - r2.min()) / mode_radius_m ** 2)
    return m / (m.sum() * (x_m[1] - x_m[0]) ** 2)


def ring_map(x_m: np.ndarray, edges_m: np.ndarray) -> np.ndarray:
    """(Ny, Nx) index of the ring each pixel lies in; −1 outside the doped core."""
    r = np.hypot(x_m[None, :], x_m[:, None])
    idx = np.searchsorted(edges_m, r, side="right") - 1
    idx[r >= edges_m[-1]] = -1
    return idx


def local_gain_maps(model: F.FibreModel, n2: np.ndarray, x_m: np.ndarray) -> np.ndarray:
    """(Nz, Ny, Nx) local gain coefficient at the signal, g = ((σe + σa)·n2 − σa)·Nt, per ring (1/m)."""
    s = model.signal
    g = ((model.sigma_e_m2[s] + model.sigma_a_m2[s]) * n2 - model.sigma_a_m2[s]) * model.doping_per_m3[:, None]
    idx = ring_map(x_m, model.ring_edges_m)
    out = np.zeros((model.slices,) + idx.shape)
    inside = idx >= 0
    out[:, inside] = g[idx[inside]].T
    return out


def _medium_record(model: F.FibreModel, medium: Medium, before: np.ndarray, after: np.ndarray,
                   x_m: np.ndarray) -> MediumRecord:
    s = model.signal
    fsat = model.photon_energy_J[s] / (model.sigma_e_m2[s] + model.sigma_a_m2[s])
    return MediumRecord(name=medium.name, gain_initial_per_m=local_gain_maps(model, before, x_m),
                        gain_final_per_m=local_gain_maps(model, after, x_m), slice_length_m=model.slice_length_m,
                        saturation_fluence_J_m2=fsat, saturation_intensity_W_m2=fsat / model.lifetime_s,
                        material=medium.material.name, sources=dict(medium.material.sources))


def _check_converged(config: Config, medium: Medium, what: str, converged: bool, change: float,
                     iterations: int) -> None:
    if not converged:
        raise ConfigError([f"{config.source}: medium {medium.name}: the {what} did not converge (last change "
                           f"{change:.1e} after {iterations} iterations); more slices, a weaker pump or a shorter "
                           f"fibre bring it within reach"])


def memory_estimate_bytes(config: Config) -> int:
    """Peak bytes of a fibre layout's arrays: per fibre the gain maps before and after (slices x
    pixels), every channel's power at the slice boundaries and slice means, and the populations; one
    map per step for the records."""
    pixels = config.grid.points ** 2

    def channels(m):
        return 4 + (2 * m.fibre.ase_bins if m.fibre.ase else 0)
    media = sum(2 * m.slices * pixels + 3 * channels(m) * (m.slices + 1) + 2 * m.fibre.rings * m.slices
                for m in config.media)
    return 8 * (media + (3 + len(config.steps)) * pixels + 2 * config.grid.time_slices)


def simulate_fibre(config: Config, progress: bool | None = False) -> Result:
    """Run a validated layout of fibres and return its Result (nothing is written).

    Parameters
    ----------
    config : a Config whose media are fibres
    progress : True shows a progress counter on stderr, None shows it on an interactive terminal
    """
    seed, grid = config.seed, config.grid
    cw = config.mode == "cw"
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    wavelength = seed.wavelength_m
    first = config.medium(next(s.medium for s in config.steps if s.kind == "pass"))
    first_model = F.build_model(first, wavelength, ase=False)
    seed_map = mode_map(x, first_model.mode_radius_m)
    if cw:
        t, weights, dt = np.zeros(0), np.zeros(0), 0.0
        signal = float(seed.power_W)
    else:
        t, weights, dt = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices, seed.pulse_trace)
        signal = weights * seed.energy_J
    records, stages, media, fibres = [], [], {}, {}
    b_total = np.zeros(t.size)
    current_map = seed_map
    with progress_bar(progress, unit="iteration", desc="fibre steady state") as bar:
        tick = bar.update if bar is not None else None
        for step in config.steps:
            if step.kind == "loss":
                stages.append(FibreStage(step, signal))
                signal = signal * step.transmission
            else:
                medium = config.medium(step.medium)
                model = F.build_model(medium, wavelength)
                current_map = mode_map(x, model.mode_radius_m)
                if cw:
                    sol = steady_state.solve_cw(model, signal, tick=tick)
                    _check_converged(config, medium, "steady state", sol.converged, sol.change, sol.iterations)
                    # the fibre with its pump alone (no signal; ASE as configured): the small-signal state
                    pump_only = steady_state.solve_cw(model, 0.0, tick=tick)
                    stages.append(FibreStage(step, signal, model, solution=sol, pump_only=pump_only))
                    media[medium.name] = _medium_record(model, medium, pump_only.n2, sol.n2, x)
                    fibres[medium.name] = _cw_record(sol, pump_only)
                    signal = float(sol.power_W[model.signal, -1])
                else:
                    train = FP.solve_pulse_train(model, signal, dt, seed.repetition_rate_Hz,
                                                 n2_index_m2_W=medium.material.n2_m2_W, tick=tick)
                    _check_converged(config, medium, "pulse train's steady state", train.converged, train.residual,
                                     train.periods)
                    stages.append(FibreStage(step, signal, model, train=train))
                    media[medium.name] = _medium_record(model, medium, train.n2_before, train.n2_after, x)
                    fibres[medium.name] = _pulse_record(train)
                    signal = train.pulse.energy_out_J
                    b_total = b_total + train.pulse.b_integral_rad
            total = float(np.sum(signal))
            if cw:
                records.append(StepRecord(index=step.index, kind=step.kind, medium=step.medium,
                                          intensity_W_m2=total * current_map))
            else:
                records.append(StepRecord(index=step.index, kind=step.kind, medium=step.medium,
                                          fluence_J_m2=total * current_map, power_W=np.asarray(signal) / dt,
                                          b_integral_rad=np.where(current_map > 1e-6 * current_map.max(),
                                                                  float(b_total.max()), 0.0)))
    summary = summarise_fibre(config, stages, x)
    if cw:
        return Result(config=config, x_m=x, y_m=x.copy(), t_s=t, seed_fluence_J_m2=None, seed_power_W=None,
                      steps=records, media=media, summary=summary, seed_intensity_W_m2=seed.power_W * seed_map,
                      fibres=fibres)
    return Result(config=config, x_m=x, y_m=x.copy(), t_s=t, seed_fluence_J_m2=seed.energy_J * seed_map,
                  seed_power_W=weights * seed.energy_J / dt, steps=records, media=media, summary=summary,
                  fibres=fibres)


def _common(model: F.FibreModel) -> dict:
    edges = model.ase_bin_edges_m
    s = model.signal
    attrs = {"mode_field_radius": model.mode_radius_m, "signal_overlap": float(model.overlap[s].sum()),
             "saturation_energy": model.modal_saturation_energy_J(s),
             "length": model.length_m, "rings": model.rings}
    pumps = [i for i in (model.pump_forward, model.pump_backward) if i is not None]
    if pumps:
        attrs["pump_overlap"] = float(model.overlap[pumps[0]].sum())
    if model.v_number is not None:
        attrs["v_number"] = model.v_number
    return dict(name=model.name, z_m=np.linspace(0.0, model.length_m, model.slices + 1),
                ring_edges_m=model.ring_edges_m, ase_wavelength_m=0.5 * (edges[1:] + edges[:-1]),
                ase_bin_width_m=np.diff(edges), attrs=attrs)


def _cw_record(sol: steady_state.CWSolution, pump_only: steady_state.CWSolution) -> FibreRecord:
    m, p = sol.model, sol.power_W
    attrs = {"iterations": sol.iterations, "change": sol.change, "tolerance": sol.tolerance,
             "method": sol.method, "newton_steps": sol.newton_steps}
    common = _common(m)
    common["attrs"].update(attrs)
    return FibreRecord(
        mode="cw", signal_W=p[m.signal],
        pump_forward_W=p[m.pump_forward] if m.pump_forward is not None else None,
        pump_backward_W=p[m.pump_backward] if m.pump_backward is not None else None,
        ase_forward_W=p[m.ase_forward], ase_backward_W=p[m.ase_backward], inversion=sol.n2,
        inversion_pump_only=pump_only.n2, modal_gain_per_m=m.growth(sol.n2, [m.signal])[0], **common)


def _pulse_record(train: FP.PulseTrainSolution) -> FibreRecord:
    m = train.model
    ch = FP.pump_ase_channels(m)
    nodes, _ = FP.between_pulse_powers(m, train.n2_before, ch)
    row = {k: i for i, k in enumerate(ch.tolist())}

    def channel(k):
        return nodes[row[k]] if k is not None else None
    common = _common(m)
    common["attrs"].update({"periods": train.periods, "residual": train.residual, "tolerance": train.tolerance})
    rec = train.recovery
    return FibreRecord(
        mode="pulsed", pulse_energy_J=train.pulse.energy_z_J, pump_forward_W=channel(m.pump_forward),
        pump_backward_W=channel(m.pump_backward),
        ase_forward_W=nodes[[row[k] for k in m.ase_forward.tolist()]],
        ase_backward_W=nodes[[row[k] for k in m.ase_backward.tolist()]],
        inversion=train.n2_before, inversion_after=train.n2_after,
        modal_gain_per_m=m.growth(train.n2_before, [m.signal])[0],
        output_power_W=train.pulse.energy_out_J / train.dt_s,
        recovery_t_s=rec.t_s if rec is not None else None,
        recovery_mean_inversion=rec.mean_n2 if rec is not None else None, **common)


def describe_fibres(config: Config) -> list[str]:
    """One line per fibre for ``ampmodel check``: V number, mode field, overlaps, the pump's unbleached
    absorption, and the small-signal gain with the pump alone (no signal; ASE as configured)."""
    lines = []
    for m in config.media:
        model = F.build_model(m, config.seed.wavelength_m)
        s = model.signal
        pump_only = steady_state.solve_cw(model, 0.0)
        gain_dB = model.signal_gain_dB(pump_only.n2)
        line = (f"  fibre {m.name} ({m.material.name}): "
                + (f"V = {model.v_number:.2f}, " if model.v_number is not None else "")
                + f"mode-field diameter {2e6 * model.mode_radius_m:.3g} µm, signal overlap {model.overlap[s].sum():.3f}")
        pumps = [i for i in (model.pump_forward, model.pump_backward) if i is not None]
        if pumps:
            k = pumps[0]
            line += (f", pump overlap {model.overlap[k].sum():.4f}, unbleached pump absorption "
                     f"{10 / np.log(10) * model.absorption_per_m[k] * model.length_m:.1f} dB")
        ase = "with ASE" if m.fibre.ase else "without ASE"
        lines.append(line + f"; small-signal gain {gain_dB:.1f} dB (pump alone, {ase})")
    return lines
