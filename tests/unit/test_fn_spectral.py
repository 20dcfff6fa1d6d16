"""The pass of a pulse whose time slices differ in wavelength: the linear and the log-domain forms of
kernels/fn_spectral.py against a plain loop on populations, with the textbook update per slice.

References
----------
L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963): J_out = Fsat·ln[1 + G·(exp(J_in/Fsat) − 1)]
with Fsat = h·ν/(σe + σa) at the slice's wavelength; one ion out of the upper state per photon gained,
ΔN2 = −ΔJ/(h·ν·dz); the gain from the populations g = σe·N2 − σa·(Nt − N2) (Siegman, Lasers (1986)).
"""
from __future__ import annotations

import numpy as np
import pytest

from ampmodel.kernels.fn_spectral import _pass, amplify_block_spectral, linear_form_valid

H_NU0 = 1.9e-19          # J, photon energy at λ0 (about 1 µm)
NT = 1.4e26              # 1/m³, doping
DZ = 2e-3                # m
SE0, SA0 = 2.0e-24, 1.2e-25   # m², cross-sections at λ0 (a quasi-three-level line)


def _case(seed: int, nt: int = 9, nz: int = 5, c: int = 40):
    """Random populations and a pulse at nt wavelengths around λ0, one of them unseen (outside a table)."""
    rng = np.random.default_rng(seed)
    n2 = NT * rng.uniform(0.15, 0.45, (nz, c))
    lam_ratio = np.linspace(0.98, 1.02, nt)                       # λ_t/λ0
    se = SE0 * rng.uniform(0.3, 1.2, nt)
    sa = SA0 * rng.uniform(0.2, 3.0, nt)
    se[nt // 3] = sa[nt // 3] = 0.0                               # a slice the ions do not see
    h_nu = H_NU0 / lam_ratio
    fsat0 = H_NU0 / (SE0 + SA0)
    fluence = fsat0 * rng.uniform(0.0, 0.6, (nt, c))
    fluence[:, :3] = 0.0                                          # pixels without light
    return n2, se, sa, h_nu, fluence, fsat0


def _kernel_args(se, sa, h_nu, dz=DZ):
    scale = (se + sa) / (SE0 + SA0)
    offset = (scale * SA0 - sa) * NT * dz
    ratio = scale * H_NU0 / h_nu                                  # Fsat0/Fsat_t = a_t·λ_t/λ0
    return ratio, scale, offset, -sa * NT * dz


def _reference(n2, se, sa, h_nu, fluence, half_loss):
    """Plain loop on populations, per time slice and gain slice, half the loss either side."""
    n2, f = n2.copy(), fluence.copy()
    for t in range(f.shape[0]):
        for k in range(n2.shape[0]):
            f_in = f[t] * half_loss
            if se[t] + sa[t] > 0:
                fsat = h_nu[t] / (se[t] + sa[t])
                gain = np.exp((se[t] * n2[k] - sa[t] * (NT - n2[k])) * DZ)
                f_out = fsat * np.log1p(gain * np.expm1(f_in / fsat))
                n2[k] -= (f_out - f_in) / (h_nu[t] * DZ)
            else:
                f_out = f_in
            f[t] = f_out * half_loss
    return n2, f


@pytest.mark.parametrize("half_loss", [1.0, 0.995])
@pytest.mark.parametrize("linear", [True, False])
def test_both_forms_equal_the_plain_loop_on_populations(linear, half_loss):
    n2, se, sa, h_nu, fluence, fsat0 = _case(1)
    ratio, scale, offset, floor = _kernel_args(se, sa, h_nu)
    ln_gain = ((SE0 + SA0) * n2 - SA0 * NT) * DZ
    x = fluence / fsat0
    assert linear_form_valid(x, ln_gain, ratio, scale, offset, floor, half_loss)
    outcome = _pass(x, ln_gain, ratio, scale, offset, half_loss, None, linear)
    n2_ref, f_ref = _reference(n2, se, sa, h_nu, fluence, half_loss)
    np.testing.assert_allclose(x * fsat0, f_ref, rtol=1e-12, atol=1e-12 * fsat0)
    np.testing.assert_allclose((ln_gain / DZ + SA0 * NT) / (SE0 + SA0), n2_ref, rtol=0, atol=1e-12 * NT)
    # energy: what the beam gained is what the ions gave, photon by photon (h·ν_t per ion)
    gained_ref = (f_ref.sum() - fluence.sum()) if half_loss == 1.0 else None
    if gained_ref is not None:
        assert outcome.gained * fsat0 == pytest.approx(gained_ref, rel=1e-10)


def test_the_b_integral_sums_and_peaks_agree_between_forms():
    n2, se, sa, h_nu, fluence, fsat0 = _case(2)
    args = _kernel_args(se, sa, h_nu)
    ln_gain = ((SE0 + SA0) * n2 - SA0 * NT) * DZ
    results = []
    for linear in (True, False):
        x, g, b = fluence / fsat0, ln_gain.copy(), np.zeros_like(fluence)
        oc = _pass(x, g, *args[:3], 0.999, b, linear)
        results.append((x, g, b, oc))
    (x1, g1, b1, o1), (x2, g2, b2, o2) = results
    np.testing.assert_allclose(b1, b2, rtol=1e-12)
    assert b1.max() > 0
    np.testing.assert_allclose([o1.peak_plane_fluence, o1.passive_loss, o1.gained],
                               [o2.peak_plane_fluence, o2.passive_loss, o2.gained], rtol=1e-12)
    np.testing.assert_allclose(o1.peak_slice_fluence, o2.peak_slice_fluence, rtol=1e-12)
    assert o1.peak_slice_fluence.shape == (fluence.shape[0],)


def test_the_linear_form_is_refused_where_u_would_overflow_and_the_log_form_stays_finite():
    n2, se, sa, h_nu, fluence, fsat0 = _case(3)
    ratio, scale, offset, floor = _kernel_args(se, sa, h_nu)
    ln_gain = np.full((5, 40), 150.0)                          # G0 = e^750 over the stack
    x = fluence / fsat0
    assert not linear_form_valid(x, ln_gain, ratio, scale, offset, floor)
    outcome = amplify_block_spectral(x, ln_gain, ratio, scale, offset, floor=floor)
    assert np.all(np.isfinite(x)) and np.isfinite(outcome.gained)
