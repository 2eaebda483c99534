"""Compiled enumeration of connected bond clusters and site clusters (Redelmeier's algorithm).

Works on a finite "bond graph" given as flat arrays: sites with colours, bonds with endpoints and colours and
an integer order (the bond id).  Starting from a root bond, every connected set of bonds that contains the
root and otherwise only bonds with larger ids is visited exactly once; no subset is generated twice and
nothing is deduplicated afterwards.  On a lattice (see :mod:`hte.clusters`) the ids order bonds by the
lexicographic order of their home cell, which is translation compatible, so rooting at the bonds of one cell
counts each cluster exactly once per translation class.  Each visited cluster is classified on the fly by
its canonical certificate (:mod:`hte.canonical`) into a hash table held inside the compiled code.

References
----------
.. [1] D. H. Redelmeier, "Counting polyominoes: yet another attack", Discrete Math. 36, 191 (1981).
"""

from __future__ import annotations

import numpy as np
from numba import njit, types
from numba.typed import Dict, List

from hte.canonical import canonical_into, new_workspace, workspace_inputs, workspace_result


@njit(cache=True)
def _hash_cert(cert):
    h = np.uint64(1469598103934665603)
    for x in cert:
        h = (h ^ np.uint64(x + 7)) * np.uint64(1099511628211)
        h ^= h >> np.uint64(29)
    return np.int64(h & np.uint64(0x7FFFFFFFFFFFFFFF))


@njit(cache=True)
def _same(a, b):
    if a.shape[0] != b.shape[0]:
        return False
    for i in range(a.shape[0]):
        if a[i] != b[i]:
            return False
    return True


@njit(cache=True)
def _classify(cert, table, certs, counts):
    """Add one occurrence of `cert` to the class table (open addressing on a 63-bit hash, exact compare)."""
    h = _hash_cert(cert)
    while True:
        if h not in table:
            table[h] = len(certs)
            certs.append(cert.copy())
            counts.append(1)
            return
        idx = table[h]
        if _same(certs[idx], cert):
            counts[idx] += 1
            return
        h = (h + 1) & 0x7FFFFFFFFFFFFFFF


@njit(cache=True)
def enumerate_bond_clusters(max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, n_sites):
    """Visit every connected bond cluster of <= max_bonds bonds whose smallest bond id is one of `roots`.

    Returns
    -------
    certs : list of int64 arrays
        Canonical certificates of the graph classes met.
    counts : list of int
        Number of clusters in each class.
    per_size : int64[max_bonds + 1]
        Number of clusters with n bonds.
    """
    n_bonds = bond_u.shape[0]
    max_deg = 0
    for s in range(n_sites):
        d = inc_ptr[s + 1] - inc_ptr[s]
        if d > max_deg:
            max_deg = d
    reached = np.zeros(n_bonds, np.bool_)
    local = -np.ones(n_sites, np.int64)
    refc = np.zeros(n_sites, np.int64)
    verts = np.empty(max_bonds + 2, np.int64)
    cluster = np.empty(max_bonds + 1, np.int64)
    buf = np.empty((max_bonds + 2) * (2 * max_deg * (max_bonds + 1) + 2), np.int64)
    seg_start = np.empty(max_bonds + 2, np.int64)
    seg_end = np.empty(max_bonds + 2, np.int64)
    seg_pos = np.empty(max_bonds + 2, np.int64)
    seg_new = np.empty(max_bonds + 2, np.int64)
    ws = new_workspace(max_bonds + 1, max_bonds)
    vcol, eu, ev, ec = workspace_inputs(ws)
    best, _ = workspace_result(ws)

    table = Dict.empty(key_type=types.int64, value_type=types.int64)
    certs = List()
    certs.append(np.zeros(1, np.int64))
    certs.pop()
    counts = List()
    counts.append(0)
    counts.pop()
    per_size = np.zeros(max_bonds + 1, np.int64)

    for r in range(roots.shape[0]):
        root = roots[r]
        reached[root] = True
        nv = 0
        size = 0
        buf[0] = root
        seg_start[0] = 0
        seg_end[0] = 1
        seg_pos[0] = 0
        seg_new[0] = 1
        d = 0
        while d >= 0:
            if seg_pos[d] == seg_end[d]:
                for k in range(seg_new[d], seg_end[d]):
                    reached[buf[k]] = False
                d -= 1
                if d >= 0:
                    # pop the bond chosen at level d
                    size -= 1
                    b = cluster[size]
                    for s in (bond_u[b], bond_v[b]):
                        refc[s] -= 1
                        if refc[s] == 0:
                            local[s] = -1
                            nv -= 1
                continue
            b = buf[seg_pos[d]]
            seg_pos[d] += 1
            cluster[size] = b
            size += 1
            for s in (bond_u[b], bond_v[b]):
                if refc[s] == 0:
                    local[s] = nv
                    verts[nv] = s
                    nv += 1
                refc[s] += 1
            # classify
            for k in range(nv):
                vcol[k] = site_col[verts[k]]
            for k in range(size):
                c = cluster[k]
                a = local[bond_u[c]]
                z = local[bond_v[c]]
                if a < z:
                    eu[k] = a
                    ev[k] = z
                else:
                    eu[k] = z
                    ev[k] = a
                ec[k] = bond_col[c]
            length = canonical_into(ws, nv, size)
            _classify(best[:length], table, certs, counts)
            per_size[size] += 1
            if size < max_bonds:
                ns = seg_end[d]
                k = ns
                for q in range(seg_pos[d], seg_end[d]):
                    buf[k] = buf[q]
                    k += 1
                newstart = k
                for s in (bond_u[b], bond_v[b]):
                    for p in range(inc_ptr[s], inc_ptr[s + 1]):
                        f = inc_bond[p]
                        if f > root and not reached[f]:
                            reached[f] = True
                            buf[k] = f
                            k += 1
                d += 1
                seg_start[d] = ns
                seg_end[d] = k
                seg_pos[d] = ns
                seg_new[d] = newstart
            else:
                size -= 1
                for s in (bond_u[b], bond_v[b]):
                    refc[s] -= 1
                    if refc[s] == 0:
                        local[s] = -1
                        nv -= 1
        reached[root] = False
    return certs, counts, per_size


@njit(cache=True)
def count_site_clusters(max_sites, roots, nbr_ptr, nbr_site, n_sites):
    """Number of connected site clusters with n sites (n = 1..max_sites) whose smallest site id is a root."""
    max_deg = 0
    for s in range(n_sites):
        d = nbr_ptr[s + 1] - nbr_ptr[s]
        if d > max_deg:
            max_deg = d
    reached = np.zeros(n_sites, np.bool_)
    buf = np.empty((max_sites + 2) * (max_deg * (max_sites + 1) + 2), np.int64)
    seg_end = np.empty(max_sites + 2, np.int64)
    seg_pos = np.empty(max_sites + 2, np.int64)
    seg_new = np.empty(max_sites + 2, np.int64)
    per_size = np.zeros(max_sites + 1, np.int64)
    for r in range(roots.shape[0]):
        root = roots[r]
        reached[root] = True
        size = 0
        buf[0] = root
        seg_end[0] = 1
        seg_pos[0] = 0
        seg_new[0] = 1
        d = 0
        while d >= 0:
            if seg_pos[d] == seg_end[d]:
                for k in range(seg_new[d], seg_end[d]):
                    reached[buf[k]] = False
                d -= 1
                if d >= 0:
                    size -= 1
                continue
            s = buf[seg_pos[d]]
            seg_pos[d] += 1
            size += 1
            per_size[size] += 1
            if size < max_sites:
                ns = seg_end[d]
                k = ns
                for q in range(seg_pos[d], seg_end[d]):
                    buf[k] = buf[q]
                    k += 1
                newstart = k
                for p in range(nbr_ptr[s], nbr_ptr[s + 1]):
                    f = nbr_site[p]
                    if f > root and not reached[f]:
                        reached[f] = True
                        buf[k] = f
                        k += 1
                d += 1
                seg_end[d] = k
                seg_pos[d] = ns
                seg_new[d] = newstart
            else:
                size -= 1
        reached[root] = False
    return per_size
