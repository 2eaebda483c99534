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

Automorphism pruning skips only subtrees that an automorphism maps onto an already explored subtree, so the
set of certificates met, hence the canonical form, is that of the full search tree; the returned labelling is
that of the first smallest leaf in search order, as without pruning.  Two prunings are used [1]: when a leaf
has the certificate of an earlier leaf, the map between the two labellings is an automorphism that fixes the
common path and maps the earlier branch onto the current one, so the search returns to where the two paths
part; and at each node a vertex is skipped when an automorphism found so far that fixes the node's path
pointwise maps an earlier vertex of the target cell onto it.

This is the only module that knows how labelling works; the rest of hte uses :func:`canonical_key` and
:func:`canonical_graph`.  Compiled callers that classify many graphs allocate one
:class:`CanonicalWorkspace` with :func:`new_workspace`, write each graph into the views of
:func:`workspace_inputs` and call :func:`canonical_into`.

References
----------
.. [1] B. D. McKay and A. Piperno, "Practical graph isomorphism, II", J. Symb. Comput. 60, 94 (2014)
   (the individualisation–refinement paradigm and automorphism pruning).
"""

from __future__ import annotations

from collections import namedtuple

import numpy as np
from numba import njit

from hte.graph import ColouredGraph

CanonicalWorkspace = namedtuple("CanonicalWorkspace", ["vectors", "matrix", "hash_key"])
"""Preallocated buffers of :func:`canonical_into` for graphs of up to N vertices and M edges.

``vectors`` is int64[rows, W] with one row per buffer named by the ``_ROW`` constants below (the input graph,
neighbour lists, sort buffers, the search stack, certificates, paths and labellings); ``matrix`` is
int64[4N + 1, N] holding the coloured adjacency matrix (rows 0..N-1), the partition at each search depth
(rows N..2N) and the automorphisms found (rows 2N+1..4N); ``hash_key`` is uint64[N].  Few arrays, because
each array passed to a compiled function costs a reference-count update per call.
"""

# rows of CanonicalWorkspace.vectors
_VCOL, _EU, _EV, _ECOL = 0, 1, 2, 3              # the input graph: vertex colours, edge ends and colours
_PTR, _NBR, _COL = 4, 5, 6                       # CSR neighbour lists (offsets, neighbours, edge colours)
_ORDER, _SCRATCH = 7, 8                          # vertices sorted by cell; counting sort and inverse maps
_NCELLS, _TARGET, _NEXT, _PATH = 9, 10, 11, 12   # per depth: number of cells, target cell, next vertex to
                                                 # try (-1 = node not expanded), vertex individualised
_CAND, _BEST, _FIRST = 13, 14, 15                # certificates: current leaf, smallest so far, first leaf
_BEST_LABELS, _BEST_PATH = 16, 17                # labelling and path of the smallest leaf
_FIRST_LABELS, _FIRST_PATH = 18, 19              # labelling and path of the first leaf
_ORBIT = 20                                      # union-find forest of orbits
_NEW_CELL, _NEW_END = 21, 22                     # refinement: cells of the next round and their ends
_N_ROWS = 23


@njit(cache=True)
def new_workspace(max_vertices, max_edges):
    """A :class:`CanonicalWorkspace` for graphs with at most `max_vertices` vertices and `max_edges` edges."""
    n = max(max_vertices, 1)
    width = max(1 + n + n * (n - 1) // 2, 2 * max_edges, n + 1)
    return CanonicalWorkspace(np.zeros((_N_ROWS, width), np.int64), np.zeros((4 * n + 1, n), np.int64),
                              np.zeros(n, np.uint64))


@njit(cache=True)
def workspace_inputs(ws):
    """Views (vertex colours, edge ends u, v, edge colours) into which a caller writes the input graph."""
    vectors = ws.vectors
    return vectors[_VCOL], vectors[_EU], vectors[_EV], vectors[_ECOL]


@njit(cache=True)
def workspace_result(ws):
    """Views (certificate, labelling) of the last result; the first L and n entries are valid."""
    return ws.vectors[_BEST], ws.vectors[_BEST_LABELS]


@njit(cache=True, inline="always")
def _mix(x):
    """splitmix64 finaliser: a fixed, well-spread 64-bit hash of a 64-bit integer."""
    x = np.uint64(x)
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


@njit(cache=True, inline="always")
def _load_graph(vec, adjacency, n, m):
    """Fill the adjacency matrix and the CSR neighbour lists from the input rows."""
    for i in range(n):
        for j in range(n):
            adjacency[i, j] = 0
    for v in range(n + 1):
        vec[_PTR, v] = 0
    for e in range(m):
        a = vec[_EU, e]
        b = vec[_EV, e]
        adjacency[a, b] = vec[_ECOL, e] + 1
        adjacency[b, a] = vec[_ECOL, e] + 1
        vec[_PTR, a + 1] += 1
        vec[_PTR, b + 1] += 1
    for v in range(n):
        vec[_PTR, v + 1] += vec[_PTR, v]
        vec[_SCRATCH, v] = vec[_PTR, v]
    for e in range(m):
        a = vec[_EU, e]
        b = vec[_EV, e]
        vec[_NBR, vec[_SCRATCH, a]] = b
        vec[_COL, vec[_SCRATCH, a]] = vec[_ECOL, e]
        vec[_SCRATCH, a] += 1
        vec[_NBR, vec[_SCRATCH, b]] = a
        vec[_COL, vec[_SCRATCH, b]] = vec[_ECOL, e]
        vec[_SCRATCH, b] += 1


@njit(cache=True, inline="always")
def _colour_cells(vec, mat, row, n):
    """mat[row, v] = rank of the colour of v among the distinct vertex colours; returns the number of cells."""
    for i in range(n):  # insertion sort by colour: n is small
        a = i
        j = i
        while j > 0 and vec[_VCOL, vec[_ORDER, j - 1]] > vec[_VCOL, a]:
            vec[_ORDER, j] = vec[_ORDER, j - 1]
            j -= 1
        vec[_ORDER, j] = a
    cell = 0
    mat[row, vec[_ORDER, 0]] = 0
    for i in range(1, n):
        if vec[_VCOL, vec[_ORDER, i]] != vec[_VCOL, vec[_ORDER, i - 1]]:
            cell += 1
        mat[row, vec[_ORDER, i]] = cell
    return cell + 1


@njit(cache=True, inline="always")
def _refine(vec, mat, key, row, n, n_cells):
    """Refine the partition mat[row, :n] (cell of each vertex) in place to the stable one; returns its size.

    Each round gives every vertex the hash sum of mix(cell(u) * 1000003 + colour(v, u) + 1) over its
    neighbours u and ranks the vertices by (cell, hash sum); it stops when no cell splits.  Only the ranks
    enter the result, so vertices in singleton cells need no hash.  vec[_ORDER] lists the vertices by cell and
    vec[_SCRATCH, c] is the end of cell c in it; both stay valid from round to round, since the new cells
    keep the order of the old ones.
    """
    if n_cells >= n:
        return n_cells
    # counting sort by cell
    for c in range(n_cells + 1):
        vec[_SCRATCH, c] = 0
    for v in range(n):
        vec[_SCRATCH, mat[row, v] + 1] += 1
    for c in range(n_cells):
        vec[_SCRATCH, c + 1] += vec[_SCRATCH, c]
    for v in range(n):
        c = mat[row, v]
        vec[_ORDER, vec[_SCRATCH, c]] = v
        vec[_SCRATCH, c] += 1
    while True:
        # hash and sort the vertices of each non-singleton cell; number the new cells as they come
        new_cells = 0
        lo = 0
        for c in range(n_cells):
            hi = vec[_SCRATCH, c]
            if hi - lo > 1:
                for i in range(lo, hi):
                    v = vec[_ORDER, i]
                    acc = np.uint64(0)
                    for p in range(vec[_PTR, v], vec[_PTR, v + 1]):
                        acc += _mix(np.uint64(mat[row, vec[_NBR, p]]) * np.uint64(1000003)
                                    + np.uint64(vec[_COL, p]) + np.uint64(1))
                    key[v] = acc
                for i in range(lo + 1, hi):
                    a = vec[_ORDER, i]
                    j = i
                    while j > lo and key[vec[_ORDER, j - 1]] > key[a]:
                        vec[_ORDER, j] = vec[_ORDER, j - 1]
                        j -= 1
                    vec[_ORDER, j] = a
                vec[_NEW_CELL, vec[_ORDER, lo]] = new_cells
                for i in range(lo + 1, hi):
                    if key[vec[_ORDER, i]] != key[vec[_ORDER, i - 1]]:
                        vec[_NEW_END, new_cells] = i
                        new_cells += 1
                    vec[_NEW_CELL, vec[_ORDER, i]] = new_cells
            else:
                vec[_NEW_CELL, vec[_ORDER, lo]] = new_cells
            vec[_NEW_END, new_cells] = hi
            new_cells += 1
            lo = hi
        if new_cells == n_cells:
            return n_cells
        for v in range(n):
            mat[row, v] = vec[_NEW_CELL, v]
        for c in range(new_cells):
            vec[_SCRATCH, c] = vec[_NEW_END, c]
        n_cells = new_cells
        if n_cells == n:
            return n_cells


@njit(cache=True, inline="always")
def _write_certificate(vec, mat, row, n, out):
    """Write the certificate of the discrete partition mat[row, :n] (a labelling) into vec[out, :L]."""
    for v in range(n):
        vec[_SCRATCH, mat[row, v]] = v
    vec[out, 0] = n
    k = 1
    for i in range(n):
        vec[out, k] = vec[_VCOL, vec[_SCRATCH, i]]
        k += 1
    for i in range(n):
        a = vec[_SCRATCH, i]
        for j in range(i + 1, n):
            vec[out, k] = mat[a, vec[_SCRATCH, j]]
            k += 1


@njit(cache=True, inline="always")
def _compare(vec, a, b, length):
    """-1, 0 or 1 as the certificate in row a is lexicographically below, equal to or above the one in row b."""
    for i in range(length):
        x = vec[a, i]
        y = vec[b, i]
        if x != y:
            return -1 if x < y else 1
    return 0


@njit(cache=True, inline="always")
def _store_leaf(vec, mat, row, depth, n, length, cert_row, labels_row, path_row):
    """Copy the certificate, labelling and path of the current leaf into the given rows."""
    for i in range(length):
        vec[cert_row, i] = vec[_CAND, i]
    for v in range(n):
        vec[labels_row, v] = mat[row, v]
    for i in range(depth):
        vec[path_row, i] = vec[_PATH, i]


@njit(cache=True, inline="always")
def _find(vec, v):
    while vec[_ORBIT, v] != v:
        vec[_ORBIT, v] = vec[_ORBIT, vec[_ORBIT, v]]
        v = vec[_ORBIT, v]
    return v


@njit(cache=True)
def _pruned(vec, mat, row, n, depth, n_generators, generator_row, t, v):
    """True if an automorphism found so far that fixes the path to `depth` maps a vertex u < v of cell t onto v."""
    for u in range(n):
        vec[_ORBIT, u] = u
    for g in range(generator_row, generator_row + n_generators):
        fixes = True
        for i in range(depth):
            if mat[g, vec[_PATH, i]] != vec[_PATH, i]:
                fixes = False
                break
        if fixes:
            for u in range(n):
                a = _find(vec, u)
                b = _find(vec, mat[g, u])
                if a != b:
                    vec[_ORBIT, max(a, b)] = min(a, b)
    root = _find(vec, v)
    for u in range(v):
        if mat[row, u] == t and _find(vec, u) == root:
            return True
    return False


@njit(cache=True)
def canonical_into(ws, n, m):
    """Canonical certificate of the coloured graph written into the workspace inputs.

    Parameters
    ----------
    ws : CanonicalWorkspace
        From :func:`new_workspace`, large enough for the graph; the caller has written the vertex colours and
        the edges into the views of :func:`workspace_inputs`.
    n, m : int
        Number of vertices and of edges of the input graph.

    Returns
    -------
    int
        The certificate length L = 1 + n + n(n-1)/2.  The certificate and the canonical labelling are the
        first L and n entries of the views of :func:`workspace_result`, valid until the next call.
    """
    vec, mat, key = ws.vectors, ws.matrix, ws.hash_key
    length = 1 + n + n * (n - 1) // 2
    if n == 0:
        vec[_BEST, 0] = 0
        return length
    stack = mat.shape[1]           # row of the partition at depth d: stack + d
    generator_row = 2 * stack + 1  # first row of the automorphisms
    max_generators = mat.shape[0] - generator_row
    _load_graph(vec, mat, n, m)
    n_cells = _colour_cells(vec, mat, stack, n)
    n_cells = _refine(vec, mat, key, stack, n, n_cells)
    if n_cells == n:  # discrete at the root: a single leaf
        _write_certificate(vec, mat, stack, n, _BEST)
        for v in range(n):
            vec[_BEST_LABELS, v] = mat[stack, v]
        return length

    n_generators = 0
    have_leaf = False
    best_depth = 0
    first_depth = 0
    vec[_NCELLS, 0] = n_cells
    vec[_NEXT, 0] = -1
    depth = 0
    while depth >= 0:
        row = stack + depth
        if vec[_NCELLS, depth] == n:
            _write_certificate(vec, mat, row, n, _CAND)
            if not have_leaf:
                have_leaf = True
                _store_leaf(vec, mat, row, depth, n, length, _BEST, _BEST_LABELS, _BEST_PATH)
                _store_leaf(vec, mat, row, depth, n, length, _FIRST, _FIRST_LABELS, _FIRST_PATH)
                best_depth = depth
                first_depth = depth
                depth -= 1
                continue
            relation = _compare(vec, _CAND, _BEST, length)
            if relation < 0:
                _store_leaf(vec, mat, row, depth, n, length, _BEST, _BEST_LABELS, _BEST_PATH)
                best_depth = depth
                depth -= 1
                continue
            if relation == 0:
                twin_labels, twin_path, twin_depth = _BEST_LABELS, _BEST_PATH, best_depth
            elif _compare(vec, _CAND, _FIRST, length) == 0:
                twin_labels, twin_path, twin_depth = _FIRST_LABELS, _FIRST_PATH, first_depth
            else:
                depth -= 1
                continue
            # an automorphism: vertex of label L at the earlier leaf -> vertex of label L here
            if n_generators < max_generators:
                g = generator_row + n_generators
                for v in range(n):
                    vec[_SCRATCH, mat[row, v]] = v
                for v in range(n):
                    mat[g, v] = vec[_SCRATCH, vec[twin_labels, v]]
                n_generators += 1
            # it fixes the common path and maps the earlier branch onto this one: resume where they part
            split = 0
            while split < depth and split < twin_depth and vec[_PATH, split] == vec[twin_path, split]:
                split += 1
            depth = split
            continue
        if vec[_NEXT, depth] == -1:
            # target: the first non-singleton cell (smallest cell id with two or more vertices)
            for c in range(n):
                vec[_SCRATCH, c] = 0
            for v in range(n):
                vec[_SCRATCH, mat[row, v]] += 1
            t = 0
            while vec[_SCRATCH, t] < 2:
                t += 1
            vec[_TARGET, depth] = t
            vec[_NEXT, depth] = 0
        t = vec[_TARGET, depth]
        v = vec[_NEXT, depth]
        while v < n and (mat[row, v] != t or (
                n_generators > 0 and _pruned(vec, mat, row, n, depth, n_generators, generator_row, t, v))):
            v += 1
        if v >= n:
            depth -= 1
            continue
        vec[_NEXT, depth] = v + 1
        vec[_PATH, depth] = v
        # individualise v: it goes in front of the rest of its cell; later cells shift by one
        for u in range(n):
            c = mat[row, u]
            mat[row + 1, u] = c if c < t else c + 1
        mat[row + 1, v] = t
        vec[_NCELLS, depth + 1] = _refine(vec, mat, key, row + 1, n, vec[_NCELLS, depth] + 1)
        depth += 1
        vec[_NEXT, depth] = -1
    return length


@njit(cache=True)
def canonical_certificate(n, vcol, eu, ev, ecol):
    """Canonical certificate (int64 array) and canonical labelling of a coloured graph.

    Parameters
    ----------
    n : int
        Number of vertices (>= 0).
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
    ws = new_workspace(n, m)
    colours, ends_u, ends_v, edge_colours = workspace_inputs(ws)
    colours[:n] = vcol
    ends_u[:m] = eu
    ends_v[:m] = ev
    edge_colours[:m] = ecol
    length = canonical_into(ws, n, m)
    cert, labels = workspace_result(ws)
    return cert[:length].copy(), labels[:n].copy()


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
