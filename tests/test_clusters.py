"""Cluster enumeration and lattice constants against published animal counts and independent brute force.

The brute force builds a periodic patch (torus) of the lattice with networkx, wide enough that no cluster of
the sizes tested can wrap around, grows connected bond sets naively (adding one adjacent bond at a time,
deduplicated as frozensets) and classifies them with networkx's isomorphism test.  Nothing in it uses the
compiled enumeration or the canonical forms.
"""

import itertools
import random
from collections import Counter
from fractions import Fraction
from math import comb

import networkx as nx
import pytest
import sympy
from networkx.algorithms.isomorphism import GraphMatcher

from hte.canonical import canonical_key, key_to_graph
from hte.clusters import count_site_animals, enumerate_clusters, subgraph_counts
from hte.errors import ParameterError
from hte.graph import ColouredGraph
from hte.lattice_file import builtin_lattices, load_lattice

# ---------------------------------------------------------------------------------------------- published counts
# Bond animals of the square lattice (connected sets of n nearest-neighbour bonds, counted up to translation),
# per site, n = 1..10.  Source: OEIS A001410, from memory.
SQUARE_BOND_ANIMALS = [2, 6, 22, 88, 372, 1628, 7312, 33466, 155446, 730534]
# Fixed polyominoes = site animals of the square lattice per site, n = 1..10.  Source: OEIS A001168, from memory.
SQUARE_SITE_ANIMALS = [1, 2, 6, 19, 63, 216, 760, 2725, 9910, 36446]
# Fixed polyhexes = site animals of the triangular lattice per site (a hexagon of the hexagonal tiling is a site
# of the triangular lattice, edge-sharing = nearest neighbours), n = 1..8.  Source: OEIS A001207, from memory.
TRIANGULAR_SITE_ANIMALS = [1, 3, 11, 44, 186, 814, 3652, 16689]
# Fixed polyiamonds, n = 1..9.  Source: OEIS A001420, from memory.  A triangle of the triangular tiling is a site
# of the honeycomb lattice (edge-sharing triangles = nearest neighbours), and the tiling's translations are the
# honeycomb lattice's, whose cell holds one up and one down triangle (2 sites).  So fixed n-iamonds = honeycomb
# site animals per cell = 2 x (site animals per site); n = 1: 2 per cell, 1 per site.
HONEYCOMB_SITE_ANIMALS_PER_CELL = [2, 3, 6, 14, 36, 94, 250, 675, 1838]
# Fixed polycubes = site animals of the simple cubic lattice per site, n = 1..7.  Source: OEIS A001931, from memory.
CUBIC_SITE_ANIMALS = [1, 3, 15, 86, 534, 3481, 23502]


def nearest_neighbours_only(name):
    spec = load_lattice(name)
    return spec.without_labels([label for label in spec.labels if label != "J1"])


def test_square_bond_animals_match_published_counts():
    census = enumerate_clusters(nearest_neighbours_only("square"), 10)
    per_site = [census.per_site(census.clusters_per_cell[n]) for n in range(1, 11)]
    assert per_site == SQUARE_BOND_ANIMALS


def test_triangular_bond_animals_of_three_bonds_counted_by_hand():
    # Per site, z = 6 (common practice), worked out here: n = 1: z/2 = 3; n = 2: C(6, 2) = 15; n = 3: 2 triangles,
    # C(6, 3) = 20 stars, and 3 bonds x (5 x 5 - 2) = 69 paths (5 continuations at each end of the middle bond,
    # less the 2 that close a triangle): 91.
    census = enumerate_clusters(load_lattice("triangular"), 3)
    assert census.clusters_per_cell[1:] == [3, 15, 91]
    assert sorted(c.per_cell for c in census.classes_with_bonds(3)) == [2, 20, 69]


@pytest.mark.parametrize("name, counts_per_cell", [
    ("square", SQUARE_SITE_ANIMALS),                  # one site per cell: per cell = per site
    ("triangular", TRIANGULAR_SITE_ANIMALS),          # one site per cell
    ("honeycomb", HONEYCOMB_SITE_ANIMALS_PER_CELL),   # two sites per cell, compared per cell (see above)
    ("cubic", CUBIC_SITE_ANIMALS),                    # one site per cell
])
def test_site_animals_match_published_counts(name, counts_per_cell):
    spec = nearest_neighbours_only(name)
    assert count_site_animals(spec, len(counts_per_cell))[1:] == counts_per_cell


def test_honeycomb_site_animals_per_site_are_half_the_polyiamonds():
    spec = nearest_neighbours_only("honeycomb")
    per_cell = count_site_animals(spec, 4)
    per_site = [Fraction(k, spec.n_sites) for k in per_cell[1:]]
    assert per_site == [Fraction(k, 2) for k in HONEYCOMB_SITE_ANIMALS_PER_CELL[:4]]


# ---------------------------------------------------------------------------------------------- brute force
class Torus:
    """The lattice on width^d cells with periodic boundaries, as a networkx graph.

    Nodes are (cell, basis site) with attribute ``site_class``; edges carry ``label``, ``kind`` (index into
    spec.bonds) and ``home`` (the cell of the bond's source end).
    """

    def __init__(self, spec, width):
        self.spec = spec
        self.width = width
        self.graph = nx.Graph()
        cells = list(itertools.product(range(width), repeat=spec.dimension))
        for cell in cells:
            for i, site in enumerate(spec.sites):
                self.graph.add_node((cell, i), site_class=site.site_class)
        for cell in cells:
            for kind, bond in enumerate(spec.bonds):
                u = (cell, bond.source)
                v = (tuple((c + o) % width for c, o in zip(cell, bond.offset)), bond.target)
                assert u != v and not self.graph.has_edge(u, v), "patch too narrow"
                self.graph.add_edge(u, v, label=bond.label, kind=kind, home=cell)
        self.n_cells = len(cells)

    def edge(self, u, v):
        return frozenset((u, v))

    def root_edges(self):
        origin = (0,) * self.spec.dimension
        return [self.edge(u, v) for u, v, home in self.graph.edges(data="home") if home == origin]

    def all_edges(self):
        return [self.edge(u, v) for u, v in self.graph.edges]

    def grow(self, seeds, max_bonds):
        """All connected bond sets of 1..max_bonds bonds containing a seed bond: list indexed by size."""
        by_size = [set(), {frozenset([e]) for e in seeds}]
        for _ in range(2, max_bonds + 1):
            bigger = set()
            for cluster in by_size[-1]:
                for x in set().union(*cluster):
                    for y in self.graph[x]:
                        e = self.edge(x, y)
                        if e not in cluster:
                            bigger.add(cluster | {e})
            by_size.append(bigger)
        return by_size

    def unwrap(self, cell):
        """Cell coordinates in -width/2 .. width/2 (the patch is wide enough for this to be the true offset)."""
        return tuple(c - self.width if c > self.width // 2 else c for c in cell)

    def bond_position(self, e):
        u, v = tuple(e)
        data = self.graph.edges[u, v]
        return self.unwrap(data["home"]), data["kind"]

    def is_translation_representative(self, cluster):
        """True for the one translate whose smallest bond (by home cell, then kind) lies in the origin cell."""
        return min(self.bond_position(e) for e in cluster)[0] == (0,) * self.spec.dimension

    def coloured_graph(self, cluster, spec):
        """The cluster as a networkx graph coloured by site class and label indices."""
        g = nx.Graph()
        for e in cluster:
            u, v = tuple(e)
            for x in (u, v):
                g.add_node(x, colour=spec.site_classes.index(self.graph.nodes[x]["site_class"]))
            g.add_edge(u, v, colour=spec.labels.index(self.graph.edges[u, v]["label"]))
        return g


def brute_force_torus(spec, max_bonds):
    # a cluster grown from the origin cell stays within max_bonds * (largest offset) cells of it
    reach = max_bonds * max(max(abs(o) for o in b.offset) for b in spec.bonds)
    return Torus(spec, 2 * reach + 1)


def invariant(g):
    """Cheap isomorphism invariant used only to bucket graphs before the networkx test."""
    return (g.number_of_nodes(), g.number_of_edges(), tuple(sorted(
        (g.nodes[x]["colour"], tuple(sorted((g.nodes[y]["colour"], g.edges[x, y]["colour"]) for y in g[x])))
        for x in g)))


def classify(graphs_with_weights):
    """Group networkx graphs into isomorphism classes (networkx VF2, colours matched); sum the weights."""
    same = lambda a, b: a["colour"] == b["colour"]  # noqa: E731
    buckets = {}
    for g, w in graphs_with_weights:
        reps = buckets.setdefault(invariant(g), [])
        for rep in reps:
            if GraphMatcher(rep[0], g, node_match=same, edge_match=same).is_isomorphic():
                rep[1] += w
                break
        else:
            reps.append([g, w])
    return [rep for reps in buckets.values() for rep in reps]


def to_coloured_graph(g) -> ColouredGraph:
    index = {x: i for i, x in enumerate(g.nodes)}
    return ColouredGraph(len(index), tuple(g.nodes[x]["colour"] for x in g.nodes),
                         tuple((min(index[u], index[v]), max(index[u], index[v]), c)
                               for u, v, c in g.edges(data="colour")))


def small_order(spec):
    return 3 if spec.dimension == 3 else 4


@pytest.mark.parametrize("name", builtin_lattices())
def test_cluster_counts_match_brute_force_on_a_torus(name):
    # Two independent brute-force counts per cell: (a) the clusters through an origin-cell bond, each weighted
    # by (its origin-cell bonds) / (its bonds): summed over the translates of a cluster, the weights give 1;
    # (b) those whose smallest bond (home cell, then kind) is in the origin cell: one translate per class.
    spec = load_lattice(name)
    max_bonds = small_order(spec)
    torus = brute_force_torus(spec, max_bonds)
    by_size = torus.grow(torus.root_edges(), max_bonds)
    origin = (0,) * spec.dimension
    weighted = [sum(Fraction(sum(torus.bond_position(e)[0] == origin for e in c), n) for c in by_size[n])
                for n in range(1, max_bonds + 1)]
    representatives = [sum(map(torus.is_translation_representative, by_size[n])) for n in range(1, max_bonds + 1)]
    census = enumerate_clusters(spec, max_bonds)
    assert census.clusters_per_cell[1:] == weighted == representatives


@pytest.mark.slow
@pytest.mark.parametrize("name", builtin_lattices())
def test_cluster_counts_and_classes_match_brute_force_one_order_higher(name):
    spec = load_lattice(name)
    max_bonds = small_order(spec) + 1
    torus = brute_force_torus(spec, max_bonds)
    by_size = torus.grow(torus.root_edges(), max_bonds)
    census = enumerate_clusters(spec, max_bonds)
    assert census.clusters_per_cell[1:] == [sum(map(torus.is_translation_representative, by_size[n]))
                                           for n in range(1, max_bonds + 1)]
    if len(spec.bonds) <= 6:  # networkx classification of the larger censuses would take many minutes
        clusters = [c for n in range(1, max_bonds + 1) for c in by_size[n] if torus.is_translation_representative(c)]
        classes = classify((torus.coloured_graph(c, spec), 1) for c in clusters)
        assert sorted((g.number_of_edges(), g.number_of_nodes(), k) for g, k in classes) == \
            sorted((c.n_bonds, c.n_sites, c.per_cell) for c in census.classes)


@pytest.mark.parametrize("name, max_bonds", [("square", 3), ("honeycomb", 4), ("ladder", 4), ("chain", 4)])
def test_all_clusters_of_the_torus_divided_by_its_cells(name, max_bonds):
    # The literal count: every connected bond set of the periodic patch, divided by the number of cells.
    spec = load_lattice(name)
    torus = brute_force_torus(spec, max_bonds)
    by_size = torus.grow(torus.all_edges(), max_bonds)
    census = enumerate_clusters(spec, max_bonds)
    assert census.clusters_per_cell[1:] == [Fraction(len(by_size[n]), torus.n_cells)
                                           for n in range(1, max_bonds + 1)]


@pytest.mark.parametrize("name", builtin_lattices())
def test_graph_classes_match_networkx_classification(name):
    spec = load_lattice(name)
    max_bonds = small_order(spec) - (1 if name in ("kagome", "kagome-layered") else 0)
    torus = brute_force_torus(spec, max_bonds)
    by_size = torus.grow(torus.root_edges(), max_bonds)
    clusters = [c for n in range(1, max_bonds + 1) for c in by_size[n] if torus.is_translation_representative(c)]
    classes = classify((torus.coloured_graph(c, spec), 1) for c in clusters)
    census = enumerate_clusters(spec, max_bonds)
    brute = sorted((g.number_of_edges(), g.number_of_nodes(), count) for g, count in classes)
    ours = sorted((c.n_bonds, c.n_sites, c.per_cell) for c in census.classes)
    assert brute == ours
    # and each class under its canonical key
    assert {canonical_key(to_coloured_graph(g)): count for g, count in classes} == \
        {c.key: c.per_cell for c in census.classes}


def test_dilution_monomials_match_brute_force_site_counts():
    # The layered kagome lattice has two site classes; every bond set's survival weight under dilution is
    # prod_c p_c^(number of its sites of class c).  Compare the weighted sums per size with brute force.
    spec = load_lattice("kagome-layered")
    max_bonds = 3
    torus = brute_force_torus(spec, max_bonds)
    by_size = torus.grow(torus.root_edges(), max_bonds)
    p = sympy.symbols("p_magnetic p_interlayer")
    census = enumerate_clusters(spec, max_bonds)
    for n in range(1, max_bonds + 1):
        brute = 0
        for cluster in by_size[n]:
            if torus.is_translation_representative(cluster):
                sites = Counter(torus.graph.nodes[x]["site_class"] for x in set().union(*cluster))
                brute += p[0] ** sites["magnetic"] * p[1] ** sites["interlayer"]
        ours = 0
        for c in census.classes_with_bonds(n):
            monomial = census.occupation_monomial(c)
            ours += c.per_cell * p[0] ** monomial.get("magnetic", 0) * p[1] ** monomial.get("interlayer", 0)
        assert sympy.expand(brute - ours) == 0
        assert ours.subs({p[0]: 1, p[1]: 1}) == census.clusters_per_cell[n]  # p = 1: undiluted constants


# ---------------------------------------------------------------------------------------------- sum rules
@pytest.mark.parametrize("name", builtin_lattices())
def test_lattice_constants_give_bonds_and_bond_pairs_per_cell(name):
    # n = 1: the bonds per cell; n = 2: pairs of bonds sharing a site, sum over basis sites of C(z_s, 2), with
    # z_s the number of bonds (all labels) at site s.  Common practice.
    spec = load_lattice(name)
    census = enumerate_clusters(spec, 2)
    assert sum(c.per_cell for c in census.classes_with_bonds(1)) == len(spec.bonds)
    for label, count in spec.bonds_per_cell().items():
        singles = [c for c in census.classes_with_bonds(1) if c.graph.edges[0][2] == spec.labels.index(label)]
        assert sum(c.per_cell for c in singles) == count
    z = [sum(per_label.values()) for per_label in spec.site_coordination()]
    assert sum(c.per_cell for c in census.classes_with_bonds(2)) == sum(comb(k, 2) for k in z)
    for c in census.classes:
        assert sum(c.sites_by_class(len(spec.site_classes))) == c.n_sites
    assert census.clusters_per_cell[1:] == [sum(c.per_cell for c in census.classes_with_bonds(n)) for n in (1, 2)]


def test_per_site_constants_are_exact_fractions():
    census = enumerate_clusters(nearest_neighbours_only("kagome"), 2)
    # kagome: 6 bonds per 3-site cell, so 2 bonds per site; 4 bonds at each site give C(4, 2) = 6 pairs per site
    assert census.per_site(census.clusters_per_cell[1]) == 2
    assert census.per_site(census.clusters_per_cell[2]) == 6
    honeycomb = enumerate_clusters(load_lattice("honeycomb"), 1)
    assert honeycomb.per_site(honeycomb.clusters_per_cell[1]) == Fraction(3, 2)


def test_two_workers_give_the_same_census():
    spec = load_lattice("kagome")
    one = enumerate_clusters(spec, 4, workers=1)
    two = enumerate_clusters(spec, 4, workers=2)
    assert one.clusters_per_cell == two.clusters_per_cell
    assert [(c.key, c.per_cell) for c in one.classes] == [(c.key, c.per_cell) for c in two.classes]


# ---------------------------------------------------------------------------------------------- subgraphs
def brute_force_subgraph_counts(graph: ColouredGraph) -> list[tuple[nx.Graph, int]]:
    """Connected proper edge subsets (>= 1 edge), classified with networkx."""
    edges = list(graph.edges)
    subsets = []
    for k in range(1, len(edges)):
        for subset in itertools.combinations(edges, k):
            g = nx.Graph()
            for u, v, c in subset:
                g.add_node(u, colour=graph.vertex_colours[u])
                g.add_node(v, colour=graph.vertex_colours[v])
                g.add_edge(u, v, colour=c)
            if nx.is_connected(g):
                subsets.append((g, 1))
    return classify(subsets)


def assert_subgraph_counts_match(graph: ColouredGraph):
    ours = subgraph_counts(graph)
    brute = brute_force_subgraph_counts(graph)
    same = lambda a, b: a["colour"] == b["colour"]  # noqa: E731
    assert len(ours) == len(brute)
    for key, count in ours.items():
        h = key_to_graph(key).to_networkx()
        matches = [k for g, k in brute
                   if GraphMatcher(g, h, node_match=same, edge_match=same).is_isomorphic()]
        assert matches == [count]


def random_connected_graph(rng, n, extra_edges, colours):
    order = list(range(n))
    rng.shuffle(order)
    edges = {tuple(sorted((order[i], order[rng.randrange(i)]))) for i in range(1, n)}  # a random spanning tree
    while len(edges) < min(n - 1 + extra_edges, n * (n - 1) // 2):
        u, v = rng.sample(range(n), 2)
        edges.add((min(u, v), max(u, v)))
    return ColouredGraph(n, tuple(rng.randrange(colours) for _ in range(n)),
                         tuple((u, v, rng.randrange(colours)) for u, v in sorted(edges)))


@pytest.mark.parametrize("seed", range(12))
def test_subgraph_counts_on_random_graphs(seed):
    rng = random.Random(seed)
    graph = random_connected_graph(rng, rng.randint(2, 7), rng.randint(0, 3), rng.choice([1, 2]))
    assert_subgraph_counts_match(graph)


def test_subgraph_counts_on_lattice_classes():
    census = enumerate_clusters(load_lattice("checkerboard"), 5)
    rng = random.Random(2)
    for c in rng.sample(census.classes_with_bonds(5), 6) + census.classes_with_bonds(2):
        assert_subgraph_counts_match(c.graph)


def test_subgraph_counts_of_a_single_bond_are_empty():
    assert subgraph_counts(ColouredGraph(2, (0, 0), ((0, 1, 0),))) == {}


# ---------------------------------------------------------------------------------------------- biconnected only
def biconnected(graph: ColouredGraph) -> bool:
    """A single bond, or a connected graph without a cut vertex (networkx's test)."""
    return graph.n_edges == 1 or (graph.n_vertices > 2 and nx.is_biconnected(graph.to_networkx()))


@pytest.mark.parametrize("name, max_bonds, nearest_only", [
    ("square", 10, True), ("square", 6, False), ("triangular", 7, True), ("kagome", 9, True),
    ("honeycomb", 12, True), ("cubic", 6, True), ("kagome-layered", 4, False), ("ladder-unequal-legs", 7, False)])
def test_biconnected_census_is_the_biconnected_part_of_the_full_census(name, max_bonds, nearest_only):
    # The pruned search must find every biconnected cluster of the full search, with the same lattice constant.
    spec = nearest_neighbours_only(name) if nearest_only else load_lattice(name)
    full = enumerate_clusters(spec, max_bonds)
    stars = enumerate_clusters(spec, max_bonds, biconnected_only=True)
    expected = {c.key: c.per_cell for c in full.classes if biconnected(c.graph)}
    assert stars.biconnected_only and not full.biconnected_only
    assert {c.key: c.per_cell for c in stars.classes} == expected
    assert sum(stars.clusters_per_cell) == sum(expected.values())


# Self-avoiding polygons (undirected, unrooted) per site, counted up to translation, from memory:
# square lattice, perimeter 4, 6, ..., 16 (OEIS A002931); triangular lattice, perimeter 3..12 (OEIS A036418).
SQUARE_POLYGONS = {4: 1, 6: 2, 8: 7, 10: 28, 12: 124, 14: 588, 16: 2938}
TRIANGULAR_POLYGONS = {3: 2, 4: 3, 5: 6, 6: 15, 7: 42, 8: 123, 9: 380, 10: 1212, 11: 3966, 12: 13265}


@pytest.mark.parametrize("name, polygons", [("square", SQUARE_POLYGONS), ("triangular", TRIANGULAR_POLYGONS)])
def test_polygons_of_the_biconnected_census_match_published_counts(name, polygons):
    # Both lattices have one site per cell.  A polygon is the biconnected class whose sites all have degree 2.
    top = max(polygons)
    census = enumerate_clusters(nearest_neighbours_only(name), top, biconnected_only=True)
    found = {c.n_bonds: c.per_cell for c in census.classes if c.n_sites == c.n_bonds and set(c.graph.degree()) == {2}}
    assert found == polygons


@pytest.mark.parametrize("seed", range(10))
def test_biconnected_subgraph_counts_are_the_biconnected_part(seed):
    rng = random.Random(100 + seed)
    graph = random_connected_graph(rng, rng.randint(3, 8), rng.randint(1, 6), rng.choice([1, 2]))
    expected = {k: c for k, c in subgraph_counts(graph).items() if biconnected(key_to_graph(k))}
    assert subgraph_counts(graph, biconnected_only=True) == expected


# ---------------------------------------------------------------------------------------------- bad input
def test_bad_sizes_raise_parameter_errors():
    spec = load_lattice("square")
    with pytest.raises(ParameterError, match="must be at least 1 bond"):
        enumerate_clusters(spec, 0)
    with pytest.raises(ParameterError, match="has no bonds left"):
        enumerate_clusters(spec.without_labels(spec.labels), 3)
