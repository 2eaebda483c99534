"""Sparse multivariate polynomials with exact rational coefficients, and exact interpolation.

A polynomial is a dict {exponent tuple: Fraction}; the variables are named by the caller.  Used to carry
linked-cluster weights in symbolic mode (polynomials in the coupling symbols) and lattice sums (polynomials in
coupling and occupation symbols).
"""

from __future__ import annotations

import itertools
from fractions import Fraction
from functools import lru_cache

from hte.exact_algebra import gauss_jordan


def add_into(target: dict, source: dict, factor=1) -> None:
    """target += factor * source (in place)."""
    for mono, coef in source.items():
        value = target.get(mono, 0) + factor * coef
        if value:
            target[mono] = value
        else:
            target.pop(mono, None)


def simplex_points(n_vars: int, degree: int) -> list[tuple[int, ...]]:
    """All non-negative integer tuples of length n_vars with sum <= degree (the principal lattice)."""
    return [p for p in itertools.product(range(degree + 1), repeat=n_vars) if sum(p) <= degree]


@lru_cache(maxsize=64)
def _inverse_vandermonde(n_vars: int, degree: int):
    """Exact inverse of the Vandermonde matrix of total-degree monomials on the principal lattice."""
    points = simplex_points(n_vars, degree)
    monomials = simplex_points(n_vars, degree)
    size = len(points)
    matrix = []
    for i, p in enumerate(points):
        row = []
        for e in monomials:
            v = Fraction(1)
            for x, k in zip(p, e):
                v *= Fraction(x) ** k if k else 1
            row.append(v)
        matrix.append(row + [Fraction(int(i == j)) for j in range(size)])
    gauss_jordan(matrix, size)  # the principal lattice is unisolvent: the matrix is always invertible
    inverse = tuple(tuple(row[size:]) for row in matrix)
    return tuple(points), tuple(monomials), inverse


def interpolation_points(n_vars: int, degree: int) -> list[tuple[int, ...]]:
    """Where to evaluate a polynomial of total degree <= degree in n_vars variables to interpolate it."""
    return list(_inverse_vandermonde(n_vars, degree)[0])


def interpolate(n_vars: int, degree: int, values) -> dict:
    """The polynomial {exponents: Fraction} taking `values[i]` at ``interpolation_points(n_vars, degree)[i]``."""
    _, monomials, inverse = _inverse_vandermonde(n_vars, degree)
    result = {}
    for mono, row in zip(monomials, inverse):
        c = sum((a * v for a, v in zip(row, values) if a and v), Fraction(0))
        if c:
            result[mono] = c
    return result
