"""Tarjan's low-link depth-first search on a small connected graph given as edge arrays (compiled).

Shared by the cut-vertex test of the biconnected census (:mod:`hte.enumeration`) and the bridge count of
:mod:`hte.vanishing_weights`: the search fills discovery times, low points and tree edges, and each caller reads
off what it needs (a tree edge x-p is a bridge when low[x] > disc[p]; p != root is a cut vertex when some child
x has low[x] >= disc[p]; the root is one when it has two children).

References
----------
.. [1] R. E. Tarjan, "Depth-first search and linear graph algorithms", SIAM J. Comput. 1, 146 (1972).
"""

from __future__ import annotations

from numba import njit


@njit(cache=True)
def low_links(nv, ne, eu, ev, scratch):
    """Depth-first search from vertex 0 of the graph on vertices 0..nv-1 with edges (eu[e], ev[e]), e < ne
    (parallel edges are told apart by their ids).  scratch is int64[>= 6, >= max(nv + 1, 2 ne)]; on return its
    rows hold 0: CSR offsets, 1: incident edge ids, 2: discovery time (-1 if not reached), 3: low point,
    4: the tree edge into each vertex (-1 at vertex 0), 5: work space.  Returns the number of vertices reached."""
    ptr, adj, disc, low, parent_edge, cursor = scratch[0], scratch[1], scratch[2], scratch[3], scratch[4], scratch[5]
    for x in range(nv + 1):
        ptr[x] = 0
    for e in range(ne):
        ptr[eu[e] + 1] += 1
        ptr[ev[e] + 1] += 1
    for x in range(nv):
        ptr[x + 1] += ptr[x]
    for x in range(nv):
        cursor[x] = ptr[x]
    for e in range(ne):
        adj[cursor[eu[e]]] = e
        cursor[eu[e]] += 1
        adj[cursor[ev[e]]] = e
        cursor[ev[e]] += 1
    for x in range(nv):
        disc[x] = -1
        cursor[x] = ptr[x]
    # the depth-first path is kept implicitly: parent_edge[x] leads back from x towards vertex 0
    disc[0] = 0
    low[0] = 0
    parent_edge[0] = -1
    clock = 1
    x = 0
    while True:
        if cursor[x] < ptr[x + 1]:
            e = adj[cursor[x]]
            cursor[x] += 1
            if e == parent_edge[x]:
                continue
            y = ev[e] if eu[e] == x else eu[e]
            if disc[y] < 0:
                disc[y] = clock
                low[y] = clock
                clock += 1
                parent_edge[y] = e
                x = y
            elif disc[y] < low[x]:
                low[x] = disc[y]
        else:
            if x == 0:
                break
            e = parent_edge[x]
            p = ev[e] if eu[e] == x else eu[e]
            if low[x] < low[p]:
                low[p] = low[x]
            x = p
    return clock
