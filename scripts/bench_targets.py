"""Benchmark the order targets: cold-cache runs order by order, growth per order, projected time of the target.

Usage: .venv/bin/python scripts/bench_targets.py [TARGET ...] [--budget SECONDS] [--workers 2]
                                                 [--results FILE] [--tables]

A TARGET is one of the names in TARGETS below (default: all).  For each target the orders are run upwards,
each in a fresh child process with an empty temporary HTE_CACHE_DIR and no shipped tables (ln Z, T chi and M4,
per site; a target may set couplings, occupations and m4=False).  Before an order is started its time is projected from the last two measured orders (the growth
factor t(n) / t(n-1)); the target stops when the projection would overrun its budget (default 1800 s of wall
time per target), and a run that overruns anyway is stopped and recorded as a lower bound.  The report gives,
per target, the wall time and peak memory (child and its workers) of every order, the last growth factor and
the projected time of the target order, t(last) * growth^(target - last): an extrapolation, not a measurement.

--results FILE keeps the measurements as JSON (default: bench_targets.json in the current folder); a rerun
skips the orders already in it, so an interrupted benchmark resumes.
--report prints the report of the results file without running anything.
--tables stores the series of spin-1/2 nearest-neighbour targets in tables/ through scripts/make_tables.py
(a table is only replaced by a higher order), so the shipped tables come from these cold runs; those runs use
make_tables' default of one worker per core.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from hte.atomic import write_text_atomically  # noqa: E402

# name -> lattice, spin, symbolic couplings?, orders to try (ascending), target order, shipped as a table?
TARGETS = {
    "kagome": dict(lattice="kagome", spin="1/2", symbolic=False, orders=[11, 12, 13, 14, 15, 16], target=16,
                   table=True),
    "triangular": dict(lattice="triangular", spin="1/2", symbolic=False, orders=list(range(8, 17)), target=16,
                       table=True),
    "square": dict(lattice="square", spin="1/2", symbolic=False, orders=list(range(11, 19)), target=18,
                   table=True),
    "honeycomb": dict(lattice="honeycomb", spin="1/2", symbolic=False, orders=list(range(12, 19)), target=18,
                      table=True),
    "chain": dict(lattice="chain", spin="1/2", symbolic=False, orders=list(range(15, 25)), target=24, table=True),
    "square-s1": dict(lattice="square", spin="1", symbolic=False, orders=list(range(5, 13)), target=12,
                      table=False),
    "square-s5_2": dict(lattice="square", spin="5/2", symbolic=False, orders=list(range(3, 11)), target=10,
                        table=False),
    "ladder3": dict(lattice="ladder-unequal-legs", spin="1/2", symbolic=True, orders=[9, 10, 11, 12, 13], target=13,
                    table=False),
    # symbolic J1, J2, Jd and interlayer occupation p; ln Z and T chi (no M4), as the layered target asks
    "layered4": dict(lattice="kagome-layered", spin="1/2", symbolic=True, orders=list(range(4, 11)), target=10,
                     table=False, couplings={"Jperp": "0"}, occupation={"interlayer": "p"}, m4=False),
}

CHILD = r"""
import json, resource, sys, time
target, order, workers, table = json.loads(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4] == "1"
if table:
    sys.path.insert(0, "scripts")
    from make_tables import make_table
    result = make_table(target["lattice"], order)
else:
    from hte.cache import WeightCache
    from hte.series import compute_series
    start = time.perf_counter()
    with WeightCache() as cache:
        series = compute_series(target["lattice"], order=order, spin=target["spin"], symbolic=target["symbolic"],
                                couplings=target.get("couplings"), occupation=target.get("occupation"),
                                m4=target.get("m4", True), per="site", cache=cache, workers=workers)
    result = {"wall": time.perf_counter() - start, **series.stats}
peak = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
result["peak_mib"] = peak / 1024
print(json.dumps(result))
"""


def run_order(target: dict, order: int, workers: int, table: bool, timeout: float) -> dict:
    """One cold-cache run in a child process (its own process group, stopped whole on timeout)."""
    with tempfile.TemporaryDirectory(prefix="hte-bench-cache-") as cache_dir:
        env = dict(os.environ, HTE_CACHE_DIR=cache_dir, PYTHONPATH=str(ROOT), OPENBLAS_NUM_THREADS="1")
        start = time.perf_counter()
        child = subprocess.Popen([sys.executable, "-c", CHILD, json.dumps(target), str(order), str(workers),
                                  "1" if table else "0"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                 env=env, cwd=ROOT, start_new_session=True)
        try:
            out, err = child.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            os.killpg(child.pid, signal.SIGKILL)
            child.communicate()
            return {"wall": time.perf_counter() - start, "stopped": True}
        except KeyboardInterrupt:
            os.killpg(child.pid, signal.SIGKILL)
            raise
    if child.returncode != 0:
        raise RuntimeError(f"order {order} failed (exit {child.returncode}):\n{err[-2000:]}")
    return json.loads(out.strip().splitlines()[-1])


def growth(times: list[float]) -> float | None:
    """t(n) / t(n-1) of the last two completed orders."""
    return times[-1] / times[-2] if len(times) >= 2 and times[-2] > 0 else None


def bench_target(name: str, results: dict, args, save) -> None:
    target = TARGETS[name]
    spent, times = 0.0, []
    for order in target["orders"]:
        key = f"{name}:{order}"
        if key in results:
            r = results[key]
        else:
            g = growth(times)
            projected = times[-1] * g if g else 0.0
            if spent >= args.budget or spent + projected > args.budget:
                print(f"{name}: order {order} projected {projected:.0f} s, beyond the budget; stop", flush=True)
                break
            r = run_order(target, order, args.workers, args.tables and target["table"],
                          timeout=max(args.budget - spent, 60.0))
            r["load_average_at_end"] = os.getloadavg()[0]
            results[key] = r
            save()
        spent += r["wall"]
        mark = "stopped after" if r.get("stopped") else "in"
        print(f"{name}: order {order} {mark} {r['wall']:.1f} s, peak {r.get('peak_mib', float('nan')):.0f} MiB",
              flush=True)
        if r.get("stopped"):
            break
        times.append(r["wall"])


def report(results: dict, names: list[str]) -> str:
    """A markdown table: per target the measured orders, the last growth factor and the projected target time."""
    lines = ["| target | target order | orders measured: wall s (peak MiB) | growth per order | "
             "projected wall at target order |", "|---|---|---|---|---|"]
    for name in names:
        t = TARGETS[name]
        done = [(o, results[f"{name}:{o}"]) for o in t["orders"] if f"{name}:{o}" in results]
        complete = [(o, r) for o, r in done if not r.get("stopped")]
        cells = ", ".join(f"{o}: {'>' if r.get('stopped') else ''}{r['wall']:.0f} ({r.get('peak_mib', 0):.0f})"
                          for o, r in done)
        g = growth([r["wall"] for _, r in complete])
        if complete and g:
            last_order, last = complete[-1][0], complete[-1][1]["wall"]
            projected = last * g ** max(t["target"] - last_order, 0)
            proj = "reached" if last_order >= t["target"] else f"{projected / 3600:.3g} h"
            growth_text = f"×{g:.1f}"
        else:
            proj, growth_text = "—", "—"
        lines.append(f"| {name} | {t['target']} | {cells} | {growth_text} | {proj} |")
    return "\n".join(lines)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("targets", nargs="*", default=list(TARGETS))
    parser.add_argument("--budget", type=float, default=1800.0, help="wall seconds per target")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--results", type=Path, default=Path("bench_targets.json"))
    parser.add_argument("--tables", action="store_true", help="store spin-1/2 nearest-neighbour series in tables/")
    parser.add_argument("--report", action="store_true", help="only print the report of the results file")
    args = parser.parse_args()
    unknown = [n for n in args.targets if n not in TARGETS]
    if unknown:
        parser.error(f"unknown target(s) {', '.join(unknown)}; choose from {', '.join(TARGETS)}")
    results = json.loads(args.results.read_text()) if args.results.exists() else {}

    def save() -> None:
        write_text_atomically(args.results, lambda stream: json.dump(results, stream, indent=1))

    print(f"# cold-cache runs, {args.workers} worker(s), budget {args.budget:.0f} s per target; load average at "
          f"start {os.getloadavg()[0]:.1f}; {os.cpu_count()} cores", flush=True)
    try:
        for name in [] if args.report else args.targets:
            bench_target(name, results, args, save)
    except KeyboardInterrupt:
        print(f"\ninterrupted; finished orders are kept in {args.results}", file=sys.stderr)
        return 130
    print(report(results, args.targets))
    return 0


if __name__ == "__main__":
    sys.exit(main())
