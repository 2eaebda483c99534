"""Precompute the symbolic series of the demo compound: data/demo/series-kagome-layered.json.

The demo compound (invented) is the kagome-layered lattice with spin 1/2, J1 = 1 as the energy unit, the
interlayer-defect coupling Jd and the interlayer occupation p_interlayer left as symbols, Jperp = J2 = 0.
Computing this series takes minutes to an hour (it grows steeply with the order), so the demo loads the stored
document instead.  Usage:

    .venv/bin/python scripts/make_demo_series.py [ORDER]        (default order 8)

The document is the `hte series --symbolic` JSON (CONVENTIONS.md, per site) plus a provenance block saying
how, when and where it was made.  Reruns reuse the weight cache ($HTE_CACHE_DIR).
"""

from __future__ import annotations

import os
import platform
import resource
import sys
import time
from datetime import datetime, timezone
from pathlib import Path

from hte import __version__
from hte.cache import WeightCache
from hte.demo import DEMO_DIR, DEMO_SERIES_REQUEST, demo_series_path
from hte.lattice_file import load_lattice
from hte.series import compute_series, write_json_atomic


def main(argv: list[str]) -> int:
    order = int(argv[0]) if argv else 8
    spec = load_lattice(DEMO_SERIES_REQUEST["lattice"])
    start = time.perf_counter()
    with WeightCache() as cache:
        series = compute_series(spec, order=order, couplings=DEMO_SERIES_REQUEST["couplings"],
                                occupation=DEMO_SERIES_REQUEST["occupation"], spin=DEMO_SERIES_REQUEST["spin"],
                                symbolic=True, per="site", cache=cache, progress=sys.stderr.isatty())
    wall = time.perf_counter() - start
    series.provenance = {
        "format": 1,
        "hte_version": __version__,
        "command": f".venv/bin/python scripts/make_demo_series.py {order}",
        "lattice_file": os.path.relpath(spec.path, Path(__file__).resolve().parents[1]) if spec.path else spec.name,
        "lattice_sha256": spec.sha256,
        "convention": "H = J1 sum_<ij> S_i.S_j + Jd sum_<i,d> S_i.S_d, J1 = 1 > 0 antiferromagnetic, k_B = 1, "
                      "g mu_B = 1; symbols: Jd (in units of J1), p_interlayer (occupation of the interlayer "
                      "sites); coefficients of beta^n per site of the undiluted lattice",
        "computed": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "wall_time_s": round(wall, 1),
        "peak_memory_mib": round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024),
        "machine": f"{platform.machine()}, {os.cpu_count()} cores, {platform.system()} {platform.release()}",
        "stats": {k: (round(v, 2) if isinstance(v, float) else v) for k, v in series.stats.items()},
    }
    DEMO_DIR.mkdir(parents=True, exist_ok=True)
    path = demo_series_path()
    write_json_atomic(series.to_json_dict(), path)
    print(f"order {order} in {wall:.1f} s -> {path}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
