"""Total-spin blocks of spin-1/2 Heisenberg clusters (hte.total_spin) against independent facts and routes.

The representation is checked against the defining relations of the symmetric group and Frobenius' character
formula; the power sums against the S^z-sector kernel of hte.exact (a different basis and algorithm) and, for a
small cluster, against a dense exact sympy trace.
"""

from __future__ import annotations

import random
from fractions import Fraction
from math import comb

import pytest
import sympy as sp

from hte.exact import TOTAL_SPIN_MIN_SITES, ClusterHamiltonian, _integer_power_traces, cluster_cumulants
from hte.total_spin import (
    _adjacent_actions,
    applies,
    multiplet_weight,
    standard_tableaux,
    total_spin_power_sums,
)

HALF = Fraction(1, 2)


def seminormal_matrices(n, lower):
    actions, squares = _adjacent_actions(n, lower)
    size = len(standard_tableaux(n, lower))
    matrices = []
    for rows, cols, values in actions:
        m = sp.zeros(size, size)
        for r, c, v in zip(rows, cols, values):
            m[int(r), int(c)] += sp.Rational(v.numerator, v.denominator)
        matrices.append(m)
    return matrices, [sp.Rational(s.numerator, s.denominator) for s in squares]


@pytest.mark.parametrize("n", range(1, 13))
def test_tableau_counts_follow_the_hook_length_formula(n):
    # Two-row shape (n - l, l): f = C(n, l) - C(n, l - 1) (hook length formula; common practice).
    for lower in range(n // 2 + 1):
        assert len(standard_tableaux(n, lower)) == comb(n, lower) - (comb(n, lower - 1) if lower else 0)


@pytest.mark.parametrize("n, lower", [(4, 2), (5, 2), (6, 2), (6, 3), (7, 3)])
def test_seminormal_matrices_satisfy_the_coxeter_relations(n, lower):
    # s_k^2 = 1, (s_k s_k+1)^3 = 1, (s_k s_l)^2 = 1 for |k - l| >= 2: the presentation of S_n (common practice).
    s, _ = seminormal_matrices(n, lower)
    one = sp.eye(s[0].shape[0])
    for k in range(n - 1):
        assert s[k] * s[k] == one
        if k + 1 < n - 1:
            assert (s[k] * s[k + 1]) ** 3 == one
        for l in range(k + 2, n - 1):
            assert (s[k] * s[l]) ** 2 == one


@pytest.mark.parametrize("n, lower", [(5, 1), (6, 2), (7, 3), (8, 4)])
def test_transposition_character_matches_frobenius(n, lower):
    # chi(transposition) / dim = (sum of contents of the diagram) / C(n, 2) (Frobenius 1900; common practice).
    s, _ = seminormal_matrices(n, lower)
    contents = sum(range(n - lower)) + sum(c - 1 for c in range(lower))
    dim = s[0].shape[0]
    for k in range(n - 1):
        assert s[k].trace() == sp.Rational(dim * contents, comb(n, 2))


@pytest.mark.parametrize("n, lower", [(6, 2), (7, 3), (8, 3)])
def test_gauge_makes_every_adjacent_transposition_symmetric(n, lower):
    # A = C^-1 S C with S symmetric  <=>  A_ab c_a^2 = A_ba c_b^2 (what the symmetric trace splitting uses).
    s, squares = seminormal_matrices(n, lower)
    for m in s:
        for a in range(m.shape[0]):
            for b in range(m.shape[0]):
                assert m[a, b] * squares[a] == m[b, a] * squares[b]


def sector_power_sums(ham, order):
    """The same sums from the S^z sectors of hte.exact (sectors m and -m, both counted)."""
    scale, traces = _integer_power_traces(ham, order)
    multiplicity = {tm: 1 if tm == 0 else 2 for tm in traces}
    return scale, {q: [sum(multiplicity[tm] * tm**q * t[k] for tm, t in traces.items()) for k in range(order + 1)]
                   for q in (0, 2, 4)}


def random_heisenberg(rng, n, extra):
    edges = {(rng.randrange(i), i) for i in range(1, n)}
    while len(edges) < min(n - 1 + extra, n * (n - 1) // 2):
        u, v = sorted(rng.sample(range(n), 2))
        edges.add((u, v))
    bonds = []
    for u, v in sorted(edges):
        j = Fraction(rng.choice([1, -1, 2, -3, 5]), rng.choice([1, 2, 3, 7]))
        bonds.append((u, v, j, j))
    return ClusterHamiltonian(spins=(HALF,) * n, bonds=tuple(bonds))


@pytest.mark.parametrize("seed", range(8))
def test_total_spin_sums_equal_the_sz_sector_sums(seed):
    rng = random.Random(seed)
    ham = random_heisenberg(rng, rng.randint(2, 10), rng.randint(0, 5))
    assert total_spin_power_sums(ham, 9) == sector_power_sums(ham, 9)


def test_large_cluster_takes_the_total_spin_route_with_the_same_result():
    # A 13-site cluster with couplings of both signs and no symmetry: cluster_cumulants uses the total-spin
    # blocks here; the S^z route gives the same moments.
    ham = random_heisenberg(random.Random(42), TOTAL_SPIN_MIN_SITES, 3)
    from hte.exact import cumulants_from_integer_moments

    scale, sums = sector_power_sums(ham, 10)
    assert cluster_cumulants(ham, 10) == cumulants_from_integer_moments(sums, scale, 10)


def test_triangle_traces_match_a_dense_sympy_trace():
    # Tr(M^q (scale H0)^k) over all 8 states of a triangle, from explicit Pauli matrices (independent route).
    ham = ClusterHamiltonian(spins=(HALF,) * 3, bonds=((0, 1, 1, 1), (1, 2, 2, 2), (0, 2, -1, -1)))
    scale, sums = total_spin_power_sums(ham, 6)
    sx = sp.Matrix([[0, 1], [1, 0]]) / 2
    sy = sp.Matrix([[0, -sp.I], [sp.I, 0]]) / 2
    sz = sp.Matrix([[1, 0], [0, -1]]) / 2

    def at(op, site):
        factors = [op if k == site else sp.eye(2) for k in range(3)]
        return sp.kronecker_product(*factors)

    h = sp.zeros(8, 8)
    for u, v, j, _ in ham.bonds:
        h += sp.Rational(j.numerator, j.denominator) * sum((at(o, u) * at(o, v) for o in (sx, sy, sz)), sp.zeros(8, 8))
    two_m = 2 * sum((at(sz, k) for k in range(3)), sp.zeros(8, 8))
    a = scale * h
    for q in (0, 2, 4):
        power = two_m**q
        for k in range(7):
            assert sp.nsimplify(power.trace()) == sums[q][k]
            power = (power * a).applyfunc(sp.expand)


def test_multiplet_weights():
    # sum_{m=-S..S} (2m)^q: S = 1 -> 3, 8, 32; S = 3/2 -> 4, 20, 164 (by hand).
    assert [multiplet_weight(2, q) for q in (0, 2, 4)] == [3, 8, 32]
    assert [multiplet_weight(3, q) for q in (0, 2, 4)] == [4, 20, 164]


def test_only_spin_half_isotropic_clusters_apply():
    bond = ((0, 1, 1, 1),)
    assert applies(ClusterHamiltonian(spins=(HALF, HALF), bonds=bond))
    assert not applies(ClusterHamiltonian(spins=(HALF, Fraction(1)), bonds=bond))
    assert not applies(ClusterHamiltonian(spins=(HALF, HALF), bonds=((0, 1, Fraction(1, 2), 1),)))
    assert not applies(ClusterHamiltonian(spins=(Fraction(1), Fraction(1)), bonds=bond, anisotropy=(1, 0)))
