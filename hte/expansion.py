r"""Linked-cluster assembly: from graph classes and linked weights to the lattice's series, and the symbolic plan.

The lattice sum per unit cell is sum_G L(G) prod_c p_c^{n_c(G)} W(G) plus the single-site terms
sum_c n_c p_c W(site_c), where G runs over the connected graph classes of the lattice (:mod:`hte.clusters`),
L(G) is the number of clusters per cell of class G, p_c the occupation of site class c and W the linked weight
of the three additive quantities of :data:`hte.exact.QUANTITIES` (ln Z(beta, 0) - sum_i ln(2 S_i + 1), the
second and the fourth cumulant of M = sum_i S_i^z at h = 0), from :class:`hte.weight_book.WeightBook`.  A graph
with E bonds has W = O(beta^E), so clusters of up to `order` bonds suffice.

Numeric mode: couplings are exact rationals; bonds of zero coupling and sites of zero occupation are dropped
before enumeration; the physical graph (vertices coloured by (S, D), edges by (Jxy, Jz) values,
:mod:`hte.valued_graph`) keys the weight, so labels with equal values share weights.  Symbolic mode: every
labelled bond is kept; the weight of a class is a polynomial in the coupling symbols of its bonds, obtained
exactly by evaluating numeric weights at integer points and interpolating (:mod:`hte.polynomial`).  Since every
bond enters every term of a linked weight, a class of E bonds needs only the points of degree order - E
(:func:`plan_class`, :class:`ClassPlan`): one evaluation for the largest classes.

References
----------
.. [1] M. P. Gelfand, R. R. P. Singh and D. A. Huse, J. Stat. Phys. 59, 1093 (1990).
.. [2] J. Oitmaa, C. Hamer and W. Zheng, Series Expansion Methods for Strongly Interacting Lattice Models
   (Cambridge, 2006), ch. 2-3.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from fractions import Fraction

import sympy

from hte.clusters import ClusterCensus, GraphClass, enumerate_clusters
from hte.exact import QUANTITIES
from hte.graph import ColouredGraph
from hte.models import SpinModel
from hte.polynomial import add_into, interpolate, interpolation_points, lattice_size
from hte.valued_graph import ValuedGraph, make_valued, site_graph
from hte.vanishing_weights import insertions_for
from hte.weight_book import WeightBook

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

    Graphs whose weights vanish to this order for every quantity asked for are neither classified nor
    diagonalised (:mod:`hte.vanishing_weights`): a graph with E bonds and b bridges starts at beta^(E + b) in
    ln Z and at beta^(E + b - P) in <M^2>_c and <M^4>_c, P the bridges that one path (M^2) or two edge-disjoint
    paths (M^4) of its bridge tree cover.  ``quantities=("lnz",)`` (ln Z alone) so removes most large trees from
    the work, ``("lnz", "m2")`` (no M4) many more graphs than the default.
    ``bridge_factorisation=False`` diagonalises the graphs of E = order bonds with a bridge too (same result).
    For ln Z alone of a spin-1/2 Ising model only biconnected clusters are enumerated (:func:`star_graphs_suffice`).
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

    quantities = tuple(q for q in QUANTITIES if q in quantities)
    if not quantities:
        raise ParameterError(f"quantities must include some of {', '.join(QUANTITIES)}")
    t0 = time.perf_counter()
    if spec.bonds:
        if census is None:
            census = enumerate_clusters(spec, order, workers=workers, insertions=insertions_for(quantities),
                                        biconnected_only=star_graphs_suffice(spec, model, quantities))
        classes = census.classes
    else:
        classes = []
    t_enum = time.perf_counter() - t0
    site_classes = list(spec.site_classes)
    labels = list(spec.labels)
    book = WeightBook(order, cache=cache, workers=workers, progress=progress, scheduler=scheduler,
                      quantities=quantities, bridge_factorisation=bridge_factorisation)

    def vertex_value(class_index):
        name = site_classes[class_index]
        return (model.spin[name], model.anisotropy.get(name, Fraction(0)))

    # ---- which valued graphs are needed
    plans = []
    needed: dict[str, ValuedGraph] = {}
    for gc in classes:
        g = gc.graph
        if book.vanishes(g):
            continue  # its weights vanish to this order (a census given by the caller may keep such graphs)
        plan = plan_class(gc, [model.couplings[labels[col]] for _, _, col in g.edges],
                          [vertex_value(c) for c in g.vertex_colours], order)
        for vg in plan.evaluations:
            needed.setdefault(vg.key, vg)
        plans.append(plan)
    for name in site_classes:
        if spec.sites_of_class(name):
            vg = site_graph(vertex_value(site_classes.index(name)))
            needed.setdefault(vg.key, vg)
    t1 = time.perf_counter()
    book.ensure_weights(list(needed.values()))
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


def star_graphs_suffice(spec, model: SpinModel, quantities) -> bool:
    """True for ln Z alone of a spin-1/2 Ising model: every site class of `spec` (the lattice without its zero
    couplings and empty classes) has spin 1/2 and every coupling left has Jxy = 0 exactly.  Then only biconnected
    clusters have nonzero weights (:meth:`hte.weight_book.WeightBook.ising_half`)."""
    return (tuple(quantities) == ("lnz",)
            and all(model.spin[name] == Fraction(1, 2) for name in spec.site_classes if spec.sites_of_class(name))
            and all(model.couplings[label].xy == 0 for label in spec.labels))


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
