"""Canonical forms of coloured graphs, checked against networkx's isomorphism test (VF2) as the reference.

Keys must be equal exactly when networkx's GraphMatcher, matching vertex colours and edge colours, finds an
isomorphism; relabelling a graph must not change its key; and a key must stand for a graph isomorphic to the
one it came from.  Hard cases for colour refinement (regular and strongly regular graphs, where refinement
alone cannot tell vertices apart) exercise the search and its automorphism pruning.
"""

import itertools
import random

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from networkx.algorithms.isomorphism import GraphMatcher

from hte.canonical import (
    canonical_certificate,
    canonical_graph,
    canonical_key,
    canonical_into,
    certificate_key,
    certificate_to_graph,
    key_to_graph,
    new_workspace,
    workspace_inputs,
    workspace_result,
)
from hte.graph import ColouredGraph


# ---------------------------------------------------------------------------------------------- helpers
def isomorphic(g: ColouredGraph, h: ColouredGraph) -> bool:
    """The reference: networkx VF2 with vertex and edge colours matched."""
    same = lambda a, b: a["colour"] == b["colour"]  # noqa: E731
    return GraphMatcher(g.to_networkx(), h.to_networkx(), node_match=same, edge_match=same).is_isomorphic()


def relabelled(g: ColouredGraph, permutation) -> ColouredGraph:
    """The same graph with vertex v renamed permutation[v] (edges listed in a shuffled order)."""
    colours = [0] * g.n_vertices
    for v, c in enumerate(g.vertex_colours):
        colours[permutation[v]] = c
    edges = [(min(permutation[u], permutation[v]), max(permutation[u], permutation[v]), c) for u, v, c in g.edges]
    random.Random(len(edges)).shuffle(edges)
    return ColouredGraph(g.n_vertices, tuple(colours), tuple(edges))


def as_arrays(g: ColouredGraph):
    """(vertex colours, edge ends u, edge ends v, edge colours) as int64 arrays."""
    edges = np.array(g.edges, np.int64).reshape(-1, 3)
    return (np.array(g.vertex_colours, np.int64), edges[:, 0].copy(), edges[:, 1].copy(), edges[:, 2].copy())


def from_networkx(graph: nx.Graph, vertex_colours=None, edge_colour=lambda u, v: 0) -> ColouredGraph:
    index = {v: i for i, v in enumerate(sorted(graph.nodes, key=repr))}
    colours = tuple(vertex_colours[v] if vertex_colours else 0 for v in sorted(graph.nodes, key=repr))
    edges = tuple((min(index[u], index[v]), max(index[u], index[v]), edge_colour(u, v)) for u, v in graph.edges)
    return ColouredGraph(len(index), colours, edges)


@st.composite
def coloured_graphs(draw, max_vertices=9, max_colours=3):
    n = draw(st.integers(1, max_vertices))
    vertex_colours = draw(st.integers(1, max_colours))
    edge_colours = draw(st.integers(1, max_colours))
    density = draw(st.sampled_from([0.2, 0.35, 0.5, 0.7, 0.9]))
    colours = tuple(draw(st.lists(st.integers(0, vertex_colours - 1), min_size=n, max_size=n)))
    edges = []
    for u, v in itertools.combinations(range(n), 2):
        if draw(st.floats(0, 1)) < density:
            edges.append((u, v, draw(st.integers(0, edge_colours - 1))))
    return ColouredGraph(n, colours, tuple(edges))


@st.composite
def graphs_with_permutation(draw):
    g = draw(coloured_graphs())
    return g, draw(st.permutations(range(g.n_vertices)))


@st.composite
def near_isomorphic_pairs(draw):
    """A graph and a relabelled copy that is sometimes changed slightly (an edge toggled or recoloured, a
    vertex recoloured), so that both isomorphic and non-isomorphic pairs with equal sizes are common."""
    g, permutation = draw(graphs_with_permutation())
    h = relabelled(g, permutation)
    change = draw(st.sampled_from(["none", "toggle edge", "edge colour", "vertex colour"]))
    n = h.n_vertices
    if change == "toggle edge" and n >= 2:
        u, v = sorted(draw(st.lists(st.integers(0, n - 1), min_size=2, max_size=2, unique=True)))
        present = [e for e in h.edges if (e[0], e[1]) == (u, v)]
        edges = [e for e in h.edges if (e[0], e[1]) != (u, v)] if present else list(h.edges) + [(u, v, 0)]
        h = ColouredGraph(n, h.vertex_colours, tuple(edges))
    elif change == "edge colour" and h.edges:
        k = draw(st.integers(0, len(h.edges) - 1))
        edges = list(h.edges)
        u, v, c = edges[k]
        edges[k] = (u, v, (c + 1) % 3)
        h = ColouredGraph(n, h.vertex_colours, tuple(edges))
    elif change == "vertex colour":
        k = draw(st.integers(0, n - 1))
        colours = list(h.vertex_colours)
        colours[k] = (colours[k] + 1) % 3
        h = ColouredGraph(n, tuple(colours), h.edges)
    return g, h


# ---------------------------------------------------------------------------------------------- properties
@settings(max_examples=300, deadline=None)
@given(graphs_with_permutation())
def test_relabelling_keeps_the_key(case):
    g, permutation = case
    assert canonical_key(relabelled(g, permutation)) == canonical_key(g)


@settings(max_examples=400, deadline=None)
@given(near_isomorphic_pairs())
def test_keys_are_equal_exactly_when_networkx_finds_an_isomorphism(pair):
    g, h = pair
    assert (canonical_key(g) == canonical_key(h)) == isomorphic(g, h)


@settings(max_examples=200, deadline=None)
@given(coloured_graphs(), coloured_graphs())
def test_keys_of_unrelated_graphs_agree_with_networkx(g, h):
    assert (canonical_key(g) == canonical_key(h)) == isomorphic(g, h)


@settings(max_examples=200, deadline=None)
@given(coloured_graphs())
def test_key_stands_for_an_isomorphic_graph_and_is_a_fixed_point(g):
    key = canonical_key(g)
    h = key_to_graph(key)
    assert isomorphic(g, h)
    assert canonical_key(h) == key
    assert h.edges == tuple(sorted(h.edges))


@settings(max_examples=200, deadline=None)
@given(coloured_graphs())
def test_canonical_labelling_maps_the_graph_onto_the_canonical_graph(g):
    canonical, labels = canonical_graph(g)
    assert sorted(labels) == list(range(g.n_vertices))
    assert relabelled(g, labels).vertex_colours == canonical.vertex_colours
    assert sorted(relabelled(g, labels).edges) == sorted(canonical.edges)


def splitmix64_finaliser(x: int) -> int:
    """The refinement hash, written out in plain Python (splitmix64's finaliser, common practice)."""
    mask = (1 << 64) - 1
    x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9 & mask
    x = (x ^ (x >> 27)) * 0x94D049BB133111EB & mask
    return x ^ (x >> 31)


def test_certificate_format_is_colours_then_upper_triangle():
    # The certificate [n, colours in label order, upper triangle of (edge colour + 1)] is the cache key
    # format.  A path a-b-c with colours (1, 0, 1) and edge colours 0 (a-b) and 2 (b-c): the colour cells are
    # {b} < {a, c}; refinement orders a and c by the hash of (cell of b = 0) * 1000003 + edge colour + 1.
    path = ColouredGraph(3, (1, 0, 1), ((0, 1, 0), (1, 2, 2)))
    a_first = splitmix64_finaliser(0 + 0 + 1) < splitmix64_finaliser(0 + 2 + 1)
    expected_labels = [1, 0, 2] if a_first else [2, 0, 1]
    colour_ab, colour_bc = 1, 3  # edge colour + 1
    triangle = [colour_ab, colour_bc, 0] if a_first else [colour_bc, colour_ab, 0]
    cert, labels = canonical_certificate(3, np.array([1, 0, 1]), np.array([0, 1]), np.array([1, 2]),
                                         np.array([0, 2]))
    assert list(labels) == expected_labels
    assert list(cert) == [3, 0, 1, 1] + triangle
    key = "3|0.1.1|" + ("0-1:0,0-2:2" if a_first else "0-1:2,0-2:0")
    assert certificate_key(cert) == key == canonical_key(path)
    assert certificate_to_graph(cert) == key_to_graph(key)


def reference_certificate(g: ColouredGraph) -> list[int]:
    """The documented definition, in plain Python and without any pruning: colour refinement seeded with the
    vertex colours (each round ranks vertices by (cell, sum of hashes of (neighbour cell, edge colour))),
    branching on every vertex of the first non-singleton cell; the smallest leaf certificate wins."""
    n = g.n_vertices
    neighbours = [[] for _ in range(n)]
    matrix = [[0] * n for _ in range(n)]
    for u, v, c in g.edges:
        neighbours[u].append((v, c))
        neighbours[v].append((u, c))
        matrix[u][v] = matrix[v][u] = c + 1

    def ranks(keys):
        distinct = sorted(set(keys))
        return [distinct.index(k) for k in keys]

    def refine(cells):
        while True:
            keys = [(cells[v], sum(splitmix64_finaliser(cells[u] * 1000003 + c + 1) for u, c in neighbours[v])
                     % (1 << 64)) for v in range(n)]
            new = ranks(keys)
            if len(set(new)) == len(set(cells)):
                return cells
            cells = new

    def leaves(cells):
        if len(set(cells)) == n:
            yield cells
            return
        target = min(c for c in set(cells) if cells.count(c) > 1)
        for v in range(n):
            if cells[v] == target:
                yield from leaves(refine(ranks([2 * cells[u] + (u != v) for u in range(n)])))

    best = None
    for labels in leaves(refine(ranks(list(g.vertex_colours)))):
        vertex = sorted(range(n), key=lambda v: labels[v])
        cert = [n] + [g.vertex_colours[v] for v in vertex]
        cert += [matrix[vertex[i]][vertex[j]] for i in range(n) for j in range(i + 1, n)]
        best = cert if best is None else min(best, cert)
    return best


@settings(max_examples=150, deadline=None)
@given(coloured_graphs(max_vertices=7))
def test_certificate_is_the_smallest_leaf_of_the_unpruned_search(g):
    cert, _ = canonical_certificate(g.n_vertices, *as_arrays(g))
    assert list(cert) == reference_certificate(g)


@pytest.mark.parametrize("graph", [nx.hypercube_graph(3), nx.circulant_graph(8, [1, 4]), nx.cycle_graph(7),
                                   nx.complete_bipartite_graph(3, 3), nx.disjoint_union(nx.cycle_graph(3),
                                                                                        nx.cycle_graph(4))],
                         ids=["cube", "wagner", "C7", "K33", "C3+C4"])
def test_certificate_of_symmetric_graphs_is_the_smallest_unpruned_leaf(graph):
    g = from_networkx(graph)
    cert, _ = canonical_certificate(g.n_vertices, *as_arrays(g))
    assert list(cert) == reference_certificate(g)


def test_empty_graph_and_single_vertex():
    assert canonical_key(ColouredGraph(0, (), ())) == "0||"
    assert key_to_graph("0||") == ColouredGraph(0, (), ())
    assert canonical_key(ColouredGraph(1, (4,), ())) == "1|4|"


# ---------------------------------------------------------------------------------------------- hard cases
def keys_match_isomorphism_classes(graphs):
    """Assert that keys coincide exactly for networkx-isomorphic members of `graphs` and relabel safely."""
    keys = [canonical_key(g) for g in graphs]
    for (g, kg), (h, kh) in itertools.combinations(zip(graphs, keys), 2):
        assert (kg == kh) == isomorphic(g, h)
    rng = random.Random(7)
    for g, k in zip(graphs, keys):
        permutation = list(range(g.n_vertices))
        rng.shuffle(permutation)
        assert canonical_key(relabelled(g, permutation)) == k
    return keys


@pytest.mark.parametrize("n", [10, 12])
def test_random_cubic_graphs(n):
    graphs = [from_networkx(nx.random_regular_graph(3, n, seed=seed)) for seed in range(12)]
    keys_match_isomorphism_classes(graphs)


def test_cube_against_the_other_cubic_graphs_on_eight_vertices():
    # Connected cubic graphs on 8 vertices: exactly 5 up to isomorphism (common practice: the census of
    # cubic graphs; checked here with networkx on the graphs found), the cube Q3 among them.
    found = [from_networkx(nx.random_regular_graph(3, 8, seed=seed)) for seed in range(200)]
    found = [g for g in found if nx.is_connected(g.to_networkx())]
    keys = keys_match_isomorphism_classes(found[:40])
    assert len(set(canonical_key(g) for g in found)) == 5
    cube = from_networkx(nx.hypercube_graph(3))
    wagner = from_networkx(nx.circulant_graph(8, [1, 4]))  # the Moebius ladder on 8 vertices
    assert canonical_key(cube) in set(keys) | {canonical_key(g) for g in found}
    assert canonical_key(cube) != canonical_key(wagner)
    assert not isomorphic(cube, wagner)


def test_strongly_regular_graphs_with_equal_parameters_are_told_apart():
    # The 4x4 rook's graph and the Shrikhande graph are both strongly regular (16, 6, 2, 2) and not isomorphic
    # (common practice; networkx confirms it below).  Colour refinement cannot split either; the search must.
    rook = from_networkx(nx.cartesian_product(nx.complete_graph(4), nx.complete_graph(4)))
    shrikhande = from_networkx(nx.Graph([((a, b), ((a + da) % 4, (b + db) % 4))
                                         for a in range(4) for b in range(4)
                                         for da, db in [(0, 1), (1, 0), (1, 1)]]))
    assert not isomorphic(rook, shrikhande)
    petersen = from_networkx(nx.petersen_graph())
    paley9 = from_networkx(nx.paley_graph(9).to_undirected())
    pentagonal_prism = from_networkx(nx.circular_ladder_graph(5))
    keys_match_isomorphism_classes([rook, shrikhande, petersen, paley9, pentagonal_prism,
                                    from_networkx(nx.complement(nx.petersen_graph()))])


def test_highly_symmetric_graphs_finish():
    # Complete graphs and edgeless graphs have n! labellings; automorphism pruning keeps the search small.
    for n in (6, 9, 12):
        complete = ColouredGraph(n, (0,) * n, tuple((u, v, 0) for u, v in itertools.combinations(range(n), 2)))
        assert canonical_key(complete) == f"{n}|{'.'.join('0' * n)}|" + ",".join(
            f"{u}-{v}:0" for u, v in itertools.combinations(range(n), 2))
        assert canonical_key(ColouredGraph(n, (0,) * n, ())) == f"{n}|{'.'.join('0' * n)}|"
    star = ColouredGraph(13, (0,) * 13, tuple((0, k, 0) for k in range(1, 13)))
    key = canonical_key(star)
    assert sorted(key_to_graph(key).degree()) == [1] * 12 + [12]
    assert canonical_key(relabelled(star, [5, 0, 1, 2, 3, 4, 12, 11, 10, 9, 8, 7, 6])) == key


def dihedral_class(colours):
    """Smallest rotation/reflection of a cyclic colour sequence: equal exactly for equivalent cycles."""
    n = len(colours)
    images = [tuple(seq[(k + i) % n] for i in range(n)) for seq in (colours, colours[::-1]) for k in range(n)]
    return min(images)


def test_coloured_cycles_are_identified_up_to_rotation_and_reflection():
    # Two vertex-coloured n-cycles are isomorphic exactly when their colour sequences agree up to the dihedral
    # group (an independent reference: no graph isomorphism code involved).
    rng = random.Random(3)
    cycles = []
    for n in (6, 7, 8, 9, 10):
        for _ in range(25):
            colours = tuple(rng.randrange(2) for _ in range(n))
            cycles.append((colours, ColouredGraph(n, colours, tuple((min(i, (i + 1) % n), max(i, (i + 1) % n), 0)
                                                                  for i in range(n)))))
    for (ca, ga), (cb, gb) in itertools.combinations(cycles, 2):
        same = len(ca) == len(cb) and dihedral_class(ca) == dihedral_class(cb)
        assert (canonical_key(ga) == canonical_key(gb)) == same


def test_edge_coloured_cycles_match_networkx():
    rng = random.Random(5)
    cycles = []
    for n in (5, 6, 8):
        for _ in range(15):
            order = list(range(n))
            rng.shuffle(order)
            edges = tuple((min(order[i], order[(i + 1) % n]), max(order[i], order[(i + 1) % n]), rng.randrange(2))
                          for i in range(n))
            cycles.append(ColouredGraph(n, (0,) * n, edges))
    keys_match_isomorphism_classes(cycles)


# ---------------------------------------------------------------------------------------------- workspace
def test_reused_workspace_gives_the_same_results_as_fresh_calls():
    # canonical_into keeps no state between calls that could leak into the next graph.
    rng = random.Random(11)
    ws = new_workspace(12, 66)
    colours, ends_u, ends_v, edge_colours = workspace_inputs(ws)
    cert_view, labels_view = workspace_result(ws)
    for _ in range(300):
        n = rng.randint(1, 12)
        density = rng.choice([0.1, 0.3, 0.6, 1.0])
        edges = [(u, v, rng.randrange(2)) for u, v in itertools.combinations(range(n), 2) if rng.random() < density]
        vcol = np.array([rng.randrange(2) for _ in range(n)], np.int64)
        e = np.array(edges, np.int64).reshape(-1, 3)
        m = len(edges)
        colours[:n] = vcol
        ends_u[:m], ends_v[:m], edge_colours[:m] = e[:, 0], e[:, 1], e[:, 2]
        length = canonical_into(ws, n, m)
        cert, labels = canonical_certificate(n, vcol, e[:, 0].copy(), e[:, 1].copy(), e[:, 2].copy())
        assert list(cert_view[:length]) == list(cert)
        assert list(labels_view[:n]) == list(labels)
