r"""Exact power traces of spin-1/2 Heisenberg clusters over highest-weight states of total spin.

For spin 1/2 and isotropic bonds, H0 = sum_b J_b S_u.S_v = sum_b J_b (P_b / 2 - 1/4), P_b the exchange of the
bond's two spins.  By Schur-Weyl duality the 2^N states split into multiplets of total spin S, and the
highest-weight states of spin S (one per multiplet, each standing for 2S + 1 states) carry the irreducible
representation of the permutation group with the two-row Young diagram (N/2 + S, N/2 - S); the one-row diagram is
the fully symmetric, ferromagnetic multiplet.  H0 acts there as the same combination of permutations, so with
A = scale * H0 (the integer scaling of :mod:`hte.spin_matrices`) and A_S its matrix in that representation

.. math:: \sum_m (2m)^q\,\mathrm{Tr}_m A^k = \sum_S w_q(S)\,\mathrm{Tr}\,A_S^k,
          \qquad w_q(S) = \sum_{m=-S}^{S} (2m)^q .

A_S has dimension C(N, N/2 - S) - C(N, N/2 - S - 1) against C(N, N/2 - S) states in the S^z = S sector: at
S = 0 a factor N/2 + 1 fewer, and the kernel's cost grows with the square of the dimension.

The representation is Young's seminormal form on standard tableaux.  For the adjacent transposition s_k of
entries k and k + 1 of a standard tableau T: s_k T = T if they share a row, -T if they share a column, and
otherwise, with T' the tableau with k and k + 1 exchanged and r = c(k+1) - c(k) the axial distance (contents
c = column - row), s_k T = T / r + T' if r > 0 and s_k T = T / r + (1 - 1/r^2) T' if r < 0.  A transposition
(i j), i < j, is s_i ... s_{j-2} s_{j-1} s_{j-2} ... s_i.  The form is a diagonal similarity C^{-1} O C of
Young's orthogonal (symmetric) form, with c(T')^2 = c(T)^2 (1 - 1/r^2) for r > 0, which is what the symmetric
splitting of :func:`hte.modular.power_traces_mod` needs.  Entries are rationals with denominators below N^2,
used as residues modulo primes far larger; the traces are integers (differences of S^z-sector traces), bounded
like those of :mod:`hte.exact`, and rebuilt by Chinese remaindering.

References (cited from memory)
------------------------------
.. [1] A. Young, Proc. London Math. Soc. (2) 34, 196 (1932) (seminormal and orthogonal forms).
.. [2] B. E. Sagan, The Symmetric Group, 2nd ed. (Springer, 2001), ch. 2-3 (standard tableaux, axial distance).
"""

from __future__ import annotations

from fractions import Fraction
from functools import lru_cache

import numpy as np
import scipy.sparse as sparse

from hte.modular import crt_signed, power_traces_mod, prime_bits_for, primes_exceeding, symmetric_residues
from hte.spin_matrices import integer_couplings

HALF = Fraction(1, 2)


def applies(ham) -> bool:
    """True for clusters this module handles: every spin 1/2, every bond isotropic (Jxy = Jz), no anisotropy."""
    return (all(s == HALF for s in ham.spins) and all(jxy == jz for _, _, jxy, jz in ham.bonds)
            and not any(ham.anisotropy))


@lru_cache(maxsize=64)
def standard_tableaux(n: int, lower: int) -> tuple[tuple[int, ...], ...]:
    """Standard tableaux of the two-row shape (n - lower, lower), each as the row (0 or 1) of entries 0..n-1."""
    found = []

    def extend(rows, upper_count, lower_count):
        if len(rows) == n:
            found.append(tuple(rows))
            return
        if upper_count < n - lower:
            extend(rows + [0], upper_count + 1, lower_count)
        if lower_count < lower and lower_count < upper_count:
            extend(rows + [1], upper_count, lower_count + 1)

    extend([], 0, 0)
    return tuple(found)


def _columns(rows: tuple[int, ...]) -> list[int]:
    seen = [0, 0]
    columns = []
    for r in rows:
        columns.append(seen[r])
        seen[r] += 1
    return columns


@lru_cache(maxsize=64)
def _adjacent_actions(n: int, lower: int):
    """For each k: (rows, cols, values) of the seminormal matrix of s_k (column = tableau acted on), and the
    squared gauge c(T)^2 of every tableau (Fractions)."""
    tableaux = standard_tableaux(n, lower)
    index = {t: i for i, t in enumerate(tableaux)}
    actions = []
    pairs = []  # (T, T', factor): c(T')^2 = c(T)^2 * factor
    for k in range(n - 1):
        rows, cols, values = [], [], []
        for t, tableau in enumerate(tableaux):
            if tableau[k] == tableau[k + 1]:
                rows.append(t), cols.append(t), values.append(Fraction(1))
                continue
            column = _columns(tableau)
            if column[k] == column[k + 1]:
                rows.append(t), cols.append(t), values.append(Fraction(-1))
                continue
            axial = (column[k + 1] - tableau[k + 1]) - (column[k] - tableau[k])
            swapped = list(tableau)
            swapped[k], swapped[k + 1] = swapped[k + 1], swapped[k]
            partner = index[tuple(swapped)]
            rows.append(t), cols.append(t), values.append(Fraction(1, axial))
            rows.append(partner), cols.append(t)
            if axial > 0:
                values.append(Fraction(1))
                pairs.append((t, partner, 1 - Fraction(1, axial * axial)))
            else:
                values.append(1 - Fraction(1, axial * axial))
        actions.append((np.array(rows), np.array(cols), values))
    return actions, _gauge(len(tableaux), pairs)


def _gauge(size: int, pairs) -> list[Fraction]:
    """c(T)^2 from the pair relations, spreading from the first tableau; inconsistent relations raise."""
    links: list[list[tuple[int, Fraction]]] = [[] for _ in range(size)]
    for t, partner, factor in pairs:
        links[t].append((partner, factor))
        links[partner].append((t, 1 / factor))
    squares: list[Fraction | None] = [None] * size
    squares[0] = Fraction(1)
    stack = [0]
    while stack:
        t = stack.pop()
        for other, factor in links[t]:
            value = squares[t] * factor
            if squares[other] is None:
                squares[other] = value
                stack.append(other)
            elif squares[other] != value:
                raise ArithmeticError("seminormal gauge is inconsistent")
    if any(s is None for s in squares):
        raise ArithmeticError("seminormal gauge does not reach every tableau")
    return squares


def _residue(value: Fraction, prime: int) -> int:
    return value.numerator % prime * pow(value.denominator % prime, -1, prime) % prime


@lru_cache(maxsize=256)
def _adjacent_mod(n: int, lower: int, prime: int | None) -> tuple[sparse.csr_matrix, ...]:
    """The seminormal matrices of s_0 .. s_{n-2} modulo `prime` (int64 residues in [0, p)); with prime None,
    their patterns (every nonzero entry 1)."""
    actions, _ = _adjacent_actions(n, lower)
    size = len(standard_tableaux(n, lower))
    matrices = []
    for rows, cols, values in actions:
        if prime is None:
            data = np.ones(len(values), dtype=np.int64)
        else:
            numerators = np.array([v.numerator for v in values], dtype=np.int64) % prime
            denominators = np.array([v.denominator for v in values], dtype=np.int64)
            inverses = {int(d): pow(int(d), -1, prime) for d in np.unique(denominators)}
            data = numerators * np.array([inverses[int(d)] for d in denominators], dtype=np.int64) % prime
        matrices.append(sparse.csr_matrix((data, (rows, cols)), shape=(size, size)))
    return tuple(matrices)


def _block_matrix_mod(n: int, lower: int, bonds, prime: int | None) -> sparse.csr_matrix:
    """A_S modulo `prime` (int64 residues in [0, p)), A = sum_b zz_b (2 P_b - 1), bonds as (u, v, zz).  With prime
    None, a pattern that contains the nonzeros of A_S modulo every prime (entries 1, nothing can cancel)."""
    adjacent = _adjacent_mod(n, lower, prime)
    size = len(standard_tableaux(n, lower))

    def reduced(matrix):
        if prime is None:
            matrix.data[:] = 1
        else:
            matrix.data %= prime
            matrix.eliminate_zeros()
        return matrix

    modulus = prime or 2  # for the pattern every coefficient is 1
    total = sparse.csr_matrix((size, size), dtype=np.int64)
    diagonal = 0
    for u, v, zz in bonds:
        i, j = min(u, v), max(u, v)
        exchange = adjacent[j - 1]
        for k in range(j - 2, i - 1, -1):
            exchange = reduced(adjacent[k] @ reduced(exchange @ adjacent[k]))
        total = reduced(total + exchange * (1 if prime is None else 2 * zz % modulus))
        diagonal -= zz
    identity = sparse.identity(size, dtype=np.int64, format="csr")
    return reduced(total + identity * (1 if prime is None else diagonal % modulus)).tocsr()


@lru_cache(maxsize=256)
def _gauge_mod(n: int, lower: int, prime: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column weights c(T)^2 and c(T)^-2 modulo `prime`, as float64 residues."""
    _, squares = _adjacent_actions(n, lower)
    cache = {}
    rows = [cache[s] if s in cache else cache.setdefault(s, _residue(s, prime)) for s in squares]
    columns = [pow(r, -1, prime) for r in rows]
    return np.array(rows, dtype=np.float64), np.array(columns, dtype=np.float64)


def multiplet_weight(twice_s: int, q: int) -> int:
    """w_q(S) = sum_{m=-S..S} (2m)^q (w_0 = 2S + 1, the multiplet's size)."""
    return sum((2 * m2 - twice_s) ** q for m2 in range(twice_s + 1))


def total_spin_power_sums(ham, order: int) -> tuple[int, dict[int, list[int]]]:
    """scale and s_q[k] = sum_m (2m)^q Tr_m(A^k), q = 0, 2, 4, k = 0..order, for a cluster where :func:`applies`.

    Same result as summing the S^z-sector traces of :func:`hte.exact._integer_power_traces`; the input of
    :func:`hte.exact.cumulants_from_integer_moments`.
    """
    from hte.exact import propagation_block  # hte.exact calls this module

    n = ham.n_sites
    couplings, bonds = _relabelled_bonds(ham)
    sums = {q: [0] * (order + 1) for q in (0, 2, 4)}
    for lower in range(n // 2 + 1):
        twice_s = n - 2 * lower
        size = len(standard_tableaux(n, lower))
        bits = prime_bits_for(_pattern_size(n, lower, bonds)[0], 2**62, size)  # the nonzeros fix the prime size
        primes = primes_exceeding(bits, size * max(couplings.spectral_bound, 1) ** order)
        residues = []
        for prime in primes:
            matrix = _block_matrix_mod(n, lower, bonds, prime)
            row_weight, column_weight = _gauge_mod(n, lower, prime)
            residues.append(power_traces_mod(
                matrix.indptr.astype(np.int64), matrix.indices.astype(np.int64),
                symmetric_residues(matrix.data.astype(np.int64), prime), row_weight,
                np.arange(size, dtype=np.int64), column_weight, order, prime, propagation_block(size)))
        traces = [crt_signed([int(r[k]) for r in residues], primes) for k in range(order + 1)]
        for q in sums:
            weight = multiplet_weight(twice_s, q)
            for k in range(order + 1):
                sums[q][k] += weight * traces[k]
    return couplings.scale, sums


def _bandwidth_order(n: int, edges) -> list[int]:
    """A relabelling of the sites (old -> new) that keeps bonded sites close (reverse Cuthill-McKee): a bond
    (i, j) costs 2 |i - j| - 1 adjacent transpositions."""
    from scipy.sparse.csgraph import reverse_cuthill_mckee

    if not edges:
        return list(range(n))
    u, v = zip(*edges)
    graph = sparse.csr_matrix((np.ones(2 * len(edges)), (u + v, v + u)), shape=(n, n))
    permutation = reverse_cuthill_mckee(graph, symmetric_mode=True)
    new_label = [0] * n
    for new, old in enumerate(permutation):
        new_label[old] = new
    return new_label


def estimated_cost(ham) -> float:
    """Multiply-adds per prime and per pair of powers of :func:`total_spin_power_sums` (sum over the blocks of
    dimension x nonzeros), to weigh it against the S^z sectors (:func:`hte.exact.cluster_cumulants`)."""
    _, bonds = _relabelled_bonds(ham)
    return sum(float(len(standard_tableaux(ham.n_sites, lower))) * _pattern_size(ham.n_sites, lower, bonds)[1]
               for lower in range(ham.n_sites // 2 + 1))


def _relabelled_bonds(ham):
    """The integer couplings of `ham` and its bonds (u, v, zz) with the sites relabelled by
    :func:`_bandwidth_order`."""
    couplings = integer_couplings(ham)
    order_map = _bandwidth_order(ham.n_sites, [(u, v) for u, v, _, _ in couplings.bonds])
    return couplings, tuple((order_map[u], order_map[v], zz) for u, v, _, zz in couplings.bonds)


@lru_cache(maxsize=1024)
def _pattern_size(n: int, lower: int, bonds: tuple) -> tuple[int, int]:
    """(longest row, nonzeros) of the cancellation-free pattern of block (n - lower, lower): bounds for every
    prime (:func:`_block_matrix_mod` with prime None); remembered, as the cost model asks first."""
    pattern = _block_matrix_mod(n, lower, bonds, None)
    return int(np.diff(pattern.indptr).max(initial=1)), int(pattern.nnz)
