r"""Raw cluster series and linked weights of valued graphs, computed by the kernel or read from the weight cache.

For every valued graph G (:mod:`hte.valued_graph`) the kernel gives the cluster's own series P(G) of the three
additive quantities of :data:`hte.exact.QUANTITIES` (coefficients of beta^n, n = 0..order, exact Fractions):
ln Z(beta, 0) - sum_i ln(2 S_i + 1), the second and the fourth cumulant of M = sum_i S_i^z at h = 0.  The
linked weight is found by subgraph subtraction,

    W(G) = P(G) - sum_{g connected, proper} c(g, G) W(g) - sum_{v in G} W(v),

done in integers over common denominators.  A graph with enough bridges near the top order (E = order bonds and
a bridge, order - 1 and two, order - 2 and a bridge between two others) is not diagonalised: its weight comes
from rooted weights of its parts across bridges (:mod:`hte.bridge_factorisation`), and the smaller graphs'
series come with their rooted series (:mod:`hte.rooted_series`).  Weights that vanish exactly to this order for
every quantity asked for are skipped (:meth:`WeightBook.negligible`): those of graphs with too many bridges
(:mod:`hte.vanishing_weights`), and, for ln Z alone of spin-1/2 Ising bonds, those of graphs with a cut vertex.

Cache rows (:mod:`hte.cache`): key "raw-v1|order=N|<valued key>" holds the JSON {"lnz": [...], "m2": [...],
"m4": [...]} of P(G) with Fractions as strings; "rooted-v2|order=N|<rooted valued key>" holds {"u1": [...],
"u3": [...]} of one rooted class (one root of one graph).  Rows "rooted-v1|order=N|<valued key>" with
{"u1": [[...] per site], "u3": ...}, written by earlier versions for every site of a graph, are still read.  These
formats are shared with existing caches and must not change.
"""

from __future__ import annotations

import json
import sys
import time
from fractions import Fraction
from math import lcm

from hte.bridge_factorisation import RootedWeights, factorisable, factorised_weight, rooted_valued
from hte.canonical import key_to_graph
from hte.clusters import subgraph_counts
from hte.exact import QUANTITIES, cluster_cumulants
from hte.executors import run_jobs
from hte.graph import ColouredGraph, is_biconnected
from hte.rooted_series import rooted_cluster_series
from hte.valued_graph import SubgraphCatalogue, ValuedGraph, hamiltonian_of, site_graph
from hte.vanishing_weights import insertions_for, lowest_order

CACHE_FORMAT = "raw-v1"
ROOTED_CACHE_FORMAT = "rooted-v2"  # u_1, u_3 series of one rooted class (hte.rooted_series)
ALL_SITES_ROOTED_FORMAT = "rooted-v1"  # u_1, u_3 of every site of a graph, as earlier versions wrote them


def _raw_job(args):
    """Worker: the cluster's own series as JSON text (exact fractions as strings) and, when rooted keys are
    asked for, a list of (rooted valued graph, JSON text {"u1": [...], "u3": [...]}) holding at least those
    (every root the kernel gave, one per rooted class), else None."""
    key, vg, order, wanted = args
    if not wanted:
        c, rows = cluster_cumulants(hamiltonian_of(vg), order), None
    else:
        rooted = {}
        for v in range(vg.graph.n_vertices):
            rvg = rooted_valued(vg, v)
            rooted.setdefault(rvg.key, (v, rvg))
        c, r = rooted_cluster_series(hamiltonian_of(vg), order, [rooted[k][0] for k in wanted])
        rows = [(rvg, json.dumps({"u1": [str(x) for x in r.u1[v]], "u3": [str(x) for x in r.u3[v]]}))
                for v, rvg in rooted.values() if v in r.u1]
    return key, json.dumps({q: [str(x) for x in getattr(c, q)] for q in QUANTITIES}), rows


def _decode(text: str) -> dict:
    data = json.loads(text)
    return {q: [Fraction(x) for x in data[q]] for q in QUANTITIES}


# ---------------------------------------------------------------------------------------------- progress
class Progress:
    """A one-line progress display on stderr (graphs done, rate, estimated time left)."""

    def __init__(self, total: int, what: str, enabled: bool):
        self.total, self.what, self.enabled = total, what, enabled
        self.start = time.perf_counter()
        self.last = 0.0
        self.done = 0

    def step(self, k: int = 1) -> None:
        self.done += k
        now = time.perf_counter()
        if self.enabled and (now - self.last > 0.5 or self.done == self.total):
            self.last = now
            elapsed = now - self.start
            left = elapsed / self.done * (self.total - self.done) if self.done else float("nan")
            print(f"\r  {self.what}: {self.done}/{self.total} done, {elapsed:.0f} s elapsed, about {left:.0f} s left ",
                  end="", file=sys.stderr, flush=True)

    def close(self) -> None:
        if self.enabled and self.total:
            print(file=sys.stderr, flush=True)


# ---------------------------------------------------------------------------------------------- weights
class WeightBook:
    """Raw cluster series and linked weights of valued graphs, backed by the persistent cache."""

    def __init__(self, order: int, cache=None, workers: int = 1, progress: bool = False, scheduler: str | None = None,
                 quantities=QUANTITIES, bridge_factorisation: bool = True):
        """`quantities` (names of :data:`hte.exact.QUANTITIES`) are those whose weights must be right; the
        others may come out as zeros where the asked ones vanish (:meth:`negligible`)."""
        self.order = order
        self.lnz_only = tuple(quantities) == ("lnz",)
        self.insertions = insertions_for(quantities)
        self.factorise = bridge_factorisation and not self.lnz_only
        self.rooted = RootedWeights(order)
        # graph key -> {rooted key: rooted valued graph} of the rooted series some factorised weight uses
        self.rooted_wanted: dict[str, dict[str, ValuedGraph]] = {}
        self.factorised_count = 0
        self.scheduler = scheduler
        self.cache = cache
        self.workers = workers
        self.progress = progress
        self.raw: dict[str, dict] = {}
        self.linked: dict[str, dict] = {}
        self.valued: dict[str, ValuedGraph] = {}
        self.subgraph_memo: dict[str, dict[str, int]] = {}
        # Linked weights are subtracted in integers: self.denominators[q][n] is the lcm of the denominators of
        # every raw beta^n coefficient of q seen so far, and W * denominator is an integer because W is an
        # integer combination of raw series.  _numerators holds those integers.
        self.denominators = {q: [1] * (order + 1) for q in QUANTITIES}
        self._numerators: dict[str, dict] = {}
        self._catalogue = SubgraphCatalogue()
        self._site_key: dict[tuple, str] = {}
        self._factorisable: dict[str, bool] = {}
        self._factorised_weights: dict[str, dict] = {}  # key -> weight (Fractions) of the factorised graphs
        self._negligible: dict[str, bool] = {}
        self.computed = 0
        self.from_cache = 0

    def vanishes(self, graph: ColouredGraph) -> bool:
        """True when the weights of `graph` vanish to this order for every quantity asked for, by the bridge
        rule of :mod:`hte.vanishing_weights` (a graph with E bonds and b bridges starts at beta^(E + b) in ln Z,
        fewer bridges counting twice in <M^2>_c and <M^4>_c)."""
        return 2 * graph.n_edges > self.order and lowest_order(graph, self.insertions) > self.order

    def negligible(self, vg: ValuedGraph) -> bool:
        """True when the graph's weights vanish to this order for every quantity asked for: by the bridge rule
        (:meth:`vanishes`), or, for ln Z alone of spin-1/2 Ising bonds (:meth:`ising_half`), because it has a cut
        vertex (star-graph expansion).  Its weights are then taken as zero for every quantity."""
        if vg.key not in self._negligible:
            self._negligible[vg.key] = self.vanishes(vg.graph) or (
                vg.graph.n_edges > 0 and self.ising_half(vg) and not is_biconnected(vg.graph))
        return self._negligible[vg.key]

    def ising_half(self, vg: ValuedGraph) -> bool:
        """True when ln Z alone is wanted, every spin of `vg` is 1/2 and every bond has Jxy = 0.

        Then the bond terms commute, and where the graph splits at a cut vertex v into G1 and G2,
        Z(G) = sum_{s_v} Z1(s_v) Z2(s_v) with Z1(up) = Z1(down) (flip every spin of G1 at h = 0), so
        Z(G) = Z(G1) Z(G2) / 2: ln Z is additive over the blocks, and the linked weight of every graph with a cut
        vertex is zero.  Only biconnected graphs (star graphs) remain, and only biconnected subgraphs are
        subtracted.  (For higher spins Z1(s_v) depends on |s_v|; with Jxy != 0 the bond terms do not commute.)
        """
        return (self.lnz_only and all(value[0] == Fraction(1, 2) for value in vg.vertex_values)
                and all(value[0] == 0 for value in vg.edge_values))

    def factorised(self, vg: ValuedGraph) -> bool:
        """True when the graph's weight comes from the bridge factorisation (E = order bonds and a bridge, order - 1
        bonds and two bridges, or order - 2 bonds and a bridge between two others;
        :func:`hte.bridge_factorisation.factorisable`), decided at the first call: not when a factorised graph
        seen before already uses its rooted series, as it is diagonalised then anyway and its weight follows by
        subtraction (:meth:`ensure_raw` asks the larger graphs first)."""
        if vg.key not in self._factorisable:
            self._factorisable[vg.key] = (self.factorise and vg.key not in self.rooted_wanted
                                          and factorisable(vg.graph, self.order))
        return self._factorisable[vg.key]

    def _wants_rooted(self, vg: ValuedGraph) -> bool:
        return vg.key in self.rooted_wanted

    def _missing_roots(self, vg: ValuedGraph) -> list[str]:
        """The rooted keys of `vg` that some factorised weight uses and that are not known yet."""
        return [k for k in self.rooted_wanted.get(vg.key, ()) if k not in self.rooted.series]

    def _cache_key(self, key: str, kind: str = CACHE_FORMAT) -> str:
        return f"{kind}|order={self.order}|{key}"

    def ensure_raw(self, graphs: list[ValuedGraph]) -> None:
        """Compute (or fetch from the cache) the raw series of all `graphs`, with the rooted series of those that
        the factorised graphs among them (or before them) use; commits as results arrive."""
        for vg in sorted(graphs, key=lambda vg: -vg.graph.n_edges):  # the parts of a graph have fewer bonds
            if not self.negligible(vg) and self.factorised(vg):
                for graph, rvg in self.rooted.needed_rooted(vg):
                    self.rooted_wanted.setdefault(graph.key, {})[rvg.key] = rvg
        todo = {}
        for vg in graphs:
            self.valued.setdefault(vg.key, vg)
            if not self._wants_rooted(vg) and (self.negligible(vg) or self.factorised(vg)):
                # a factorised graph, or one whose own weights vanish, is still diagonalised when a larger one
                # uses its rooted series (these vanish by other rules: one insertion sits at the root)
                continue
            if vg.key not in self.raw or self._missing_roots(vg):
                todo[vg.key] = vg
        if not todo:
            return
        if self.cache is not None:
            self._read_cached(todo)
        if not todo:
            return
        jobs = [(k, vg, self.order, self._missing_roots(vg) if self._wants_rooted(vg) else None)
                for k, vg in sorted(todo.items(), key=lambda kv: -len(kv[1].graph.edges))]
        bar = Progress(len(jobs), "cluster series", self.progress)
        pending: list[tuple[str, str]] = []

        def accept(key, text, rooted_rows):
            self._store_raw(key, _decode(text))
            self.computed += 1
            pending.append((self._cache_key(key), text))
            for rvg, row in rooted_rows or ():
                self._store_rooted(rvg, row)
                pending.append((self._cache_key(rvg.key, ROOTED_CACHE_FORMAT), row))
            bar.step()
            if self.cache is not None and len(pending) >= 64:
                self.cache.put_many(pending)
                pending.clear()

        try:
            run_jobs(_raw_job, jobs, lambda result: accept(*result), workers=self.workers,
                     scheduler=self.scheduler)
        except KeyboardInterrupt:
            raise KeyboardInterrupt(f"{self.computed} of {len(jobs)} cluster series were finished and kept in the "
                                    "weight cache; rerun the same command to resume") from None
        finally:
            if self.cache is not None and pending:
                self.cache.put_many(pending)
            bar.close()

    def ensure_weights(self, graphs: list[ValuedGraph]) -> None:
        """Prepare the linked weights of `graphs`: compute (or fetch) the raw series of the graphs, of their
        subgraphs and single sites, and the rooted series the factorised ones use; then the factorised weights.
        (Subgraphs of lattice clusters are lattice clusters, but in symbolic mode a subgraph can meet an
        evaluation point that no graph class asked for, so the subgraphs are prepared the same way.)"""
        self.ensure_raw(graphs)
        subgraphs, rooted = {}, {}
        for vg in graphs:
            if self.negligible(vg):
                continue
            if self.factorised(vg):
                rooted.update((sub.key, sub) for sub in self.rooted.needed_for(vg))
            elif vg.graph.n_edges > 1:
                for sub_key in self._subgraphs(vg):
                    if sub_key not in self.raw and sub_key not in self._factorised_weights:
                        subgraphs[sub_key] = self.valued[sub_key]
            for v in vg.vertex_values:
                site_key = self._site(v)
                if site_key not in self.raw:
                    subgraphs[site_key] = self.valued[site_key]
        self.ensure_raw(list(rooted.values()))
        if subgraphs:
            self.ensure_weights(list(subgraphs.values()))
        for vg in graphs:
            if not self.negligible(vg) and self.factorised(vg) and vg.key not in self._factorised_weights:
                weight = factorised_weight(vg, self.order, self.rooted)
                self._factorised_weights[vg.key] = weight
                self._widen(weight)
                self.factorised_count += 1

    def _read_cached(self, todo: dict[str, ValuedGraph]) -> None:
        """Take from the cache the raw series of the graphs in `todo` and the rooted series they are wanted for;
        drop from `todo` the graphs found complete."""
        missing = {k: self._missing_roots(vg) for k, vg in todo.items()}
        keys = [self._cache_key(k) for k in todo]
        for k, roots in missing.items():
            keys += [self._cache_key(r, ROOTED_CACHE_FORMAT) for r in roots]
            if roots:
                keys.append(self._cache_key(k, ALL_SITES_ROOTED_FORMAT))
        found = self.cache.get_many(keys)
        for k, vg in list(todo.items()):
            all_sites = found.get(self._cache_key(k, ALL_SITES_ROOTED_FORMAT))
            if all_sites is not None:
                data = json.loads(all_sites)
                self.rooted.add(vg, *([[Fraction(x) for x in site] for site in data[u]] for u in ("u1", "u3")))
            for r in missing[k]:
                row = found.get(self._cache_key(r, ROOTED_CACHE_FORMAT))
                if row is not None:
                    self._store_rooted(self.rooted_wanted[k][r], row)
            text = found.get(self._cache_key(k))
            if text is not None and not self._missing_roots(vg):
                self._store_raw(k, _decode(text))
                del todo[k]
                self.from_cache += 1

    def _store_rooted(self, rvg: ValuedGraph, text: str) -> None:
        data = json.loads(text)
        self.rooted.add_rooted(rvg, *([Fraction(x) for x in data[u]] for u in ("u1", "u3")))

    def _store_raw(self, key: str, series: dict) -> None:
        """Keep a raw series and widen the common denominators to it."""
        self.raw[key] = series
        self._widen(series)

    def _widen(self, series: dict) -> None:
        """Widen the common denominators to those of `series` (rescaling the integer weights kept so far)."""
        for q in QUANTITIES:
            dens = self.denominators[q]
            for n, x in enumerate(series[q]):
                if dens[n] % x.denominator:
                    wider = lcm(dens[n], x.denominator)
                    factor = wider // dens[n]
                    for w in self._numerators.values():
                        w[q][n] *= factor
                    dens[n] = wider

    def weight(self, key: str) -> dict:
        """Linked weight W of the valued graph `key` as Fractions (after :meth:`ensure_weights` of the graph)."""
        if key not in self.linked:
            nums = self._linked_numerators(key)
            self.linked[key] = {q: [Fraction(a, d) for a, d in zip(nums[q], self.denominators[q])]
                                for q in QUANTITIES}
        return self.linked[key]

    def _linked_numerators(self, key: str) -> dict:
        """W(key) * denominators: W = P - sum_g c(g, G) W(g) - sum_v W(v), in integers."""
        if key in self._numerators:
            return self._numerators[key]
        vg = self.valued[key]
        if self.negligible(vg):
            w = {q: [0] * (self.order + 1) for q in QUANTITIES}
        elif self.factorised(vg):
            if key not in self._factorised_weights:
                raise KeyError(f"factorised weight of {key} not prepared: call ensure_weights first")
            w = {q: [x.numerator * (d // x.denominator) for x, d in zip(self._factorised_weights[key][q],
                                                                      self.denominators[q])] for q in QUANTITIES}
        else:
            raw = self.raw[key]
            w = {q: [x.numerator * (d // x.denominator) for x, d in zip(raw[q], self.denominators[q])]
                 for q in QUANTITIES}
            if vg.graph.n_edges >= 1:
                sites: dict[int, int] = {}
                for c in vg.graph.vertex_colours:
                    sites[c] = sites.get(c, 0) + 1
                for c, count in sites.items():
                    _subtract(w, self._linked_numerators(self._site(vg.vertex_values[c])), count)
                for sub_key, count in self._subgraphs(vg).items():
                    _subtract(w, self._linked_numerators(sub_key), count)
        self._numerators[key] = w
        return w

    def _site(self, value) -> str:
        if value not in self._site_key:
            vg = site_graph(value)
            self.valued.setdefault(vg.key, vg)
            self._site_key[value] = vg.key
        return self._site_key[value]

    def _subgraphs(self, vg: ValuedGraph) -> dict[str, int]:
        """Connected proper subgraphs with at least one edge: valued key -> number of embeddings in `vg`."""
        if vg.key in self.subgraph_memo:
            return self.subgraph_memo[vg.key]
        counts = subgraph_counts(vg.graph, biconnected_only=self.ising_half(vg))
        result = self._catalogue.count(vg, counts.items(), key_to_graph,
                                       lambda sub: self.valued.setdefault(sub.key, sub))
        self.subgraph_memo[vg.key] = result
        return result


def _subtract(w: dict, other: dict, count: int) -> None:
    for q in QUANTITIES:
        w[q] = [a - count * b for a, b in zip(w[q], other[q])]
