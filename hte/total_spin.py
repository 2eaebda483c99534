r"""Exact power traces of isotropic clusters over the highest-weight states of each total spin, for any spins.

For isotropic bonds and no single-ion anisotropy, :math:`H_0 = \sum_b J_b\,\mathbf S_u\cdot\mathbf S_v` commutes
with the total spin, so the states split into multiplets of total spin S whose 2S + 1 states share their
energies.  With A = scale * H0 (the integer scaling of :mod:`hte.spin_matrices`) and A_S its matrix on the
highest-weight states of spin S (one state per multiplet)

.. math:: \sum_m (2m)^q\,\mathrm{Tr}_m A^k = \sum_S w_q(S)\,\mathrm{Tr}\,A_S^k,
          \qquad w_q(S) = \sum_{m=-S}^{S} (2m)^q .

Basis (sequential coupling).  With the sites in a fixed order 0..N-1, a highest-weight state is a *path*
:math:`(j_0 = 0, j_1, \dots, j_N = S)`, :math:`j_l` the total spin of sites 0..l-1, each step a coupling allowed
by the triangle rule :math:`|j_l - s_l| \le j_{l+1} \le j_l + s_l`.  There are dim(S^z = S) - dim(S^z = S + 1)
paths ending at S, against dim(S^z = S) states in the S^z = S sector; at S = 0 for spins 1/2 a factor N/2 + 1
fewer, and more for larger spins.

Exact rational vectors.  In a spin-T/2 space the lowered states :math:`f_t = (S^-)^t |T/2, T/2\rangle`,
t = 0..T, have :math:`S^- f_t = f_{t+1}`, :math:`S^+ f_t = t(T - t + 1) f_{t-1}`, :math:`2S^z f_t = (T - 2t) f_t`
and :math:`\langle f_t, f_t\rangle = \varphi(T, t) = t!\,T!/(T - t)!`.  The highest-weight state of spin T/2 in
(spin T1/2) x (spin T2/2) is :math:`\sum_{t=0}^{n} c_t f_t \otimes g_{n-t}`, n = (T1 + T2 - T)/2, with
:math:`c_0 = 1` and :math:`c_{t+1} = -c_t (n - t)(T_2 - n + t + 1) / ((t + 1)(T_1 - t))` (what S^+ = 0 asks).
A path's vector couples its steps this way, one site at a time; its squared norm is the product over the steps
of :math:`\kappa = \sum_t c_t^2 \varphi(T_1, t)\varphi(T_2, n - t)`.  Paths are orthogonal, so in this basis A_S
is C^{-1} (symmetric) C with c^2 = the squared norms: the symmetric splitting of
:func:`hte.modular.power_traces_mod` applies.

Operators.  S_k . S_{k+1} for two sites adjacent in the order changes only j_{k+1}, with coefficients that depend
on (j_k, s_k, s_{k+1}, j_{k+2}); exchanging the order of the two sites likewise maps the paths of one order to
those of the other.  Both small rational matrices are computed exactly (Fractions) in the space
(spin j_k) x (spin s_k) x (spin s_{k+1}), as projections on the orthogonal step vectors; they hold for the whole
path because the later couplings act through the total lowering operator of sites 0..k+1, which commutes with
both.  A bond (u, v) further apart is the adjacent bond conjugated by the chain of exchanges that brings v next
to u; the sites are relabelled first so that bonded sites are close (reverse Cuthill-McKee).  Entries are
rationals with small denominators, used as residues modulo primes below 2^26; the traces are integers
(differences of S^z-sector traces, which are integers in the gauge of :mod:`hte.spin_matrices`), bounded by
dim * R^k like those of :mod:`hte.exact`, and rebuilt by Chinese remaindering.  Modulo a prime the subspace
relations hold exactly, so the residues are those of the integer traces.

Rooted sums (:func:`rooted_power_sums`, for :mod:`hte.rooted_series`).  Within one multiplet the matrix elements
of S^z_a are m/(S(S+1)) times those of the scalar Y_a = S_a . S_tot (projection theorem), so

.. math:: \sum_m (2m)^q\,\mathrm{Tr}_m(2S^z_a A^k) = \sum_{S>0} \frac{w_{q+1}(S)}{2T(T+2)}\,
          \mathrm{Tr}(A_S^k\,8Y_a),\qquad T = 2S .

With site a coupled last, :math:`8Y_a = T(T+2) - T'(T'+2) + t_a(t_a+2)` is diagonal (T' = 2 j_{N-1}, the spin of
the other sites; t_a = 2 s_a), so the diagonals of A_S^k are enough, as in the S^z sectors; but every root
needs its own order of the sites, hence its own propagation.

References (cited from memory)
------------------------------
.. [1] A. R. Edmonds, Angular Momentum in Quantum Mechanics (Princeton University Press, 1957), ch. 3 and 6:
       coupling of angular momenta, sequential (genealogical) coupling schemes.
.. [2] J. J. Sakurai, Modern Quantum Mechanics (Addison-Wesley, 1994), sec. 3.5: the ladder operators.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from math import prod

import numpy as np
import scipy.sparse as sparse

from hte.modular import (
    crt_signed,
    power_diagonals_mod,
    power_traces_mod,
    prime_bits_for,
    primes_exceeding,
    symmetric_residues,
)
from hte.spin_matrices import integer_couplings


def applies(ham) -> bool:
    """True for clusters this module handles: every bond isotropic (Jxy = Jz) and no single-ion anisotropy."""
    return all(jxy == jz for _, _, jxy, jz in ham.bonds) and not any(ham.anisotropy)


def multiplet_weight(twice_s: int, q: int) -> int:
    """w_q(S) = sum_{m=-S..S} (2m)^q (w_0 = 2S + 1, the multiplet's size)."""
    return sum((2 * m2 - twice_s) ** q for m2 in range(twice_s + 1))


# --- one coupling step, exactly -------------------------------------------------------------------------------


def _lowered_norm(twice: int, t: int) -> int:
    """phi(T, t) = <f_t, f_t> = t! T! / (T - t)! for the lowered states of a unit highest-weight state."""
    return prod(r * (twice - r + 1) for r in range(1, t + 1))


@lru_cache(maxsize=None)
def _coupling(twice_1: int, twice_2: int, twice_total: int) -> tuple[Fraction, ...]:
    """c_0..c_n: the highest-weight state of spin T/2 in (T1/2) x (T2/2) is sum_t c_t f_t (x) g_{n-t}."""
    n = (twice_1 + twice_2 - twice_total) // 2
    coefficients = [Fraction(1)]
    for t in range(n):
        coefficients.append(-coefficients[-1] * (n - t) * (twice_2 - n + t + 1) / ((t + 1) * (twice_1 - t)))
    return tuple(coefficients)


@lru_cache(maxsize=None)
def _step_norm(twice_1: int, twice_2: int, twice_total: int) -> Fraction:
    """kappa: the squared norm of the coupled highest-weight state per unit squared norm of the first factor."""
    n = (twice_1 + twice_2 - twice_total) // 2
    return sum(c * c * _lowered_norm(twice_1, t) * _lowered_norm(twice_2, n - t)
               for t, c in enumerate(_coupling(twice_1, twice_2, twice_total)))


def _couplings_allowed(twice_1: int, twice_2: int) -> range:
    """Twice the total spins in (T1/2) x (T2/2): |T1 - T2|, ..., T1 + T2 in steps of 2."""
    return range(abs(twice_1 - twice_2), twice_1 + twice_2 + 1, 2)


def _step_vector(j0: int, a: int, b: int, j: int, total: int) -> dict[tuple[int, int, int], Fraction]:
    """The highest-weight state of spin total/2 in ((j0 x a) -> j) x b, on the lowered states (t0, ta, tb)."""
    n1 = (j0 + a - j) // 2
    lowered = [{(t, n1 - t): c for t, c in enumerate(_coupling(j0, a, j))}]
    n2 = (j + b - total) // 2
    for _ in range(n2):
        following: dict[tuple[int, int], Fraction] = {}
        for (t0, ta), x in lowered[-1].items():
            if t0 < j0:
                following[t0 + 1, ta] = following.get((t0 + 1, ta), 0) + x
            if ta < a:
                following[t0, ta + 1] = following.get((t0, ta + 1), 0) + x
        lowered.append(following)
    vector: dict[tuple[int, int, int], Fraction] = {}
    for u, d in enumerate(_coupling(j, b, total)):
        for (t0, ta), x in lowered[u].items():
            key = (t0, ta, n2 - u)
            vector[key] = vector.get(key, 0) + d * x
    return {key: x for key, x in vector.items() if x}


def _dot(vector, a: int, b: int) -> dict[tuple[int, int, int], Fraction]:
    """S_a . S_b = S^z_a S^z_b + (S^+_a S^-_b + S^-_a S^+_b) / 2 on a vector over (t0, ta, tb)."""
    result: dict[tuple[int, int, int], Fraction] = {}

    def add(key, value):
        result[key] = result.get(key, 0) + value

    for (t0, ta, tb), x in vector.items():
        add((t0, ta, tb), x * Fraction((a - 2 * ta) * (b - 2 * tb), 4))
        if ta > 0 and tb < b:
            add((t0, ta - 1, tb + 1), x * Fraction(ta * (a - ta + 1), 2))
        if tb > 0 and ta < a:
            add((t0, ta + 1, tb - 1), x * Fraction(tb * (b - tb + 1), 2))
    return result


def _project(vector, basis: dict[int, dict], twice: tuple[int, int, int]) -> tuple[tuple[int, Fraction], ...]:
    """Coefficients of ``vector`` on the orthogonal step vectors ``basis`` ({j: vector}); the inner product
    weighs (t0, ta, tb) by phi(j0, t0) phi(a, ta) phi(b, tb).  Raises if ``vector`` is not in their span."""
    def inner(u, v):
        return sum(x * v[key] * prod(_lowered_norm(t, k) for t, k in zip(twice, key)) for key, x in u.items()
                   if key in v)

    coefficients = tuple((j, inner(v, vector) / inner(v, v)) for j, v in basis.items())
    rest = dict(vector)
    for j, c in coefficients:
        for key, x in basis[j].items():
            rest[key] = rest.get(key, 0) - c * x
    if any(rest.values()):
        raise ArithmeticError("a coupled-basis operator left the span of its step vectors")
    return tuple((j, c) for j, c in coefficients if c)


def _intermediates(j0: int, a: int, b: int, total: int) -> list[int]:
    """The spins j of ((j0 x a) -> j) x b -> total allowed by both triangle rules (twice, ascending)."""
    return [j for j in _couplings_allowed(j0, a) if total in _couplings_allowed(j, b)]


@lru_cache(maxsize=None)
def _local_bond(j0: int, a: int, b: int, total: int) -> dict[int, tuple[tuple[int, Fraction], ...]]:
    """S_a . S_b on the paths through (j0, j, total): {j: ((j', coefficient), ...)}."""
    basis = {j: _step_vector(j0, a, b, j, total) for j in _intermediates(j0, a, b, total)}
    return {j: _project(_dot(v, a, b), basis, (j0, a, b)) for j, v in basis.items()}


@lru_cache(maxsize=None)
def _local_exchange(j0: int, a: int, b: int, total: int) -> dict[int, tuple[tuple[int, Fraction], ...]]:
    """The exchange of the two sites, from the paths through (j0, j, total) with site spins (a, b) in this
    order to those with (b, a): {j: ((j', coefficient), ...)}."""
    target = {j: _step_vector(j0, b, a, j, total) for j in _intermediates(j0, b, a, total)}
    return {j: _project({(t0, tb, ta): x for (t0, ta, tb), x in _step_vector(j0, a, b, j, total).items()},
                        target, (j0, b, a))
            for j in _intermediates(j0, a, b, total)}


# --- the paths of one site order -------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Paths:
    """The highest-weight paths of one total spin for sites of given spins in a given order (:func:`_paths`).

    ``levels[p, l]`` is twice j_l of path p (l = 0..N, lexicographic order); a path's index is
    sum_l offsets[l][j_{l-1}, j_l] (l = 1..N), ``offsets[0]`` unused.
    """

    levels: np.ndarray
    offsets: tuple[np.ndarray, ...]

    @property
    def size(self) -> int:
        return self.levels.shape[0]


@lru_cache(maxsize=256)
def _paths(twice_spins: tuple[int, ...], twice_total: int) -> _Paths:
    """All paths of the sites ``twice_spins`` (in this order) to ``twice_total``: counts[l][j] paths complete
    from j_l = j/2; they are laid out level by level, each parent's children in ascending j."""
    n = len(twice_spins)
    tops = np.concatenate([[0], np.cumsum(twice_spins)]).astype(int)
    counts = [np.zeros(top + 1, dtype=np.int64) for top in tops]
    if twice_total <= tops[n]:
        counts[n][twice_total] = 1
    offsets = [np.zeros((1, 1), dtype=np.int64)]
    for level in range(n - 1, -1, -1):
        for j in range(tops[level] + 1):
            counts[level][j] = sum(counts[level + 1][k] for k in _couplings_allowed(j, twice_spins[level]))
    children = []
    for level in range(n):
        table = np.zeros((tops[level] + 1, tops[level + 1] + 1), dtype=np.int64)
        kids = np.zeros((tops[level] + 1, twice_spins[level] + 1), dtype=np.int64)
        n_kids = np.zeros(tops[level] + 1, dtype=np.int64)
        for j in range(tops[level] + 1):
            running = 0
            for k in _couplings_allowed(j, twice_spins[level]):
                table[j, k] = running
                running += counts[level + 1][k]
                if counts[level + 1][k]:
                    kids[j, n_kids[j]] = k
                    n_kids[j] += 1
        offsets.append(table)
        children.append((kids, n_kids))
    levels = np.zeros((1 if counts[0][0] else 0, 1), dtype=np.int64)
    for kids, n_kids in children:
        column = levels[:, -1]
        repeat = n_kids[column]
        parents = np.repeat(np.arange(levels.shape[0]), repeat)
        rank = np.arange(parents.size) - np.repeat(np.cumsum(repeat) - repeat, repeat)
        levels = np.column_stack([levels[parents], kids[column[parents], rank]])
    return _Paths(levels, tuple(offsets))


def _residue(value: Fraction, prime: int) -> int:
    return value.numerator % prime * pow(value.denominator % prime, -1, prime) % prime


@lru_cache(maxsize=512)
def _position_operator(twice_spins: tuple[int, ...], twice_total: int, k: int, kind: str,
                       prime: int | None) -> sparse.csr_matrix:
    """The bond S_k . S_{k+1} (``kind`` "bond") or the exchange of the sites at positions k, k+1 ("exchange",
    into the paths of the exchanged order), modulo ``prime`` (int64 residues in [0, p)); with prime None, the
    pattern (every nonzero 1)."""
    source = _paths(twice_spins, twice_total)
    a, b = twice_spins[k], twice_spins[k + 1]
    if kind == "bond":
        target, local = source, _local_bond
    else:
        swapped = twice_spins[:k] + (b, a) + twice_spins[k + 2:]
        target, local = _paths(swapped, twice_total), _local_exchange
    j0, j, total = (source.levels[:, k + c] for c in range(3))
    index = np.arange(source.size)
    base = index - source.offsets[k + 1][j0, j] - source.offsets[k + 2][j, total]
    width = int(source.levels.max(initial=0)) + 1
    keys = (j0 * width + j) * width + total
    rows, cols, data = [], [], []
    for key in np.unique(keys):
        chosen = np.flatnonzero(keys == key)
        kj0, kj, ktotal = int(key) // width // width, int(key) // width % width, int(key) % width
        for target_j, value in local(kj0, a, b, ktotal)[kj]:
            rows.append(base[chosen] + target.offsets[k + 1][kj0, target_j] + target.offsets[k + 2][target_j, ktotal])
            cols.append(chosen)
            data.append(np.full(chosen.size, 1 if prime is None else _residue(value, prime), dtype=np.int64))
    if not rows:
        return sparse.csr_matrix((target.size, source.size), dtype=np.int64)
    return sparse.csr_matrix((np.concatenate(data), (np.concatenate(rows), np.concatenate(cols))),
                             shape=(target.size, source.size), dtype=np.int64)


def _reduced(matrix: sparse.csr_matrix, prime: int | None) -> sparse.csr_matrix:
    if prime is None:
        matrix.data[:] = 1
    else:
        matrix.data %= prime
        matrix.eliminate_zeros()
    return matrix


def _bond_matrix(twice_spins: tuple[int, ...], twice_total: int, u: int, v: int, prime: int | None):
    """S_u . S_v on the paths of ``twice_spins``: the adjacent bond at position min(u, v), conjugated by the
    exchanges that bring the farther site next to the nearer one."""
    i, j = min(u, v), max(u, v)
    orders = [twice_spins]
    for k in range(j - 1, i, -1):
        s = orders[-1]
        orders.append(s[:k] + (s[k + 1], s[k]) + s[k + 2:])
    matrix = _position_operator(orders[-1], twice_total, i, "bond", prime)
    for step, k in reversed(list(enumerate(range(j - 1, i, -1)))):
        forward = _position_operator(orders[step], twice_total, k, "exchange", prime)
        back = _position_operator(orders[step + 1], twice_total, k, "exchange", prime)
        matrix = _reduced(back @ _reduced(matrix @ forward, prime), prime)
    return matrix


def _block_matrix(twice_spins: tuple[int, ...], twice_total: int, bonds, prime: int | None) -> sparse.csr_matrix:
    """A_S modulo ``prime`` (int64 residues in [0, p)), A = sum_b 4 zz_b S_u . S_v, bonds as (u, v, zz).  With
    prime None, a pattern that contains the nonzeros of A_S modulo every prime (entries 1, nothing cancels)."""
    size = _paths(twice_spins, twice_total).size
    total = sparse.csr_matrix((size, size), dtype=np.int64)
    for u, v, zz in bonds:
        weight = 1 if prime is None else 4 * zz % prime
        total = _reduced(total + _bond_matrix(twice_spins, twice_total, u, v, prime) * weight, prime)
    return total.tocsr()


def _gauge_mod(twice_spins: tuple[int, ...], twice_total: int, prime: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column weights c^2 and c^-2 of every path (c^2 its squared norm) modulo ``prime``, float64."""
    paths = _paths(twice_spins, twice_total)
    weight = np.ones(paths.size, dtype=np.int64)
    inverse = np.ones(paths.size, dtype=np.int64)
    for level, spin in enumerate(twice_spins):
        before, after = paths.levels[:, level], paths.levels[:, level + 1]
        shape = (int(before.max(initial=0)) + 1, int(after.max(initial=0)) + 1)
        table, inverse_table = np.zeros(shape, dtype=np.int64), np.zeros(shape, dtype=np.int64)
        for j in np.unique(before):
            for k in _couplings_allowed(int(j), spin):
                if k < shape[1]:
                    table[j, k] = _residue(_step_norm(int(j), spin, k), prime)
                    inverse_table[j, k] = pow(int(table[j, k]), -1, prime)
        weight = weight * table[before, after] % prime
        inverse = inverse * inverse_table[before, after] % prime
    return weight.astype(np.float64), inverse.astype(np.float64)


def total_spin_power_sums(ham, order: int) -> tuple[int, dict[int, list[int]]]:
    """scale and s_q[k] = sum_m (2m)^q Tr_m(A^k), q = 0, 2, 4, k = 0..order, for a cluster where :func:`applies`.

    Same result as summing the S^z-sector traces of :func:`hte.exact._integer_power_traces`; the input of
    :func:`hte.exact.cumulants_from_integer_moments`.
    """
    couplings, twice_spins, bonds = _relabelled(ham)
    sums = {q: [0] * (order + 1) for q in (0, 2, 4)}
    for twice_total, traces, _ in _block_traces(couplings, twice_spins, bonds, order):
        _add_multiplets(sums, twice_total, traces)
    return couplings.scale, sums


def rooted_power_sums(ham, root: int, order: int) -> tuple[int, dict[int, list[int]], dict[int, list[int]]]:
    """scale, the sums s_q of :func:`total_spin_power_sums` and r_q[k] = sum_m (2m)^q Tr_m(2 S^z_root A^k),
    q = 1, 3, k = 0..order (the input of :func:`hte.rooted_series._joint_cumulants` for one site), for a cluster
    where :func:`applies`.  The sites are ordered with ``root`` last (module docstring)."""
    couplings, twice_spins, bonds = _relabelled(ham, last=root)
    twice_root = twice_spins[-1]

    def eight_y(paths: _Paths, twice_total: int) -> np.ndarray:
        rest = paths.levels[:, -2]
        return twice_total * (twice_total + 2) - rest * (rest + 2) + twice_root * (twice_root + 2)

    sums = {q: [0] * (order + 1) for q in (0, 2, 4)}
    rooted = {q: [Fraction(0)] * (order + 1) for q in (1, 3)}
    for twice_total, traces, weighted in _block_traces(couplings, twice_spins, bonds, order, eight_y):
        _add_multiplets(sums, twice_total, traces)
        if twice_total:
            for q in rooted:
                factor = Fraction(multiplet_weight(twice_total, q + 1), 2 * twice_total * (twice_total + 2))
                for k in range(order + 1):
                    rooted[q][k] += factor * weighted[k]
    if any(x.denominator != 1 for r in rooted.values() for x in r):
        raise ArithmeticError("rooted total-spin sums are not integers")
    return couplings.scale, sums, {q: [int(x) for x in r] for q, r in rooted.items()}


def _block_traces(couplings, twice_spins: tuple[int, ...], bonds, order: int, path_weights=None):
    """For every total spin with paths: (twice_total, [Tr A_S^k], [Tr(A_S^k W)] or None), k = 0..order, exact
    integers, W = diag(path_weights(paths, twice_total)) (integers per path) when ``path_weights`` is given.

    Modulo primes whose product exceeds 2 dim R^order max|W| (:mod:`hte.modular`); with weights the diagonals of
    the powers are kept (:func:`hte.modular.power_diagonals_mod`) and summed twice, else the traces directly.
    """
    from hte.exact import propagation_block  # hte.exact calls this module

    for twice_total in _total_spins(twice_spins):
        paths = _paths(twice_spins, twice_total)
        if not paths.size:
            continue
        weights = None if path_weights is None else path_weights(paths, twice_total)
        bits = prime_bits_for(_pattern_size(twice_spins, twice_total, bonds)[0], 2**62, paths.size)
        bound = paths.size * max(couplings.spectral_bound, 1) ** order
        primes = primes_exceeding(bits, bound if weights is None else bound * max(int(np.abs(weights).max()), 1))
        plain, weighted = [], []
        for prime in primes:
            matrix = _block_matrix(twice_spins, twice_total, bonds, prime)
            row_weight, column_weight = _gauge_mod(twice_spins, twice_total, prime)
            arguments = (matrix.indptr.astype(np.int64), matrix.indices.astype(np.int64),
                         symmetric_residues(matrix.data.astype(np.int64), prime), row_weight,
                         np.arange(paths.size, dtype=np.int64), column_weight, order, prime,
                         propagation_block(paths.size))
            if weights is None:
                plain.append(power_traces_mod(*arguments))
                continue
            diagonals = power_diagonals_mod(*arguments)
            # diagonals < p and |W| mod p < p: each product < 2**52, a column of dim of them < 2**63
            plain.append(diagonals.sum(axis=0) % prime)
            weighted.append(((weights % prime)[:, None] * diagonals % prime).sum(axis=0) % prime)
        yield (twice_total, _rebuilt(plain, primes, order),
               None if weights is None else _rebuilt(weighted, primes, order))


def _rebuilt(residues, primes, order: int) -> list[int]:
    """The integers k = 0..order from their residues modulo ``primes`` (one array per prime)."""
    return [crt_signed([int(r[k]) for r in residues], primes) for k in range(order + 1)]


def _add_multiplets(sums: dict[int, list[int]], twice_total: int, traces: list[int]) -> None:
    """sums[q][k] += w_q(S) Tr A_S^k: the block of total spin twice_total/2 stands for its multiplets."""
    for q in sums:
        weight = multiplet_weight(twice_total, q)
        for k in range(len(traces)):
            sums[q][k] += weight * traces[k]


def _total_spins(twice_spins: tuple[int, ...]) -> range:
    """Twice every total spin the sites can couple to, from the lowest (0 or 1/2) to the sum of the spins."""
    top = sum(twice_spins)
    return range(top % 2, top + 1, 2)


def _bandwidth_order(n: int, edges) -> list[int]:
    """A relabelling of the sites (old -> new) that keeps bonded sites close (reverse Cuthill-McKee): a bond
    (i, j) costs 2 |i - j| - 1 adjacent operators."""
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


# A rooted pass (diagonals, a larger bound, so often one prime more) costs this many times the multiply-adds
# of its blocks: measured 0.9-1.25 against the plain pass on five spin-1 clusters of 9 and 10 sites, order 11,
# where the root-last order was as good as the plain one.
ROOTED_PASS_COST = 1.2


def estimated_cost(ham, root: int | None = None) -> float:
    """Multiply-adds per prime and per pair of powers of :func:`total_spin_power_sums` (sum over the blocks of
    dimension x nonzeros), or with ``root`` of :func:`rooted_power_sums` for that root (its order of the sites,
    times ROOTED_PASS_COST), to weigh against the S^z sectors (:func:`hte.exact.total_spin_pays`)."""
    _, twice_spins, bonds = _relabelled(ham, last=root)
    cost = sum(float(_paths(twice_spins, s).size) * _pattern_size(twice_spins, s, bonds)[1]
               for s in _total_spins(twice_spins))
    return cost if root is None else ROOTED_PASS_COST * cost


def _relabelled(ham, last: int | None = None):
    """The integer couplings of ``ham``, its spins (twice) and bonds (u, v, zz) with the sites relabelled by
    :func:`_bandwidth_order`, or with site ``last`` put last by :func:`_order_ending_at`."""
    couplings = integer_couplings(ham)
    edges = [(u, v) for u, v, _, _ in couplings.bonds]
    new_label = _bandwidth_order(ham.n_sites, edges) if last is None else _order_ending_at(ham.n_sites, edges, last)
    twice_spins = [0] * ham.n_sites
    for old, new in enumerate(new_label):
        twice_spins[new] = couplings.twice_spins[old]
    bonds = tuple((new_label[u], new_label[v], zz) for u, v, _, zz in couplings.bonds)
    return couplings, tuple(twice_spins), bonds


def _order_ending_at(n: int, edges, last: int) -> list[int]:
    """A relabelling of the sites (old -> new) with ``last`` last and bonded sites close: of two candidates, the
    one whose bonds span fewer positions (each position spanned costs two exchanges in :func:`_bond_matrix`):
    breadth-first from ``last``, neighbours by increasing degree (Cuthill-McKee), reversed, sites not reached
    first; or the order of :func:`_bandwidth_order` with ``last`` moved to the end."""
    neighbours: list[list[int]] = [[] for _ in range(n)]
    for u, v in edges:
        neighbours[u].append(v)
        neighbours[v].append(u)
    order, seen = [last], {last}
    for site in order:
        for other in sorted(neighbours[site], key=lambda x: len(neighbours[x])):
            if other not in seen:
                seen.add(other)
                order.append(other)
    order += [site for site in range(n) if site not in seen]
    bandwidth = _bandwidth_order(n, edges)
    moved = [site for site in sorted(range(n), key=lambda site: bandwidth[site]) if site != last] + [last]
    candidates = []
    for sequence in (list(reversed(order)), moved):
        new_label = [0] * n
        for new, old in enumerate(sequence):
            new_label[old] = new
        candidates.append((sum(abs(new_label[u] - new_label[v]) for u, v in edges), new_label))
    return min(candidates, key=lambda candidate: candidate[0])[1]


@lru_cache(maxsize=1024)
def _pattern_size(twice_spins: tuple[int, ...], twice_total: int, bonds: tuple) -> tuple[int, int]:
    """(longest row, nonzeros) of the cancellation-free pattern of block ``twice_total``: bounds for every prime
    (:func:`_block_matrix` with prime None); remembered, as the cost model asks first."""
    pattern = _block_matrix(twice_spins, twice_total, bonds, None)
    return int(np.diff(pattern.indptr).max(initial=1)), int(pattern.nnz)
