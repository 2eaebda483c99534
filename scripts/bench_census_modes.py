"""Time the cluster census alone in each of its modes, optionally against another checkout of hte.

Usage: .venv/bin/python scripts/bench_census_modes.py [--baseline DIR] [--cases triangular:J1:9,...]

For each case (lattice, coupling labels kept, largest cluster size) and each mode (all clusters; the vanishing
rule with k = 4, 2 and 0 magnetisation insertions, i.e. the default run, --no-m4 and --lnz-only), runs
hte.clusters.enumerate_clusters in one process in a fresh child (numba kernels compiled or loaded before the
clock starts) and prints the wall seconds, the clusters kept with the largest size per cell and the graph
classes kept.  With --baseline DIR the same census also runs with DIR (another checkout, e.g. from
`git archive`) first on the Python path, and the script checks that every class the baseline keeps and can
contribute (hte.vanishing_weights.lowest_order) is kept by this checkout with the same count, and that all
classes agree in the census of all clusters.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_CASES = "triangular:J1:9,kagome-layered:J1+J2+Jd:7,square:J1+J2:8"
MODES = [None, 4, 2, 0]

CHILD = r"""
import json, sys, time
from hte.clusters import enumerate_clusters
from hte.lattice_file import load_lattice
name, labels, bonds, mode = sys.argv[1], sys.argv[2].split("+"), int(sys.argv[3]), json.loads(sys.argv[4])
spec = load_lattice(name)
spec = spec.without_labels([label for label in spec.labels if label not in labels])
enumerate_clusters(spec, 3, insertions=mode)  # compile or load the kernels
start = time.perf_counter()
census = enumerate_clusters(spec, bonds, insertions=mode)
seconds = time.perf_counter() - start
print(json.dumps({"seconds": seconds, "top": census.clusters_per_cell[-1],
                  "classes": {c.key: c.per_cell for c in census.classes}}))
"""


def run(path: Path, name: str, labels: str, bonds: int, mode) -> dict:
    """One census in a child process with `path` first on the Python path."""
    env = dict(os.environ, PYTHONPATH=str(path))
    if path != ROOT:  # the other checkout's compiled kernels go to their own cache
        env["NUMBA_CACHE_DIR"] = str(Path("/tmp") / f"hte-bench-numba-{abs(hash(str(path)))}")
    out = subprocess.run([sys.executable, "-c", CHILD, name, labels, str(bonds), json.dumps(mode)], env=env,
                         capture_output=True, text=True, check=True, cwd=path).stdout
    return json.loads(out.strip().splitlines()[-1])


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", type=Path, help="another checkout of hte to compare with")
    parser.add_argument("--cases", default=DEFAULT_CASES, help="lattice:label+label:bonds,...")
    args = parser.parse_args()
    from hte.canonical import key_to_graph
    from hte.vanishing_weights import lowest_order

    print("| lattice, labels, bonds | mode | " + ("baseline s | " if args.baseline else "")
          + "seconds | kept at the top per cell | classes |")
    print("|---|---|" + ("---|" if args.baseline else "") + "---|---|---|")
    failures = 0
    for case in args.cases.split(","):
        name, labels, bonds = case.split(":")
        for mode in MODES:
            new = run(ROOT, name, labels, int(bonds), mode)
            cells = [f"{new['seconds']:.2f}", str(new["top"]), str(len(new["classes"]))]
            if args.baseline:
                old = run(args.baseline.resolve(), name, labels, int(bonds), mode)
                cells.insert(0, f"{old['seconds']:.2f}")
                needed = {key for key in old["classes"]
                          if mode is None or lowest_order(key_to_graph(key), mode) <= int(bonds)}
                same = all(new["classes"].get(key) == old["classes"][key] for key in needed)
                if mode is None:
                    same = same and new["classes"] == old["classes"]
                if not same:
                    failures += 1
                    cells[-1] += " (DIFFERS from the baseline)"
            label = "all clusters" if mode is None else f"k = {mode}"
            print(f"| {name}, {labels.replace('+', ', ')}, {bonds} | {label} | " + " | ".join(cells) + " |",
                  flush=True)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
