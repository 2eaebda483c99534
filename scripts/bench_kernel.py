"""Time the exact cluster kernel against the dense float reference on S = 1/2 Heisenberg paths, trees and rings.

Usage: .venv/bin/python scripts/bench_kernel.py [--order 12] [--sizes 8-13] [--dense-max 12] [--repeat 1]
                                               [--graphs path,tree,ring]

Graphs: path 0-1-...-(N-1); tree = binary heap tree (site i > 0 bonded to (i-1)//2); ring = path plus (N-1, 0).

Prints one table row per graph: sites, bonds, time of hte.exact.cluster_cumulants (after one warm-up call that
compiles the numba kernel and loads the symmetry search), time of hte.exact.dense_cumulants_float (for N <= --dense-max), their ratio, and the
largest difference between the two over all lnz, m2, m4 coefficients: relative where the exact coefficient is
nonzero, absolute where it is zero.  Runs sequentially in one process; the kernel is single-threaded, the dense
reference uses numpy's BLAS threads (set OPENBLAS_NUM_THREADS=1 for a one-core comparison).
"""

from __future__ import annotations

import argparse
import time
from fractions import Fraction

from hte.exact import ClusterHamiltonian, cluster_cumulants, dense_cumulants_float

HALF = Fraction(1, 2)


def heisenberg(n_sites: int, edges: list[tuple[int, int]]) -> ClusterHamiltonian:
    return ClusterHamiltonian(spins=(HALF,) * n_sites, bonds=tuple((u, v, 1, 1) for u, v in edges))


def path_edges(n_sites: int) -> list[tuple[int, int]]:
    return [(i, i + 1) for i in range(n_sites - 1)]


def ring_edges(n_sites: int) -> list[tuple[int, int]]:
    return path_edges(n_sites) + [(n_sites - 1, 0)]


def heap_tree_edges(n_sites: int) -> list[tuple[int, int]]:
    return [((i - 1) // 2, i) for i in range(1, n_sites)]


GRAPHS = {"path": path_edges, "tree": heap_tree_edges, "ring": ring_edges}


def best_time(function, repeat: int):
    times, result = [], None
    for _ in range(repeat):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return min(times), result


def differences(exact, dense) -> tuple[float, float]:
    """Largest relative difference over nonzero exact coefficients, largest absolute one over zero ones."""
    pairs = [
        (float(a), b) for name in ("lnz", "m2", "m4") for a, b in zip(getattr(exact, name), getattr(dense, name))
    ]
    relative = max((abs(a - b) / abs(a) for a, b in pairs if a != 0), default=0.0)
    absolute = max((abs(b) for a, b in pairs if a == 0), default=0.0)
    return relative, absolute


def parse_sizes(text: str) -> range:
    low, _, high = text.partition("-")
    return range(int(low), int(high or low) + 1)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--order", type=int, default=12)
    parser.add_argument("--sizes", type=parse_sizes, default=parse_sizes("8-13"), help="site counts, e.g. 8-13")
    parser.add_argument("--dense-max", type=int, default=12, help="largest N for the dense reference")
    parser.add_argument("--repeat", type=int, default=1, help="take the best of this many runs")
    parser.add_argument("--graphs", default="path,tree,ring", help=f"comma-separated, from {', '.join(GRAPHS)}")
    args = parser.parse_args(argv)
    unknown = set(args.graphs.split(",")) - set(GRAPHS)
    if unknown:
        parser.error(f"--graphs: unknown {', '.join(sorted(unknown))}; choose from {', '.join(GRAPHS)}")

    cluster_cumulants(heisenberg(8, ring_edges(8)), args.order)  # compile (or load) the kernel, import networkx
    print(f"S = 1/2 Heisenberg, order {args.order}; times in seconds")
    print(f"{'graph':<8}{'N':>4}{'bonds':>7}{'exact':>10}{'dense':>10}{'speed-up':>10}{'rel diff':>10}{'abs diff':>10}")
    for n_sites in args.sizes:
        for name in args.graphs.split(","):
            edges = GRAPHS[name](n_sites)
            ham = heisenberg(n_sites, edges)
            exact_time, exact = best_time(lambda: cluster_cumulants(ham, args.order), args.repeat)
            row = f"{name:<8}{n_sites:>4}{len(edges):>7}{exact_time:>10.3f}"
            if n_sites <= args.dense_max:
                dense_time, dense = best_time(lambda: dense_cumulants_float(ham, args.order), args.repeat)
                relative, absolute = differences(exact, dense)
                row += f"{dense_time:>10.3f}{dense_time / exact_time:>10.1f}{relative:>10.1e}{absolute:>10.1e}"
            print(row, flush=True)


if __name__ == "__main__":
    main()
