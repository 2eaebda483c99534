"""Compute and store series tables: tables/<lattice>-heisenberg-s1_2[-TAG].json (see hte/tables.py).

LATTICE may carry coupling values after a colon, e.g. `cubic:J1=-1` (the ferromagnet; file suffix "-J1_-1").
"""

from __future__ import annotations

import json
import os
import platform
import resource
import sys
import time
from datetime import datetime, timezone

from hte import __version__
from hte.cache import WeightCache
from hte.clusters import default_workers
from hte.expansion import expand_lattice
from hte.lattice_file import load_lattice
from hte.models import build_model
from hte.series import normalise, write_json_atomic
from hte.tables import TABLE_FORMAT, TABLES_DIR


def make_table(request: str, order: int) -> dict:
    """Compute the table of `request` to `order` and store it, unless tables/ already holds a higher order.

    Returns the run's measurements: wall time (s), main-process peak (MiB) and the expansion's stage statistics.
    """
    name, _, assignments = request.partition(":")
    couplings = dict(item.split("=") for item in assignments.split(",")) if assignments else {}
    tag = "".join(f"-{k}_{v}" for k, v in couplings.items())
    path = TABLES_DIR / f"{name}-heisenberg-s1_2{tag}.json"
    spec = load_lattice(name)
    model = build_model(spec, couplings=couplings)
    start = time.perf_counter()
    with WeightCache() as cache:
        ls = expand_lattice(spec, model, order, cache=cache, workers=default_workers(), progress=sys.stderr.isatty())
    series = normalise(ls, lattice=spec, model=model, per="site")
    wall = time.perf_counter() - start
    peak_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    series.provenance = {
        "format": TABLE_FORMAT,
        "hte_version": __version__,
        "command": f"scripts/make_tables {request} {order}",
        "lattice_file": os.path.relpath(spec.path, TABLES_DIR.parent) if spec.path else name,
        "lattice_sha256": spec.sha256,
        "convention": "H = sum_<ij> J S_i.S_j (J > 0 antiferromagnetic; couplings as in 'couplings'), k_B = 1, "
                      "g mu_B = 1; coefficients of beta^n per site",
        "computed": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "wall_time_s": round(wall, 1),
        "peak_memory_mib_main_process": round(peak_mib),
        "machine": f"{platform.machine()}, {os.cpu_count()} cores, {platform.system()} {platform.release()}",
        "stats": {k: (round(v, 2) if isinstance(v, float) else v) for k, v in ls.stats.items()},
    }
    shipped = json.loads(path.read_text())["order"] if path.exists() else 0
    if shipped > order:
        print(f"{name}: order {order} in {wall:.1f} s; {path} keeps its order {shipped}", flush=True)
    else:
        write_json_atomic(series.to_json_dict(), path)
        print(f"{name}: order {order} in {wall:.1f} s -> {path}", flush=True)
    return {"wall": wall, "peak_mib": peak_mib, **ls.stats}


def main(argv: list[str]) -> int:
    if not argv or len(argv) % 2:
        print(__doc__, "\nusage: scripts/make_tables LATTICE ORDER [LATTICE ORDER ...]", file=sys.stderr)
        return 2
    TABLES_DIR.mkdir(exist_ok=True)
    for name, order in zip(argv[::2], argv[1::2]):
        make_table(name, int(order))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
