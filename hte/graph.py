"""Small coloured graphs: the common currency between clusters, canonical forms and the ED kernel."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ColouredGraph:
    """An undirected simple graph with integer vertex colours and integer edge colours.

    Vertices are 0..n_vertices-1.  ``edges`` holds (u, v, colour) with u < v.  On a lattice the vertex colour
    indexes the site class and the edge colour indexes the coupling label (or a distinct (Jxy, Jz) value).
    """

    n_vertices: int
    vertex_colours: tuple[int, ...]
    edges: tuple[tuple[int, int, int], ...]

    @property
    def n_edges(self) -> int:
        return len(self.edges)

    def degree(self) -> list[int]:
        deg = [0] * self.n_vertices
        for u, v, _ in self.edges:
            deg[u] += 1
            deg[v] += 1
        return deg

    def to_networkx(self):
        """A networkx.Graph with node attribute ``colour`` and edge attribute ``colour`` (for checks)."""
        import networkx as nx

        g = nx.Graph()
        for i, c in enumerate(self.vertex_colours):
            g.add_node(i, colour=c)
        for u, v, c in self.edges:
            g.add_edge(u, v, colour=c)
        return g


def count_bridges(graph: ColouredGraph) -> int:
    """Number of bridges (edges whose removal disconnects their component), by Tarjan's low-link search."""
    adjacency = [[] for _ in range(graph.n_vertices)]
    for index, (u, v, _) in enumerate(graph.edges):
        adjacency[u].append((v, index))
        adjacency[v].append((u, index))
    order = [-1] * graph.n_vertices
    low = [0] * graph.n_vertices
    counter = 0
    bridges = 0
    for root in range(graph.n_vertices):
        if order[root] != -1:
            continue
        order[root] = low[root] = counter
        counter += 1
        stack = [(root, -1, iter(adjacency[root]))]
        while stack:
            vertex, via, neighbours = stack[-1]
            advanced = False
            for nxt, edge in neighbours:
                if edge == via:
                    continue
                if order[nxt] == -1:
                    order[nxt] = low[nxt] = counter
                    counter += 1
                    stack.append((nxt, edge, iter(adjacency[nxt])))
                    advanced = True
                    break
                low[vertex] = min(low[vertex], order[nxt])
            if not advanced:
                stack.pop()
                if stack:
                    parent = stack[-1][0]
                    low[parent] = min(low[parent], low[vertex])
                    if low[vertex] > order[parent]:
                        bridges += 1
    return bridges


def is_biconnected(graph: ColouredGraph) -> bool:
    """True for a single bond and for a connected graph of three or more vertices without a cut vertex (a star
    graph in the language of lattice statistics); False for a single site and everything else."""
    import networkx as nx

    if graph.n_edges == 0:
        return False
    return graph.n_vertices == 2 or nx.is_biconnected(graph.to_networkx())
