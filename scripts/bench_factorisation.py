"""Benchmark the bridge factorisation of T chi and M4: the same series from an empty cache with and without it.

Usage: .venv/bin/python scripts/bench_factorisation.py [--lattice kagome] [--orders 10-11] [--workers 2]
                                                       [--modes without,with]

For each order and mode: a fresh child process computes ln Z, T chi and M4 (spin 1/2 Heisenberg, nearest
neighbour) with a new empty weight cache in a temporary folder (HTE_CACHE_DIR) and no tables, and prints wall
time, stage times, cluster series computed, graphs factorised, peak resident memory and a checksum of the exact
coefficients, so the two modes can be checked to agree bit for bit.  Run the modes of one order back to back in
the same session: the machine's load changes the times.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys

CHILD = r"""
import hashlib, json, resource, sys, tempfile, time
from hte.cache import WeightCache
from hte.expansion import expand_lattice
from hte.lattice_file import load_lattice
from hte.models import build_model
name, order, workers, factorise = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), sys.argv[4] == "with"
spec = load_lattice(name)
model = build_model(spec)
with tempfile.TemporaryDirectory() as folder, WeightCache(folder) as cache:
    start = time.perf_counter()
    ls = expand_lattice(spec, model, order, workers=workers, cache=cache, bridge_factorisation=factorise)
    wall = time.perf_counter() - start
peak = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
text = json.dumps({q: [sorted((str(m), str(c)) for m, c in term.items()) for term in terms]
                   for q, terms in ls.terms.items()}, sort_keys=True)
print(json.dumps({"wall": wall, "peak_mib": peak / 1024, "checksum": hashlib.sha256(text.encode()).hexdigest()[:12],
                  **ls.stats}))
"""


def run_child(name: str, order: int, workers: int, mode: str) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, name, str(order), str(workers), mode],
                         check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lattice", default="kagome")
    parser.add_argument("--orders", default="10-11")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--modes", default="without,with")
    args = parser.parse_args()
    lo, _, hi = args.orders.partition("-")
    modes = args.modes.split(",")
    print(f"# {args.lattice}, spin 1/2 Heisenberg, ln Z + T chi + M4, empty cache, {args.workers} workers")
    print(f"{'order':>5} {'mode':>8} {'classes':>8} {'diag.':>7} {'factor.':>8} {'enum s':>7} {'kernel s':>9} "
          f"{'assembly s':>10} {'wall s':>8} {'peak MiB':>8} {'checksum':>13}")
    for order in range(int(lo), int(hi or lo) + 1):
        for mode in modes:
            r = run_child(args.lattice, order, args.workers, mode)
            print(f"{order:>5} {mode:>8} {r['graph_classes']:>8} {r['cluster_series_computed']:>7} "
                  f"{r.get('graphs_factorised', 0):>8} {r['enumeration_s']:>7.1f} {r['kernel_s']:>9.1f} "
                  f"{r['assembly_s']:>10.1f} {r['wall']:>8.1f} {r['peak_mib']:>8.0f} {r['checksum']:>13}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
