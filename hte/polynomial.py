"""Sparse multivariate polynomials with exact rational coefficients, and exact interpolation.

A polynomial is a dict {exponent tuple: Fraction}; the variables are named by the caller.  Used to carry
linked-cluster weights in symbolic mode (polynomials in the coupling symbols) and lattice sums (polynomials in
coupling and occupation symbols).

Interpolation uses the principal lattice of degree d in n variables, the integer points p >= 0 with
p_1 + ... + p_n <= d, moved by a constant ``offset`` in every coordinate: it is unisolvent for polynomials of
total degree <= d (a translate of a unisolvent set is unisolvent, since translation maps that space onto
itself).  Points are listed by total degree of p first, so the lattice of degree d' <= d is the first
C(d' + n, n) points of the lattice of degree d: values measured for degree d also serve every lower degree.
"""

from __future__ import annotations

import itertools
from fractions import Fraction
from functools import lru_cache
from math import comb

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
    """All non-negative integer tuples of length n_vars with sum <= degree, by total degree, then lexically."""
    points = [p for p in itertools.product(range(degree + 1), repeat=n_vars) if sum(p) <= degree]
    return sorted(points, key=lambda p: (sum(p), p))


def lattice_size(n_vars: int, degree: int) -> int:
    """Number of points of the principal lattice (= monomials of total degree <= degree): C(degree + n, n)."""
    return comb(degree + n_vars, n_vars)


@lru_cache(maxsize=256)
def _inverse_vandermonde(n_vars: int, degree: int, offset: int):
    """Exact inverse of the Vandermonde matrix of total-degree monomials on the moved principal lattice."""
    points = tuple(tuple(x + offset for x in p) for p in simplex_points(n_vars, degree))
    monomials = tuple(simplex_points(n_vars, degree))
    size = len(points)
    matrix = []
    for i, p in enumerate(points):
        row = []
        for e in monomials:
            v = 1
            for x, k in zip(p, e):
                v *= x**k
            row.append(Fraction(v))
        matrix.append(row + [Fraction(int(i == j)) for j in range(size)])
    gauss_jordan(matrix, size)  # the (moved) principal lattice is unisolvent: the matrix is always invertible
    inverse = tuple(tuple(row[size:]) for row in matrix)
    return points, monomials, inverse


def interpolation_points(n_vars: int, degree: int, offset: int = 0) -> list[tuple[int, ...]]:
    """Where to evaluate a polynomial of total degree <= degree in n_vars variables to interpolate it.

    The principal lattice of `degree` with `offset` added to every coordinate (``offset=1``: no coordinate is
    zero), ordered so that the first ``lattice_size(n_vars, d)`` points are the lattice of degree d <= degree.
    """
    return list(_inverse_vandermonde(n_vars, degree, offset)[0])


def interpolate(n_vars: int, degree: int, values, offset: int = 0) -> dict:
    """The polynomial {exponents: Fraction} of total degree <= degree taking ``values[i]`` at
    ``interpolation_points(n_vars, degree, offset)[i]``.

    Exact only if such a polynomial exists; `values` may be longer than the lattice (the extra values, at points
    of higher degree, are not used).
    """
    _, monomials, inverse = _inverse_vandermonde(n_vars, degree, offset)
    if len(values) < len(monomials):
        raise ValueError(f"{len(values)} values for {len(monomials)} interpolation points")
    result = {}
    for mono, row in zip(monomials, inverse):
        c = sum((a * v for a, v in zip(row, values) if a and v), Fraction(0))
        if c:
            result[mono] = c
    return result
