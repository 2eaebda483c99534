"""Time the total-spin blocks against the S^z sectors on single isotropic clusters of every supported spin.

Usage: .venv/bin/python scripts/bench_total_spin.py [--order 14] [--cases 1:path:10,1:ring:10,...] [--rooted]

A case is spin:shape:sites; shapes: path 0-1-...-(N-1); ring = path plus (N-1, 0); tree = binary heap tree
(site i > 0 bonded to (i-1)//2); ladder = two legs of N/2 sites with rungs.  All bonds J = 1.

Prints one markdown table row per case: states, bonds, the order of the cluster's symmetry group, seconds of
the S^z sectors (hte.exact._integer_power_traces, orbit-reduced) and of the blocks
(hte.total_spin.total_spin_power_sums), the route the cost model of hte.exact.total_spin_pays picks, and whether
both routes gave the same power sums (they must).  Each route runs once, after a warm-up on a small cluster that
compiles the numba kernel; one process.

With --rooted (default cases: spin-1 clusters of the kagome lattice's kind, order 11) it times the rooted series
instead: every site at once from the S^z sectors (hte.rooted_series._rooted_by_sectors), the plain block pass,
and one rooted block pass (hte.total_spin.rooted_power_sums) for the first, a middle and the last site, with the
route the cost model picks for each single root.
"""

from __future__ import annotations

import argparse
import time
from fractions import Fraction

from hte.exact import ClusterHamiltonian, _integer_power_traces, total_spin_pays, site_automorphisms
from hte.rooted_series import _rooted_by_sectors
from hte.total_spin import rooted_power_sums, total_spin_power_sums

DEFAULT_CASES = ("1/2:path:16,1/2:ring:14,1/2:ladder:14,1:path:10,1:ring:10,1:tree:10,1:ladder:10,1:path:11,"
                 "3/2:path:8,3/2:ring:8,3/2:ladder:8,2:path:7,2:ring:7,5/2:path:6,5/2:ring:6,5/2:tree:6")


ROOTED_CASES = "1:triangle-tail:9,1:bowtie-tails:9,1:bowtie-tails:10,1:hexagon-tails:10"
KAGOME_LIKE = {
    "triangle-tail": [(0, 1), (1, 2), (0, 2), (2, 3), (3, 4), (4, 5), (5, 6), (6, 7), (7, 8)],
    "bowtie-tails": [(0, 1), (1, 2), (0, 2), (2, 3), (3, 4), (2, 4), (4, 5), (5, 6), (0, 7), (7, 8), (8, 9)],
    "hexagon-tails": [(0, 1), (1, 2), (2, 3), (3, 4), (4, 5), (5, 0), (0, 6), (6, 7), (3, 8), (8, 9)],
}


def edges_of(shape: str, n: int) -> list[tuple[int, int]]:
    if shape in KAGOME_LIKE:
        return [(u, v) for u, v in KAGOME_LIKE[shape] if u < n and v < n]
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
    raise SystemExit(f"bench_total_spin: unknown shape {shape!r} (path, ring, tree, ladder, {', '.join(KAGOME_LIKE)})")


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
    parser.add_argument("--order", type=int)
    parser.add_argument("--cases")
    parser.add_argument("--rooted", action="store_true")
    args = parser.parse_args()
    warm = ClusterHamiltonian(spins=(Fraction(1),) * 4, bonds=((0, 1, 1, 1), (1, 2, 1, 1), (2, 3, 1, 1)))
    sector_sums(warm, 4), total_spin_power_sums(warm, 4), _rooted_by_sectors(warm, 4), rooted_power_sums(warm, 0, 4)
    if args.rooted:
        rooted_table(args.order or 11, args.cases or ROOTED_CASES)
    else:
        plain_table(args.order or 14, args.cases or DEFAULT_CASES)


def cluster(case: str):
    spin_text, shape, sites = case.split(":")
    spin, n = Fraction(spin_text), int(sites)
    edges = edges_of(shape, n)
    n = 1 + max(max(e) for e in edges)
    return spin_text, shape, n, edges, ClusterHamiltonian(spins=(spin,) * n, bonds=tuple((u, v, 1, 1) for u, v in edges))


def rooted_table(order: int, cases: str) -> None:
    print(f"order {order}")
    print("| spin | cluster | S^z sectors, every site (s) | plain block pass (s) | rooted pass, first / middle / last site (s) "
          "| model picks (first / middle / last) |")
    print("|---|---|---|---|---|---|")
    for case in cases.split(","):
        spin_text, shape, n, edges, ham = cluster(case)
        sectors_time, _ = timed(_rooted_by_sectors, ham, order)
        plain_time, _ = timed(total_spin_power_sums, ham, order)
        roots = (0, n // 2, n - 1)
        times = [timed(rooted_power_sums, ham, root, order)[0] for root in roots]
        picks = ["blocks" if total_spin_pays(ham, roots=[root]) else "sectors" for root in roots]
        print(f"| {spin_text} | {shape} {n} | {sectors_time:.2f} | {plain_time:.2f} | "
              f"{' / '.join(f'{t:.2f}' for t in times)} | {' / '.join(picks)} |", flush=True)


def plain_table(order: int, cases: str) -> None:
    print(f"order {order}")
    print("| spin | cluster | states | bonds | group order | S^z sectors (s) | blocks (s) | model picks | same |")
    print("|---|---|---|---|---|---|---|---|---|")
    for case in cases.split(","):
        spin_text, shape, n, edges, ham = cluster(case)
        sectors_time, by_sectors = timed(sector_sums, ham, order)
        blocks_time, by_blocks = timed(total_spin_power_sums, ham, order)
        pick = "blocks" if total_spin_pays(ham) else "sectors"
        print(f"| {spin_text} | {shape} {n} | {int(2 * Fraction(spin_text) + 1) ** n} | {len(edges)} | "
              f"{len(site_automorphisms(ham)) + 1} | {sectors_time:.2f} | {blocks_time:.2f} | {pick} | "
              f"{'yes' if by_sectors == by_blocks else 'NO'} |", flush=True)


if __name__ == "__main__":
    main()
