"""Time the connected-cluster census (enumeration + classification) per order on a few lattices.

Usage: .venv/bin/python scripts/bench_clusters.py [--full] [--workers N] [--lattices kagome,square,...]
                                                  [--orders kagome=10,square=10,...] [--markdown FILE]

For each lattice (nearest-neighbour bonds J1 only) and each order n = 1..N, runs hte.clusters.enumerate_clusters
up to n bonds in a fresh child process and prints one table row: n, connected n-bond clusters per site,
graph classes with n bonds, wall seconds of the whole census up to n, microseconds per cluster (all clusters
up to n, counted per cell as enumerated from the unit cell's root bonds), and the peak resident memory of that
child process and of its worker processes in MiB (resource.getrusage, ru_maxrss; the larger of the two),
and its growth during the census (peak less the peak before it started: Python, numpy, numba and hte take
about 220 MiB).  The numba kernels are compiled or loaded from the cache
before timing.  Defaults finish in a few minutes; --full goes to kagome 12 bonds.
"""

from __future__ import annotations

import argparse
import datetime
import multiprocessing
import os
import platform
import resource
import time

DEFAULT_ORDERS = {"kagome": 10, "square": 10, "triangular": 8, "cubic": 7}
FULL_ORDERS = {"kagome": 12, "square": 12, "triangular": 9, "cubic": 8}


def parse_orders(text: str) -> dict[str, int]:
    orders = {}
    for item in text.split(","):
        name, _, value = item.partition("=")
        orders[name.strip()] = int(value)
    return orders


def measure(name: str, order: int, workers: int, queue) -> None:
    """Child process: one census up to `order` bonds; reports counts, wall time and peak memory."""
    from hte.clusters import enumerate_clusters
    from hte.lattice_file import load_lattice

    spec = load_lattice(name)
    spec = spec.without_labels([label for label in spec.labels if label != "J1"])
    enumerate_clusters(spec, 2)  # compile or load the kernels outside the timing
    baseline_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    start = time.perf_counter()
    census = enumerate_clusters(spec, order, workers=workers)
    seconds = time.perf_counter() - start
    peak_kib = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
                   resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
    queue.put((census.per_site(census.clusters_per_cell[order]), len(census.classes_with_bonds(order)),
               seconds, sum(census.clusters_per_cell), peak_kib / 1024, (peak_kib - baseline_kib) / 1024))


def run(name: str, order: int, workers: int):
    queue = multiprocessing.get_context("fork").Queue()
    child = multiprocessing.get_context("fork").Process(target=measure, args=(name, order, workers, queue))
    child.start()
    result = queue.get()
    child.join()
    return result


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--full", action="store_true", help="go to kagome 12 (minutes)")
    parser.add_argument("--workers", type=int, default=1, help="processes per census (default 1)")
    parser.add_argument("--lattices", default=None, help="comma-separated lattice names (default: all four)")
    parser.add_argument("--orders", type=parse_orders, default=None, help="e.g. kagome=11,square=9")
    parser.add_argument("--min-order", type=int, default=1, help="smallest order timed (default 1)")
    parser.add_argument("--markdown", default=None, help="also append the tables, as markdown, to FILE")
    args = parser.parse_args(argv)

    orders = dict(FULL_ORDERS if args.full else DEFAULT_ORDERS)
    if args.orders:
        orders.update(args.orders)
    names = args.lattices.split(",") if args.lattices else list(orders)
    stamp = datetime.datetime.now().strftime("%Y-%m-%d %H:%M")
    machine = f"{platform.machine()}, {os.cpu_count()} cores, {platform.python_implementation()} {platform.python_version()}"
    lines = [f"Measured {stamp} on {machine}, workers = {args.workers}, load average at start "
             f"{os.getloadavg()[0]:.1f}; J1 bonds only; times are wall seconds of the census up to n."]
    print(lines[0])
    for name in names:
        header = "| n | clusters per site | classes | seconds | µs per cluster | peak MiB | growth MiB |"
        table = [f"**{name}**", "", header, "|---:|---:|---:|---:|---:|---:|---:|"]
        print(f"\n{name}\n{'n':>3} {'clusters/site':>16} {'classes':>8} {'seconds':>9} {'us/cluster':>11} "
              f"{'peak MiB':>9} {'growth MiB':>11}")
        for n in range(args.min_order, orders[name] + 1):
            per_site, classes, seconds, total, peak, growth = run(name, n, args.workers)
            micro = seconds / total * 1e6
            print(f"{n:>3} {str(per_site):>16} {classes:>8} {seconds:>9.2f} {micro:>11.2f} {peak:>9.0f} "
                  f"{growth:>11.0f}", flush=True)
            table.append(f"| {n} | {per_site} | {classes} | {seconds:.2f} | {micro:.2f} | {peak:.0f} | {growth:.0f} |")
        lines += [""] + table
    if args.markdown:
        with open(args.markdown, "a") as out:
            out.write("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
