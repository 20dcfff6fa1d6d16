"""The benchmark cases (an invented four-pass Nd:YAG rod, at several sizes) and the plain numpy
loop that ``simulate`` is measured against."""
from __future__ import annotations

from typing import Any

# The benchmark case: an invented scenario, a four-pass Nd:YAG rod (6.35 mm clear aperture) in a 9 mm
# window, seeded with a 10 ns Gaussian pulse of 50 mJ, 4.5 mm 1/e² diameter.
FULL = {"points": 256, "time_slices": 64, "slices": 20, "passes": 4, "repeat": 3,
        "scaling": (128, 256, 512), "memory_points": 512, "sweep_points": 8, "sweep_grid": 128,
        "diffraction_grid": 128, "startup_repeat": 5}


QUICK = {"points": 48, "time_slices": 12, "slices": 5, "passes": 4, "repeat": 1,
         "scaling": (32, 48, 64), "memory_points": 64, "sweep_points": 8, "sweep_grid": 32,
         "diffraction_grid": 32, "startup_repeat": 3}


MB = 1e6


def bench_config(points: int, time_slices: int, slices: int, passes: int, n2: bool = True,
                 energy_J: float = 0.05) -> dict[str, Any]:
    """The benchmark case as a config dict (see the module docstring); ``n2=False`` sets n2 = 0."""
    material: Any = "Nd:YAG" if n2 else {"base": "Nd:YAG", "n2_m2_W": 0.0}
    return {
        "title": f"benchmark: {passes}-pass Nd:YAG rod, {points}² pixels",
        "mode": "pulsed",
        "grid": {"points": points, "width_mm": 9.0, "time_slices": time_slices},
        "medium": [{"name": "rod", "material": material, "length_mm": 80.0, "diameter_mm": 6.35,
                    "slices": slices, "small_signal_gain": 6.0}],
        "seed": {"energy_J": energy_J, "duration_ns": 10.0, "shape": "gaussian", "profile": "gaussian",
                 "diameter_mm": 4.5},
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
    _, weights, _ = beam_shapes.time_slices(seed.shape, seed.duration_s, grid.time_slices)
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
