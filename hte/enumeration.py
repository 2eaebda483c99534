"""Compiled enumeration of connected bond clusters and site clusters (Redelmeier's algorithm).

Works on a finite "bond graph" given as flat arrays: sites with colours, bonds with endpoints and colours and
an integer order (the bond id).  Starting from a root bond, every connected set of bonds that contains the
root and otherwise only bonds with larger ids is visited exactly once; no subset is generated twice and
nothing is deduplicated afterwards.  On a lattice (see :mod:`hte.clusters`) the ids order bonds by the
lexicographic order of their home cell, which is translation compatible, so rooting at the bonds of one cell
counts each cluster exactly once per translation class.  Each visited cluster is classified on the fly by
its canonical certificate (:mod:`hte.canonical`) into a hash table of arrays held inside the compiled code.

References
----------
.. [1] D. H. Redelmeier, "Counting polyominoes: yet another attack", Discrete Math. 36, 191 (1981).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from hte.canonical import canonical_into, new_workspace, workspace_inputs, workspace_result


@njit(cache=True, inline="always")
def _certificate_hash(cert, length):
    """A 64-bit hash of cert[:length] (splitmix64 of each non-zero entry and its position, summed)."""
    h = np.uint64(length)
    for i in range(length):
        if cert[i] != 0:
            x = np.uint64(i) * np.uint64(1000003) + np.uint64(cert[i])
            x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
            x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
            h += x ^ (x >> np.uint64(31))
    return h


@njit(cache=True, inline="always")
def _lookup(slots, class_hash, certs, lengths, cert, length, h):
    """Slot of the class of cert[:length] in the open-addressing table `slots`, or of the empty slot for it."""
    mask = slots.shape[0] - 1
    slot = np.int64(h & np.uint64(mask))
    while True:
        k = slots[slot]
        if k < 0:
            return slot
        if class_hash[k] == h and lengths[k] == length:
            same = True
            for i in range(length):
                if certs[k, i] != cert[i]:
                    same = False
                    break
            if same:
                return slot
        slot = (slot + 1) & mask


@njit(cache=True)
def _grown_slots(class_hash, n_classes, capacity):
    """A fresh slot table of `capacity` (a power of 2) holding classes 0..n_classes-1."""
    slots = -np.ones(capacity, np.int64)
    for k in range(n_classes):
        slot = np.int64(class_hash[k] & np.uint64(capacity - 1))
        while slots[slot] >= 0:
            slot = (slot + 1) & (capacity - 1)
        slots[slot] = k
    return slots


@njit(cache=True)
def _grown_rows(certs, lengths, counts, class_hash):
    """The per-class arrays with twice the rows."""
    rows = 2 * certs.shape[0]
    new_certs = np.zeros((rows, certs.shape[1]), np.int64)
    new_certs[: certs.shape[0]] = certs
    new_lengths = np.zeros(rows, np.int64)
    new_lengths[: lengths.shape[0]] = lengths
    new_counts = np.zeros(rows, np.int64)
    new_counts[: counts.shape[0]] = counts
    new_hash = np.zeros(rows, np.uint64)
    new_hash[: class_hash.shape[0]] = class_hash
    return new_certs, new_lengths, new_counts, new_hash


@njit(cache=True)
def enumerate_bond_clusters(max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, n_sites):
    """Visit every connected bond cluster of <= max_bonds bonds whose smallest bond id is one of `roots`.

    Returns
    -------
    certs : int64[k, L]
        Canonical certificates of the k graph classes met; row i holds certificate i in its first lengths[i]
        entries.
    lengths : int64[k]
        Certificate lengths.
    counts : int64[k]
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
    seg_end = np.empty(max_bonds + 2, np.int64)
    seg_pos = np.empty(max_bonds + 2, np.int64)
    seg_new = np.empty(max_bonds + 2, np.int64)
    ws = new_workspace(max_bonds + 1, max_bonds)
    vcol, eu, ev, ec = workspace_inputs(ws)
    best, _ = workspace_result(ws)

    # the graph classes: an open-addressing hash table of class indices, kept at most half full
    n_vertices = max_bonds + 1
    certs = np.zeros((64, 1 + n_vertices + n_vertices * (n_vertices - 1) // 2), np.int64)
    lengths = np.zeros(64, np.int64)
    counts = np.zeros(64, np.int64)
    class_hash = np.zeros(64, np.uint64)
    slots = -np.ones(128, np.int64)
    n_classes = 0
    per_size = np.zeros(max_bonds + 1, np.int64)

    for r in range(roots.shape[0]):
        root = roots[r]
        reached[root] = True
        nv = 0
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
            h = _certificate_hash(best, length)
            slot = _lookup(slots, class_hash, certs, lengths, best, length, h)
            if slots[slot] >= 0:
                counts[slots[slot]] += 1
            else:
                if n_classes == certs.shape[0]:
                    certs, lengths, counts, class_hash = _grown_rows(certs, lengths, counts, class_hash)
                certs[n_classes, :length] = best[:length]
                lengths[n_classes] = length
                counts[n_classes] = 1
                class_hash[n_classes] = h
                slots[slot] = n_classes
                n_classes += 1
                if 2 * n_classes > slots.shape[0]:
                    slots = _grown_slots(class_hash, n_classes, 2 * slots.shape[0])
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
    return certs[:n_classes], lengths[:n_classes], counts[:n_classes], per_size


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
