"""Exact linear algebra over the rationals (fractions.Fraction): Gauss–Jordan elimination."""

from __future__ import annotations

from fractions import Fraction


class SingularMatrixError(ArithmeticError):
    """The square part of the augmented matrix is singular."""


def gauss_jordan(augmented: list[list[Fraction]], n: int) -> list[list[Fraction]]:
    """Reduce an n-row augmented matrix [A | B] (A n x n) in place to [I | A^-1 B] and return it.

    Raises SingularMatrixError when A is singular.  Exact: every entry stays a Fraction.
    """
    a = augmented
    for col in range(n):
        pivot = next((r for r in range(col, n) if a[r][col] != 0), None)
        if pivot is None:
            raise SingularMatrixError(f"singular matrix (no pivot in column {col})")
        a[col], a[pivot] = a[pivot], a[col]
        inv = 1 / a[col][col]
        a[col] = [v * inv for v in a[col]]
        for r in range(n):
            if r != col and a[r][col] != 0:
                factor = a[r][col]
                a[r] = [v - factor * w for v, w in zip(a[r], a[col])]
    return a
