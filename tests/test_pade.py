"""Padé approximants: exact solve, evaluation, poles, defects, variable changes and ensembles."""

from fractions import Fraction
from math import comb, factorial

import numpy as np
import pytest
import sympy as sp

from hte.errors import ParameterError
from hte.pade import (Band, PadeApproximant, SingularPadeError, VariableTransform, band_from_samples,
                      convergence_temperature, find_defects, near_diagonal_orders, pade, pade_ensemble)

beta = sp.Symbol("beta")


def taylor(expr, order):
    """Exact Taylor coefficients of a sympy expression in beta, as Fractions."""
    series = sp.series(expr, beta, 0, order + 1).removeO()
    return [Fraction(int(sp.Rational(series.coeff(beta, n)).p), int(sp.Rational(series.coeff(beta, n)).q))
            for n in range(order + 1)]


def test_exponential_2_2_is_the_textbook_approximant():
    # [2/2] of e^x = (1 + x/2 + x^2/12)/(1 - x/2 + x^2/12).  Source: G. A. Baker Jr. and P. Graves-Morris,
    # Padé Approximants (1996), table of the Padé approximants of exp (from memory).
    approximant = pade([Fraction(1, factorial(n)) for n in range(5)], 2, 2)
    assert approximant.exact
    assert approximant.numerator == (1, Fraction(1, 2), Fraction(1, 12))
    assert approximant.denominator == (1, Fraction(-1, 2), Fraction(1, 12))
    assert approximant(1.0) == pytest.approx(19 / 7, abs=1e-15)   # (1 + 1/2 + 1/12)/(1 - 1/2 + 1/12)


def test_approximant_reproduces_the_series_through_order_L_plus_M():
    # independent check of the defining property Q(x) f(x) - P(x) = O(x^(L+M+1)), by direct convolution;
    # f = ln(1 + x)/x + exp(-x/3) has c_n = (-1)^n/(n+1) + (-1/3)^n/n!
    coefficients = [Fraction((-1) ** n, n + 1) + Fraction(-1, 3) ** n / factorial(n) for n in range(10)]
    for L, M in [(4, 5), (5, 4), (3, 3), (6, 2)]:
        approximant = pade(coefficients, L, M)
        q, p = approximant.denominator, approximant.numerator
        assert q[0] == 1 and len(q) == M + 1 and len(p) == L + 1
        for k in range(L + M + 1):
            product = sum(q[j] * coefficients[k - j] for j in range(min(k, M) + 1))
            assert product == (p[k] if k <= L else 0)


def test_rational_function_is_recovered_inside_its_block_of_the_pade_table():
    # f = (1 + 2x)/(1 - x/3) is its own [1/1]; the [3/3] system is singular but [3/3] = [1/1] (Baker and
    # Graves-Morris, ch. 1, block structure; from memory)
    coefficients = taylor((1 + 2 * beta) / (1 - beta / 3), 8)
    approximant = pade(coefficients, 3, 3)
    assert (approximant.L, approximant.M) == (1, 1)
    assert approximant.numerator == (1, 2) and approximant.denominator == (1, Fraction(-1, 3))


def test_poles_of_the_dimer_susceptibility_are_found():
    # T chi per site of the Heisenberg dimer is 1/(3 + e^beta) (Bleaney-Bowers, see test_curves.py); its poles
    # nearest to the origin are beta = ln 3 +- i pi.
    approximant = pade(taylor(1 / (3 + sp.exp(beta)), 16), 8, 8)
    poles = approximant.poles()
    nearest = poles[np.argsort(np.abs(poles))][:2]
    expected = [np.log(3) - 1j * np.pi, np.log(3) + 1j * np.pi]
    np.testing.assert_allclose(sorted(nearest, key=lambda z: z.imag), expected, atol=1e-6)
    residue = approximant.residue(expected[1])
    assert residue == pytest.approx(-1 / 3, abs=1e-5)       # 1/(d/dbeta e^beta) = 1/e^beta = -1/3 there


def test_float_series_with_ill_conditioned_system_is_reported_singular():
    coefficients = [1.0, 1.0, 1.0, 1.0, 1.0 + 1e-15, 1.0, 1.0]  # 1/(1 - x) up to rounding: [2/2] degenerate
    approximant = pade(coefficients, 2, 2)                     # the block rule recovers [1/1] = 1/(1 - x)
    assert (approximant.L, approximant.M) == (1, 1)
    with pytest.raises(SingularPadeError):
        pade([1.0, 0.0, 1.0], 1, 1)                            # c_1 = 0: no [1/1] with Q(0) = 1 exists


def test_series_too_short_is_a_parameter_error():
    with pytest.raises(ParameterError, match=r"\[3/3\] needs the series through order 6"):
        pade([1, 2, 3], 3, 3)
    with pytest.raises(ParameterError, match="too short"):
        pade_ensemble([Fraction(1), Fraction(1)], (0.0, 1.0))


def test_defects_flag_poles_on_the_segment_and_froissart_doublets():
    # hand-built rational functions with known poles and zeros
    def rational(zeros, poles):
        numerator = np.real(np.polynomial.polynomial.polyfromroots(zeros) / np.prod(-np.array(zeros)))
        denominator = np.real(np.polynomial.polynomial.polyfromroots(poles) / np.prod(-np.array(poles)))
        return PadeApproximant(tuple(numerator), tuple(denominator), exact=False)

    clean = rational([-2.0], [-3.0, 5.0 + 4.0j, 5.0 - 4.0j])
    assert find_defects(clean, (0.0, 4.0)) == []
    on_segment = rational([-2.0], [2.5, -3.0])
    assert any("pole at x = 2.5" in d for d in find_defects(on_segment, (0.0, 4.0)))
    doublet = rational([-2.0, 5.0], [5.0001, -3.0])           # near-cancelling pair just beyond the segment
    assert any("Froissart doublet" in d for d in find_defects(doublet, (0.0, 4.0)))
    genuine = rational([-2.0, 5.0], [5.5, -3.0])              # a pole-zero pair 0.5 apart is no doublet
    assert not any("Froissart" in d for d in find_defects(genuine, (0.0, 4.0)))


def test_euler_and_exponential_variables_re_expand_the_series_exactly():
    coefficients = [Fraction(1, factorial(n)) for n in range(9)]           # e^beta
    # beta = w/(1 - a w): [w^n] exp(w/(1 - a w)) = sum_k C(n-1, k-1) a^(n-k)/k! (binomial series, common practice)
    a = Fraction(1, 2)
    euler = VariableTransform("euler", a).transform_series(coefficients)
    expected = [Fraction(1)] + [sum(comb(n - 1, k - 1) * a ** (n - k) / factorial(k) for k in range(1, n + 1))
                                for n in range(1, 9)]
    assert euler == expected
    # y = 1 - exp(-beta/2): beta = -2 ln(1 - y), so e^beta = (1 - y)^(-2) = sum (n + 1) y^n
    exponential = VariableTransform("exp", Fraction(1, 2)).transform_series(coefficients)
    assert exponential == [n + 1 for n in range(9)]
    t = VariableTransform("euler", 0.5)
    b = np.array([0.1, 1.0, 10.0])
    slope, curvature = t.derivatives(b)
    h = 1e-3
    np.testing.assert_allclose(slope, (t.forward(b + h) - t.forward(b - h)) / (2 * h), rtol=1e-5)
    np.testing.assert_allclose(curvature, (t.forward(b + h) - 2 * t.forward(b) + t.forward(b - h)) / h ** 2,
                               rtol=1e-5)


def test_transform_parameters_are_checked():
    with pytest.raises(ParameterError, match="needs a > 0"):
        VariableTransform("euler", 0)
    with pytest.raises(ParameterError, match="unknown"):
        VariableTransform("sqrt", 1)
    with pytest.raises(ParameterError, match="needs an even series"):
        VariableTransform("square").transform_series([1, 1, 1])


def test_near_diagonal_orders_respect_depth_and_offset():
    pairs = near_diagonal_orders(10, depth=3, max_offset=2)
    assert all(8 <= L + M <= 10 and abs(L - M) <= 2 and M >= 1 for L, M in pairs)
    assert (5, 5) in pairs and (6, 4) in pairs and (4, 4) in pairs and (7, 3) not in pairs
    assert len(pairs) == len(set(pairs)) == 8                 # 8: [5/3] [4/4] [3/5] [5/4] [4/5] [6/4] [5/5] [4/6]


def test_ensemble_of_ising_chain_susceptibility_converges_on_the_segment():
    # T chi/N = exp(-beta/2)/4 for the spin-1/2 Ising chain H = J sum S^z S^z (see test_curves.py for the
    # derivation from Baxter); entire function, so every approximant is accurate where it has no defect.
    coefficients = taylor(sp.exp(-beta / 2) / 4, 12)
    members = pade_ensemble(coefficients, (0.0, 5.0))
    accepted = [m for m in members if m.accepted]
    assert len(accepted) >= 5
    b = np.linspace(0.1, 5.0, 30)
    for member in accepted:
        np.testing.assert_allclose(member.approximant(b), np.exp(-b / 2) / 4, rtol=1e-4)
        np.testing.assert_allclose(member.approximant(b[b < 2]), np.exp(-b[b < 2] / 2) / 4, rtol=1e-9)


def test_coincident_approximants_are_counted_once():
    # the series of a [1/1] rational function: every larger [L/M] is the same function
    members = pade_ensemble(taylor((1 + beta) / (1 + beta / 2), 8), (0.0, 1.0))
    assert sum(m.accepted for m in members) == 1
    assert any("same rational function" in d for m in members for d in m.defects)


def test_band_and_convergence_temperature():
    samples = np.array([[1.0, 2.0, 3.0], [1.1, 2.0, 3.0], [1.3, 2.02, 3.0]])
    band = band_from_samples(samples)
    np.testing.assert_allclose(band.estimate, [1.1, 2.0, 3.0])
    np.testing.assert_allclose(band.lower, [1.0, 2.0, 3.0])
    np.testing.assert_allclose(band.upper, [1.3, 2.02, 3.0])
    temperatures = np.array([0.1, 0.5, 1.0])
    assert convergence_temperature(temperatures, band, 0.01) == 0.5   # 0.005 relative at T = 0.5
    assert convergence_temperature(temperatures, band, 0.2) == 0.1
    wide = Band(np.ones(3), np.zeros(3), 2 * np.ones(3))
    assert convergence_temperature(temperatures, wide, 0.01) is None
    with pytest.raises(ParameterError, match="spread"):
        band_from_samples(samples, spread="iqr")
