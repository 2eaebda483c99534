r"""Exact traces of integer matrix powers by arithmetic modulo primes below 2^26 and Chinese remaindering.

The exact-diagonalisation kernel needs :math:`\mathrm{Tr}(A^k)`, :math:`k = 0..K`, for integer sparse matrices
:math:`A` whose powers have entries far beyond 64 bits.  Each trace is computed modulo several primes
:math:`p < 2^{26}`, and the signed integer is rebuilt by Chinese remaindering once the product of the primes
exceeds twice a proven bound on its magnitude.

Residues are stored as float64 (the loops then vectorise).  Overflow and rounding are impossible by
construction: every quantity is an integer of magnitude below :math:`2^{52}`, hence exact in float64 -- a
product of two residues is below :math:`p^2 < 2^{52}`, and the sparse product accumulates at most
``max_row_length * max_entry * p < 2^52`` before it reduces (the caller picks the prime size with
:func:`prime_bits_for`).

References (cited from memory)
------------------------------
.. [1] D. E. Knuth, The Art of Computer Programming, vol. 2, 3rd ed. (1997), sec. 4.3.2 (modular arithmetic
       and the Chinese remainder theorem).
.. [2] C. Pomerance, J. L. Selfridge and S. S. Wagstaff, Math. Comp. 35, 1003 (1980): the smallest strong
       pseudoprime to all of the bases 2, 3, 5, 7 is 3 215 031 751.
"""

from __future__ import annotations

from functools import lru_cache
from math import prod

import numpy as np
from numba import njit

_MILLER_RABIN_BASES = (2, 3, 5, 7)  # deterministic for n < 3 215 031 751 [2]
_MILLER_RABIN_LIMIT = 3_215_031_751
_EXACT_FLOAT_LIMIT = 2**52  # integers below this in magnitude, and their differences with p * q, are exact
MAX_PRIME_BITS = 26  # products of two residues stay below 2**52


def is_prime(n: int) -> bool:
    """Deterministic primality test for 0 <= n < 3 215 031 751 (strong probable prime to bases 2, 3, 5, 7)."""
    if not 0 <= n < _MILLER_RABIN_LIMIT:
        raise ValueError(f"is_prime is deterministic only for 0 <= n < {_MILLER_RABIN_LIMIT}, got {n}")
    if n < 2:
        return False
    for base in _MILLER_RABIN_BASES:
        if n % base == 0:
            return n == base
    odd_part, twos = n - 1, 0
    while odd_part % 2 == 0:
        odd_part //= 2
        twos += 1
    for base in _MILLER_RABIN_BASES:
        x = pow(base, odd_part, n)
        if x in (1, n - 1):
            continue
        for _ in range(twos - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


@lru_cache(maxsize=None)
def primes_below(bits: int, count: int) -> tuple[int, ...]:
    """The ``count`` largest primes below ``2**bits``, in descending order (deterministic)."""
    if not 2 <= bits <= MAX_PRIME_BITS:
        raise ValueError(f"prime size must be 2..{MAX_PRIME_BITS} bits, got {bits}")
    primes = []
    candidate = 2**bits - 1
    while len(primes) < count:
        if candidate < 2:
            raise ValueError(f"there are fewer than {count} primes below 2**{bits}")
        if is_prime(candidate):
            primes.append(candidate)
        candidate -= 1
    return tuple(primes)


def primes_exceeding(bits: int, bound: int) -> tuple[int, ...]:
    """The fewest largest primes below ``2**bits`` whose product exceeds ``2 * bound``.

    An integer x with |x| <= bound is then fixed by its residues (see :func:`crt_signed`).
    """
    count = 1
    while prod(primes_below(bits, count)) <= 2 * bound:
        count += 1
    return primes_below(bits, count)


def prime_bits_for(max_row_length: int, max_abs_entry: int, max_dimension: int) -> int:
    """Largest prime size (bits, at most 26) for which :func:`power_traces_mod` stays exact.

    Entries are reduced to symmetric residues |v| <= p/2, so a row of the sparse product sums at most
    max_row_length * min(max_abs_entry, p/2) * p; a column of the trace sums at most max_dimension * p.
    Both must stay below 2**52.
    """
    for bits in range(MAX_PRIME_BITS, 1, -1):
        entry = min(max_abs_entry, 2 ** (bits - 1))
        row_sum = max(max_row_length, 1) * entry * 2**bits
        if row_sum < _EXACT_FLOAT_LIMIT and max_dimension * 2**bits < _EXACT_FLOAT_LIMIT:
            return bits
    raise ValueError(
        f"no prime size keeps rows of {max_row_length} entries and sectors of {max_dimension} states below 2**52"
    )


def crt_signed(residues: list[int], primes: tuple[int, ...]) -> int:
    """The unique integer x with |x| < P/2 (P = product of ``primes``) and x = residues[i] mod primes[i]."""
    modulus = prod(primes)
    value = 0
    for residue, prime in zip(residues, primes):
        cofactor = modulus // prime
        value += residue * cofactor * pow(cofactor, -1, prime)
    value %= modulus
    return value - modulus if 2 * value > modulus else value


def symmetric_residues(values: np.ndarray, prime: int) -> np.ndarray:
    """Integers (int64 or Python-int object array) reduced mod ``prime`` into (-p/2, p/2], as float64."""
    residues = (values % prime).astype(np.int64)
    residues[2 * residues > prime] -= prime
    return residues.astype(np.float64)


@njit(cache=True)
def power_traces_mod(indptr, indices, values, row_weight, columns, column_weight, order, prime, block):
    r"""Weighted sums of diagonal elements of powers of a sparse integer matrix, modulo ``prime``.

    Returns t[k] = sum_{b in columns} column_weight[b] sum_a row_weight[a] (A^i)_{ab} (A^j)_{ab} mod prime for
    k = i + j, i = ceil(k/2), j = floor(k/2), k = 0..order, as int64.  If A = C^{-1} S C with S symmetric and C
    diagonal, row_weight = c^2 and column_weight = c^{-2} (as residues), then (A^j)_{ab} c_a^2 / c_b^2 = (A^j)_{ba}
    and the inner sum is (A^k)_{bb}: with all columns t[k] = Tr(A^k) mod prime (for symmetric A, weights of 1).
    With orbit representatives as ``columns`` and orbit sizes folded into ``column_weight`` it is the same trace
    (see :mod:`hte.cluster_symmetry`).

    Parameters
    ----------
    indptr, indices : int64 arrays
        A in compressed-row form.
    values : float64 array
        Entries of A as integer-valued floats, residues with |v| <= prime/2.
    row_weight : float64 array
        Residues in [0, prime), one per basis state.
    columns : int64 array
        The columns b whose unit vectors are propagated.
    column_weight : float64 array
        Residues in [0, prime), one per entry of ``columns``.
    order : int
        Highest power K.
    prime : int
        Modulus below 2**26, small enough for :func:`prime_bits_for`.
    block : int
        Number of unit vectors propagated together (memory 3 * dim * block float64).

    Notes
    -----
    Residues are held in float64 so that the loops vectorise; every intermediate is an integer below 2**52 in
    magnitude and therefore exact.  Columns of the unit matrix are propagated in blocks, V_{s+1} = A V_s; the
    traces of A^{2s} and A^{2s+1} are read off V_s and V_{s+1}, so only two powers are kept at a time.
    """
    dim = indptr.shape[0] - 1
    modulus = float(prime)
    inverse = 1.0 / modulus
    traces = np.zeros(order + 1)
    n_columns = columns.shape[0]
    width_max = max(1, min(block, n_columns))
    current = np.empty((dim, width_max))
    following = np.empty((dim, width_max))
    weighted = np.empty((dim, width_max))
    unit_rows = np.all(row_weight == 1.0)
    for start in range(0, n_columns, width_max):
        width = min(width_max, n_columns - start)
        current[:, :] = 0.0
        for c in range(width):
            current[columns[start + c], c] = 1.0
        for power in range(order // 2 + 1):
            if unit_rows:
                weighted[:, :width] = current[:, :width]
            else:
                for a in range(dim):
                    for c in range(width):
                        weighted[a, c] = _reduce(row_weight[a] * current[a, c], modulus, inverse)
            overlap = _weighted_overlap(current, weighted, column_weight, start, width, modulus, inverse)
            traces[2 * power] = _reduce(traces[2 * power] + overlap, modulus, inverse)
            if 2 * power + 1 > order:
                break
            _sparse_times_block(indptr, indices, values, current, following, width, modulus, inverse)
            overlap = _weighted_overlap(following, weighted, column_weight, start, width, modulus, inverse)
            traces[2 * power + 1] = _reduce(traces[2 * power + 1] + overlap, modulus, inverse)
            current, following = following, current
    return traces.astype(np.int64)


@njit(cache=True)
def _reduce(x, modulus, inverse):
    """x mod modulus in [0, modulus) for an integer-valued float |x| < 2**52 (quotient off by at most one)."""
    remainder = x - modulus * np.floor(x * inverse)
    if remainder < 0.0:
        remainder += modulus
    elif remainder >= modulus:
        remainder -= modulus
    return remainder


@njit(cache=True)
def _sparse_times_block(indptr, indices, values, source, target, width, modulus, inverse):
    """target[:, :width] = A source[:, :width] mod prime; partial sums stay below 2**52 (see prime_bits_for)."""
    dim = indptr.shape[0] - 1
    for a in range(dim):
        for c in range(width):
            target[a, c] = 0.0
        for e in range(indptr[a], indptr[a + 1]):
            column = indices[e]
            value = values[e]
            for c in range(width):
                target[a, c] += value * source[column, c]
        for c in range(width):
            target[a, c] = _reduce(target[a, c], modulus, inverse)


@njit(cache=True)
def _weighted_overlap(left, right, column_weight, start, width, modulus, inverse):
    """sum_c column_weight[start + c] sum_a left[a, c] right[a, c] mod prime, for residues below 2**26."""
    dim = left.shape[0]
    column_sums = np.zeros(width)
    for a in range(dim):
        for c in range(width):
            column_sums[c] += _reduce(left[a, c] * right[a, c], modulus, inverse)  # < p each; dim * p < 2**52
    total = 0.0
    for c in range(width):
        term = _reduce(column_sums[c], modulus, inverse) * column_weight[start + c]
        total = _reduce(total + _reduce(term, modulus, inverse), modulus, inverse)
    return total


@njit(cache=True)
def power_diagonals_mod(indptr, indices, values, row_weight, columns, column_weight, order, prime, block):
    r"""Diagonal elements of powers of a sparse integer matrix, one row per column, modulo ``prime``.

    Returns d[c, k] = column_weight[c] sum_a row_weight[a] (A^i)_{ab} (A^j)_{ab} mod prime, b = columns[c],
    k = i + j (i = ceil(k/2), j = floor(k/2)), k = 0..order, as int64 of shape (len(columns), order + 1).  With
    the weights of the integer gauge (row_weight = c^2, column_weight = c^{-2}, see :func:`power_traces_mod`)
    d[c, k] = (A^k)_{bb} mod prime; summing the rows gives the result of :func:`power_traces_mod`, and weighting
    them by a diagonal operator O gives Tr(O A^k).  Same arguments, exactness and cost as
    :func:`power_traces_mod`; the output takes len(columns) * (order + 1) int64.
    """
    dim = indptr.shape[0] - 1
    modulus = float(prime)
    inverse = 1.0 / modulus
    n_columns = columns.shape[0]
    diagonals = np.zeros((n_columns, order + 1))
    width_max = max(1, min(block, n_columns))
    current = np.empty((dim, width_max))
    following = np.empty((dim, width_max))
    weighted = np.empty((dim, width_max))
    unit_rows = np.all(row_weight == 1.0)
    for start in range(0, n_columns, width_max):
        width = min(width_max, n_columns - start)
        current[:, :] = 0.0
        for c in range(width):
            current[columns[start + c], c] = 1.0
        for power in range(order // 2 + 1):
            if unit_rows:
                weighted[:, :width] = current[:, :width]
            else:
                for a in range(dim):
                    for c in range(width):
                        weighted[a, c] = _reduce(row_weight[a] * current[a, c], modulus, inverse)
            _column_overlaps(current, weighted, column_weight, start, width, modulus, inverse, diagonals, 2 * power)
            if 2 * power + 1 > order:
                break
            _sparse_times_block(indptr, indices, values, current, following, width, modulus, inverse)
            _column_overlaps(following, weighted, column_weight, start, width, modulus, inverse, diagonals,
                             2 * power + 1)
            current, following = following, current
    return diagonals.astype(np.int64)


@njit(cache=True)
def _column_overlaps(left, right, column_weight, start, width, modulus, inverse, out, k):
    """out[start + c, k] = column_weight[start + c] sum_a left[a, c] right[a, c] mod prime, c < width."""
    dim = left.shape[0]
    column_sums = np.zeros(width)
    for a in range(dim):
        for c in range(width):
            column_sums[c] += _reduce(left[a, c] * right[a, c], modulus, inverse)  # < p each; dim * p < 2**52
    for c in range(width):
        term = _reduce(column_sums[c], modulus, inverse) * column_weight[start + c]
        out[start + c, k] = _reduce(term, modulus, inverse)
