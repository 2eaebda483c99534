"""Where linked weights must vanish because of bridges (hte.vanishing_weights), and the census that uses it.

Convention: H = sum_b [Jxy (SxSx + SySy) + Jz SzSz] + sum_i D_i (S^z_i)^2 - h M, k_B = g mu_B = 1.  The rule: a
graph with E bonds and b bridges has ln Z, <M^2>_c and <M^4>_c weights that start at beta^(E + b - P_k), P_k the
largest T-join of its bridge tree with |T| <= k (k = 0, 2, 4 insertions of M).  Derivation in the module
docstring: a bridge used once factorises the trace into one-point functions <S^z> of the two sides, odd in the
field by the global spin flip (a fact of the trade: common practice in high-temperature expansions).  Checked
here against weights obtained by an independent route: Moebius inversion over all bond subsets of the graph,
W(G) = sum_{A subset of E} (-1)^(|E| - |A|) P(V, A), with P(V, A) the exact series of the (possibly
disconnected) cluster on all vertices with the bonds A, from the kernel alone (no subgraph catalogue, no weight
book, no bridge rule).
"""

from __future__ import annotations

import itertools
import json
import random
from fractions import Fraction

import networkx as nx
import pytest

from hte.cli import main
from hte.clusters import enumerate_clusters
from hte.exact import QUANTITIES, ClusterHamiltonian, cluster_cumulants
from hte.graph import ColouredGraph
from hte.lattice_file import load_lattice
from hte.vanishing_weights import INSERTIONS, insertions_for, lowest_order


def _random_connected_graph(rng: random.Random, n: int, extra: int) -> ColouredGraph:
    edges = {(rng.randrange(v), v) for v in range(1, n)}  # a random tree ...
    for _ in range(extra):  # ... and a few more edges
        u, v = sorted(rng.sample(range(n), 2))
        edges.add((u, v))
    perm = list(range(n))
    rng.shuffle(perm)
    return ColouredGraph(n, (0,) * n, tuple(sorted((min(perm[u], perm[v]), max(perm[u], perm[v]), 0)
                                                   for u, v in edges)))


def _brute_lowest_order(graph: ColouredGraph, k: int) -> int:
    """E + b - (most bridges with an odd number of the chosen <= k vertices on each side), by trying every set."""
    g = nx.Graph([(u, v) for u, v, _ in graph.edges])
    sides = []
    for u, v in nx.bridges(g):
        h = g.copy()
        h.remove_edge(u, v)
        sides.append(nx.node_connected_component(h, u))
    best = 0
    for size in range(0, k + 1, 2):
        for chosen in itertools.combinations(range(graph.n_vertices), size):
            best = max(best, sum(1 for side in sides if sum(1 for x in chosen if x in side) % 2))
    return graph.n_edges + len(sides) - best


def test_lowest_order_equals_a_brute_force_search_over_insertion_sites():
    rng = random.Random(11)
    for _ in range(300):
        graph = _random_connected_graph(rng, rng.randint(2, 9), rng.randint(0, 3))
        for k in (0, 2, 4):
            assert lowest_order(graph, k) == _brute_lowest_order(graph, k), (graph, k)


def test_lowest_order_of_small_trees_by_hand():
    path = ColouredGraph(4, (0,) * 4, ((0, 1, 0), (1, 2, 0), (2, 3, 0)))
    claw = ColouredGraph(4, (0,) * 4, ((0, 1, 0), (0, 2, 0), (0, 3, 0)))
    # path of 3 bonds: ln Z needs every bond twice (6), T chi covers it with one path (3)
    assert [lowest_order(path, k) for k in (0, 2, 4)] == [6, 3, 3]
    # claw: one path covers two arms (4); four insertions, on the three leaves and the centre, cover all (3)
    assert [lowest_order(claw, k) for k in (0, 2, 4)] == [6, 4, 3]
    assert insertions_for(("lnz",)) == 0 and insertions_for(("lnz", "m2")) == 2 and insertions_for(QUANTITIES) == 4


def _moebius_weights(n: int, spins, anisotropy, bonds, order: int) -> dict:
    """Linked weights of the connected graph by inclusion-exclusion over its bond subsets (module docstring)."""
    total = {q: [Fraction(0)] * (order + 1) for q in QUANTITIES}
    for size in range(len(bonds) + 1):
        for subset in itertools.combinations(bonds, size):
            series = cluster_cumulants(ClusterHamiltonian(spins=spins, bonds=subset, anisotropy=anisotropy), order)
            sign = -1 if (len(bonds) - size) % 2 else 1
            for q in QUANTITIES:
                total[q] = [a + sign * b for a, b in zip(total[q], getattr(series, q))]
    return total


def test_weights_vanish_below_the_lowest_order_and_reach_it():
    rng = random.Random(5)
    order = 7
    reached = {q: 0 for q in QUANTITIES}  # graphs whose weight is nonzero exactly at the predicted order
    m4_beyond_m2 = 0  # of which graphs where four insertions reach further than two
    shapes = [ColouredGraph(4, (0,) * 4, ((0, 1, 0), (0, 2, 0), (0, 3, 0)))]  # the claw
    shapes += [_random_connected_graph(rng, rng.randint(3, 5), rng.randint(0, 1)) for _ in range(9)]
    for graph in shapes:
        spins = tuple(Fraction(rng.choice((1, 1, 2, 3)), 2) for _ in range(graph.n_vertices))
        anisotropy = tuple(Fraction(rng.choice((0, 1, -2)), 3) if s >= 1 else Fraction(0) for s in spins)
        bonds = tuple((u, v, Fraction(rng.choice((0, 1, 2))), Fraction(rng.choice((1, -1, 3)), 2))
                      for u, v, _ in graph.edges)
        weights = _moebius_weights(graph.n_vertices, spins, anisotropy, bonds, order)
        for q in QUANTITIES:
            start = lowest_order(graph, INSERTIONS[q])
            assert all(c == 0 for c in weights[q][:min(start, order + 1)]), (graph, q, start, weights[q])
            if start <= order and weights[q][start] != 0:
                reached[q] += 1
                if q == "m4" and start < lowest_order(graph, 2):
                    m4_beyond_m2 += 1
    # the rule is not vacuous: the weights do start where it says, for every quantity
    assert all(count >= 2 for count in reached.values()), reached
    assert m4_beyond_m2 >= 1


@pytest.mark.parametrize("name, order, labels", [
    ("triangular", 7, ["J1"]), ("kagome", 8, ["J1"]), ("kagome-layered", 5, ["J1", "J2", "Jd"]),
    ("square", 7, ["J1", "J2"]), ("chain", 12, ["J1"]),
])
def test_the_census_keeps_every_class_that_can_contribute_with_its_full_count(name, order, labels):
    spec = load_lattice(name)
    spec = spec.without_labels([label for label in spec.labels if label not in labels])
    full = {c.key: (c.graph, c.per_cell) for c in enumerate_clusters(spec, order).classes}
    for k in (0, 2, 4):
        kept = {c.key: c.per_cell for c in enumerate_clusters(spec, order, insertions=k).classes}
        needed = {key for key, (graph, _) in full.items() if lowest_order(graph, k) <= order}
        assert needed <= set(kept)
        assert all(full[key][1] == count for key, count in kept.items())
        # and it does drop classes (the point of the rule); on the chain every path reaches T chi and M4
        assert len(kept) < len(full) or (name == "chain" and k > 0)


def test_no_m4_gives_the_same_ln_z_and_chi_as_the_full_run(tmp_path):
    out_full, out_short = tmp_path / "full.json", tmp_path / "short.json"
    common = ["series", "kagome", "--order", "9", "--no-tables", "--no-cache", "--workers", "1"]
    assert main(common + ["--json", str(out_full)]) == 0
    assert main(common + ["--no-m4", "--json", str(out_short)]) == 0
    full, short = json.loads(out_full.read_text()), json.loads(out_short.read_text())
    assert "M4" not in short["series"]
    for key in ("lnZ", "chiT", "C"):
        assert short["series"][key] == full["series"][key]
