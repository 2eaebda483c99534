"""Reading measured chi(T), C(T), M(H) files (hte/measured.py) and the diamagnetic correction."""

import math
from pathlib import Path

import numpy as np
import pytest

from hte.diamagnetism import PASCAL_CONSTANTS, diamagnetic_susceptibility
from hte.errors import DataFileError, ParameterError
from hte.measured import (Measurement, find_outliers, read_measurement, subtract_diamagnetism,
                          susceptibility_from_magnetization)

DATA = Path(__file__).parent / "data" / "measured"
TEMPERATURES = np.array([2, 5, 10, 20, 50, 100, 150, 200, 250, 300.0])
CURIE_WEISS = 0.4 / (TEMPERATURES + 10) + 1e-4      # the curve written into the chi_* files (6 digits)


def write(tmp_path, text, name="data.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_csv_with_comments_and_uncertainties():
    m = read_measurement(DATA / "chi_comments.csv", uncertainty_column="chi_err")
    assert m.quantity == "chi" and m.unit == "emu/mol"
    assert np.allclose(m.temperature, TEMPERATURES)
    assert np.allclose(m.value, CURIE_WEISS, rtol=1e-5)
    assert np.allclose(m.sigma, 1e-3 * CURIE_WEISS, rtol=1e-2)
    assert list(m.lines) == [5, 6, 7, 8, 10, 11, 12, 13, 14, 15]     # comment lines are skipped, not renumbered


def test_tab_separated_si_units_with_spaced_header_names():
    m = read_measurement(DATA / "chi_tabs.tsv", columns={"T": "Temperature (K)", "chi": "chi SI (m3/mol)"},
                         units={"chi": "m^3/mol"})
    # chi_SI = 4 pi 1e-6 chi_cgs (definition of the cgs unit)
    assert np.allclose(m.value, CURIE_WEISS, rtol=1e-6)


def test_whitespace_file_is_sorted_by_temperature():
    m = read_measurement(DATA / "chi_whitespace.dat")
    assert np.allclose(m.temperature, TEMPERATURES)
    assert np.allclose(m.value, CURIE_WEISS, rtol=1e-5)
    assert m.lines[0] == 12 and m.lines[-1] == 3          # 2 K is the last line of the file


def test_positional_columns_without_header_and_per_gram_units():
    m = read_measurement(DATA / "chi_positional.dat", columns={"T": 2, "chi": 3}, units={"chi": "emu/g"},
                         molar_mass=250.0)
    assert np.allclose(m.value, CURIE_WEISS, rtol=1e-6)


def test_heat_capacity_per_gram_with_semicolons():
    m = read_measurement(DATA / "heat_capacity_mass.csv", quantity="C", columns={"T": "Temp", "C": "HC"},
                         units={"C": "mJ/(g K)"}, molar_mass=100.0)
    assert m.unit == "J/(mol K)"
    assert np.allclose(m.value, 0.01 * m.temperature**3)


def test_magnetisation_curve_in_emu_per_mol_and_oersted():
    # Free spins 1/2, g = 2 at 2 K: M = tanh(mu_B B / k_B T) mu_B per formula unit (Brillouin B_1/2 = tanh;
    # C. Kittel, Introduction to Solid State Physics (2005), ch. 11).
    m = read_measurement(DATA / "m_of_h.csv", quantity="M", columns={"B": "H"}, units={"M": "emu/mol", "B": "Oe"},
                         temperature="2 K")
    mu_b_over_k = 0.67171381472      # K/T, CODATA 2022 "Bohr magneton in K/T"
    assert np.allclose(m.value, np.tanh(mu_b_over_k * m.field / 2.0), rtol=1e-6)
    assert np.all(m.temperature == 2.0)


def test_susceptibility_from_magnetisation_in_a_field():
    # M in emu/mol divided by H in Oe is chi in emu/mol (cgs definition).  Low field: tanh x ~ x.
    m = read_measurement(DATA / "m_of_h.csv", quantity="M", columns={"B": "H"}, units={"M": "emu/mol", "B": "Oe"},
                         temperature=2.0)
    chi = susceptibility_from_magnetization(m)
    assert chi.quantity == "chi"
    assert chi.value[0] == pytest.approx(187.5036 / 1000.0, rel=1e-6)
    # ... and the low-field limit is the Curie law C/T with C = 0.3751 emu K/mol (handbook value).
    assert chi.value[0] == pytest.approx(0.3751 / 2.0, rel=2e-3)


def test_magnetisation_of_a_temperature_sweep_in_a_fixed_field(tmp_path):
    path = write(tmp_path, "T,M\n10,0.01\n20,0.005\n40,0.0025\n")
    m = read_measurement(path, quantity="M", units={"M": "muB/f.u."}, field="1000 Oe")
    assert np.allclose(m.field, 0.1)
    chi = susceptibility_from_magnetization(m)
    # 0.01 mu_B/f.u. = 55.8494 emu/mol (N_A mu_B = 5584.94 emu/mol); / 1000 Oe
    assert chi.value[0] == pytest.approx(0.0558494, rel=1e-5)


def test_diamagnetic_correction_from_pascal_constants(tmp_path):
    # CuSO4.5H2O: Cu2+ + SO4^2- + 5 H2O from the table (values from memory, see hte/diamagnetism.py).
    composition = {"Cu2+": 1, "SO42-": 1, "H2O": 5}
    expected = (PASCAL_CONSTANTS["Cu2+"] + PASCAL_CONSTANTS["SO4^2-"] + 5 * PASCAL_CONSTANTS["H2O"]) * 1e-6
    assert diamagnetic_susceptibility(composition) == pytest.approx(expected)
    assert diamagnetic_susceptibility(composition, extra=-1e-5) == pytest.approx(expected - 1e-5)
    m = read_measurement(DATA / "chi_comments.csv", diamagnetic=composition)
    assert np.allclose(m.value, CURIE_WEISS - expected, rtol=1e-5)
    assert m.diamagnetic_correction == pytest.approx(expected)
    assert subtract_diamagnetism(read_measurement(DATA / "chi_comments.csv"), -1e-4).value[0] == pytest.approx(
        CURIE_WEISS[0] + 1e-4, rel=1e-5)
    with pytest.raises(ParameterError, match="'Xx3\\+' is not in the Pascal-constant table"):
        diamagnetic_susceptibility({"Xx3+": 1})


# --- error cases: each message names the file, line and column, and says how to fix it -----------------

def test_missing_column_lists_the_columns_that_exist(tmp_path):
    path = write(tmp_path, "Temp,susc\n1,2\n2,3\n3,4\n")
    with pytest.raises(DataFileError, match=r"data.csv: column 'chi' not found; the header has 'Temp', 'susc'\. "
                                            r"Pass columns=\{'chi': NAME or position\}"):
        read_measurement(path, columns={"T": "Temp"})
    with pytest.raises(DataFileError, match=r"column 'Tk' \(for 'T'\) not found"):
        read_measurement(path, columns={"T": "Tk"})


def test_column_position_beyond_the_header(tmp_path):
    path = write(tmp_path, "T,chi\n1,2\n2,3\n3,4\n")
    with pytest.raises(DataFileError, match="column position 3 for 'chi' does not exist; the header has 2"):
        read_measurement(path, columns={"chi": 3})


def test_non_numeric_cell_names_line_and_column(tmp_path):
    path = write(tmp_path, "# header follows\nT,chi\n1,0.2\n2,abc\n3,0.1\n")
    with pytest.raises(DataFileError, match=r"data.csv, line 4, column 'chi': the cell holds 'abc', which is "
                                            r"not a number"):
        read_measurement(path)


def test_empty_cell_is_reported(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,\n3,0.1\n")
    with pytest.raises(DataFileError, match="line 3, column 'chi': the cell is empty"):
        read_measurement(path)


def test_short_row_is_reported(tmp_path):
    path = write(tmp_path, "T chi\n1 0.2\n2\n3 0.1\n", name="data.dat")
    with pytest.raises(DataFileError, match="data.dat, line 3: has 1 fields, but column 'chi'"):
        read_measurement(path)


def test_non_finite_value_is_reported(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,nan\n3,0.1\n")
    with pytest.raises(DataFileError, match="line 3, column 'chi': 'nan' is not a finite number"):
        read_measurement(path)


@pytest.mark.parametrize("bad", ["0", "-4.2"])
def test_non_positive_temperature_is_refused(tmp_path, bad):
    path = write(tmp_path, f"T,chi\n1,0.2\n{bad},0.3\n3,0.1\n")
    with pytest.raises(DataFileError, match=f"data.csv, line 3: temperature {bad} K is not positive"):
        read_measurement(path)


def test_duplicated_temperature_names_both_lines(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,0.3\n3,0.1\n2,0.31\n")
    with pytest.raises(DataFileError, match="lines 3 and 5: duplicated temperature T = 2 K; average"):
        read_measurement(path)


def test_unit_that_does_not_fit_the_quantity(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,0.3\n3,0.1\n")
    with pytest.raises(DataFileError, match=r"data.csv: units\['chi'\] = 'K': unit 'K' is not a susceptibility "
                                            r"unit"):
        read_measurement(path, units={"chi": "K"})


def test_magnetisation_without_units_asks_for_them(tmp_path):
    path = write(tmp_path, "B,M\n1,0.2\n2,0.3\n3,0.1\n")
    with pytest.raises(DataFileError, match="no unit given for column 'B' \\(magnetic field\\); pass units="):
        read_measurement(path, quantity="M", temperature=2.0)
    with pytest.raises(DataFileError, match="no unit given for column 'M' \\(magnetisation\\)"):
        read_measurement(path, quantity="M", temperature=2.0, units={"B": "T"})


def test_empty_file(tmp_path):
    path = write(tmp_path, "# only a comment\n\n")
    with pytest.raises(DataFileError, match="data.csv: the file is empty"):
        read_measurement(path)


def test_header_without_rows(tmp_path):
    path = write(tmp_path, "T,chi\n# nothing measured\n")
    with pytest.raises(DataFileError, match=r"the header \(line 1\) is followed by no data rows"):
        read_measurement(path)


def test_too_few_points(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,0.3\n")
    with pytest.raises(DataFileError, match="only 2 data rows; at least 3 are needed"):
        read_measurement(path)


def test_names_in_a_file_without_header(tmp_path):
    path = write(tmp_path, "1 0.2\n2 0.3\n3 0.1\n", name="data.dat")
    with pytest.raises(DataFileError, match="has no header line .* give columns by 1-based position"):
        read_measurement(path)


def test_missing_file():
    with pytest.raises(DataFileError, match="no_such_file.csv: cannot read the file"):
        read_measurement(DATA / "no_such_file.csv")


def test_non_positive_uncertainty(tmp_path):
    path = write(tmp_path, "T,chi,e\n1,0.2,0.01\n2,0.3,0\n3,0.1,0.01\n")
    with pytest.raises(DataFileError, match="line 3: uncertainty 0 is not positive"):
        read_measurement(path, uncertainty_column="e")


def test_unknown_option_keys_are_refused(tmp_path):
    path = write(tmp_path, "T,chi\n1,0.2\n2,0.3\n3,0.1\n")
    with pytest.raises(ParameterError, match="columns: key 'X' is not used here"):
        read_measurement(path, columns={"X": 1})
    with pytest.raises(ParameterError, match="quantity 'S' is unknown"):
        read_measurement(path, quantity="S")


# --- outliers -------------------------------------------------------------------------------------------

def _noisy_curve(seed, spikes=()):
    rng = np.random.default_rng(seed)
    temps = np.linspace(2.0, 300.0, 150)
    clean = 0.4 / (temps + 10.0) + 1e-4
    noisy = clean * (1 + 1e-3 * rng.standard_normal(temps.size))
    for index in spikes:
        noisy[index] += 0.02 * clean[index]          # 20 standard deviations
    return Measurement("chi", temps, noisy, source="synthetic.dat", lines=np.arange(10, 160))


@pytest.mark.parametrize("seed", range(5))
def test_outliers_are_found_and_only_reported(seed):
    m = _noisy_curve(seed, spikes=(17, 90))
    found = find_outliers(m)
    assert [o.index for o in found] == [17, 90]
    assert [o.line for o in found] == [27, 100]
    assert all(o.score > 5 for o in found)
    assert "synthetic.dat, line 27" in found[0].describe(m)
    assert len(m) == 150                            # nothing was dropped


@pytest.mark.parametrize("seed", range(5))
def test_clean_noisy_data_have_no_outliers(seed):
    # Gaussian noise: a 5-sigma point among 150 has probability ~1e-4 (common practice threshold).
    assert find_outliers(_noisy_curve(seed)) == []


def test_spin_only_magnetisation_matches_brillouin_at_saturation():
    # 7 T at 2 K saturates free spins: M -> g S = 1 mu_B (within tanh(2.35) = 0.982).
    m = read_measurement(DATA / "m_of_h.csv", quantity="M", columns={"B": "H"}, units={"M": "emu/mol", "B": "Oe"},
                         temperature=2.0)
    assert m.value[-1] == pytest.approx(math.tanh(0.67171381472 * 7.0 / 2.0), rel=1e-6)
    assert m.value[-1] < 1.0


def test_outlier_search_needs_enough_points():
    m = Measurement("chi", np.arange(1.0, 6.0), np.ones(5), source="short.dat")
    with pytest.raises(DataFileError, match="short.dat: 5 points are too few to judge the scatter; at least 8"):
        find_outliers(m)
