"""Dlog-Padé estimates of critical points and exponents."""

import math
from fractions import Fraction

import numpy as np
import pytest

from hte.dlog import biased_exponent, dlog_curve, dlog_pade, log_derivative_series
from hte.errors import ParameterError


def power_law_times_polynomial(x_c, gamma, correction, order):
    """Exact coefficients of (1 - x/x_c)^(-gamma) * (1 + correction*x) (binomial series, common practice)."""
    binomial = [Fraction(1)]
    for n in range(1, order + 1):
        binomial.append(binomial[-1] * (gamma + n - 1) / n / x_c)
    return [binomial[n] + (correction * binomial[n - 1] if n else 0) for n in range(order + 1)]


def test_log_derivative_of_exponential_is_constant():
    coefficients = [Fraction(2) ** n / math.factorial(n) for n in range(8)]   # e^(2x)
    assert log_derivative_series(coefficients) == [2, 0, 0, 0, 0, 0, 0]


def test_synthetic_power_law_gives_exact_critical_point_and_exponent():
    # f = (1 - x/x_c)^(-gamma) (1 + a x): d ln f/dx = gamma/(x_c - x) + a/(1 + a x) is a [1/2] rational
    # function, so every approximant that reaches it is exact.
    x_c, gamma = Fraction(1, 3), Fraction(7, 4)
    estimate = dlog_pade(power_law_times_polynomial(x_c, gamma, Fraction(1, 2), 12))
    assert len(estimate.accepted) >= 1
    assert estimate.beta_c == pytest.approx(1 / 3, abs=1e-12)
    assert estimate.gamma == pytest.approx(1.75, abs=1e-10)
    assert estimate.T_c == pytest.approx(3.0, abs=1e-10)
    biased = biased_exponent(power_law_times_polynomial(x_c, gamma, Fraction(1, 2), 12), x_c)
    assert biased.gamma == pytest.approx(1.75, abs=1e-10)


def test_power_law_with_non_rational_background_is_bracketed_by_the_ensemble():
    # f = (1 - 3x)^(-1.4) * cosh(x): the background adds poles of tanh at x = +-i pi/2, so approximants differ
    x = np.polynomial.Polynomial
    order = 14
    power = [1.0]
    for n in range(1, order + 1):
        power.append(power[-1] * (1.4 + n - 1) / n * 3.0)
    cosh = [1.0 / math.factorial(n) if n % 2 == 0 else 0.0 for n in range(order + 1)]
    coefficients = (x(power) * x(cosh)).coef[: order + 1]
    estimate = dlog_pade(coefficients)
    assert len(estimate.accepted) >= 3
    assert abs(estimate.beta_c - 1 / 3) < 1e-5
    assert abs(estimate.gamma - 1.4) < 1e-3
    assert abs(estimate.gamma - 1.4) <= 3 * estimate.gamma_err + 1e-6


def test_square_lattice_ising_susceptibility_gives_onsager_critical_point_and_gamma_7_4():
    # chi = sum_n a_n v^n, v = tanh(J/kT), square-lattice Ising model: coefficients from memory of the standard
    # tables.  The first four follow from counting walks without loops (z = 4: 1, z, z(z-1), z(z-1)^2), which
    # we check here; the rest is validated only by the outcome below.
    a = [1, 4, 12, 36, 100, 276, 740, 1972, 5172, 13492, 34876, 89764, 229628, 585508, 1486308, 3763460, 9497380,
         23918708, 60080156, 150660388, 377009364]
    z = 4
    assert a[:4] == [1, z, z * (z - 1), z * (z - 1) ** 2]
    estimate = dlog_pade([Fraction(n) for n in a])
    # exact: v_c = sqrt(2) - 1 (H. A. Kramers and G. H. Wannier, Phys. Rev. 60, 252 (1941)); gamma = 7/4
    # (T. T. Wu, B. M. McCoy, C. A. Tracy and E. Barouch, Phys. Rev. B 13, 316 (1976))
    assert abs(estimate.beta_c - (math.sqrt(2) - 1)) < 1e-5
    assert abs(estimate.gamma - 1.75) < 2e-3
    biased = biased_exponent([Fraction(n) for n in a], math.sqrt(2) - 1)
    assert abs(biased.gamma - 1.75) < 2e-3


def test_dlog_curve_integrates_back_to_the_function():
    x_c, gamma = Fraction(1, 2), Fraction(5, 4)
    coefficients = power_law_times_polynomial(x_c, gamma, Fraction(-1, 5), 10)
    estimate = dlog_pade(coefficients)
    first = estimate.accepted[0]
    beta = np.array([0.05, 0.2, 0.4, 0.49])
    curve = dlog_curve(first.approximant, 1.0, beta, first.beta_c, first.gamma)
    exact = (1 - beta / 0.5) ** -1.25 * (1 - beta / 5)
    np.testing.assert_allclose(curve, exact, rtol=1e-9)


def test_series_without_positive_singularity_gives_no_estimate():
    # e^(-x) (1 + x^2): no singularity at all; every approximant of its log-derivative lacks a positive pole
    coefficients = [Fraction((-1) ** n, math.factorial(n)) for n in range(12)]
    product = [coefficients[n] + (coefficients[n - 2] if n >= 2 else 0) for n in range(12)]
    assert dlog_pade(product) is None


def test_bad_input_is_a_parameter_error():
    with pytest.raises(ParameterError, match="order 3 at least"):
        dlog_pade([1, 2, 3])
    with pytest.raises(ParameterError, match="non-zero constant term"):
        dlog_pade([0, 1, 2, 3, 4])
    with pytest.raises(ParameterError, match="beta_c must be > 0"):
        biased_exponent([1, 2, 3, 4, 5], -0.5)
