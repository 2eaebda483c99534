"""Benchmark the series engine from an empty cache: time and peak memory per order, and the kernel's speed-up.

Usage: .venv/bin/python scripts/bench_series.py [--lattice kagome] [--orders 6-10] [--workers 2]
                                                [--symbolic-layered ORDER] [--dense-check N]

For each order: a fresh run of ln Z, T chi and M4 (spin 1/2 Heisenberg, nearest neighbour) with no cache and no
tables, in a child process, printing wall time, stage times and peak resident memory (this process and its
workers).  Then the kernel against a plain dense diagonalisation of the full 2^N space on the largest
clusters of the last order, measured in the same run (--dense-check N: how many clusters).  Optionally the
layered kagome with symbolic J1, Jd, Jperp and symbolic interlayer occupation.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time

CHILD = r"""
import json, resource, sys, time
from hte.expansion import expand_lattice
from hte.lattice_file import load_lattice
from hte.models import build_model
name, order, workers, symbolic = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), sys.argv[4] == "1"
spec = load_lattice(name)
if symbolic:
    model = build_model(spec, couplings={"J2": "0"}, occupation={"interlayer": "p"}, symbolic=True)
else:
    model = build_model(spec)
start = time.perf_counter()
ls = expand_lattice(spec, model, order, workers=workers)
wall = time.perf_counter() - start
peak = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
print(json.dumps({"wall": wall, "peak_mib": peak / 1024, **ls.stats}))
"""


def run_child(name: str, order: int, workers: int, symbolic: bool = False) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, name, str(order), str(workers), "1" if symbolic else "0"],
                         check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def dense_check(name: str, order: int, count: int) -> list[tuple]:
    from hte.clusters import enumerate_clusters
    from hte.exact import ClusterHamiltonian, cluster_cumulants, dense_cumulants_float
    from hte.lattice_file import load_lattice
    from fractions import Fraction

    spec = load_lattice(name)
    spec = spec.without_labels([l for l in spec.labels if l != spec.labels[0]])
    census = enumerate_clusters(spec, order)
    biggest = sorted(census.classes, key=lambda c: (-c.n_sites, c.key))
    picked = [c for c in biggest if c.n_sites <= 12][:count]
    rows = []
    for c in picked:
        ham = ClusterHamiltonian(spins=(Fraction(1, 2),) * c.n_sites,
                                 bonds=tuple((u, v, 1, 1) for u, v, _ in c.graph.edges))
        cluster_cumulants(ham, order)  # compile / warm up
        t0 = time.perf_counter()
        cluster_cumulants(ham, order)
        t_exact = time.perf_counter() - t0
        t0 = time.perf_counter()
        dense_cumulants_float(ham, order)
        t_dense = time.perf_counter() - t0
        rows.append((c.n_sites, c.n_bonds, t_exact, t_dense))
    return rows


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lattice", default="kagome")
    parser.add_argument("--orders", default="6-10")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--dense-check", type=int, default=4)
    parser.add_argument("--symbolic-layered", type=int, default=0)
    args = parser.parse_args()
    lo, _, hi = args.orders.partition("-")
    orders = range(int(lo), int(hi or lo) + 1)
    print(f"# {args.lattice}, spin 1/2 Heisenberg, ln Z + T chi + M4, empty cache, {args.workers} workers")
    print(f"{'order':>5} {'classes':>8} {'computed':>9} {'enum s':>8} {'kernel s':>9} {'assembly s':>10} "
          f"{'wall s':>8} {'peak MiB*':>9}")
    print("# peak MiB*: largest resident set of one process (main or a worker)")
    for order in orders:
        r = run_child(args.lattice, order, args.workers)
        print(f"{order:>5} {r['graph_classes']:>8} {r['cluster_series_computed']:>9} {r['enumeration_s']:>8.1f} "
              f"{r['kernel_s']:>9.1f} {r['assembly_s']:>10.1f} {r['wall']:>8.1f} {r['peak_mib']:>9.0f}", flush=True)
    if args.dense_check:
        print(f"# kernel vs plain dense diagonalisation of the full 2^N space, largest clusters at order {orders[-1]}")
        print(f"{'sites':>5} {'bonds':>5} {'kernel s':>9} {'dense s':>9} {'speed-up':>9}")
        for n, e, te, td in dense_check(args.lattice, orders[-1], args.dense_check):
            print(f"{n:>5} {e:>5} {te:>9.3f} {td:>9.3f} {td / te:>9.0f}", flush=True)
    if args.symbolic_layered:
        r = run_child("kagome-layered", args.symbolic_layered, args.workers, symbolic=True)
        print(f"# kagome-layered, symbolic J1, Jd, Jperp and interlayer occupation p, order {args.symbolic_layered}: "
              f"{r['graph_classes']} classes, {r['cluster_series_computed']} cluster series, wall {r['wall']:.0f} s, "
              f"peak {r['peak_mib']:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
