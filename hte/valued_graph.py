"""Valued graphs: clusters carrying physical values, canonically keyed, and their kernel Hamiltonians.

A valued graph is a connected cluster whose vertices carry (S, D) (spin, single-ion anisotropy in the energy
unit; rooted graphs add a root mark, :mod:`hte.bridge_factorisation`) and whose edges carry (Jxy, Jz)
(couplings in the energy unit), all exact rationals.  Its ``key`` is
canonical: two clusters with the same physics have the same key, so weights (and cache rows) are shared
between them.  The key text is stored in the persistent weight cache and must not change.
"""

from __future__ import annotations

from dataclasses import dataclass

from hte.canonical import canonical_graph
from hte.exact import ClusterHamiltonian
from hte.graph import ColouredGraph


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


def with_values_of(vg: ValuedGraph, graph: ColouredGraph) -> ValuedGraph:
    """The canonical ValuedGraph of `graph` (typically a subgraph of vg) whose colours index vg's value palettes."""
    return make_valued(graph.n_vertices, [vg.vertex_values[c] for c in graph.vertex_colours],
                       [(u, v, vg.edge_values[c]) for u, v, c in graph.edges])


class SubgraphCatalogue:
    """Valued subgraphs met inside valued graphs, each built once.

    A subgraph is found by a local form (a canonical key or certificate whose colours index the parent's value
    palettes); its own canonical ValuedGraph is built once per (parent palettes, local form).
    """

    def __init__(self):
        self._palettes: dict[tuple, int] = {}  # (vertex values, edge values) -> a small number
        self._built: dict[tuple, ValuedGraph] = {}  # (palettes number, local form) -> valued subgraph

    def count(self, vg: ValuedGraph, local_counts, to_graph, register) -> dict[str, int]:
        """{valued key: count} of the subgraphs of `vg` given as (local form, count) pairs; `to_graph` turns a
        local form into a ColouredGraph, `register(subgraph)` is called for every subgraph built anew."""
        palettes = self._palettes.setdefault((vg.vertex_values, vg.edge_values), len(self._palettes))
        result: dict[str, int] = {}
        for local, count in local_counts:
            sub = self._built.get((palettes, local))
            if sub is None:
                sub = with_values_of(vg, to_graph(local))
                self._built[(palettes, local)] = sub
                register(sub)
            result[sub.key] = result.get(sub.key, 0) + count
        return result


def cert_text(graph: ColouredGraph) -> str:
    """The text "n|vertex colours|edges" of a (canonically labelled) coloured graph, as used in valued keys."""
    colours = ".".join(str(c) for c in graph.vertex_colours)
    edges = ",".join(f"{u}-{v}:{c}" for u, v, c in graph.edges)
    return f"{graph.n_vertices}|{colours}|{edges}"


def _fmt(values) -> str:
    return ";".join("/".join(str(x) for x in v) for v in values)


def site_graph(value) -> ValuedGraph:
    """The single-site valued graph with vertex value `value` = (S, D)."""
    return make_valued(1, [value], [])


def hamiltonian_of(vg: ValuedGraph):
    """The kernel's ClusterHamiltonian for a valued graph."""
    spins = tuple(vg.vertex_values[c][0] for c in vg.graph.vertex_colours)
    aniso = tuple(vg.vertex_values[c][1] for c in vg.graph.vertex_colours)
    bonds = tuple((u, v, vg.edge_values[c][0], vg.edge_values[c][1]) for u, v, c in vg.graph.edges)
    return ClusterHamiltonian(spins=spins, bonds=bonds, anisotropy=aniso)
