"""A measured seed profile: ``seed.profile = "file"`` with a ``[seed.measured_profile]`` table.

The camera frame (and a dark frame, a phase map) is read as data from one of these formats, chosen by
the file's extension:

- ``.csv`` / ``.txt``: numbers only, comma-separated, one row of pixels per line; blank lines and
  lines starting with ``#`` are skipped;
- ``.npy``: a 2-D numeric array (``numpy.save``; nothing pickled is read);
- ``.png``, ``.tif``, ``.tiff``: a greyscale image, 8 or 16 bits (or 32-bit integer or float TIFF),
  read with Pillow; colour images and multi-frame files are refused;
- ``.h5`` / ``.hdf5``: one 2-D dataset, named by ``dataset`` (``dark_dataset``, ``phase_dataset``).

Relative paths are taken from the config file's folder. Only regular files of at most
:data:`MAX_BYTES` are read, of at least :data:`MIN_SIDE` and at most :data:`MAX_SIDE` pixels a side and
:data:`MAX_PIXELS` in all. Every problem names the key and the file; nothing of a file's content is
shown but a short excerpt of a wrong CSV line.

Repeatability: each array as read is kept as CSV text in ``Config.data_files`` (key: the path as
written, with ``[dataset]`` for HDF5), so result.h5 holds it and ``ampmodel rerun`` repeats the run
without the file; sweep points and tolerance samples get the arrays inline (``image``, ``dark``,
``phase`` in the table: :func:`inline_profile`), read once by the main process.
"""
from __future__ import annotations

import functools
import math
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ampmodel.config import schema as S
from ampmodel.config.checks import Problems, check_table, join_path, show
from ampmodel.description import Grid, MeasuredProfile
from ampmodel.kernels import measured_profile as kmp

MAX_BYTES = 128 * 2**20
MAX_SIDE = 4096
MAX_PIXELS = 2048 * 2048
MIN_SIDE = 8
MIN_PIXELS_ACROSS = 4.0          # the beam's D4σ must span at least this many camera pixels
FORMATS = {".csv": "CSV", ".txt": "CSV", ".npy": "NumPy .npy", ".png": "PNG image", ".tif": "TIFF image",
           ".tiff": "TIFF image", ".h5": "HDF5", ".hdf5": "HDF5"}
PATH = "seed.measured_profile"
DATASET_KEYS = {"file": "dataset", "dark_file": "dark_dataset", "phase_file": "phase_dataset"}


class FrameProblem(Exception):
    """A frame that cannot be used; the message says why (and where, in a CSV file)."""


# ----------------------------------------------------------------------------------------------
# Reading one frame
# ----------------------------------------------------------------------------------------------

def parse_csv(text: str) -> np.ndarray:
    """A 2-D array from CSV text: numbers only, comma-separated rows, ``#`` comments and blank lines skipped."""
    rows: list[list[float]] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = stripped.split(",")
        if rows and len(fields) != len(rows[0]):
            raise FrameProblem(f"line {number}: {len(fields)} values where the first row has {len(rows[0])}: "
                               f"{show(stripped, 32)}")
        try:
            values = [float(f) for f in fields]
        except ValueError:
            raise FrameProblem(f"line {number}: not numbers separated by commas: {show(stripped, 32)}") from None
        if not all(math.isfinite(v) for v in values):
            raise FrameProblem(f"line {number}: nan and inf are not allowed")
        rows.append(values)
        if len(rows) > MAX_SIDE:
            raise FrameProblem(f"more than {MAX_SIDE} rows: crop or bin the frame")
    if not rows:
        raise FrameProblem("no rows of numbers")
    return np.array(rows, dtype=float)


def _read_image(path: Path) -> np.ndarray:
    from PIL import Image, UnidentifiedImageError
    try:
        with Image.open(path) as img:
            if getattr(img, "n_frames", 1) > 1:
                raise FrameProblem(f"holds {img.n_frames} frames; save the one frame to use")
            if img.mode not in ("L", "I", "I;16", "I;16B", "I;16L", "F"):
                raise FrameProblem(f"a {img.mode} image: save the frame as greyscale (8 or 16 bits)")
            if img.size[0] * img.size[1] > MAX_PIXELS:
                raise FrameProblem(f"{img.size[0]} x {img.size[1]} pixels: more than {MAX_PIXELS} in all; "
                                   "crop or bin the frame")
            return np.asarray(img)
    except Image.DecompressionBombError:
        raise FrameProblem(f"declares far more than {MAX_PIXELS} pixels: crop or bin the frame") from None
    except (UnidentifiedImageError, OSError, ValueError) as exc:
        raise FrameProblem(f"cannot be read as an image ({type(exc).__name__}); save it as a greyscale PNG or "
                           "TIFF") from None


def _read_hdf5(path: Path, dataset: str | None, dataset_key: str) -> np.ndarray:
    import h5py
    try:
        with h5py.File(path, "r") as f:
            names: list[str] = []
            f.visititems(lambda n, o: names.append("/" + n) if isinstance(o, h5py.Dataset) else None)
            listing = ", ".join(names[:5]) + (", ..." if len(names) > 5 else "") if names else "no datasets"
            if dataset is None:
                raise FrameProblem(f'an HDF5 file: give {dataset_key} = "/path/of/the/frame" (it holds {listing})')
            node = f.get(dataset)
            if not isinstance(node, h5py.Dataset):
                raise FrameProblem(f"no dataset {dataset} in it (it holds {listing}); set {dataset_key}")
            if len(node.shape) != 2:
                raise FrameProblem(f"the dataset {dataset} has shape {node.shape}, not 2-D: give one frame")
            if node.dtype.kind not in "iuf":
                raise FrameProblem(f"the dataset {dataset} holds {node.dtype}, not numbers")
            if node.size > MAX_PIXELS:
                raise FrameProblem(f"the dataset {dataset} has {node.size} pixels, more than {MAX_PIXELS}: crop "
                                   "or bin the frame")
            return node[()]
    except OSError as exc:
        raise FrameProblem(f"cannot be read as HDF5 ({exc.strerror or type(exc).__name__})") from None


def _read_npy(path: Path) -> np.ndarray:
    try:
        return np.load(path, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise FrameProblem(f"cannot be read as a .npy array ({type(exc).__name__}); save it with numpy.save "
                           "as a plain numeric array") from None


def check_frame(array: Any) -> np.ndarray:
    """The frame as a float array: 2-D, numeric, finite, of an allowed size."""
    a = np.asarray(array)
    if a.dtype.kind not in "iuf" or a.dtype == bool:
        raise FrameProblem(f"holds {a.dtype} values, not real numbers")
    if a.ndim != 2:
        raise FrameProblem(f"an array of shape {a.shape}, not a 2-D frame")
    if min(a.shape) < MIN_SIDE or max(a.shape) > MAX_SIDE or a.size > MAX_PIXELS:
        raise FrameProblem(f"{a.shape[1]} x {a.shape[0]} pixels: a frame needs {MIN_SIDE} to {MAX_SIDE} a side "
                           f"and at most {MAX_PIXELS} in all (crop or bin it)")
    a = a.astype(float)
    if not np.isfinite(a).all():
        raise FrameProblem("holds nan or inf values")
    return a


def read_frame(path: Path, dataset: str | None = None, dataset_key: str = "dataset") -> tuple[np.ndarray, str]:
    """(the frame as read, in float; the name of its format) of the file ``path``.

    Raises
    ------
    FrameProblem
        Not a regular file, too large, an unknown extension, an unreadable or unsuitable frame.
    """
    if not path.exists():
        raise FrameProblem(f"no such file ({path}); a relative path is taken from the config file's folder")
    if not path.is_file():
        raise FrameProblem(f"not a regular file ({path})")
    kind = FORMATS.get(path.suffix.lower())
    if kind is None:
        raise FrameProblem(f"unknown format '{path.suffix}': give a {', '.join(sorted(set(FORMATS)))} file")
    if dataset is not None and kind != "HDF5":
        raise FrameProblem(f"{dataset_key} applies to HDF5 files only; remove it")
    try:
        if path.stat().st_size > MAX_BYTES:
            raise FrameProblem(f"larger than {MAX_BYTES // 2**20} MiB: crop or bin the frame")
        if kind == "CSV":
            array = parse_csv(path.read_bytes().decode("utf-8-sig"))
        elif kind == "NumPy .npy":
            array = _read_npy(path)
        elif kind == "HDF5":
            array = _read_hdf5(path, dataset, dataset_key)
        else:
            array = _read_image(path)
    except UnicodeDecodeError:
        raise FrameProblem("not UTF-8 text: a CSV frame is plain text") from None
    except PermissionError as exc:
        raise FrameProblem(f"cannot be read ({exc.strerror}); check the file's permissions") from None
    return check_frame(array), kind


def frame_text(array: np.ndarray, what: str) -> str:
    """CSV text of a frame (exact: integers as integers, other values to the last digit), headed by ``what``."""
    integral = bool(np.all(array == np.round(array))) and float(np.abs(array).max(initial=0.0)) < 2.0**53
    fmt = (lambda v: str(int(v))) if integral else repr
    rows = "\n".join(",".join(fmt(v) for v in row) for row in array.tolist())
    return f"# {what}, {array.shape[0]} rows x {array.shape[1]} columns\n{rows}\n"


def stored_key(name: str, dataset: str | None) -> str:
    """The key of a frame in ``Config.data_files``: the path as written, ``[dataset]`` after it for HDF5."""
    return f"{name} [{dataset}]" if dataset else name


# ----------------------------------------------------------------------------------------------
# The table
# ----------------------------------------------------------------------------------------------

def _frame(p: Problems, table: dict, key: str, unit: str) -> np.ndarray | None:
    """The frame of ``key`` (a file key, or its inline array), recorded in ``p.data_files``; None if absent
    or with a problem."""
    inline = next(k for k, v in S.MEASURED_PROFILE_ARRAYS.items() if v == key)
    dataset_key = DATASET_KEYS[key]
    if inline in table:
        if key in table:
            p.add(join_path(PATH, inline), f"both {key} and {inline} given: give one", table[inline])
            return None
        try:
            return check_frame(table[inline])
        except (FrameProblem, ValueError) as exc:
            p.add(join_path(PATH, inline), f"must be a 2-D array of numbers (rows of pixels): {exc}",
                  table[inline])
            return None
    if key not in table:
        if dataset_key in table:
            p.add(join_path(PATH, dataset_key), f"given without {key}", table[dataset_key])
        return None
    name, dataset = table[key], table.get(dataset_key)
    path = Path(name).expanduser()
    if not path.is_absolute() and p.folder is not None:
        path = Path(p.folder) / path
    try:
        array, kind = read_frame(path, dataset, dataset_key)
    except FrameProblem as exc:
        p.add(join_path(PATH, key), str(exc), name)
        return None
    p.data_files[stored_key(name, dataset)] = frame_text(
        array, f"{key} {name}" + (f" [{dataset}]" if dataset else "") + f" as read ({kind}), in {unit}")
    return array


def measured_profile(p: Problems, table: Any) -> MeasuredProfile | None:
    """The [seed.measured_profile] table of a seed with ``profile = "file"``; None with problems."""
    if not isinstance(table, dict):
        p.add(PATH, 'missing: profile = "file" needs a [seed.measured_profile] table with file and pixel_um')
        return None
    before = len(p)
    v = check_table(p, table, PATH, S.MEASURED_PROFILE, skip=tuple(S.MEASURED_PROFILE_ARRAYS))
    if "file" not in table and "image" not in table:
        p.add(join_path(PATH, "file"), "missing: the camera frame (CSV, .npy, PNG, TIFF or HDF5 with dataset)")
    if "dark_file" in table and "background" in table:
        p.add(PATH, "both background and dark_file given: subtract a number or a dark frame, not both")
    if len(p) > before:
        return None
    image = _frame(p, table, "file", "counts")
    dark = _frame(p, table, "dark_file", "counts")
    phase = _frame(p, table, "phase_file", v["phase_unit"])
    if image is None or len(p) > before:
        return None
    for key, other in (("dark_file", dark), ("phase_file", phase)):
        if other is not None and other.shape != image.shape:
            p.add(join_path(PATH, key), f"a frame of {other.shape[1]} x {other.shape[0]} pixels, the image has "
                                        f"{image.shape[1]} x {image.shape[0]}: give a frame of the same shape",
                  table.get(key, "(inline)"))
            return None
    cleaned = kmp.clean(image, v["background"], dark, v["clip"])
    if not cleaned.max() > 0.0:
        key = "dark_file" if dark is not None else "background"
        p.add(join_path(PATH, key), f"nothing is left of the image after the background is subtracted (its "
                                    f"largest value is {image.max():g} counts): lower the background or check "
                                    "the file", table.get(key, "(inline)"))
        return None
    pixel_x = v["pixel_um"] * 1e-6
    pixel_y = v.get("pixel_y_um", v["pixel_um"]) * 1e-6
    if phase is not None and v["phase_unit"] == "waves":
        phase = phase * (2.0 * math.pi)
    profile = MeasuredProfile(cleaned=cleaned, pixel_x_m=pixel_x, pixel_y_m=pixel_y, phase_rad=phase,
                              source=str(table.get("file", "an inline image")))
    dx, dy = profile.d4sigma_m()
    if min(dx / pixel_x, dy / pixel_y) < MIN_PIXELS_ACROSS:
        p.add(join_path(PATH, "file"), f"the beam's D4σ spans only {min(dx / pixel_x, dy / pixel_y):.1f} pixels "
                                       f"of the frame (fewer than {MIN_PIXELS_ACROSS:g}): the frame cannot resolve "
                                       "its shape; image it larger on the camera", table.get("file", "(inline)"))
        return None
    return profile


def check_with_grid(p: Problems, grid: Grid, profile: MeasuredProfile, mode: str | None) -> None:
    """What a measured profile needs of the grid: diffraction for a phase map, a window wider than the beam."""
    if profile.phase_rad is not None and not grid.diffraction:
        p.add(join_path(PATH, "phase_file"), "a measured wavefront acts on the optical field: set grid.diffraction = "
                                      "true, or remove it")
    dx, dy = profile.d4sigma_m()
    if max(dx, dy) >= grid.width_m:
        p.add("grid.width_mm", f"the measured beam (D4σ {dx * 1e3:.3g} x {dy * 1e3:.3g} mm from "
                               f"{profile.source}) is not smaller than the window: widen grid.width_mm to at least "
                               f"{2 * max(dx, dy) * 1e3:.3g} mm, or check seed.measured_profile.pixel_um",
              grid.width_m * 1e3)


# ----------------------------------------------------------------------------------------------
# Inline arrays (sweep points, tolerance samples, reruns)
# ----------------------------------------------------------------------------------------------

def inline_profile(raw: dict, files: Mapping[str, str] | None = None, folder: str | Path | None = None, *,
                   read: bool = True) -> None:
    """Put the frames of ``raw``'s [seed.measured_profile] (a *validated* config dict, changed in place)
    inline: each ``file``, ``dark_file``, ``phase_file`` (and its dataset key) replaced by ``image``,
    ``dark``, ``phase``, from the stored text in ``files`` where it is there, else (``read``) read again
    from the file (``folder`` for relative paths); without ``read`` a frame not stored stays a file."""
    seed = raw.get("seed")
    table = seed.get("measured_profile") if isinstance(seed, dict) else None
    if not isinstance(table, dict):
        return
    for inline, key in S.MEASURED_PROFILE_ARRAYS.items():
        if not isinstance(table.get(key), str):
            continue
        name, dataset = table[key], table.get(DATASET_KEYS[key])
        text = (files or {}).get(stored_key(name, dataset))
        if text is None and not read:
            continue
        del table[key]
        table.pop(DATASET_KEYS[key], None)
        if text is not None:
            table[inline] = _rows(text)
        else:
            path = Path(name).expanduser()
            if not path.is_absolute() and folder:
                path = Path(folder) / path
            table[inline] = _as_rows(read_frame(path, dataset)[0])


def _as_rows(array: np.ndarray) -> list:
    """A frame as nested lists, integers where every value is one (shorter in the TOML of a point)."""
    if np.all(array == np.round(array)) and float(np.abs(array).max(initial=0.0)) < 2.0**53:
        return array.astype(np.int64).tolist()
    return array.tolist()


@functools.lru_cache(maxsize=4)
def _rows(text: str) -> list:
    """The rows of a stored frame, parsed once for all the points of a sweep (the lists are shared:
    nothing changes them)."""
    return _as_rows(parse_csv(text))


# ----------------------------------------------------------------------------------------------
# What `ampmodel check` says of it
# ----------------------------------------------------------------------------------------------

def _padded(image: np.ndarray, pixel_x: float, pixel_y: float, half_m: float) -> np.ndarray:
    """The image with zeros around it, so that it reaches ``half_m`` from its centroid on every side."""
    xi, yi = kmp.centred_axes(image, pixel_x, pixel_y)
    pads = [(max(0, math.ceil((half_m + a[0]) / d)), max(0, math.ceil((half_m - a[-1]) / d)))
            for a, d in ((yi, pixel_y), (xi, pixel_x))]
    return np.pad(image, pads)


def describe(config: Any) -> list[str]:
    """Lines for ``ampmodel check``: the measured beam's D4σ (ISO 11146 second moments) and fill
    factor over the clear aperture of the first medium passed, as read from the frame and as
    resampled on the grid, and the part of the frame's energy the window holds."""
    from ampmodel.description import passed_media
    from ampmodel.kernels import beam_figures, beam_shapes
    seed = config.seed
    mp = seed.measured
    if mp is None:
        return []
    names = passed_media(config.steps)
    medium = config.medium(names[0]) if names else config.media[0]
    ny, nx = mp.cleaned.shape
    dx, dy = mp.d4sigma_m()
    image = _padded(mp.cleaned, mp.pixel_x_m, mp.pixel_y_m, 0.5 * medium.diameter_m)
    xi, yi = kmp.centred_axes(image, mp.pixel_x_m, mp.pixel_y_m)
    inside = beam_shapes.aperture_mask(xi, yi, medium.aperture, medium.diameter_m)
    _, fill_file = beam_figures.aperture_figures(image, inside, mp.pixel_x_m * mp.pixel_y_m)
    x = beam_shapes.pixel_centres(config.grid.points, config.grid.width_m)
    shape, _ = mp.on_grid(x, x)
    gx, gy = beam_figures.d4sigma(shape, x, x)
    area = float((x[1] - x[0]) ** 2)
    _, fill_grid = beam_figures.aperture_figures(shape, beam_shapes.aperture_mask(x, x, medium.aperture,
                                                                                  medium.diameter_m), area)
    held = float(shape.sum() * area * mp.cleaned.max() / (mp.cleaned.sum() * mp.pixel_x_m * mp.pixel_y_m))
    pitch = f"{mp.pixel_x_m * 1e6:g}" + (f" x {mp.pixel_y_m * 1e6:g}" if mp.pixel_y_m != mp.pixel_x_m else "")
    f = mp.cleaned
    rim = max(f[0].max(), f[-1].max(), f[:, 0].max(), f[:, -1].max()) / f.max()
    edge = ([f"  seed profile: the beam reaches the frame's edge ({rim:.1e} of its peak there): part of it may "
             "lie off the camera; raise clip if that is noise"] if rim > 1e-3 else [])
    return [f"  seed profile from {mp.source} ({nx} x {ny} pixels of {pitch} µm): D4σ {dx * 1e3:.4g} x "
            f"{dy * 1e3:.4g} mm (x, y), fill factor {fill_file:.3g} of the clear aperture of medium {medium.name}",
            f"  seed profile on the grid ({config.grid.points} x {config.grid.points} pixels of "
            f"{(x[1] - x[0]) * 1e6:.4g} µm): D4σ {gx * 1e3:.4g} x {gy * 1e3:.4g} mm, fill factor {fill_grid:.3g}; "
            f"the window holds {100 * held:.4g} % of the frame's energy (the seed energy is put in it)"] + edge
