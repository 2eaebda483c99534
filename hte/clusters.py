"""Connected clusters of a lattice, their graph classes and lattice constants.

A *bond cluster* is a finite connected set of bonds of the infinite lattice.  Clusters are counted up to
lattice translation; a *graph class* collects the clusters that are isomorphic as graphs whose vertices are
coloured by site class and whose edges are coloured by coupling label.  The *lattice constant* of a class is
its number of clusters per unit cell (exact integer) or per lattice site (exact rational: per cell divided by
the number of basis sites of all classes).  With site dilution a cluster survives with probability
prod_c p_c^{n_c}, where n_c is its number of sites of class c; that monomial is a property of the class.

References
----------
.. [1] M. F. Sykes, J. W. Essam, B. R. Heap and B. J. Hiley, J. Math. Phys. 7, 1557 (1966) (lattice constants).
.. [2] J. Oitmaa, C. Hamer and W. Zheng, Series Expansion Methods for Strongly Interacting Lattice Models
   (Cambridge, 2006), ch. 2 (linked-cluster expansions).
"""

from __future__ import annotations

import itertools
import os
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from hte.canonical import certificate_key, certificate_to_graph
from hte.enumeration import count_site_clusters, enumerate_bond_clusters
from hte.graph import ColouredGraph
from hte.lattice import LatticeSpec


@dataclass(frozen=True)
class GraphClass:
    """One isomorphism class of coloured clusters on a lattice.

    Attributes
    ----------
    key : str
        Canonical key (see :func:`hte.canonical.certificate_key`); colours index ``site_classes``/``labels``.
    graph : ColouredGraph
        The canonically labelled representative.
    per_cell : int
        Number of clusters of this class per unit cell (up to translation).
    """

    key: str
    graph: ColouredGraph
    per_cell: int

    @property
    def n_bonds(self) -> int:
        return self.graph.n_edges

    @property
    def n_sites(self) -> int:
        return self.graph.n_vertices

    def sites_by_class(self, n_classes: int) -> tuple[int, ...]:
        """Number of sites of each site-class index."""
        counts = [0] * n_classes
        for c in self.graph.vertex_colours:
            counts[c] += 1
        return tuple(counts)


@dataclass
class ClusterCensus:
    """All connected bond clusters of a lattice up to `max_bonds` bonds, classified.

    Colour indices of the graphs refer to ``site_classes`` (vertices) and ``labels`` (edges).
    """

    lattice: str
    max_bonds: int
    sites_per_cell: int
    site_classes: tuple[str, ...]
    labels: tuple[str, ...]
    classes: list[GraphClass]
    clusters_per_cell: list[int]  # index n = number of clusters kept with n bonds (index 0 unused, 0)
    seconds: float = 0.0  # wall time of the whole census
    biconnected_only: bool = False  # only the biconnected clusters (star graphs) were kept
    insertions: int | None = None  # if set, clusters whose weights with this many M insertions vanish to
    #                                beta^max_bonds were dropped, all but a few (hte.enumeration)

    def per_site(self, count: int) -> Fraction:
        """Convert a per-cell count to a per-site lattice constant (exact)."""
        return Fraction(count, self.sites_per_cell)

    def classes_with_bonds(self, n: int) -> list[GraphClass]:
        return [c for c in self.classes if c.n_bonds == n]

    def occupation_monomial(self, graph_class: GraphClass) -> dict[str, int]:
        """Exponent of each site class's occupation probability in the class's dilution weight."""
        counts = graph_class.sites_by_class(len(self.site_classes))
        return {name: k for name, k in zip(self.site_classes, counts) if k}


# ---------------------------------------------------------------------------------------------- geometry
@dataclass(frozen=True)
class _Box:
    """A finite patch [-R, R]^d of cells, big enough that no rooted cluster reaches its border."""

    site_col: np.ndarray
    bond_u: np.ndarray
    bond_v: np.ndarray
    bond_col: np.ndarray
    inc_ptr: np.ndarray
    inc_bond: np.ndarray
    root_bonds: np.ndarray
    root_sites: np.ndarray
    n_sites: int


def _build_box(spec: LatticeSpec, reach: int) -> _Box:
    d = spec.dimension
    nb = spec.n_sites
    max_off = max([max(abs(x) for x in b.offset) for b in spec.bonds] + [1])
    R = reach * max_off + 1
    width = 2 * R + 1
    n_cells = width**d
    strides = [width ** (d - 1 - k) for k in range(d)]
    class_index = {c: i for i, c in enumerate(spec.site_classes)}
    label_index = {l: i for i, l in enumerate(spec.labels)}
    site_col = np.tile(np.array([class_index[s.site_class] for s in spec.sites], np.int64), n_cells)
    cells = np.array(list(itertools.product(range(-R, R + 1), repeat=d)), np.int64)  # lexicographic
    bu, bv, bc = [], [], []
    for bond in spec.bonds:
        target = cells + np.asarray(bond.offset, np.int64)
        inside = np.all(np.abs(target) <= R, axis=1)
        tidx = ((target + R) * strides).sum(axis=1)
        u = np.arange(n_cells) * nb + bond.source
        v = np.where(inside, tidx * nb + bond.target, -1)
        bu.append(u)
        bv.append(v)
        bc.append(np.full(n_cells, label_index[bond.label], np.int64))
    # bond id = cell * n_bond_types + t  (lexicographic in the home cell: translation compatible order)
    bond_u = np.stack(bu, axis=1).reshape(-1)
    bond_v = np.stack(bv, axis=1).reshape(-1)
    bond_col = np.stack(bc, axis=1).reshape(-1)
    n_sites = n_cells * nb
    valid = np.nonzero(bond_v >= 0)[0]
    ends = np.concatenate([bond_u[valid], bond_v[valid]])
    ids = np.concatenate([valid, valid])
    order = np.lexsort((ids, ends))
    inc_bond = ids[order]
    inc_ptr = np.zeros(n_sites + 1, np.int64)
    np.add.at(inc_ptr, ends + 1, 1)
    inc_ptr = np.cumsum(inc_ptr)
    origin = ((np.zeros(d, np.int64) + R) * strides).sum()
    nbt = len(spec.bonds)
    root_bonds = origin * nbt + np.arange(nbt, dtype=np.int64)
    root_sites = origin * nb + np.arange(nb, dtype=np.int64)
    return _Box(site_col, bond_u, np.where(bond_v >= 0, bond_v, 0), bond_col, inc_ptr, inc_bond.astype(np.int64),
                root_bonds, root_sites, n_sites)


def _site_neighbours(box: _Box):
    """CSR list of neighbouring sites (through any bond) for site-cluster counting."""
    pairs = set()
    valid = np.nonzero(np.isin(np.arange(box.bond_u.size), box.inc_bond))[0]
    for b in valid:
        u, v = int(box.bond_u[b]), int(box.bond_v[b])
        pairs.add((u, v))
        pairs.add((v, u))
    arr = np.array(sorted(pairs), np.int64)
    ptr = np.zeros(box.n_sites + 1, np.int64)
    np.add.at(ptr, arr[:, 0] + 1, 1)
    return np.cumsum(ptr), arr[:, 1].copy()


# ---------------------------------------------------------------------------------------------- census
def _census_worker(args):
    box, roots, max_bonds, biconnected_only, insertions = args
    certs, lengths, counts, per_size = enumerate_bond_clusters(
        max_bonds, roots, box.bond_u, box.bond_v, box.bond_col, box.site_col, box.inc_ptr, box.inc_bond,
        box.n_sites, biconnected_only, insertions)
    classes = [(tuple(certs[i, : lengths[i]].tolist()), int(counts[i])) for i in range(counts.size)]
    return classes, per_size.tolist()


def _roots_by_work(box: _Box, max_bonds: int, biconnected_only: bool, insertions) -> list[np.ndarray]:
    """The root bonds one by one, the most laborious first, for a pool that hands out jobs as workers free up.

    The work of a root is estimated by its number of clusters three bonds smaller, a small fraction of the
    full job (the counts grow by a factor of about 4.4 per bond on the kagome lattice, 8.5 on the simple cubic
    one, so the pilot costs 1/85 to 1/600 of it).
    """
    pilot = max(1, max_bonds - 3)
    work = []
    for root in box.root_bonds:
        _, per_size = _census_worker((box, np.array([root]), pilot, biconnected_only, insertions))
        work.append(sum(per_size))
    order = sorted(range(box.root_bonds.size), key=lambda k: -work[k])
    return [box.root_bonds[k : k + 1] for k in order]


def enumerate_clusters(spec: LatticeSpec, max_bonds: int, *, workers: int = 1, progress=None,
                       biconnected_only: bool = False, insertions: int | None = None) -> ClusterCensus:
    """Classify all connected bond clusters of `spec` with 1..max_bonds bonds, counted per unit cell.

    Parameters
    ----------
    spec : LatticeSpec
        The lattice; every bond in ``spec.bonds`` is used (drop zero couplings before calling).
    max_bonds : int
        Largest cluster size in bonds (>= 1).
    workers : int
        Processes to share the root bonds of the unit cell between (1 = in this process).  Each root bond is
        one job; the jobs go out the most laborious first, to whichever worker is free.
    progress : callable, optional
        Called as progress(message) each time the clusters of one root bond are done.
    biconnected_only : bool
        Keep only the biconnected clusters (single bonds and clusters without a cut vertex); the search then
        skips the clusters that cannot grow into one (:func:`hte.enumeration.enumerate_bond_clusters`).
    insertions : int, optional
        Drop the clusters whose linked weights with up to this many magnetisation insertions (0 for ln Z, 2 for
        T chi, 4 for M4) vanish to beta^max_bonds (:mod:`hte.vanishing_weights`), all but a few that a cheap
        bound misses: a census for a series to order max_bonds that classifies far fewer clusters.  None keeps
        them all.
    """
    from hte.errors import ParameterError

    if max_bonds < 1:
        raise ParameterError(f"--max-bonds {max_bonds}: the largest cluster size must be at least 1 bond")
    if not spec.bonds:
        raise ParameterError(f"lattice {spec.name!r} has no bonds left (all couplings are zero?)")
    start = time.perf_counter()
    box = _build_box(spec, max_bonds)
    totals: dict[tuple, int] = {}
    per_size = np.zeros(max_bonds + 1, np.int64)
    results = []

    def report():
        if progress:
            elapsed = time.perf_counter() - start
            progress(f"root bonds done: {len(results)}/{len(jobs)}, {elapsed:.0f} s elapsed")

    if workers <= 1 or box.root_bonds.size == 1:
        jobs = [(box, np.array([root], np.int64), max_bonds, biconnected_only, insertions) for root in box.root_bonds]
        for job in jobs:
            results.append(_census_worker(job))
            report()
    else:
        jobs = [(box, roots, max_bonds, biconnected_only, insertions)
                for roots in _roots_by_work(box, max_bonds, biconnected_only, insertions)]
        with ProcessPoolExecutor(max_workers=min(workers, len(jobs))) as pool:
            for result in as_completed([pool.submit(_census_worker, job) for job in jobs]):
                results.append(result.result())
                report()
    for classes, sizes in results:
        per_size += np.asarray(sizes, np.int64)
        for cert, k in classes:
            totals[cert] = totals.get(cert, 0) + k
    graph_classes = [GraphClass(certificate_key(c), certificate_to_graph(c), k) for c, k in totals.items()]
    graph_classes.sort(key=lambda g: (g.n_bonds, g.n_sites, g.key))
    elapsed = time.perf_counter() - start
    return ClusterCensus(spec.name, max_bonds, spec.n_sites, tuple(spec.site_classes), tuple(spec.labels),
                         graph_classes, [int(x) for x in per_size], elapsed, biconnected_only, insertions)


def count_site_animals(spec: LatticeSpec, max_sites: int) -> list[int]:
    """Connected site clusters with n = 1..max_sites sites, per unit cell (index 0 unused)."""
    box = _build_box(spec, max_sites)
    ptr, nbr = _site_neighbours(box)
    return [int(x) for x in count_site_clusters(max_sites, box.root_sites, ptr, nbr, box.n_sites)]


# ---------------------------------------------------------------------------------------------- subgraphs
def subgraph_certificates(graph: ColouredGraph, root: int | None = None,
                          biconnected_only: bool = False) -> list[tuple[tuple, int]]:
    """(canonical certificate, count) of the connected proper subgraphs of `graph` with >= 1 edge, by class: all of
    them, or those that contain vertex `root`, or only the biconnected ones (count = number of such edge subsets).

    With a root, the edges at the root are numbered first, so every such subset has one of them as its smallest
    edge, and the compiled enumeration rooted at those edges visits each subset once
    (:func:`hte.enumeration.enumerate_bond_clusters`).
    """
    m = graph.n_edges
    if m <= 1:
        return []
    edges = sorted(graph.edges, key=lambda e: root is not None and root not in e[:2])
    n_roots = m if root is None else sum(1 for e in edges if root in e[:2])
    array = np.asarray(edges, np.int64)
    ends = np.concatenate([array[:, 0], array[:, 1]])
    ids = np.concatenate([np.arange(m), np.arange(m)]).astype(np.int64)
    order = np.lexsort((ids, ends))
    pointer = np.zeros(graph.n_vertices + 1, np.int64)
    np.add.at(pointer, ends + 1, 1)
    certs, lengths, counts, _ = enumerate_bond_clusters(
        m - 1, np.arange(n_roots, dtype=np.int64), array[:, 0].copy(), array[:, 1].copy(), array[:, 2].copy(),
        np.asarray(graph.vertex_colours, np.int64), np.cumsum(pointer), ids[order], graph.n_vertices,
        biconnected_only)
    return [(tuple(certs[i, : lengths[i]].tolist()), int(counts[i])) for i in range(counts.size)]


def subgraph_counts(graph: ColouredGraph, biconnected_only: bool = False) -> dict[str, int]:
    """Embedding counts of the connected proper subgraphs of `graph` (only the biconnected ones if asked).

    Returns a map canonical key -> number of connected edge subsets of `graph` (at least one edge, not all
    of them) isomorphic to that class.  Single sites are not included; they are counted by colour with
    :func:`graph.vertex_colours`.  These are the multiplicities needed for subgraph subtraction.
    """
    return {certificate_key(cert): count
            for cert, count in subgraph_certificates(graph, biconnected_only=biconnected_only)}


def default_workers() -> int:
    """Worker processes used by default: the number of usable cores."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - non-Linux
        return os.cpu_count() or 1
