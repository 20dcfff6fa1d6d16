"""Continuous pumping in cw mode: the steady-state population of each voxel under pump and signal,
and the small-signal gain and saturation intensity it gives (the pump itself: ``pumping.py``).

Every voxel (z-slice, y, x) holds one upper-level density N2, used alike for the pump's absorption,
the signal's gain and the spontaneous decay (so the photon balance closes exactly in the discrete
sense). Steady-state rate equation of a voxel (the rate equations of C. R. Giles and E. Desurvire,
J. Lightwave Technol. 9, 271 (1991), specialised to a bulk medium:
rate = σ·I/(h·ν) = σ·Φ, Φ the photon flux in photons/(m²·s)):

    0 = η·σa,p·Φp·N1 − σe,p·Φp·N2 + (σa·N1 − σe·N2)·Φs − N2/τ,    N1 = Nt − N2,

with Φp the pump's and Φs the signal's mean photon flux in the voxel (all passes and directions
summed), η the quantum efficiency. Writing Pa = η·α0·Φp (α0 = σa,p·Nt) and Pb = (η·σa,p + σe,p)·Φp,

    N2 = (Pa + σa·Nt·Φs)/(Pb + (σa + σe)·Φs + 1/τ),

and the gain g = σe·N2 − σa·N1 takes the homogeneous saturation form g = g0/(1 + I/Isat) with a
pump-dependent small-signal gain and saturation intensity (the pump shortens the effective lifetime):

    g0 = ((σe + σa)·Pa − σa·Nt·D0)/D0,   Isat = h·νs·D0/(σe + σa),   D0 = Pb + 1/τ.

The pump is attenuated by α = σa,p·N1 − σe,p·N2 = α0 − (σa,p + σe,p)·N2 (bleaching). End pumping:
Beer–Lambert along z through each voxel with its own α, exp(−α·dz), then an optional second pass
back from a reflector at the far face; the voxel sees the exact mean of the exponential over the
slice. Side pumping: the absorbed small-signal pump rate is spread over the clear aperture with the
transverse profile, uniform along z (as in pulsed mode), and each voxel sees the photon flux that
would give that rate unbleached; bleaching lowers what is absorbed.

Where the ion density is not known (a four-level material given only a pump absorption
coefficient), the ground state is taken as undepleted (N1 ≈ Nt): α = α0, Pb = 0. Where the pump
cross-section is unknown (side pumping of a material without pump absorption data), the absorbed
rate is the given one, without bleaching.

References
----------
C. R. Giles and E. Desurvire, J. Lightwave Technol. 9, 271 (1991) (two-level rate equations with
pump and signal); Beer–Lambert absorption.
"""
from __future__ import annotations

import numpy as np

from ampmodel.media.ions import Ions
from ampmodel.media.pumping import PumpModel


def small_signal(pump: PumpModel, levels: Ions, mean_flux: np.ndarray,
                 mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Small-signal gain g0 (1/m) and saturation intensity Isat (W/m²) of each voxel under the pump.

    g0 = ((σe + σa)·Pa − σa·Nt·D0)/D0 and Isat = h·νs·D0/(σe + σa), D0 = Pb + 1/τ (module docstring).
    Outside the clear aperture there is no medium: g0 = 0.
    """
    sig = levels.sigma_e_m2 + levels.sigma_a_m2
    pa = pump.quantum_efficiency * pump.alpha0_per_m * mean_flux
    d0 = pump.create_b_m2 * mean_flux + 1.0 / levels.lifetime_s
    g0 = (sig * pa - levels.ground_absorption_per_m * d0) / d0
    g0 = np.where(mask, g0, 0.0)
    isat = levels.photon_energy_J * d0 / sig
    return g0, isat
