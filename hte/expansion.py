r"""Linked-cluster assembly: from graph classes and cluster series to the lattice's series.

For every connected cluster G (a graph class of the lattice), the kernel gives the cluster's own series
P(G) of three additive quantities: ln Z(beta, 0) - sum_i ln(2 S_i + 1), the second and the fourth cumulant
of M = sum_i S_i^z at h = 0.  The linked weight is found by subgraph subtraction,

    W(G) = P(G) - sum_{g connected, proper} c(g, G) W(g) - sum_{v in G} W(v),

and the lattice sum per unit cell is sum_G L(G) prod_c p_c^{n_c(G)} W(G) plus the single-site terms
sum_c n_c p_c W(site_c), where L(G) is the number of clusters per cell of class G and p_c the occupation of
site class c.  A graph with E bonds has W = O(beta^E), so clusters of up to `order` bonds suffice.
A graph with E = order bonds and a bridge is not diagonalised: its weight is beta^order times a product of
rooted weights of its two halves (:mod:`hte.bridge_factorisation`; H0 conserves M, as every model here does),
and the smaller graphs' series come with their rooted series (:mod:`hte.rooted_series`).

Numeric mode: couplings are exact rationals; bonds of zero coupling and sites of zero occupation are dropped
before enumeration; the physical graph (vertices coloured by (S, D), edges by (Jxy, Jz) values) keys the
weight, so labels with equal values share weights.  Symbolic mode: every labelled bond is kept; the weight of
a class is a polynomial in the coupling symbols of its bonds, obtained exactly by evaluating numeric weights at
integer points and interpolating (:mod:`hte.polynomial`).  Since every bond enters every term of a linked
weight, a class of E bonds needs only the points of degree order - E (:func:`plan_class`): one evaluation for
the largest classes.

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
from math import lcm

import sympy

from hte.canonical import key_to_graph
from hte.clusters import ClusterCensus, GraphClass, enumerate_clusters, subgraph_counts
from hte.executors import run_jobs
from hte.graph import ColouredGraph, count_bridges
from hte.models import SpinModel
from hte.polynomial import add_into, interpolate, interpolation_points, lattice_size
from hte.valued_graph import ValuedGraph, hamiltonian_of, make_valued, site_graph

QUANTITIES = ("lnz", "m2", "m4")
CACHE_FORMAT = "raw-v1"
ROOTED_CACHE_FORMAT = "rooted-v1"  # per-site u_1, u_3 series (hte.rooted_series), beside the raw-v1 row


def _raw_job(args):
    """Worker: the cluster's own series as JSON text (exact fractions as strings), and its rooted series as
    JSON text {"u1": [[...] per site], "u3": ...} when asked for (else None)."""
    key, vg, order, rooted = args
    if rooted:
        from hte.rooted_series import rooted_cluster_series

        c, r = rooted_cluster_series(hamiltonian_of(vg), order)
        rooted_text = json.dumps({name: [[str(x) for x in site] for site in getattr(r, name)] for name in ("u1", "u3")})
    else:
        from hte.exact import cluster_cumulants

        c, rooted_text = cluster_cumulants(hamiltonian_of(vg), order), None
    return key, json.dumps({q: [str(x) for x in getattr(c, q)] for q in QUANTITIES}), rooted_text


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
                 lnz_only: bool = False, bridge_factorisation: bool = True):
        from hte.bridge_factorisation import RootedWeights

        self.order = order
        self.lnz_only = lnz_only
        self.factorise = bridge_factorisation and not lnz_only
        self.rooted = RootedWeights(order)
        self.rooted_wanted: set[str] = set()  # graphs whose rooted series some factorised weight uses
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
        self._valued_subgraph: dict[tuple, ValuedGraph] = {}
        self._site_key: dict[tuple, str] = {}
        self.computed = 0
        self.from_cache = 0

    def negligible(self, vg: ValuedGraph) -> bool:
        """True when only ln Z is wanted and the graph's weight vanishes to this order.

        At h = 0 a term of ln Z that uses a bridge once is a product of one-point functions <S_a> of the two
        halves, which vanish by the global spin flip (S^z) and the U(1) symmetry (S^x, S^y) of H0; so every
        bridge appears at least twice and a graph with E bonds and b bridges starts at beta^(E + b).
        """
        return self.lnz_only and vg.graph.n_edges + count_bridges(vg.graph) > self.order

    def factorised(self, vg: ValuedGraph) -> bool:
        """True when the graph's weight comes from the bridge factorisation (E = order bonds and a bridge)."""
        return self.factorise and vg.graph.n_edges == self.order and count_bridges(vg.graph) > 0

    def _wants_rooted(self, vg: ValuedGraph) -> bool:
        return vg.key in self.rooted_wanted

    def _cache_key(self, key: str, kind: str = CACHE_FORMAT) -> str:
        return f"{kind}|order={self.order}|{key}"

    def ensure_raw(self, graphs: list[ValuedGraph]) -> None:
        """Compute (or fetch from the cache) the raw series of all `graphs`, with the rooted series of those that
        the factorised graphs among them (or before them) use; commits as results arrive."""
        for vg in graphs:
            if self.factorised(vg):
                self.rooted_wanted.update(sub.key for sub in self.rooted.needed_for(vg))
        todo = {}
        for vg in graphs:
            self.valued.setdefault(vg.key, vg)
            if self.negligible(vg) or self.factorised(vg):
                continue
            if vg.key not in self.raw or (self._wants_rooted(vg) and vg.key not in self.rooted.indexed):
                todo[vg.key] = vg
        if not todo:
            return
        if self.cache is not None:
            found = self.cache.get_many([self._cache_key(k) for k in todo] + [
                self._cache_key(k, ROOTED_CACHE_FORMAT) for k, vg in todo.items() if self._wants_rooted(vg)])
            for k, vg in list(todo.items()):
                text, rooted_text = found.get(self._cache_key(k)), found.get(self._cache_key(k, ROOTED_CACHE_FORMAT))
                if text is not None and (rooted_text is not None or not self._wants_rooted(vg)):
                    self._store_raw(k, _decode(text))
                    if self._wants_rooted(vg):
                        self._store_rooted(k, rooted_text)
                    del todo[k]
                    self.from_cache += 1
        if not todo:
            return
        jobs = [(k, vg, self.order, self._wants_rooted(vg))
                for k, vg in sorted(todo.items(), key=lambda kv: -len(kv[1].graph.edges))]
        bar = Progress(len(jobs), "cluster series", self.progress)
        pending: list[tuple[str, str]] = []

        def accept(key, text, rooted_text):
            self._store_raw(key, _decode(text))
            self.computed += 1
            pending.append((self._cache_key(key), text))
            if rooted_text is not None:
                self._store_rooted(key, rooted_text)
                pending.append((self._cache_key(key, ROOTED_CACHE_FORMAT), rooted_text))
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

    def _store_rooted(self, key: str, text: str) -> None:
        data = json.loads(text)
        self.rooted.add(self.valued[key], *([[Fraction(x) for x in s] for s in data[u]] for u in ("u1", "u3")))

    def _store_raw(self, key: str, series: dict) -> None:
        """Keep a raw series; widen the common denominators (rescaling the integer weights kept so far)."""
        self.raw[key] = series
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
        """Linked weight W of the valued graph `key` as Fractions (its raw series and those of its subgraphs
        must be known)."""
        if key not in self.linked and self.factorised(self.valued[key]):
            from hte.bridge_factorisation import factorised_top_weight

            self.linked[key] = factorised_top_weight(self.valued[key], self.order, self.rooted)
            self.factorised_count += 1
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
        result = {}
        for local_key, count in subgraph_counts(vg.graph).items():
            memo = (local_key, vg.vertex_values, vg.edge_values)  # local colours index vg's value palettes
            sub = self._valued_subgraph.get(memo)
            if sub is None:
                g = key_to_graph(local_key)
                sub = make_valued(g.n_vertices, [vg.vertex_values[c] for c in g.vertex_colours],
                                  [(u, v, vg.edge_values[c]) for u, v, c in g.edges])
                self._valued_subgraph[memo] = sub
                self.valued.setdefault(sub.key, sub)
            result[sub.key] = result.get(sub.key, 0) + count
        self.subgraph_memo[vg.key] = result
        return result


def _subtract(w: dict, other: dict, count: int) -> None:
    for q in QUANTITIES:
        w[q] = [a - count * b for a, b in zip(w[q], other[q])]


# ---------------------------------------------------------------------------------------------- symbolic weights
_GENERAL = object()  # marks a bond whose coupling is not a rational multiple of one symbol


def _bond_symbol(coupling):
    """The symbol s when the bond's (Jxy, Jz) = (a s, c s) with rationals a, c (one of them may be 0); None when
    both parts are numbers; ``_GENERAL`` otherwise (two symbols, a symbol next to a nonzero number, or an
    expression that is not a rational multiple of one symbol)."""
    symbols, number = set(), False
    for part in (coupling.xy, coupling.z):
        if not _is_symbolic(part):
            number = number or part != 0
            continue
        coef, rest = part.as_coeff_Mul()
        if not (isinstance(rest, sympy.Symbol) and coef.is_Rational):
            return _GENERAL
        symbols.add(rest)
    if not symbols:
        return None
    return symbols.pop() if len(symbols) == 1 and not number else _GENERAL


@dataclass(frozen=True)
class ClassPlan:
    """Where the weight of one graph class is evaluated numerically and how its polynomial is rebuilt.

    Built by :func:`plan_class`, whose docstring derives the scheme.

    Attributes
    ----------
    graph_class : GraphClass
    evaluations : tuple of ValuedGraph
        The class with numeric couplings, one per interpolation point.
    points : tuple of tuples
        Values of the ``free`` symbols at each evaluation (``anchor``, if any, is 1 throughout).
    free : tuple of sympy.Symbol
        The coupling symbols that vary over the points.
    anchor : sympy.Symbol or None
        The symbol held at 1 when the weight is homogeneous in the coupling symbols (no numeric energy).
    bond_powers : tuple of (sympy.Symbol, int) or None
        (s, e_s): e_s bonds of the class carry a coupling proportional to s; None when the general scheme is used.
    """

    graph_class: GraphClass
    evaluations: tuple
    points: tuple
    free: tuple
    anchor: object
    bond_powers: tuple | None

    def weight_polynomial(self, n: int, values, variables) -> dict:
        """The beta^n coefficient of the class's linked weight over `variables` (exponent tuples -> Fraction),
        from its values at the evaluations (``values[i]`` belongs to ``evaluations[i]``)."""
        n_bonds = self.graph_class.n_bonds
        if self.bond_powers is None:
            degree, offset, powers = n, 0, {}
        else:
            degree, offset, powers = n - n_bonds, 1, dict(self.bond_powers)
            if degree < 0:
                if any(values):
                    raise AssertionError(f"a linked weight with {n_bonds} bonds has a beta^{n} term")
                return {}
        count = lattice_size(len(self.free), degree)
        scaled = values[:count]
        if powers:
            scaled = [v / _monomial_value(point, self.free, powers) for v, point in zip(scaled, self.points)]
        local = interpolate(len(self.free), degree, scaled, offset)
        out = {}
        for mono, c in local.items():
            exps = [0] * len(variables)
            for s, k in zip(self.free, mono):
                exps[variables.index(s)] += k
            if self.anchor is not None:
                rest = degree - sum(mono)
                if rest < 0:
                    raise AssertionError("homogeneous interpolation produced a term above the degree")
                exps[variables.index(self.anchor)] += rest
            for s, e in powers.items():
                exps[variables.index(s)] += e
            out[tuple(exps)] = c
        return out


def _monomial_value(point, free, powers) -> int:
    value = 1
    for s, x in zip(free, point):
        value *= x ** powers.get(s, 0)
    return value


def plan_class(graph_class: GraphClass, couplings, vertex_values, order: int) -> ClassPlan:
    r"""Choose the numeric evaluations from which the symbolic weight of `graph_class` is rebuilt exactly.

    ``couplings[i]`` is the :class:`~hte.models.Coupling` of the class's i-th edge, ``vertex_values[v]`` the
    (S, D) of vertex v (numbers: hte.models has no symbolic spins or anisotropies).

    Derivation.  Give every bond b its own parameters (Jxy_b, Jz_b) and every site its D_i.  The beta^n
    coefficient of the cluster series P(G) (ln Z or a cumulant of M at h = 0) is a polynomial in them,
    homogeneous of degree n (the n-th term of exp(-beta H) has n factors of H).  The subtraction
    W(G) = P(G) - sum_g c(g, G) W(g) - sum_v W(v) is the inversion over bond subsets: the terms of P(G) that
    miss bond b are those of P(G - b), which is additive over its connected parts and is cancelled by the
    subgraph and site weights; so every term of W_n(G) has degree k_b >= 1 in the parameters of every bond b.
    Now let every bond be *numeric* (both parts rational) or *proportional*: (Jxy_b, Jz_b) = (a_b s, c_b s) for
    one symbol s and rationals a_b, c_b.  A term then carries s^(k_b) from each proportional bond, so
    W_n = prod_s s^(e_s) Q_n, with e_s the number of bonds proportional to s and Q_n a polynomial.  Its total
    degree in the symbols is n minus the degree in numeric parameters, which is at least the number of numeric
    bonds; removing the factor leaves

        deg Q_n <= n - E,   E = number of bonds of the class.

    Without numeric energy (no numeric bond, D = 0 on every site of the class) W_n and Q_n are homogeneous, of
    degrees n and n - E, so Q_n is fixed by its values at s_0 = 1 (s_0 the first symbol, the ``anchor``):
    Q_n(s) = s_0^(n-E) Q_n(1, s_1/s_0, ...), a polynomial of degree <= n - E in the other ("free") symbols.
    Hence W is evaluated at the points x = p + (1, ..., 1), p on the principal lattice of degree order - E in
    the free symbols (no coordinate is zero, so prod x_s^(e_s) can be divided out), and Q_n is interpolated
    with degree n - E from the first C(n - E + f, f) points (:mod:`hte.polynomial`).  A class of E = order
    bonds needs one evaluation, at x = (1, ..., 1), instead of C(order + f, f).

    General scheme, used when some bond is neither numeric nor proportional (XXZ with Jxy and Jz different
    symbols, a symbol next to a nonzero number on one bond, an expression that is not a rational multiple of
    one symbol): W is evaluated on the principal lattice of degree `order` from 0 and W_n, of degree <= n in the
    free symbols (homogeneous of degree n with the anchor when there is no numeric energy), is interpolated
    from its first C(n + f, f) points.
    """
    g = graph_class.graph
    present = sorted({s for c in couplings for part in (c.xy, c.z) if _is_symbolic(part) for s in part.free_symbols},
                     key=str)
    numeric_energy = any(d != 0 for _, d in vertex_values) or any(
        not _is_symbolic(part) and part != 0 for c in couplings for part in (c.xy, c.z))
    anchor = present[0] if present and not numeric_energy else None
    free = tuple(present[1:] if anchor is not None else present)
    bond_symbols = [_bond_symbol(c) for c in couplings]
    if any(s is _GENERAL for s in bond_symbols):
        bond_powers = None
        points = interpolation_points(len(free), order)
    else:
        counts: dict = {}
        for s in bond_symbols:
            if s is not None:
                counts[s] = counts.get(s, 0) + 1
        bond_powers = tuple(sorted(counts.items(), key=lambda item: str(item[0])))
        points = interpolation_points(len(free), order - g.n_edges, offset=1)
    evaluations = []
    for point in points:
        values = dict(zip(free, point))
        if anchor is not None:
            values[anchor] = 1
        edges = [(u, v, (_evaluate(c.xy, values), _evaluate(c.z, values))) for (u, v, _), c in zip(g.edges, couplings)]
        evaluations.append(make_valued(g.n_vertices, list(vertex_values), edges))
    return ClassPlan(graph_class, tuple(evaluations), tuple(points), free, anchor, bond_powers)


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
                   quantities=QUANTITIES, bridge_factorisation: bool = True) -> LatticeSeries:
    """Exact series of ln Z, <M^2>_c and <M^4>_c per unit cell of `lattice` for `model`, to beta^order.

    ``quantities=("lnz",)`` asks for ln Z alone: graphs with E bonds and b bridges then start at beta^(E+b)
    (see :meth:`WeightBook.negligible`), which removes most large trees from the work.
    ``bridge_factorisation=False`` diagonalises the graphs of E = order bonds with a bridge too (same result).
    """
    from hte.errors import ParameterError

    if order < 1:
        raise ParameterError(f"--order {order}: the order must be at least 1")
    spec = lattice.without_labels([l for l, c in model.couplings.items() if c.is_zero])
    spec = spec.without_classes([c for c, p in model.occupation.items() if p == 0])

    symbols = set()
    for label, c in model.couplings.items():
        for name, part in (("xy", c.xy), ("z", c.z)):
            if _is_symbolic(part):
                _check_linear_form(part, f"{label}.{name}")
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
                      lnz_only=quantities == ("lnz",), bridge_factorisation=bridge_factorisation)

    def vertex_value(class_index):
        name = site_classes[class_index]
        return (model.spin[name], model.anisotropy.get(name, Fraction(0)))

    # ---- which valued graphs are needed
    plans = []
    needed: dict[str, ValuedGraph] = {}
    for gc in classes:
        g = gc.graph
        if book.lnz_only and g.n_edges + count_bridges(g) > order:
            continue  # its ln Z weight vanishes to this order (WeightBook.negligible)
        plan = plan_class(gc, [model.couplings[labels[col]] for _, _, col in g.edges],
                          [vertex_value(c) for c in g.vertex_colours], order)
        for vg in plan.evaluations:
            needed.setdefault(vg.key, vg)
        plans.append(plan)
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
        if book.factorised(vg):
            closure.update((sub.key, sub) for sub in book.rooted.needed_for(vg))
        elif vg.graph.n_edges > 1 and not book.negligible(vg):
            for sub_key in book._subgraphs(vg):
                if sub_key not in book.raw:
                    closure[sub_key] = book.valued[sub_key]
        for v in vg.vertex_values:
            site_key = book._site(v)
            if site_key not in book.raw:
                closure[site_key] = book.valued[site_key]
    book.ensure_raw(list(closure.values()))
    t_kernel = time.perf_counter() - t1

    # ---- lattice sum
    t2 = time.perf_counter()
    terms = {q: [dict() for _ in range(order + 1)] for q in quantities}
    for plan in plans:
        dil = _dilution_factor(model, site_classes, plan.graph_class.graph, variables)
        for q in quantities:
            for n in range(order + 1):
                values = [book.weight(vg.key)[q][n] for vg in plan.evaluations]
                if not any(values):
                    continue
                poly = plan.weight_polynomial(n, values, variables)
                add_into(terms[q][n], _times(poly, dil), plan.graph_class.per_cell)
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
             "cluster_series_from_cache": book.from_cache, "graphs_factorised": book.factorised_count}
    return LatticeSeries(variables, terms, site_counts, dict(model.occupation), order, census, stats)


def _is_symbolic(x) -> bool:
    return isinstance(x, sympy.Basic) and not x.is_number


def _check_linear_form(part, where: str) -> None:
    """Symbolic couplings must be rational linear forms in the symbols (J2, 2*J1, J1 - J2/2): the weights are
    then polynomials of degree <= n at beta^n, homogeneous without numeric energies (see :func:`plan_class`)."""
    from hte.errors import ParameterError

    try:
        poly = sympy.Poly(part, *sorted(part.free_symbols, key=str))
    except sympy.PolynomialError:
        poly = None
    if poly is None or poly.total_degree() != 1 or not poly.is_homogeneous or not all(
            c.is_Rational for c in poly.coeffs()):
        raise ParameterError(f"coupling {where} = {part}: a symbolic coupling must be a symbol or a linear "
                             "combination of symbols with rational coefficients (such as J2, 2*J1 or J1 - J2/2)")


def _evaluate(part, values) -> Fraction:
    if isinstance(part, Fraction):
        return part
    if isinstance(part, sympy.Symbol):
        return Fraction(values[part])
    if _is_symbolic(part):
        return Fraction(str(part.subs(values)))
    return Fraction(str(part))
