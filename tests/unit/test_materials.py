"""The built-in material files and their registry."""
from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from ampmodel.materials import registry
from ampmodel.materials.material import MATERIAL_KEYS
from ampmodel.units import factor, si_name

EXPECTED = ["Nd:YAG", "Nd:YLF", "Nd:YVO4", "Nd:phosphate glass", "Nd:silicate glass", "Yb:YAG", "Yb:CaF2",
            "Ti:sapphire", "Cr:LiSAF", "alexandrite", "Yb:silica fibre", "Er:silica fibre"]

# Product codes (letters, hyphen, digits, as glass makers number their melts) must not appear in the
# data: materials go by generic names only.
PRODUCT_CODE = re.compile(r"\b[A-Z]{1,4}-\d{1,4}\b")

GOOD_FILE = """\
# test material
name = "Test:host"
description = "a test material"

[wavelength_nm]
value = 1000.0
source = "test"

[emission_cross_section_cm2]
value = 1.0e-19
source = "test"

[upper_lifetime_us]
value = 200.0
source = "test"

[refractive_index]
value = 1.8
source = "test"
"""


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "broken.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _fsat_J_cm2(name: str) -> float:
    return registry.get(name).saturation_fluence_J_m2 / 1e4


def test_expected_materials_present():
    assert set(EXPECTED) <= set(registry.names())
    assert registry.names() == sorted(registry.names(), key=lambda n: (n.casefold(), n))   # letter case aside


@pytest.mark.parametrize("name", EXPECTED)
def test_every_value_has_a_source(name):
    material = registry.get(name)
    assert material.name == name
    assert material.sources, name
    for key, source in material.sources.items():
        assert key in MATERIAL_KEYS
        assert source.strip(), f"{name}: {key} has an empty source"
    # every value the material carries is backed by an entry in sources
    for key in MATERIAL_KEYS:
        value = getattr(material, si_name(key))
        if value is not None and value != 0.0:
            assert key in material.sources, f"{name}: {key} has no source"


@pytest.mark.parametrize("name", EXPECTED)
def test_values_within_key_ranges(name):
    material = registry.get(name)
    for key in material.sources:
        spec = MATERIAL_KEYS[key]
        value = getattr(material, si_name(key)) / factor(key)
        if value == 0.0 and spec.allow_zero:
            continue
        assert spec.low <= value * (1 + 1e-12) and value <= spec.high * (1 + 1e-12), (name, key, value)


def test_no_product_codes_in_data_files():
    for path in sorted(registry.DATA_DIR.glob("*.toml")):
        found = PRODUCT_CODE.findall(path.read_text(encoding="utf-8"))
        assert not found, f"{path.name} mentions {found}"


def test_every_file_starts_with_a_comment():
    for path in sorted(registry.DATA_DIR.glob("*.toml")):
        assert path.read_text(encoding="utf-8").startswith("# "), path.name


def test_nd_yag_saturation_fluence():
    # Handbook value 0.67 J/cm² at 1064 nm: W. Koechner, Solid-State Laser Engineering, 6th ed.,
    # Springer (2006), ch. 2 (from memory — verify).
    assert _fsat_J_cm2("Nd:YAG") == pytest.approx(0.67, rel=0.05)


def test_nd_phosphate_glass_saturation_fluence():
    # About 5 J/cm²: J. H. Campbell, T. I. Suratwala, J. Non-Cryst. Solids 263&264, 318 (2000)
    # (from memory — verify).
    assert 4.0 <= _fsat_J_cm2("Nd:phosphate glass") <= 6.0


def test_quasi_three_level_flags():
    yb = registry.get("Yb:YAG")
    assert yb.quasi_three_level and yb.absorption_cross_section_m2 > 0.0
    assert not registry.get("Nd:YAG").quasi_three_level


def test_yb_yag_pump_bleaching_limit():
    # quasi-three-level pumping at 940 nm saturates at N2/Nt = sigma_a,p / (sigma_a,p + sigma_e,p) < 1
    yb = registry.get("Yb:YAG")
    sa, se = yb.pump_absorption_cross_section_m2, yb.pump_emission_cross_section_m2
    assert sa is not None and se is not None and se > 0.0
    assert 0.7 < sa / (sa + se) < 0.95


def test_ti_sapphire_lifetime():
    # 3.2 µs at room temperature: P. F. Moulton, J. Opt. Soc. Am. B 3, 125 (1986) (from memory — verify).
    assert registry.get("Ti:sapphire").upper_lifetime_s == pytest.approx(3.2e-6, rel=0.10)


def test_glasses_are_inhomogeneous():
    assert registry.get("Nd:phosphate glass").broadening == "inhomogeneous"
    assert registry.get("Nd:YAG").broadening == "homogeneous"


def test_get_is_case_insensitive():
    assert registry.get("nd:yag") is registry.get("Nd:YAG")


def test_get_unknown_name_suggests():
    with pytest.raises(KeyError, match="Nd:YAG"):
        registry.get("Nd:YAGG")
    assert registry.closest("Nd:YAGG")[0] == "Nd:YAG"
    assert registry.closest("zzzz") == []


def test_table_text():
    text = registry.table_text()
    for name in EXPECTED:
        assert name in text
    assert "source" in text
    assert "saturation fluence" in text and "saturation intensity" in text
    assert max(len(line) for line in text.splitlines()) <= 100


def test_loader_accepts_good_file(tmp_path):
    material = registry._load_file(_write(tmp_path, GOOD_FILE))
    assert material.name == "Test:host"
    assert material.wavelength_m == pytest.approx(1e-6)
    assert material.emission_cross_section_m2 == pytest.approx(1e-23)
    assert material.sources["upper_lifetime_us"] == "test"


def test_loader_rejects_missing_source(tmp_path):
    text = GOOD_FILE.replace('value = 200.0\nsource = "test"', "value = 200.0")
    with pytest.raises(ValueError, match=r"broken\.toml.*upper_lifetime_us.*source"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_empty_source(tmp_path):
    text = GOOD_FILE.replace('value = 1.8\nsource = "test"', 'value = 1.8\nsource = "  "')
    with pytest.raises(ValueError, match=r"broken\.toml.*refractive_index.*source"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_unknown_key(tmp_path):
    text = GOOD_FILE + '\n[emission_crosssection_cm2]\nvalue = 1e-19\nsource = "test"\n'
    with pytest.raises(ValueError, match=r"broken\.toml.*emission_crosssection_cm2.*unknown"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_out_of_range(tmp_path):
    text = GOOD_FILE.replace("value = 1.8", "value = 18.0")
    with pytest.raises(ValueError, match=r"broken\.toml.*refractive_index.*range"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_zero_where_not_allowed(tmp_path):
    text = GOOD_FILE.replace("value = 200.0", "value = 0.0")
    with pytest.raises(ValueError, match=r"broken\.toml.*upper_lifetime_us"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_missing_required_key(tmp_path):
    text = GOOD_FILE.replace('[refractive_index]\nvalue = 1.8\nsource = "test"\n', "")
    with pytest.raises(ValueError, match=r"broken\.toml.*refractive_index.*missing"):
        registry._load_file(_write(tmp_path, text))


def test_loader_rejects_bad_broadening(tmp_path):
    text = GOOD_FILE.replace('description = "a test material"',
                             'description = "a test material"\nbroadening = "mixed"')
    with pytest.raises(ValueError, match=r"broken\.toml.*broadening"):
        registry._load_file(_write(tmp_path, text))


# --- cross-section spectra ----------------------------------------------------------------------

SPECTRUM = """
[spectrum]
wavelength_nm = [900.0, 1000.0, 1100.0]
emission_cm2 = [1.0e-22, 2.0e-19, 5.0e-20]
absorption_cm2 = [3.0e-20, 1.0e-20, 0.0]
source = "test table"
"""


def test_loader_reads_a_spectrum_that_stands_in_for_the_cross_section(tmp_path):
    text = GOOD_FILE.replace('[emission_cross_section_cm2]\nvalue = 1.0e-19\nsource = "test"\n', "") + SPECTRUM
    material = registry._load_file(_write(tmp_path, text))
    assert material.spectrum is not None and material.spectrum.source == "test table"
    assert material.emission_cross_section_m2 == pytest.approx(2.0e-23)       # the table at 1000 nm
    assert material.absorption_cross_section_m2 == pytest.approx(1.0e-24)
    assert "spectrum" in material.sources["emission_cross_section_cm2"]
    se, sa = material.cross_sections_m2(950e-9)
    assert (float(se), float(sa)) == pytest.approx(((1e-22 + 2e-19) / 2 * 1e-4, 2e-24))


@pytest.mark.parametrize("change, message", [
    ('source = "test table"\n', "spectrum.source"),
    ("wavelength_nm = [900.0, 1000.0, 1100.0]", "strictly increasing"),
    ("absorption_cm2 = [3.0e-20, 1.0e-20, 0.0]", "equal length"),
    ("emission_cm2 = [1.0e-22, 2.0e-19, 5.0e-20]", "out of range"),
])
def test_loader_rejects_a_bad_spectrum(tmp_path, change, message):
    replacement = {"wavelength_nm": "wavelength_nm = [900.0, 1100.0, 1000.0]",
                   "absorption_cm2": "absorption_cm2 = [3.0e-20, 1.0e-20]",
                   "emission_cm2": "emission_cm2 = [1.0e-22, -2.0e-19, 5.0e-20]"}
    new = next((v for k, v in replacement.items() if change.startswith(k)), "")
    with pytest.raises(ValueError, match=message):
        registry._load_file(_write(tmp_path, GOOD_FILE + SPECTRUM.replace(change, new)))


def test_loader_rejects_a_wavelength_outside_the_spectrum(tmp_path):
    text = GOOD_FILE.replace("value = 1000.0", "value = 1200.0") + SPECTRUM
    with pytest.raises(ValueError, match="wavelength_nm.*outside the spectrum"):
        registry._load_file(_write(tmp_path, text))


def _mccumber_ratio(wavelength_nm, zero_line_nm, temperature_K=295.0):
    """sigma_e/sigma_a = exp((E0 − h nu)/kT) (D. E. McCumber, Phys. Rev. 136, A954 (1964)); kT in cm^-1."""
    kt_cm = 0.6950348 * temperature_K
    return np.exp((1e7 / zero_line_nm - 1e7 / wavelength_nm) / kt_cm)


@pytest.mark.parametrize("name, zero_line_nm, wings", [
    ("Yb:silica fibre", 975.0, [900.0, 940.0, 1000.0, 1030.0, 1064.0]),
    ("Er:silica fibre", 1531.0, [1480.0, 1500.0, 1550.0, 1580.0, 1600.0]),
])
def test_fibre_spectra_follow_mccumber_in_the_wings(name, zero_line_nm, wings):
    material = registry.get(name)
    se, sa = material.cross_sections_m2(np.array(wings) * 1e-9)
    assert se / sa == pytest.approx(_mccumber_ratio(np.array(wings), zero_line_nm), rel=0.15)


def test_fibre_spectra_peaks():
    # peaks from memory — verify: Yb-doped silica about 2.5e-20 to 2.7e-20 cm2 at 975 nm (R. Paschotta et
    # al., IEEE J. Quantum Electron. 33, 1049 (1997)); Er-doped silica about 5e-21 to 7e-21 cm2 near
    # 1530 nm (E. Desurvire, Erbium-Doped Fiber Amplifiers, Wiley (1994))
    yb, er = registry.get("Yb:silica fibre").spectrum, registry.get("Er:silica fibre").spectrum
    i = int(np.argmax(yb.absorption_m2))
    assert 972e-9 <= yb.wavelength_m[i] <= 978e-9 and 2.4e-24 <= yb.absorption_m2[i] <= 2.8e-24
    j = int(np.argmax(er.absorption_m2))
    assert 1525e-9 <= er.wavelength_m[j] <= 1535e-9 and 5e-25 <= er.absorption_m2[j] <= 7e-25


# --- the built-in spectra against their files' scalar values, and McCumber's relation ---------------

KT_CM_PER_K = 0.6950348   # Boltzmann's constant in cm^-1 per kelvin

# (scalar key, spectrum column, wavelength key it is read at)
SCALAR_READINGS = [("emission_cross_section_cm2", "emission_cm2", "wavelength_nm"),
                   ("absorption_cross_section_cm2", "absorption_cm2", "wavelength_nm"),
                   ("pump_absorption_cross_section_cm2", "absorption_cm2", "pump_wavelength_nm"),
                   ("pump_emission_cross_section_cm2", "emission_cm2", "pump_wavelength_nm")]


def _files_with_spectra() -> dict[str, dict]:
    """Material name -> the file's data as read (config units), for the built-in files with a spectrum."""
    found = {}
    for path in sorted(registry.DATA_DIR.glob("*.toml")):
        with path.open("rb") as handle:
            data = registry.tomllib.load(handle)
        if "spectrum" in data:
            found[data["name"]] = data
    return found


def _table_at(data: dict, column: str, wavelength_nm: float) -> float:
    table = data["spectrum"]
    return float(np.interp(wavelength_nm, table["wavelength_nm"], table[column]))


def test_the_bulk_materials_carry_spectra():
    assert {"Nd:YAG", "Nd:phosphate glass", "Nd:silicate glass", "Yb:YAG", "Yb:CaF2", "Ti:sapphire",
            "Yb:silica fibre", "Er:silica fibre"} <= set(_files_with_spectra())


@pytest.mark.parametrize("name", sorted(_files_with_spectra()))
def test_spectrum_meets_the_scalar_values(name):
    """Where a file gives both a scalar cross-section and a spectrum, they agree within 1 % at the
    scalar's wavelength; a scalar 0 (a four-level line, no emission at the pump) allows a table value
    below 1 % of the emission cross-section at the lasing wavelength."""
    data = _files_with_spectra()[name]
    emission_nm = _table_at(data, "emission_cm2", data["wavelength_nm"]["value"])
    checked = 0
    for key, column, at_key in SCALAR_READINGS:
        if key not in data or at_key not in data:
            continue
        scalar, table = data[key]["value"], _table_at(data, column, data[at_key]["value"])
        if scalar == 0.0:
            assert table <= 0.01 * emission_nm, (name, key, table)
        else:
            assert table == pytest.approx(scalar, rel=0.01, abs=0.0), (name, key, table, scalar)
        checked += 1
    material = registry.get(name)      # the loaded material: its scalars as given, or read from the table
    se, _ = material.cross_sections_m2(material.wavelength_m)
    assert float(se) == pytest.approx(material.emission_cross_section_m2, rel=0.01, abs=0.0)
    assert checked or "emission_cross_section_cm2" not in data     # a file without scalars: fibres


def _mccumber_fit(spectrum) -> tuple[float, float, int] | None:
    """Fit ln(sigma_a/sigma_e) against photon energy over the table's wavelengths where both exceed 1 %
    of their peaks: (temperature K, largest residual, number of points), or None with fewer than 3."""
    wavelength_nm = np.array(spectrum.wavelength_m) * 1e9
    se, sa = np.array(spectrum.emission_m2), np.array(spectrum.absorption_m2)
    both = (se > 0.01 * se.max()) & (sa > 0.01 * sa.max())
    if both.sum() < 3:
        return None
    energy_cm = 1e7 / wavelength_nm[both]
    log_ratio = np.log(sa[both] / se[both])
    slope, intercept = np.polyfit(energy_cm, log_ratio, 1)
    residual = log_ratio - (slope * energy_cm + intercept)
    return 1.0 / (slope * KT_CM_PER_K), float(np.max(np.abs(residual))), int(both.sum())


MCCUMBER_SPECTRA = ["Er:silica fibre", "Ti:sapphire", "Yb:CaF2", "Yb:YAG", "Yb:silica fibre"]


def test_the_mccumber_check_covers_every_spectrum_with_overlapping_bands():
    with_overlap = [name for name in registry.names() if registry.get(name).spectrum is not None
                    and _mccumber_fit(registry.get(name).spectrum) is not None]
    assert sorted(with_overlap) == sorted(MCCUMBER_SPECTRA)


@pytest.mark.parametrize("name", MCCUMBER_SPECTRA)
def test_spectrum_obeys_mccumber(name):
    """McCumber's relation sigma_a/sigma_e = exp((h nu - eps)/kT) (D. E. McCumber, Phys. Rev. 136, A954
    (1964)): where both cross-sections are given, ln(sigma_a/sigma_e) is a straight line in photon
    energy whose slope 1/kT is a plausible temperature. The Yb:YAG, Yb:CaF2 and Ti:sapphire tables
    were built with the relation, the fibre tables in their wings."""
    temperature_K, worst, points = _mccumber_fit(registry.get(name).spectrum)
    assert points >= 3
    assert 200.0 <= temperature_K <= 450.0, temperature_K
    assert worst < 0.1, worst     # within 10 % of the straight line everywhere


def test_refractive_indices_match_published_dispersion_formulas():
    """The hosts' indices against Sellmeier formulas of the literature as one dispersion package
    gives them (no download at run time): undoped YAG (D. E. Zelmon et al., Appl. Opt. 37, 4933 (1998)),
    sapphire (I. H. Malitson, J. Opt. Soc. Am. 52, 1377 (1962); extraordinary index for the
    pi-polarised Ti:sapphire) and CaF2 (I. H. Malitson, Appl. Opt. 2, 1103 (1963)). The package has no
    phosphate or silicate laser glass, so the glasses are not checked here."""
    ndispers = pytest.importorskip("ndispers")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")      # the package warns that its formulas have no temperature term
        yag = ndispers.media.glasses.YAG()
        sapphire = ndispers.media.crystals.Sapphire()
        caf2 = ndispers.media.glasses.CaF2()
        for name, index in [("Nd:YAG", lambda um: yag.n(um, 20.0)), ("Yb:YAG", lambda um: yag.n(um, 20.0)),
                            ("Ti:sapphire", lambda um: sapphire.n(um, np.pi / 2, 20.0, pol="e")),
                            ("Yb:CaF2", lambda um: caf2.n(um, 20.0))]:
            material = registry.get(name)
            expected = float(index(material.wavelength_m * 1e6))
            assert material.refractive_index == pytest.approx(expected, rel=0.01), (name, expected)
