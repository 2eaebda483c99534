r"""The lowest power of beta at which a graph's linked weight can be nonzero, from its bridges.

Every model of hte is symmetric at h = 0 under the global spin flip (pi about x: S^z -> -S^z) and under
rotations about z (U(1)); the field enters the series only through insertions of M = sum_i S_i^z (ln Z: none,
<M^2>_c: two, <M^4>_c: four).  Take a bridge a-b of a graph G with J_ab S_a.S_b between the parts A and B.  The
terms of the weight that use this bond once are the first derivative in J_ab at J_ab = 0, where A and B are
decoupled: beta sum_alpha <S_a^alpha>_A <S_b^alpha>_B, with the field insertions of each side.  By U(1) only
alpha = z survives, and by the spin flip <S_b^z>_B is odd in the field on B: the side needs an odd number of
insertions.  With several bridges used once, each splits the insertions oddly (a part between two such bridges
holds <S^z S^z>, even).  So the bridges used once form a T-join of the bridge tree (the tree whose nodes are the
2-edge-connected components of G and whose edges are its bridges) for a set T of at most k nodes, k the number
of insertions; every other bridge appears at least twice and every bond at least once.  A term of beta^n carries
n bond factors, so the weight of G starts at

    beta^(E + b - P_k),   P_k = the largest T-join of the bridge tree with |T| <= k,

E bonds, b bridges.  P_0 = 0 (ln Z: every bridge twice); P_2 is the length of the longest path of the bridge tree
(T chi); P_4 covers the most bridges with two edge-disjoint paths (M4).  The rule holds for any spins, XXZ
couplings and single-ion terms; it is a lower bound (the coefficient at that order can still vanish).  The tests
check it against full linked weights of random graphs (tests/test_vanishing_weights.py).

:func:`lowest_order` takes a :class:`hte.graph.ColouredGraph`; :func:`lowest_order_of_edges` is its compiled core.
The cluster census uses cheaper bounds of the same rule (:func:`hte.enumeration.enumerate_bond_clusters`).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from hte.graph import ColouredGraph
from hte.low_link import low_links

INSERTIONS = {"lnz": 0, "m2": 2, "m4": 4}
"""Number of magnetisation insertions of each additive quantity (keys of :data:`hte.exact.QUANTITIES`)."""

_ROWS = 18  # rows of the scratch array of lowest_order_of_edges
_NEG = -(1 << 40)


def insertions_for(quantities) -> int:
    """The most insertions among `quantities` (names in :data:`INSERTIONS`): the weights of a graph vanish for
    all of them below the order :func:`lowest_order` gives for this number."""
    return max(INSERTIONS[q] for q in quantities)


@njit(cache=True)
def scratch_for(max_vertices, max_edges):
    """Scratch space of :func:`lowest_order_of_edges` for graphs up to the given size."""
    return np.empty((_ROWS, max(2 * max_edges, max_vertices + 1, 5)), np.int64)  # 5: the merge row


def lowest_order(graph: ColouredGraph, insertions: int) -> int:
    """Lowest power of beta at which the linked weight of the connected `graph` with `insertions` (0, 2 or 4)
    magnetisation insertions can be nonzero: E + b - P_k (module docstring).  A single site gives 0."""
    if graph.n_edges == 0:
        return 0
    eu = np.array([u for u, _, _ in graph.edges], np.int64)
    ev = np.array([v for _, v, _ in graph.edges], np.int64)
    return int(lowest_order_of_edges(graph.n_vertices, graph.n_edges, eu, ev, insertions,
                                     scratch_for(graph.n_vertices, graph.n_edges)))


@njit(cache=True)
def lowest_order_of_edges(nv, ne, eu, ev, insertions, scratch):
    """:func:`lowest_order` of the connected graph on vertices 0..nv-1 with edges (eu[e], ev[e]), e < ne.

    Bridges from Tarjan's low points (:func:`hte.low_link.low_links`), the bridge tree by union-find over the
    other edges, then a dynamic programme over the tree: best[x, j] is the most T-join edges below node x with
    j nodes of T below it (j <= insertions), an edge counting when an odd number of T lies beyond it.  scratch is from
    :func:`scratch_for`."""
    low_links(nv, ne, eu, ev, scratch)
    disc, low, parent_edge, cursor = scratch[2], scratch[3], scratch[4], scratch[5]
    bridge, comp = scratch[6], scratch[7]
    for e in range(ne):
        bridge[e] = 0
    for x in range(1, nv):  # the tree edge into x is a bridge when nothing below x reaches above it
        e = parent_edge[x]
        p = ev[e] if eu[e] == x else eu[e]
        if low[x] > disc[p]:
            bridge[e] = 1
    n_bridges = 0
    for e in range(ne):
        n_bridges += bridge[e]
    if insertions == 0 or n_bridges == 0:
        return ne + n_bridges
    # 2-edge-connected components (union-find over the non-bridges), numbered 0..n_nodes-1
    for x in range(nv):
        comp[x] = x
    for e in range(ne):
        if not bridge[e]:
            a = eu[e]
            while comp[a] != a:
                a = comp[a]
            z = ev[e]
            while comp[z] != z:
                z = comp[z]
            if a != z:
                comp[a] = z
    node, root_of = disc, low  # reused: union-find root -> node number, vertex -> its root
    n_nodes = 0
    for x in range(nv):
        if comp[x] == x:
            node[x] = n_nodes
            n_nodes += 1
    for x in range(nv):
        a = x
        while comp[a] != a:
            a = comp[a]
        root_of[x] = a
    for x in range(nv):
        comp[x] = node[root_of[x]]
    # the bridge tree as neighbour lists, then a depth-first order from node 0
    tptr, tadj, order, tparent = scratch[8], scratch[9], scratch[10], scratch[11]
    for t in range(n_nodes + 1):
        tptr[t] = 0
    for e in range(ne):
        if bridge[e]:
            tptr[comp[eu[e]] + 1] += 1
            tptr[comp[ev[e]] + 1] += 1
    for t in range(n_nodes):
        tptr[t + 1] += tptr[t]
    for t in range(n_nodes):
        cursor[t] = tptr[t]
    for e in range(ne):
        if bridge[e]:
            a = comp[eu[e]]
            z = comp[ev[e]]
            tadj[cursor[a]] = z
            cursor[a] += 1
            tadj[cursor[z]] = a
            cursor[z] += 1
    order[0] = 0
    tparent[0] = -1
    filled = 1
    for i in range(n_nodes):
        t = order[i]
        for p in range(tptr[t], tptr[t + 1]):
            u = tadj[p]
            if u != tparent[t]:
                tparent[u] = t
                order[filled] = u
                filled += 1
    # best[j][t] for j = 0..insertions, children before parents
    best = scratch[12:12 + insertions + 1]
    merged = scratch[17]
    for i in range(n_nodes - 1, -1, -1):
        t = order[i]
        best[0, t] = 0
        best[1, t] = 0  # a node of T at t itself
        for j in range(2, insertions + 1):
            best[j, t] = _NEG
        for p in range(tptr[t], tptr[t + 1]):
            u = tadj[p]
            if u == tparent[t]:
                continue
            for j in range(insertions + 1):
                merged[j] = _NEG
            for j in range(insertions + 1):
                if best[j, t] == _NEG:
                    continue
                for c in range(insertions + 1 - j):
                    if best[c, u] == _NEG:
                        continue
                    v = best[j, t] + best[c, u] + (c & 1)
                    if v > merged[j + c]:
                        merged[j + c] = v
            for j in range(insertions + 1):
                best[j, t] = merged[j]
    covered = 0
    for j in range(0, insertions + 1, 2):
        if best[j, 0] > covered:
            covered = best[j, 0]
    return ne + n_bridges - covered
