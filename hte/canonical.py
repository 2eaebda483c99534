"""Canonical forms of small vertex- and edge-coloured graphs.

The canonical form is computed by individualisation–refinement: colour refinement (1-dimensional
Weisfeiler–Leman, seeded with the vertex colours and refined by the multiset of (neighbour cell, edge colour)
pairs), then branching on every vertex of the first non-singleton cell until the partition is discrete.  Each
discrete partition is a labelling; its *certificate* is the vertex colours in label order followed by the
upper triangle of the coloured adjacency matrix (0 = no edge, c + 1 = edge of colour c).  The canonical form
is the lexicographically smallest certificate over all leaves of the search tree.  Every step depends only on
isomorphism-invariant data, so isomorphic graphs get identical certificates and non-isomorphic graphs differ
(the certificate determines the graph).  It is deterministic across runs and machines, and so keys the weight
cache.

This is the only module that knows how labelling works; the rest of hte uses :func:`canonical_key` and
:func:`canonical_graph`.

References
----------
.. [1] B. D. McKay and A. Piperno, "Practical graph isomorphism, II", J. Symb. Comput. 60, 94 (2014)
   (the individualisation–refinement paradigm; no automorphism pruning is done here).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from hte.graph import ColouredGraph

_MASK = np.uint64(0xFFFFFFFFFFFFFFFF)


@njit(cache=True, inline="always")
def _mix(x):
    """splitmix64 finaliser: a fixed, well-spread 64-bit hash of a 64-bit integer."""
    x = np.uint64(x)
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


@njit(cache=True)
def _rank(keys_hi, keys_lo, out):
    """out[v] = index of (keys_hi[v], keys_lo[v]) among the sorted distinct keys; returns the number of cells."""
    n = keys_hi.shape[0]
    order = np.arange(n)
    # insertion sort: n is small (<= ~30)
    for i in range(1, n):
        j = i
        while j > 0:
            a = order[j - 1]
            b = order[j]
            if keys_hi[a] > keys_hi[b] or (keys_hi[a] == keys_hi[b] and keys_lo[a] > keys_lo[b]):
                order[j - 1] = b
                order[j] = a
                j -= 1
            else:
                break
    cell = 0
    out[order[0]] = 0
    for i in range(1, n):
        a = order[i - 1]
        b = order[i]
        if keys_hi[a] != keys_hi[b] or keys_lo[a] != keys_lo[b]:
            cell += 1
        out[b] = cell
    return cell + 1


@njit(cache=True)
def _refine(cells, n_cells, adj_ptr, adj_nbr, adj_col):
    """Refine `cells` (in place) to a stable partition; returns the number of cells."""
    n = cells.shape[0]
    hi = np.empty(n, np.int64)
    lo = np.empty(n, np.uint64)
    new = np.empty(n, np.int64)
    while True:
        for v in range(n):
            acc = np.uint64(0)
            for p in range(adj_ptr[v], adj_ptr[v + 1]):
                u = adj_nbr[p]
                acc += _mix(np.uint64(cells[u]) * np.uint64(1000003) + np.uint64(adj_col[p]) + np.uint64(1))
            hi[v] = cells[v]
            lo[v] = acc
        m = _rank(hi, lo, new)
        if m == n_cells:
            return n_cells
        for v in range(n):
            cells[v] = new[v]
        n_cells = m
        if n_cells == n:
            return n_cells


@njit(cache=True)
def _certificate(cells, vcol, adjm, out):
    """Write the certificate of the discrete partition `cells` (a labelling) into `out`."""
    n = cells.shape[0]
    inv = np.empty(n, np.int64)
    for v in range(n):
        inv[cells[v]] = v
    k = 0
    out[k] = n
    k += 1
    for i in range(n):
        out[k] = vcol[inv[i]]
        k += 1
    for i in range(n):
        for j in range(i + 1, n):
            out[k] = adjm[inv[i], inv[j]]
            k += 1


@njit(cache=True)
def _less(a, b):
    for i in range(a.shape[0]):
        if a[i] != b[i]:
            return a[i] < b[i]
    return False


@njit(cache=True)
def canonical_certificate(n, vcol, eu, ev, ecol):
    """Canonical certificate (int64 array) and canonical labelling of a coloured graph.

    Parameters
    ----------
    n : int
        Number of vertices (>= 1).
    vcol : int64[n]
        Vertex colours (>= 0).
    eu, ev, ecol : int64[m]
        Edge endpoints and colours (>= 0); no loops or multiple edges.

    Returns
    -------
    cert : int64[1 + n + n(n-1)/2]
        [n, colours in canonical order, upper triangle of the adjacency matrix with entries colour+1].
    labels : int64[n]
        labels[v] = canonical label of input vertex v.
    """
    m = eu.shape[0]
    adjm = np.zeros((n, n), np.int64)
    deg = np.zeros(n + 1, np.int64)
    for e in range(m):
        adjm[eu[e], ev[e]] = ecol[e] + 1
        adjm[ev[e], eu[e]] = ecol[e] + 1
        deg[eu[e] + 1] += 1
        deg[ev[e] + 1] += 1
    adj_ptr = np.cumsum(deg)
    adj_nbr = np.empty(2 * m, np.int64)
    adj_col = np.empty(2 * m, np.int64)
    fill = adj_ptr[:-1].copy()
    for e in range(m):
        a, b = eu[e], ev[e]
        adj_nbr[fill[a]] = b
        adj_col[fill[a]] = ecol[e]
        fill[a] += 1
        adj_nbr[fill[b]] = a
        adj_col[fill[b]] = ecol[e]
        fill[b] += 1

    L = 1 + n + n * (n - 1) // 2
    best = np.empty(L, np.int64)
    cand = np.empty(L, np.int64)
    best_labels = np.zeros(n, np.int64)
    have_best = False

    # search stack: partitions per depth and the position in the target cell being tried
    stack_cells = np.empty((n + 1, n), np.int64)
    stack_ncells = np.empty(n + 1, np.int64)
    stack_target = np.empty(n + 1, np.int64)  # target cell id
    stack_next = np.empty(n + 1, np.int64)  # next vertex index to try (scan position over 0..n-1)

    hi = np.empty(n, np.int64)
    lo = np.zeros(n, np.uint64)
    cells0 = np.empty(n, np.int64)
    for v in range(n):
        hi[v] = vcol[v]
    nc = _rank(hi, lo, cells0)
    nc = _refine(cells0, nc, adj_ptr, adj_nbr, adj_col)
    stack_cells[0, :] = cells0
    stack_ncells[0] = nc
    depth = 0
    stack_next[0] = -1  # marker: node not yet expanded
    work = np.empty(n, np.int64)
    while depth >= 0:
        cells = stack_cells[depth]
        if stack_ncells[depth] == n:
            _certificate(cells, vcol, adjm, cand)
            if (not have_best) or _less(cand, best):
                best[:] = cand
                best_labels[:] = cells
                have_best = True
            depth -= 1
            continue
        if stack_next[depth] == -1:
            # choose the first non-singleton cell (smallest cell id with size > 1)
            size = np.zeros(n, np.int64)
            for v in range(n):
                size[cells[v]] += 1
            t = 0
            while size[t] < 2:
                t += 1
            stack_target[depth] = t
            stack_next[depth] = 0
        t = stack_target[depth]
        v = stack_next[depth]
        while v < n and cells[v] != t:
            v += 1
        if v >= n:
            depth -= 1
            continue
        stack_next[depth] = v + 1
        # individualise v: it precedes the rest of its cell
        for u in range(n):
            hi[u] = 2 * cells[u] + (0 if u == v else 1)
            lo[u] = 0
        c = _rank(hi, lo, work)
        c = _refine(work, c, adj_ptr, adj_nbr, adj_col)
        depth += 1
        stack_cells[depth, :] = work
        stack_ncells[depth] = c
        stack_next[depth] = -1
    return best, best_labels


def _arrays(graph: ColouredGraph):
    vcol = np.asarray(graph.vertex_colours, dtype=np.int64)
    if graph.edges:
        e = np.asarray(graph.edges, dtype=np.int64)
        return vcol, e[:, 0].copy(), e[:, 1].copy(), e[:, 2].copy()
    empty = np.zeros(0, np.int64)
    return vcol, empty, empty.copy(), empty.copy()


def certificate_to_graph(cert) -> ColouredGraph:
    """Rebuild the canonically labelled graph from a certificate."""
    cert = [int(x) for x in cert]
    n = cert[0]
    colours = tuple(cert[1 : 1 + n])
    edges = []
    k = 1 + n
    for i in range(n):
        for j in range(i + 1, n):
            if cert[k]:
                edges.append((i, j, cert[k] - 1))
            k += 1
    return ColouredGraph(n, colours, tuple(edges))


def certificate_key(cert) -> str:
    """Readable, stable text key of a certificate: ``n|colours|u-v:c,...`` in canonical labels."""
    g = certificate_to_graph(cert)
    colours = ".".join(str(c) for c in g.vertex_colours)
    edges = ",".join(f"{u}-{v}:{c}" for u, v, c in g.edges)
    return f"{g.n_vertices}|{colours}|{edges}"


def canonical_graph(graph: ColouredGraph) -> tuple[ColouredGraph, list[int]]:
    """The canonically relabelled copy of `graph` and the map old vertex -> canonical label."""
    cert, labels = canonical_certificate(graph.n_vertices, *_arrays(graph))
    return certificate_to_graph(cert), [int(x) for x in labels]


def canonical_key(graph: ColouredGraph) -> str:
    """Canonical text key: equal for two graphs exactly when they are isomorphic as coloured graphs."""
    cert, _ = canonical_certificate(graph.n_vertices, *_arrays(graph))
    return certificate_key(cert)


def key_to_graph(key: str) -> ColouredGraph:
    """Inverse of :func:`certificate_key`: the canonically labelled graph a key stands for."""
    n_text, colours_text, edges_text = key.split("|")
    n = int(n_text)
    colours = tuple(int(c) for c in colours_text.split(".")) if n else ()
    edges = []
    if edges_text:
        for item in edges_text.split(","):
            pair, colour = item.split(":")
            u, v = pair.split("-")
            edges.append((int(u), int(v), int(colour)))
    return ColouredGraph(n, colours, tuple(edges))
