"""A medium's heat load turned into its temperature, thermal lens and depolarisation estimate.

The heat density Q(z, y, x) (W/m³) comes from the path (``cw/thermal.py``: the cw steady state);
here it becomes:

- the temperature rise above the cooled surface, per z-slice: ``cooling = "barrel"`` (a rod cooled
  on its barrel, the barrel held at the coolant temperature: 2-D steady heat equation K·∇²T = −Q
  inside the clear aperture, plane strain, no axial heat flow, K constant;
  ``kernels/thermal.py: barrel_cooled_rise``) or ``"face"`` (a disc cooled on its back face, z = L,
  the other faces insulated: 1-D axial flow, ``face_cooled_rise``);
- the optical path difference of one trip, OPD = ∫ dn/dT·ΔT dz (the dn/dT term alone; the
  photo-elastic and end-face bulging terms are not included), its phase k0·OPD
  (:func:`thermal_phase_rad`, the map the field paths apply at the middle of each pass), and the
  focal length of a parabolic least-squares fit of the OPD over the pumped region;
- the stress-birefringence depolarisation of a linearly polarised beam filling the rod, as if the
  rod's heat were uniform (Koechner), for materials with photo-elastic data.

References
----------
W. Koechner, Solid-State Laser Engineering, 6th ed., Springer (2006), ch. 7 (from memory — verify).
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from ampmodel.description import Medium
from ampmodel.kernels import thermal as th
from ampmodel.kernels.beam_shapes import aperture_mask

# pixels whose heat density is above this fraction of the largest count as "pumped" for the lens fit
PUMPED_FRACTION = 0.05


def has_thermal_data(medium: Medium) -> bool:
    """True when the material gives the thermal conductivity and dn/dT."""
    mat = medium.material
    return bool(mat.thermal_conductivity_W_mK) and mat.dn_dT_per_K is not None


def temperature_rise_K(medium: Medium, heat_W_m3: np.ndarray, x_m: np.ndarray, y_m: np.ndarray) -> np.ndarray:
    """(Nz, Ny, Nx) temperature rise above the coolant (K) of a medium holding ``heat_W_m3``
    (Nz, Ny, Nx) W/m³, by its ``cooling``; 0 outside the clear aperture."""
    mat = medium.material
    dz = medium.length_m / heat_W_m3.shape[0]
    mask = aperture_mask(x_m, y_m, medium.aperture, medium.diameter_m)
    if medium.cooling == "face":
        return np.where(mask, th.face_cooled_rise(heat_W_m3, dz, mat.thermal_conductivity_W_mK), 0.0)
    fractions = th.boundary_fractions(x_m, y_m, medium.aperture, medium.diameter_m)
    return th.barrel_cooled_rise(heat_W_m3, mask, fractions, float(x_m[1] - x_m[0]), mat.thermal_conductivity_W_mK)


def opd_map_m(medium: Medium, rise_K: np.ndarray) -> np.ndarray:
    """(Ny, Nx) OPD (m) of one trip through the medium from its temperature rise (dn/dT term)."""
    return th.opd_m(rise_K, medium.length_m / rise_K.shape[0], medium.material.dn_dT_per_K)


def thermal_phase_rad(medium: Medium, heat_W_m3: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
                      wavelength_m: float) -> np.ndarray:
    """(Ny, Nx) phase (rad) of the thermal lens of one trip through ``medium`` holding ``heat_W_m3``
    (Nz, Ny, Nx) W/m³, at the vacuum wavelength ``wavelength_m``: k0·OPD (zero where the medium has
    no thermal data or ``thermal_lens = false``). A pure function of the heat."""
    if not medium.thermal_lens or not has_thermal_data(medium):
        return np.zeros((y_m.size, x_m.size))
    return th.phase_rad(opd_map_m(medium, temperature_rise_K(medium, heat_W_m3, x_m, y_m)), wavelength_m)


def lens_focal_length_m(opd: np.ndarray, heat_W_m3: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
                        mask: np.ndarray) -> float:
    """Focal length (m) of the parabolic least-squares fit OPD = c0 + c2·r² over the pumped region
    (pixels inside ``mask`` whose heat, summed along z, is above PUMPED_FRACTION of its largest):
    f = −1/(2·c2), > 0 focusing."""
    column = heat_W_m3.sum(axis=0)
    peak = float(column.max()) if column.size else 0.0
    if peak <= 0.0:
        return math.inf
    region = mask & (column > PUMPED_FRACTION * peak)
    return th.focal_length_m(th.parabolic_fit(opd, x_m, y_m, region)[1])


def depolarisation_estimate(medium: Medium, heat_W: float, wavelength_m: float) -> float | str:
    """Depolarised fraction of a linearly polarised beam filling the rod, as if its heat ``heat_W`` were
    uniform (Koechner's estimate); "not available" for materials without photo-elastic data."""
    mat = medium.material
    needed = (mat.poisson_ratio, mat.photoelastic_p11, mat.photoelastic_p12, mat.photoelastic_p44,
              mat.thermal_expansion_per_K, mat.thermal_conductivity_W_mK)
    if any(v is None for v in needed):
        return "not available"
    c_b = th.birefringence_constant(mat.poisson_ratio, mat.photoelastic_p11, mat.photoelastic_p12,
                                    mat.photoelastic_p44)
    return th.depolarisation(heat_W, wavelength_m, mat.refractive_index, mat.thermal_expansion_per_K,
                             mat.thermal_conductivity_W_mK, c_b)


def thermal_figures(medium: Medium, heat_W_m3: np.ndarray, x_m: np.ndarray, y_m: np.ndarray,
                    mask: np.ndarray, wavelength_m: float,
                    applied: bool = False) -> tuple[dict[str, Any], np.ndarray | None, np.ndarray | None]:
    """The summary entries of a heated medium, its temperature rise (Nz, Ny, Nx, K) and OPD (Ny, Nx, m)
    (None, None without thermal data: the entries then say so); ``applied``: the run's field path
    applied the lens on its passes."""
    dv = (medium.length_m / heat_W_m3.shape[0]) * float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    heat_W = float(heat_W_m3.sum() * dv)
    if not has_thermal_data(medium):
        return {"thermal_lens": "not available: the material gives no thermal_conductivity_W_mK or dn_dT_per_K"}, None, None
    rise = temperature_rise_K(medium, heat_W_m3, x_m, y_m)
    opd = opd_map_m(medium, rise)
    entry: dict[str, Any] = {
        "cooling": medium.cooling, "coolant_C": medium.coolant_C,
        "temperature_max_C": medium.coolant_C + float(rise.max()),
        "temperature_rise_max_K": float(rise.max()),
        "thermal_focal_length_m": lens_focal_length_m(opd, heat_W_m3, x_m, y_m, mask),
        "thermal_lens_applied": bool(applied and medium.thermal_lens),
        "depolarisation_estimate": depolarisation_estimate(medium, heat_W, wavelength_m),
    }
    if math.isinf(entry["thermal_focal_length_m"]):
        entry["thermal_focal_length_m"] = None
    return entry, rise, opd
