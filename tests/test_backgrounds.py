"""Background terms (hte/backgrounds.py): impurities, Brillouin, Schottky, Debye, phonon subtraction, entropy."""

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from hte import backgrounds as bg
from hte import units
from hte.errors import ParameterError
from hte.measured import Measurement

R = 8.314462618        # J/(mol K), CODATA 2018 = 2022 (exact product N_A k_B)
MU_B_OVER_K = 0.67171381472   # K/T, CODATA 2022


def test_two_level_schottky_maximum():
    # Maximum 0.4392 R at k_B T = 0.4168 Delta for equal degeneracies (textbook value: E. S. R. Gopal,
    # Specific Heats at Low Temperatures (1966), ch. 4; from memory).
    gap = 7.0
    best = minimize_scalar(lambda t: -bg.two_level_schottky(t, gap), bounds=(0.1 * gap, gap), method="bounded",
                           options={"xatol": 1e-8})
    assert best.x / gap == pytest.approx(0.4168, abs=1e-4)
    assert -best.fun / R == pytest.approx(0.4392, abs=1e-4)


def test_two_level_schottky_closed_form_with_degeneracies():
    # C/R = (g1/g0) x^2 e^x / (e^x + g1/g0)^2 with x = Delta/T (textbook, Gopal (1966) ch. 4; from memory).
    temps = np.array([0.3, 1.0, 4.0, 20.0])
    ratio, gap = 3.0, 2.5
    x = gap / temps
    exact = R * ratio * x**2 * np.exp(x) / (np.exp(x) + ratio) ** 2
    assert np.allclose(bg.two_level_schottky(temps, gap, degeneracy_ratio=ratio), exact, rtol=1e-12)


@pytest.mark.parametrize("spin", [0.5, 1.0, 2.5])
def test_zeeman_schottky_matches_partition_function_of_a_free_spin(spin):
    # Z = sinh((2S+1) y/2) / sinh(y/2), y = g mu_B B / k_B T, gives
    # C/R = (y/2)^2 / sinh^2(y/2) - ((2S+1) y/2)^2 / sinh^2((2S+1) y/2)  (textbook derivation, common practice).
    temps = np.array([0.2, 0.7, 2.0, 9.0])
    g, field = 2.1, 3.0
    y = g * MU_B_OVER_K * field / temps
    n = 2 * spin + 1
    exact = R * ((y / 2) ** 2 / np.sinh(y / 2) ** 2 - (n * y / 2) ** 2 / np.sinh(n * y / 2) ** 2)
    assert np.allclose(bg.zeeman_schottky(temps, field, g=g, spin=spin), exact, rtol=1e-9)


def test_zeeman_schottky_of_spin_half_is_two_level_with_the_zeeman_gap():
    temps = np.linspace(0.1, 10, 7)
    gap = 2.0 * MU_B_OVER_K * 1.5
    assert np.allclose(bg.zeeman_schottky(temps, 1.5, g=2.0, spin=0.5), bg.two_level_schottky(temps, gap),
                       rtol=1e-9)


def test_brillouin_function_limits():
    x = np.array([1e-6, 1e-3, 0.05, 0.7, 3.0, 30.0])
    # B_1/2(x) = tanh x (exact).
    assert np.allclose(bg.brillouin(0.5, x), np.tanh(x), rtol=1e-12)
    # Small x: B_S(x) = x (S+1)/(3S) (Kittel (2005) ch. 11).
    for spin in (1.0, 2.5):
        assert bg.brillouin(spin, 1e-6) == pytest.approx(1e-6 * (spin + 1) / (3 * spin), rel=1e-9)
    # Classical limit S -> infinity: the Langevin function coth x - 1/x.
    assert np.allclose(bg.brillouin(2000.0, x[2:]), 1 / np.tanh(x[2:]) - 1 / x[2:], rtol=1e-3)
    # Saturation.
    assert bg.brillouin(3.5, 200.0) == pytest.approx(1.0, abs=1e-12)


def test_impurity_magnetisation_in_a_small_field_is_the_curie_susceptibility():
    # Two routes: Brillouin M(B) (mu_B/k_B) at B -> 0, M/H in emu/mol; and f C_Curie / T (N_A mu_B^2/3k_B).
    fraction, g, spin, temperature, field = 0.03, 2.2, 1.5, 10.0, 1e-3
    magnetisation = bg.impurity_magnetization(field, temperature, fraction, g=g, spin=spin)
    chi = units.susceptibility_from_magnetization(magnetisation, field)
    assert chi == pytest.approx(bg.impurity_susceptibility(temperature, fraction, g=g, spin=spin), rel=1e-6)
    # Handbook Curie constant: 0.12505 g^2 S(S+1) emu K/mol (from memory).
    assert bg.impurity_susceptibility(2.0, 0.02, theta=-0.5) == pytest.approx(0.02 * 0.3751 / 2.5, rel=2e-4)


def test_impurity_magnetisation_saturates_at_f_g_s():
    assert bg.impurity_magnetization(60.0, 0.05, 0.1, g=2.0, spin=2.5) == pytest.approx(0.1 * 2.0 * 2.5, rel=1e-9)


def test_debye_heat_capacity_at_theta_d_is_0_952_of_dulong_petit():
    # C(T = theta_D) / 3R = 0.952 (exact value of the Debye function at 1, 0.95173; Gopal (1966) Appendix).
    assert bg.debye_heat_capacity(250.0, 250.0) / (3 * R) == pytest.approx(0.952, abs=5e-4)


def test_debye_low_temperature_t_cubed_law_is_exact():
    # C -> (12 pi^4 / 5) n R (T/theta_D)^3 for T << theta_D (exact limit; Kittel (2005) ch. 5 writes
    # ~1944 (T/theta)^3 J/(mol K) per mole of atoms, from memory).
    theta, atoms = 300.0, 5
    temps = np.array([0.3, 1.0, 2.0])
    law = 12 * math.pi**4 / 5 * atoms * R * (temps / theta) ** 3
    assert np.allclose(bg.debye_heat_capacity(temps, theta, atoms=atoms), law, rtol=1e-10)
    assert 12 * math.pi**4 / 5 * R == pytest.approx(1944, abs=0.5)
    beta = 12 * math.pi**4 / 5 * atoms * R / theta**3
    assert bg.debye_temperature_from_beta(beta, atoms=atoms) == pytest.approx(theta, rel=1e-9)
    assert np.allclose(bg.low_temperature_lattice(temps, beta), law, rtol=1e-12)


def test_debye_high_temperature_is_dulong_petit():
    # 3 n R (1 - (theta/T)^2 / 20 + ...) (high-T expansion of the Debye function, common practice).
    theta, temperature = 100.0, 5000.0
    assert bg.debye_heat_capacity(temperature, theta, atoms=2) == pytest.approx(
        6 * R * (1 - (theta / temperature) ** 2 / 20), rel=1e-8)


@pytest.mark.parametrize("ratio, table", [(0.5, 0.988), (1.0, 0.952), (1.5, 0.896), (2.0, 0.825), (2.5, 0.745),
                                          (3.0, 0.663), (4.0, 0.503), (5.0, 0.369), (6.0, 0.266), (8.0, 0.138),
                                          (10.0, 0.0758), (15.0, 0.0231), (20.0, 0.00974)])
def test_debye_function_against_table(ratio, table):
    # C_V/3R against theta_D/T, Debye-function table (American Institute of Physics Handbook, 3rd ed. (1972),
    # section 4e; Gopal (1966) Appendix).  Values written from memory to 3 significant digits.
    assert bg.debye_heat_capacity(100.0 / ratio, 100.0) / (3 * R) == pytest.approx(table, abs=1e-3)


def test_debye_heat_capacity_equals_a_sum_of_einstein_modes():
    # Independent route: Debye density of states g(w) ~ w^2 up to w_D filled with Einstein oscillators,
    # C/3R = (3 / x_D^3) int_0^x_D x^2 E(x) dx, E(x) = x^2 e^x / (e^x - 1)^2, by the midpoint rule.
    for ratio in (0.3, 1.0, 4.0, 25.0):
        pieces = 200_000
        x = (np.arange(pieces) + 0.5) * ratio / pieces
        einstein = x**2 * np.exp(-x) / (-np.expm1(-x)) ** 2
        modes = 3 / ratio**3 * np.sum(x**2 * einstein) * ratio / pieces
        assert bg.debye_heat_capacity(1.0, ratio) / (3 * R) == pytest.approx(modes, rel=1e-8)


def test_phonon_reference_subtraction_recovers_the_magnetic_part():
    # Sample: Debye (theta = 200 K, 5 atoms) + Schottky (gap 5 K).  Reference: a non-magnetic analogue with
    # theta = 300 K, rescaled by theta_ref/theta_sample (the Debye form depends on T/theta only).
    temps = np.linspace(1.0, 30.0, 40)
    magnetic = bg.two_level_schottky(temps, 5.0)
    sample = Measurement("C", temps, bg.debye_heat_capacity(temps, 200.0, atoms=5) + magnetic, source="c.dat")
    reference_t = np.linspace(0.5, 60.0, 400)
    reference_c = bg.debye_heat_capacity(reference_t, 300.0, atoms=5)
    result = bg.subtract_phonon_reference(sample, reference_t, reference_c, temperature_scale=300.0 / 200.0)
    assert result.quantity == "C"
    assert np.allclose(result.value, magnetic, atol=2e-3 * magnetic.max())


def test_phonon_reference_must_cover_the_data():
    temps = np.linspace(1.0, 30.0, 10)
    sample = Measurement("C", temps, np.ones(10), source="c.dat", lines=np.arange(5, 15))
    with pytest.raises(ParameterError, match=r"c.dat, line 13: T = 26.7778 K: outside the phonon reference range "
                                             r"0.5-25 K \(2 points\); restrict the data or extend the reference"):
        bg.subtract_phonon_reference(sample, [0.5, 10.0, 25.0], [0.1, 1.0, 2.0])


def test_entropy_of_a_two_level_system_matches_the_exact_entropy():
    # S/R = ln(1 + e^-x) + x e^-x / (1 + e^-x), x = Delta/T (textbook, exact); -> R ln 2 = R ln(2S+1).
    gap = 3.0
    temps = np.geomspace(0.02 * gap, 1000 * gap, 4000)
    result = bg.magnetic_entropy(temps, bg.two_level_schottky(temps, gap), spin=0.5)
    x = gap / temps
    exact = R * (np.log1p(np.exp(-x)) + x * np.exp(-x) / (1 + np.exp(-x)))
    assert np.allclose(result.entropy, exact, atol=1e-4 * R)
    assert result.expected == pytest.approx(R * math.log(2))
    assert result.fraction_recovered() == pytest.approx(1.0, abs=1e-4)


def test_zeeman_multiplet_releases_r_ln_2s_plus_1():
    # A field-split free spin S carries R ln(2S+1) between T -> 0 and T -> infinity (exact).
    temps = np.geomspace(0.01, 5000.0, 5000)
    result = bg.magnetic_entropy(temps, bg.zeeman_schottky(temps, 5.0, g=2.0, spin=2.5), spin=2.5, n_magnetic=1)
    assert result.fraction_recovered() == pytest.approx(1.0, abs=2e-4)


def test_entropy_extrapolation_below_the_first_point():
    # C = a T^3 below and above T_0: S(T) = a T^3 / 3 exactly; the extrapolation adds C(T_0)/3.
    a = 0.02
    temps = np.linspace(2.0, 10.0, 801)
    result = bg.magnetic_entropy(temps, a * temps**3, low_t_power=3)
    assert result.below_first_point == pytest.approx(a * 8 / 3)
    assert result.entropy[-1] == pytest.approx(a * 1000 / 3, rel=1e-5)
    without = bg.magnetic_entropy(temps, a * temps**3)
    assert result.entropy[-1] - without.entropy[-1] == pytest.approx(a * 8 / 3)
    with pytest.raises(ParameterError, match="give spin= to magnetic_entropy"):
        without.fraction_recovered()


def test_bad_background_parameters_are_refused():
    with pytest.raises(ParameterError, match="spin = 0.3: S must be a positive multiple of 1/2"):
        bg.brillouin(0.3, 1.0)
    with pytest.raises(ParameterError, match="theta_D must be > 0 K"):
        bg.debye_heat_capacity(10.0, 0.0)
    with pytest.raises(ParameterError, match="temperatures must be > 0 K"):
        bg.two_level_schottky([1.0, -2.0], 1.0)
    with pytest.raises(ParameterError, match="temperatures strictly increasing"):
        bg.magnetic_entropy([1.0, 1.0, 2.0], [0.1, 0.2, 0.3])
