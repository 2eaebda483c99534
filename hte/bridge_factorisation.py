r"""The bridge factorisation: linked T chi and M4 weights of top-order graphs with a bridge, without diagonalisation.

Convention (CONVENTIONS.md): H = H0 - h M, H0 = sum_b [Jxy_b (S^x S^x + S^y S^y) + Jz_b S^z S^z] + sum_i D_i (S^z_i)^2,
M = sum_i S^z_i, k_B = g mu_B = 1; ln Z(beta, h) = ln Z(beta, 0) + sum_k (beta h)^k / k! kappa_k with
kappa_2 = m2 = <M^2> (= T chi) and kappa_4 = m4 = <M^4> - 3<M^2>^2 at h = 0.

Derivation.  Let b = (a, c) be a bridge of the connected graph G: removing it leaves A (containing a) and B
(containing c), and H0 = H_A + H_B + V with V = Jxy_b (S^x_a S^x_c + S^y_a S^y_c) + Jz_b S^z_a S^z_c.

1. To first order in V, ln Z(beta, h) of G is ln Z_A + ln Z_B - beta <V>_h: the first-order term of
   ln Tr e^{-beta (H' + V)} is -int_0^beta <V(tau)> dtau = -beta <V> (cyclicity of the trace), H' = H_A + H_B - h M.
2. In the product state of A and B, <V>_h = Jz_b <S^z_a>_{A,h} <S^z_c>_{B,h}; the x and y parts vanish because
   H_A - h M_A commutes with rotations about z (U(1)).
3. With x = beta h, H_A conserving M_A, <S^z_a>_{A,h} = sum_{k odd} x^k / k! u_k(a), u_1 = <M_A S^z_a>,
   u_3 = <M_A^3 S^z_a> - 3 <M_A^2><M_A S^z_a> (joint cumulants at h = 0; :mod:`hte.rooted_series`).
   Collecting x^2/2! and x^4/4!, the parts of m2 and m4 linear in J_b are
       m2:  -2 beta Jz_b u_1^A(a) u_1^B(c),       m4:  -4 beta Jz_b [u_1^A(a) u_3^B(c) + u_3^A(a) u_1^B(c)].
4. The linked weight is the inclusion-exclusion W_G = sum_{S subset of E(G)} (-1)^{|E|-|S|} P(G_S) over bond
   subsets, G_S keeping all vertices.  The terms without J_b cancel between S and S + b.  In the J_b-linear
   part the subset splits into S_A and S_B, and u_k on (V_A, S_A) depends only on the component of a (a
   correlation with a disconnected part factorises into <S^z> = 0), so the sum factorises into
   -2 beta Jz_b U_1^A(a) U_1^B(c), with the ROOTED linked weight
       U_k^A(a) = sum_{S_A subset of E(A)} (-1)^{|E(A)|-|S_A|} u_k(component of a in S_A, a),
   which contains every bond of A at least once and so starts at beta^{E(A)}.  Terms with J_b^2 or higher have
   degree >= (E - 1) + 2 = E + 1 in the couplings, hence start at beta^{E+1}.
5. So for a graph with E = order bonds and a bridge, to beta^order:
       W_G(m2) = -2 Jz_b U_1^A(a)[beta^{E_A}] U_1^B(c)[beta^{E_B}] beta^E,
       W_G(m4) = -4 Jz_b (U_1^A U_3^B + U_3^A U_1^B)[top coefficients] beta^E,   E = E_A + E_B + 1,
   all lower coefficients vanish, and W_G(ln Z) = 0 (a bridge appears twice in ln Z: beta^{E + bridges}).
6. One bond below the top order: a graph with E = order - 1 bonds and two bridges b1, b2.  Its beta^order
   coefficient has total degree E + 1 in the couplings with every bond present, so exactly one bond appears
   twice; split it by the degree in b1 (degree 0 is absent in a linked weight, degree >= 3 is too high):
   * the J_b1-linear part is point 3-4's product across b1, now at beta^order: -2 Jz_b1 (U_1^A[E_A] U_1^B[E_B + 1]
     + U_1^A[E_A + 1] U_1^B[E_B]) for m2, likewise for m4; it needs the rooted weights one order above their
     first, which the rooted series hold;
   * the J_b1^2 part has every other bond once, so it is linear in b2, hence the J_b1^2 part of the product
     across b2: -2 Jz_b2 Q_1^{A'}[E_A' + 1] U_1^{B'}[E_B'] (m2) and -4 Jz_b2 (Q_1^{A'} U_3^{B'} + Q_3^{A'} U_1^{B'})
     (m4), with A' the side of b2 containing b1 and Q_k^{A'} the part of U_k^{A'} quadratic in b1's couplings.
     As U_k^{A'}[E_A' + 1] = c_1 t + c_2 t^2 when b1's couplings are scaled by t, Q_k = (U_k^{A'}(t = 2) -
     2 U_k^{A'}(t = 1)) / 2: the rooted weights of A' and of A' with b1's couplings doubled.
   The beta^E coefficient is point 5's, lower ones vanish, and W_G(ln Z) = 0 to beta^order (E + 2 > order).
   So no tree of order - 1 bonds (order sites) is diagonalised any more.
7. Two bonds below the top order: a graph with E = order - 2 bonds and three bridges b1, b2, b3 such that b3
   separates b1 from b2 (A3, the side of b3 containing b1; B3, the other, containing b2).  Each power of beta
   carries one coupling or one D, so its beta^order coefficient has degree E + 2 in them, with every bond
   present; split it by the degrees in b1 and b2:
   * degree 1 in b1: the product across b1 at beta^order, -2 Jz_b1 sum_{i + j = order - 1} U_1^A[i] U_1^B[j]
     (m2; i = E_A..E_A + 2), likewise for m4;
   * degree >= 2 in b1 and 1 in b2: linear in b2, so the product across b2 with the factor of its side A2
     containing b1 cut to its part R of degree >= 2 in b1: -2 Jz_b2 (R_1^{A2}[E_A2 + 1] U_1^{B2}[E_B2 + 1] +
     R_1^{A2}[E_A2 + 2] U_1^{B2}[E_B2]) (m2) and -4 Jz_b2 sum (R_1 U_3 + R_3 U_1) (m4).  With b1's couplings
     scaled by t, U^{A2}[E_A2 + 1] = c1 t + c2 t^2 (no t^0: linked), so R = Q = (U(2) - 2 U(1)) / 2 as in
     point 6; U^{A2}[E_A2 + 2] = c1 t + c2 t^2 + c3 t^3, and solving U(1), U(2), U(3) for c1 = 3 U(1) - 3 U(2) / 2
     + U(3) / 3 gives R = U(1) - c1 = -2 U(1) + 3 U(2) / 2 - U(3) / 3;
   * degree >= 2 in b1 and in b2: then both are squared, every other bond appears once and D not at all, so it
     is linear in b3, and b1, b2 lie on different sides of b3: -2 Jz_b3 Q_1^{A3}[E_A3 + 1] Q_1^{B3}[E_B3 + 1] (m2)
     and -4 Jz_b3 (Q_1^{A3} Q_3^{B3} + Q_3^{A3} Q_1^{B3}) (m4), Q^{A3} quadratic in b1's couplings and Q^{B3} in
     b2's, each from its side with and without that bridge doubled.
   The beta^(E + 1) coefficient is point 6's (with the same b1), the beta^E coefficient point 5's, lower ones
   vanish, and W_G(ln Z) = 0 to beta^order (E + 3 > order).  The parts with a scaled bond are new graphs, so the
   triple is chosen to keep them small (:func:`excess_two_bridges`).  A graph with three bridges but no such
   triple (a star of three bonds, a cycle with three pendant bonds) is diagonalised; among trees, that leaves
   the stars.

The rooted linked weights come from rooted subgraph subtraction (the Moebius inversion of the sum above):
U(A, a) = u(A, a) - sum_{A'} c(A', A) U(A', a) - u(a alone), over the connected proper rooted subgraphs A' of
A that contain a, with c their embedding counts.  A rooted graph is a valued graph whose root carries a
distinct vertex value (S, D, 1) against (S, D, 0) elsewhere, so canonical forms key rooted classes.  The
top coefficients do not depend on the anisotropies D (a term with D has one coupling too many), but the
rooted series are used as computed, with their D.

Chain check (spin 1/2, J = 1): the single bond (A, B single sites, U_1(site) = S(S+1)/3 = 1/4) has
W(m2) = -2 (1/4)(1/4) beta = -beta/8 + O(beta^2).  The 2-bond path a-b-c cut at (a, b) has A = {a} and B the
bond (b, c) rooted at b, whose u_1 = <S^z_b S^z_b> + <S^z_b S^z_c> = 1/4 - beta/16 + ..., so
U_1^B[beta] = -1/16 and W(m2) = -2 (1/4)(-1/16) beta^2 = +beta^2/32.  With one bond and one 2-bond path per
site and the bond's own beta^2 term -1/32, the chain's T chi has a zero beta^2 coefficient, as its exact
series has.
"""

from __future__ import annotations

from fractions import Fraction
from math import lcm
from typing import NamedTuple

from hte.canonical import certificate_to_graph
from hte.clusters import subgraph_certificates
from hte.exact import QUANTITIES
from hte.graph import ColouredGraph, count_bridges
from hte.valued_graph import SubgraphCatalogue, ValuedGraph, make_valued

ROOT, OTHER = 1, 0  # third entry of a rooted vertex value (S, D, mark)


def rooted_valued(vg: ValuedGraph, root: int) -> ValuedGraph:
    """The valued graph `vg` with vertex `root` marked (vertex values (S, D, 1) at the root, (S, D, 0) elsewhere)."""
    values = [vg.vertex_values[c] + ((ROOT if v == root else OTHER),) for v, c in enumerate(vg.graph.vertex_colours)]
    return make_valued(vg.graph.n_vertices, values, [(u, v, vg.edge_values[c]) for u, v, c in vg.graph.edges])


def unrooted(rvg: ValuedGraph) -> ValuedGraph:
    """The valued graph of a rooted one with the mark dropped."""
    g = rvg.graph
    return make_valued(g.n_vertices, [rvg.vertex_values[c][:2] for c in g.vertex_colours],
                       [(u, v, rvg.edge_values[c]) for u, v, c in g.edges])


def _root_of(rvg: ValuedGraph) -> int:
    return next(v for v, c in enumerate(rvg.graph.vertex_colours) if rvg.vertex_values[c][2] == ROOT)


def _bridge_sides(graph) -> list[tuple[int, set]]:
    """(edge number, vertices on the side of its first end) for every bridge of `graph`."""
    adjacency = [[] for _ in range(graph.n_vertices)]
    for k, (u, v, _) in enumerate(graph.edges):
        adjacency[u].append((v, k))
        adjacency[v].append((u, k))
    result = []
    for k, (a, c, _) in enumerate(graph.edges):
        side, stack = {a}, [a]
        while stack:
            for w, edge in adjacency[stack.pop()]:
                if edge != k and w not in side:
                    side.add(w)
                    stack.append(w)
        if c not in side:
            result.append((k, side))
    return result


def _separations(graph: ColouredGraph) -> list[tuple[int, list[int], list[int]]]:
    """(b3, bridges on the side of b3's first end, bridges on its other side) for every bridge b3 of `graph` that
    has other bridges on both of its sides, i.e. separates two bridges (module docstring, point 7)."""
    sides = _bridge_sides(graph)
    result = []
    for k, side in sides:
        near = [j for j, _ in sides if j != k and graph.edges[j][0] in side]
        far = [j for j, _ in sides if j != k and graph.edges[j][0] not in side]
        if near and far:
            result.append((k, near, far))
    return result


def factorisable(graph: ColouredGraph, order: int) -> bool:
    """True when the weight of `graph` to beta^order follows from rooted weights of its parts: E = order bonds and
    a bridge, E = order - 1 bonds and two bridges, or E = order - 2 bonds and three bridges one of which separates
    the other two (module docstring, points 5, 6 and 7)."""
    if graph.n_edges == order:
        return count_bridges(graph) >= 1
    if graph.n_edges == order - 1:
        return count_bridges(graph) >= 2
    return graph.n_edges == order - 2 and count_bridges(graph) >= 3 and bool(_separations(graph))


def _bonds_inside(graph: ColouredGraph, side: set) -> int:
    return sum(1 for u, v, _ in graph.edges if u in side and v in side)


def _rooted_part(vg: ValuedGraph, members, root: int, scaled: tuple[int, int] | None = None) -> ValuedGraph:
    """The rooted valued subgraph induced by `members` (vertices of vg.graph), rooted at `root`; with
    scaled = (bond number, factor), that bond's couplings (Jxy, Jz) are multiplied by the factor."""
    g = vg.graph
    index = {v: i for i, v in enumerate(sorted(members))}
    values = [vg.vertex_values[g.vertex_colours[v]] + ((ROOT if v == root else OTHER),) for v in sorted(members)]
    bond, factor = scaled or (None, 1)
    edges = []
    for k, (u, v, colour) in enumerate(g.edges):
        if u in index and v in index:
            xy, z = vg.edge_values[colour]
            edges.append((index[u], index[v], (factor * xy, factor * z) if k == bond else (xy, z)))
    return make_valued(len(index), values, edges)


def first_bridge(vg: ValuedGraph, order: int) -> int:
    """Bond number of b1: the bridge whose larger half has the fewest bonds (the first by bond number among
    equals); for a graph of order - 2 bonds, the b1 of :func:`excess_two_bridges`."""
    g = vg.graph
    if g.n_edges == order - 2:
        return excess_two_bridges(vg)[0]
    sides = _bridge_sides(g)
    if not sides:
        raise ValueError(f"graph {vg.key} has no bridge")

    def larger_half(item):
        inside = _bonds_inside(g, item[1])
        return max(inside, g.n_edges - 1 - inside)

    return min(sides, key=larger_half)[0]


def _side_with(graph: ColouredGraph, sides: dict, bridge: int, other: int) -> set:
    """The vertices on the side of `bridge` that contains the bond `other` (`sides`: dict of :func:`_bridge_sides`)."""
    side = sides[bridge]
    return side if graph.edges[other][0] in side else set(range(graph.n_vertices)) - side


def _near_side(vg: ValuedGraph, bridge: int, near: set, scaled: tuple[int, int] | None = None) -> ValuedGraph:
    """The side `near` of `bridge` rooted at the bridge's end in it (with `scaled` as in :func:`_rooted_part`)."""
    a, c, _ = vg.graph.edges[bridge]
    return _rooted_part(vg, near, a if a in near else c, scaled)


def _split_across(vg: ValuedGraph, bridge: int, near: set) -> tuple[ValuedGraph, ValuedGraph]:
    """The side `near` of `bridge` and the other side, each rooted at the bridge's end in it."""
    far = set(range(vg.graph.n_vertices)) - near
    return _near_side(vg, bridge, near), _near_side(vg, bridge, far)


def _jz(vg: ValuedGraph, bond: int) -> Fraction:
    return vg.edge_values[vg.graph.edges[bond][2]][1]


def split_at_best_bridge(vg: ValuedGraph, order: int) -> tuple[ValuedGraph, ValuedGraph, Fraction]:
    """The rooted halves (A, a), (B, c) and Jz_b1 of the bridge b1 = (a, c) of :func:`first_bridge`."""
    bridge = first_bridge(vg, order)
    side = dict(_bridge_sides(vg.graph))[bridge]  # the side of its first end a
    return (*_split_across(vg, bridge, side), _jz(vg, bridge))


def split_for_second_order(vg: ValuedGraph, order: int) -> tuple[ValuedGraph, ValuedGraph, ValuedGraph, Fraction]:
    """For the J_b1^2 part (module docstring, point 6): b1 is the bridge of :func:`first_bridge`, b2 the other
    bridge whose side containing b1 has the fewest bonds.  Returns that side A' rooted at b2's end in it, the
    same with b1's couplings doubled, the other side B' rooted at b2's other end, and Jz_b2."""
    g = vg.graph
    first, sides = first_bridge(vg, order), dict(_bridge_sides(g))
    candidates = [(_bonds_inside(g, near), k, near) for k, near in
                  ((k, _side_with(g, sides, k, first)) for k in sides if k != first)]
    if not candidates:
        raise ValueError(f"graph {vg.key} has fewer than two bridges")
    _, second, near = min(candidates, key=lambda item: item[:2])
    near_part, far_part = _split_across(vg, second, near)
    return near_part, _near_side(vg, second, near, (first, 2)), far_part, _jz(vg, second)


class ExcessTwoParts(NamedTuple):
    """The rooted parts of point 7 (module docstring) for the bridges b1, b2, b3 (b3 between b1 and b2)."""

    near: tuple[ValuedGraph, ValuedGraph, ValuedGraph]  # A2 rooted at b2's end in it, b1's couplings times 1, 2, 3
    far: ValuedGraph  # B2 rooted at b2's other end
    jz_second: Fraction  # Jz_b2
    first_side: tuple[ValuedGraph, ValuedGraph]  # A3 rooted at b3's end in it, b1's couplings times 1, 2
    second_side: tuple[ValuedGraph, ValuedGraph]  # B3 rooted at b3's other end, b2's couplings times 1, 2
    jz_third: Fraction  # Jz_b3

    def rooted_graphs(self) -> list[ValuedGraph]:
        return [*self.near, self.far, *self.first_side, *self.second_side]


def excess_two_bridges(vg: ValuedGraph) -> tuple[int, int, int]:
    """Bond numbers (b1, b2, b3) of three bridges with b3 between b1 and b2, for point 7 (module docstring).

    The parts with a scaled bond (A2 with b1 times 2 and 3, A3 with b1 doubled, B3 with b2 doubled) are the new
    graphs this needs, with their rooted subgraphs through the scaled bond, whose number grows about as 2^bonds;
    so the triple with the least 2 * 2^E_A2 + 2^E_A3 + 2^E_B3 is taken, the first by bond numbers among equals.
    """
    g = vg.graph
    sides = _bridge_sides(g)
    inside = {k: _bonds_inside(g, side) for k, side in sides}  # bonds on the side of each bridge's first end
    first_end_side = dict(sides)

    def bonds_towards(bridge, other):  # bonds on the side of `bridge` that contains the bond `other`
        toward_first = g.edges[other][0] in first_end_side[bridge]
        return inside[bridge] if toward_first else g.n_edges - 1 - inside[bridge]

    candidates = []
    for third, near, far in _separations(g):
        for ones, others in ((near, far), (far, near)):
            for first in ones:
                a3 = bonds_towards(third, first)
                for second in others:
                    cost = 2 * 2 ** bonds_towards(second, first) + 2 ** a3 + 2 ** (g.n_edges - 1 - a3)
                    candidates.append((cost, first, second, third))
    if not candidates:
        raise ValueError(f"graph {vg.key} has no bridge between two others")
    return min(candidates)[1:]


def split_for_excess_two(vg: ValuedGraph, order: int) -> ExcessTwoParts:
    """The rooted parts for the terms of degree >= 2 in b1 at beta^order of a graph of order - 2 bonds (module
    docstring, point 7), with the bridges of :func:`excess_two_bridges` (its b1 is :func:`first_bridge`'s)."""
    if vg.graph.n_edges != order - 2:
        raise ValueError(f"graph {vg.key} has {vg.graph.n_edges} bonds, not order - 2 = {order - 2}")
    g = vg.graph
    first, second, third = excess_two_bridges(vg)
    sides = dict(_bridge_sides(g))
    side_two, side_three = _side_with(g, sides, second, first), _side_with(g, sides, third, first)
    near_plain, far = _split_across(vg, second, side_two)
    near = (near_plain, *(_near_side(vg, second, side_two, (first, factor)) for factor in (2, 3)))
    first_side, second_side = _split_across(vg, third, side_three)
    first_doubled = _near_side(vg, third, side_three, (first, 2))
    second_doubled = _near_side(vg, third, set(range(g.n_vertices)) - side_three, (second, 2))
    return ExcessTwoParts(near, far, _jz(vg, second), (first_side, first_doubled), (second_side, second_doubled),
                          _jz(vg, third))


class RootedWeights:
    """Rooted series u_1, u_3 of rooted classes and their rooted linked weights U_1, U_3 (cached in a run).

    Parameters
    ----------
    order : int
        The expansion order; rooted linked weights are needed up to beta^(order - 1) (a half of a graph of
        ``order`` bonds has at most order - 1).
    """

    def __init__(self, order: int):
        self.order = order
        self.series: dict[str, tuple[list, list]] = {}  # rooted key -> (u1, u3), coefficients 0..order-1
        self._denominators = None  # fixed at the first use, reset when series are added
        self._numerators: dict[str, tuple[list, list]] = {}
        self.valued: dict[str, ValuedGraph] = {}
        self.subgraph_memo: dict[str, dict[str, int]] = {}
        self._unrooted: dict[str, ValuedGraph] = {}
        self._halves: dict[str, tuple] = {}
        self._second_order: dict[str, tuple] = {}
        self._excess_two: dict[str, ExcessTwoParts] = {}
        self._catalogue = SubgraphCatalogue()

    def add(self, vg: ValuedGraph, u1, u3) -> None:
        """Record the rooted series of the vertices v of `vg` that ``u1`` and ``u3`` hold (``u1[v]``, ``u3[v]``,
        v a vertex of vg.graph; dicts by vertex, or lists over every vertex)."""
        for v in (u1 if isinstance(u1, dict) else range(len(u1))):
            self.add_rooted(rooted_valued(vg, v), u1[v], u3[v])

    def add_rooted(self, rvg: ValuedGraph, u1, u3) -> None:
        """Record the rooted series of the rooted valued graph `rvg` (coefficients from beta^0)."""
        if rvg.key not in self.series:
            self._denominators, self._numerators = None, {}
            self.series[rvg.key] = (list(u1[: self.order]), list(u3[: self.order]))
            self.valued[rvg.key] = rvg

    def _rooted_subgraphs(self, rvg: ValuedGraph) -> dict[str, int]:
        """{rooted key: count} of the connected proper subgraphs of `rvg` with >= 1 bond that contain the root."""
        if rvg.key in self.subgraph_memo:
            return self.subgraph_memo[rvg.key]
        result = self._catalogue.count(rvg, subgraph_certificates(rvg.graph, _root_of(rvg)),
                                       certificate_to_graph, lambda sub: self.valued.setdefault(sub.key, sub))
        self.subgraph_memo[rvg.key] = result
        return result

    def _root_alone(self, rvg: ValuedGraph) -> ValuedGraph:
        alone = make_valued(1, [rvg.vertex_values[rvg.graph.vertex_colours[_root_of(rvg)]]], [])
        self.valued.setdefault(alone.key, alone)
        return alone

    def halves(self, vg: ValuedGraph) -> tuple[ValuedGraph, ValuedGraph, Fraction]:
        """:func:`split_at_best_bridge` of `vg`, remembered."""
        if vg.key not in self._halves:
            self._halves[vg.key] = split_at_best_bridge(vg, self.order)
        return self._halves[vg.key]

    def second_order_parts(self, vg: ValuedGraph) -> tuple[ValuedGraph, ValuedGraph, ValuedGraph, Fraction]:
        """:func:`split_for_second_order` of `vg`, remembered."""
        if vg.key not in self._second_order:
            self._second_order[vg.key] = split_for_second_order(vg, self.order)
        return self._second_order[vg.key]

    def excess_two_parts(self, vg: ValuedGraph) -> ExcessTwoParts:
        """:func:`split_for_excess_two` of `vg`, remembered."""
        if vg.key not in self._excess_two:
            self._excess_two[vg.key] = split_for_excess_two(vg, self.order)
        return self._excess_two[vg.key]

    def needed_for(self, vg: ValuedGraph) -> list[ValuedGraph]:
        """The (unrooted) valued graphs whose rooted series the factorised weight of `vg` uses."""
        return [graph for graph, _ in self.needed_rooted(vg)]

    def needed_rooted(self, vg: ValuedGraph) -> list[tuple[ValuedGraph, ValuedGraph]]:
        """(unrooted graph, rooted graph) of every rooted series the factorised weight of `vg` uses."""
        parts = list(self.halves(vg)[:2])
        if vg.graph.n_edges < self.order:
            parts += self.second_order_parts(vg)[:3]
        if vg.graph.n_edges < self.order - 1:
            parts += self.excess_two_parts(vg).rooted_graphs()
        return [pair for part in parts for pair in self._needed_pairs(part)]

    def _needed_pairs(self, rvg: ValuedGraph) -> list[tuple[ValuedGraph, ValuedGraph]]:
        """(unrooted, rooted) of every rooted series :meth:`top` needs for the rooted graph `rvg`."""
        rooted = [rvg, self._root_alone(rvg)] + [self.valued[k] for k in self._rooted_subgraphs(rvg)]
        for r in rooted:
            if r.key not in self._unrooted:
                self._unrooted[r.key] = unrooted(r)
        return [(self._unrooted[r.key], r) for r in rooted]

    def _common_denominators(self) -> list[list[int]]:
        """lcm of the denominators of every rooted series at beta^n, for u_1 and u_3 (n = 0..order-1)."""
        if self._denominators is None:
            self._denominators = [[lcm(*(s[q][n].denominator for s in self.series.values())) if self.series else 1
                                   for n in range(self.order)] for q in (0, 1)]
        return self._denominators

    def _linked_numerators(self, key: str) -> tuple[list[int], list[int]]:
        """U_1, U_3 of the rooted class `key` times the common denominators, coefficients 0..order-1 (zero below
        its bond count): U(A, a) = u(A, a) - u(a alone) - sum_{A'} c(A', A) U(A', a), in integers."""
        if key in self._numerators:
            return self._numerators[key]
        rvg = self.valued[key]
        if key not in self.series:
            raise KeyError(f"rooted series of {key} not known: compute the series of {unrooted(rvg).key}")
        denominators = self._common_denominators()
        lowest = rvg.graph.n_edges
        weight = tuple([0] * lowest + [int(x * d) for x, d in zip(u[lowest:], dens[lowest:])]
                       for u, dens in zip(self.series[key], denominators))
        if lowest:
            parts = [(self._root_alone(rvg).key, 1)] + list(self._rooted_subgraphs(rvg).items())
            for sub_key, count in parts:
                for w, sub in zip(weight, self._linked_numerators(sub_key)):
                    for n in range(lowest, self.order):
                        w[n] -= count * sub[n]
        self._numerators[key] = weight
        return weight

    def coefficient(self, rvg: ValuedGraph, n: int) -> tuple[Fraction, Fraction]:
        """U_1 and U_3 of the rooted graph `rvg` at beta^n (zero below its bond count; n < order)."""
        first, third = self._linked_numerators(rvg.key)
        dens = self._common_denominators()
        return Fraction(first[n], dens[0][n]), Fraction(third[n], dens[1][n])

    def top(self, rvg: ValuedGraph) -> tuple[Fraction, Fraction]:
        """U_1 and U_3 of the rooted graph `rvg` at beta^(its bond count), their first nonzero order."""
        return self.coefficient(rvg, rvg.graph.n_edges)


def _across(weight: dict, n: int, jz: Fraction, left: tuple, right: tuple) -> None:
    """Add the product across a bridge with Jz = `jz` at beta^n: -2 jz L_1 R_1 to m2, -4 jz (L_1 R_3 + L_3 R_1) to
    m4, for factors left = (L_1, L_3) and right = (R_1, R_3) (module docstring, point 3)."""
    weight["m2"][n] += -2 * jz * left[0] * right[0]
    weight["m4"][n] += -4 * jz * (left[0] * right[1] + left[1] * right[0])


def _quadratic(rooted: RootedWeights, plain: ValuedGraph, doubled: ValuedGraph, n: int) -> tuple:
    """(Q_1, Q_3) at beta^n, the part quadratic in a bond's couplings of U(t) = c1 t + c2 t^2 (t = the bond's
    scale): (U(2) - 2 U(1)) / 2 from the rooted graph without and with that bond doubled."""
    return tuple((d - 2 * p) / 2 for p, d in zip(rooted.coefficient(plain, n), rooted.coefficient(doubled, n)))


def _beyond_linear(rooted: RootedWeights, scaled: tuple, n: int) -> tuple:
    """(R_1, R_3) at beta^n, the part of degree 2 and 3 in a bond's couplings of U(t) = c1 t + c2 t^2 + c3 t^3:
    U(1) - c1 = -2 U(1) + 3 U(2) / 2 - U(3) / 3 from the rooted graph with that bond times 1, 2, 3."""
    one, two, three = (rooted.coefficient(r, n) for r in scaled)
    return tuple(-2 * a + Fraction(3, 2) * b - Fraction(1, 3) * c for a, b, c in zip(one, two, three))


def factorised_weight(vg: ValuedGraph, order: int, rooted: RootedWeights) -> dict:
    """Linked weight {lnz, m2, m4} (coefficients of beta^0..beta^order) of a graph that :func:`factorisable`
    accepts, from rooted linked weights of its parts (module docstring, points 5, 6 and 7); `rooted` must hold the
    rooted series of the graphs that :meth:`RootedWeights.needed_for` names."""
    if not factorisable(vg.graph, order):
        raise ValueError(f"the weight of {vg.key} to beta^{order} does not factorise: it needs {order} bonds and a "
                         f"bridge, {order - 1} bonds and two bridges, or {order - 2} bonds and a bridge between two "
                         "others")
    n_bonds = vg.graph.n_edges
    half_a, half_b, jz = rooted.halves(vg)
    ea, eb = half_a.graph.n_edges, half_b.graph.n_edges
    weight = {q: [Fraction(0)] * (order + 1) for q in QUANTITIES}
    # J_b1-linear part across the first bridge b1 (points 3-5)
    for n in range(n_bonds, order + 1):
        for i in range(ea, n - eb):  # i + j = n - 1 with i >= E_A, j >= E_B
            _across(weight, n, jz, rooted.coefficient(half_a, i), rooted.coefficient(half_b, n - 1 - i))
    if n_bonds < order:
        # J_b1^2 part at beta^(E + 1), linear in the second bridge (point 6)
        near, near_doubled, far, jz2 = rooted.second_order_parts(vg)
        e = near.graph.n_edges
        _across(weight, n_bonds + 1, jz2, _quadratic(rooted, near, near_doubled, e + 1), rooted.top(far))
    if n_bonds < order - 1:
        # degree >= 2 in b1 at beta^order: linear in b2, or quadratic in b1 and b2 and linear in b3 (point 7)
        parts = rooted.excess_two_parts(vg)
        e, f = parts.near[0].graph.n_edges, parts.far.graph.n_edges
        _across(weight, order, parts.jz_second, _quadratic(rooted, *parts.near[:2], e + 1),
                rooted.coefficient(parts.far, f + 1))
        _across(weight, order, parts.jz_second, _beyond_linear(rooted, parts.near, e + 2), rooted.top(parts.far))
        e, f = parts.first_side[0].graph.n_edges, parts.second_side[0].graph.n_edges
        _across(weight, order, parts.jz_third, _quadratic(rooted, *parts.first_side, e + 1),
                _quadratic(rooted, *parts.second_side, f + 1))
    return weight
