"""Tests of the exact cluster kernel (hte.exact) and its helpers (hte.spin_matrices, hte.modular).

Convention throughout: H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D_i (S^z_i)^2 - h M, k_B = g mu_B = 1,
J > 0 antiferromagnetic; lnz = ln Z(beta, 0) - sum_i ln(2 S_i + 1), m2 = <M^2> = T chi, m4 = <M^4> - 3 <M^2>^2.
Reference series are built in each test from closed forms with sympy (its own series arithmetic), or from
an exact sympy matrix computation, never from hte's series code.
"""

from __future__ import annotations

import random
from fractions import Fraction
from math import isclose, prod

import numpy as np
import pytest
import sympy as sp
from sympy import QQ
from sympy.matrices import kronecker_product
from sympy.polys.ring_series import rs_exp, rs_log, rs_mul, rs_series_inversion
from sympy.polys.rings import ring

from hte.cluster_symmetry import site_automorphisms, state_orbits
from hte.errors import ParameterError, ResourceLimitError
from hte.exact import (
    ClusterHamiltonian,
    _diagonal_entries,
    _integer_power_traces,
    cluster_cumulants,
    cluster_spectrum,
    dense_cumulants_float,
)
from hte.modular import crt_signed, is_prime, power_traces_mod, prime_bits_for, primes_below, symmetric_residues
from hte.spin_matrices import gauge_weights_mod, integer_couplings, integer_sector_matrix, spin_sectors

HALF = Fraction(1, 2)
SERIES_RING, X = ring("x", QQ)


def to_fraction(value) -> Fraction:
    """A sympy Rational or a ground-domain rational as a Fraction."""
    return Fraction(str(value))


def to_qq(value):
    value = sp.Rational(value)
    return QQ(int(value.p), int(value.q))


def ring_coefficients(series, order: int) -> list[Fraction]:
    terms = series.to_dict()
    return [to_fraction(terms.get((k,), 0)) for k in range(order + 1)]


def sympy_coefficients(expression, variable, order: int) -> list[Fraction]:
    """Taylor coefficients 0..order of a closed form, by sympy.series."""
    polynomial = sp.series(expression, variable, 0, order + 1).removeO()
    return [to_fraction(sp.expand(polynomial).coeff(variable, k)) for k in range(order + 1)]


def cumulants_from_partition_sums(z0, z2, z4, order: int):
    """lnz, m2, m4 from Z_q(beta) = Tr M^q e^{-beta H0} (ring series in X), with sympy's series arithmetic."""
    n = order + 1
    inverse = rs_series_inversion(z0, X, n)
    m2 = rs_mul(z2, inverse, X, n)
    m4 = rs_mul(z4, inverse, X, n) - 3 * rs_mul(m2, m2, X, n)
    lnz = rs_log(z0 * (1 / z0.to_dict()[(0,)]), X, n)
    return [ring_coefficients(s, order) for s in (lnz, m2, m4)]


def cumulants_from_levels(levels, order: int):
    """Series from an exactly known spectrum: levels = [(energy, [(magnetization, multiplicity), ...]), ...]."""
    sums = {q: SERIES_RING(0) for q in (0, 2, 4)}
    for energy, states in levels:
        boltzmann = rs_exp(-to_qq(energy) * X, X, order + 1)
        for q in sums:
            sums[q] += to_qq(sum(count * sp.Rational(m) ** q for m, count in states)) * boltzmann
    return cumulants_from_partition_sums(sums[0], sums[2], sums[4], order)


def multiplet(total_spin) -> list[tuple[sp.Rational, int]]:
    """The 2S_T + 1 magnetizations of a multiplet, each once."""
    total_spin = sp.Rational(total_spin)
    return [(-total_spin + k, 1) for k in range(int(2 * total_spin) + 1)]


def coupled_spins(spin, count: int) -> dict:
    """Multiplicity of each total spin S_T in the product of `count` spins S (Clebsch-Gordan series)."""
    spin = sp.Rational(spin)
    multiplicities = {spin: 1}
    for _ in range(count - 1):
        following = {}
        for partial, times in multiplicities.items():
            total = abs(partial - spin)
            while total <= partial + spin:
                following[total] = following.get(total, 0) + times
                total += 1
        multiplicities = following
    return multiplicities


def kambe_levels(spin, count: int, coupling):
    """All-to-all equal couplings J among `count` spins S (dimer: 2, triangle: 3):
    H = J sum_{i<j} S_i.S_j = (J/2) [S_T(S_T+1) - count S(S+1)].  Source: K. Kambe, J. Phys. Soc. Jpn. 5, 48
    (1950) (total-spin coupling for spin clusters; cited from memory)."""
    spin = sp.Rational(spin)
    levels = []
    for total, times in coupled_spins(spin, count).items():
        energy = sp.Rational(coupling) / 2 * (total * (total + 1) - count * spin * (spin + 1))
        levels.append((energy, [(m, times) for m, _ in multiplet(total)]))
    return levels


def heisenberg(spins, edges, coupling=1) -> ClusterHamiltonian:
    return ClusterHamiltonian(spins=tuple(spins), bonds=tuple((u, v, coupling, coupling) for u, v in edges))


def ring_edges(n_sites: int) -> list[tuple[int, int]]:
    return [(i, (i + 1) % n_sites) for i in range(n_sites)]


# ------------------------------------------------------------------------------------------ closed forms
@pytest.mark.parametrize("coupling", [Fraction(1), Fraction(-3, 2)])
def test_dimer_susceptibility_matches_bleaney_bowers(coupling):
    # chi = 2 beta / (3 + exp(beta J)) per dimer, H = +J S1.S2, g = mu_B = k_B = 1, so T chi = 2 / (3 + e^{beta J}).
    # Source: B. Bleaney and K. D. Bowers, Proc. R. Soc. Lond. A 214, 451 (1952); they write H = -2J' S1.S2 and
    # chi = (2 N g^2 mu_B^2 / kT) / (3 + exp(-2J'/kT)), i.e. J' = -J/2.
    beta = sp.Symbol("beta")
    expected = sympy_coefficients(2 / (3 + sp.exp(beta * sp.Rational(coupling))), beta, 12)
    dimer = heisenberg([HALF, HALF], [(0, 1)], coupling)
    assert cluster_cumulants(dimer, 12).m2 == expected


def test_dimer_free_energy_matches_singlet_triplet_levels():
    # Levels of H = J S1.S2 for S = 1/2: singlet -3J/4, triplet +J/4 (common practice), so
    # Z / 4 = (e^{3 beta J/4} + 3 e^{-beta J/4}) / 4.
    beta = sp.Symbol("beta")
    expected = sympy_coefficients(sp.log((sp.exp(3 * beta / 4) + 3 * sp.exp(-beta / 4)) / 4), beta, 10)
    assert cluster_cumulants(heisenberg([HALF, HALF], [(0, 1)]), 10).lnz == expected


@pytest.mark.parametrize("spin", [Fraction(1), Fraction(3, 2), Fraction(2), Fraction(5, 2)])
@pytest.mark.parametrize("shape", ["dimer", "triangle"])
def test_dimer_and_triangle_match_total_spin_levels(spin, shape):
    count, edges = (2, [(0, 1)]) if shape == "dimer" else (3, [(0, 1), (1, 2), (0, 2)])
    coupling = Fraction(2, 3)
    expected = cumulants_from_levels(kambe_levels(spin, count, coupling), 8)
    result = cluster_cumulants(heisenberg([spin] * count, edges, coupling), 8)
    assert [result.lnz, result.m2, result.m4] == expected


def test_high_order_triangle_matches_total_spin_levels():
    # Order 24 needs many primes (traces up to ~2^150): the Chinese-remainder reconstruction at full size.
    expected = cumulants_from_levels(kambe_levels(Fraction(5, 2), 3, Fraction(-1, 3)), 24)
    result = cluster_cumulants(heisenberg([Fraction(5, 2)] * 3, [(0, 1), (1, 2), (0, 2)], Fraction(-1, 3)), 24)
    assert [result.lnz, result.m2, result.m4] == expected


def test_ising_bond_matches_closed_form():
    # Jxy = 0, S = 1/2: levels +Jz/4 (M = +-1) and -Jz/4 (M = 0, twice), so Z/4 = cosh(beta Jz/4),
    # p = <M^2> = 1/(1 + e^{beta Jz/2}), <M^4> = p, kappa_4 = p - 3 p^2 (common practice: two-level algebra).
    beta = sp.Symbol("beta")
    jz = sp.Rational(5, 3)
    p = 1 / (1 + sp.exp(beta * jz / 2))
    bond = ClusterHamiltonian(spins=(HALF, HALF), bonds=((0, 1, 0, Fraction(5, 3)),))
    result = cluster_cumulants(bond, 10)
    assert result.lnz == sympy_coefficients(sp.log(sp.cosh(beta * jz / 4)), beta, 10)
    assert result.m2 == sympy_coefficients(p, beta, 10)
    assert result.m4 == sympy_coefficients(p - 3 * p**2, beta, 10)


@pytest.mark.parametrize("jz", [Fraction(1), Fraction(-2, 3)])
def test_ising_ring_of_four_matches_transfer_matrix(jz):
    # Z = Tr T^N with T_{ss'} = exp(-beta Jz s s'/4 + beta h (s + s')/4), s = +-1 and S^z = s/2.
    # Source: R. J. Baxter, Exactly Solved Models in Statistical Mechanics (1982), ch. 2 (from memory); Baxter
    # writes H = -J sum s s' - H sum s, so his J = -Jz/4 and his H = h/2 here.
    beta, field = sp.symbols("beta field")  # field = beta h
    s = (1, -1)
    coupling = sp.Rational(jz)
    transfer = sp.Matrix(2, 2, lambda i, j: sp.exp(-beta * coupling * s[i] * s[j] / 4 + field * (s[i] + s[j]) / 4))
    partition = (transfer**4).trace()
    sums = []
    for q in (0, 2, 4):
        derivative = sp.diff(partition, field, q).subs(field, 0)
        coefficients = sympy_coefficients(derivative, beta, 8)
        sums.append(SERIES_RING.from_dict({(k,): to_qq(c) for k, c in enumerate(coefficients)}))
    expected = cumulants_from_partition_sums(*sums, 8)
    ring4 = ClusterHamiltonian(spins=(HALF,) * 4, bonds=tuple((u, v, 0, jz) for u, v in ring_edges(4)))
    result = cluster_cumulants(ring4, 8)
    assert [result.lnz, result.m2, result.m4] == expected


@pytest.mark.parametrize("spin", [HALF, Fraction(1), Fraction(3, 2)])
@pytest.mark.parametrize("n_sites", [3, 4, 5, 6])
def test_heisenberg_ring_low_orders_from_traces(spin, n_sites):
    # Derived here from infinite-temperature traces <.>_0 = Tr(.)/Tr(1), with c = S(S+1)/3 = <(S^a)^2>_0:
    # <H>_0 = 0 and different bonds are uncorrelated, <(S_i.S_j)^2>_0 = sum_a <(S_i^a)^2>_0 <(S_j^a)^2>_0 = 3c^2,
    # so lnz[1] = 0 and lnz[2] = <H^2>_0 / 2 = 3 c^2 L / 2 (S = 1/2: 3L/32, i.e. (z/2)(3/32) J^2 per site
    # with z = 2, as in G. S. Rushbrooke and P. J. Wood, Mol. Phys. 1, 257 (1958)).
    # <M^2>_0 = c L and <M^2 H>_0 = sum_b 2 <S_i^z S_j^z S_i.S_j>_0 = 2 c^2 L, so m2 = c L - 2 c^2 L beta + ...:
    # the Curie-Weiss form T chi = C (1 + theta beta), theta = -S(S+1) z J / 3 (CONVENTIONS.md).
    c = spin * (spin + 1) / 3
    result = cluster_cumulants(heisenberg([spin] * n_sites, ring_edges(n_sites)), 3)
    assert result.lnz[:3] == [0, 0, Fraction(3, 2) * c * c * n_sites]
    assert result.m2[:2] == [c * n_sites, -2 * c * c * n_sites]


def test_spectrum_of_triangle_matches_total_spin_levels():
    # Sector m holds every multiplet with S_T >= |m| (Kambe's levels, see kambe_levels).
    spin, coupling = Fraction(1), Fraction(1)
    spectrum = cluster_spectrum(heisenberg([spin] * 3, [(0, 1), (1, 2), (0, 2)], coupling))
    levels = kambe_levels(spin, 3, coupling)
    assert sorted(spectrum) == [Fraction(m) for m in range(-3, 4)]
    for magnetization, energies in spectrum.items():
        expected = sorted(
            float(energy) for energy, states in levels for m, times in states if m == magnetization
            for _ in range(times)
        )
        np.testing.assert_allclose(energies, expected, atol=1e-12)


# ------------------------------------------------------------------------------------ random clusters
def random_cluster(rng: random.Random) -> ClusterHamiltonian:
    """3-6 sites, mixed spins (at most 250 states), random connected graph, rational Jxy != Jz, D for S >= 1."""
    n_sites = rng.randint(3, 6)
    while True:
        spins = [rng.choice([HALF, HALF, Fraction(1), Fraction(3, 2), Fraction(2)]) for _ in range(n_sites)]
        if prod(2 * s + 1 for s in spins) <= 250:
            break
    edges = {(rng.randrange(i), i) for i in range(1, n_sites)}  # a random tree ...
    edges |= {tuple(sorted(rng.sample(range(n_sites), 2))) for _ in range(rng.randint(0, n_sites))}  # ... plus loops
    bonds = []
    for u, v in sorted(edges):
        jxy = Fraction(rng.randint(-6, 6), rng.randint(1, 5))
        jz = jxy + Fraction(rng.choice([-1, 1]) * rng.randint(1, 6), rng.randint(1, 4))
        bonds.append((u, v, jxy, jz))
    anisotropy = tuple(Fraction(rng.randint(-4, 4), rng.randint(1, 3)) if s >= 1 else Fraction(0) for s in spins)
    return ClusterHamiltonian(spins=tuple(spins), bonds=tuple(bonds), anisotropy=anisotropy)


@pytest.mark.parametrize("seed", range(8))
def test_random_cluster_matches_dense_diagonalisation(seed):
    # Independent computation: full float64 diagonalisation of the Kronecker-product Hamiltonian.
    ham = random_cluster(random.Random(seed))
    exact = cluster_cumulants(ham, 8)
    dense = dense_cumulants_float(ham, 8)
    for name in ("lnz", "m2", "m4"):
        exact_series, dense_series = getattr(exact, name), getattr(dense, name)
        scale = max(abs(float(c)) for c in exact_series)
        for n, (a, b) in enumerate(zip(exact_series, dense_series)):
            # 1e-10 relative; coefficients that cancel to nearly zero get an absolute floor of 1e-13 x the
            # series' largest coefficient (float round-off of the moments, common practice)
            assert isclose(float(a), b, rel_tol=1e-10, abs_tol=1e-13 * scale), (name, n, float(a), b)


@pytest.mark.parametrize("seed", range(8))
def test_spectral_bound_exceeds_every_eigenvalue(seed):
    # The number of primes rests on |eigenvalue of scale * H0| <= spectral_bound; check it on float spectra.
    ham = random_cluster(random.Random(seed))
    couplings = integer_couplings(ham)
    largest = max(np.abs(energies).max() for energies in cluster_spectrum(ham).values())
    assert couplings.scale * largest <= couplings.spectral_bound * (1 + 1e-12)


def sympy_hamiltonian(ham: ClusterHamiltonian):
    """H0 and M as exact sympy matrices in the physical product basis (sqrt matrix elements of S^+)."""
    local = []
    for s in ham.spins:
        t = int(2 * s)
        raising = sp.zeros(t + 1, t + 1)
        for k in range(t):
            raising[k + 1, k] = sp.sqrt((t - k) * (k + 1))  # <m+1|S^+|m> = sqrt((S-m)(S+m+1)), k = S + m
        local.append((sp.diag(*[sp.Rational(k) - sp.Rational(s) for k in range(t + 1)]), raising))

    def embedded(factors):
        result = sp.Matrix([[1]])
        for site, s in enumerate(ham.spins):
            result = kronecker_product(result, factors.get(site, sp.eye(int(2 * s) + 1)))
        return result

    dim = prod(int(2 * s) + 1 for s in ham.spins)
    hamiltonian = sp.zeros(dim, dim)
    for u, v, jxy, jz in ham.bonds:
        (zu, pu), (zv, pv) = local[u], local[v]
        hamiltonian += sp.Rational(jz) * embedded({u: zu, v: zv})
        hamiltonian += sp.Rational(jxy) / 2 * (embedded({u: pu, v: pv.T}) + embedded({u: pu.T, v: pv}))
    for site, d in enumerate(ham.anisotropy):
        hamiltonian += sp.Rational(d) * embedded({site: local[site][0] ** 2})
    magnetization = sum((embedded({site: z}) for site, (z, _) in enumerate(local)), sp.zeros(dim, dim))
    return hamiltonian, magnetization


def sympy_operator_traces(ham: ClusterHamiltonian, order: int):
    """Tr(M^q H0^k), q = 0, 2, 4, k = 0..order, exactly."""
    hamiltonian, magnetization = sympy_hamiltonian(ham)
    traces = {q: [] for q in (0, 2, 4)}
    power = sp.eye(hamiltonian.rows)
    for _ in range(order + 1):
        for q in traces:
            value = sp.expand((magnetization**q * power).trace())
            assert value.is_Rational
            traces[q].append(value)
        power = (power * hamiltonian).applyfunc(sp.expand)
    return traces


TINY_MIXED_CLUSTER = ClusterHamiltonian(
    spins=(HALF, Fraction(1), Fraction(3, 2)),
    bonds=((0, 1, Fraction(1, 3), Fraction(-2)), (1, 2, Fraction(3, 5), Fraction(1, 7)), (0, 2, Fraction(-1, 2), 1)),
    anisotropy=(0, Fraction(2, 3), Fraction(-1, 4)),
)


@pytest.mark.parametrize(
    "ham",
    [
        TINY_MIXED_CLUSTER,
        # Denominators far beyond 64 bits exercise the arbitrary-precision path of the integer matrix.
        ClusterHamiltonian(
            spins=(Fraction(1), HALF, Fraction(1)),
            bonds=((0, 1, Fraction(1, 10**30 + 7), Fraction(3)), (1, 2, 1, Fraction(2, 10**20 + 1))),
            anisotropy=(Fraction(7, 10**25 + 3), 0, -1),
        ),
        # Ising bonds (Jxy = 0) with anisotropy: H0 is diagonal and the kernel sums its diagonal directly.
        ClusterHamiltonian(
            spins=(HALF, Fraction(1), Fraction(3, 2), Fraction(1)),
            bonds=((0, 1, 0, Fraction(-2)), (1, 2, 0, Fraction(1, 7)), (0, 2, 0, 1), (2, 3, 0, Fraction(5, 3))),
            anisotropy=(0, Fraction(2, 3), Fraction(-1, 4), Fraction(1, 2)),
        ),
    ],
    ids=["mixed-spins", "huge-denominators", "ising-diagonal"],
)
def test_tiny_cluster_matches_exact_sympy_traces(ham):
    order = 6
    traces = sympy_operator_traces(ham, order)
    sums = [
        SERIES_RING.from_dict({(k,): to_qq((-1) ** k * t / sp.factorial(k)) for k, t in enumerate(traces[q])})
        for q in (0, 2, 4)
    ]
    expected = cumulants_from_partition_sums(*sums, order)
    result = cluster_cumulants(ham, order)
    assert [result.lnz, result.m2, result.m4] == expected


def test_only_ising_sectors_take_the_diagonal_sum():
    ising = ClusterHamiltonian(spins=(HALF,) * 4, bonds=tuple((u, v, 0, 1) for u, v in ring_edges(4)))
    xxz = ClusterHamiltonian(spins=(HALF,) * 4, bonds=tuple((u, v, Fraction(1, 5), 1) for u, v in ring_edges(4)))
    for ham, diagonal in ((ising, True), (xxz, False)):
        couplings = integer_couplings(ham)
        for sector in spin_sectors(ham.twice_spins, nonnegative_only=True):
            found = _diagonal_entries(integer_sector_matrix(sector, couplings))
            assert (found is not None) == (diagonal or sector.dim == 1)


def test_sector_spectra_match_exact_sector_traces():
    # Each sector's eigenvalues E satisfy sum E^k = Tr(P_m H0^k), P_m the projector on S^z_total = m (exact sympy).
    hamiltonian, magnetization = sympy_hamiltonian(TINY_MIXED_CLUSTER)
    spectrum = cluster_spectrum(TINY_MIXED_CLUSTER)
    assert sorted(spectrum) == sorted({Fraction(str(m)) for m in magnetization.diagonal()})
    power = sp.eye(hamiltonian.rows)
    for k in range(4):
        for m, energies in spectrum.items():
            projector = sp.diag(*[1 if Fraction(str(x)) == m else 0 for x in magnetization.diagonal()])
            expected = float(sp.expand((projector * power).trace()))
            assert isclose(float(np.sum(energies**k)), expected, rel_tol=1e-12, abs_tol=1e-12), (k, m)
        power = (power * hamiltonian).applyfunc(sp.expand)


def test_sector_traces_match_python_integer_matrix_powers():
    # The modular kernel with gauge weights against plain Python-integer powers of the same integer matrix.
    ham = ClusterHamiltonian(
        spins=(Fraction(3, 2), Fraction(1), HALF, Fraction(2)),
        bonds=((0, 1, 2, Fraction(-1, 3)), (1, 2, Fraction(1, 2), 1), (2, 3, -1, 2), (3, 0, Fraction(5, 7), 0)),
        anisotropy=(1, Fraction(-1, 2), 0, Fraction(3, 2)),
    )
    order = 9
    sector = spin_sectors(ham.twice_spins, nonnegative_only=True)[0]
    matrix = integer_sector_matrix(sector, integer_couplings(ham))
    dense = np.zeros((sector.dim, sector.dim), dtype=object)
    for row in range(sector.dim):
        for e in range(matrix.indptr[row], matrix.indptr[row + 1]):
            dense[row, matrix.indices[e]] += int(matrix.values[e])
    expected, power = [], np.identity(sector.dim, dtype=int).astype(object)
    for _ in range(order + 1):
        expected.append(int(np.trace(power)))
        power = power.dot(dense)
    assert max(abs(t) for t in expected) > 2**90  # needs four primes: Chinese remaindering is exercised
    primes = primes_below(26, 12)
    residues = []
    for prime in primes:
        row_weight, column_weight = (w.astype(float) for w in gauge_weights_mod(sector, ham.twice_spins, prime))
        values = symmetric_residues(matrix.values, prime)
        columns = np.arange(sector.dim)
        residues.append(
            power_traces_mod(matrix.indptr, matrix.indices, values, row_weight, columns, column_weight, order, prime, 5)
        )
    assert [crt_signed([int(r[k]) for r in residues], primes) for k in range(order + 1)] == expected


# ------------------------------------------------------------------------------------------- symmetry
def symmetric_clusters() -> dict[str, ClusterHamiltonian]:
    third = Fraction(1, 3)
    return {
        "ring-8": heisenberg([HALF] * 8, ring_edges(8)),
        "xxz-ring-6-spin-1": ClusterHamiltonian(
            spins=(Fraction(1),) * 6,
            bonds=tuple((u, v, third, -1) for u, v in ring_edges(6)),
            anisotropy=(Fraction(1, 2),) * 6,
        ),
        # alternating couplings: only the rotations by two sites and some reflections survive
        "alternating-ring-6": ClusterHamiltonian(
            spins=(HALF,) * 6, bonds=tuple((u, v, 1 + (u % 2), 1 + (u % 2)) for u, v in ring_edges(6))
        ),
        # a star: 7! automorphisms, the search stops at its limit
        "star-7-mixed": ClusterHamiltonian(
            spins=(Fraction(3, 2),) + (HALF,) * 7, bonds=tuple((0, leaf, third, 2) for leaf in range(1, 8))
        ),
        # mirror-symmetric spins and D, with one bond that breaks the mirror symmetry
        "broken-path": ClusterHamiltonian(
            spins=(HALF, Fraction(1), Fraction(1), HALF),
            bonds=((0, 1, 1, 1), (1, 2, 1, 1), (2, 3, 1, Fraction(6, 5))),
            anisotropy=(0, third, third, 0),
        ),
    }


@pytest.mark.parametrize("name", list(symmetric_clusters()))
def test_symmetry_reduced_traces_equal_full_traces(name):
    # Independent check: the same exact traces with every unit vector propagated (no symmetry used).
    ham = symmetric_clusters()[name]
    assert _integer_power_traces(ham, 10, use_symmetry=True) == _integer_power_traces(ham, 10, use_symmetry=False)


def test_site_automorphisms_of_rings():
    # The dihedral group of an N-ring has 2N elements (common practice); alternating couplings keep N of them.
    clusters = symmetric_clusters()
    assert len(site_automorphisms(clusters["ring-8"])) == 2 * 8 - 1  # identity excluded
    assert len(site_automorphisms(clusters["alternating-ring-6"])) == 6 - 1
    assert site_automorphisms(clusters["broken-path"]) == []
    assert len(site_automorphisms(clusters["star-7-mixed"], limit=10)) == 10


def test_state_orbits_partition_the_sector():
    ham = symmetric_clusters()["ring-8"]
    for sector in spin_sectors(ham.twice_spins, nonnegative_only=True):
        representatives, sizes = state_orbits(sector, ham.twice_spins, site_automorphisms(ham))
        assert sizes.sum() == sector.dim
        # orbit sizes divide the group order: 16 (dihedral), times 2 with the spin flip at m = 0
        assert all((32 if sector.twice_magnetization == 0 else 16) % size == 0 for size in sizes)


# --------------------------------------------------------------------------------------- helpers, errors
def test_is_prime_agrees_with_sympy():
    numbers = list(range(3000)) + [2**26 - k for k in range(200)] + [25326001]  # 25326001: strong pseudoprime
    assert [is_prime(n) for n in numbers] == [sp.isprime(n) for n in numbers]  # to bases 2, 3, 5 (from memory)
    with pytest.raises(ValueError, match="deterministic only"):
        is_prime(3_215_031_751)


@pytest.mark.parametrize("row_length, entry, dimension", [(14, 3, 1716), (40, 2**40, 10), (4, 5, 2**30)])
def test_prime_size_keeps_every_partial_sum_exact_in_float64(row_length, entry, dimension):
    # Exactness of float64 integers below 2**52 (IEEE 754 double: 53-bit significand; common practice).
    bits = prime_bits_for(row_length, entry, dimension)
    p = 2**bits
    assert row_length * min(entry, p // 2) * p < 2**52 and dimension * p < 2**52
    if bits < 26:  # and it is the largest such size
        p = 2 ** (bits + 1)
        assert row_length * min(entry, p // 2) * p >= 2**52 or dimension * p >= 2**52


def test_crt_signed_recovers_signed_integers():
    rng = random.Random(5)
    primes = primes_below(26, 4)
    for _ in range(200):
        value = rng.randrange(-(prod(primes) // 2) + 1, prod(primes) // 2)
        assert crt_signed([value % p for p in primes], primes) == value


def test_single_site_with_anisotropy():
    # One spin 1 with D (S^z)^2: Z = 1 + 2 e^{-beta D}, <M^2> = 2 e^{-beta D} / Z (two-level algebra, common practice).
    beta = sp.Symbol("beta")
    d = sp.Rational(3, 4)
    result = cluster_cumulants(ClusterHamiltonian(spins=(Fraction(1),), bonds=(), anisotropy=(Fraction(3, 4),)), 8)
    assert result.lnz == sympy_coefficients(sp.log((1 + 2 * sp.exp(-beta * d)) / 3), beta, 8)
    assert result.m2 == sympy_coefficients(2 * sp.exp(-beta * d) / (1 + 2 * sp.exp(-beta * d)), beta, 8)


def test_inputs_are_normalised_to_fractions():
    ham = ClusterHamiltonian(spins=("1/2", 1), bonds=((0, 1, 1, "-3/2"),), anisotropy=(0, "1/3"))
    assert ham.spins == (HALF, Fraction(1))
    assert ham.bonds == ((0, 1, Fraction(1), Fraction(-3, 2)),)
    assert ham.anisotropy == (Fraction(0), Fraction(1, 3))


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"spins": (Fraction(3, 4),), "bonds": ()}, r"spins\[0\] = 3/4: a spin must be a positive multiple of 1/2"),
        ({"spins": (0,), "bonds": ()}, r"spins\[0\] = 0: a spin must be a positive multiple"),
        ({"spins": (), "bonds": ()}, "spins is empty"),
        ({"spins": (HALF, HALF), "bonds": ((0, 2, 1, 1),)}, r"bonds\[0\] = .*: vertex 2 is not one of 0..1"),
        ({"spins": (HALF, HALF), "bonds": ((1, 1, 1, 1),)}, r"bonds\[0\] .*joins two different vertices"),
        ({"spins": (HALF, HALF), "bonds": ((0, 1, 1),)}, r"bonds\[0\] .*expected a tuple \(u, v, Jxy, Jz\)"),
        ({"spins": (HALF, HALF), "bonds": ((0, 1, 0.2, 1),)}, r"bonds\[0\] Jxy = 0.2: expected an exact rational"),
        ({"spins": (HALF, HALF), "bonds": (), "anisotropy": (1,)}, "anisotropy has 1 entries for 2 vertices"),
    ],
)
def test_malformed_cluster_raises_parameter_error(kwargs, message):
    with pytest.raises(ParameterError, match=message):
        ClusterHamiltonian(**kwargs)


def test_bad_order_and_oversized_dense_reference_are_refused():
    dimer = heisenberg([HALF, HALF], [(0, 1)])
    with pytest.raises(ParameterError, match="order = -1: the series order must be an integer >= 0"):
        cluster_cumulants(dimer, -1)
    with pytest.raises(ResourceLimitError, match="16384 states"):
        dense_cumulants_float(heisenberg([HALF] * 14, ring_edges(14)), 2)
