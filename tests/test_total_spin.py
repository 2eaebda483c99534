"""Total-spin blocks of isotropic clusters of any spins (hte.total_spin) against independent facts and routes.

The coupled basis is checked against the Clebsch-Gordan series (its size), the defining relations of the
permutation group (its site exchanges) and the pair-spin levels of a bond (Kambe's method); the power sums
against the S^z-sector kernel of hte.exact (a different basis and algorithm), against Kambe's closed form for
all-to-all clusters and, for small clusters, against dense exact sympy traces from explicit spin matrices.
"""

from __future__ import annotations

import random
from fractions import Fraction

import numpy as np
import pytest
import sympy as sp

from hte.exact import (
    TOTAL_SPIN_MIN_STATES,
    ClusterHamiltonian,
    _integer_power_traces,
    total_spin_pays,
    cluster_cumulants,
    cumulants_from_integer_moments,
)
from hte.spin_matrices import spin_sectors
from hte.total_spin import (
    _gauge_mod,
    _local_bond,
    _paths,
    _position_operator,
    applies,
    multiplet_weight,
    rooted_power_sums,
    total_spin_power_sums,
)

HALF = Fraction(1, 2)
PRIME = 33554393  # the largest prime below 2^25 (any prime far above the denominators would do)


@pytest.mark.parametrize("twice_spins", [(1,) * 9, (2,) * 6, (3, 3, 3, 3), (1, 2, 3, 2, 1), (5, 4, 5)])
def test_path_counts_follow_the_clebsch_gordan_series(twice_spins):
    # Highest-weight states of spin S = dim(S^z = S) - dim(S^z = S + 1) (common practice), counted here from
    # the product states; the path index formula must enumerate the paths in order.
    dims = {s.twice_magnetization: s.dim for s in spin_sectors(twice_spins)}
    for twice_total in range(sum(twice_spins) % 2, sum(twice_spins) + 1, 2):
        paths = _paths(twice_spins, twice_total)
        assert paths.size == dims[twice_total] - dims.get(twice_total + 2, 0)
        index = sum(paths.offsets[l][paths.levels[:, l - 1], paths.levels[:, l]] for l in range(1, len(twice_spins) + 1))
        assert np.array_equal(index, np.arange(paths.size))


def dense_mod(matrix):
    return np.asarray(matrix.todense()) % PRIME


@pytest.mark.parametrize("twice_spin, n, twice_total", [(1, 6, 2), (2, 5, 2), (3, 4, 3), (4, 4, 4)])
def test_site_exchanges_satisfy_the_coxeter_relations(twice_spin, n, twice_total):
    # Exchanges of equal spins: P_k^2 = 1, (P_k P_k+1)^3 = 1, (P_k P_l)^2 = 1 for |k - l| >= 2, the presentation of
    # the permutation group (common practice); here modulo a large prime.
    spins = (twice_spin,) * n
    p = [dense_mod(_position_operator(spins, twice_total, k, "exchange", PRIME)) for k in range(n - 1)]
    one = np.eye(p[0].shape[0], dtype=np.int64)

    def times(*factors):
        result = one
        for f in factors:
            result = result @ f % PRIME
        return result

    for k in range(n - 1):
        assert np.array_equal(times(p[k], p[k]), one)
        if k + 1 < n - 1:
            assert np.array_equal(times(*[p[k], p[k + 1]] * 3), one)
        for l in range(k + 2, n - 1):
            assert np.array_equal(times(*[p[k], p[l]] * 2), one)


@pytest.mark.parametrize("j0, a, b, total", [(0, 2, 2, 2), (2, 2, 2, 2), (3, 3, 3, 3), (4, 2, 5, 5), (6, 5, 5, 4)])
def test_adjacent_bond_has_the_pair_spin_levels(j0, a, b, total):
    # S_a.S_b = [j(j+1) - s_a(s_a+1) - s_b(s_b+1)] / 2 for the pair coupled to spin j (Kambe's method; K. Kambe,
    # J. Phys. Soc. Jpn. 5, 48 (1950), from memory); the pair spins allowed are those that couple with j0 to total.
    local = _local_bond(j0, a, b, total)
    order = sorted(local)
    matrix = sp.zeros(len(order), len(order))
    for j, column in local.items():
        for target, value in column:
            matrix[order.index(target), order.index(j)] = sp.Rational(value.numerator, value.denominator)
    x = sp.Symbol("x")
    pair_spins = [p for p in range(abs(a - b), a + b + 1, 2) if abs(j0 - p) <= total <= j0 + p]
    levels = [sp.Rational(p * (p + 2) - a * (a + 2) - b * (b + 2), 8) for p in pair_spins]
    assert sp.expand(matrix.charpoly(x).as_expr() - sp.prod([x - e for e in levels])) == 0


@pytest.mark.parametrize("twice_spins, twice_total", [((1,) * 7, 1), ((2,) * 5, 2), ((3, 1, 2, 3), 3)])
def test_gauge_makes_every_bond_symmetric(twice_spins, twice_total):
    # A = C^-1 S C with S symmetric  <=>  A_ab c_a^2 = A_ba c_b^2 (what the symmetric trace splitting uses).
    from hte.total_spin import _bond_matrix

    rows, _ = _gauge_mod(twice_spins, twice_total, PRIME)
    c2 = rows.astype(np.int64)
    for u, v in [(0, 1), (1, 2), (0, 3), (1, len(twice_spins) - 1)]:
        a = dense_mod(_bond_matrix(twice_spins, twice_total, u, v, PRIME))
        assert np.array_equal(a * c2[:, None] % PRIME, (a * c2[:, None] % PRIME).T)


def sector_power_sums(ham, order):
    """The same sums from the S^z sectors of hte.exact (sectors m and -m, both counted)."""
    scale, traces = _integer_power_traces(ham, order)
    multiplicity = {tm: 1 if tm == 0 else 2 for tm in traces}
    return scale, {q: [sum(multiplicity[tm] * tm**q * t[k] for tm, t in traces.items()) for k in range(order + 1)]
                   for q in (0, 2, 4)}


def random_heisenberg(rng, n, extra, spins=(HALF,)):
    edges = {(rng.randrange(i), i) for i in range(1, n)}
    while len(edges) < min(n - 1 + extra, n * (n - 1) // 2):
        u, v = sorted(rng.sample(range(n), 2))
        edges.add((u, v))
    bonds = []
    for u, v in sorted(edges):
        j = Fraction(rng.choice([1, -1, 2, -3, 5]), rng.choice([1, 2, 3, 7]))
        bonds.append((u, v, j, j))
    return ClusterHamiltonian(spins=tuple(rng.choice(spins) for _ in range(n)), bonds=tuple(bonds))


SPIN_SETS = [(HALF,), (Fraction(1),), (Fraction(3, 2),), (Fraction(2),), (Fraction(5, 2),), (HALF, Fraction(1)),
             (Fraction(1), Fraction(5, 2)), (HALF, Fraction(3, 2), Fraction(2))]


@pytest.mark.parametrize("seed", range(16))
def test_total_spin_sums_equal_the_sz_sector_sums(seed):
    rng = random.Random(seed)
    spins = SPIN_SETS[seed % len(SPIN_SETS)]
    largest = {HALF: 10, Fraction(1): 6}.get(max(spins), 4)
    ham = random_heisenberg(rng, rng.randint(2, largest), rng.randint(0, 5), spins)
    assert total_spin_power_sums(ham, 9) == sector_power_sums(ham, 9)


@pytest.mark.parametrize("spin, n", [(HALF, 13), (Fraction(1), 9), (Fraction(2), 6)])
def test_large_cluster_takes_the_total_spin_route_with_the_same_result(spin, n):
    # A path of n spins with a chord: cluster_cumulants uses the total-spin blocks here (checked); the S^z route
    # gives the same moments.
    bonds = tuple((i, i + 1, Fraction(1 + i % 3, 2), Fraction(1 + i % 3, 2)) for i in range(n - 1)) + ((0, 3, -1, -1),)
    ham = ClusterHamiltonian(spins=(spin,) * n, bonds=bonds)
    assert (2 * spin + 1) ** n >= TOTAL_SPIN_MIN_STATES and total_spin_pays(ham)
    scale, sums = sector_power_sums(ham, 10)
    assert cluster_cumulants(ham, 10) == cumulants_from_integer_moments(sums, scale, 10)


@pytest.mark.parametrize("spin, n", [(Fraction(1), 5), (Fraction(3, 2), 4), (Fraction(5, 2), 3)])
def test_all_to_all_cluster_matches_kambe_levels(spin, n):
    # H = J sum_{i<j} S_i.S_j = (J/2)[S_T(S_T+1) - n S(S+1)], multiplicities from the Clebsch-Gordan series
    # (K. Kambe, J. Phys. Soc. Jpn. 5, 48 (1950), from memory); here J = 1, so scale * H has these levels times
    # scale, and sum_m (2m)^q Tr_m A^k = sum over multiplets of w_q(S_T) E^k.
    bonds = tuple((u, v, 1, 1) for u in range(n) for v in range(u + 1, n))
    scale, sums = total_spin_power_sums(ClusterHamiltonian(spins=(spin,) * n, bonds=bonds), 8)
    twice = int(2 * spin)
    multiplicities = {twice: 1}
    for _ in range(n - 1):
        following = {}
        for partial, times in multiplicities.items():
            for total in range(abs(partial - twice), partial + twice + 1, 2):
                following[total] = following.get(total, 0) + times
        multiplicities = following
    for q in (0, 2, 4):
        expected = [sum(times * multiplet_weight(t, q) * (scale * (Fraction(t * (t + 2), 8)
                                                                   - n * spin * (spin + 1) / 2)) ** k
                        for t, times in multiplicities.items()) for k in range(9)]
        assert sums[q] == expected


def spin_operators(spin):
    """S^x, S^y, S^z of one spin as exact sympy matrices (orthonormal basis m = S, S-1, ..., -S)."""
    s = sp.Rational(spin)
    ms = [s - k for k in range(int(2 * s) + 1)]
    plus = sp.zeros(len(ms), len(ms))
    for k in range(1, len(ms)):
        m = ms[k]
        plus[k - 1, k] = sp.sqrt(s * (s + 1) - m * (m + 1))
    return (plus + plus.T) / 2, (plus - plus.T) / (2 * sp.I), sp.diag(*ms)


@pytest.mark.parametrize("spins, bonds", [
    ((HALF,) * 3, ((0, 1, 1), (1, 2, 2), (0, 2, -1))),
    ((Fraction(1),) * 3, ((0, 1, 1), (1, 2, Fraction(1, 2)), (0, 2, -2))),
    ((HALF, Fraction(3, 2), Fraction(1)), ((0, 1, 3), (1, 2, -1))),
])
def test_small_cluster_traces_match_a_dense_sympy_trace(spins, bonds):
    # Tr((2M)^q (scale H0)^k) over all states, from explicit spin matrices (independent route).
    ham = ClusterHamiltonian(spins=spins, bonds=tuple((u, v, Fraction(j), Fraction(j)) for u, v, j in bonds))
    scale, sums = total_spin_power_sums(ham, 6)
    operators = [spin_operators(s) for s in spins]
    dims = [int(2 * s) + 1 for s in spins]

    def at(op, site):
        return sp.kronecker_product(*[op if k == site else sp.eye(d) for k, d in enumerate(dims)])

    size = int(np.prod(dims))
    h = sp.zeros(size, size)
    for u, v, j in bonds:
        h += sp.Rational(j) * sum((at(operators[u][c], u) * at(operators[v][c], v) for c in range(3)),
                                  sp.zeros(size, size))
    two_m = 2 * sum((at(operators[k][2], k) for k in range(len(spins))), sp.zeros(size, size))
    a = (scale * h).applyfunc(sp.nsimplify)
    for q in (0, 2, 4):
        power = two_m**q
        for k in range(7):
            assert sp.nsimplify(sp.expand(power.trace())) == sums[q][k]
            power = (power * a).applyfunc(sp.expand)


def test_multiplet_weights():
    # sum_{m=-S..S} (2m)^q: S = 1 -> 3, 8, 32; S = 3/2 -> 4, 20, 164 (by hand).
    assert [multiplet_weight(2, q) for q in (0, 2, 4)] == [3, 8, 32]
    assert [multiplet_weight(3, q) for q in (0, 2, 4)] == [4, 20, 164]


def test_isotropic_clusters_of_any_spin_apply_and_anisotropic_ones_do_not():
    bond = ((0, 1, 1, 1),)
    assert applies(ClusterHamiltonian(spins=(HALF, HALF), bonds=bond))
    assert applies(ClusterHamiltonian(spins=(HALF, Fraction(1)), bonds=bond))
    assert not applies(ClusterHamiltonian(spins=(HALF, HALF), bonds=((0, 1, Fraction(1, 2), 1),)))
    assert not applies(ClusterHamiltonian(spins=(Fraction(1), Fraction(1)), bonds=bond, anisotropy=(1, 0)))


@pytest.mark.parametrize("seed", range(8))
def test_rooted_sums_equal_those_of_the_sz_sectors(seed):
    # Each root coupled last (S_a.S_tot diagonal, projection theorem) against the S^z sectors, where S^z_a is
    # diagonal: same u_1, u_3 series of every site, exactly.
    from hte.rooted_series import _joint_cumulants, _rooted_by_sectors

    rng = random.Random(100 + seed)
    spins = SPIN_SETS[seed % len(SPIN_SETS)]
    ham = random_heisenberg(rng, rng.randint(2, 7 if max(spins) < 1 else 5), rng.randint(0, 3), spins)
    _, by_sectors = _rooted_by_sectors(ham, 8)
    for root in range(ham.n_sites):
        scale, sums, rooted = rooted_power_sums(ham, root, 8)
        assert (scale, sums) == total_spin_power_sums(ham, 8)
        (u1,), (u3,) = _joint_cumulants(sums[0], sums[2], [rooted[1]], [rooted[3]], scale, 8)
        assert u1 == by_sectors.u1[root] and u3 == by_sectors.u3[root]
