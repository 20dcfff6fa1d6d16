"""The validated model description: frozen dataclasses, every quantity SI.

``config.load`` builds these from a TOML file (or a dict) after checking every key; everything
downstream (pumping, beams, solver, diagnostics, results) reads only these objects.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

from ampmodel.materials.material import Material


@dataclass(frozen=True)
class Grid:
    """Transverse window (square, ``points`` x ``points`` pixels) and time slicing.

    ``diffraction``: True carries the beam as a complex field (split-step angular spectrum);
    ``fft_workers``: threads of the field path, its transforms and gain steps (−1: all cores).
    """

    points: int = 128
    width_m: float = 12e-3
    time_slices: int = 64
    diffraction: bool = False
    fft_workers: int = -1


@dataclass(frozen=True)
class Pump:
    """A pump description that builds a gain map (rate equations: W. Koechner, Solid-State Laser
    Engineering).

    ``geometry``: "end" (Beer–Lambert along z) or "side" (transverse profile, uniform along z).
    ``energy_J``: pulsed: pump energy delivered in one pump pulse (power_W x duration when given as
    power), both ends together; None in cw mode.
    ``duration_s``: pulsed: pump pulse length (square pulse), for the storage efficiency; None in cw.
    ``power_W``: the continuous pump power (cw mode, or a continuous pump in pulsed mode); else None.
    ``absorption_per_m``: pump absorption coefficient (end pumping); None: from the material.
    ``back_reflectance``: end pumping, fraction of the transmitted pump sent back for a second pass.
    ``direction``: end pumping, where the pump enters: "forward" (z = 0), "backward" (z = L) or "both"
    (half of ``energy_J``/``power_W`` at each face).
    ``absorbed_fraction``: side pumping, fraction of the delivered pump absorbed in the medium.
    ``transfer_efficiency``: delivery/coupling efficiency from the pump source into the medium.
    ``quantum_efficiency``: upper-state ions created per absorbed pump photon.
    ``continuous``: a CW pump of ``power_W``, on all the time (``energy_J`` and ``duration_s`` are
    None); every pump of a cw-mode run is continuous. In pulsed mode a pump pulse ends when the seed
    pulse arrives; in a pulse train it repeats before each pulse.
    """

    geometry: str
    energy_J: float | None
    duration_s: float | None
    wavelength_m: float
    profile: str = "flat"            # "flat" | "gaussian" | "supergaussian" | "parabolic" (side only)
    diameter_m: float | None = None  # None: the medium's clear aperture
    order: float = 8.0
    absorption_per_m: float | None = None
    back_reflectance: float = 0.0
    direction: str = "forward"
    absorbed_fraction: float = 1.0
    transfer_efficiency: float = 1.0
    quantum_efficiency: float = 1.0
    power_W: float | None = None      # cw mode and continuous pumps: the delivered power
    continuous: bool = False


@dataclass(frozen=True)
class FibrePump:
    """The CW pump of a fibre (rate equations of C. R. Giles and E. Desurvire, J. Lightwave
    Technol. 9, 271 (1991)).

    ``power_W`` is launched at each pumped end: ``direction`` "forward" (at z = 0, with the signal),
    "backward" (at z = L) or "both" (power_W at each end). ``cladding``: launched into the inner
    cladding (overlap A_core/A_clad) instead of the core mode.
    """

    wavelength_m: float
    power_W: float
    direction: str = "forward"
    cladding: bool = False


@dataclass(frozen=True)
class Fibre:
    """What makes a medium a doped fibre (``Medium.kind == "fibre"``); SI units.

    The mode field comes from ``mode_field_diameter_m`` when given, else from ``core_na`` through
    Marcuse's formula at each wavelength. ``signal_overlap`` and ``pump_overlap`` override the
    computed overlaps (signal and ASE; pump). ``rings`` > 1 resolves the doped core radially (each
    ring its own population). ``ase_band_m`` is (shortest, longest) wavelength of the ASE bins.
    """

    core_diameter_m: float
    cladding_diameter_m: float | None = None
    core_na: float | None = None
    mode_field_diameter_m: float | None = None
    ase: bool = False
    ase_band_m: tuple[float, float] | None = None
    ase_bins: int = 40
    signal_overlap: float | None = None
    pump_overlap: float | None = None
    rings: int = 1
    pump: FibrePump | None = None


@dataclass(frozen=True)
class Medium:
    """One gain medium: a bulk rod or slab, or a doped fibre (``kind = "fibre"``, ``fibre`` set).

    A bulk medium has exactly one of the three gain specifications; a fibre's gain comes from its
    pump (``fibre.pump``), its ``length_m``, ``doping_per_m3`` and material (``diameter_m`` is then
    the core diameter).
    """

    name: str
    material: Material
    length_m: float
    diameter_m: float                 # clear aperture: diameter (round) or side (square)
    aperture: str = "round"           # "round" | "square"
    slices: int = 20
    loss_per_m: float = 0.0
    small_signal_gain: float | None = None
    stored_energy_J: float | None = None
    pump: Pump | None = None
    doping_per_m3: float | None = None  # overrides the material's typical doping
    kind: str = "bulk"
    fibre: Fibre | None = None
    cooling: str = "barrel"           # "barrel" (rod, 2-D radial flow) | "face" (disc, cooled at z = L)
    coolant_C: float = 20.0           # the cooled surface's temperature (°C)
    thermal_lens: bool = True         # the field path applies the thermal lens's phase on each pass


@dataclass(frozen=True, eq=False)
class MeasuredProfile:
    """A seed profile measured with a camera (``seed.profile = "file"``): the image cleaned
    (background subtracted, noise floor clipped: ``kernels/measured_profile.py``; the image as read
    is kept in ``Config.data_files``), the pixel pitch at the seed plane (m) and an optional phase map
    (rad, same shape). ``source`` names the file (for messages and ``check``)."""

    cleaned: Any                     # (Ny, Nx) >= 0, what the seed is made of
    pixel_x_m: float
    pixel_y_m: float
    phase_rad: Any = None            # (Ny, Nx) or None
    source: str = ""

    def d4sigma_m(self) -> tuple[float, float]:
        """D4σ (m) in x and y of the cleaned image (ISO 11146-1 second moments)."""
        from ampmodel.kernels.measured_profile import image_d4sigma
        return image_d4sigma(self.cleaned, self.pixel_x_m, self.pixel_y_m)

    def on_grid(self, x_m: Any, y_m: Any) -> tuple[Any, Any]:
        """(relative profile, phase in rad or None) on the grid, centred on the centroid."""
        from ampmodel.kernels.measured_profile import on_grid
        return on_grid(self.cleaned, self.pixel_x_m, self.pixel_y_m, x_m, y_m, self.phase_rad)


@dataclass(frozen=True)
class SeedBeam:
    """A seed taken from an earlier run's result file (``seed.from``, read by config/chain.py), SI.

    fluence_J_m2 : pulsed: (Nt, Ny, Nx) the fluence each time slice carries; cw: None
    b_integral_rad : pulsed: (Nt, Ny, Nx) the B-integral the beam has accumulated (zeros: none known)
    complex_field : pulsed with diffraction: (Nt, Ny, Nx) complex, |E|² = fluence; None: the fluence only
    intensity_W_m2 : cw: (Ny, Nx) the intensity map; pulsed: None
    origin : what the summary's ``seed_from`` records (the file, its SHA-256, its creation time and
        software version, the step taken, how the beam was rebuilt)
    notes : notes the run gives about the beam (``seed-from`` notices)
    """

    fluence_J_m2: Any = None
    b_integral_rad: Any = None
    complex_field: Any = None
    intensity_W_m2: Any = None
    origin: Mapping[str, Any] = field(default_factory=dict)
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Seed:
    """The input pulse (pulsed) or beam (cw)."""

    wavelength_m: float
    energy_J: float | None = None     # pulsed
    power_W: float | None = None      # cw
    duration_s: float | None = None   # pulsed: FWHM (gaussian, sech2) or full width (flat)
    shape: str = "gaussian"           # "gaussian" | "flat" | "sech2" | "file" (pulse_trace)
    profile: str = "gaussian"         # "gaussian" | "flat" | "supergaussian" | "file" (measured)
    order: float = 8.0                # supergaussian order
    diameter_m: float = 1e-3          # 2w (1/e² intensity diameter); flat: hard-edged diameter
    # where the seed is taken (the start plane of the layout); at most one of the two is set:
    waist_m: float | None = None      # distance from the start plane to the waist (> 0: downstream)
    curvature_m: float | None = None  # wavefront radius at the start (> 0 diverging, < 0 converging)
    m_squared: float = 1.0            # beam quality M² (> 1: a random phase screen, see kernels/beam_shapes.py)
    phase_screen_seed: int = 0        # random seed of that phase screen
    repetition_rate_Hz: float | None = None   # pulses per second: a pulse train (None: one pulse)
    # a stretched pulse: the FWHM of its spectrum, swept linearly across the pulse (None: narrowband),
    # λ(t) = λ0 ± bandwidth·t/duration from the pulse centre; "up": longer wavelengths later
    bandwidth_m: float | None = None
    chirp: str = "up"
    # a measured pulse (shape "file", [seed.measured_pulse]): its trace cut to the time window, times in
    # units of its FWHM (duration_s) from its peak and power relative to the peak; the fraction of the
    # trace's energy outside the window (config/measured.py)
    pulse_trace: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    pulse_trace_outside: float = 0.0
    # a measured spectrum ([seed.measured_spectrum]): wavelengths (m) and spectral density relative to
    # its peak; bandwidth_m is then its FWHM and wavelength_m its centroid
    spectrum_trace: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    # profile = "file": the measured profile (diameter_m is then its D4σ, mean of x and y)
    measured: MeasuredProfile | None = None
    beam: SeedBeam | None = None      # seed.from: the earlier run's beam (the fields above are its own)


@dataclass(frozen=True)
class Step:
    """One element of the layout. Fields not used by a kind keep their defaults.

    kinds: "pass" (medium, reverse), "loss" (transmission), "aperture" (shape, diameter_m, and
    order for a soft edge), "space" (length_m), "lens" (focal_m), "filter" (focal_m,
    pinhole_diameter_m), "relay" (magnification), "repeat" (steps, count or until = "peak" with
    max_count, round_trip_s, and on the fluence path mode_diameter_m, the cavity's TEM00 mode the
    beam is re-formed on after each round trip). Optics may carry a damage fluence for the warning.

    ``delay_s`` is the time the step takes before the next step begins (the media are pumped and
    decay meanwhile); a step inside a repeat has ``parent`` set to the repeat's index and ``index``
    counting within the repeat.
    """

    kind: str
    index: int
    name: str = ""
    medium: str | None = None
    reverse: bool = False
    transmission: float = 1.0
    shape: str = "round"              # aperture: "round" | "square"
    diameter_m: float | None = None   # aperture: diameter (round) or side (square)
    length_m: float = 0.0             # space
    focal_m: float | None = None      # lens, filter
    order: float | None = None        # aperture: super-Gaussian order of a soft edge (None: hard)
    pinhole_diameter_m: float | None = None   # filter
    magnification: float = 1.0        # relay
    damage_fluence_J_m2: float | None = None
    damage_pulse_s: float | None = None
    damage_intensity_W_m2: float | None = None   # cw runs
    delay_s: float = 0.0
    steps: tuple["Step", ...] = ()     # repeat: the steps of one round trip
    count: int | None = None          # repeat: a fixed number of round trips ...
    until: str | None = None          # ... or "peak": stop after the round trip of largest energy
    max_count: int = 1000             # repeat with until: safety limit on the round trips
    round_trip_s: float | None = None  # repeat: time of one round trip (None: the sum of the delays)
    mode_diameter_m: float | None = None  # repeat: the cavity's TEM00 mode, 1/e² diameter (None: no mode)
    parent: int | None = None         # index of the enclosing repeat

    @property
    def round_trip_time_s(self) -> float:
        """A repeat's round-trip time: ``round_trip_s`` or the sum of its steps' delays."""
        inner = sum(s.delay_s for s in self.steps)
        return max(self.round_trip_s or 0.0, inner)

    @property
    def most_round_trips(self) -> int:
        """The largest number of round trips a repeat can make."""
        return self.count if self.count is not None else self.max_count


@dataclass(frozen=True)
class Solver:
    """Settings of the cw steady-state iteration (the [solver] table; cw mode only).

    max_iterations : sweeps of the whole layout before the run gives up
    tolerance : converged when the largest change of any voxel's gain coefficient in one sweep is
        below ``tolerance`` times the largest small-signal gain coefficient
    damping : under-relaxation factor of the first sweeps (1: none); halved automatically, down to
        1/64, whenever the change grows from one sweep to the next
    """

    max_iterations: int = 1000
    tolerance: float = 1e-9
    damping: float = 1.0


@dataclass(frozen=True)
class Train:
    """How a pulse train (``seed.repetition_rate_Hz``) is solved.

    ``tolerance``: the output repeats when pulse energies agree to this relative difference.
    ``max_pulses``: the largest number of pulses run one after another from the start of the train.
    ``method``: "auto" (a direct solution of the fixed point where it applies, then accelerated
    iteration) or "iterate" (accelerated iteration only).
    """

    tolerance: float = 1e-6
    max_pulses: int = 200
    method: str = "auto"


@dataclass(frozen=True)
class Limits:
    """Thresholds of the warnings (common practice; each may be changed in a [limits] table)."""

    damage_fraction: float = 0.5          # warn above this fraction of the (scaled) damage fluence
    damage_scaling_exponent: float = 0.5  # damage fluence ~ (tau/tau_ref)**exponent
    b_integral_step_rad: float = 2.0      # per step (one pass)
    b_integral_total_rad: float = 3.0     # whole layout
    clipped_fraction: float = 0.01        # aperture clips more than this fraction of the energy
    pixels_across_beam: float = 8.0       # fewer pixels across the beam diameter
    transverse_gain_length: float = 3.0   # g0 x clear-aperture width: parasitic-oscillation risk
    window_edge_fraction: float = 1e-3    # diffraction: energy fraction reaching the absorbing window edge
    sampling_limit_fraction: float = 1e-3 # diffraction: energy fraction near the grid's sampling limit
    ase_fraction: float = 0.1             # fibres: ASE leaving a fibre, as a fraction of its signal output
    gain_without_ase_dB: float = 30.0     # fibres with ase = false: small-signal gain above which ASE matters
    cavity_beam_change_fraction: float = 0.05  # repeat without a cavity mode: D4σ change over the round trips
    # self-focusing is a warning when Marburger's collapse distance is below this many times the path
    # through the medium above the critical power (an estimate), else a note
    self_focusing_length_factor: float = 2.0
    pulse_clipped_fraction: float = 0.01  # measured pulse: energy of its trace left outside the time window
    pulse_end_fraction: float = 0.02      # measured pulse: power at the ends of its trace, over its peak
    mute: tuple[str, ...] = ()            # notice codes (ampmodel.notices.CODES) left out of warnings and notes


@dataclass(frozen=True)
class Config:
    """A whole validated run description."""

    title: str
    mode: str
    grid: Grid
    media: tuple[Medium, ...]
    seed: Seed
    steps: tuple[Step, ...]
    limits: Limits = field(default_factory=Limits)
    solver: Solver = field(default_factory=Solver)
    train: Train = field(default_factory=Train)
    text: str = ""                    # the TOML text as run (after --set)
    source: str = "<dict>"            # the file it came from
    raw: Mapping[str, Any] = field(default_factory=dict)
    folder: str = ""                  # relative paths of data files are taken from here
    builtin_materials: Mapping[str, Any] = field(default_factory=dict)   # name -> Material, as used
    data_files: Mapping[str, str] = field(default_factory=dict)          # path as written -> text read

    def medium(self, name: str) -> Medium:
        for m in self.media:
            if m.name == name:
                return m
        raise KeyError(name)


def passed_media(steps: tuple[Step, ...]) -> list[str]:
    """Names of the media that the steps pass through (repeats included), in order of first pass."""
    names: list[str] = []
    for step in steps:
        for inner in (step.steps if step.kind == "repeat" else (step,)):
            if inner.kind == "pass" and inner.medium not in names:
                names.append(inner.medium)
    return names


def longest_layout_time_s(steps: tuple[Step, ...]) -> float:
    """The longest time the steps can take (s): their delays, each repeat at its most round trips."""
    total = 0.0
    for step in steps:
        if step.kind == "repeat":
            total += step.most_round_trips * step.round_trip_time_s
        total += step.delay_s
    return total


def step_label(steps: Sequence[Step], index: int, inner: int | None = None, *, short: bool = False) -> str:
    """How a step is named: the one label of a step everywhere.

    ``step 3 (pass rod, reverse)`` or ``step 0, round-trip step 2 (loss)`` (``inner``: a step inside
    the repeat ``index``) in warnings and messages; ``3 pass rod (rev)`` on the axes of figures
    (``short``).
    """
    step = steps[index]
    if inner is not None:
        step = step.steps[inner]
    if short:
        label = f"{index}" + (f".{inner}" if inner is not None else "") + f" {step.kind}"
        if step.medium:
            label += f" {step.medium}"
        return label + (" (rev)" if step.kind == "pass" and step.reverse else "")
    label = f"step {index} ({step.kind}" if inner is None else f"step {index}, round-trip step {inner} ({step.kind}"
    if step.kind == "pass":
        label += f" {step.medium}" + (", reverse" if step.reverse else "")
    return label + ")"
