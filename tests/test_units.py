"""Laboratory units: constants, conversions, exchange conventions (hte/units.py)."""

import math

import numpy as np
import pytest

from hte import units
from hte.errors import ParameterError


def test_curie_constant_of_spin_half_with_g_2_is_0_3751():
    # chi T = 0.3751 emu K/mol for S = 1/2, g = 2 (handbook value; e.g. O. Kahn, Molecular Magnetism (VCH,
    # 1993), ch. 1, which quotes N mu_B^2 / 3k = 0.12505 emu K/mol; from memory).
    assert units.curie_constant(2.0, 0.5) == pytest.approx(0.3751, abs=1e-4)


@pytest.mark.parametrize("g, spin", [(2.0, 0.5), (2.1, 1.0), (2.0, 1.5), (1.95, 2.5)])
def test_curie_constant_is_0_12505_g2_s_s_plus_1_per_magnetic_ion(g, spin):
    # N_A mu_B^2 / (3 k_B) = 0.12505 emu K/mol (handbook value, Kahn (1993) ch. 1; from memory).
    expected = 0.12505 * g**2 * spin * (spin + 1)
    assert units.curie_constant(g, spin) == pytest.approx(expected, rel=1e-4)
    assert units.curie_constant(g, spin, n_magnetic=3) == pytest.approx(3 * expected, rel=1e-4)


@pytest.mark.parametrize("spin, moment", [(0.5, 1.73), (1.0, 2.83), (1.5, 3.87), (2.0, 4.90), (2.5, 5.92)])
def test_effective_moment_reproduces_spin_only_values(spin, moment):
    # Spin-only moments g sqrt(S(S+1)) with g = 2: 1.73, 2.83, 3.87, 4.90, 5.92 mu_B (handbook table of
    # spin-only moments, e.g. N. N. Greenwood and A. Earnshaw, Chemistry of the Elements, ch. 19; from memory).
    curie = units.curie_constant(2.0, spin)
    assert units.effective_moment(curie) == pytest.approx(moment, abs=0.005)
    # Rule of thumb mu_eff = sqrt(8 C) (common practice): 3 k_B/(N_A mu_B^2) = 7.997 in cgs.
    assert units.effective_moment(curie) == pytest.approx(math.sqrt(8 * curie), rel=5e-4)
    # Per magnetic ion when the formula unit holds two ions.
    assert units.effective_moment(2 * curie, n_magnetic=2) == pytest.approx(moment, abs=0.005)


def test_energy_conversions_match_codata():
    # CODATA 2018 (unchanged in 2022, since e, h, c, k_B are exact): 1 meV / k_B = 11.604518 K,
    # h c (1 cm^-1) / k_B = 1.438777 K, 1 meV = 8.065544 cm^-1, 1 K = 1.380649e-23 J (exact).
    assert units.convert_energy(1.0, "meV", "K") == pytest.approx(11.604518, rel=1e-7)
    assert units.convert_energy(1.0, "cm-1", "K") == pytest.approx(1.438777, rel=1e-6)
    assert units.convert_energy(1.0, "meV", "cm^-1") == pytest.approx(8.065544, rel=1e-6)
    assert units.convert_energy(1.0, "K", "J") == 1.380649e-23
    values = np.array([0.5, 10.0, 250.0])
    round_trip = units.convert_energy(units.convert_energy(units.convert_energy(values, "K", "meV"),
                                                           "meV", "1/cm"), "cm-1", "K")
    assert np.allclose(round_trip, values, rtol=1e-14)


def test_codata_edition_is_reported():
    assert units.CODATA_EDITION.startswith("CODATA")


def test_molar_susceptibility_si_is_4pi_1e6_times_cgs():
    # chi_SI [m^3/mol] = 4 pi 1e-6 chi_cgs [emu/mol] (definition of the cgs-Gaussian unit; common practice).
    assert units.convert(1.0, "chi", "emu/mol", "m3/mol") == pytest.approx(4 * math.pi * 1e-6, rel=1e-14)
    assert units.to_canonical(4 * math.pi * 1e-6, "chi", "m^3 mol^-1") == pytest.approx(1.0, rel=1e-14)
    # Independent SI route: chi = mu_0 N_A g^2 mu_B^2 S(S+1) / (3 k_B T) in m^3/mol, with SI constants of
    # CODATA 2022 written here (mu_0 = 4 pi 1e-7 to 1e-9 relative).
    mu0, n_a, mu_b, k_b = 4e-7 * math.pi, 6.02214076e23, 9.2740100657e-24, 1.380649e-23
    chi_si = mu0 * n_a * 4 * mu_b**2 * 0.75 / (3 * k_b * 10.0)           # g = 2, S = 1/2, T = 10 K
    chi_cgs = units.curie_constant(2.0, 0.5) / 10.0
    assert units.convert(chi_cgs, "chi", "emu/(mol Oe)", "m3/mol") == pytest.approx(chi_si, rel=1e-8)


def test_susceptibility_per_gram_needs_molar_mass():
    # chi_mol = chi_g * M (common practice); SI mass susceptibility: chi_SI [m^3/kg] = 4 pi 1e-3 chi [emu/g].
    assert units.to_canonical(1e-3, "chi", "emu/g", molar_mass=200.0) == pytest.approx(0.2)
    assert units.to_canonical(1e-3, "chi", "emu/(g Oe)", molar_mass=200.0) == pytest.approx(0.2)
    assert units.convert(1.0, "chi", "emu/g", "m3/kg", molar_mass=123.0) == pytest.approx(4 * math.pi * 1e-3)
    with pytest.raises(ParameterError, match="'emu/g' is per mass: give molar_mass"):
        units.to_canonical(1e-3, "chi", "emu/g")


def test_magnetisation_units():
    # N_A mu_B = 5585 emu/mol = 5.585 A m^2/mol per mu_B per formula unit (common practice; CODATA values
    # give 5584.94).
    assert units.from_canonical(1.0, "M", "emu/mol") == pytest.approx(5584.94, rel=1e-6)
    assert units.from_canonical(1.0, "M", "A m^2/mol") == pytest.approx(5.58494, rel=1e-6)
    assert units.to_canonical(5584.94 / 100.0, "M", "emu/g", molar_mass=100.0) == pytest.approx(1.0, rel=1e-6)
    assert units.to_canonical(2.0, "M", "mu_B/f.u.") == 2.0


def test_field_units():
    # 1 T = 1e4 Oe = 1e4 G in free space; 1 Oe = 1000/(4 pi) A/m (definitions; common practice).
    assert units.to_canonical(1e4, "B", "Oe") == pytest.approx(1.0)
    assert units.to_canonical(50.0, "B", "kOe") == pytest.approx(5.0)
    assert units.to_canonical(1e4, "B", "G") == pytest.approx(1.0)
    assert units.to_canonical(1000 / (4 * math.pi), "B", "A/m") == pytest.approx(1e-4, rel=1e-9)
    assert units.parse_quantity("1000 Oe", "B") == pytest.approx(0.1)


def test_heat_capacity_units():
    assert units.to_canonical(2500.0, "C", "mJ/(mol K)") == pytest.approx(2.5)
    assert units.to_canonical(0.01, "C", "J/(g K)", molar_mass=250.0) == pytest.approx(2.5)
    assert units.to_canonical(10.0, "C", "J kg^-1 K^-1", molar_mass=250.0) == pytest.approx(2.5)


@pytest.mark.parametrize("spelling", ["J/(mol K)", "J mol^-1 K^-1", "J/mol/K", "J/mol K", "J/mol.K",
                                      "J·mol⁻¹·K⁻¹", "J*mol-1*K-1"])
def test_unit_spellings_are_equivalent(spelling):
    assert units.to_canonical(3.0, "C", spelling) == 3.0


def test_unit_that_does_not_fit_the_quantity_is_refused():
    with pytest.raises(ParameterError, match="unit 'K' is not a susceptibility unit; use one of emu/mol"):
        units.to_canonical(1.0, "chi", "K")
    with pytest.raises(ParameterError, match="unbalanced"):
        units.parse_unit("J/(mol K")


def _dimer_spectrum(prefactor):
    """Eigenvalues of prefactor * S1.S2 for two spins 1/2 (dense diagonalisation)."""
    sx = np.array([[0, 0.5], [0.5, 0]])
    sy = np.array([[0, -0.5j], [0.5j, 0]])
    sz = np.diag([0.5, -0.5])
    coupling = sum(np.kron(s, s) for s in (sx, sy, sz))
    return np.linalg.eigvalsh(prefactor * coupling)


@pytest.mark.parametrize("convention, prefactor_of_their_j", [("J", 1.0), ("-J", -1.0), ("2J", 2.0),
                                                               ("-2J", -2.0), ("sigma", 4.0)])
def test_coupling_conventions_give_the_same_dimer_spectrum(convention, prefactor_of_their_j):
    # Each convention writes H = prefactor * J_theirs * S1.S2 (sigma = 2S gives 4 S1.S2); the converted
    # J_ours must give the same spectrum with H = J_ours S1.S2.  Singlet-triplet gap = J_ours.
    their_j = -7.5
    ours = units.convert_coupling(their_j, convention, "J")
    assert np.allclose(_dimer_spectrum(ours), _dimer_spectrum(prefactor_of_their_j * their_j))
    assert units.convert_coupling(ours, "J", convention) == pytest.approx(their_j)


def test_unknown_convention_is_refused():
    with pytest.raises(ParameterError, match="exchange convention 'J2' is unknown"):
        units.convert_coupling(1.0, "J2")


def test_reduced_susceptibility_factor_turns_curie_law_into_emu_per_mol():
    # Free spins: chi* = S(S+1) / (3 t), t = T/J, must become C_Curie / T; factor = N_A g^2 mu_B^2/(k_B J)
    # = 3 * 0.12505 g^2 / J emu/mol (handbook 0.12505, from memory).
    coupling, g, spin, temperature = 35.0, 2.1, 1.0, 80.0
    reduced = spin * (spin + 1) / (3 * temperature / coupling)
    factor = units.reduced_susceptibility_factor(coupling, g, n_magnetic=2)
    assert factor * reduced == pytest.approx(units.curie_constant(g, spin, n_magnetic=2) / temperature)
    assert factor == pytest.approx(2 * 3 * 0.12505 * g**2 / coupling, rel=1e-4)


def test_convention_description_matches_the_fit_report_wording():
    # CONVENTIONS.md, JSON report of `hte fit`: "H = J sum S_i.S_j, J > 0 antiferromagnetic".
    assert units.describe_convention("J") == "H = J sum S_i.S_j, J > 0 antiferromagnetic"
    assert units.describe_convention("-2J") == "H = -2J sum S_i.S_j, J > 0 ferromagnetic"
