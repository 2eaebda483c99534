"""Tests of the rooted cluster series (hte.rooted_series) and the per-column diagonals of hte.modular.

Convention: H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D_i (S^z_i)^2 - h M, k_B = g mu_B = 1;
u_1(a) = <M S^z_a>, u_3(a) = <M^3 S^z_a> - 3 <M^2><M S^z_a> at h = 0, as series in beta.
The references are built in each test: a plain dense float diagonalisation of the full Hilbert space (numpy),
Python-integer matrix powers, and a closed form (Bleaney-Bowers), never hte's series code.
"""

from __future__ import annotations

from fractions import Fraction
from math import factorial

import networkx as nx
import numpy as np
import pytest
import sympy as sp

from hte.exact import ClusterHamiltonian, cluster_cumulants
from hte.modular import power_diagonals_mod, power_traces_mod, prime_bits_for, symmetric_residues
from hte.rooted_series import rooted_cluster_series
from hte.spin_matrices import gauge_weights_mod, integer_couplings, integer_sector_matrix, spin_sectors

HALF = Fraction(1, 2)


# ------------------------------------------------------------------------------------------ dense reference
def _dense_operators(ham: ClusterHamiltonian):
    """Full-space H0 (float64) and the diagonals of S^z_i, product basis, site 0 most significant."""
    raising = [np.diag(np.sqrt([(t - k) * (k + 1) for k in range(t)]), -1) for t in ham.twice_spins]
    spin_z = [np.diag(np.arange(t + 1) - t / 2) for t in ham.twice_spins]

    def embedded(factors):
        result = np.ones((1, 1))
        for site, t in enumerate(ham.twice_spins):
            result = np.kron(result, factors.get(site, np.eye(t + 1)))
        return result

    n = int(np.prod([t + 1 for t in ham.twice_spins]))
    h = np.zeros((n, n))
    for u, v, jxy, jz in ham.bonds:
        h += float(jz) * embedded({u: spin_z[u], v: spin_z[v]})
        h += float(jxy) / 2 * (embedded({u: raising[u], v: raising[v].T}) + embedded({u: raising[u].T, v: raising[v]}))
    for site, d in enumerate(ham.anisotropy):
        h += float(d) * embedded({site: spin_z[site] @ spin_z[site]})
    sz = [np.diag(embedded({site: spin_z[site]})) for site in range(ham.n_sites)]
    return h, sz


def _mul(a, b):
    return [sum(a[k] * b[n - k] for k in range(n + 1)) for n in range(len(a))]


def _inv(a):
    out = [1 / a[0]]
    for n in range(1, len(a)):
        out.append(-sum(a[k] * out[n - k] for k in range(1, n + 1)) / a[0])
    return out


def dense_rooted_float(ham: ClusterHamiltonian, order: int):
    """u_1(a), u_3(a) per site as float series: Tr(X H^k) = sum_n E_n^k <n|X|n> for X = M^j S^z_a (diagonal)."""
    h, sz = _dense_operators(ham)
    energies, vectors = np.linalg.eigh(h)
    weights = vectors**2  # |<state|n>|^2

    def series(diagonal):
        expectation = weights.T @ diagonal  # <n|X|n>
        return [(-1) ** k * float(np.sum(energies**k * expectation)) / factorial(k) for k in range(order + 1)]

    m = sum(sz)
    inverse_z = _inv(series(np.ones_like(m)))
    second = _mul(series(m**2), inverse_z)
    u1, u3 = [], []
    for s in sz:
        first = _mul(series(m * s), inverse_z)
        third = _mul(series(m**3 * s), inverse_z)
        u1.append(first)
        u3.append([a - 3 * b for a, b in zip(third, _mul(second, first))])
    return u1, u3


def _random_cluster(seed: int) -> ClusterHamiltonian:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 6))
    graph = nx.gnm_random_graph(n, int(rng.integers(n - 1, n * (n - 1) // 2 + 1)), seed=seed)
    while not nx.is_connected(graph):
        graph.add_edge(*(int(x) for x in rng.choice(n, 2, replace=False)))
    spins = [HALF if rng.random() < 0.6 else Fraction(1) for _ in range(n)]
    if np.prod([int(2 * s) + 1 for s in spins]) > 250:
        spins = [HALF] * n
    bonds = tuple((u, v, Fraction(int(rng.integers(-3, 4)), 2), Fraction(int(rng.integers(-3, 4)), 3))
                  for u, v in graph.edges)
    anisotropy = tuple(Fraction(int(rng.integers(-2, 3)), 2) if s > HALF else Fraction(0) for s in spins)
    return ClusterHamiltonian(spins=tuple(spins), bonds=bonds, anisotropy=anisotropy)


# ------------------------------------------------------------------------------------------ tests
@pytest.mark.parametrize("seed", range(12))
def test_rooted_series_match_dense_diagonalisation(seed):
    # Random graphs with spins 1/2 and 1, XXZ couplings (Jxy != Jz, both signs) and D != 0 on the spin-1 sites.
    ham = _random_cluster(seed)
    order = 7
    cumulants, rooted = rooted_cluster_series(ham, order)
    u1, u3 = dense_rooted_float(ham, order)
    for a in range(ham.n_sites):
        assert np.allclose([float(x) for x in rooted.u1[a]], u1[a], rtol=1e-9, atol=1e-9)
        assert np.allclose([float(x) for x in rooted.u3[a]], u3[a], rtol=1e-9, atol=1e-9)
    assert cumulants == cluster_cumulants(ham, order)
    # sum_a <M S^z_a> = <M^2> = T chi, exactly
    assert [sum(c) for c in zip(*rooted.u1.values())] == cumulants.m2


SYMMETRIC_CLUSTERS = {
    # 9-site spin-1/2 XXZ ring: sector m = 0 has 126 states, above the orbit-reduction threshold
    "ring9": ClusterHamiltonian(spins=(HALF,) * 9, bonds=tuple((i, (i + 1) % 9, 1, HALF) for i in range(9))),
    # spin-1 star with 5 leaves, D on every site (729 states; the leaves are permuted by the symmetries)
    "star6": ClusterHamiltonian(spins=(1,) * 6, bonds=tuple((0, i, 1, Fraction(3, 2)) for i in range(1, 6)),
                                anisotropy=(Fraction(-1, 2),) + (Fraction(1, 3),) * 5),
}


@pytest.mark.parametrize("name", SYMMETRIC_CLUSTERS)
def test_orbit_reduced_sectors_stay_exact(name):
    # Clusters large and symmetric enough for the orbit reduction in every sector, against the dense reference;
    # sites exchanged by a symmetry must get identical series.
    ham = SYMMETRIC_CLUSTERS[name]
    cumulants, rooted = rooted_cluster_series(ham, 8)
    u1, u3 = dense_rooted_float(ham, 8)
    for a in range(ham.n_sites):
        assert np.allclose([float(x) for x in rooted.u1[a]], u1[a], rtol=1e-9, atol=1e-12)
        assert np.allclose([float(x) for x in rooted.u3[a]], u3[a], rtol=1e-9, atol=1e-12)
    assert all(rooted.u1[a] == rooted.u1[1] and rooted.u3[a] == rooted.u3[1] for a in range(2, ham.n_sites))
    assert cumulants == cluster_cumulants(ham, 8)


def test_dimer_site_series_is_half_of_bleaney_bowers():
    # Spin-1/2 dimer H = J S1.S2: T chi = <M^2> = 2 / (3 + exp(beta J)) per dimer (B. Bleaney and K. D. Bowers,
    # Proc. R. Soc. Lond. A 214, 451 (1952); they write H = -2J' S1.S2, J' = -J/2); by the exchange of the two
    # sites <M S^z_1> = <M^2>/2.  <M^4> = <M^2> here (M^2 is 0 or 1), so u_3 = <M^2>/2 - 3 <M^2>^2 / 2.
    beta = sp.symbols("beta")
    order = 9
    t_chi = 2 / (3 + sp.exp(beta))
    polynomial = sp.series(t_chi, beta, 0, order + 1).removeO()
    m2 = [Fraction(str(sp.expand(polynomial).coeff(beta, k))) for k in range(order + 1)]
    square = sp.expand(sp.series(t_chi**2, beta, 0, order + 1).removeO())
    m2_squared = [Fraction(str(square.coeff(beta, k))) for k in range(order + 1)]
    _, rooted = rooted_cluster_series(ClusterHamiltonian(spins=(HALF, HALF), bonds=((0, 1, 1, 1),)), order)
    assert rooted.u1[0] == rooted.u1[1] == [c / 2 for c in m2]
    assert rooted.u3[0] == [a / 2 - 3 * b / 2 for a, b in zip(m2, m2_squared)]


def test_single_spin_one_with_anisotropy_matches_its_levels():
    # One spin 1 with H = D (S^z)^2: levels m = 0 (energy 0) and m = +-1 (energy D), so
    # u_1 = <(S^z)^2> = 2 e^{-beta D} / (1 + 2 e^{-beta D}) and u_3 = <(S^z)^4> - 3 <(S^z)^2>^2 = u_1 - 3 u_1^2.
    beta = sp.symbols("beta")
    d = Fraction(3, 2)
    order = 8
    p = 2 * sp.exp(-beta * sp.Rational(3, 2)) / (1 + 2 * sp.exp(-beta * sp.Rational(3, 2)))
    expected_u1 = sp.expand(sp.series(p, beta, 0, order + 1).removeO())
    expected_u3 = sp.expand(sp.series(p - 3 * p**2, beta, 0, order + 1).removeO())
    _, rooted = rooted_cluster_series(ClusterHamiltonian(spins=(1,), bonds=(), anisotropy=(d,)), order)
    assert rooted.u1[0] == [Fraction(str(expected_u1.coeff(beta, k))) for k in range(order + 1)]
    assert rooted.u3[0] == [Fraction(str(expected_u3.coeff(beta, k))) for k in range(order + 1)]


def test_power_diagonals_equal_python_integer_matrix_powers():
    # Per-column diagonals of A^k (integer gauge) against plain Python-integer matrix products, one sector of a
    # spin-1 / spin-1/2 cluster with XXZ couplings and anisotropy; their sum is power_traces_mod's trace.
    ham = ClusterHamiltonian(spins=(1, HALF, 1, HALF), bonds=((0, 1, 2, -1), (1, 2, 1, 3), (2, 3, -1, 1), (0, 2, 1, 1)),
                             anisotropy=(1, 0, -2, 0))
    couplings = integer_couplings(ham)
    order = 6
    for sector in spin_sectors(ham.twice_spins, nonnegative_only=True):
        matrix = integer_sector_matrix(sector, couplings)
        dense = [[0] * sector.dim for _ in range(sector.dim)]
        for a in range(sector.dim):
            for e in range(matrix.indptr[a], matrix.indptr[a + 1]):
                dense[a][matrix.indices[e]] += int(matrix.values[e])
        power = [[int(i == j) for j in range(sector.dim)] for i in range(sector.dim)]
        expected = []
        for _ in range(order + 1):
            expected.append([power[b][b] for b in range(sector.dim)])
            power = [[sum(power[i][k] * dense[k][j] for k in range(sector.dim)) for j in range(sector.dim)]
                     for i in range(sector.dim)]
        prime = int(sp.prevprime(2 ** prime_bits_for(matrix.max_row_length, matrix.max_abs_entry, sector.dim)))
        row_weight, column_weight = gauge_weights_mod(sector, ham.twice_spins, prime)
        args = (matrix.indptr, matrix.indices, symmetric_residues(matrix.values, prime),
                row_weight.astype(np.float64), np.arange(sector.dim, dtype=np.int64),
                column_weight.astype(np.float64), order, prime, 3)
        diagonals = power_diagonals_mod(*args)
        for k in range(order + 1):
            assert [int(x) for x in diagonals[:, k]] == [expected[k][b] % prime for b in range(sector.dim)]
        assert [int(x) for x in diagonals.sum(axis=0) % prime] == [int(x) for x in power_traces_mod(*args)]


def test_a_few_roots_of_a_large_isotropic_cluster_take_the_total_spin_route_with_the_same_result():
    # Nine spins 1 (19 683 states), a triangle with a tail, two coupling values: two roots are cheaper over the
    # total-spin blocks (one pass each, checked) and give what the S^z sectors give for every site.
    from hte.exact import total_spin_pays
    from hte.rooted_series import _rooted_by_sectors

    edges = [(0, 1), (1, 2), (0, 2), (2, 3), (3, 4), (4, 5), (5, 6), (6, 7), (7, 8)]
    ham = ClusterHamiltonian(spins=(Fraction(1),) * 9,
                             bonds=tuple((u, v, Fraction(1 + u % 2), Fraction(1 + u % 2)) for u, v in edges))
    assert total_spin_pays(ham, roots=[0, 4])
    cumulants, rooted = rooted_cluster_series(ham, 8, roots=[0, 4])
    reference_cumulants, reference = _rooted_by_sectors(ham, 8)
    assert sorted(rooted.u1) == [0, 4] and cumulants == reference_cumulants
    assert all(rooted.u1[a] == reference.u1[a] and rooted.u3[a] == reference.u3[a] for a in (0, 4))
