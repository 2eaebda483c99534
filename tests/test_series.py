"""Lattice series against independent routes: ring diagonalisation, total-spin closed forms, identities."""

from __future__ import annotations

import itertools
from fractions import Fraction

import numpy as np
import pytest
import sympy

from hte.lattice_file import builtin_lattices, load_lattice
from hte.series import compute_series

# ------------------------------------------------------------------------------------------------ helpers


def _series_mul(a, b, order):
    out = [Fraction(0)] * (order + 1)
    for i, x in enumerate(a[: order + 1]):
        if x:
            for j, y in enumerate(b[: order + 1 - i]):
                out[i + j] += x * y
    return out


def _series_inv(a, order):
    out = [Fraction(0)] * (order + 1)
    out[0] = 1 / Fraction(a[0])
    for n in range(1, order + 1):
        out[n] = -sum(a[k] * out[n - k] for k in range(1, n + 1) if k < len(a)) / a[0]
    return out


def _series_log(a, order):
    """log of a power series with a[0] = 1 (exact)."""
    d = [k * a[k] for k in range(1, order + 1)] + [Fraction(0)]  # derivative
    q = _series_mul(d, _series_inv(a, order), order)
    return [Fraction(0)] + [q[n - 1] / n for n in range(1, order + 1)]


def _boltzmann_average_series(levels, order):
    """Series in beta of sum_l g_l a_l exp(-beta e_l) / sum_l g_l exp(-beta e_l) for levels (g, e, a)."""
    num = [sum(Fraction(g) * a * Fraction(-e) ** n for g, e, a in levels) / _fact(n) for n in range(order + 1)]
    den = [sum(Fraction(g) * Fraction(-e) ** n for g, e, _ in levels) / _fact(n) for n in range(order + 1)]
    return _series_mul(num, _series_inv(den, order), order)


def _fact(n):
    out = 1
    for k in range(2, n + 1):
        out *= k
    return out


# ------------------------------------------------------------------------------------------------ chain vs rings


def _ring_sector_moments(length, kmax):
    """Exact Tr_m((4H)^k) for the spin-1/2 Heisenberg ring H = sum S_i.S_{i+1}, dense integer matrices.

    Independent of hte: states are bit strings, 4 S_i.S_j = 2 (swap) - 1 on antiparallel, +1 on parallel.
    """
    moments = {}
    for up in range(length + 1):
        states = [s for s in range(1 << length) if bin(s).count("1") == up]
        index = {s: i for i, s in enumerate(states)}
        a = np.zeros((len(states), len(states)), dtype=np.int64)
        for s in states:
            for i in range(length):
                j = (i + 1) % length
                bi, bj = (s >> i) & 1, (s >> j) & 1
                if bi == bj:
                    a[index[s], index[s]] += 1
                else:
                    a[index[s], index[s]] -= 1
                    a[index[s ^ (1 << i) ^ (1 << j)], index[s]] += 2
        power = np.eye(len(states), dtype=np.int64)
        traces = []
        for k in range(kmax + 1):
            traces.append(int(np.trace(power)))
            power = power @ a
        moments[Fraction(2 * up - length, 2)] = traces
    return moments


def _ring_series(length, order):
    """ln Z/L - ln 2 and T chi/L (g muB = 1) of the ring as exact series in beta."""
    moments = _ring_sector_moments(length, order)
    z = [Fraction(0)] * (order + 1)
    zm2 = [Fraction(0)] * (order + 1)
    for m, traces in moments.items():
        for k in range(order + 1):
            term = Fraction(traces[k]) * Fraction(-1, 4) ** k / _fact(k) / 2**length
            z[k] += term
            zm2[k] += m * m * term
    lnz = [c / length for c in _series_log(z, order)]
    chit = [c / length for c in _series_mul(zm2, _series_inv(z, order), order)]
    return lnz, chit


def test_heisenberg_chain_matches_exact_ring_diagonalisation():
    # Coefficients of beta^n with n < L do not depend on the ring length L (a cluster that wraps needs L bonds),
    # so a 10-site ring diagonalised exactly in integer arithmetic gives the infinite chain to order 9.
    lnz_ring, chit_ring = _ring_series(10, 9)
    s = compute_series("chain", order=9)
    assert s.coefficients["lnZ"][1:] == lnz_ring[1:]
    assert s.coefficients["chiT"] == chit_ring
    assert s.lnz0 == pytest.approx(np.log(2), abs=1e-15)


# ------------------------------------------------------------------------------------------------ closed forms


def _kambe_dimer(spin):
    """Levels (degeneracy, energy, <(S^z_T)^2>) of J S1.S2 with J = 1: E = [T(T+1) - 2X]/2 (Kambe 1950)."""
    x = spin * (spin + 1)
    levels = []
    for t2 in range(0, int(4 * spin) + 1, 2):
        t = Fraction(t2, 2)
        levels.append((2 * t + 1, (t * (t + 1) - 2 * x) / 2, t * (t + 1) / 3))
    return levels


def _kambe_path3(spin):
    """Levels of the 3-site path S_j.(S_i + S_k), J = 1: E = [T(T+1) - L(L+1) - X]/2, L = |S_i + S_k|."""
    x = spin * (spin + 1)
    levels = []
    for l2 in range(0, int(4 * spin) + 1, 2):
        l = Fraction(l2, 2)
        t = abs(l - spin)
        while t <= l + spin:
            levels.append((2 * t + 1, (t * (t + 1) - l * (l + 1) - x) / 2, t * (t + 1) / 3))
            t += 1
    return levels


SPINS = [Fraction(1, 2), Fraction(1), Fraction(3, 2), Fraction(2), Fraction(5, 2)]


@pytest.mark.parametrize("spin", SPINS, ids=str)
@pytest.mark.parametrize("name", builtin_lattices())
def test_first_coefficients_follow_curie_weiss_and_total_spin_closed_forms(name, spin):
    # Closed forms (Rushbrooke and Wood, Mol. Phys. 1, 257 (1958) give the general-S expansion; here each
    # coefficient is rebuilt from total-spin (Kambe) levels of a dimer and a 3-site path, independent of hte):
    #   T chi/N = X/3 - (X/3)^2 sum_j J_ij beta + [sum_b J_b^2 A(S) + sum_paths J_a J_b B(S)]/N beta^2 + ...
    #   ln Z/N  = ln(2S+1) + sum_b J_b^2 X^2/6 beta^2 / N + ...,  X = S(S+1)
    # (Curie-Weiss: T chi -> C T/(T - theta), theta = -X sum_j J_ij / 3 < 0 for antiferromagnets).
    spec = load_lattice(name)
    x = spin * (spin + 1)
    values = {label: Fraction(str(spec.couplings.get(label, 0))) for label in spec.labels}
    occupied = [i for i, s in enumerate(spec.sites) if Fraction(str(spec.occupation.get(s.site_class, 1))) == 1]
    assert len(occupied) + sum(
        1 for s in spec.sites if Fraction(str(spec.occupation.get(s.site_class, 1))) == 0) == spec.n_sites
    bonds = [b for b in spec.bonds if b.source in occupied and b.target in occupied and values[b.label]]
    n = spec.n_sites
    sum_j = sum(2 * values[b.label] for b in bonds)
    sum_j2 = sum(values[b.label] ** 2 for b in bonds)
    # pairs of distinct bonds meeting at a site (2-bond paths), per cell
    at_site = {i: [] for i in range(n)}
    for k, b in enumerate(bonds):
        at_site[b.source].append(k)
        at_site[b.target].append(k)
    sum_paths = sum(values[bonds[a].label] * values[bonds[c].label]
                    for ks in at_site.values() for a, c in itertools.combinations(ks, 2))

    site_m2 = x / 3
    dimer = _boltzmann_average_series(_kambe_dimer(spin), 2)
    a_coef = dimer[2]  # the single sites' constant X/3 does not reach beta^2
    path = _boltzmann_average_series(_kambe_path3(spin), 2)
    b_coef = path[2] - 2 * a_coef

    s = compute_series(name, order=2, spin=str(spin))
    chit = s.coefficients["chiT"]
    lnz = s.coefficients["lnZ"]
    assert chit[0] == Fraction(len(occupied), n) * site_m2
    assert chit[1] == -(site_m2**2) * sum_j / n
    assert chit[2] == (sum_j2 * a_coef + sum_paths * b_coef) / n
    assert lnz[1] == 0
    assert lnz[2] == sum_j2 * x**2 / 6 / n
    assert s.lnz0 == pytest.approx(len(occupied) / n * float(np.log(2 * float(spin) + 1)), rel=1e-15)


def test_dimer_weight_matches_bleaney_bowers():
    # chi = 2 beta / (3 + exp(beta J)) per dimer, H = +J S1.S2, g = muB = kB = 1; Bleaney and Bowers, Proc. R.
    # Soc. Lond. A 214, 451 (1952), write H = -2J' S1.S2, i.e. J' = -J/2.  T chi per dimer = 2/(3 + e^{beta J}).
    beta = sympy.Symbol("beta")
    closed = sympy.series(2 / (3 + sympy.exp(beta)), beta, 0, 9).removeO()
    expected = [Fraction(str(closed.coeff(beta, k))) for k in range(9)]
    levels = _kambe_dimer(Fraction(1, 2))
    assert _boltzmann_average_series(levels, 8) == expected


# ------------------------------------------------------------------------------------------------ identities


def test_symbolic_square_j1_j2_series_equals_numeric_runs():
    symbolic = compute_series("square", order=5, couplings={"J2": "J2"}, symbolic=True)
    numeric = compute_series("square", order=5, couplings={"J2": "3/10"})
    j1, j2 = sympy.Symbol("J1"), sympy.Symbol("J2")
    for name in ("lnZ", "chiT", "M4"):
        for n, expr in enumerate(symbolic.coefficients[name]):
            value = sympy.sympify(expr).subs({j1: 1, j2: sympy.Rational(3, 10)})
            assert Fraction(str(value)) == numeric.coefficients[name][n], (name, n)


def test_dilution_at_full_occupation_equals_undiluted_series():
    plain = compute_series("kagome", order=5)
    diluted = compute_series("kagome", order=5, occupation={"magnetic": "p"}, couplings={"J2": 0, "J3": 0},
                             symbolic=True)
    p = sympy.Symbol("p")
    j1 = sympy.Symbol("J1")
    for name in ("lnZ", "chiT"):
        for n in range(1, 6):
            value = sympy.sympify(diluted.coefficients[name][n]).subs({p: 1, j1: 1})
            assert Fraction(str(value)) == plain.coefficients[name][n]
    numeric = compute_series("kagome", order=5, occupation={"magnetic": "1"})
    assert numeric.coefficients == plain.coefficients


def test_site_dilution_weights_clusters_by_occupied_sites():
    # Quenched site dilution: a cluster with k sites survives with probability p^k (common practice).  The
    # beta^1 term of T chi (nearest-neighbour pairs, 2 sites) must therefore carry p^2 and the Curie term p.
    s = compute_series("square", order=2, occupation={"magnetic": "p"}, couplings={"J2": 0}, symbolic=True)
    p, j1 = sympy.Symbol("p"), sympy.Symbol("J1")
    assert sympy.simplify(sympy.sympify(s.coefficients["chiT"][0]) - p / 4) == 0
    assert sympy.simplify(sympy.sympify(s.coefficients["chiT"][1]) + p**2 * j1 / 4) == 0
    half = compute_series("square", order=4, occupation={"magnetic": "1/2"})
    symbolic = compute_series("square", order=4, occupation={"magnetic": "p"}, couplings={"J2": 0}, symbolic=True)
    for n in range(5):
        expected = sympy.sympify(symbolic.coefficients["chiT"][n]).subs({p: sympy.Rational(1, 2), j1: 1})
        assert Fraction(str(expected)) == half.coefficients["chiT"][n]


def test_empty_interlayer_class_leaves_the_kagome_planes():
    # kagome-layered with interlayer occupation 0 and no interplane coupling is a stack of independent kagome
    # planes: per unit cell it must equal the kagome lattice (the interlayer site only changes per-site counts).
    planes = compute_series("kagome-layered", order=6, per="cell", couplings={"Jd": 1},
                            occupation={"interlayer": 0})
    kagome = compute_series("kagome", order=6, per="cell")
    for name in ("lnZ", "chiT", "M4"):
        assert planes.coefficients[name][1:] == kagome.coefficients[name][1:]


def test_per_magnetic_site_divides_by_occupied_sites():
    cell = compute_series("kagome-layered", order=4, per="cell", couplings={"Jd": "1/2"},
                          occupation={"interlayer": "1/4"})
    magnetic = compute_series("kagome-layered", order=4, per="magnetic", couplings={"Jd": "1/2"},
                              occupation={"interlayer": "1/4"})
    occupied = 3 + Fraction(1, 4)
    assert magnetic.coefficients["chiT"] == [c / occupied for c in cell.coefficients["chiT"]]
    assert magnetic.coefficients["chiT"][0] == Fraction(1, 4)


def test_rational_coefficients_agree_with_float_route_to_1e12():
    # The exact kernel and the plain dense float diagonalisation of each cluster, through the same assembly.
    from hte.exact import QUANTITIES, dense_cumulants_float
    from hte.valued_graph import hamiltonian_of, make_valued
    from hte.weight_book import WeightBook

    book = WeightBook(order=7)
    half, one = (Fraction(1, 2), Fraction(0)), (Fraction(1), Fraction(1, 3))
    j, k = (Fraction(1), Fraction(1)), (Fraction(1, 2), Fraction(-3, 4))
    vg = make_valued(4, [half, half, one, half], [(0, 1, j), (1, 2, k), (2, 3, j), (3, 0, k)])
    book.ensure_raw([vg])
    dense = dense_cumulants_float(hamiltonian_of(vg), 7)
    for q in QUANTITIES:
        exact = [float(x) for x in book.raw[vg.key][q]]
        assert np.allclose(exact, getattr(dense, q), rtol=1e-12, atol=1e-12)


def test_linked_weights_vanish_below_their_bond_count():
    # Linked-cluster theorem: the weight of a connected graph with E bonds starts at beta^E (every bond must
    # appear); for ln Z at h = 0 each bridge must appear twice, so it starts at beta^(E + bridges).
    import networkx as nx

    from hte.valued_graph import make_valued
    from hte.weight_book import WeightBook

    rng = np.random.default_rng(7)
    book = WeightBook(order=7)
    for trial in range(6):
        n = int(rng.integers(3, 6))
        g = nx.connected_watts_strogatz_graph(n, 2, 0.5, seed=int(rng.integers(1000)))
        edges = [(u, v, (Fraction(int(rng.integers(1, 3))), Fraction(int(rng.integers(-2, 3))))) for u, v in g.edges]
        spins = [(Fraction(int(rng.integers(1, 3)), 2), Fraction(0)) for _ in range(n)]
        vg = make_valued(n, spins, edges)
        book.ensure_weights([vg])
        w = book.weight(vg.key)
        n_edges = g.number_of_edges()
        n_bridges = sum(1 for _ in nx.bridges(g))
        assert all(c == 0 for c in w["m2"][:n_edges])
        assert all(c == 0 for c in w["lnz"][: n_edges + n_bridges])
        assert any(c != 0 for c in w["m2"][n_edges:])


def test_lnz_alone_skips_bridged_graphs_and_agrees_with_the_full_run():
    # The bridge rule (each bridge appears at least twice in ln Z at h = 0) is an exact statement: asking for
    # ln Z alone must give the same coefficients while computing fewer cluster series.
    from hte.expansion import expand_lattice
    from hte.models import build_model

    spec = load_lattice("kagome")
    model = build_model(spec)
    full = expand_lattice(spec, model, 8)
    alone = expand_lattice(spec, model, 8, quantities=("lnz",))
    assert alone.terms["lnz"] == full.terms["lnz"]
    assert "m2" not in alone.terms
    assert alone.stats["cluster_series_computed"] < full.stats["cluster_series_computed"] / 3
