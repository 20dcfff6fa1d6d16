"""A medium in the cw iteration: its gain, small-signal gain and saturation intensity on its voxel
grid (slices cut into sub-slices where passive loss needs them), and its pump settled without signal.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ampmodel.description import Medium
from ampmodel.kernels import beam_shapes
from ampmodel.media import cw_pump, gain_maps, pumping
from ampmodel.media.ions import Ions
from ampmodel.media.pumping import PumpField, PumpModel

# Sub-slices per slice with passive loss. The symmetric splitting of the loss around the gain step
# is second order: against scipy.integrate.solve_ivp the relative error of the output intensity is
# at most about 5e-3·q, q = L·dz²·g0²·α (medium length L, slice length dz, largest |g0|, loss
# coefficient α; measured over both line shapes and I/Isat from 0.01 to 100). Each slice is cut into
# sub-slices so that q <= LOSS_SPLIT_LIMIT, which keeps the error near 5e-7 or below
# (tests/physics/test_cw_slices.py checks 1e-6).
LOSS_SPLIT_LIMIT = 1e-4


MAX_LOSS_SUBSTEPS = 64


@dataclass
class CwMedium:
    """A medium in the cw iteration, on its internal voxel grid (Nz·sub, Ny, Nx), SI.

    gain : current gain coefficient g (1/m) of each voxel (the mean over the voxel)
    g0, isat : small-signal gain coefficient (1/m) and saturation intensity (W/m²) of each voxel
        (pump-dependent with a pump; isat a float without one)
    entering : step index -> (nz, Ny, Nx) intensity entering each voxel's gain step in that pass
    phase_rad : field path (grid.diffraction = true): an optional (Ny, Nx) phase map (rad) that each
        pass applies at its middle (half the medium, the phase, the other half); None (the default)
        is no phase. A hook for a phase the medium itself imposes (e.g. a thermal lens), filled by
        whatever models it before the run; ``cw/field_path.py`` applies it
    forward, backward : sums of ``entering`` over the passes in each direction
    """

    medium: Medium
    mask: np.ndarray
    sub: int
    dz_m: float
    homogeneous: bool
    levels: Ions
    g0: np.ndarray
    isat: np.ndarray | float
    gain: np.ndarray
    pump: PumpModel | None = None
    pump_field: PumpField | None = None
    entering: dict[int, np.ndarray] = field(default_factory=dict)
    forward: np.ndarray | None = None
    backward: np.ndarray | None = None
    initial_iterations: int = 0
    phase_rad: np.ndarray | None = None

    @property
    def name(self) -> str:
        return self.medium.name

    def coarse(self, a: np.ndarray) -> np.ndarray:
        """(Nz·sub, Ny, Nx) -> (Nz, Ny, Nx): the mean over each slice's sub-slices."""
        if self.sub == 1:
            return a.copy()
        nz = a.shape[0] // self.sub
        return a.reshape((nz, self.sub) + a.shape[1:]).mean(axis=1)


def loss_substeps(medium: Medium, g0_max_per_m: float) -> int:
    """Internal sub-slices per slice: 1 without loss, else enough that L·dz²·g0²·α <= LOSS_SPLIT_LIMIT."""
    if medium.loss_per_m <= 0.0:
        return 1
    dz = medium.length_m / medium.slices
    q = medium.length_m * dz * dz * g0_max_per_m ** 2 * medium.loss_per_m
    return int(min(MAX_LOSS_SUBSTEPS, max(1, math.ceil(math.sqrt(q / LOSS_SPLIT_LIMIT)))))


def _relative_change(new: np.ndarray, old: np.ndarray, scale: float) -> float:
    return float(np.max(np.abs(new - old))) / scale if new.size else 0.0


def pump_sweep(st: CwMedium, pixel_area_m2: float) -> tuple[np.ndarray, np.ndarray]:
    """Run the pump through a pumped medium at its current gain (``st.pump_field``) and return the
    small-signal gain g0 (1/m) and saturation intensity (W/m²) of each voxel that it gives."""
    n2 = st.levels.n2_per_m3(st.gain)
    st.pump_field = pumping.sweep(st.pump, n2, st.mask, st.dz_m, pixel_area_m2)
    return cw_pump.small_signal(st.pump, st.levels, st.pump_field.mean_flux, st.mask)


def pump_only(st: CwMedium, pixel_area_m2: float, tolerance: float, max_iterations: int) -> int:
    """Settle a pumped medium without signal: g = g0(pump(g)) by fixed-point iteration (bleaching
    couples the pump's absorption to the population it creates). Returns the iterations used."""
    assert st.pump is not None
    for it in range(1, max_iterations + 1):
        g0, isat = pump_sweep(st, pixel_area_m2)
        scale = max(float(np.abs(g0).max()), 1e-300)
        change = _relative_change(g0, st.gain, scale)
        st.g0, st.isat, st.gain = g0, isat, g0.copy()
        if change <= tolerance:
            return it
    return max_iterations


def build_medium(medium: Medium, x_m: np.ndarray, y_m: np.ndarray, solver,
                 wavelength_m: float | None = None) -> CwMedium:
    """A medium's cw state before the signal: its small-signal gain map (pump settled if pumped), at
    the signal's ``wavelength_m`` (default the material's): the gain and saturation intensity follow
    the cross-sections there."""
    mask = beam_shapes.aperture_mask(x_m, y_m, medium.aperture, medium.diameter_m)
    at_line = Ions.of(medium)
    levels = at_line.at_wavelength(medium, wavelength_m or medium.material.wavelength_m)
    homogeneous = medium.material.broadening != "inhomogeneous"
    pixel_area = float((x_m[1] - x_m[0]) * (y_m[1] - y_m[0]))
    if medium.pump is None:
        g = levels.gain_per_m(at_line.n2_per_m3(gain_maps.gain_map(medium, x_m, y_m).gain_per_m))
        g = np.where(mask, g, 0.0)
        sub = loss_substeps(medium, float(np.abs(g).max()))
        g0 = np.repeat(g, sub, axis=0)
        isat = levels.photon_energy_J / (levels.sum_cross_section_m2 * levels.lifetime_s)
        return CwMedium(medium, mask, sub, medium.length_m / (medium.slices * sub), homogeneous, levels,
                        g0=g0, isat=isat, gain=g0.copy())
    pump = pumping.build_pump(medium, x_m, y_m, mask)

    def settle(sub: int) -> CwMedium:
        nz = medium.slices * sub
        zero = np.zeros((nz,) + mask.shape)
        st = CwMedium(medium, mask, sub, medium.length_m / nz, homogeneous, levels, g0=zero, isat=1.0,
                      gain=zero.copy(), pump=pump)
        st.initial_iterations = pump_only(st, pixel_area, solver.tolerance, solver.max_iterations)
        return st

    st = settle(1)
    sub = loss_substeps(medium, float(np.abs(st.g0).max()))
    return st if sub == 1 else settle(sub)
