"""Benchmark symbolic series runs from an empty cache: time, stages, kernel calls and peak memory per case.

Usage: .venv/bin/python scripts/bench_symbolic.py [CASE ...] [--workers 1] [--baseline DIR] [--save DIR]

A CASE is NAME:ORDER with NAME one of
    demo     the demo compound: kagome-layered, spin 1/2, J1 = 1, Jperp = J2 = 0, symbolic Jd and interlayer
             occupation p_interlayer (what scripts/make_demo_series.py computes)
    square   square lattice, symbolic J1 and J2
    ladder3  two-leg ladder with inequivalent legs, symbolic J1, Jleg and Jrung (lattices/ladder-unequal-legs.toml)
    chain3   chain with symbolic J1, J2 and J3 (lattices/chain-j1j2j3.toml)
(default: demo:7 square:8 square:9 square:10).  Every case runs in a fresh child process with an empty
temporary HTE_CACHE_DIR and no shipped tables, and prints its wall time, the stage times of the expansion,
the number of cluster series (kernel calls) and the peak resident memory of the child and its workers.

--baseline DIR runs every case a second time with the hte package found in DIR first on the path (for example
an export of an earlier commit: ``git archive COMMIT | tar -x -C DIR``), in the same run, and checks that the two
series are identical (exact coefficients, compared as sympy expressions).
--save DIR writes each series JSON there.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

CASES = {
    "demo": {"lattice": "kagome-layered", "couplings": {"J1": "1", "Jperp": "0", "J2": "0"},
             "occupation": {"interlayer": "p_interlayer"}},
    "square": {"lattice": "square", "couplings": {}, "occupation": {}},
    "ladder3": {"lattice": "ladder-unequal-legs", "couplings": {}, "occupation": {}},
    "chain3": {"lattice": "chain-j1j2j3", "couplings": {}, "occupation": {}},
}

CHILD = r"""
import json, resource, sys, time
from hte.cache import WeightCache
from hte.series import compute_series
request, order, workers, save = json.loads(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
start = time.perf_counter()
with WeightCache() as cache:
    series = compute_series(request["lattice"], order=order, couplings=request["couplings"],
                            occupation=request["occupation"], spin="1/2", symbolic=True, per="site",
                            cache=cache, workers=workers)
wall = time.perf_counter() - start
peak = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
with open(save, "w") as f:
    json.dump(series.to_json_dict(), f)
print(json.dumps({"wall": wall, "peak_mib": peak / 1024, **series.stats}))
"""


def run_case(name: str, order: int, workers: int, code_dir: Path, save: Path) -> dict:
    """Run one case in a child process with an empty weight cache; return its measurements."""
    with tempfile.TemporaryDirectory(prefix="hte-bench-cache-") as cache_dir:
        env = dict(os.environ, HTE_CACHE_DIR=cache_dir, PYTHONPATH=str(code_dir), OPENBLAS_NUM_THREADS="1")
        out = subprocess.run([sys.executable, "-c", CHILD, json.dumps(CASES[name]), str(order), str(workers),
                              str(save)], check=True, capture_output=True, text=True, env=env, cwd=code_dir)
    return json.loads(out.stdout.strip().splitlines()[-1])


def same_series(path_a: Path, path_b: Path) -> bool:
    """True when two series JSON documents have identical coefficients (as exact sympy expressions)."""
    import sympy

    a, b = (json.loads(p.read_text())["series"] for p in (path_a, path_b))
    if a.keys() != b.keys():
        return False
    for key in a:
        if len(a[key]) != len(b[key]):
            return False
        for n, (x, y) in enumerate(zip(a[key], b[key])):
            if n == 0 and key == "lnZ":
                continue  # a decimal (ln 2 S + 1 terms), not an exact coefficient
            if sympy.expand(sympy.sympify(x) - sympy.sympify(y)) != 0:
                return False
    return True


def describe(label: str, r: dict) -> str:
    return (f"{label:>9} {r['graph_classes']:>8} {r['cluster_series_computed']:>9} {r['enumeration_s']:>8.1f} "
            f"{r['kernel_s']:>9.1f} {r['assembly_s']:>10.1f} {r['wall']:>8.1f} {r['peak_mib']:>8.0f}")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("cases", nargs="*", default=["demo:7", "square:8", "square:9", "square:10"])
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--baseline", type=Path, help="folder holding an earlier hte package to compare with")
    parser.add_argument("--save", type=Path, help="folder for the series JSON of each run")
    args = parser.parse_args()
    save_dir = args.save or Path(tempfile.mkdtemp(prefix="hte-bench-series-"))
    save_dir.mkdir(parents=True, exist_ok=True)
    print(f"# symbolic series, spin 1/2, ln Z + T chi + M4, empty cache, {args.workers} worker(s); "
          f"load average at start {os.getloadavg()[0]:.1f}")
    print(f"{'case':>12} {'code':>9} {'classes':>8} {'computed':>9} {'enum s':>8} {'kernel s':>9} "
          f"{'assembly s':>10} {'wall s':>8} {'peak MiB':>8}")
    for case in args.cases:
        name, _, order_text = case.partition(":")
        if name not in CASES or not order_text.isdigit():
            parser.error(f"case {case!r}: write NAME:ORDER with NAME one of {', '.join(CASES)}")
        order = int(order_text)
        runs = [("current", ROOT)] + ([("baseline", args.baseline.resolve())] if args.baseline else [])
        paths = []
        for label, code in runs:
            path = save_dir / f"{name}-{order}-{label}.json"
            r = run_case(name, order, args.workers, code, path)
            paths.append(path)
            print(f"{case:>12} {describe(label, r)}", flush=True)
        if len(paths) == 2:
            print(f"{case:>12} identical series: {same_series(*paths)}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
