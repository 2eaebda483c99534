"""Susceptibility from the entropy method (hte.entropy_susceptibility) against exact and published results."""

import math
from fractions import Fraction

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad

from hte.curves import read_series
from hte.entropy_susceptibility import (SusceptibilityLowT, energy_series_of_chi_t, entropy_susceptibility,
                                        terminating_degree)
from hte.entropy_method import LowTemperatureClass, entropy_series
from hte.errors import ParameterError
from hte.series import compute_series

b = sp.Symbol("beta")


def taylor(expr, order):
    """Exact Taylor coefficients of expr in beta (floats where they are not rational, e.g. ln 2)."""
    series = sp.series(expr, b, 0, order + 1).removeO()
    return [float(sp.N(series.coeff(b, n), 30)) for n in range(order + 1)]


def test_chi_t_as_a_function_of_energy_follows_from_composition():
    # Ising chain (H = J sum S^z S^z, S = 1/2; R. J. Baxter, Exactly Solved Models (1982), ch. 2, with
    # J_Baxter = -J/4): e(beta) = -tanh(beta/4)/4 and T chi = exp(-beta/2)/4, so with u = exp(-beta/2),
    # e = -(1 - u)/(4(1 + u)) and T chi = u/4 = (1/4)(1 + 4e)/(1 - 4e) = 1/4 + 2e + 8e^2 + 32e^3 + ...
    data = entropy_series(taylor(sp.log(2 * sp.cosh(b / 4)), 12))
    c = energy_series_of_chi_t(data, taylor(sp.exp(-b / 2) / 4, 12))
    expected = [0.25] + [2.0 * 4.0 ** (k - 1) for k in range(1, len(c))]
    np.testing.assert_allclose(c, expected, rtol=1e-9)


def test_ising_chain_susceptibility_is_reproduced_exactly():
    # Same model: chi* = beta exp(-beta/2)/4 (Baxter 1982, converted as above); gap of a domain wall 1/2, and the
    # spin gap equals it, so T chi is proportional to e - e0 near e0 and K(x) is the rational function
    # (1/4)/(1 - x): every approximant from [0/1] on is exact.
    temperatures = np.geomspace(0.05, 5.0, 20)
    result = entropy_susceptibility(taylor(sp.log(2 * sp.cosh(b / 4)), 14), taylor(sp.exp(-b / 2) / 4, 14),
                                    -0.25, "gapped:0.5", temperatures)
    exact = np.exp(-0.5 / temperatures) / (4 * temperatures)
    np.testing.assert_allclose(result.band.estimate, exact, rtol=1e-8)
    assert result.exponent == 1.0 and result.pairs >= 4
    assert result.T_conv == pytest.approx(0.05)


def test_heisenberg_dimer_susceptibility_is_bleaney_bowers():
    # H = J S1.S2: singlet -3/4, triplet +1/4 (B. Bleaney and K. D. Bowers, Proc. R. Soc. Lond. A 214, 451
    # (1952), with H = -2J' S1.S2, J' = -J/2).  Per site: T chi = exp(-beta)/(1 + 3 exp(-beta)) and
    # e - e0 = (3/2) exp(-beta)/(1 + 3 exp(-beta)): T chi = (2/3)(e - e0) exactly, so K is a constant and the
    # polynomial branch (terminating series) is used.
    lnz = taylor(sp.log(sp.exp(3 * b / 4) + 3 * sp.exp(-b / 4)) / 2, 12)
    chi_t = taylor(sp.exp(-b / 4) / (sp.exp(3 * b / 4) + 3 * sp.exp(-b / 4)), 12)
    temperatures = np.geomspace(0.05, 5.0, 20)
    result = entropy_susceptibility(lnz, chi_t, -0.375, "gapped:1", temperatures)
    exact = np.exp(-1 / temperatures) / (1 + 3 * np.exp(-1 / temperatures)) / temperatures
    assert [m.label for m in result.members] == ["[0/0]"]
    np.testing.assert_allclose(result.band.estimate, exact, rtol=1e-4)   # s(e) of the dimer: C within 1e-4


def _xx_chain_series(order):
    # XX chain H = J sum (S^x S^x + S^y S^y) = free spinless fermions with energies J cos k (E. Lieb, T. Schultz and
    # D. Mattis, Ann. Phys. 16, 407 (1961)); the field couples to the fermion number, so
    # T chi = (1/2pi) int dk f(1 - f) = < 1/(4 cosh^2(beta cos k / 2)) >_k and
    # ln Z/N = < ln(1 + exp(-beta cos k)) >_k; term by term <cos^n k> = C(n, n/2)/2^n (n even), 0 (n odd).
    def averaged(expr):
        series = sp.series(expr, b, 0, order + 1).removeO()
        return [sp.Rational(series.coeff(b, n)) * Fraction(math.comb(n, n // 2), 2 ** n) if n % 2 == 0 else 0
                for n in range(order + 1)]

    lnz = [math.log(2)] + [float(c) for c in averaged(sp.log(1 + sp.exp(-b)) - sp.log(2))[1:]]
    chi_t = [float(c) for c in averaged(1 / (4 * sp.cosh(b / 2) ** 2))]
    return lnz, chi_t


def _xx_chain_chi(t):
    integrand = lambda k: 1 / (4 * np.cosh(np.cos(k) / (2 * t)) ** 2)
    return quad(integrand, 0, np.pi, limit=200)[0] / np.pi / t


def test_xx_chain_susceptibility_follows_free_fermions_and_the_band_covers_the_error():
    # Gapless: C ~ pi T/3 (alpha = 1) and chi(T -> 0) = 1/(pi J), finite (kappa = 0, the default).
    lnz, chi_t = _xx_chain_series(16)
    temperatures = np.array([0.02, 0.05, 0.1, 0.2, 0.3, 0.5, 1.0, 2.0])
    result = entropy_susceptibility(lnz, chi_t, -1 / math.pi, "power:1", temperatures)
    exact = np.array([_xx_chain_chi(t) for t in temperatures])
    error = np.abs(result.band.estimate - exact)
    # measured at order 16: 3.1 % off at T = 0.02 with a 5.8 % half-width, 0.22 % at T = 0.2, 1e-4 % at T = 0.5
    assert np.all(error <= result.band.upper - result.band.lower)
    np.testing.assert_allclose(result.band.estimate[temperatures >= 0.2], exact[temperatures >= 0.2], rtol=0.005)
    np.testing.assert_allclose(result.band.estimate[0], 1 / math.pi, rtol=0.05)
    assert result.exponent == pytest.approx(0.5)
    assert result.T_conv == pytest.approx(0.2)


def _maximum(result, temperatures):
    i = int(np.argmax(result.band.estimate))
    return result.band.estimate[i], temperatures[i]


def test_heisenberg_chain_susceptibility_maximum_matches_the_bethe_ansatz():
    # chi* maximum 0.14693 at T = 0.6409 J: D. C. Johnston et al., Phys. Rev. B 61, 9558 (2000) (Bethe ansatz);
    # e0 = 1/4 - ln 2 (L. Hulthen, Ark. Mat. Astron. Fys. 26A, no. 11 (1938)); C ~ T, finite chi(0).
    coefficients, _ = read_series(compute_series("chain", order=16, use_tables=True).to_json_dict())
    temperatures = np.linspace(0.4, 1.0, 601)
    result = entropy_susceptibility(coefficients["lnZ"], coefficients["chiT"], 0.25 - math.log(2), "power:1",
                                    temperatures)
    value, t_max = _maximum(result, temperatures)
    assert value == pytest.approx(0.14693, rel=0.01)       # measured: 0.146926
    assert t_max == pytest.approx(0.6409, rel=0.02)        # measured: 0.641


def test_square_lattice_susceptibility_maximum_near_quantum_monte_carlo():
    # QMC: chi maximum at T = 0.935 J, value 0.0469 (J.-K. Kim and M. Troyer, Phys. Rev. Lett. 80, 2705 (1998),
    # from memory), quoted in a normalisation half of ours: ours has T chi*/N -> S(S+1)/3 = 1/4 per site at
    # high T, and in it the maximum is 2 x 0.0469 = 0.0938.  e0 = -0.6694 per site (A. W. Sandvik, Phys. Rev. B
    # 56, 11678 (1997), from memory); C ~ T^2 and chi(0) finite for the Neel state (common practice).
    coefficients, _ = read_series(compute_series("square", order=11, use_tables=True).to_json_dict())
    temperatures = np.linspace(0.7, 1.2, 251)
    result = entropy_susceptibility(coefficients["lnZ"], coefficients["chiT"], -0.6694, "power:2", temperatures)
    value, t_max = _maximum(result, temperatures)
    assert value == pytest.approx(2 * 0.0469, rel=0.01)    # measured: 0.09371
    assert t_max == pytest.approx(0.935, rel=0.02)         # measured: 0.935


def test_terminating_series_is_recognised_and_others_are_not():
    assert terminating_degree([0.25, 1e-14, -2e-15, 3e-14, 1e-13]) == 0
    assert terminating_degree([1.0, 0.5, 0.25, 0.125, 0.0625]) is None
    assert terminating_degree([1.0, 0.5, 1e-15, 0.0]) is None        # fewer than three vanishing coefficients


def test_bad_susceptibility_input_says_what_to_change():
    lnz = taylor(sp.log(2 * sp.cosh(b / 4)), 10)
    chi_t = taylor(sp.exp(-b / 2) / 4, 10)
    with pytest.raises(ParameterError, match="same kind"):
        entropy_susceptibility(lnz, chi_t, -0.25, "gapped:0.5", [1.0], chi_low_t="power:0")
    with pytest.raises(ParameterError, match="spin gap must be a positive"):
        entropy_susceptibility(lnz, chi_t, -0.25, "gapped:0.5", [1.0], chi_low_t="gapped:-1")
    with pytest.raises(ParameterError, match=">= -1"):
        entropy_susceptibility(lnz, chi_t, -0.25, "power:1", [1.0], chi_low_t="power:-2")
    with pytest.raises(ParameterError, match="order 2 at least"):
        entropy_susceptibility(lnz, chi_t[:2], -0.25, "gapped:0.5", [1.0])
    with pytest.raises(ParameterError, match="more negative"):                # e0 above what the series reaches
        entropy_susceptibility(lnz, chi_t, 0.1, "gapped:0.5", [1.0])


def test_exponent_follows_the_low_temperature_classes():
    power = LowTemperatureClass("power", 2.0)
    assert SusceptibilityLowT.parse(None, power).exponent(power) == pytest.approx(1 / 3)   # chi finite, C ~ T^2
    assert SusceptibilityLowT.parse("power:1", power).exponent(power) == pytest.approx(2 / 3)  # chi ~ T
    gapped = LowTemperatureClass("gapped", 0.5)
    assert SusceptibilityLowT.parse(None, gapped).exponent(gapped) == 1.0
    assert SusceptibilityLowT.parse("gapped:1", gapped).exponent(gapped) == 2.0            # spin gap 2 x gap
