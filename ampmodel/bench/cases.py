"""The benchmark cases (an invented four-pass Nd:YAG rod, at several sizes) and the plain numpy
loop that ``simulate`` is measured against."""
from __future__ import annotations

from typing import Any

# The benchmark cases, invented scenarios: a four-pass Nd:YAG amplifier seeded with a 10 ns Gaussian pulse
# of 50 mJ. "slab": a square slab 9 mm wide that fills the 9 mm window, so that every pixel is lit and a
# ratio against the plain loop measures the kernel, not the aperture; a 6 mm (1/e²) seed. "rod": a round
# rod of 6.35 mm clear aperture in the same window (39 % of the pixels inside it), a 4.5 mm seed: the
# solver computes only the pixels inside, the plain loop all of them. The spectral case stretches the
# slab's seed over 0.5 nm (linearly up-chirped) across Nd:YAG's 1064 nm line.
FULL = {"points": 256, "time_slices": 64, "slices": 20, "passes": 4, "repeat": 3,
        "scaling": (128, 256, 512), "memory_points": 512, "sweep_points": 8, "sweep_grid": 128,
        "diffraction_grid": 128, "startup_repeat": 5, "figures_grid": 96, "figures_time_slices": 24,
        "figures_sweep_grid": 48, "figures_repeat": 3}


QUICK = {"points": 48, "time_slices": 12, "slices": 5, "passes": 4, "repeat": 1,
         "scaling": (32, 48, 64), "memory_points": 64, "sweep_points": 8, "sweep_grid": 32,
         "diffraction_grid": 32, "startup_repeat": 3, "figures_grid": 32, "figures_time_slices": 8,
        "figures_sweep_grid": 24, "figures_repeat": 1}


MB = 1e6
SPECTRAL_BANDWIDTH_NM = 0.5     # the spectral case's seed: FWHM of its spectrum


def bench_config(points: int, time_slices: int, slices: int, passes: int, n2: bool = True,
                 energy_J: float = 0.05, lit: str = "slab", bandwidth_nm: float | None = None) -> dict[str, Any]:
    """A benchmark case as a config dict (see above): ``lit`` "slab" (every pixel lit) or "rod";
    ``n2=False`` sets n2 = 0; ``bandwidth_nm`` stretches the seed (a chirped pulse)."""
    material: Any = "Nd:YAG" if n2 else {"base": "Nd:YAG", "n2_m2_W": 0.0}
    aperture = {"width_mm": 9.0} if lit == "slab" else {"diameter_mm": 6.35}
    seed = {"energy_J": energy_J, "duration_ns": 10.0, "shape": "gaussian", "profile": "gaussian",
            "diameter_mm": 6.0 if lit == "slab" else 4.5}
    if bandwidth_nm:
        seed["bandwidth_nm"] = bandwidth_nm
    return {
        "title": f"benchmark: {passes}-pass Nd:YAG {lit}, {points}² pixels",
        "mode": "pulsed",
        "grid": {"points": points, "width_mm": 9.0, "time_slices": time_slices},
        "medium": [{"name": "rod", "material": material, "length_mm": 80.0, **aperture,
                    "slices": slices, "small_signal_gain": 6.0}],
        "seed": seed,
        "step": [{"kind": "pass", "medium": "rod", "reverse": bool(i % 2)} for i in range(passes)],
    }


def reference_arrays(config):
    """The arrays :func:`ampmodel.simulate` starts from, built by the same functions: the fluence of
    every time slice (Nt, Ny, Nx) in J/m², ln G of every voxel (Nz, Ny, Nx), the clear aperture and Fsat."""
    import numpy as np

    from ampmodel.kernels import beam_shapes
    from ampmodel.media import gain_maps
    grid, seed = config.grid, config.seed
    (medium,) = config.media
    x = beam_shapes.pixel_centres(grid.points, grid.width_m)
    _, weights, _ = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices, seed.pulse_trace)
    seed_map = beam_shapes.seed_fluence(x, x, seed.profile, seed.diameter_m, seed.order, seed.energy_J)
    gm = gain_maps.gain_map(medium, x, x)
    fluence = weights[:, None, None] * seed_map[None, :, :]
    return fluence, gm.gain_per_m * gm.slice_length_m, gm.mask, medium.material.saturation_fluence_J_m2, \
        np.asarray([s.reverse for s in config.steps if s.kind == "pass"])


def reference_loop(fluence, ln_gain, mask, fsat: float, reverses) -> None:
    """Plain numpy: clip at the clear aperture, then for each pass, each z-slice in the order the beam
    meets them and each time slice, the textbook Frantz–Nodvik update over all pixels, in place.

    J_out = Fsat·log1p(G·expm1(J_in/Fsat)), ln G <- ln G − (J_out − J_in)/Fsat
    (L. M. Frantz and J. S. Nodvik, J. Appl. Phys. 34, 2346 (1963)). No diagnostics.
    """
    import numpy as np
    fluence *= mask
    nz = ln_gain.shape[0]
    for reverse in reverses:
        for k in (range(nz - 1, -1, -1) if reverse else range(nz)):
            g = ln_gain[k]
            for t in range(fluence.shape[0]):
                f_in = fluence[t]
                f_out = fsat * np.log1p(np.exp(g) * np.expm1(f_in / fsat))
                g -= (f_out - f_in) / fsat
                fluence[t] = f_out


def spectral_arrays(config):
    """What :func:`reference_loop_spectral` starts from, as populations: the fluence of every time slice
    (Nt, Ny, Nx) in J/m² (clipped at the clear aperture), N2 of every voxel (Nz, Ny, Nx) in 1/m³, and per
    time slice its wavelength's cross-sections σe, σa (m², from the material's spectrum) and photon
    energy; the doping Nt, the slice length dz and the passes' directions."""
    import numpy as np

    from ampmodel.kernels import beam_shapes
    from ampmodel.units import photon_energy_J
    fluence, ln_gain, mask, _, reverses = reference_arrays(config)
    seed, (medium,) = config.seed, config.media
    mat = medium.material
    t, _, _ = beam_shapes.time_slices(seed.shape, seed.duration_s, config.grid.time_slices)
    wl = beam_shapes.slice_wavelengths(t, seed.duration_s, seed.wavelength_m, seed.bandwidth_m, seed.chirp)
    sigma_e, sigma_a = (np.asarray(v, dtype=float) for v in mat.spectrum.at(wl))
    nt = medium.doping_per_m3 or mat.doping_per_m3
    dz = medium.length_m / medium.slices
    e0, a0 = mat.emission_cross_section_m2, mat.absorption_cross_section_m2
    n2 = (ln_gain / dz + a0 * nt) / (e0 + a0)        # g0 = σe0·N2 − σa0·(Nt − N2) at the material's λ0
    return fluence * mask, n2, sigma_e, sigma_a, photon_energy_J(wl), nt, dz, reverses


def reference_loop_spectral(fluence, n2, sigma_e, sigma_a, photon_J, nt: float, dz: float, reverses) -> None:
    """Plain numpy on populations: for each pass, each z-slice in the order the beam meets them and each
    time slice t, the textbook Frantz–Nodvik update at that slice's wavelength over all pixels, in place:

    ln G = (σe·N2 − σa·(Nt − N2))·dz, Fsat = h·ν/(σe + σa),
    J_out = Fsat·log1p(G·expm1(J_in/Fsat)), N2 <- N2 − (J_out − J_in)/(h·ν·dz)

    (Frantz and Nodvik, J. Appl. Phys. 34, 2346 (1963); one photon out of the ions per photon gained).
    """
    import numpy as np
    nz = n2.shape[0]
    fsat = photon_J / (sigma_e + sigma_a)
    for reverse in reverses:
        for k in (range(nz - 1, -1, -1) if reverse else range(nz)):
            pop = n2[k]
            for t in range(fluence.shape[0]):
                f_in = fluence[t]
                gain = np.exp((sigma_e[t] * pop - sigma_a[t] * (nt - pop)) * dz)
                f_out = fsat[t] * np.log1p(gain * np.expm1(f_in / fsat[t]))
                pop -= (f_out - f_in) / (photon_J[t] * dz)
                fluence[t] = f_out
