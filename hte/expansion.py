r"""Linked-cluster assembly: from graph classes and cluster series to the lattice's series.

For every connected cluster G (a graph class of the lattice), the kernel gives the cluster's own series
P(G) of three additive quantities: ln Z(beta, 0) - sum_i ln(2 S_i + 1), the second and the fourth cumulant
of M = sum_i S_i^z at h = 0.  The linked weight is found by subgraph subtraction,

    W(G) = P(G) - sum_{g connected, proper} c(g, G) W(g) - sum_{v in G} W(v),

and the lattice sum per unit cell is sum_G L(G) prod_c p_c^{n_c(G)} W(G) plus the single-site terms
sum_c n_c p_c W(site_c), where L(G) is the number of clusters per cell of class G and p_c the occupation of
site class c.  A graph with E bonds has W = O(beta^E), so clusters of up to `order` bonds suffice.

Numeric mode: couplings are exact rationals; bonds of zero coupling and sites of zero occupation are dropped
before enumeration; the physical graph (vertices coloured by (S, D), edges by (Jxy, Jz) values) keys the
weight, so labels with equal values share weights.  Symbolic mode: every labelled bond is kept; the weight of
a class is a polynomial in the coupling symbols of its bonds, obtained exactly by evaluating numeric weights on
the principal lattice of integer points and interpolating (:mod:`hte.polynomial`).

References
----------
.. [1] M. P. Gelfand, R. R. P. Singh and D. A. Huse, J. Stat. Phys. 59, 1093 (1990).
.. [2] J. Oitmaa, C. Hamer and W. Zheng, Series Expansion Methods for Strongly Interacting Lattice Models
   (Cambridge, 2006), ch. 2-3.
"""

from __future__ import annotations

import json
import sys
import time
from dataclasses import dataclass, field
from fractions import Fraction

import sympy

from hte.canonical import canonical_graph, key_to_graph
from hte.clusters import ClusterCensus, enumerate_clusters, subgraph_counts
from hte.executors import run_jobs
from hte.graph import ColouredGraph, count_bridges
from hte.models import SpinModel
from hte.polynomial import add_into, interpolate, interpolation_points

QUANTITIES = ("lnz", "m2", "m4")
CACHE_FORMAT = "raw-v1"


# ---------------------------------------------------------------------------------------------- valued graphs
@dataclass(frozen=True)
class ValuedGraph:
    """A cluster with physical values: vertex values (S, D) and edge values (Jxy, Jz), canonically labelled.

    ``key`` is canonical: the graph's canonical key with colours ranked by value, plus the sorted values.
    """

    key: str
    graph: ColouredGraph  # colours index vertex_values / edge_values
    vertex_values: tuple
    edge_values: tuple


def make_valued(n: int, vertex_values, edges) -> ValuedGraph:
    """Canonical ValuedGraph from vertex values (per vertex) and edges (u, v, value)."""
    vpal = sorted(set(vertex_values))
    epal = sorted(set(e[2] for e in edges))
    g = ColouredGraph(n, tuple(vpal.index(v) for v in vertex_values),
                      tuple((min(u, v), max(u, v), epal.index(val)) for u, v, val in edges))
    cg, _ = canonical_graph(g)
    key = f"{cert_text(cg)}|V{_fmt(vpal)}|E{_fmt(epal)}"
    return ValuedGraph(key, cg, tuple(vpal), tuple(epal))


def cert_text(graph: ColouredGraph) -> str:
    colours = ".".join(str(c) for c in graph.vertex_colours)
    edges = ",".join(f"{u}-{v}:{c}" for u, v, c in graph.edges)
    return f"{graph.n_vertices}|{colours}|{edges}"


def _fmt(values) -> str:
    return ";".join("/".join(str(x) for x in v) for v in values)


def hamiltonian_of(vg: ValuedGraph):
    """The kernel's ClusterHamiltonian for a valued graph."""
    from hte.exact import ClusterHamiltonian

    spins = tuple(vg.vertex_values[c][0] for c in vg.graph.vertex_colours)
    aniso = tuple(vg.vertex_values[c][1] for c in vg.graph.vertex_colours)
    bonds = tuple((u, v, vg.edge_values[c][0], vg.edge_values[c][1]) for u, v, c in vg.graph.edges)
    return ClusterHamiltonian(spins=spins, bonds=bonds, anisotropy=aniso)


def _raw_job(args):
    """Worker: the cluster's own series as JSON text (exact fractions as strings)."""
    key, vg, order = args
    from hte.exact import cluster_cumulants

    c = cluster_cumulants(hamiltonian_of(vg), order)
    return key, json.dumps({q: [str(x) for x in getattr(c, q)] for q in QUANTITIES})


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
                 lnz_only: bool = False):
        self.order = order
        self.lnz_only = lnz_only
        self.scheduler = scheduler
        self.cache = cache
        self.workers = workers
        self.progress = progress
        self.raw: dict[str, dict] = {}
        self.linked: dict[str, dict] = {}
        self.valued: dict[str, ValuedGraph] = {}
        self.subgraph_memo: dict[str, dict[str, int]] = {}
        self.computed = 0
        self.from_cache = 0

    def negligible(self, vg: ValuedGraph) -> bool:
        """True when only ln Z is wanted and the graph's weight vanishes to this order.

        At h = 0 a term of ln Z that uses a bridge once is a product of one-point functions <S_a> of the two
        halves, which vanish by the global spin flip (S^z) and the U(1) symmetry (S^x, S^y) of H0; so every
        bridge appears at least twice and a graph with E bonds and b bridges starts at beta^(E + b).
        """
        return self.lnz_only and vg.graph.n_edges + count_bridges(vg.graph) > self.order

    def _cache_key(self, key: str) -> str:
        return f"{CACHE_FORMAT}|order={self.order}|{key}"

    def ensure_raw(self, graphs: list[ValuedGraph]) -> None:
        """Compute (or fetch from the cache) the raw series of all `graphs`; commits as results arrive."""
        todo = {}
        for vg in graphs:
            self.valued.setdefault(vg.key, vg)
            if vg.key not in self.raw and not self.negligible(vg):
                todo[vg.key] = vg
        if not todo:
            return
        if self.cache is not None:
            found = self.cache.get_many([self._cache_key(k) for k in todo])
            for k in list(todo):
                text = found.get(self._cache_key(k))
                if text is not None:
                    self.raw[k] = _decode(text)
                    del todo[k]
                    self.from_cache += 1
        if not todo:
            return
        jobs = [(k, vg, self.order) for k, vg in sorted(todo.items(), key=lambda kv: -len(kv[1].graph.edges))]
        bar = Progress(len(jobs), "cluster series", self.progress)
        pending: list[tuple[str, str]] = []

        def accept(key, text):
            self.raw[key] = _decode(text)
            self.computed += 1
            pending.append((self._cache_key(key), text))
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

    def weight(self, key: str) -> dict:
        """Linked weight W of the valued graph `key` (its raw series must be known)."""
        if key in self.linked:
            return self.linked[key]
        vg = self.valued[key]
        if self.negligible(vg):
            self.linked[key] = {q: [Fraction(0)] * (self.order + 1) for q in QUANTITIES}
            return self.linked[key]
        w = {q: list(self.raw[key][q]) for q in QUANTITIES}
        if vg.graph.n_edges >= 1:
            for v in range(vg.graph.n_vertices):
                site = site_graph(vg.vertex_values[vg.graph.vertex_colours[v]])
                _subtract(w, self.weight(site.key), 1)
            for sub_key, count in self._subgraphs(vg).items():
                _subtract(w, self.weight(sub_key), count)
        self.linked[key] = w
        return w

    def _subgraphs(self, vg: ValuedGraph) -> dict[str, int]:
        if vg.key in self.subgraph_memo:
            return self.subgraph_memo[vg.key]
        result = {}
        for local_key, count in subgraph_counts(vg.graph).items():
            g = key_to_graph(local_key)
            sub = make_valued(g.n_vertices, [vg.vertex_values[c] for c in g.vertex_colours],
                              [(u, v, vg.edge_values[c]) for u, v, c in g.edges])
            self.valued.setdefault(sub.key, sub)
            result[sub.key] = result.get(sub.key, 0) + count
        self.subgraph_memo[vg.key] = result
        return result


def _subtract(w: dict, other: dict, count: int) -> None:
    for q in QUANTITIES:
        w[q] = [a - count * b for a, b in zip(w[q], other[q])]


def site_graph(value) -> ValuedGraph:
    return make_valued(1, [value], [])


# ---------------------------------------------------------------------------------------------- lattice sum
@dataclass
class LatticeSeries:
    """Series of a lattice model, per unit cell before normalisation.

    ``terms[q][n]`` is the coefficient of beta^n of quantity q in QUANTITIES, as a polynomial dict over
    ``variables`` (exponent tuples -> Fraction); ``entropy_sites`` maps site class -> (p_c n_c polynomial,
    ln(2S+1)) for the beta^0 term of ln Z.
    """

    variables: tuple
    terms: dict
    site_counts: dict  # class -> (n_c per cell, spin)
    occupation: dict
    order: int
    census: ClusterCensus | None = None
    stats: dict = field(default_factory=dict)


def _dilution_factor(model: SpinModel, site_classes, graph: ColouredGraph, variables) -> dict:
    """prod_c p_c^{n_c} as a polynomial dict over `variables` (numeric p folded into the coefficient)."""
    coef = Fraction(1)
    exps = [0] * len(variables)
    for c in graph.vertex_colours:
        p = model.occupation[site_classes[c]]
        if isinstance(p, sympy.Basic) and not p.is_number:
            exps[variables.index(p)] += 1
        else:
            coef *= Fraction(str(p)) if not isinstance(p, Fraction) else p
    return {tuple(exps): coef} if coef else {}


def _times(poly: dict, scalar_poly: dict) -> dict:
    out: dict = {}
    for m1, c1 in poly.items():
        for m2, c2 in scalar_poly.items():
            m = tuple(a + b for a, b in zip(m1, m2))
            out[m] = out.get(m, 0) + c1 * c2
    return {m: c for m, c in out.items() if c}


def expand_lattice(lattice, model: SpinModel, order: int, *, cache=None, workers: int = 1, progress: bool = False,
                   census: ClusterCensus | None = None, scheduler: str | None = None,
                   quantities=QUANTITIES) -> LatticeSeries:
    """Exact series of ln Z, <M^2>_c and <M^4>_c per unit cell of `lattice` for `model`, to beta^order.

    ``quantities=("lnz",)`` asks for ln Z alone: graphs with E bonds and b bridges then start at beta^(E+b)
    (see :meth:`WeightBook.negligible`), which removes most large trees from the work.
    """
    from hte.errors import ParameterError

    if order < 1:
        raise ParameterError(f"--order {order}: the order must be at least 1")
    spec = lattice.without_labels([l for l, c in model.couplings.items() if c.is_zero])
    spec = spec.without_classes([c for c, p in model.occupation.items() if p == 0])

    symbols = set()
    for c in model.couplings.values():
        for part in (c.xy, c.z):
            if isinstance(part, sympy.Basic) and not part.is_number:
                symbols |= part.free_symbols
    coupling_vars = sorted(symbols, key=str)
    occ_vars = sorted({p for p in model.occupation.values() if isinstance(p, sympy.Basic) and not p.is_number},
                      key=str)
    variables = tuple(coupling_vars + occ_vars)

    t0 = time.perf_counter()
    if spec.bonds:
        if census is None:
            census = enumerate_clusters(spec, order, workers=workers)
        classes = census.classes
    else:
        classes = []
    t_enum = time.perf_counter() - t0
    site_classes = list(spec.site_classes)
    labels = list(spec.labels)
    quantities = tuple(q for q in QUANTITIES if q in quantities)
    if not quantities:
        raise ParameterError(f"quantities must include some of {', '.join(QUANTITIES)}")
    book = WeightBook(order, cache=cache, workers=workers, progress=progress, scheduler=scheduler,
                      lnz_only=quantities == ("lnz",))

    def vertex_value(class_index):
        name = site_classes[class_index]
        return (model.spin[name], model.anisotropy.get(name, Fraction(0)))

    # ---- which valued graphs are needed
    plans = []  # (graph class, list of (point, ValuedGraph)), n_vars, homogeneous, var indices
    needed: dict[str, ValuedGraph] = {}
    for gc in classes:
        g = gc.graph
        if book.lnz_only and g.n_edges + count_bridges(g) > order:
            continue  # its ln Z weight vanishes to this order (WeightBook.negligible)
        present = []
        for _, _, col in g.edges:
            cpl = model.couplings[labels[col]]
            for part in (cpl.xy, cpl.z):
                if isinstance(part, sympy.Basic) and not part.is_number:
                    for s in sorted(part.free_symbols, key=str):
                        if s not in present:
                            present.append(s)
        present.sort(key=str)
        numeric_energy = any(vertex_value(c)[1] != 0 for c in g.vertex_colours) or any(
            not _is_symbolic(model.couplings[labels[col]].xy) and model.couplings[labels[col]].xy != 0
            or not _is_symbolic(model.couplings[labels[col]].z) and model.couplings[labels[col]].z != 0
            for _, _, col in g.edges)
        homogeneous = bool(present) and not numeric_energy
        n_free = len(present) - 1 if homogeneous else len(present)
        points = interpolation_points(n_free, order)
        evaluations = []
        for point in points:
            values = dict(zip(present[1:] if homogeneous else present, point))
            if homogeneous:
                values[present[0]] = 1
            edges = []
            for u, v, col in g.edges:
                cpl = model.couplings[labels[col]]
                edges.append((u, v, (_evaluate(cpl.xy, values), _evaluate(cpl.z, values))))
            vg = make_valued(g.n_vertices, [vertex_value(c) for c in g.vertex_colours], edges)
            needed.setdefault(vg.key, vg)
            evaluations.append(vg.key)
        plans.append((gc, evaluations, present, homogeneous, n_free))
    for name in site_classes:
        if spec.sites_of_class(name):
            vg = site_graph(vertex_value(site_classes.index(name)))
            needed.setdefault(vg.key, vg)
    # raw series of every needed graph and of all their subgraphs (subgraphs of lattice clusters are lattice
    # clusters, but in symbolic mode a subgraph can meet an evaluation point no class asked for)
    t1 = time.perf_counter()
    book.ensure_raw(list(needed.values()))
    closure = {}
    for key in list(needed):
        vg = needed[key]
        if vg.graph.n_edges > 1 and not book.negligible(vg):
            for sub_key in book._subgraphs(vg):
                if sub_key not in book.raw:
                    closure[sub_key] = book.valued[sub_key]
        for v in vg.vertex_values:
            s = site_graph(v)
            if s.key not in book.raw:
                closure[s.key] = s
    book.ensure_raw(list(closure.values()))
    t_kernel = time.perf_counter() - t1

    # ---- lattice sum
    t2 = time.perf_counter()
    terms = {q: [dict() for _ in range(order + 1)] for q in quantities}
    for gc, evaluations, present, homogeneous, n_free in plans:
        dil = _dilution_factor(model, site_classes, gc.graph, variables)
        for q in quantities:
            for n in range(order + 1):
                values = [book.weight(k)[q][n] for k in evaluations]
                if not any(values):
                    continue
                poly_local = interpolate(n_free, order, values)
                poly = _lift(poly_local, present, homogeneous, n, variables)
                add_into(terms[q][n], _times(poly, dil), gc.per_cell)
    site_counts = {}
    for name in site_classes:
        n_c = len(spec.sites_of_class(name))
        if not n_c:
            continue
        w = book.weight(site_graph(vertex_value(site_classes.index(name))).key)
        dil = _dilution_factor(model, site_classes, ColouredGraph(1, (site_classes.index(name),), ()), variables)
        for q in quantities:
            for n in range(order + 1):
                if w[q][n]:
                    add_into(terms[q][n], _times({tuple([0] * len(variables)): w[q][n]}, dil), n_c)
        site_counts[name] = (n_c, model.spin[name])
    t_sum = time.perf_counter() - t2
    stats = {"enumeration_s": t_enum, "kernel_s": t_kernel, "assembly_s": t_sum,
             "graph_classes": len(classes), "cluster_series_computed": book.computed,
             "cluster_series_from_cache": book.from_cache}
    return LatticeSeries(variables, terms, site_counts, dict(model.occupation), order, census, stats)


def _is_symbolic(x) -> bool:
    return isinstance(x, sympy.Basic) and not x.is_number


def _evaluate(part, values) -> Fraction:
    if isinstance(part, Fraction):
        return part
    if isinstance(part, sympy.Symbol):
        return Fraction(values[part])
    if _is_symbolic(part):
        return Fraction(str(part.subs(values)))
    return Fraction(str(part))


def _lift(poly_local: dict, present, homogeneous: bool, degree: int, variables) -> dict:
    """Map a polynomial in the graph's own free variables to exponent tuples over all `variables`."""
    out = {}
    free = present[1:] if homogeneous else present
    for mono, c in poly_local.items():
        exps = [0] * len(variables)
        for s, k in zip(free, mono):
            exps[variables.index(s)] += k
        if homogeneous:
            rest = degree - sum(mono)
            if rest < 0:
                if c:
                    raise AssertionError("homogeneous interpolation produced a term above the order")
                continue
            exps[variables.index(present[0])] += rest
        out[tuple(exps)] = out.get(tuple(exps), 0) + c
    return out
