"""result.h5: a run's arrays in SI with a ``units`` attribute on every dataset, and reading it back.

Layout: root attributes ``software_version``, ``config`` (the TOML text as run), ``mode``, ``title``,
``created_utc``, ``summary`` (the summary.json text) and ``complete`` (written last); ``/grid`` (x, y, t),
``/seed``, ``/steps/NNN`` (after each step), ``/beam`` (beam figures per step), ``/output`` (pulsed: the
beam after the last step, per time slice: fluence, B-integral and, with diffraction, the field), ``/media/NAME`` (gain before and after), ``/fibre/NAME``, ``/train`` and
``/provenance`` (what reproduces the run: :mod:`ampmodel.output.provenance`). The README's "Reading the
outputs" lists every dataset.

The file is built in memory and written through ``atomic.hdf5_file`` (temporary name in the same folder, flushed, then
renamed) so that a folder never holds a file that looks complete but is not.
"""
from __future__ import annotations

import json
import os
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from ampmodel._version import __version__
from ampmodel.output.atomic import COMPLETE_ATTR, hdf5_file
from ampmodel.output.provenance import provenance

if TYPE_CHECKING:
    from ampmodel.description import Config
    from ampmodel.output.result import FibreRecord, Result


def _dataset(group, name: str, data: np.ndarray, units: str, **attrs: Any):
    ds = group.create_dataset(name, data=data, compression="gzip", compression_opts=1,
                              shuffle=True) if np.ndim(data) >= 2 else group.create_dataset(name, data=data)
    ds.attrs["units"] = units
    for k, v in attrs.items():
        ds.attrs[k] = v
    return ds


def write_hdf5(result: Result, path: Path, attrs: Mapping[str, Any] | None = None, full_beam: bool = True) -> None:
    """Write result.h5 in the layout of the module docstring (SI units, a ``units`` attribute on every dataset).

    ``attrs``: further root attributes (a sweep's point files record their index and values).
    ``full_beam``: write the beam after the last step per time slice (``/output/fluence`` and
    ``/output/b_integral``, what a chained stage takes); a sweep's point files leave it out (it would
    multiply the folder's size; ``ampmodel rerun`` of a point writes it).
    The file is built in memory, written under a temporary name and renamed when whole (``atomic.hdf5_file``); its last
    write is the root attribute ``complete = True``.
    """
    with hdf5_file(path) as f:
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
        _grid_and_seed(f, result, cw)
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
        _output_beam(f, result, full_beam)
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
            _upper_state(mg, m)
            if m.pump_intensity_W_m2 is not None:
                _dataset(mg, "pump_intensity", m.pump_intensity_W_m2, "W/m^2",
                         meaning="mean pump intensity in each voxel, all pump passes (side pumping: the "
                                 "intensity that gives the voxel's unbleached absorbed rate, alpha0*I/(h*nu))")
            _thermal(mg, m)
        if result.fibres:
            _write_fibres(f.create_group("fibre"), result.fibres)
        if result.train:
            tg = f.create_group("train")
            for name, (data, units) in result.train.items():
                _dataset(tg, name, np.asarray(data), units)
        f.attrs[COMPLETE_ATTR] = True        # last: a file without it is not whole


def _output_beam(f, result: Result, full_beam: bool) -> None:
    """/output: the beam after the last step (pulsed): the fluence of each time slice, its B-integral
    and, with diffraction, the field (what a chained stage takes as its seed, config/chain.py);
    without ``full_beam`` the field only."""
    if result.output_field is None and (result.output_fluence is None or not full_beam):
        return
    o = f.create_group("output")
    o.attrs["meaning"] = "the beam after the last step (a later stage's seed.from takes it)"
    field = result.output_field
    if field is not None and result.config.mode == "cw":
        _dataset(o, "field", field, "sqrt(W/m^2)",
                 meaning="complex field after the last step (one slice); |field|^2 is the intensity in W/m^2")
        return
    if field is not None:
        _dataset(o, "field", field, "sqrt(J/m^2)",
                 meaning="complex field of each time slice after the last step; |field|^2 is the slice's fluence in J/m^2")
        if not full_beam:
            return
        ds = o.create_dataset("fluence", shape=field.shape, dtype=float, compression="gzip", compression_opts=1,
                              shuffle=True, chunks=(1,) + field.shape[1:])
        for t in range(field.shape[0]):          # slice by slice: no second beam in memory
            ds[t] = field[t].real ** 2 + field[t].imag ** 2
    else:
        ds = _dataset(o, "fluence", result.output_fluence, "J/m^2")
    ds.attrs["units"] = "J/m^2"
    ds.attrs["meaning"] = "fluence carried by each time slice after the last step (t, y, x)"
    if result.output_b_integral is not None:
        _dataset(o, "b_integral", result.output_b_integral, "rad",
                 meaning="B-integral each time slice has accumulated at each pixel (t, y, x), mean power of the slice")


def _seed_copy(s, result: Result) -> None:
    """/seed/from: the beam a chained run took from an earlier result (seed.from), with where it came
    from: ``ampmodel rerun`` takes it from here (config/chain.py: read_copy)."""
    beam = result.config.seed.beam
    if beam is None:
        return
    g = s.create_group("from")
    g.attrs["origin"] = json.dumps(dict(beam.origin))
    g.attrs["notes"] = json.dumps([str(n) for n in beam.notes])
    g.attrs["meaning"] = "the seed this run took from an earlier run's result (seed.from), as it took it"
    for name, data, units in (("fluence", beam.fluence_J_m2, "J/m^2"), ("b_integral", beam.b_integral_rad, "rad"),
                              ("field", beam.complex_field, "sqrt(J/m^2)"), ("intensity", beam.intensity_W_m2, "W/m^2")):
        if data is not None:
            _dataset(g, name, data, units)


def _measured_traces(s, seed) -> None:
    """A measured pulse's and spectrum's traces as the run used them (a later stage that takes its seed
    from this file rebuilds the same time slices and wavelengths from them: config/chain.py)."""
    if seed.pulse_trace is not None:
        x, p = (np.asarray(a, dtype=float) for a in seed.pulse_trace)
        _dataset(s, "pulse_trace_time", x, "1", meaning="measured pulse: time from its peak in units of its FWHM")
        _dataset(s, "pulse_trace_power", p, "1", meaning="measured pulse: power over its peak")
        s.attrs["pulse_trace_outside"] = seed.pulse_trace_outside
    if seed.spectrum_trace is not None:
        wl, d = (np.asarray(a, dtype=float) for a in seed.spectrum_trace)
        _dataset(s, "spectrum_trace_wavelength", wl, "m", meaning="measured spectrum: wavelengths")
        _dataset(s, "spectrum_trace_density", d, "1", meaning="measured spectrum: density over its peak")


def _thermal(group, m) -> None:
    """/media/NAME/heat, /temperature_rise and /opd: the heat density, the temperature rise above the
    coolant and the thermal optical path difference of one trip (cw runs with a pump)."""
    if m.heat_W_m3 is not None:
        _dataset(group, "heat", m.heat_W_m3, "W/m^3", meaning="heat density of each voxel in the steady state")
    if m.temperature_rise_K is not None:
        _dataset(group, "temperature_rise", m.temperature_rise_K, "K",
                 meaning="temperature rise above the coolant of each voxel")
    if m.opd_m is not None:
        _dataset(group, "opd", m.opd_m, "m", meaning="thermal optical path difference of one trip, "
                                                     "integral of dn/dT * temperature rise along z")


def _upper_state(group, m) -> None:
    """/media/NAME/upper_state_fraction_initial and _final: N2/Nt of each voxel, from the gain maps
    through g = (σe + σa)·N2 − σa·Nt (the record's ions; nothing where the doping is not known)."""
    ions = m.ions
    if ions is None or not ions.nt_per_m3:
        return
    for when, gain in (("initial", m.gain_initial_per_m), ("final", m.gain_final_per_m)):
        fraction = ions.upper_fraction(gain)
        if m.mask is not None:
            fraction = np.where(m.mask[None, :, :], fraction, 0.0)
        _dataset(group, f"upper_state_fraction_{when}", fraction, "1",
                 meaning="N2/Nt of each voxel (0 outside the clear aperture: no medium there)")


def _grid_and_seed(f, result: Result, cw: bool) -> None:
    """/grid (x, y, t, a chirped seed's wavelengths) and /seed (its map, power and spectrum)."""
    g = f.create_group("grid")
    _dataset(g, "x", result.x_m, "m")
    _dataset(g, "y", result.y_m, "m")
    if not cw:
        _dataset(g, "t", result.t_s, "s")
    if result.wavelength_m is not None:
        _dataset(g, "wavelength", result.wavelength_m, "m", meaning="wavelength of each time slice (chirped seed)")
    s = f.create_group("seed")
    seed = result.config.seed
    s.attrs["wavelength"] = seed.wavelength_m
    s.attrs["wavelength_units"] = "m"
    _seed_copy(s, result)
    if cw:
        _dataset(s, "intensity", result.seed_intensity_W_m2, "W/m^2")
        return
    if seed.duration_s is not None:
        s.attrs.update(duration=seed.duration_s, duration_units="s", shape=seed.shape,
                       bandwidth=seed.bandwidth_m or 0.0, bandwidth_units="m", chirp=seed.chirp)
    _measured_traces(s, seed)
    _dataset(s, "fluence", result.seed_fluence_J_m2, "J/m^2")
    _dataset(s, "power", result.seed_power_W, "W")
    if result.seed_spectrum_J_m is not None:
        _dataset(s, "spectrum", result.seed_spectrum_J_m, "J/m", meaning="spectral energy density at /grid/wavelength")


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
    """The /fibre/NAME groups: powers, ASE and inversion along each fibre."""
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
        out["seed"] = {k: v[()] for k, v in f["seed"].items() if isinstance(v, h5py.Dataset)}
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
