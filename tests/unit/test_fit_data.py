"""The measured table of a fit (``ampmodel/studies/fit_data.py``): columns named as conditions, figures
or sigmas against a config; cells, comments and empty cells; every problem with its line."""
from __future__ import annotations

import math

import pytest
from config_cases import MINIMAL

from ampmodel.config.load import load_config
from ampmodel.studies.fit_data import MAX_BYTES, name_columns, parse_table, read_text, table_from_columns


@pytest.fixture(scope="module")
def config():
    return load_config(MINIMAL)


def test_columns_are_conditions_figures_and_sigmas(config):
    header = ["seed.energy_J", "medium.rod.loss_per_cm", "grid.points", "output_energy_J",
              "steps.0.energy_out_J", "media.rod.stored_energy_J", "sigma_output_energy_J"]
    conditions, figures, sigmas, problems = name_columns(header, config)
    assert problems == []
    assert conditions == ["seed.energy_J", "medium.rod.loss_per_cm", "grid.points"]
    assert figures == ["output_energy_J", "steps.0.energy_out_J", "media.rod.stored_energy_J"]
    assert sigmas == ["sigma_output_energy_J"]


@pytest.mark.parametrize("column, expected", [
    ("output_energie_J", "did you mean 'output_energy_J'"),
    ("seed.energie_J", "did you mean 'seed.energy_J'"),
    ("medium.rood.length_mm", "no item 'rood'"),
    ("steps.3.gain", "the config has steps 0 to 0, not step 3"),
    ("media.rdo.stored_energy_J", "no medium 'rdo' in the config; did you mean 'rod'?"),
    ("steps.0.gian", "a step has no figure 'gian'; did you mean 'gain'"),
])
def test_an_unknown_column_says_why_with_a_did_you_mean(config, column, expected):
    *_, problems = name_columns(["seed.energy_J", "output_energy_J", column], config)
    assert len(problems) == 1 and f"column {column!r}" in problems[0] and expected in problems[0]


def test_a_repeated_column_and_a_sigma_without_its_figure(config):
    *_, problems = name_columns(["seed.energy_J", "seed.energy_J", "gain", "sigma_output_energy_J"], config)
    assert any("'seed.energy_J' appears 2 times" in p for p in problems)
    assert any("'sigma_output_energy_J'" in p and "no column 'output_energy_J'" in p for p in problems)


def test_cells_comments_and_empty_cells(config):
    text = ("# a comment\n\n seed.energy_J , output_energy_J, gain, sigma_gain\n"
            "0.01, 0.05, , \n"
            "# between rows\n"
            ", 0.07, 6.5, 0.1\n")
    data, problems = parse_table(text, config, "bench.csv")
    assert problems == []
    assert data.rows == [{"seed.energy_J": 0.01}, {}]
    assert data.measured == [{"output_energy_J": 0.05}, {"output_energy_J": 0.07, "gain": 6.5}]
    assert data.sigma == [{}, {"gain": 0.1}]
    assert data.lines == [4, 6] and data.count() == 3 and not data.all_have_sigma()
    assert data.text == text and data.source == "bench.csv"


def test_every_bad_cell_is_reported_with_its_line(config):
    text = ("seed.energy_J,output_energy_J,sigma_output_energy_J\n"
            "0.01,nan,\n"
            "0.02,0.05\n"
            "x,0.06,0\n"
            "0.03,,0.01\n"
            "0.04,0,\n")
    data, problems = parse_table(text, config)
    assert "line 2: output_energy_J = nan: nan and inf are not allowed" in problems[0]
    assert any(p.startswith("line 3: 2 cells, the header names 3") for p in problems)
    assert any(p.startswith('line 4: seed.energy_J = "x" is not a number') for p in problems)
    assert any(p.startswith("line 4: sigma_output_energy_J = 0: an uncertainty must be > 0") for p in problems)
    assert any(p.startswith("line 5: sigma_output_energy_J = 0.01 is given but output_energy_J is not measured")
               for p in problems)
    assert any(p.startswith("line 6: output_energy_J = 0 has no sigma_output_energy_J") for p in problems)
    assert len(problems) == 6


def test_only_a_regular_file_of_limited_size_is_read(tmp_path):
    assert read_text(tmp_path / "none.csv")[1].endswith("no such file")
    assert "not a file" in read_text(tmp_path)[1]
    big = tmp_path / "big.csv"
    big.write_bytes(b"#" * (MAX_BYTES + 1))
    assert "larger than 1 MiB" in read_text(big)[1]
    latin = tmp_path / "latin.csv"
    latin.write_bytes("seed.energy_J,output_energy_J\n0.01,0.05 \xb5J\n".encode("latin-1"))
    assert "not UTF-8 text" in read_text(latin)[1]


def test_columns_from_python_become_the_same_text():
    text = table_from_columns({"seed.energy_J": [0.01, None], "output_energy_J": [0.05, math.nan]})
    assert text == "seed.energy_J,output_energy_J\n0.01,0.05\n,\n"
    with pytest.raises(ValueError, match="different lengths"):
        table_from_columns({"a": [1.0], "b": [1.0, 2.0]})
