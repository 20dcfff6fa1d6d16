"""The Result of a run, and its files: result.h5 (SPEC section 4), summary.json, plots.

Files are written through ``atomic.target`` (temporary name in the same folder, flushed, then
renamed) so that a folder never holds a file that looks complete but is not; result.h5 carries the
root attribute ``complete = True``, written last.
"""
from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ampmodel._version import __version__
from ampmodel.output.atomic import COMPLETE_ATTR, target
from ampmodel.description import Config


@dataclass
class StepRecord:
    """The beam after one step.

    pulsed: fluence_J_m2 (Ny, Nx) fluence after the step; power_W (Nt,) mean power in each time slice
    after the step; b_integral_rad (Ny, Nx) largest accumulated B-integral over the time slices.
    cw: intensity_W_m2 (Ny, Nx) after the step; for passes, axis_intensity_W_m2 (Nz + 1,) the on-axis
    intensity at the medium's slice faces, at positions axis_z_m (m, from the face z = 0).
    datasets : more datasets of the step (pulsed), name -> (array, units), e.g. a repeat's energy
    after each round trip
    """

    index: int
    kind: str
    medium: str | None
    fluence_J_m2: np.ndarray | None = None
    power_W: np.ndarray | None = None
    b_integral_rad: np.ndarray | None = None
    intensity_W_m2: np.ndarray | None = None
    axis_z_m: np.ndarray | None = None
    axis_intensity_W_m2: np.ndarray | None = None
    datasets: dict[str, tuple[np.ndarray, str]] = field(default_factory=dict)


@dataclass
class FibreRecord:
    """A fibre along its length (SI; z from the end where the signal enters).

    z_m : (Nz + 1,) slice boundaries; ring_edges_m : (R + 1,) radii of the rings of the doped core
    cw: signal_W (Nz + 1,) the signal; pump_forward_W, pump_backward_W (Nz + 1,) or None; ase_forward_W,
    ase_backward_W (B, Nz + 1) the ASE in each spectral bin; inversion (R, Nz) N2/Nt of each ring and
    slice; inversion_pump_only (R, Nz) with the pump alone (no signal; ASE as configured).
    pulsed: pulse_energy_J (Nz + 1,); the pump and ASE just before a pulse; inversion (R, Nz) just before
    and inversion_after (R, Nz) just after a pulse; output_power_W (Nt,) the pulse leaving the fibre;
    recovery_t_s, recovery_mean_inversion the fibre-averaged N2/Nt over the period after a pulse.
    modal_gain_per_m : (Nz,) the signal's net gain coefficient Γ·(σe·N2 − σa·N1) − loss
    ase_wavelength_m, ase_bin_width_m : (B,) the ASE bins; attrs : scalars (mode-field radius, overlaps,
    saturation energy, solver figures)
    """

    name: str
    mode: str
    z_m: np.ndarray
    ring_edges_m: np.ndarray
    ase_wavelength_m: np.ndarray
    ase_bin_width_m: np.ndarray
    ase_forward_W: np.ndarray
    ase_backward_W: np.ndarray
    inversion: np.ndarray
    modal_gain_per_m: np.ndarray
    attrs: dict[str, Any] = field(default_factory=dict)
    signal_W: np.ndarray | None = None
    pulse_energy_J: np.ndarray | None = None
    pump_forward_W: np.ndarray | None = None
    pump_backward_W: np.ndarray | None = None
    inversion_pump_only: np.ndarray | None = None
    inversion_after: np.ndarray | None = None
    output_power_W: np.ndarray | None = None
    recovery_t_s: np.ndarray | None = None
    recovery_mean_inversion: np.ndarray | None = None


@dataclass
class MediumRecord:
    """A medium's gain coefficient before the first and after the last pass.

    gain_initial_per_m, gain_final_per_m : (Nz, Ny, Nx), g = sigma_e·N2 − sigma_a·N1 in 1/m
    (cw: the small-signal gain with the pump alone, and the saturated gain of the steady state)
    pump_intensity_W_m2 : cw with a pump: (Nz, Ny, Nx) mean pump intensity in each voxel (W/m²)
    """

    name: str
    gain_initial_per_m: np.ndarray
    gain_final_per_m: np.ndarray
    slice_length_m: float
    saturation_fluence_J_m2: float
    saturation_intensity_W_m2: float
    material: str
    sources: dict[str, str] = field(default_factory=dict)
    pump_intensity_W_m2: np.ndarray | None = None
    pumped_J: float = 0.0             # put into the upper state by the pump during the layout (h·nu_s per ion)
    decayed_J: float = 0.0            # lost by spontaneous decay during the layout


@dataclass
class Result:
    """Everything a run produced.

    x_m, y_m : (Nx,), (Ny,) pixel centres; t_s : (Nt,) time-slice centres (cw: empty)
    seed_fluence_J_m2 : (Ny, Nx); seed_power_W : (Nt,) (pulsed; None in cw)
    seed_intensity_W_m2 : (Ny, Nx) (cw; None in pulsed)
    steps : one StepRecord per step, in order; media : name -> MediumRecord
    summary : the summary.json dict (SPEC section 4)
    output_field : (Nt, Ny, Nx) complex field after the last step (diffraction runs; |E|² in J/m²)
    fibres : name -> FibreRecord, for layouts of fibres (SPEC section 6)
    train : pulse trains: datasets of the train, name -> (array, units), e.g. the energy of each
        pulse from the start of the train (empty for a single pulse)
    """

    config: Config
    x_m: np.ndarray
    y_m: np.ndarray
    t_s: np.ndarray
    seed_fluence_J_m2: np.ndarray
    seed_power_W: np.ndarray
    steps: list[StepRecord]
    media: dict[str, MediumRecord]
    summary: dict[str, Any]
    seed_intensity_W_m2: np.ndarray | None = None
    output_field: np.ndarray | None = None
    fibres: dict[str, FibreRecord] = field(default_factory=dict)
    train: dict[str, tuple[np.ndarray, str]] = field(default_factory=dict)

    def save(self, directory: str | os.PathLike, plots: bool = True) -> Path:
        """Write result.h5, summary.json and (optionally) plots/*.png into ``directory``.

        The directory is created; existing result files in it are never overwritten.
        """
        out = Path(directory)
        out.mkdir(parents=True, exist_ok=True)
        for name in ("result.h5", "summary.json"):
            if (out / name).exists():
                raise FileExistsError(f"{out / name} exists: a run never overwrites another")
        write_hdf5(self, out / "result.h5")
        write_json(self.summary, out / "summary.json")
        if plots:
            from ampmodel.plots.run import make_plots  # matplotlib only where it is used
            make_plots(self, out / "plots")
        return out


def write_json(data: dict[str, Any], path: Path) -> None:
    """Write ``data`` as indented JSON, atomically (``atomic.target``)."""
    with target(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(data, fh, indent=2, allow_nan=False)
            fh.write("\n")


def _dataset(group, name: str, data: np.ndarray, units: str, **attrs: Any):
    ds = group.create_dataset(name, data=data, compression="gzip", compression_opts=1,
                              shuffle=True) if np.ndim(data) >= 2 else group.create_dataset(name, data=data)
    ds.attrs["units"] = units
    for k, v in attrs.items():
        ds.attrs[k] = v
    return ds


def write_hdf5(result: Result, path: Path, attrs: Mapping[str, Any] | None = None) -> None:
    """Write result.h5 in SPEC section 4's layout (SI units, a ``units`` attribute on every dataset).

    ``attrs``: further root attributes (a sweep's point files record their index and values).
    The file is written under a temporary name and renamed when whole (``atomic.target``); its last
    write is the root attribute ``complete = True``.
    """
    import h5py

    with target(path) as tmp:
        with h5py.File(tmp, "w") as f:
            f.attrs["software_version"] = __version__
            f.attrs["config"] = result.config.text
            f.attrs["mode"] = result.config.mode
            f.attrs["title"] = result.config.title
            f.attrs["created_utc"] = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
            f.attrs["summary"] = json.dumps(result.summary)
            _provenance(f, result.config)
            for key, value in (attrs or {}).items():
                f.attrs[key] = value
            cw = result.config.mode == "cw"
            g = f.create_group("grid")
            _dataset(g, "x", result.x_m, "m")
            _dataset(g, "y", result.y_m, "m")
            if not cw:
                _dataset(g, "t", result.t_s, "s")
            s = f.create_group("seed")
            if cw:
                _dataset(s, "intensity", result.seed_intensity_W_m2, "W/m^2")
            else:
                _dataset(s, "fluence", result.seed_fluence_J_m2, "J/m^2")
                _dataset(s, "power", result.seed_power_W, "W")
            steps = f.create_group("steps")
            for rec in result.steps:
                sg = steps.create_group(f"{rec.index:03d}")
                sg.attrs["kind"] = rec.kind
                sg.attrs["medium"] = rec.medium or ""
                if cw:
                    _dataset(sg, "intensity", rec.intensity_W_m2, "W/m^2")
                    if rec.axis_intensity_W_m2 is not None:
                        _dataset(sg, "axis_z", rec.axis_z_m, "m")
                        _dataset(sg, "axis_intensity", rec.axis_intensity_W_m2, "W/m^2",
                                 meaning="on-axis intensity at the medium's slice faces, at axis_z")
                    continue
                _dataset(sg, "fluence", rec.fluence_J_m2, "J/m^2")
                _dataset(sg, "power", rec.power_W, "W")
                _dataset(sg, "b_integral", rec.b_integral_rad, "rad")
                for name, (data, units) in rec.datasets.items():
                    _dataset(sg, name, np.asarray(data), units)
            _beam_figures(f, result.summary)
            if result.output_field is not None:
                o = f.create_group("output")
                _dataset(o, "field", result.output_field, "sqrt(J/m^2)",
                         meaning="complex field of each time slice after the last step; |field|^2 is the "
                                 "slice's fluence in J/m^2")
            media = f.create_group("media")
            for name, m in result.media.items():
                mg = media.create_group(name)
                mg.attrs["material"] = m.material
                mg.attrs["material_sources"] = json.dumps(m.sources)
                attrs = dict(slice_length=m.slice_length_m, saturation_fluence=m.saturation_fluence_J_m2,
                             saturation_intensity=m.saturation_intensity_W_m2,
                             slice_length_units="m", saturation_fluence_units="J/m^2",
                             saturation_intensity_units="W/m^2")
                _dataset(mg, "gain_initial", m.gain_initial_per_m, "1/m", **attrs)
                _dataset(mg, "gain_final", m.gain_final_per_m, "1/m", **attrs)
                if m.pump_intensity_W_m2 is not None:
                    _dataset(mg, "pump_intensity", m.pump_intensity_W_m2, "W/m^2",
                             meaning="mean pump intensity in each voxel, all pump passes (side pumping: the "
                                     "intensity that gives the voxel's unbleached absorbed rate, alpha0*I/(h*nu))")
            if result.fibres:
                _write_fibres(f.create_group("fibre"), result.fibres)
            if result.train:
                tg = f.create_group("train")
                for name, (data, units) in result.train.items():
                    _dataset(tg, name, np.asarray(data), units)
            f.attrs[COMPLETE_ATTR] = True        # last: a file without it is not whole


def environment() -> dict[str, str]:
    """The versions of Python and of the libraries that compute a run, and the platform."""
    import platform

    import h5py
    import scipy
    return {"ampmodel": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "h5py": h5py.__version__, "platform": platform.platform()}


def provenance(config: Config) -> dict[str, str]:
    """What, with the root attributes ``config`` and ``software_version``, reproduces a run (README,
    "Reproducing a run"), each as JSON text (written as the text datasets ``/provenance/<name>``: they
    may exceed the 64 kB an HDF5 attribute holds).

    materials : medium name -> the material data it used (``materials.material_to_dict``: every value
        in SI, its sources, the spectrum)
    builtin_materials : the built-in materials the config named (``material = "..."`` or ``base``), as
        read from the material files, so that ``ampmodel rerun`` can use them again
    data_files : data files the config read (path as written -> their text)
    environment : versions of Python and the libraries, the platform
    config_source : the config file's path as given
    """
    from ampmodel.materials.material import material_to_dict
    return {
        "materials": json.dumps({m.name: material_to_dict(m.material) for m in config.media}),
        "builtin_materials": json.dumps({name: material_to_dict(m) for name, m in config.builtin_materials.items()}),
        "data_files": json.dumps(dict(config.data_files)),
        "environment": json.dumps(environment()),
        "config_source": json.dumps(config.source),
    }


def _provenance(f, config: Config) -> None:
    import h5py
    g = f.create_group("provenance")
    g.attrs["meaning"] = "what reproduces the run besides /config: JSON texts (README, Reproducing a run)"
    for name, text in provenance(config).items():
        ds = g.create_dataset(name, data=text, dtype=h5py.string_dtype())
        ds.attrs["units"] = "text"          # JSON text, not a quantity


def read_provenance(path: str | os.PathLike) -> dict[str, Any]:
    """The root attributes (``config``, ``summary`` parsed, ``software_version``, ``complete``, ...) and
    the ``/provenance`` entries (parsed) of a result file; entries it lacks are absent."""
    import h5py
    with h5py.File(path, "r") as f:
        out: dict[str, Any] = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
        if "summary" in out:
            out["summary"] = json.loads(out["summary"])
        if "provenance" in f:
            for name, ds in f["provenance"].items():
                value = ds[()]
                out[name] = json.loads(value.decode() if isinstance(value, bytes) else value)
    return out


_BEAM_KEYS = (("d4sigma_x", "d4sigma_x_mm", 1e-3, "m"), ("d4sigma_y", "d4sigma_y_mm", 1e-3, "m"),
              ("modulation", "modulation_peak_to_mean", 1.0, "1"), ("fill_factor", "fill_factor", 1.0, "1"))


def _beam_figures(f, summary: dict[str, Any]) -> None:
    """/beam/*: the beam figures of the seed (row 0) and after each step (rows 1...), from the summary."""
    rows = [summary.get("seed_beam") or {}] + [s for s in summary.get("steps", [])]
    if not rows[0] or any(key not in r for r in rows for _, key, _, _ in _BEAM_KEYS):
        return
    g = f.create_group("beam")
    g.attrs["rows"] = "seed, then after each step in order"
    for name, key, scale, units in _BEAM_KEYS:
        _dataset(g, name, np.array([r[key] * scale for r in rows]), units)


# (name in the file, FibreRecord field, units, meaning)
_FIBRE_DATASETS = (
    ("z", "z_m", "m", "slice boundaries along the fibre, from the signal's input end"),
    ("ring_edges", "ring_edges_m", "m", "radii of the ring boundaries of the doped core"),
    ("signal_power", "signal_W", "W", "signal power along the fibre"),
    ("pulse_energy", "pulse_energy_J", "J", "pulse energy along the fibre"),
    ("pump_forward_power", "pump_forward_W", "W", "pump launched at z = 0, along the fibre (pulsed: before a pulse)"),
    ("pump_backward_power", "pump_backward_W", "W", "pump launched at z = L, along the fibre (pulsed: before a pulse)"),
    ("ase_wavelength", "ase_wavelength_m", "m", "centre of each ASE bin"),
    ("ase_bin_width", "ase_bin_width_m", "m", "width of each ASE bin"),
    ("ase_forward_power", "ase_forward_W", "W", "forward ASE power in each bin along the fibre (bin, z)"),
    ("ase_backward_power", "ase_backward_W", "W", "backward ASE power in each bin along the fibre (bin, z)"),
    ("inversion", "inversion", "1", "N2/Nt of each ring in each slice (pulsed: just before a pulse)"),
    ("inversion_pump_only", "inversion_pump_only", "1", "N2/Nt with the pump alone (no signal; ASE as configured)"),
    ("inversion_after_pulse", "inversion_after", "1", "N2/Nt of each ring in each slice just after a pulse"),
    ("modal_gain", "modal_gain_per_m", "1/m", "net gain coefficient of the signal in each slice"),
    ("output_power", "output_power_W", "W", "power of the pulse leaving the fibre in each time slice"),
    ("recovery_t", "recovery_t_s", "s", "time after a pulse"),
    ("recovery_mean_inversion", "recovery_mean_inversion", "1", "fibre-averaged N2/Nt after a pulse"),
)


def _write_fibres(group, fibres: dict[str, FibreRecord]) -> None:
    """The /fibre/NAME groups (SPEC section 6): powers, ASE and inversion along each fibre."""
    for name, rec in fibres.items():
        fg = group.create_group(name)
        fg.attrs["mode"] = rec.mode
        for key, value in rec.attrs.items():
            fg.attrs[key] = value
        for key in ("mode_field_radius", "length", "saturation_energy"):
            if key in rec.attrs:
                fg.attrs[f"{key}_units"] = {"saturation_energy": "J"}.get(key, "m")
        for dset, attr, units, meaning in _FIBRE_DATASETS:
            value = getattr(rec, attr)
            if value is not None:
                _dataset(fg, dset, np.asarray(value, dtype=float), units, meaning=meaning)


def read_hdf5(path: str | os.PathLike) -> dict[str, Any]:
    """Read a result.h5 back into plain arrays (SI): {'attrs', 'grid', 'seed', 'steps', 'media'} and, for
    fibre layouts, 'fibre'."""
    import h5py

    out: dict[str, Any] = {"steps": {}, "media": {}, "beam": {}, "output": {}}
    with h5py.File(path, "r") as f:
        out["attrs"] = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
        out["grid"] = {k: f["grid"][k][()] for k in f["grid"]}
        out["seed"] = {k: f["seed"][k][()] for k in f["seed"]}
        for name, g in f["steps"].items():
            out["steps"][name] = {k: g[k][()] for k in g} | {"attrs": dict(g.attrs)}
        for group in ("beam", "output"):
            if group in f:
                out[group] = {k: f[group][k][()] for k in f[group]}
        for name, g in f["media"].items():
            out["media"][name] = {k: g[k][()] for k in g} | {"attrs": dict(g["gain_initial"].attrs)}
        if "fibre" in f:
            out["fibre"] = {name: {k: g[k][()] for k in g} | {"attrs": dict(g.attrs)} for name, g in f["fibre"].items()}
        if "train" in f:
            out["train"] = {k: f["train"][k][()] for k in f["train"]}
    return out
