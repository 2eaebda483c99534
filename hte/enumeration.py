"""Compiled enumeration of connected bond clusters and site clusters (Redelmeier's algorithm).

Works on a finite "bond graph" given as flat arrays: sites with colours, bonds with endpoints and colours and
an integer order (the bond id).  Starting from a root bond, every connected set of bonds that contains the
root and otherwise only bonds with larger ids is visited exactly once; no subset is generated twice and
nothing is deduplicated afterwards.  On a lattice (see :mod:`hte.clusters`) the ids order bonds by the
lexicographic order of their home cell, which is translation compatible, so rooting at the bonds of one cell
counts each cluster exactly once per translation class.  Each cluster is classified on the fly into a hash
table of canonical certificates (:mod:`hte.canonical`) held inside the compiled code: from the class and
canonical labelling of the cluster one bond smaller and the canonical labels of the added bond, through a
memo, so that only the first cluster of each such extension is canonicalised.

References
----------
.. [1] D. H. Redelmeier, "Counting polyominoes: yet another attack", Discrete Math. 36, 191 (1981).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from hte.canonical import canonical_into, new_workspace, workspace_inputs, workspace_result
from hte.low_link import low_links
from hte.vanishing_weights import lowest_order_of_edges, scratch_for


@njit(cache=True, inline="always")
def _splitmix(x):
    """The splitmix64 finaliser of the uint64 x: a fixed, well-spread 64-bit hash."""
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


@njit(cache=True, inline="always")
def _certificate_hash(cert, length):
    """A 64-bit hash of cert[:length] (splitmix64 of each non-zero entry and its position, summed)."""
    h = np.uint64(length)
    for i in range(length):
        if cert[i] != 0:
            h += _splitmix(np.uint64(i) * np.uint64(1000003) + np.uint64(cert[i]))
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


@njit(cache=True, inline="always")
def _local_edges(size, cluster, local, bond_u, bond_v, bond_col, eu, ev, ec):
    """The cluster's first `size` bonds as edges (eu < ev, colour ec) between local vertex numbers."""
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


@njit(cache=True, inline="always")
def _class_index(ws, best, nv, size, certs, lengths, counts, class_hash, slots, n_classes):
    """Graph class of the graph written into the workspace inputs (vertex colours and local edges), added with
    count 0 if new (the table must have room for it: :func:`_with_room`); returns (class, number of
    classes).  The canonical labelling stays in the workspace until the next call."""
    length = canonical_into(ws, nv, size)
    h = _certificate_hash(best, length)
    slot = _lookup(slots, class_hash, certs, lengths, best, length, h)
    if slots[slot] >= 0:
        return slots[slot], n_classes
    certs[n_classes, :length] = best[:length]
    lengths[n_classes] = length
    counts[n_classes] = 0
    class_hash[n_classes] = h
    slots[slot] = n_classes
    return n_classes, n_classes + 1


@njit(cache=True)
def _with_room(certs, lengths, counts, class_hash, slots, n_classes, room):
    """The class table, holding n_classes, grown to take `room` more with its slot table at most half full."""
    while n_classes + room > certs.shape[0]:
        certs, lengths, counts, class_hash = _grown_rows(certs, lengths, counts, class_hash)
    while 2 * (n_classes + room) > slots.shape[0]:
        slots = _grown_slots(class_hash, n_classes, 2 * slots.shape[0])
    return certs, lengths, counts, class_hash, slots


@njit(cache=True, inline="always")
def _tally(ws, best, vcol, site_col, verts, nv, size, certs, lengths, counts, class_hash, slots, n_classes, per_size):
    """Count the cluster of `size` bonds whose local edges are in the workspace into its graph class
    (:func:`_class_index`; the table must have room) and into per_size; returns the number of classes."""
    for k in range(nv):
        vcol[k] = site_col[verts[k]]
    k, n_classes = _class_index(ws, best, nv, size, certs, lengths, counts, class_hash, slots, n_classes)
    counts[k] += 1
    per_size[size] += 1
    return n_classes


_KEY_BITS = 6  # bits of each label and of the bond colour in an extension key (clusters of <= 62 sites)


@njit(cache=True)
def _extension(refc_u, refc_v, label_u, label_v, colour_u, colour_v, nv, leaves, parent, bond_colour):
    """The cluster that a bond (u, v) adds to the current one (nv sites, `leaves` of degree 1, class `parent`):
    returns its number of degree-1 sites and its extension key, (parent, a, c, bond colour) packed, where the
    bond joins the sites of canonical labels a < c, or joins a to a new site and c = nv + colour of that site.

    refc_* are the degrees of u and v in the current cluster (at least one positive), label_* their canonical
    labels (ignored for a site not in the cluster), colour_* their site colours.  Scalars only: array arguments
    cost reference counting, which took about half the census's time in its innermost loops."""
    if refc_u == 0:
        refc_u, refc_v = refc_v, refc_u
        label_u, label_v = label_v, label_u
        colour_u, colour_v = colour_v, colour_u
    after = leaves - (refc_u == 1)
    a = label_u
    if refc_v > 0:
        after -= refc_v == 1
        c = label_v
        if c < a:
            a, c = c, a
    else:
        after += 1
        c = nv + colour_v
    return after, (((parent << _KEY_BITS | a) << _KEY_BITS) | c) << _KEY_BITS | bond_colour


@njit(cache=True)
def _probe(keys, key):
    """Slot of `key` in the open-addressing table `keys` (-1 = empty), or of the empty slot where it goes."""
    mask = keys.shape[0] - 1
    slot = np.int64(_splitmix(np.uint64(key)) & np.uint64(mask))
    while keys[slot] >= 0 and keys[slot] != key:
        slot = (slot + 1) & mask
    return slot


@njit(cache=True)
def _grown_table(keys, values):
    """The open-addressing table (keys, values) rehashed into twice the slots (new values 0)."""
    capacity = 2 * keys.shape[0]
    new_keys = -np.ones(capacity, np.int64)
    new_values = np.zeros(capacity, np.int64)
    for old in range(keys.shape[0]):
        if keys[old] >= 0:
            slot = _probe(new_keys, keys[old])
            new_keys[slot] = keys[old]
            new_values[slot] = values[old]
    return new_keys, new_values


@njit(cache=True, inline="always")
def _load_extended(certs, key, vcol, eu, ev, ec):
    """Write into the workspace inputs the graph that an extension key (:func:`_extension`) stands for: the
    canonical graph of its class plus its bond; returns (vertices, edges)."""
    field = (1 << _KEY_BITS) - 1
    colour = key & field
    c = (key >> _KEY_BITS) & field
    a = (key >> 2 * _KEY_BITS) & field
    cert = certs[key >> 3 * _KEY_BITS]
    n = cert[0]
    for i in range(n):
        vcol[i] = cert[1 + i]
    m = 0
    pos = 1 + n
    for i in range(n):
        for j in range(i + 1, n):
            if cert[pos] != 0:
                eu[m] = i
                ev[m] = j
                ec[m] = cert[pos] - 1
                m += 1
            pos += 1
    nv = n
    if c >= n:  # a new site, of colour c - n
        vcol[n] = c - n
        c = n
        nv = n + 1
    eu[m] = a
    ev[m] = c
    ec[m] = colour
    return nv, m + 1


@njit(cache=True)
def _memo_add(key, slot, memo_keys, memo_entry, n_memo, child_class, child_labels, ws, certs, lengths, counts,
              class_hash, slots, n_classes):
    """Classify the graph of extension `key` (absent from the memo, whose free slot for it is `slot`) and enter
    its class and the canonical labels of its vertices (the smaller cluster's canonical labels, then the new
    site) as memo entry n_memo; the memo and the class table must have room.  Returns (memo entries, classes)."""
    vcol, eu, ev, ec = workspace_inputs(ws)
    best, labels = workspace_result(ws)
    nv, m = _load_extended(certs, key, vcol, eu, ev, ec)
    k, n_classes = _class_index(ws, best, nv, m, certs, lengths, counts, class_hash, slots, n_classes)
    child_class[n_memo] = k
    for v in range(nv):
        child_labels[n_memo, v] = labels[v]
    memo_keys[slot] = key
    memo_entry[slot] = n_memo
    return n_memo + 1, n_classes


@njit(cache=True)
def _tally_extensions(ext_keys, ext_counts, max_bonds, insertions, ws, certs, lengths, counts, class_hash, slots,
                      n_classes, per_size):
    """Count the clusters of the extension table into their graph classes: rebuild each key's graph from the
    certificate of its smaller cluster and the added bond, drop it when its weights vanish to beta^max_bonds
    (insertions >= 0: :func:`hte.vanishing_weights.lowest_order_of_edges`), else classify it once with the
    key's count.  Returns the class table."""
    vcol, eu, ev, ec = workspace_inputs(ws)
    best, _ = workspace_result(ws)
    scratch = scratch_for(max_bonds + 1, max_bonds)
    for slot in range(ext_keys.shape[0]):
        key = ext_keys[slot]
        if key < 0:
            continue
        nv, m = _load_extended(certs, key, vcol, eu, ev, ec)
        if insertions >= 0 and lowest_order_of_edges(nv, m, eu, ev, insertions, scratch) > max_bonds:
            continue
        k, n_classes = _class_index(ws, best, nv, m, certs, lengths, counts, class_hash, slots, n_classes)
        counts[k] += ext_counts[slot]
        per_size[m] += ext_counts[slot]
        certs, lengths, counts, class_hash, slots = _with_room(certs, lengths, counts, class_hash, slots, n_classes, 1)
    return n_classes, certs, lengths, counts, class_hash, slots


def enumerate_bond_clusters(max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, n_sites,
                            biconnected_only=False, insertions=None):
    """Visit every connected bond cluster of <= max_bonds bonds whose smallest bond id is one of `roots`.

    Except in the star census, no cluster is canonicalised on its own.  The search keeps the class and the
    canonical labelling of the cluster of each size on its path; a cluster one bond larger is that class with a
    bond added between two canonical labels (or from one to a new site of a given colour), so its class and
    labelling follow from this *extension key* through a memo filled the first time the key is met.  The
    clusters of max_bonds bonds are not visited: each is counted under its extension key, and each key is
    classified once at the end.

    With ``insertions`` = k (0, 2 or 4) the clusters whose linked weights with up to k magnetisation insertions
    vanish to beta^max_bonds (lowest order E + b - P_k > max_bonds, :mod:`hte.vanishing_weights`) are, for the
    most part, walked through but not counted: below max_bonds a cluster is dropped when a cheap lower bound on
    b - P_k (:func:`_uncovered_bridges_bound`) shows it, and the few that the bound misses are kept and left to
    the caller; at max_bonds only clusters with at most k degree-1 sites are counted, and each key is checked
    with the exact rule.  The search also skips every cluster with L degree-1 sites and
    E + ceil((L - k) / 2) > max_bonds: in any larger cluster each of those sites either keeps degree 1, and so
    ends a bridge that at most k of them can leave used once, or takes a new bond, and a bond serves two of them
    at most.

    With ``biconnected_only`` only the biconnected clusters (a single bond, or no cut vertex) are classified and
    counted, and the search skips every cluster that cannot grow into one within max_bonds bonds: one with a
    degree-1 site ("leaf") none of whose other bonds is still available, or whose size plus a lower bound on
    the bonds that its leaves still need exceeds max_bonds (:func:`_bonds_to_mend_leaves`); one bond below
    max_bonds, the last bond is picked directly among the available bonds between two sites of the cluster that
    touch every leaf.  These rules only cut branches without biconnected descendants, so the biconnected
    clusters counted are exactly those of the full search.

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
    n_colours = max(int(site_col.max(initial=0)), int(bond_col.max(initial=0))) + 1
    if max_bonds + 1 + n_colours >= 1 << _KEY_BITS:
        raise ValueError(f"clusters of {max_bonds} bonds with {n_colours} colours do not fit an extension key")
    # The modes go in as None (off) or a value, so that numba compiles each combination on its own and prunes the
    # branches of the modes that are off: the full search runs as fast as without the other rules.
    return _enumerate(max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, n_sites,
                      True if biconnected_only else None, None if insertions is None else int(insertions))


@njit(cache=True)
def _enumerate(max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, n_sites, star, insertions):
    """:func:`enumerate_bond_clusters`, with ``star`` None for all clusters and True for the biconnected ones,
    ``insertions`` None for no rule on vanishing weights.  Allocates the search state and the tables and runs
    :func:`_walk`, growing the tables whenever it stops for room."""
    n_bonds = bond_u.shape[0]
    max_deg = 0
    for s in range(n_sites):
        if inc_ptr[s + 1] - inc_ptr[s] > max_deg:
            max_deg = inc_ptr[s + 1] - inc_ptr[s]
    # the search: sites and bonds of the cluster, the untried bonds of each level (Redelmeier), and for the
    # cluster of each size on the search path its class, numbers of degree-1 and odd-degree sites and the
    # canonical label of each of its sites
    reached = np.zeros(n_bonds, np.bool_)
    available = np.zeros(n_bonds, np.bool_)  # star census: in the untried list of the current level
    local = -np.ones(n_sites, np.int64)
    refc = np.zeros(n_sites, np.int64)  # bonds of the cluster at each site (its degree in the cluster)
    verts = np.empty(max_bonds + 2, np.int64)
    cluster = np.empty(max_bonds + 1, np.int64)
    buf = np.empty((max_bonds + 2) * (2 * max_deg * (max_bonds + 1) + 2), np.int64)
    segments = np.empty((4, max_bonds + 2), np.int64)  # start, end, next untried, first newly reached
    path = np.zeros((3, max_bonds + 1), np.int64)  # class, degree-1 sites, odd-degree sites
    path_labels = np.zeros((max_bonds + 1, max_bonds + 2), np.int64)
    ws = new_workspace(max_bonds + 1, max_bonds)
    scratch = np.empty((6, 2 * max_bonds + 3), np.int64)  # for _is_biconnected
    # the graph classes: an open-addressing hash table of class indices, kept at most half full
    n_vertices = max_bonds + 1
    certs = np.zeros((64, 1 + n_vertices + n_vertices * (n_vertices - 1) // 2), np.int64)
    lengths = np.zeros(64, np.int64)
    counts = np.zeros(64, np.int64)
    class_hash = np.zeros(64, np.uint64)
    slots = -np.ones(128, np.int64)
    per_size = np.zeros(max_bonds + 1, np.int64)
    # the memo: extension key -> entry (class, canonical labels of the sites)
    memo_keys = -np.ones(1024, np.int64)
    memo_entry = np.zeros(1024, np.int64)
    child_class = np.empty(512, np.int64)
    child_labels = np.empty((512, max_bonds + 2), np.uint8)
    # the top layer: clusters of max_bonds bonds counted by extension key
    ext_keys = -np.ones(1024, np.int64)
    ext_counts = np.zeros(1024, np.int64)

    # room _walk needs before each step: classes it may add, keys the top layer may add
    class_room = 2 + (max_deg * (max_bonds + 2) if star is not None else 0)
    key_room = 2 * max_deg * (max_bonds + 2)
    state = np.zeros(7, np.int64)  # root, level (-1: root not started), size, sites, classes, memo entries, keys
    state[1] = -1
    while _walk(state, max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, star, insertions,
                class_room, key_room, reached, available, local, refc, verts, cluster, buf, segments, path,
                path_labels, ws, scratch, certs, lengths, counts, class_hash, slots, per_size, memo_keys, memo_entry,
                child_class, child_labels, ext_keys, ext_counts):
        n_classes, n_memo, n_keys = state[4], state[5], state[6]
        certs, lengths, counts, class_hash, slots = _with_room(certs, lengths, counts, class_hash, slots, n_classes,
                                                               class_room)
        if n_memo == child_class.shape[0]:
            grown_class = np.empty(2 * n_memo, np.int64)
            grown_class[:n_memo] = child_class
            grown_labels = np.empty((2 * n_memo, max_bonds + 2), np.uint8)
            grown_labels[:n_memo] = child_labels
            child_class, child_labels = grown_class, grown_labels
        while 2 * (n_memo + 1) > memo_keys.shape[0]:
            memo_keys, memo_entry = _grown_table(memo_keys, memo_entry)
        while 2 * (n_keys + key_room) > ext_keys.shape[0]:
            ext_keys, ext_counts = _grown_table(ext_keys, ext_counts)
    n_classes, certs, lengths, counts, class_hash, slots = _tally_extensions(
        ext_keys, ext_counts, max_bonds, -1 if insertions is None else insertions, ws, certs, lengths, counts,
        class_hash, slots, state[4], per_size)
    kept = counts[:n_classes] > 0  # classes met only as the smaller cluster of a key may have none
    return certs[:n_classes][kept], lengths[:n_classes][kept], counts[:n_classes][kept], per_size


@njit(cache=True)
def _walk(state, max_bonds, roots, bond_u, bond_v, bond_col, site_col, inc_ptr, inc_bond, star, insertions,
          class_room, key_room, reached, available, local, refc, verts, cluster, buf, segments, path, path_labels,
          ws, scratch, certs, lengths, counts, class_hash, slots, per_size, memo_keys, memo_entry, child_class,
          child_labels, ext_keys, ext_counts):
    """The search of :func:`_enumerate` from where `state` says; returns 0 when every root is done, 1 when it
    stopped (state saved) because a table lacks room for the next step.

    No array is ever reassigned here and the innermost loops call no function with array arguments: numba
    counts references to arrays on such assignments and calls, and that had cost more than the search."""
    vcol, eu, ev, ec = workspace_inputs(ws)
    best, labels = workspace_result(ws)
    seg_start, seg_end, seg_pos, seg_new = segments[0], segments[1], segments[2], segments[3]
    path_class, path_leaves, path_odd = path[0], path[1], path[2]
    track = star is not None
    max_top_leaves = 1 << 30  # degree-1 sites a cluster of max_bonds bonds may have and be counted
    if insertions is not None:
        max_top_leaves = insertions
    r, d, size, nv = state[0], state[1], state[2], state[3]
    n_classes, n_memo, n_keys = state[4], state[5], state[6]
    while r < roots.shape[0]:
        root = roots[r]
        if d < 0:
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
                if track:
                    for k in range(seg_new[d], seg_end[d]):
                        available[buf[k]] = False
                    if d > 0:
                        for k in range(seg_start[d], seg_new[d]):
                            available[buf[k]] = True  # still untried at the level below
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
            if (n_classes + class_room > certs.shape[0] or 2 * (n_classes + class_room) > slots.shape[0]
                    or n_memo == child_class.shape[0] or 2 * (n_memo + 1) > memo_keys.shape[0]
                    or 2 * (n_keys + key_room) > ext_keys.shape[0]):
                state[0], state[1], state[2], state[3] = r, d, size, nv
                state[4], state[5], state[6] = n_classes, n_memo, n_keys
                return 1
            b = buf[seg_pos[d]]
            seg_pos[d] += 1
            if track:
                available[b] = False
            leaves = 2  # degree-1 sites and odd-degree sites of the cluster with b, from those without it
            odd = 2
            key = -1  # and its extension key
            if size > 0:
                u = bond_u[b]
                v = bond_v[b]
                leaves, key = _extension(refc[u], refc[v], path_labels[size, local[u]], path_labels[size, local[v]],
                                         site_col[u], site_col[v], nv, path_leaves[size], path_class[size],
                                         bond_col[b])
                odd = path_odd[size] + 2 - 2 * (refc[u] & 1) - 2 * (refc[v] & 1)
            if insertions is not None and 2 * (size + 1) > max_bonds and (
                    size + 1 + (leaves - insertions + 1) // 2 > max_bonds):
                continue  # skip, without visiting, a cluster that neither counts nor can grow into one that counts
            nv_before = nv
            cluster[size] = b
            size += 1
            for s in (bond_u[b], bond_v[b]):
                if refc[s] == 0:
                    local[s] = nv
                    verts[nv] = s
                    nv += 1
                refc[s] += 1
            path_leaves[size] = leaves
            path_odd[size] = odd
            if star is None:
                # the class and canonical labelling: from the memo, or for the root bond by canonicalising it
                if size > 1:
                    mask = memo_keys.shape[0] - 1
                    slot = np.int64(_splitmix(np.uint64(key)) & np.uint64(mask))
                    while memo_keys[slot] >= 0 and memo_keys[slot] != key:
                        slot = (slot + 1) & mask
                    if memo_keys[slot] < 0:
                        n_memo, n_classes = _memo_add(key, slot, memo_keys, memo_entry, n_memo, child_class,
                                                      child_labels, ws, certs, lengths, counts, class_hash, slots,
                                                      n_classes)
                    e = memo_entry[slot]
                    path_class[size] = child_class[e]
                    for x in range(nv_before):
                        path_labels[size, x] = child_labels[e, path_labels[size - 1, x]]
                    if nv > nv_before:
                        path_labels[size, nv_before] = child_labels[e, nv_before]
                else:
                    for k in range(nv):
                        vcol[k] = site_col[verts[k]]
                    _local_edges(size, cluster, local, bond_u, bond_v, bond_col, eu, ev, ec)
                    path_class[size], n_classes = _class_index(ws, best, nv, size, certs, lengths, counts,
                                                               class_hash, slots, n_classes)
                    for x in range(nv):
                        path_labels[size, x] = labels[x]
            record = True
            grow = size < max_bonds
            if insertions is not None and size + (leaves - insertions + 1) // 2 > max_bonds:
                grow = False
            if star is not None:
                if leaves > 0:
                    record = size == 1
                    # ceil(leaves / 2) is a cheap first bound; _bonds_to_mend_leaves is never below it
                    if size < max_bonds - 1 and (size + (leaves + 1) // 2 > max_bonds or size + _bonds_to_mend_leaves(
                            nv, verts, refc, bond_u, bond_v, inc_ptr, inc_bond, available, reached, root) > max_bonds):
                        grow = False
                if grow and size == max_bonds - 1:
                    # the last bond must leave no leaf: it joins two sites of the cluster, every leaf one of them
                    grow = False
                    first = -1  # scan the bonds of the first leaf, or of every site when there is no leaf
                    second = -1
                    if 0 < leaves <= 2:
                        for k in range(nv):
                            if refc[verts[k]] == 1:
                                if first < 0:
                                    first = verts[k]
                                else:
                                    second = verts[k]
                    scanned = nv if leaves == 0 else (1 if leaves <= 2 else 0)  # more than two leaves: no way
                    for k in range(scanned):
                        s = verts[k] if leaves == 0 else first
                        for p in range(inc_ptr[s], inc_ptr[s + 1]):
                            f = inc_bond[p]
                            t = bond_v[f] if bond_u[f] == s else bond_u[f]
                            if refc[t] == 0 or (leaves == 0 and bond_u[f] != s) or (leaves == 2 and t != second):
                                continue
                            if not (available[f] or (f > root and not reached[f])):
                                continue
                            cluster[size] = f
                            _local_edges(size + 1, cluster, local, bond_u, bond_v, bond_col, eu, ev, ec)
                            if _is_biconnected(nv, size + 1, eu, ev, scratch):
                                n_classes = _tally(ws, best, vcol, site_col, verts, nv, size + 1, certs, lengths,
                                                   counts, class_hash, slots, n_classes, per_size)
                if record:
                    _local_edges(size, cluster, local, bond_u, bond_v, bond_col, eu, ev, ec)
                    if size > 1:
                        record = _is_biconnected(nv, size, eu, ev, scratch)
                if record:
                    n_classes = _tally(ws, best, vcol, site_col, verts, nv, size, certs, lengths, counts, class_hash,
                                       slots, n_classes, per_size)
            else:
                if insertions is not None and 2 * size > max_bonds:  # else E + b - P_k <= 2 E <= max_bonds
                    record = size + _uncovered_bridges_bound(nv, size, leaves, odd, insertions) <= max_bonds
                if record:
                    counts[path_class[size]] += 1
                    per_size[size] += 1
            if grow and star is None and size == max_bonds - 1:
                # the top layer: a cluster one bond larger is this one's class with a bond added at two canonical
                # labels (or at one and a new site), so it is counted under that key, not classified itself
                grow = False
                k = seg_end[d]  # after the bonds still untried at this level, those at a site that b added
                for s in (bond_u[b], bond_v[b]):
                    if local[s] < nv_before:
                        continue
                    for p in range(inc_ptr[s], inc_ptr[s + 1]):
                        f = inc_bond[p]
                        if f > root and not reached[f]:
                            buf[k] = f
                            k += 1
                mask = ext_keys.shape[0] - 1
                for q in range(seg_pos[d], k):
                    f = buf[q]
                    u = bond_u[f]
                    v = bond_v[f]
                    after, top_key = _extension(refc[u], refc[v], path_labels[size, local[u]],
                                                path_labels[size, local[v]], site_col[u], site_col[v], nv, leaves,
                                                path_class[size], bond_col[f])
                    if after > max_top_leaves:
                        continue
                    slot = np.int64(_splitmix(np.uint64(top_key)) & np.uint64(mask))
                    while ext_keys[slot] >= 0 and ext_keys[slot] != top_key:
                        slot = (slot + 1) & mask
                    ext_counts[slot] += 1
                    if ext_keys[slot] < 0:
                        ext_keys[slot] = top_key
                        n_keys += 1
            if grow:
                ns = seg_end[d]
                k = ns
                for q in range(seg_pos[d], seg_end[d]):
                    buf[k] = buf[q]
                    k += 1
                newstart = k
                for s in (bond_u[b], bond_v[b]):
                    if local[s] < nv_before:  # every bond at a site already in the cluster has been reached
                        continue
                    for p in range(inc_ptr[s], inc_ptr[s + 1]):
                        f = inc_bond[p]
                        if f > root and not reached[f]:
                            reached[f] = True
                            if track:
                                available[f] = True
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
        r += 1
    state[0], state[1], state[2], state[3] = r, d, size, nv
    state[4], state[5], state[6] = n_classes, n_memo, n_keys
    return 0


@njit(cache=True, inline="always")
def _bonds_to_mend_leaves(nv, verts, refc, bond_u, bond_v, inc_ptr, inc_bond, available, reached, root):
    """A lower bound on the bonds still needed before no site of the cluster has degree 1, or a huge number if
    some such leaf can never get a second bond.

    In a biconnected supercluster the bond at a leaf l lies on a cycle, so a path of new bonds leaves l and first
    meets the cluster again at another site.  Its first bond is one the search may still add (in the untried
    list, or not reached yet).  If that bond ends on the cluster it can serve two leaves at most; if it ends on
    a new site it serves l alone.  So at least ceil(n1 / 2) + n2 bonds are missing, n1 counting the leaves with
    an available bond into the cluster and n2 the others."""
    n1 = 0
    n2 = 0
    for k in range(nv):
        s = verts[k]
        if refc[s] == 1:
            alive = False
            into_cluster = False
            for p in range(inc_ptr[s], inc_ptr[s + 1]):
                f = inc_bond[p]
                if available[f] or (f > root and not reached[f]):
                    alive = True
                    other = bond_v[f] if bond_u[f] == s else bond_u[f]
                    if refc[other] > 0:
                        into_cluster = True
                        break
            if not alive:
                return 1 << 30
            if into_cluster:
                n1 += 1
            else:
                n2 += 1
    return (n1 + 1) // 2 + n2


@njit(cache=True, inline="always")
def _uncovered_bridges_bound(nv, ne, leaves, odd, insertions):
    """A cheap lower bound on b - P_k (:mod:`hte.vanishing_weights`) for a cluster of nv sites, ne bonds, `leaves`
    sites of degree 1 and `odd` of odd degree: the T-join of at most k nodes covers the bridges of at most k of
    the degree-1 sites, so at least leaves - k stay uncovered; in a tree the bridges left uncovered form a T-join
    for T = (sites of odd degree) xor (the k nodes), so at least ceil((odd - k) / 2)."""
    bound = leaves - insertions
    if nv == ne + 1:
        if (odd - insertions + 1) // 2 > bound:
            bound = (odd - insertions + 1) // 2
    return bound


@njit(cache=True)
def _is_biconnected(nv, ne, eu, ev, scratch):
    """True if the connected graph on vertices 0..nv-1 with edges (eu[e], ev[e]), e < ne, has no cut vertex
    (Tarjan's low points, :func:`hte.low_link.low_links`).  scratch is int64[6, >= max(nv + 1, 2 ne)]."""
    if low_links(nv, ne, eu, ev, scratch) != nv:
        return False
    disc, low, parent_edge = scratch[2], scratch[3], scratch[4]
    root_children = 0
    for x in range(1, nv):
        e = parent_edge[x]
        p = ev[e] if eu[e] == x else eu[e]
        if p == 0:
            root_children += 1
        elif low[x] >= disc[p]:
            return False
    return root_children == 1


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
