"""Doped fibres in steady state against published closed forms, scipy's ODE solvers and conservation.

- Saleh et al., IEEE Photon. Technol. Lett. 2, 714 (1990): outputs without ASE and background loss,
  for forward, backward and two-ended pumping (fibre_reference.saleh_outputs, scipy.optimize.brentq);
- the power profile along the fibre against scipy.integrate.solve_ivp (forward pumping, no ASE) and,
  with ASE running both ways, against scipy.integrate.solve_bvp;
- photon-number balance with ASE;
- an unpumped fibre transmits exp(−Γ·σa·Nt·L) (Beer–Lambert with the overlap factor);
- the noise figure of a uniformly inverted fibre, NF = (1 + 2·n_sp·(G − 1))/G (E. Desurvire,
  Erbium-Doped Fiber Amplifiers, Wiley (1994), ch. 2, from memory — verify);
- the ASE spectrum peaks where the gain does.
"""
from __future__ import annotations

import math

import fibre_reference as R
import numpy as np
import pytest
from scipy.integrate import solve_bvp, solve_ivp

from ampmodel.fibre import model as F
from ampmodel.fibre import steady_state

SIGNAL_M = 1030e-9
A_CORE = math.pi * (5e-6) ** 2


def cross_sections(wavelength_m):
    """σe, σa (m²) of the test table, interpolated here independently of the code."""
    wl = np.asarray(wavelength_m) * 1e9
    return (np.interp(wl, R.TABLE_NM, R.EMISSION_CM2) * 1e-4, np.interp(wl, R.TABLE_NM, R.ABSORPTION_CM2) * 1e-4)


def signal_overlap(wavelength_m=SIGNAL_M, na=0.07, a=5e-6):
    v = 2 * math.pi * a * na / wavelength_m
    return R.core_fraction(a, a * R.marcuse_w_over_a(v))


def residual_pump(sol):
    return steady_state.output_figures(sol)["pump_out_W"]


# --------------------------------------------------------------------------------------------------
# Saleh et al. (1990)
# --------------------------------------------------------------------------------------------------

SALEH_CASES = [
    # direction, cladding, pump (W), signal (W), length (m)
    ("forward", True, 5.0, 0.3, 3.0),
    ("backward", True, 5.0, 0.3, 3.0),
    ("both", True, 5.0, 1e-4, 3.0),
    ("backward", True, 2.0, 1e-4, 6.0),
    ("forward", False, 0.3, 1e-3, 1.0),
    ("backward", False, 0.3, 1e-3, 1.0),
]


@pytest.mark.parametrize("direction, cladding, pump_W, signal_W, length_m", SALEH_CASES)
def test_saleh_closed_form_without_ase(direction, cladding, pump_W, signal_W, length_m):
    medium = R.make_fibre(length_m=length_m, slices=80, pump_W=pump_W, direction=direction, cladding=cladding)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), signal_W)
    assert sol.converged
    se_s, sa_s = cross_sections(SIGNAL_M)
    se_p, sa_p = cross_sections(976e-9)
    gamma_p = (5e-6 / 62.5e-6) ** 2 if cladding else signal_overlap(976e-9)
    beams = [dict(power_W=signal_W, wavelength_m=SIGNAL_M, overlap=signal_overlap(), sigma_e=se_s, sigma_a=sa_s)]
    ends = 2 if direction == "both" else 1
    beams += [dict(power_W=pump_W, wavelength_m=976e-9, overlap=gamma_p, sigma_e=se_p, sigma_a=sa_p)] * ends
    ref = R.saleh_outputs(beams, A_CORE, 6e25, 0.9e-3, length_m)
    out = steady_state.output_figures(sol)
    # the requirement is 1e-3; the slice scheme conserves photons and integrates each channel's
    # logarithm exactly, so Saleh's relations hold for it at any slice count
    assert out["signal_out_W"] == pytest.approx(ref[0], rel=1e-6)
    assert residual_pump(sol) == pytest.approx(sum(ref[1:]), rel=1e-6)


# --------------------------------------------------------------------------------------------------
# Profiles against scipy.integrate
# --------------------------------------------------------------------------------------------------

def overlap_model_rhs(channels, doping=6e25, lifetime=0.9e-3, area=A_CORE, loss=0.0):
    """dP/dz of Giles & Desurvire (1991), one ring, written out for the reference solvers.

    channels: list of (wavelength_m, overlap, direction, bandwidth_Hz)."""
    wl = np.array([c[0] for c in channels])
    gam = np.array([c[1] for c in channels])
    u = np.array([c[2] for c in channels], dtype=float)
    dnu = np.array([c[3] for c in channels])
    se, sa = cross_sections(wl)
    hnu = R.photon_energy(wl)

    def rhs(z, p):
        p = np.maximum(p, 0.0)
        rate_up = np.tensordot(sa * gam / (hnu * area), p, axes=(0, 0))
        rate_tot = np.tensordot((sa + se) * gam / (hnu * area), p, axes=(0, 0))
        n2 = rate_up / (1 / lifetime + rate_tot)
        g = gam[:, None] * ((se + sa)[:, None] * n2 - sa[:, None]) * doping if p.ndim == 2 else \
            gam * ((se + sa) * n2 - sa) * doping
        spont = (2 * hnu * dnu * se * gam * doping)
        if p.ndim == 2:
            return u[:, None] * ((g - loss) * p + spont[:, None] * n2)
        return u * ((g - loss) * p + spont * n2)
    return rhs


def forward_profile_error(slices, loss):
    medium = R.make_fibre(length_m=3.0, slices=slices, pump_W=5.0, direction="forward", loss_per_m=loss)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 0.05)
    gp = (5e-6 / 62.5e-6) ** 2
    rhs = overlap_model_rhs([(SIGNAL_M, signal_overlap(), 1, 0.0), (976e-9, gp, 1, 0.0)], loss=loss)
    ref = solve_ivp(rhs, (0.0, 3.0), [0.05, 5.0], method="LSODA", t_eval=sol.z_m, rtol=1e-12, atol=1e-15)
    m = sol.model
    return max(np.max(np.abs(ours - theirs) / np.max(theirs))
               for ours, theirs in ((sol.power_W[m.signal], ref.y[0]), (sol.power_W[m.pump_forward], ref.y[1])))


@pytest.mark.parametrize("slices", [5, 60])
def test_forward_pumped_profile_is_exact_without_loss(slices):
    """Without background loss and ASE, Saleh's relations hold for every slice of the scheme as for the
    continuous equations, so the powers at the slice boundaries are exact at any slice count
    (reference: scipy.integrate.solve_ivp, LSODA, rtol 1e-12)."""
    assert forward_profile_error(slices, 0.0) < 1e-9


def test_forward_pumped_profile_with_loss_converges_at_second_order():
    coarse, fine = forward_profile_error(30, 0.05), forward_profile_error(120, 0.05)
    assert fine < 2e-5
    assert 10 < coarse / fine < 22          # four times the slices, sixteen times smaller


def test_two_way_ase_matches_solve_bvp():
    """Backward pump, signal and three ASE bins each way: the boundary-value problem solved by
    scipy.integrate.solve_bvp (collocation) from a flat first guess, against the relaxation."""
    bins = 3
    medium = R.make_fibre(length_m=2.0, slices=300, pump_W=3.0, direction="backward", ase=True, ase_bins=bins,
                          ase_band_m=(1010e-9, 1070e-9))
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 1e-3)
    assert sol.converged
    edges = np.linspace(1010e-9, 1070e-9, bins + 1)
    centres = 0.5 * (edges[1:] + edges[:-1])
    dnu = R.LIGHT_SPEED / edges[:-1] - R.LIGHT_SPEED / edges[1:]
    gp = (5e-6 / 62.5e-6) ** 2
    channels = [(SIGNAL_M, signal_overlap(), 1, 0.0), (976e-9, gp, -1, 0.0)]
    channels += [(w, signal_overlap(w), 1, d) for w, d in zip(centres, dnu, strict=True)]
    channels += [(w, signal_overlap(w), -1, d) for w, d in zip(centres, dnu, strict=True)]
    rhs = overlap_model_rhs(channels)
    fwd = [0] + list(range(2, 2 + bins))
    bwd = [1] + list(range(2 + bins, 2 + 2 * bins))
    launch = np.array([1e-3, 3.0] + [0.0] * (2 * bins))

    def bc(ya, yb):
        return np.concatenate([ya[fwd] - launch[fwd], yb[bwd] - launch[bwd]])

    z = np.linspace(0.0, 2.0, 41)
    guess = np.zeros((len(channels), z.size))
    guess[0] = 1e-3
    guess[1] = 3.0 * np.exp(-0.5 * (2.0 - z))
    ref = solve_bvp(rhs, bc, z, guess, tol=1e-7, max_nodes=200000)
    assert ref.success, ref.message
    m = sol.model
    end = ref.sol(2.0)
    start = ref.sol(0.0)
    out = steady_state.output_figures(sol)
    assert out["signal_out_W"] == pytest.approx(end[0], rel=2e-4)
    assert residual_pump(sol) == pytest.approx(start[1], rel=2e-4)
    assert out["ase_forward_W"] == pytest.approx(end[2:2 + bins].sum(), rel=2e-3)
    assert out["ase_backward_W"] == pytest.approx(start[2 + bins:].sum(), rel=2e-3)
    assert sol.power_W[m.ase_forward, -1] == pytest.approx(end[2:2 + bins], rel=5e-3)


# --------------------------------------------------------------------------------------------------
# Conservation and the ASE spectrum
# --------------------------------------------------------------------------------------------------

def independent_balance(sol):
    """absorbed pump photons − (signal photons added + ASE photons out − spontaneous photons into the bins
    + spontaneous decays ∫ A·N2/τ dz + photons lost to background loss), relative to the absorbed pump."""
    m = sol.model
    h = m.length_m / m.slices
    hnu = R.photon_energy(m.wavelength_m)
    p = sol.power_W
    pumps = [i for i in (m.pump_forward, m.pump_backward) if i is not None]
    absorbed = sum((p[i, 0] - p[i, -1]) * m.direction[i] / hnu[i] for i in pumps)
    added_signal = (p[m.signal, -1] - p[m.signal, 0]) / hnu[m.signal]
    ase_out = np.sum(p[m.ase_forward, -1] / hnu[m.ase_forward]) + np.sum(p[m.ase_backward, 0] / hnu[m.ase_backward])
    area = np.pi * np.diff(m.ring_edges_m ** 2)
    nt = m.doping_per_m3
    decays = h * np.sum(area[:, None] * nt[:, None] * sol.n2) / m.lifetime_s
    ase = np.concatenate([m.ase_forward, m.ase_backward])
    edges = m.ase_bin_edges_m
    dnu = np.tile(R.LIGHT_SPEED / edges[:-1] - R.LIGHT_SPEED / edges[1:], 2)
    se, _ = cross_sections(m.wavelength_m[ase])
    into_bins = h * np.sum(2 * dnu[:, None] * se[:, None] * (m.overlap[ase] * nt) @ sol.n2)
    feeding = [i for i in range(len(m.labels)) if m.feeds[i]]
    lost = h * np.sum(m.loss_per_m[feeding, None] * sol.mean_power_W[feeding] / hnu[feeding, None])
    return (absorbed - (added_signal + ase_out - into_bins + decays + lost)) / absorbed


@pytest.mark.parametrize("direction, rings, loss", [("forward", 1, 0.0), ("backward", 1, 0.01), ("both", 5, 0.005)])
def test_photon_balance_with_ase(direction, rings, loss):
    medium = R.make_fibre(length_m=4.0, slices=80, pump_W=4.0, direction=direction, ase=True, ase_bins=8,
                          rings=rings, loss_per_m=loss)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 2e-3)
    assert sol.converged
    out = steady_state.output_figures(sol)
    assert out["ase_forward_W"] > 1e-4 and out["ase_backward_W"] > 1e-4      # ASE matters here
    assert abs(independent_balance(sol)) < 1e-6
    assert abs(out["photon_balance_error"]) < 1e-6


def test_ase_spectrum_peaks_where_the_gain_does():
    medium = R.make_fibre(length_m=4.0, slices=60, pump_W=3.0, direction="forward", ase=True, ase_bins=20)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 0.0)
    m = sol.model
    for bins, at in ((m.ase_forward, -1), (m.ase_backward, 0)):
        se, sa = cross_sections(m.wavelength_m[bins])
        gam = m.overlap[bins].sum(axis=1)
        net_gain = np.sum(gam[:, None] * ((se + sa)[:, None] * sol.n2[0] - sa[:, None]) * 6e25, axis=1)
        small_signal_dB = 10.0 * np.log10(np.e) * net_gain.max() * (4.0 / 60)   # Σ g·dz over the 60 slices
        assert small_signal_dB > 20.0                                  # a high-gain fibre
        density = sol.power_W[bins, at] / np.diff(m.ase_bin_edges_m)
        assert abs(int(np.argmax(density)) - int(np.argmax(net_gain))) <= 1


# --------------------------------------------------------------------------------------------------
# Unpumped transmission, noise figure
# --------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("rings, loss", [(1, 0.0), (1, 0.02), (6, 0.0)])
def test_unpumped_fibre_transmission(rings, loss):
    medium = R.make_fibre(length_m=2.0, slices=40, pump_W=None, rings=rings, loss_per_m=loss)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 1e-9)
    _, sa = cross_sections(SIGNAL_M)
    expected = math.exp(-(signal_overlap() * sa * 6e25 + loss) * 2.0)
    assert steady_state.output_figures(sol)["gain"] == pytest.approx(expected, rel=1e-7)


def test_noise_figure_of_a_uniformly_inverted_fibre():
    # a pump bleaching a short fibre through a small overlap keeps N2 the same all along
    pump_W, gamma_p, length = 1000.0, 1e-3, 0.5
    medium = R.make_fibre(length_m=length, slices=20, pump_W=pump_W, pump_overlap=gamma_p)
    sol = steady_state.solve_cw(F.build_model(medium, SIGNAL_M), 1e-9)
    se_p, sa_p = cross_sections(976e-9)
    flux = gamma_p * pump_W / (R.photon_energy(976e-9) * A_CORE)
    n2 = sa_p * flux / (1 / 0.9e-3 + (sa_p + se_p) * flux)
    se, sa = cross_sections(SIGNAL_M)
    g = signal_overlap() * (se * n2 - sa * (1 - n2)) * 6e25
    gain = math.exp(g * length)
    nsp = se * n2 / (se * n2 - sa * (1 - n2))
    out = steady_state.output_figures(sol)
    assert out["gain"] == pytest.approx(gain, rel=1e-5)
    assert out["noise_figure"] == pytest.approx((1 + 2 * nsp * (gain - 1)) / gain, rel=1e-5)
