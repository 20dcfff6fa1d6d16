"""The field path against Gaussian-beam optics, Fresnel diffraction and conservation laws.

References
----------
H. Kogelnik and T. Li, "Laser beams and resonators", Appl. Opt. 5, 1550 (1966):
w(z) = w0·sqrt(1 + (z/zR)²), zR = π·w0²·n/λ0; the q-law of a thin lens 1/q' = 1/q − 1/f and of free
space q' = q + d.
Fresnel diffraction (M. Born and E. Wolf, Principles of Optics, section 8.8; E. Hecht, Optics,
section 10.3): on the axis behind a circular aperture of radius a lit by a plane wave,
I/I0 = 4·sin²(π·a²/(2λz)); behind a slit |x| <= b, I/I0 = ½·|[C(v) + iS(v)] between v1 and v2|²
with v = (x' ∓ b)·sqrt(2/(λz)) (Fresnel integrals C, S: scipy.special.fresnel).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import fresnel

from ampmodel.beam.field import FieldBeam, start_beam
from ampmodel.beam.field_steps import field_aperture, field_lens, field_space
from ampmodel.description import Step
from ampmodel.kernels import diffraction as kd
from ampmodel.kernels.beam_figures import d4sigma
from ampmodel.pulsed.field_pass import pass_medium_field
from ampmodel.pulsed.passes import MediumState

WAVELENGTH = 1.0e-6


def axes(points: int, width_m: float) -> np.ndarray:
    return (np.arange(points) - (points - 1) / 2.0) * (width_m / points)


def field_beam(field2d: np.ndarray, width_m: float, time_slices: int = 1, wavelength_m: float = WAVELENGTH,
               dt_s: float = 1e-9) -> FieldBeam:
    x = axes(field2d.shape[-1], width_m)
    weights = np.full(time_slices, 1.0 / time_slices)
    return start_beam(field2d.astype(complex), weights, x, x, dt_s, wavelength_m, width_m)


def radius_from_d4sigma(beam: FieldBeam) -> float:
    dx4, dy4 = d4sigma(beam.fluence.sum(axis=0), beam.x_m, beam.y_m)
    return 0.25 * (dx4 + dy4)


# ------------------------------------------------------------------------------------------------
# Gaussian beams (Kogelnik & Li 1966)
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("z_over_zr", [0.5, 1.0, 2.0, 3.0])
def test_gaussian_radius_in_free_space(z_over_zr):
    """w(z) = w0·sqrt(1 + (z/zR)²) after a `space` step (Kogelnik & Li 1966), within 1 %."""
    w0, width = 0.4e-3, 10e-3
    x = axes(128, width)
    beam = field_beam(kd.gaussian_beam(x, x, w0, WAVELENGTH, 0.0), width)
    z_r = math.pi * w0 ** 2 / WAVELENGTH
    field_space(beam, Step(kind="space", index=0, length_m=z_over_zr * z_r))
    expected = w0 * math.sqrt(1.0 + z_over_zr ** 2)
    assert radius_from_d4sigma(beam) == pytest.approx(expected, rel=1e-2)
    assert abs(radius_from_d4sigma(beam) / expected - 1.0) < 1e-4      # what it really achieves


def test_gaussian_radius_inside_a_medium_uses_its_index():
    """In a medium of index n, zR = π·w0²·n/λ0 (Kogelnik & Li 1966): a pass without gain through 0.5 m of
    n = 1.82 widens the beam as the formula says, not as in air."""
    w0, width, n, length = 0.3e-3, 8e-3, 1.82, 0.5
    x = axes(128, width)
    beam = field_beam(kd.gaussian_beam(x, x, w0, WAVELENGTH, 0.0), width)
    slices = 8
    medium = MediumState(name="glass", ln_gain=np.zeros((slices, 128, 128)), mask=np.ones((128, 128), bool),
                         saturation_fluence_J_m2=1e4, slice_length_m=length / slices, loss_per_m=0.0, n2_m2_W=0.0)
    pass_medium_field(beam, medium, n)
    z_r = math.pi * w0 ** 2 * n / WAVELENGTH
    expected = w0 * math.sqrt(1.0 + (length / z_r) ** 2)
    in_air = w0 * math.sqrt(1.0 + (length / (z_r / n)) ** 2)
    assert radius_from_d4sigma(beam) == pytest.approx(expected, rel=1e-3)
    assert abs(radius_from_d4sigma(beam) - in_air) > 0.1 * expected


def q_law_focus(w0: float, focal: float, wavelength: float) -> tuple[float, float]:
    """Waist distance after a thin lens at the input waist, and the waist radius, from the q-law:
    q1 = i·zR, 1/q2 = 1/q1 − 1/f; the waist lies where Re(q2 + d) = 0 (Kogelnik & Li 1966)."""
    z_r = math.pi * w0 ** 2 / wavelength
    q2 = 1.0 / (1.0 / complex(0.0, z_r) - 1.0 / focal)
    d = -q2.real
    return d, math.sqrt(wavelength * q2.imag / math.pi)


def test_lens_focus_position_and_size_follow_the_q_law():
    """A Gaussian beam through a thin lens: the measured waist position and radius within 1 % of the
    q-law (Kogelnik & Li 1966). w²(z) of any beam is exactly quadratic in z (second moments), so the
    waist is the vertex of a parabola fitted to w² measured at planes around the focus."""
    w0, focal, width = 1.0e-3, 0.5, 8e-3
    points = 256
    x = axes(points, width)
    beam = field_beam(kd.gaussian_beam(x, x, w0, WAVELENGTH, 0.0), width)
    field_lens(beam, Step(kind="lens", index=0, focal_m=focal))
    d_ref, wf_ref = q_law_focus(w0, focal, WAVELENGTH)
    zs = np.linspace(d_ref - 0.03, d_ref + 0.03, 7)
    w2 = []
    position = 0.0
    for z in zs:
        field_space(beam, Step(kind="space", index=0, length_m=z - position))
        position = z
        w2.append(radius_from_d4sigma(beam) ** 2)
    a, b, c = np.polyfit(zs, w2, 2)
    z_waist = -b / (2 * a)
    w_waist = math.sqrt(c - b * b / (4 * a))
    assert z_waist == pytest.approx(d_ref, rel=1e-2)
    assert w_waist == pytest.approx(wf_ref, rel=1e-2)
    assert abs(z_waist / d_ref - 1) < 1e-3 and abs(w_waist / wf_ref - 1) < 5e-3


def test_seed_waist_offset_and_curvature():
    """A seed with its waist 0.6 m downstream starts at w0·sqrt(1 + (z/zR)²) and reaches w0 after 0.6 m;
    a seed given the same wavefront by its curvature R = z + zR²/z (negative: converging) and its
    size at the start does the same (Kogelnik & Li 1966)."""
    from ampmodel.kernels import beam_shapes

    w0, width, z = 0.5e-3, 8e-3, 0.6
    x = axes(128, width)
    z_r = math.pi * w0 ** 2 / WAVELENGTH
    field = beam_shapes.seed_start_field(x, x, "gaussian", 2 * w0, 8.0, 1e-3, WAVELENGTH, waist_m=z)
    beam = field_beam(field, width)
    w_start = w0 * math.sqrt(1 + (z / z_r) ** 2)
    assert radius_from_d4sigma(beam) == pytest.approx(w_start, rel=1e-4)
    field_space(beam, Step(kind="space", index=0, length_m=z))
    assert radius_from_d4sigma(beam) == pytest.approx(w0, rel=1e-3)

    curvature = -(z + z_r ** 2 / z)
    field = beam_shapes.seed_start_field(x, x, "gaussian", 2 * w_start, 8.0, 1e-3, WAVELENGTH, curvature_m=curvature)
    beam = field_beam(field, width)
    field_space(beam, Step(kind="space", index=0, length_m=z))
    assert radius_from_d4sigma(beam) == pytest.approx(w0, rel=1e-3)


def test_seed_m_squared_from_the_caustic():
    """A seed of M² = 3 (random phase screen): fitting W²(z) = W0² + (M²·λ/(π·W0))²·(z − z0)² to the
    second-moment radii along the propagation (ISO 11146-1 caustic method) gives M² = 3 within 3 %."""
    from ampmodel.kernels import beam_shapes

    w0, width, m2 = 0.6e-3, 12e-3, 3.0
    x = axes(192, width)
    beam = field_beam(beam_shapes.seed_start_field(x, x, "gaussian", 2 * w0, 8.0, 1e-3, WAVELENGTH, m_squared=m2), width)
    z_r_embedded = math.pi * w0 ** 2 / (m2 * WAVELENGTH)
    zs = np.linspace(0.0, 2.0 * z_r_embedded, 6)
    w2, position = [], 0.0
    for z in zs:
        field_space(beam, Step(kind="space", index=0, length_m=z - position))
        position = z
        w2.append(radius_from_d4sigma(beam) ** 2)
    a, b, c = np.polyfit(zs, w2, 2)
    w0_fit2 = c - b * b / (4 * a)
    m2_fit = math.pi * math.sqrt(w0_fit2 * a) / WAVELENGTH
    assert m2_fit == pytest.approx(m2, rel=3e-2)


# ------------------------------------------------------------------------------------------------
# conservation and identities
# ------------------------------------------------------------------------------------------------

def test_power_conserved_in_free_space_to_round_off():
    """|H| = 1 (Parseval): a beam far from the window edge keeps its energy to round-off, per time slice."""
    width = 10e-3
    x = axes(96, width)
    field = kd.gaussian_beam(x, x, 0.8e-3, WAVELENGTH, 0.0) * (1 + 0.3 * np.cos(2e3 * x))[None, :]
    beam = field_beam(field, width, time_slices=3)
    before = beam.fluence.sum(axis=(1, 2))
    field_space(beam, Step(kind="space", index=0, length_m=0.3))
    after = beam.fluence.sum(axis=(1, 2))
    assert np.max(np.abs(after / before - 1.0)) < 1e-12


def test_zero_length_returns_the_field():
    """A step of zero length: H = 1, and the FFT round trip returns the field to round-off."""
    width = 6e-3
    rng = np.random.default_rng(3)
    field = (rng.standard_normal((2, 64, 64)) + 1j * rng.standard_normal((2, 64, 64))) * 1e-3
    kx = kd.angular_frequencies(64, width)
    out = kd.propagate(field, kd.transfer_function(kx, kx, WAVELENGTH, 1.5, 0.0))
    assert np.max(np.abs(out - field)) < 1e-14 * np.max(np.abs(field)) * 64


def test_kerr_phase_of_a_flat_beam():
    """A flat beam (uniform over the whole window, so it does not diffract) through a medium of n2 without
    gain picks up the phase k0·n2·I·L, which is also its B-integral."""
    width, points, n2, length = 4e-3, 32, 3e-19, 0.05
    fluence, dt = 2e4, 1e-9                     # J/m² per slice and slice length: I = 2e13 W/m²
    field = np.full((points, points), math.sqrt(fluence), dtype=complex)
    x = axes(points, width)
    beam = FieldBeam(field=field[None].copy(), b_integral=np.zeros((1, points, points)), x_m=x, y_m=x,
                            dt_s=dt, wavelength_m=WAVELENGTH, width_m=width,
                            edge=np.ones((points, points)))        # no absorbing edge: a plane wave
    medium = MediumState(name="glass", ln_gain=np.zeros((10, points, points)), mask=np.ones((points, points), bool),
                         saturation_fluence_J_m2=1e4, slice_length_m=length / 10, loss_per_m=0.0, n2_m2_W=n2)
    pass_medium_field(beam, medium, 1.5)
    expected = 2 * math.pi / WAVELENGTH * n2 * (fluence / dt) * length
    phase = np.angle(beam.field[0] / math.sqrt(fluence))
    assert np.allclose(phase, expected, rtol=1e-10, atol=0)
    assert np.allclose(beam.b_integral, expected, rtol=1e-12)
    assert np.allclose(np.abs(beam.field), math.sqrt(fluence), rtol=1e-12)


# ------------------------------------------------------------------------------------------------
# Fresnel diffraction from hard edges
# ------------------------------------------------------------------------------------------------

def test_on_axis_intensity_behind_a_circular_aperture():
    """Plane wave through a hard circular aperture (radius a = 1 mm), then free space: the on-axis
    intensity follows I/I0 = 4·sin²(π·a²/(2λz)) (Fresnel zones; Born & Wolf 8.8, Hecht 10.3) through
    two maxima and two minima, within 0.06 of I0 at every plane (the grid's rim is 512 points over
    8 mm; the formula is paraxial, a/z <= 4e-3)."""
    a, width, points = 1e-3, 8e-3, 512
    beam = field_beam(np.ones((points, points)), width)
    field_aperture(beam, Step(kind="aperture", index=0, shape="round", diameter_m=2 * a))
    start = beam.field.copy()
    fresnel_numbers = [3.0, 2.5, 2.0, 1.5, 1.0, 0.75]
    centre = points // 2
    measured, expected = [], []
    for nf in fresnel_numbers:
        z = a * a / (WAVELENGTH * nf)
        beam.field = start.copy()
        field_space(beam, Step(kind="space", index=0, length_m=z))
        on_axis = float(np.mean(beam.fluence[0, centre - 1:centre + 1, centre - 1:centre + 1]))
        measured.append(on_axis)
        expected.append(4.0 * math.sin(math.pi * nf / 2.0) ** 2)
    assert np.max(np.abs(np.array(measured) - np.array(expected))) < 0.06, (measured, expected)


def test_slit_lineout_against_fresnel_integrals():
    """Plane wave through a hard slit |x| <= b (uniform in y, so diffraction is one-dimensional), then
    free space: the lineout I(x)/I0 matches ½·|[C + iS](v2) − [C + iS](v1)|², v = (x ∓ b)·sqrt(2/(λz))
    (scipy.special.fresnel), rms error below 1 % of I0 over the central 6 mm."""
    b, width, points, z = 1.0e-3, 12e-3, 1024, 0.4
    x = axes(points, width)
    slit = np.clip((b - np.abs(x)) / (x[1] - x[0]) + 0.5, 0.0, 1.0)      # grey edge pixels
    field = np.sqrt(slit)[None, :] * np.ones((points, 1))
    kx = kd.angular_frequencies(points, width)
    out = kd.propagate(field.astype(complex), kd.transfer_function(kx, kx, WAVELENGTH, 1.0, z))
    lineout = np.abs(out[points // 2]) ** 2
    scale = math.sqrt(2.0 / (WAVELENGTH * z))
    s2, c2 = fresnel((x + b) * scale)
    s1, c1 = fresnel((x - b) * scale)
    reference = 0.5 * ((c2 - c1) ** 2 + (s2 - s1) ** 2)
    window = np.abs(x) <= 3e-3
    rms = math.sqrt(np.mean((lineout[window] - reference[window]) ** 2))
    assert rms < 1e-2, rms
    assert reference[window].max() > 1.2          # the Fresnel fringes are there to be matched
