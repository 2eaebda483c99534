r"""Matrices of a cluster Hamiltonian :math:`H_0` in the sectors of fixed total :math:`S^z`.

:math:`H_0 = \sum_b [J^{xy}_b (S^x_u S^x_v + S^y_u S^y_v) + J^z_b S^z_u S^z_v] + \sum_i D_i (S^z_i)^2`
(field h = 0), with :math:`S^x_u S^x_v + S^y_u S^y_v = (S^+_u S^-_v + S^-_u S^+_v)/2`.

Basis: product states, site i in local state k_i = S_i + m_i in 0..2S_i.  A state's code is the mixed-radix
number with digits k_i (site 0 most significant); within a sector the states are sorted by code.

Two gauges of the same operator:

* physical (orthonormal) basis, :math:`S^+|m\rangle = \sqrt{f(m)}\,|m+1\rangle` with
  :math:`f(m) = (S-m)(S+m+1)`: H0 is real symmetric (:func:`float_sector_matrix`);
* integer gauge, basis vectors rescaled by :math:`c_k = F(k)^{-1/2}`, :math:`F(k) = \prod_{j<k} f(j)`, so that
  :math:`S^+` carries f(m) and :math:`S^-` carries 1.  Then A = scale * C^{-1} H0 C with scale = 4 L (L the
  common denominator of all couplings) is an integer matrix (:func:`integer_sector_matrix`) with the same
  traces of powers as scale * H0.

References
----------
.. [1] A. Auerbach, Interacting Electrons and Quantum Magnetism (Springer, 1994), ch. 2 (spin operators and
       their matrix elements).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from math import lcm, prod

import numpy as np

_INT64_SAFE = 2**62


@dataclass(frozen=True)
class SpinSector:
    """The product states of a cluster with total S^z = twice_magnetization / 2.

    Attributes
    ----------
    twice_magnetization : int
        2 * sum_i m_i.
    local_states : numpy.ndarray
        int64 array (dim, n_sites) of k_i = S_i + m_i, rows sorted by code.
    codes : numpy.ndarray
        int64 mixed-radix codes of the rows, strictly increasing.
    place_values : numpy.ndarray
        Code increment for raising site i by one step.
    """

    twice_magnetization: int
    local_states: np.ndarray
    codes: np.ndarray
    place_values: np.ndarray

    @property
    def magnetization(self) -> Fraction:
        return Fraction(self.twice_magnetization, 2)

    @property
    def dim(self) -> int:
        return self.codes.shape[0]


def spin_sectors(twice_spins: tuple[int, ...], nonnegative_only: bool = False) -> list[SpinSector]:
    """All S^z_total sectors of sites with spins S_i = twice_spins[i] / 2, in increasing magnetization.

    With ``nonnegative_only`` only the sectors m >= 0 are built (the others follow by the global spin flip).
    """
    radices = np.array([t + 1 for t in twice_spins], dtype=np.int64)
    place_values = np.array([prod(int(r) for r in radices[i + 1:]) for i in range(len(radices))], dtype=np.int64)
    codes = np.arange(int(np.prod(radices)), dtype=np.int64)
    local_states = (codes[:, None] // place_values[None, :]) % radices[None, :]
    twice_m = (2 * local_states - np.array(twice_spins, dtype=np.int64)).sum(axis=1)
    sectors = []
    for value in np.unique(twice_m):
        if nonnegative_only and value < 0:
            continue
        rows = np.nonzero(twice_m == value)[0]
        sectors.append(SpinSector(int(value), local_states[rows], codes[rows], place_values))
    return sectors


def _flips(sector: SpinSector, twice_spins, raised: int, lowered: int):
    """States b on which S^+_raised S^-_lowered acts, their images a, and k_raised, k_lowered of b."""
    k = sector.local_states
    source = np.nonzero((k[:, raised] < twice_spins[raised]) & (k[:, lowered] > 0))[0]
    image_codes = sector.codes[source] + sector.place_values[raised] - sector.place_values[lowered]
    target = np.searchsorted(sector.codes, image_codes)
    return source, target, k[source, raised], k[source, lowered]


def _raising_factor(twice_spin: int, k: np.ndarray) -> np.ndarray:
    """f(m) = (S - m)(S + m + 1) = (2S - k)(k + 1) for k = S + m: the square of <m+1|S^+|m>."""
    return (twice_spin - k) * (k + 1)


def coupling_scale(ham) -> int:
    """4 L, L = least common multiple of the denominators of all Jxy, Jz and D of ``ham``."""
    values = [c for _, _, jxy, jz in ham.bonds for c in (jxy, jz)] + list(ham.anisotropy)
    return 4 * lcm(1, *(Fraction(v).denominator for v in values))


def spectral_bound(ham, scale: int) -> int:
    r"""An integer R >= scale * ||H0|| (operator norm), proven by the triangle inequality.

    ||S^x_u S^x_v + S^y_u S^y_v|| <= 2 S_u S_v, ||S^z_u S^z_v|| = S_u S_v, ||(S^z_i)^2|| = S_i^2, so
    R = (scale/4) [sum_b (2|Jxy| + |Jz|)(2S_u)(2S_v) + sum_i |D_i| (2S_i)^2].
    """
    twice = ham.twice_spins
    total = sum((2 * abs(jxy) + abs(jz)) * twice[u] * twice[v] for u, v, jxy, jz in ham.bonds)
    total += sum(abs(d) * t * t for d, t in zip(ham.anisotropy, twice))
    bound = Fraction(scale, 4) * total
    return bound.numerator // bound.denominator + (bound.denominator != 1)


@dataclass(frozen=True)
class IntegerSectorMatrix:
    """A = scale * C^{-1} H0 C restricted to one sector, compressed rows (A[a, b] = <a|A|b>).

    ``values`` is int64 when every entry provably fits, else a numpy object array of Python ints.
    """

    indptr: np.ndarray
    indices: np.ndarray
    values: np.ndarray

    @property
    def max_row_length(self) -> int:
        return int(np.diff(self.indptr).max(initial=0))

    @property
    def max_abs_entry(self) -> int:
        return int(max((abs(v) for v in self.values), default=0)) if self.values.dtype == object else int(
            np.abs(self.values).max(initial=0)
        )


def integer_sector_matrix(sector: SpinSector, ham, scale: int) -> IntegerSectorMatrix:
    """The integer-gauge matrix A = scale * C^{-1} H0 C of ``ham`` in ``sector`` (see module docstring).

    Off-diagonal: <a|A|b> = (scale/2) Jxy f(m_u) for S^+_u S^-_v; diagonal:
    (scale/4) [sum_b Jz (2m_u)(2m_v) + sum_i D_i (2m_i)^2].  Requires scale to be a multiple of 4 L.
    """
    twice = ham.twice_spins
    max_factor = max((_raising_factor(t, np.arange(t + 1)).max() for t in twice), default=1)
    fits = spectral_bound(ham, scale) * int(max_factor) < _INT64_SAFE
    dtype = np.int64 if fits else object
    twice_m = 2 * sector.local_states - np.array(twice, dtype=np.int64)
    diagonal = np.zeros(sector.dim, dtype=dtype)
    rows, columns, values = [], [], []
    for u, v, jxy, jz in ham.bonds:
        if jz:
            diagonal += (twice_m[:, u] * twice_m[:, v]).astype(dtype) * _as_integer(Fraction(scale, 4) * jz)
        if jxy:
            for raised, lowered in ((u, v), (v, u)):
                source, target, k_raised, _ = _flips(sector, twice, raised, lowered)
                rows.append(target)
                columns.append(source)
                factor = _raising_factor(twice[raised], k_raised).astype(dtype)
                values.append(factor * _as_integer(Fraction(scale, 2) * jxy))
    for i, d in enumerate(ham.anisotropy):
        if d:
            diagonal += (twice_m[:, i] ** 2).astype(dtype) * _as_integer(Fraction(scale, 4) * d)
    on_diagonal = np.nonzero(diagonal != 0)[0]
    rows.append(on_diagonal)
    columns.append(on_diagonal)
    values.append(diagonal[on_diagonal])
    rows, columns, values = np.concatenate(rows), np.concatenate(columns), np.concatenate(values)
    order = np.lexsort((columns, rows))
    indptr = np.zeros(sector.dim + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=sector.dim), out=indptr[1:])
    return IntegerSectorMatrix(indptr, columns[order].astype(np.int64), values[order])


def _as_integer(value: Fraction) -> int:
    if value.denominator != 1:
        raise ValueError(f"{value} is not an integer: the scale must be a multiple of 4 x the common denominator")
    return value.numerator


def gauge_weights_mod(sector: SpinSector, twice_spins: tuple[int, ...], prime: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column weights (c_a^2 mod p, c_a^{-2} mod p) of the integer gauge, one per state.

    c_a^{-2} = prod_i F_i(k_i) with F(k) = prod_{j<k} f(j).  With these weights
    :func:`hte.modular.power_traces_mod` returns Tr(A^k).  Every factor f(j) <= (S + 1/2)^2 < prime, so F(k)
    is invertible modulo the prime.
    """
    row_weight = np.ones(sector.dim, dtype=np.int64)
    column_weight = np.ones(sector.dim, dtype=np.int64)
    for site, twice_spin in enumerate(twice_spins):
        products = [1]
        for j in range(twice_spin):
            products.append(products[-1] * int(_raising_factor(twice_spin, j)) % prime)
        table = np.array(products, dtype=np.int64)
        inverse_table = np.array([pow(x, -1, prime) for x in products], dtype=np.int64)
        k = sector.local_states[:, site]
        row_weight = row_weight * inverse_table[k] % prime
        column_weight = column_weight * table[k] % prime
    return row_weight, column_weight


def float_sector_matrix(sector: SpinSector, ham) -> np.ndarray:
    """Dense real symmetric H0 (float64, units of the couplings) in ``sector``, physical basis."""
    twice = ham.twice_spins
    matrix = np.zeros((sector.dim, sector.dim))
    m = sector.local_states - np.array(twice, dtype=np.int64) / 2
    diagonal = np.zeros(sector.dim)
    for u, v, jxy, jz in ham.bonds:
        diagonal += float(jz) * m[:, u] * m[:, v]
        if jxy:
            for raised, lowered in ((u, v), (v, u)):
                source, target, k_raised, k_lowered = _flips(sector, twice, raised, lowered)
                squared = _raising_factor(twice[raised], k_raised) * _raising_factor(twice[lowered], k_lowered - 1)
                matrix[target, source] += float(jxy) / 2 * np.sqrt(squared)
    for i, d in enumerate(ham.anisotropy):
        diagonal += float(d) * m[:, i] ** 2
    matrix[np.diag_indices(sector.dim)] += diagonal
    return matrix
