"""Entropy method on exactly solvable chains: Ising chain and Heisenberg dimer (gapped), XX chain (gapless)."""

import math
from fractions import Fraction
from functools import lru_cache

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad

from hte.entropy_method import (EntropyInterpolation, LowTemperatureClass, check_sum_rules, entropy_method,
                                entropy_scan, entropy_series)
from hte.errors import ParameterError

b = sp.Symbol("beta")
LN2 = math.log(2)


def taylor(expr, order):
    """Exact Taylor coefficients of expr - expr(0) (the constant term, often ln 2, is set apart)."""
    series = sp.series(expr - expr.subs(b, 0), b, 0, order + 1).removeO()
    return [Fraction(str(sp.Rational(series.coeff(b, n)))) for n in range(order + 1)]


@lru_cache
def ising_chain_lnz(order=14):
    # H = J sum S^z_i S^z_{i+1}, S^z = +-1/2.  Baxter, Exactly Solved Models (1982) ch. 2, writes
    # H = -J_B sum s_i s_{i+1} with s = +-1 and finds ln Z/N = ln(2 cosh(beta J_B)); here J_B = -J/4, so
    # ln Z/N = ln 2 + ln cosh(beta/4) (J = 1).  Ground state e0 = -1/4 per site; a domain wall costs 1/2.
    return [LN2] + taylor(sp.log(sp.cosh(b / 4)), order)[1:]


def ising_chain_heat_capacity(t):
    x = 1 / (4 * t)
    return x ** 2 / np.cosh(x) ** 2


@lru_cache
def dimer_lnz(order=12):
    # Heisenberg dimer H = J S1.S2: singlet -3/4, triplet +1/4 (B. Bleaney and K. D. Bowers, Proc. R. Soc.
    # Lond. A 214, 451 (1952), who write H = -2J' S1.S2, J' = -J/2).  Per site: ln Z/N = ln(e^{3b/4} + 3e^{-b/4})/2,
    # e0 = -3/8, gap 1 (singlet-triplet).
    return [LN2] + taylor(sp.log(sp.exp(3 * b / 4) + 3 * sp.exp(-b / 4)) / 2, order)[1:]


def dimer_heat_capacity(t):
    beta = 1 / t
    weights = np.array([np.ones_like(beta), 3 * np.exp(-beta)])              # energies -3/4, +1/4 (shifted)
    energies = np.array([[-0.75], [0.25]])
    z = weights.sum(axis=0)
    mean = (weights * energies).sum(axis=0) / z
    square = (weights * energies ** 2).sum(axis=0) / z
    return 0.5 * beta ** 2 * (square - mean ** 2)


@lru_cache
def xx_chain_lnz(order=16):
    # XX chain H = J sum (S^x S^x + S^y S^y) = free spinless fermions with e_k = J cos k (E. Lieb, T. Schultz and
    # D. Mattis, Ann. Phys. 16, 407 (1961)): ln Z/N = (1/2pi) int dk ln(1 + e^{-beta cos k}).  Term by term,
    # beta^n cos^n k averages to beta^n C(n, n/2)/2^n for even n and 0 for odd n.  e0 = -1/pi, C ~ pi T/3.
    series = taylor(sp.log(1 + sp.exp(-b)), order)
    return [LN2] + [series[n] * Fraction(math.comb(n, n // 2), 2 ** n) if n % 2 == 0 else Fraction(0)
                    for n in range(1, order + 1)]


def xx_chain_heat_capacity(t):
    integrand = lambda k: (np.cos(k) / t) ** 2 / (4 * np.cosh(np.cos(k) / (2 * t)) ** 2)
    return quad(integrand, 0, np.pi, limit=200)[0] / np.pi


def test_series_of_entropy_around_e_inf_starts_with_the_energy_variance():
    # s(e) = ln 2 - (e - e_inf)^2 / (2 var) + ..., var = 2 l_2 (per site energy variance at beta = 0):
    # l_2 = 1/32 for the Ising chain, so s_2 = -1/(4 l_2) = -8.
    data = entropy_series(ising_chain_lnz())
    assert data.e_inf == 0.0 and data.s_inf == LN2
    assert data.entropy[1] == 0.0
    assert data.entropy[2] == pytest.approx(-8.0, rel=1e-14)


def test_ising_chain_gapped_interpolation_reproduces_exact_heat_capacity():
    temperatures = np.geomspace(0.05, 5.0, 25)
    result = entropy_method(ising_chain_lnz(), -0.25, "gapped:0.5", temperatures)
    exact = ising_chain_heat_capacity(temperatures)
    assert len(result.interpolations) >= 4
    np.testing.assert_allclose(result.curves["C"].estimate, exact, rtol=1e-6)
    assert np.all(result.curves["C"].lower <= result.curves["C"].upper)
    assert result.T_conv["C"] == pytest.approx(0.05)
    # E(T) = -tanh(beta/4)/4 and S = ln Z + beta E (same source)
    beta = 1 / temperatures
    np.testing.assert_allclose(result.curves["E"].estimate, -np.tanh(beta / 4) / 4, atol=1e-9)
    np.testing.assert_allclose(result.curves["S"].estimate,
                               LN2 + np.log(np.cosh(beta / 4)) - beta * np.tanh(beta / 4) / 4, atol=1e-9)
    for check in result.sum_rules:
        assert abs(check.entropy_integral - LN2) < 1e-6                 # int C/T dT = ln 2
        assert abs(check.energy_integral - 0.25) < 1e-6                 # int C dT = e_inf - e0 = 0 - (-1/4)


def test_heisenberg_dimer_gapped_interpolation_reproduces_bleaney_bowers():
    temperatures = np.geomspace(0.05, 5.0, 25)
    result = entropy_method(dimer_lnz(), -0.375, LowTemperatureClass("gapped", 1.0), temperatures)
    np.testing.assert_allclose(result.curves["C"].estimate, dimer_heat_capacity(temperatures), rtol=1e-4)
    assert max(check.worst_deviation for check in result.sum_rules) < 1e-6


def test_xx_chain_gapless_interpolation_follows_free_fermions_down_to_low_temperature():
    temperatures = np.array([0.02, 0.05, 0.1, 0.2, 0.3, 0.5, 1.0, 2.0])
    result = entropy_method(xx_chain_lnz(), -1 / math.pi, "power:1", temperatures)
    exact = np.array([xx_chain_heat_capacity(t) for t in temperatures])
    # measured deviation 1.8 % at T = 0.02 and 0.1, below 0.5 % above T = 0.2 (order 16)
    np.testing.assert_allclose(result.curves["C"].estimate, exact, rtol=0.03)
    np.testing.assert_allclose(result.curves["C"].estimate[temperatures >= 0.2], exact[temperatures >= 0.2],
                               rtol=0.005)
    assert result.curves["C"].estimate[0] / 0.02 == pytest.approx(math.pi / 3, rel=0.03)   # C = pi T/3
    for check in result.sum_rules:
        assert abs(check.entropy_integral - LN2) < 1e-6
        assert abs(check.energy_integral - 1 / math.pi) < 1e-6


def test_scan_singles_out_the_true_ground_state_energy_and_exponent():
    temperatures = np.geomspace(0.05, 2.0, 12)
    points = entropy_scan(xx_chain_lnz(), [-0.33, -1 / math.pi, -0.31], ["power:1", "power:2", "gapped:0.2"],
                          temperatures)
    by_key = {(round(p.e0, 4), str(p.low_t)): p for p in points}
    best = by_key[(round(-1 / math.pi, 4), "power:1")]
    assert best.accepted >= 2 and best.spread_C < 1e-3
    for point in points:
        if point is not best and point.spread_C is not None:
            assert point.spread_C > 10 * best.spread_C
    assert all(p.accepted <= best.accepted for p in points if p.e0 != best.e0)


def test_sum_rule_check_detects_a_wrong_normalisation():
    # the same interpolation judged against a series with another infinite-temperature entropy must fail
    data = entropy_series(ising_chain_lnz())
    result = entropy_method(ising_chain_lnz(), -0.25, "gapped:0.5", [0.1, 1.0])
    interpolation = result.interpolations[0]
    assert check_sum_rules(interpolation, data).worst_deviation < 1e-6
    shifted = EntropyInterpolation(interpolation.auxiliary, -0.3, interpolation.e_inf, interpolation.low_t)
    assert check_sum_rules(shifted, data).worst_deviation > 1e-3


def test_bad_input_says_what_to_change():
    lnz = ising_chain_lnz()
    with pytest.raises(ParameterError, match="lies above the energy"):
        entropy_method(lnz, 0.1, "gapped:0.5", [0.5])
    with pytest.raises(ParameterError, match="lies above the energy"):
        entropy_method(lnz, -0.01, "gapped:0.5", [0.5])          # below e_inf but above E(T) of the series
    with pytest.raises(ParameterError, match="must be a positive number"):
        entropy_method(lnz, -0.25, "power:0", [0.5])
    with pytest.raises(ParameterError, match="must be a positive number"):
        entropy_method(lnz, -0.25, LowTemperatureClass("gapped", -1.0), [0.5])
    with pytest.raises(ParameterError, match="'gapped:DELTA' or 'power:ALPHA'"):
        LowTemperatureClass.parse("power=1")
    with pytest.raises(ParameterError, match="it needs order 4 at least"):
        entropy_method(lnz[:4], -0.25, "gapped:0.5", [0.5])
    with pytest.raises(ParameterError, match="ground-state energy per site e0 is required"):
        entropy_method(lnz, None, "gapped:0.5", [0.5])
