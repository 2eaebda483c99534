"""Time the total-spin blocks against the S^z sectors on single isotropic clusters of every supported spin.

Usage: .venv/bin/python scripts/bench_total_spin.py [--order 14] [--cases 1:path:10,1:ring:10,...]

A case is spin:shape:sites; shapes: path 0-1-...-(N-1); ring = path plus (N-1, 0); tree = binary heap tree
(site i > 0 bonded to (i-1)//2); ladder = two legs of N/2 sites with rungs.  All bonds J = 1.

Prints one markdown table row per case: states, bonds, the order of the cluster's symmetry group, seconds of
the S^z sectors (hte.exact._integer_power_traces, orbit-reduced) and of the blocks
(hte.total_spin.total_spin_power_sums), the route the cost model of hte.exact.total_spin_pays picks, and whether
both routes gave the same power sums (they must).  Each route runs once, after a warm-up on a small cluster that
compiles the numba kernel; one process.
"""

from __future__ import annotations

import argparse
import time
from fractions import Fraction

from hte.exact import ClusterHamiltonian, _integer_power_traces, total_spin_pays, site_automorphisms
from hte.total_spin import total_spin_power_sums

DEFAULT_CASES = ("1/2:path:16,1/2:ring:14,1/2:ladder:14,1:path:10,1:ring:10,1:tree:10,1:ladder:10,1:path:11,"
                 "3/2:path:8,3/2:ring:8,3/2:ladder:8,2:path:7,2:ring:7,5/2:path:6,5/2:ring:6,5/2:tree:6")


def edges_of(shape: str, n: int) -> list[tuple[int, int]]:
    path = [(i, i + 1) for i in range(n - 1)]
    if shape == "path":
        return path
    if shape == "ring":
        return path + [(0, n - 1)]
    if shape == "tree":
        return [((i - 1) // 2, i) for i in range(1, n)]
    if shape == "ladder":
        leg = n // 2
        return ([(i, i + 1) for i in range(leg - 1)] + [(leg + i, leg + i + 1) for i in range(leg - 1)]
                + [(i, leg + i) for i in range(leg)])
    raise SystemExit(f"bench_total_spin: unknown shape {shape!r} (path, ring, tree, ladder)")


def sector_sums(ham, order):
    scale, traces = _integer_power_traces(ham, order)
    multiplicity = {tm: 1 if tm == 0 else 2 for tm in traces}
    return scale, {q: [sum(multiplicity[tm] * tm**q * t[k] for tm, t in traces.items()) for k in range(order + 1)]
                   for q in (0, 2, 4)}


def timed(function, *args):
    start = time.perf_counter()
    result = function(*args)
    return time.perf_counter() - start, result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--order", type=int, default=14)
    parser.add_argument("--cases", default=DEFAULT_CASES)
    args = parser.parse_args()
    warm = ClusterHamiltonian(spins=(Fraction(1),) * 4, bonds=((0, 1, 1, 1), (1, 2, 1, 1), (2, 3, 1, 1)))
    sector_sums(warm, 4), total_spin_power_sums(warm, 4)
    print(f"order {args.order}")
    print("| spin | cluster | states | bonds | group order | S^z sectors (s) | blocks (s) | model picks | same |")
    print("|---|---|---|---|---|---|---|---|---|")
    for case in args.cases.split(","):
        spin_text, shape, sites = case.split(":")
        spin, n = Fraction(spin_text), int(sites)
        edges = edges_of(shape, n)
        ham = ClusterHamiltonian(spins=(spin,) * n, bonds=tuple((u, v, 1, 1) for u, v in edges))
        sectors_time, by_sectors = timed(sector_sums, ham, args.order)
        blocks_time, by_blocks = timed(total_spin_power_sums, ham, args.order)
        pick = "blocks" if total_spin_pays(ham) else "sectors"
        print(f"| {spin_text} | {shape} {n} | {int(2 * spin + 1) ** n} | {len(edges)} | "
              f"{len(site_automorphisms(ham)) + 1} | {sectors_time:.2f} | {blocks_time:.2f} | {pick} | "
              f"{'yes' if by_sectors == by_blocks else 'NO'} |", flush=True)


if __name__ == "__main__":
    main()
