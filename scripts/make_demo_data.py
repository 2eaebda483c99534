"""Generate the synthetic data of the invented demo compound: data/demo/*.csv and data/demo/true_parameters.json.

The compound "demokagomite" is invented (see hte/demo.py).  Its data are made from the model the demo fits,
the kagome-layered series of data/demo/series-kagome-layered.json (spin 1/2, order 7), at the true parameters
below, plus seeded Gaussian noise: chi = M/H at 0.1 T and 7 T, and C at 0, 4 and 9 T.  Points below the
model's convergence temperature come from the Padé estimate outside its converged range; the demo does not
fit them (they are drawn open in the figure).

    .venv/bin/python scripts/make_demo_data.py [--seed N] [--out DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from hte.demo import COMPOUND, DATA_FILES, DEMO_DIR, load_demo_model

TRUE_PARAMETERS = {
    "J1": 30.0,               # K, H = J sum S_i.S_j (antiferromagnetic)
    "Jd/J1": 0.4,             # interlayer defect coupling, antiferromagnetic
    "p_interlayer": 0.10,     # occupied interlayer sites per formula unit
    "g": 2.15,
    "chi0": 2.0e-4,           # emu/mol
    "imp_fraction": 0.004,    # free spins 1/2 per formula unit
    "imp_g": 2.0,
    "imp_theta": 0.0,         # K
    "theta_D": 500.0,         # K
    "debye_atoms": COMPOUND["debye_atoms"],
}
NOISE = {"chi": (0.003, 2e-6), "C": (0.003, 0.0)}      # sigma = relative * |value| + absolute (emu/mol, J/(mol K))
TEMPERATURES = {"chi": np.concatenate([np.arange(27.0, 100.0, 2.0), np.arange(100.0, 351.0, 5.0)]),
                "C": np.arange(50.0, 181.0, 2.5)}


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=20240611)
    parser.add_argument("--out", default=str(DEMO_DIR))
    args = parser.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    lab, source = load_demo_model()
    values = {name: p.value for name, p in _defaults(lab).items()}
    values.update(TRUE_PARAMETERS)
    rng = np.random.default_rng(args.seed)
    for name, quantity, field in DATA_FILES:
        temperatures = TEMPERATURES[quantity]
        lab.curves.reset_ensembles()
        clean = lab.evaluate(quantity, temperatures, np.full_like(temperatures, field), values)
        if np.any(clean <= 0):
            raise SystemExit(f"{name}: the model is not positive at T = {temperatures[clean <= 0][0]} K; raise the "
                             "lowest temperature")
        relative, absolute = NOISE[quantity]
        sigma = relative * np.abs(clean) + absolute
        measured = clean + rng.normal(0.0, sigma)
        unit = "emu/mol" if quantity == "chi" else "J/(mol K)"
        header = [f"# {COMPOUND['name']}: synthetic {quantity}(T) at B = {field:g} T, per mole of formula units "
                  f"({COMPOUND['n_magnetic']} kagome ions), {unit}; sigma = one standard deviation",
                  f"# made by scripts/make_demo_data.py --seed {args.seed} from the {source}",
                  f"T,{quantity},sigma"]
        rows = [f"{t:.2f},{v:.8g},{s:.3g}" for t, v, s in zip(temperatures, measured, sigma)]
        _write(out / name, "\n".join(header + rows) + "\n")
    document = {"compound": COMPOUND, "parameters": TRUE_PARAMETERS,
                "units": {"J1": "K", "chi0": "emu/mol", "imp_theta": "K", "theta_D": "K"},
                "convention": "H = J sum S_i.S_j, J > 0 antiferromagnetic; Jd/J1 is a ratio",
                "noise": {"chi": "sigma = 0.003 |chi| + 2e-6 emu/mol", "C": "sigma = 0.003 |C|"},
                "seed": args.seed, "series": source,
                "made": datetime.now(timezone.utc).isoformat(timespec="seconds"),
                "command": f".venv/bin/python scripts/make_demo_data.py --seed {args.seed}"}
    _write(out / "true_parameters.json", json.dumps(document, indent=1) + "\n")
    print(f"wrote {len(DATA_FILES)} data files and true_parameters.json to {out}")
    return 0


def _defaults(lab):
    from hte.fitting import default_parameters

    return default_parameters(lab.curves)


def _write(path: Path, text: str) -> None:
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
    with os.fdopen(handle, "w") as stream:
        stream.write(text)
    os.chmod(temporary, 0o644)
    os.replace(temporary, path)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
