"""The bridge factorisation (hte.bridge_factorisation) against brute-force linked weights.

Convention: H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D_i (S^z_i)^2 - h M, k_B = g mu_B = 1.  For every
graph class with E = order bonds and at least one bridge, every class with E = order - 1 bonds and at least two
bridges, and every class with E = order - 2 bonds and a bridge between two other bridges, the factorised weight
(no diagonalisation of the graph, rooted linked weights of its parts) must equal exactly the weight found by
diagonalising the graph and all its subgraphs and subtracting (hte.weight_book.WeightBook without the
factorisation): an independent route through the exact kernel.
"""

from __future__ import annotations

from fractions import Fraction

import pytest

from hte.bridge_factorisation import (
    RootedWeights,
    factorisable,
    factorised_weight,
    rooted_valued,
    split_at_best_bridge,
    split_for_excess_two,
    split_for_second_order,
)
from hte.clusters import enumerate_clusters
from hte.exact import QUANTITIES
from hte.lattice_file import load_lattice
from hte.rooted_series import rooted_cluster_series
from hte.valued_graph import hamiltonian_of, make_valued, site_graph
from hte.weight_book import WeightBook

HALF = Fraction(1, 2)


def _lattice_graphs(name: str, order: int, spin, couplings: dict, anisotropy) -> list:
    """Valued graphs of every cluster class of `name` up to `order` bonds, with the given (Jxy, Jz) per label."""
    spec = load_lattice(name)
    spec = spec.without_labels([label for label in spec.labels if label not in couplings])
    census = enumerate_clusters(spec, order)
    value = (Fraction(spin), Fraction(anisotropy))
    return [make_valued(c.n_sites, [value] * c.n_sites,
                        [(u, v, couplings[spec.labels[col]]) for u, v, col in c.graph.edges])
            for c in census.classes] + [site_graph(value)]


def _add_rooted(rooted: RootedWeights, graphs, order: int) -> None:
    for vg in graphs:
        if any(rooted_valued(vg, v).key not in rooted.series for v in range(vg.graph.n_vertices)):
            _, series = rooted_cluster_series(hamiltonian_of(vg), order)
            rooted.add(vg, series.u1, series.u3)


def _compare(name: str, order: int, spin=HALF, couplings=None, anisotropy=0) -> dict:
    """Assert factorised == brute-force weight for every factorisable class (top order with a bridge, one bond
    below with two bridges, two bonds below with a bridge between two others), and that each of the three levels
    had classes with nonzero m2 and m4 at beta^order; return how many were checked per bond count."""
    couplings = couplings or {"J1": (Fraction(1), Fraction(1))}
    graphs = _lattice_graphs(name, order, spin, couplings, anisotropy)
    brute = WeightBook(order, bridge_factorisation=False)
    brute.ensure_raw(graphs)
    rooted = RootedWeights(order)
    _add_rooted(rooted, [vg for vg in graphs if vg.graph.n_edges < order], order)
    chosen = [vg for vg in graphs if factorisable(vg.graph, order)]
    checked, nonzero = {}, {}
    for vg in chosen:
        _add_rooted(rooted, rooted.needed_for(vg), order)  # parts with a scaled bond are not lattice clusters
        factorised = factorised_weight(vg, order, rooted)
        reference = brute.weight(vg.key)
        assert {q: reference[q] for q in QUANTITIES} == factorised, vg.key
        e = vg.graph.n_edges
        checked[e] = checked.get(e, 0) + 1
        nonzero[e] = nonzero.get(e, 0) + (factorised["m2"][order] != 0 and factorised["m4"][order] != 0)
    # every level was met, and for each the comparison is not between zeros only
    assert set(checked) == {order, order - 1, order - 2} and all(nonzero.values()), (checked, nonzero)
    return checked


@pytest.mark.parametrize("name, order", [("chain", 10), ("square", 8), ("kagome", 8), ("honeycomb", 8),
                                         ("triangular", 7)])
def test_heisenberg_spin_half_lattices(name, order):
    checked = _compare(name, order)
    assert checked[order] >= 1 and checked[order - 1] >= 1 and checked[order - 2] >= 1


def test_spin_one_square():
    _compare("square", 7, spin=1)


def test_xxz_kagome_with_ferromagnetic_ising_part():
    _compare("kagome", 7, couplings={"J1": (Fraction(1, 2), Fraction(-3, 2))})


def test_single_ion_anisotropy_spin_one_honeycomb():
    # D enters the rooted series of the halves (and of a single site, whose u_1 = <(S^z)^2> is then a series)
    _compare("honeycomb", 7, spin=1, couplings={"J1": (Fraction(1), Fraction(2, 3))}, anisotropy=Fraction(3, 4))


def test_two_coupling_values_on_the_square_lattice():
    # J1 and J2 bonds: the bridge may be either kind, the halves carry both
    _compare("square", 6, couplings={"J1": (Fraction(1), Fraction(1)), "J2": (Fraction(-1, 3), Fraction(1, 2))})


def test_chain_bond_and_path_by_hand():
    # Spin-1/2 Heisenberg chain, worked out in the module docstring: the bond's m2 weight starts with -beta/8
    # (-2 Jz U1(site)^2, U1(site) = S(S+1)/3 = 1/4), the 2-bond path's with +beta^2/32 = -2 (1/4)(-1/16), where
    # -1/16 = -Tr(S^z_b S^z_c S_b.S_c)/4 is the beta term of <S^z_b S^z_c> on the bond.
    j = (Fraction(1), Fraction(1))
    site = site_graph((HALF, Fraction(0)))
    bond = make_valued(2, [(HALF, Fraction(0))] * 2, [(0, 1, j)])
    path = make_valued(3, [(HALF, Fraction(0))] * 3, [(0, 1, j), (1, 2, j)])
    for order, pieces, graph, expected in ((1, [site], bond, [0, Fraction(-1, 8)]),
                                           (2, [site, bond], path, [0, 0, Fraction(1, 32)])):
        rooted = RootedWeights(order)
        for vg in pieces:
            _, series = rooted_cluster_series(hamiltonian_of(vg), order)
            rooted.add(vg, series.u1, series.u3)
        assert factorised_weight(graph, order, rooted)["m2"] == expected


def test_the_most_balanced_bridge_is_chosen():
    # A path of 5 bonds: the middle bridge leaves halves of 2 bonds each
    j = (Fraction(1), Fraction(1))
    path = make_valued(6, [(HALF, Fraction(0))] * 6, [(k, k + 1, j) for k in range(5)])
    half_a, half_b, jz = split_at_best_bridge(path, 5)
    assert (half_a.graph.n_edges, half_b.graph.n_edges, jz) == (2, 2, 1)


def test_second_order_parts_of_a_path():
    # Path 0-1-2-3-4-5: b1 is the middle bond (2, 3); of the other bridges, (1, 2) and (3, 4) leave 3 bonds on
    # b1's side, (1, 2) comes first.  A' = path 2-3-4-5 rooted at 2, the same with bond (2, 3) doubled, B' = 0-1.
    j = (Fraction(1), Fraction(1))
    path = make_valued(6, [(HALF, Fraction(0))] * 6, [(k, k + 1, j) for k in range(5)])
    near, doubled, far, jz = split_for_second_order(path, 6)
    assert (near.graph.n_edges, doubled.graph.n_edges, far.graph.n_edges, jz) == (3, 3, 1, 1)
    assert sorted(doubled.edge_values) == [j, (Fraction(2), Fraction(2))] and near.edge_values == (j,)
    assert all(factorisable(path.graph, order) for order in (5, 6, 7)) and not factorisable(path.graph, 8)
    # a triangle with one pendant bond has a single bridge: factorisable at the top order only
    tadpole = make_valued(4, [(HALF, Fraction(0))] * 4, [(0, 1, j), (1, 2, j), (2, 0, j), (2, 3, j)])
    assert factorisable(tadpole.graph, 4) and not factorisable(tadpole.graph, 5)


def test_two_below_the_top_order_needs_a_bridge_between_two_others():
    # Three bridges are not enough: in a star of three bonds, or a triangle with three pendant bonds, no bridge
    # separates two others, so at E = order - 2 the graph is diagonalised; a path of three bonds, or a triangle
    # with a pendant path of three bonds, has one (module docstring, point 7).
    j = (Fraction(1), Fraction(1))
    star = make_valued(4, [(HALF, Fraction(0))] * 4, [(0, 1, j), (0, 2, j), (0, 3, j)])
    path = make_valued(4, [(HALF, Fraction(0))] * 4, [(0, 1, j), (1, 2, j), (2, 3, j)])
    assert not factorisable(star.graph, 5) and factorisable(star.graph, 4) and factorisable(star.graph, 3)
    assert factorisable(path.graph, 5) and not factorisable(path.graph, 6)
    triangle = [(0, 1, j), (1, 2, j), (2, 0, j)]
    spiky = make_valued(6, [(HALF, Fraction(0))] * 6, triangle + [(0, 3, j), (1, 4, j), (2, 5, j)])
    tailed = make_valued(6, [(HALF, Fraction(0))] * 6, triangle + [(0, 3, j), (3, 4, j), (4, 5, j)])
    assert not factorisable(spiky.graph, 8) and factorisable(spiky.graph, 7)
    assert factorisable(tailed.graph, 8)
    # the most balanced bridge of the path, the middle one, separates the other two, so b1 is an end bond there
    assert [part.graph.n_edges for part in split_at_best_bridge(path, 5)[:2]] in ([0, 2], [2, 0])
    assert [part.graph.n_edges for part in split_at_best_bridge(path, 4)[:2]] == [1, 1]


def test_path_of_three_bonds_two_below_the_top_order_equals_brute_force():
    # Spin 1 with single-ion anisotropy and three different XXZ bonds: beta^5 of the 3-bond path has degree 5 in
    # the couplings and D, so all three parts of point 7 (and D in the linear ones) enter.
    one = (Fraction(1), Fraction(3, 4))
    path = make_valued(4, [one] * 4, [(0, 1, (Fraction(1), Fraction(1))), (1, 2, (Fraction(1, 2), Fraction(-3, 2))),
                                      (2, 3, (Fraction(2), Fraction(1, 3)))])
    rooted = RootedWeights(5)
    _add_rooted(rooted, rooted.needed_for(path), 5)
    brute = WeightBook(5, bridge_factorisation=False)
    brute.ensure_weights([path])
    factorised = factorised_weight(path, 5, rooted)
    assert {q: brute.weight(path.key)[q] for q in QUANTITIES} == factorised
    assert factorised["m2"][5] != 0 and factorised["m4"][5] != 0


def test_random_graphs_with_mixed_spins_two_below_the_top_order():
    # Random trees with up to one extra bond, spins 1/2 and 1 mixed, random D, Jxy (zero and negative too) and Jz:
    # each factorisable graph of E = order - 2 bonds gets the brute-force weight.
    import random

    rng = random.Random(3)
    checked = 0
    while checked < 12:
        n = rng.randint(4, 7)
        bonds = {tuple(sorted((v, rng.randrange(v)))) for v in range(1, n)}
        bonds.add(tuple(sorted(rng.sample(range(n), 2))))
        spins = [(Fraction(rng.randint(1, 2), 2), Fraction(rng.randint(0, 1), rng.randint(1, 3))) for _ in range(n)]
        couplings = [(Fraction(rng.randint(-2, 2)), Fraction(rng.randint(1, 3), rng.randint(1, 2))) for _ in bonds]
        vg = make_valued(n, spins, [(u, v, j) for (u, v), j in zip(sorted(bonds), couplings)])
        order = len(bonds) + 2
        if order > 8 or not factorisable(vg.graph, order):
            continue
        rooted = RootedWeights(order)
        _add_rooted(rooted, rooted.needed_for(vg), order)
        brute = WeightBook(order, bridge_factorisation=False)
        brute.ensure_weights([vg])
        factorised = factorised_weight(vg, order, rooted)
        assert {q: brute.weight(vg.key)[q] for q in QUANTITIES} == factorised, vg.key
        assert factorised["m2"][order] != 0
        checked += 1


def test_excess_two_parts_of_a_path():
    # Path of bonds 0..6, order 9: the cost 2 * 2^E_A2 + 2^E_A3 + 2^E_B3 of the triples (b1, b2, b3) is least,
    # 2 * 8 + 4 + 16, for b3 = bond 2 and b2 = bond 3 with b1 = bond 0 or 1 (or their mirror images): A2 = bonds
    # 0-2, B2 = bonds 4-6, A3 = bonds 0-1, B3 = bonds 3-6.
    j = (Fraction(1), Fraction(1))
    path = make_valued(8, [(HALF, Fraction(0))] * 8, [(k, k + 1, j) for k in range(7)])
    parts = split_for_excess_two(path, 9)
    assert [r.graph.n_edges for r in parts.rooted_graphs()] == [3, 3, 3, 3, 2, 2, 4, 4]
    assert (parts.jz_second, parts.jz_third) == (1, 1)
    for scaled, factor in ((parts.near[1], 2), (parts.near[2], 3), (parts.first_side[1], 2),
                           (parts.second_side[1], 2)):
        assert sorted(scaled.edge_values) == [j, (Fraction(factor), Fraction(factor))]
    assert parts.near[0].edge_values == parts.first_side[0].edge_values == parts.second_side[0].edge_values == (j,)


@pytest.mark.slow
@pytest.mark.parametrize("name, order", [("square", 10), ("kagome", 10), ("triangular", 9), ("honeycomb", 11)])
def test_heisenberg_spin_half_lattices_higher_orders(name, order):
    checked = _compare(name, order)
    assert checked[order] >= 1 and checked[order - 1] >= 1 and checked[order - 2] >= 1


# ------------------------------------------------------------------------------------------ integration
def test_lattice_runs_with_and_without_the_factorisation_agree_and_the_cache_keeps_rooted_series(tmp_path):
    from hte.cache import WeightCache
    from hte.expansion import expand_lattice
    from hte.models import build_model

    spec = load_lattice("kagome")
    model = build_model(spec)
    without = expand_lattice(spec, model, 8, bridge_factorisation=False)
    with WeightCache(tmp_path) as cache:
        factorised = expand_lattice(spec, model, 8, cache=cache)
        again = expand_lattice(spec, model, 8, cache=cache)
    assert factorised.terms == without.terms == again.terms
    assert factorised.stats["graphs_factorised"] > 0
    assert factorised.stats["cluster_series_computed"] < without.stats["cluster_series_computed"]
    assert again.stats["cluster_series_computed"] == 0  # raw and rooted series both came from the cache


def test_cache_rows_without_rooted_series_are_completed(tmp_path):
    # A cache filled by a run without the factorisation has no rooted rows: the smaller graphs are recomputed
    # with their rooted series and the result is unchanged.
    from hte.cache import WeightCache
    from hte.expansion import expand_lattice
    from hte.models import build_model

    spec = load_lattice("square")
    model = build_model(spec, spin="1")
    with WeightCache(tmp_path) as cache:
        without = expand_lattice(spec, model, 6, cache=cache, bridge_factorisation=False)
        factorised = expand_lattice(spec, model, 6, cache=cache)
    assert factorised.terms == without.terms
    assert factorised.stats["cluster_series_computed"] > 0


def test_rooted_rows_of_every_site_written_by_earlier_versions_are_read(tmp_path):
    # Earlier versions cached the rooted series of every site of a graph in one "rooted-v1" row; with only such
    # rows (the per-class "rooted-v2" rows removed) a second run computes nothing and gets the same weights.
    import json

    from hte.cache import WeightCache
    from hte.weight_book import ALL_SITES_ROOTED_FORMAT, ROOTED_CACHE_FORMAT

    order = 7
    graphs = _lattice_graphs("kagome", order, HALF, {"J1": (Fraction(1), Fraction(1))}, 0)
    with WeightCache(tmp_path) as cache:
        first = WeightBook(order, cache=cache)
        first.ensure_weights(graphs)
        assert first.factorised_count > 0 and first.rooted_wanted
        rows = []
        for key in first.rooted_wanted:
            vg = first.valued[key]
            _, series = rooted_cluster_series(hamiltonian_of(vg), order)
            rows.append((f"{ALL_SITES_ROOTED_FORMAT}|order={order}|{key}",
                         json.dumps({u: [[str(x) for x in getattr(series, u)[v]] for v in range(vg.graph.n_vertices)]
                                     for u in ("u1", "u3")})))
        assert cache.prune(ROOTED_CACHE_FORMAT) > 0
        cache.put_many(rows)
        second = WeightBook(order, cache=cache)
        second.ensure_weights(graphs)
    assert second.computed == 0
    assert all(second.weight(vg.key) == first.weight(vg.key) for vg in graphs if not first.negligible(vg))


def test_symbolic_demo_lattice_agrees_with_and_without_the_factorisation():
    # The demo's layered kagome, symbolic in J1, Jd, Jperp and the interlayer occupation: the factorised top
    # classes are evaluated at interpolation points like any other class.
    from hte.expansion import expand_lattice
    from hte.models import build_model

    spec = load_lattice("kagome-layered")
    model = build_model(spec, couplings={"J2": "0"}, occupation={"interlayer": "p"}, symbolic=True)
    factorised = expand_lattice(spec, model, 4)
    without = expand_lattice(spec, model, 4, bridge_factorisation=False)
    assert factorised.terms == without.terms
    assert factorised.stats["graphs_factorised"] > 0


def _equals_shipped_table(name: str, order: int) -> None:
    # The shipped tables (tables/*.json) were computed before the factorisation existed, by diagonalising
    # every graph; a cold run must reproduce them exactly.
    from hte.series import compute_series

    computed = compute_series(name, order=order, workers=2)
    table = compute_series(name, order=order, use_tables=True)
    assert table.provenance, "no shipped table answered the request"
    assert computed.stats["graphs_factorised"] > 0
    for quantity, coefficients in table.coefficients.items():
        assert computed.coefficients[quantity] == coefficients, quantity


@pytest.mark.parametrize("name, order", [("chain", 12), ("square", 8), ("kagome", 8)])
def test_cold_runs_reproduce_the_shipped_tables(name, order):
    _equals_shipped_table(name, order)


@pytest.mark.slow
@pytest.mark.parametrize("name, order", [("chain", 16), ("square", 10), ("kagome", 10)])
def test_cold_runs_reproduce_the_shipped_tables_at_their_orders(name, order):
    _equals_shipped_table(name, order)


def test_rooted_series_of_a_graph_whose_own_weights_vanish_are_still_computed():
    # A windmill of four triangles at one centre with a pendant bond there: 13 bonds, one bridge, so at order 13
    # with ln Z and T chi (two insertions) its T chi weight factorises across the bridge.  The half with the
    # windmill has as a rooted subgraph the star of its eight spokes; the star's own weights start at
    # beta^(2*8 - 2) = beta^14 (every bond a bridge, one path of two spokes covered), so they vanish to this order,
    # yet its rooted series enters the linked rooted weight of the half.  Exact identity: the factorised weight
    # must equal the one found by diagonalising the graph and subtracting all its subgraphs.
    j = (Fraction(1), Fraction(1))
    windmill = [(0, a, j) for a in range(1, 9)] + [(a, a + 1, j) for a in (1, 3, 5, 7)]
    graph = make_valued(10, [(HALF, Fraction(0))] * 10, windmill + [(0, 9, j)])
    quantities = ("lnz", "m2")
    book = WeightBook(13, quantities=quantities)
    book.ensure_weights([graph])
    assert book.factorised(graph)  # the route under test was taken
    brute = WeightBook(13, quantities=quantities, bridge_factorisation=False)
    brute.ensure_weights([graph])
    assert book.weight(graph.key)["m2"] == brute.weight(graph.key)["m2"]
    assert book.weight(graph.key)["m2"][13] != 0
