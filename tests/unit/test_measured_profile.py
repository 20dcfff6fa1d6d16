"""A measured seed profile (seed.profile = "file"): reading the frame in every format, background and
noise floor, the second-moment diameter, the resampling onto the grid, the measured wavefront, and the
frames carried inline for sweep points and reruns.

References beside each check: the D4σ of a Gaussian beam exp(−2r²/w²) is its 1/e² diameter 2w
(ISO 11146-1, second-moment width); the same beam cut below a fraction c of its peak keeps the second
moment ⟨r²⟩ = (w²/2)·(1 − (1 + u)·c)/(1 − c), u = ln(1/c) (the integral of u·e^(−u) over 0..ln(1/c),
worked out in the docstring of kernels/measured_profile.py); scipy.ndimage.map_coordinates (order 1)
is the independent reference of the linear resampling.
"""
from __future__ import annotations

import math

import h5py
import numpy as np
import pytest
from PIL import Image
from scipy import ndimage

from ampmodel.config.checks import ConfigError
from ampmodel.config.files import inline_files, inline_stored_files
from ampmodel.config.load import load_config
from ampmodel.kernels import beam_figures, beam_shapes
from ampmodel.kernels import measured_profile as kmp

PIXEL_UM = 50.0
DIAMETERS_M = (3.0e-3, 2.6e-3)          # 1/e² diameters 2w in x and y: the D4σ of the Gaussian
CENTRE_M = (0.35e-3, -0.2e-3)           # off the frame's centre
PEAK, DARK, NOISE = 40000.0, 600.0, 8.0


def gaussian_frame(nx: int = 160, ny: int = 140, peak: float = PEAK, dark: float = DARK, noise: float = NOISE,
                   seed: int = 7) -> np.ndarray:
    """Counts of an elliptical Gaussian beam on a camera: ``peak`` above a ``dark`` level, Gaussian
    read noise of ``noise`` counts rms (float; rounded by the writers)."""
    x = (np.arange(nx) - (nx - 1) / 2) * PIXEL_UM * 1e-6 - CENTRE_M[0]
    y = (np.arange(ny) - (ny - 1) / 2) * PIXEL_UM * 1e-6 - CENTRE_M[1]
    wx, wy = DIAMETERS_M[0] / 2, DIAMETERS_M[1] / 2
    beam = peak * np.exp(-2 * (x[None, :] / wx) ** 2 - 2 * (y[:, None] / wy) ** 2)
    return beam + dark + np.random.default_rng(seed).normal(0.0, noise, beam.shape)


def write_frame(folder, kind: str, frame: np.ndarray) -> tuple[str, dict]:
    """Write ``frame`` as ``kind``; (file name, extra keys of the table)."""
    counts = np.clip(np.round(frame), 0, 65535).astype(np.uint16)
    if kind == "png16":
        Image.fromarray(counts).save(folder / "beam.png")
        return "beam.png", {}
    if kind == "tiff":
        Image.fromarray(counts).save(folder / "beam.tif")
        return "beam.tif", {}
    if kind == "csv":
        rows = "\n".join(",".join(str(v) for v in row) for row in counts)
        (folder / "beam.csv").write_text("# camera frame, counts\n" + rows + "\n")
        return "beam.csv", {}
    if kind == "npy":
        np.save(folder / "beam.npy", frame)                      # floats as they are
        return "beam.npy", {}
    if kind == "hdf5":
        with h5py.File(folder / "beam.h5", "w") as f:
            f.create_dataset("frames/0", data=np.zeros_like(counts))
            f.create_dataset("frames/1", data=counts)
        return "beam.h5", {"dataset": "/frames/1"}
    raise ValueError(kind)


def config_dict(table: dict, *, mode: str = "pulsed", points: int = 64, width_mm: float = 9.0,
                diffraction: bool = False) -> dict:
    seed = {"energy_J": 0.01, "duration_ns": 10.0} if mode == "pulsed" else {"power_W": 2.0}
    grid = {"points": points, "width_mm": width_mm, "diffraction": diffraction}
    if mode == "pulsed":
        grid["time_slices"] = 8
    return {
        "title": "measured seed", "mode": mode, "grid": grid,
        "medium": [{"name": "rod", "length_mm": 50.0, "diameter_mm": 6.0, "slices": 4, "small_signal_gain": 3.0,
                    "material": "Nd:YAG"}],
        "seed": {**seed, "profile": "file", "measured_profile": {"pixel_um": PIXEL_UM, **table}},
        "step": [{"kind": "pass", "medium": "rod"}],
    }


# ----------------------------------------------------------------------------------------------
# Reading and D4σ
# ----------------------------------------------------------------------------------------------

@pytest.mark.parametrize("kind", ["png16", "csv", "npy", "tiff", "hdf5"])
def test_a_noisy_gaussian_frame_gives_its_d4sigma_in_every_format(kind, tmp_path):
    """ISO 11146-1: the D4σ of exp(−2r²/w²) is 2w. With the dark level subtracted and the default noise
    floor (0.1 % of the peak, 75 times the read noise), the frame gives 2w within 1 % in x and y."""
    name, extra = write_frame(tmp_path, kind, gaussian_frame())
    config = load_config(config_dict({"file": name, "background": DARK, **extra}), folder=tmp_path)
    dx, dy = config.seed.measured.d4sigma_m()
    assert dx == pytest.approx(DIAMETERS_M[0], rel=0.01)
    assert dy == pytest.approx(DIAMETERS_M[1], rel=0.01)
    assert config.seed.diameter_m == pytest.approx(0.5 * (dx + dy), rel=1e-12)   # the seed's diameter
    assert len(config.data_files) == 1                                           # the frame as read, kept


def test_a_dark_frame_is_subtracted_like_a_number(tmp_path):
    """A dark frame of the same shape (the dark level and its own noise) gives the same D4σ within 1 %."""
    name, _ = write_frame(tmp_path, "png16", gaussian_frame())
    dark = np.clip(np.round(np.full((140, 160), DARK) + np.random.default_rng(3).normal(0, NOISE, (140, 160))),
                   0, None).astype(np.uint16)
    Image.fromarray(dark).save(tmp_path / "dark.png")
    config = load_config(config_dict({"file": name, "dark_file": "dark.png"}), folder=tmp_path)
    dx, dy = config.seed.measured.d4sigma_m()
    assert (dx, dy) == pytest.approx(DIAMETERS_M, rel=0.01)
    assert set(config.data_files) == {"beam.png", "dark.png"}


def test_without_the_background_the_d4sigma_is_far_off(tmp_path):
    """The dark level left in (a flat pedestal over the frame) inflates the second moment: the check
    above is not met by accident."""
    name, _ = write_frame(tmp_path, "png16", gaussian_frame())
    config = load_config(config_dict({"file": name}), folder=tmp_path)
    assert config.seed.measured.d4sigma_m()[0] > 1.2 * DIAMETERS_M[0]


@pytest.mark.parametrize("clip", [1e-3, 1e-2, 0.05])
def test_the_noise_floor_shortens_a_gaussian_as_the_closed_form_says(clip):
    """A noiseless Gaussian cut below c·peak: D4σ/2w = sqrt((1 − (1 + u)c)/(1 − c)), u = ln(1/c)
    (second moment of the truncated Gaussian, module docstring); pixels of w/30."""
    w, pixel = 1.0e-3, 1.0e-3 / 30
    x = (np.arange(301) - 150) * pixel
    frame = np.exp(-2 * (x[None, :] ** 2 + x[:, None] ** 2) / w ** 2)
    cleaned = kmp.clean(frame, clip=clip)
    u = math.log(1 / clip)
    expected = 2 * w * math.sqrt((1 - (1 + u) * clip) / (1 - clip))
    dx, dy = kmp.image_d4sigma(cleaned, pixel, pixel)
    assert dx == pytest.approx(expected, rel=2e-3)
    assert dy == pytest.approx(expected, rel=2e-3)


def test_an_8_bit_frame_is_read(tmp_path):
    """An 8-bit greyscale PNG (mode L): rounding to whole counts cuts the wings below half a count, a
    noise floor of 0.5/peak; the D4σ then follows the truncated-Gaussian closed form (0.5 %)."""
    frame = gaussian_frame(peak=250.0, dark=0.0, noise=0.0)
    Image.fromarray(np.round(frame).astype(np.uint8)).save(tmp_path / "beam8.png")
    config = load_config(config_dict({"file": "beam8.png", "clip": 0.0}), folder=tmp_path)
    c = 0.5 / 250.0
    factor = math.sqrt((1 - (1 + math.log(1 / c)) * c) / (1 - c))
    dx, dy = config.seed.measured.d4sigma_m()
    assert dx == pytest.approx(DIAMETERS_M[0] * factor, rel=5e-3)
    assert dy == pytest.approx(DIAMETERS_M[1] * factor, rel=5e-3)


def test_a_rectangular_pixel_pitch(tmp_path):
    """pixel_y_um scales y alone."""
    name, _ = write_frame(tmp_path, "npy", gaussian_frame())
    square = load_config(config_dict({"file": name, "background": DARK}), folder=tmp_path)
    tall = load_config(config_dict({"file": name, "background": DARK, "pixel_y_um": 2 * PIXEL_UM}), folder=tmp_path)
    (sx, sy), (tx, ty) = square.seed.measured.d4sigma_m(), tall.seed.measured.d4sigma_m()
    assert tx == pytest.approx(sx, rel=1e-12)
    assert ty == pytest.approx(2 * sy, rel=1e-12)


# ----------------------------------------------------------------------------------------------
# On the grid
# ----------------------------------------------------------------------------------------------

@pytest.mark.parametrize("points", [48, 64, 200])
def test_the_seed_map_holds_the_energy_and_is_centred(points, tmp_path):
    """The seed map sums to the seed energy (round-off), its centroid is on the grid's centre (within
    a thousandth of a grid pixel) and its D4σ is the frame's within 1 %."""
    name, _ = write_frame(tmp_path, "png16", gaussian_frame())
    config = load_config(config_dict({"file": name, "background": DARK}, points=points), folder=tmp_path)
    x = beam_shapes.pixel_centres(points, config.grid.width_m)
    shape, phase = config.seed.measured.on_grid(x, x)
    assert phase is None
    seed_map = beam_shapes.seed_fluence(x, x, "file", config.seed.diameter_m, 8.0, config.seed.energy_J, shape)
    dx_grid = x[1] - x[0]
    assert seed_map.sum() * dx_grid ** 2 == pytest.approx(config.seed.energy_J, rel=1e-12)
    cx, cy = kmp.centroid(seed_map, x, x)
    assert abs(cx) < 1e-3 * dx_grid and abs(cy) < 1e-3 * dx_grid
    grid_d4 = beam_figures.d4sigma(seed_map, x, x)
    assert grid_d4 == pytest.approx(config.seed.measured.d4sigma_m(), rel=0.01)


def test_the_resampling_agrees_with_map_coordinates():
    """Linear interpolation through RegularGridInterpolator against scipy.ndimage.map_coordinates
    (order 1, zero outside), at the grid points expressed in the image's pixel indices."""
    rng = np.random.default_rng(11)
    image = rng.random((30, 40))
    image[5:25, 8:30] += 3.0
    px, py = 20e-6, 25e-6
    x = beam_shapes.pixel_centres(33, 1.2e-3)
    ours = kmp.resample(image, image, px, py, x, x)
    xi, yi = kmp.centred_axes(image, px, py)
    cols = (x - xi[0]) / px
    rows = (x - yi[0]) / py
    rr, cc = np.meshgrid(rows, cols, indexing="ij")
    inside = (rr >= 0) & (rr <= image.shape[0] - 1) & (cc >= 0) & (cc <= image.shape[1] - 1)
    ref = ndimage.map_coordinates(image, [rr, cc], order=1, mode="nearest")
    assert np.allclose(ours[inside], ref[inside], rtol=1e-12, atol=1e-12)
    assert np.all(ours[~inside] == 0.0)
    assert inside.sum() > 200 and (~inside).sum() > 100


def test_pixel_scale_structure_is_averaged_not_aliased():
    """A Gaussian frame with a ±30 % checkerboard at the camera's pixel scale (20 µm pixels, 140 µm grid
    pixels on the camera's pixel centres: a box of 7): on the grid the map's peak-to-mean modulation
    (kernels/beam_figures.py) is the smooth Gaussian's within 1 %; sampled without the average, each
    grid pixel takes one camera pixel and the modulation is off by more than 5 %."""
    pixel = 20e-6
    xi = (np.arange(301) - 150) * pixel
    smooth = np.exp(-2 * (xi[None, :] ** 2 + xi[:, None] ** 2) / 1.2e-3 ** 2)
    checker = smooth * (1 + 0.3 * (-1.0) ** np.add.outer(np.arange(301), np.arange(301)))
    x = beam_shapes.pixel_centres(63, 63 * 7 * pixel)
    assert kmp.box_pixels(x[1] - x[0], pixel) == 7
    everywhere = np.ones((63, 63), dtype=bool)

    def modulation(shape):
        return beam_figures.aperture_figures(shape, everywhere, (x[1] - x[0]) ** 2)[0]
    reference = modulation(kmp.on_grid(smooth, pixel, pixel, x, x)[0])
    assert reference == pytest.approx(2.0, rel=0.02)                      # a Gaussian's peak over its mean
    assert modulation(kmp.on_grid(checker, pixel, pixel, x, x)[0]) == pytest.approx(reference, rel=0.01)
    sampled = kmp.resample(checker, checker, pixel, pixel, x, x)
    assert abs(modulation(sampled) / reference - 1) > 0.05


@pytest.mark.parametrize("points, width_m, box", [(100, 4.0e-3, 3), (58, 4.06e-3, 7), (40, 4.0e-3, 9)])
def test_the_average_widens_the_beam_by_the_box_second_moment(points, width_m, box):
    """Averaging over n camera pixels adds the box's variance (n² − 1)/12 pixels² to σ² of the beam
    (the variance of a discrete uniform distribution of n values); the linear sampling adds a little
    more (a fraction of a pixel²): σ²(grid) − σ²(frame) within 0.35 pixel² of (n² − 1)/12."""
    pixel = 10e-6
    xi = (np.arange(401) - 200) * pixel
    frame = np.exp(-2 * (xi[None, :] ** 2 + xi[:, None] ** 2) / 1e-3 ** 2)
    x = beam_shapes.pixel_centres(points, width_m)
    assert kmp.box_pixels(x[1] - x[0], pixel) == box
    d_frame = kmp.image_d4sigma(frame, pixel, pixel)[0]
    d_grid = beam_figures.d4sigma(kmp.on_grid(frame, pixel, pixel, x, x)[0], x, x)[0]
    added = (d_grid ** 2 - d_frame ** 2) / 16 / pixel ** 2
    assert added == pytest.approx((box ** 2 - 1) / 12, abs=0.35)


def test_a_measured_wavefront_is_applied_to_the_start_field(tmp_path):
    """A phase map of a diverging wavefront of radius R, given in waves, r²/(2Rλ): the start field's
    phase on the grid is that of kernels.diffraction.lens_phase(f = −R) (what curvature_mm gives),
    within the linear interpolation's error, and its fluence is the frame's."""
    from ampmodel.kernels import diffraction as kd
    from ampmodel.pulsed.run import PulsedLayout
    frame = gaussian_frame(noise=0.0)
    np.save(tmp_path / "beam.npy", frame)
    xi, yi = kmp.pixel_axes(frame.shape, PIXEL_UM * 1e-6, PIXEL_UM * 1e-6)
    radius_m, wavelength_m = 2.0, 1064e-9
    xc, yc = xi - CENTRE_M[0], yi - CENTRE_M[1]              # the beam's centre
    waves = (xc[None, :] ** 2 + yc[:, None] ** 2) / (2 * radius_m * wavelength_m)
    np.save(tmp_path / "phase.npy", waves)
    table = {"file": "beam.npy", "background": DARK, "phase_file": "phase.npy", "phase_unit": "waves"}
    config = load_config(config_dict(table, diffraction=True), folder=tmp_path)
    layout = PulsedLayout.build(config)
    x = layout.x_m
    lens = kd.lens_phase(x, x, wavelength_m, -radius_m)
    fluence = np.abs(layout.seed_field) ** 2
    bright = fluence > 1e-2 * fluence.max()
    residual = np.angle(layout.seed_field * np.conj(lens))[bright]
    assert np.ptp(residual) < 0.05                            # rad, over the beam
    assert fluence.sum() * layout.pixel_area_m2 == pytest.approx(config.seed.energy_J, rel=1e-12)


def test_the_seed_grid_warnings_see_the_measured_beam(tmp_path):
    """The seed's diameter is the measured D4σ (2.8 mm): 12 pixels of 0.5 mm across 6 mm is under 8
    pixels across it, and a 3.6 mm window cuts the beam where it is still 8 % of its peak: both give
    the grid-coarse warning; a 9 mm window of 64 pixels neither."""
    from ampmodel.simulation import simulate
    name, _ = write_frame(tmp_path, "npy", gaussian_frame())

    def grid_warnings(points, width_mm):
        config = load_config(config_dict({"file": name, "background": DARK}, points=points, width_mm=width_mm),
                             folder=tmp_path)
        notices = simulate(config).summary["notices"]
        return [n["text"] for n in notices if n["code"] == "grid-coarse"]
    assert grid_warnings(64, 9.0) == []
    assert any("pixels across the seed diameter" in w for w in grid_warnings(12, 6.0))
    assert any("the seed reaches the edge of the 3.6 mm window" in w for w in grid_warnings(64, 3.6))


def test_a_cw_seed_takes_the_measured_profile(tmp_path):
    """cw mode: the seed intensity map holds the seed power."""
    from ampmodel.simulation import simulate
    name, _ = write_frame(tmp_path, "csv", gaussian_frame())
    config = load_config(config_dict({"file": name, "background": DARK}, mode="cw", points=32), folder=tmp_path)
    result = simulate(config)
    x = beam_shapes.pixel_centres(32, config.grid.width_m)
    assert result.seed_intensity_W_m2.sum() * (x[1] - x[0]) ** 2 == pytest.approx(2.0, rel=1e-12)


# ----------------------------------------------------------------------------------------------
# Inline frames: sweep points and reruns
# ----------------------------------------------------------------------------------------------

def test_the_frames_go_inline_and_give_the_same_seed(tmp_path):
    """inline_files (sweep points, from the frames the config read) and inline_stored_files (a rerun,
    from the text result.h5 keeps) put the frames in the table; the config they give has the very
    same cleaned frame, and needs no file."""
    name, extra = write_frame(tmp_path, "hdf5", gaussian_frame())
    Image.fromarray(np.full((140, 160), 600, dtype=np.uint16)).save(tmp_path / "dark.png")
    config = load_config(config_dict({"file": name, "dark_file": "dark.png", **extra}), folder=tmp_path)
    assert set(config.data_files) == {"beam.h5 [/frames/1]", "dark.png"}
    swept = inline_files(config.raw, tmp_path, config.data_files)
    stored = inline_stored_files(config.raw, config.data_files)
    for raw in (swept, stored):
        table = raw["seed"]["measured_profile"]
        assert {"image", "dark"} <= set(table) and not {"file", "dataset", "dark_file"} & set(table)
        again = load_config(raw, folder=tmp_path / "elsewhere")
        assert np.array_equal(again.seed.measured.cleaned, config.seed.measured.cleaned)
        assert again.seed.diameter_m == config.seed.diameter_m
    assert config.raw["seed"]["measured_profile"]["file"] == "beam.h5"        # the original is left alone


def test_check_says_when_the_beam_reaches_the_frames_edge(tmp_path):
    """The dark level left in the frame (clip 0) reaches the frame's edge, and `check` says so; with the
    background subtracted it does not."""
    from ampmodel.config.profile import describe
    name, _ = write_frame(tmp_path, "png16", gaussian_frame())
    good = describe(load_config(config_dict({"file": name, "background": DARK}), folder=tmp_path))
    bad = describe(load_config(config_dict({"file": name, "clip": 0.0}), folder=tmp_path))
    assert len(good) == 2 and not any("frame's edge" in line for line in good)
    assert any("the beam reaches the frame's edge" in line for line in bad)


def test_an_hdf5_frame_needs_its_dataset(tmp_path):
    name, _ = write_frame(tmp_path, "hdf5", gaussian_frame())
    with pytest.raises(ConfigError) as info:
        load_config(config_dict({"file": name}), folder=tmp_path)
    assert 'seed.measured_profile.file = "beam.h5": an HDF5 file: give dataset = ' in str(info.value)
    assert "/frames/0, /frames/1" in str(info.value)
    with pytest.raises(ConfigError) as info:
        load_config(config_dict({"file": name, "dataset": "/frames/7"}), folder=tmp_path)
    assert "no dataset /frames/7 in it" in str(info.value) and "set dataset" in str(info.value)


@pytest.mark.parametrize("what, write, message", [
    ("colour", lambda p: Image.new("RGB", (32, 32)).save(p / "f.png"), "a RGB image: save the frame as greyscale"),
    ("ragged csv", lambda p: (p / "f.csv").write_text("1,2,3\n4,5\n"), "line 2: 2 values where the first row has 3"),
    ("text in csv", lambda p: (p / "f.csv").write_text("# ok\n1,2,x\n"), "line 2: not numbers separated by commas"),
    ("tiny", lambda p: np.save(p / "f.npy", np.ones((4, 4))), "a frame needs 8 to 4096 a side"),
    ("a point", lambda p: np.save(p / "f.npy", np.pad(np.ones((1, 1)), 10)), "the beam's D4σ spans only"),
])
def test_unusable_frames_are_bad_input(what, write, message, tmp_path):
    write(tmp_path)
    name = next(p.name for p in tmp_path.iterdir())
    with pytest.raises(ConfigError) as info:
        load_config(config_dict({"file": name}), folder=tmp_path)
    assert f'seed.measured_profile.file = "{name}": ' in str(info.value)
    assert message in str(info.value), str(info.value)


def test_a_fibre_layout_refuses_a_measured_profile():
    """A fibre's mode carries the signal: the table is refused, not ignored."""
    from pathlib import Path

    from ampmodel.config.checks import Problems
    from ampmodel.config.text import parse_toml
    raw = parse_toml((Path(__file__).resolve().parents[1] / "data" / "good_fibre.toml").read_text(), Problems("t"))
    raw["seed"]["measured_profile"] = {"file": "beam.png", "pixel_um": 5.0}
    with pytest.raises(ConfigError) as info:
        load_config(raw)
    assert "seed.measured_profile = {" in str(info.value) and "a fibre's mode carries the signal" in str(info.value)


def test_a_png_that_declares_a_huge_frame_is_refused_before_it_is_decoded(tmp_path):
    """A few hundred bytes that declare 20000 x 20000 16-bit pixels: refused from the header (no 800 MB
    array is made)."""
    import struct
    import zlib

    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    header = struct.pack(">IIBBBBB", 20000, 20000, 16, 0, 0, 0, 0)
    png = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", header) + chunk(b"IDAT", zlib.compress(b"")) + chunk(b"IEND", b"")
    (tmp_path / "huge.png").write_bytes(png)
    with pytest.raises(ConfigError) as info:
        load_config(config_dict({"file": "huge.png"}), folder=tmp_path)
    assert 'seed.measured_profile.file = "huge.png": ' in str(info.value)
    assert "pixels: crop or bin the frame" in str(info.value)
