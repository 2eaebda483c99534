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
.. [1] J. J. Sakurai, Modern Quantum Mechanics (Addison-Wesley, 1994), sec. 3.5: matrix elements of the
       angular-momentum ladder operators (cited from memory).
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


@dataclass(frozen=True)
class IntegerCouplings:
    """The couplings of a cluster scaled to integers: the data of A = scale * C^{-1} H0 C.

    Attributes
    ----------
    twice_spins : tuple of int
        2 S_i per site.
    scale : int
        4 L, L the least common multiple of the denominators of all Jxy, Jz and D.
    bonds : tuple of (u, v, flip, zz)
        flip = (scale/2) Jxy, the element of S^+_u S^-_v per unit f(m_u); zz = (scale/4) Jz, per unit (2m_u)(2m_v).
    anisotropy : tuple of int
        (scale/4) D_i per unit (2m_i)^2 (empty when there is none).
    spectral_bound : int
        R >= scale * ||H0|| (operator norm), proven by the triangle inequality:
        ||S^x_u S^x_v + S^y_u S^y_v|| <= 2 S_u S_v, ||S^z_u S^z_v|| = S_u S_v, ||(S^z_i)^2|| = S_i^2, so
        scale ||H0|| <= sum_b (scale/4)(2|Jxy| + |Jz|)(2S_u)(2S_v) + sum_i (scale/4)|D_i| (2S_i)^2
        = sum_b (|flip| + |zz|)(2S_u)(2S_v) + sum_i |anisotropy_i| (2S_i)^2 = R.
    """

    twice_spins: tuple[int, ...]
    scale: int
    bonds: tuple[tuple[int, int, int, int], ...]
    anisotropy: tuple[int, ...]
    spectral_bound: int

    @property
    def entry_dtype(self):
        """int64 when every matrix entry and partial sum provably stays below 2**62, else object (Python ints)."""
        largest_factor = max(((t + 1) ** 2 // 4 for t in self.twice_spins), default=1)  # max_m f(m) <= (S + 1/2)^2
        return np.int64 if self.spectral_bound * largest_factor < _INT64_SAFE else object


def integer_couplings(ham) -> IntegerCouplings:
    """Scale the couplings of ``ham`` (spins, bonds (u, v, Jxy, Jz), anisotropy) to integers."""
    values = [c for _, _, jxy, jz in ham.bonds for c in (jxy, jz)] + list(ham.anisotropy)
    scale = 4 * lcm(1, *(Fraction(v).denominator for v in values))
    twice = ham.twice_spins
    bonds = tuple(
        (u, v, _as_integer(Fraction(scale, 2) * jxy), _as_integer(Fraction(scale, 4) * jz))
        for u, v, jxy, jz in ham.bonds
    )
    anisotropy = tuple(_as_integer(Fraction(scale, 4) * d) for d in ham.anisotropy)
    bound = sum((abs(flip) + abs(zz)) * twice[u] * twice[v] for u, v, flip, zz in bonds)
    bound += sum(abs(d) * t * t for d, t in zip(anisotropy, twice))
    return IntegerCouplings(twice, scale, bonds, anisotropy, bound)


def _as_integer(value: Fraction) -> int:
    if value.denominator != 1:
        raise ValueError(f"{value} is not an integer: the scale must be a multiple of 4 x the common denominator")
    return value.numerator


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
        if self.values.dtype == object:
            return int(max((abs(v) for v in self.values), default=0))
        return int(np.abs(self.values).max(initial=0))


def integer_sector_matrix(sector: SpinSector, couplings: IntegerCouplings) -> IntegerSectorMatrix:
    """The integer-gauge matrix A = scale * C^{-1} H0 C in ``sector`` (see module docstring).

    Off-diagonal: <a|A|b> = flip f(m_u) for S^+_u S^-_v (and u <-> v); diagonal:
    sum_b zz (2m_u)(2m_v) + sum_i (scale/4) D_i (2m_i)^2.
    """
    twice = couplings.twice_spins
    dtype = couplings.entry_dtype
    twice_m = 2 * sector.local_states - np.array(twice, dtype=np.int64)
    diagonal = np.zeros(sector.dim, dtype=dtype)
    rows, columns, values = [], [], []
    for u, v, flip, zz in couplings.bonds:
        if zz:
            diagonal += (twice_m[:, u] * twice_m[:, v]).astype(dtype) * zz
        if flip:
            for raised, lowered in ((u, v), (v, u)):
                source, target, k_raised, _ = _flips(sector, twice, raised, lowered)
                rows.append(target)
                columns.append(source)
                values.append(_raising_factor(twice[raised], k_raised).astype(dtype) * flip)
    for i, d in enumerate(couplings.anisotropy):
        if d:
            diagonal += (twice_m[:, i] ** 2).astype(dtype) * d
    on_diagonal = np.nonzero(diagonal != 0)[0]
    rows.append(on_diagonal)
    columns.append(on_diagonal)
    values.append(diagonal[on_diagonal])
    rows, columns, values = np.concatenate(rows), np.concatenate(columns), np.concatenate(values)
    order = np.lexsort((columns, rows))
    indptr = np.zeros(sector.dim + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=sector.dim), out=indptr[1:])
    return IntegerSectorMatrix(indptr, columns[order].astype(np.int64), values[order])


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
