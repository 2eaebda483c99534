"""Wynn epsilon and Euler transformation on classic slowly converging series."""

import math

import numpy as np
import pytest

from hte.accelerate import euler_transform, wynn_epsilon
from hte.errors import ParameterError


def partial_sums(terms):
    return np.cumsum(np.asarray(terms, dtype=float), axis=0)


def alternating_harmonic(count):
    # sum_{n>=0} (-1)^n/(n+1) = ln 2 (Mercator series, common practice)
    return partial_sums([(-1) ** n / (n + 1) for n in range(count)])


def test_wynn_sums_the_alternating_harmonic_series_to_ln2():
    sums = alternating_harmonic(12)
    assert abs(sums[-1] - math.log(2)) > 0.03          # the plain partial sum is poor
    result = wynn_epsilon(sums)
    assert abs(result.estimate - math.log(2)) < 1e-8
    assert result.error < 1e-7


def test_wynn_sums_leibniz_series_to_pi_over_4():
    # sum_{n>=0} (-1)^n/(2n+1) = pi/4 (Leibniz series, common practice)
    sums = partial_sums([(-1) ** n / (2 * n + 1) for n in range(12)])
    assert abs(wynn_epsilon(sums).estimate - math.pi / 4) < 1e-8


def test_wynn_gives_antilimit_of_divergent_geometric_series_from_three_terms():
    # The Shanks transformation is exact for S_n = A + B q^n; for sum (-2)^n it returns 1/(1 - (-2)) = 1/3.
    # Source: C. M. Bender and S. A. Orszag, Advanced Mathematical Methods (1978), sec. 8.1 (from memory).
    sums = partial_sums([(-2.0) ** n for n in range(3)])
    assert wynn_epsilon(sums).estimate == pytest.approx(1 / 3, abs=1e-14)


def test_wynn_keeps_the_limit_of_an_already_converged_sequence():
    sums = partial_sums([0.5 ** n for n in range(60)])   # reaches 2 to machine precision; columns break down
    result = wynn_epsilon(sums)
    assert np.isfinite(result.estimate)
    assert result.estimate == pytest.approx(2.0, abs=1e-12)


def test_euler_transform_sums_alternating_harmonic_series():
    # Euler: sum (-1)^n w_n = sum_j (-1)^j Delta^j w_0 / 2^(j+1); for w_n = 1/(n+1) the j-th term is
    # 1/((j+1) 2^(j+1)) (a standard exercise), so 16 terms leave about 1/(17 * 2^17) = 4.5e-7.
    sums = alternating_harmonic(16)
    result = euler_transform(sums)
    error = abs(result.estimate - math.log(2))
    assert error < 1e-6
    assert result.error == pytest.approx(1 / (16 * 2 ** 16), rel=1e-6)
    assert error < 2 * result.error


def test_euler_transform_from_later_start_adds_head_exactly():
    sums = alternating_harmonic(20)
    assert abs(euler_transform(sums, start=4).estimate - math.log(2)) < 1e-6


def test_both_methods_vectorise_over_a_temperature_grid():
    # ln(1 + x) = sum (-1)^n x^(n+1)/(n+1) for x in (0, 1]; one sequence per "temperature" x
    x = np.array([0.3, 0.7, 1.0])
    terms = np.array([(-1) ** n * x ** (n + 1) / (n + 1) for n in range(14)])
    sums = np.cumsum(terms, axis=0)
    for accelerate in (wynn_epsilon, euler_transform):
        together = accelerate(sums)
        separate = [float(accelerate(sums[:, i]).estimate) for i in range(3)]
        assert together.estimate.shape == (3,)
        np.testing.assert_allclose(together.estimate, separate, rtol=0, atol=1e-15)
        np.testing.assert_allclose(together.estimate, np.log1p(x), atol=1e-5)


def test_short_or_invalid_sequences_are_rejected():
    with pytest.raises(ParameterError, match="at least 3 partial sums"):
        wynn_epsilon([1.0, 0.5])
    with pytest.raises(ParameterError, match="NaN or infinite"):
        wynn_epsilon([1.0, np.nan, 0.5, 0.7])
    with pytest.raises(ParameterError, match="at least 6 partial sums"):
        euler_transform([1.0, 0.5, 0.8], start=4)
