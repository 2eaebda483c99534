"""The end-to-end demo on an invented compound: from lattice and series to a joint fit of χ(T) and C(T).

The compound is invented (no such material is claimed to exist): "demokagomite", a layered kagome magnet with
three spin-1/2 host ions per formula unit on kagome planes (J1, antiferromagnetic) and a small fraction
p_interlayer of occupied interlayer defect sites, each coupled by Jd to the six kagome spins around it
(lattice ``kagome-layered``).  Its synthetic data (:mod:`scripts/make_demo_data.py`) are χ = M/H at 0.1 T and
7 T and C at 0, 4 and 9 T, made from stated true parameters plus seeded Gaussian noise, in ``data/demo/``.

:func:`run_demo` does the whole job: lattice summary and drawing, the series (from the shipped precomputed
document ``data/demo/series-kagome-layered.json``, else computed into the weight cache), a Curie–Weiss
analysis, curves with bands, the joint fit, figures and the JSON report, and a table of the recovered
parameters beside the true ones.
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

DEMO_DIR = Path(__file__).resolve().parents[1] / "data" / "demo"

#: The symbolic series the demo needs: Jd and the interlayer occupation free, J1 = 1 the energy unit.
DEMO_SERIES_REQUEST = {
    "lattice": "kagome-layered",
    "spin": "1/2",
    "couplings": {"J1": "1", "Jperp": "0", "J2": "0"},
    "occupation": {"interlayer": "p_interlayer"},
}

#: What the demo knows about the (invented) compound besides its data.
COMPOUND = {
    "name": "demokagomite (invented; no such compound is claimed to exist)",
    "lattice": "kagome-layered",
    "spin": 0.5,
    "n_magnetic": 3,            # host (kagome) ions per formula unit
    "molar_mass_g_per_mol": 412.0,
    "debye_atoms": 8,           # atoms per formula unit in the Debye term
}

#: Data files: (file name, quantity, field in T).
DATA_FILES = (("chi_0.1T.csv", "chi", 0.1), ("chi_7T.csv", "chi", 7.0), ("C_0T.csv", "C", 0.0),
              ("C_4T.csv", "C", 4.0), ("C_9T.csv", "C", 9.0))

#: Parameters the demo fits; the others are held at the values stated in :data:`FIXED`.
FREE = ("J1", "Jd/J1", "g", "chi0", "theta_D")
FIXED = {"debye_atoms": COMPOUND["debye_atoms"], "p_interlayer": 0.10, "imp_g": 2.0, "imp_theta": 0.0}


def demo_series_path() -> Path:
    """Where the precomputed symbolic series of the demo compound is stored."""
    return DEMO_DIR / "series-kagome-layered.json"


def load_demo_model(order: int | None = None, *, use_table: bool = True, progress: bool = False):
    """The demo's :class:`hte.fitting.LabModel`: from the shipped series (truncated to `order`), else computed.

    Returns the LabModel and a line saying where the series came from.
    """
    from hte.errors import TableMismatchError
    from hte.fitting import LabModel
    from hte.lattice_file import load_lattice
    from hte.model_curves import ModelCurves

    spec = load_lattice(COMPOUND["lattice"])
    path = demo_series_path()
    symbols = ("Jd", "p_interlayer")
    if use_table and path.is_file():
        doc = json.loads(path.read_text())
        if doc.get("provenance", {}).get("lattice_sha256") != spec.sha256:
            raise TableMismatchError(f"{path} was computed from another {spec.name} lattice file (sha256 differs); "
                                     "rebuild it with `.venv/bin/python scripts/make_demo_series.py 7` or run "
                                     "with --no-tables")
        stored = doc["order"]
        order = stored if order is None else order
        if order > stored:
            raise TableMismatchError(f"order {order} exceeds the {stored} orders stored in {path}; use --order "
                                     f"<= {stored} or --no-tables (slow)")
        doc = dict(doc, order=order, series={k: v[: order + (0 if k == "E" else 1)]
                                             for k, v in doc["series"].items()})
        source = f"series from {path.name} (order {order} of {stored}; {doc['provenance'].get('command')})"
        curves = ModelCurves(doc, spec, parameters=symbols)
    else:
        order = order or 7
        started = time.perf_counter()
        curves = ModelCurves.build(spec, order=order, spin="1/2", couplings={"Jd": None, "Jperp": 0, "J2": 0},
                                   occupation={"interlayer": None}, progress=progress)
        source = f"series computed to order {order} in {time.perf_counter() - started:.0f} s (weight cache kept)"
    lab = LabModel(curves, spin=COMPOUND["spin"], n_magnetic=COMPOUND["n_magnetic"])
    return lab, source


def read_true_parameters(directory: Path = DEMO_DIR) -> dict:
    """The true parameters the synthetic data were made with (``true_parameters.json``)."""
    from hte.errors import DataFileError

    path = Path(directory) / "true_parameters.json"
    try:
        return json.loads(path.read_text())
    except (OSError, json.JSONDecodeError) as exc:
        raise DataFileError(f"{path}: cannot read the demo's true parameters ({exc}); regenerate them with "
                            "`.venv/bin/python scripts/make_demo_data.py`") from None


def read_demo_data(directory: Path = DEMO_DIR, files=None) -> list:
    """The demo data files as Measurements (T in K, χ in emu/mol, C in J/(mol K), columns T, value, sigma).

    `files` picks some of :data:`DATA_FILES` by name (default all five).
    """
    from hte.errors import ParameterError
    from hte.measured import read_measurement

    known = [entry[0] for entry in DATA_FILES]
    unknown = [name for name in (files or ()) if name not in known]
    if unknown:
        raise ParameterError(f"demo data files {', '.join(unknown)} do not exist; the demo has {', '.join(known)}")
    measurements = []
    for name, quantity, field in DATA_FILES:
        if files is not None and name not in files:
            continue
        measurements.append(read_measurement(Path(directory) / name, quantity, uncertainty_column="sigma",
                                             field=field, n_magnetic=COMPOUND["n_magnetic"],
                                             molar_mass=COMPOUND["molar_mass_g_per_mol"]))
    return measurements


def demo_parameters(lab, start: dict, free=FREE):
    """Parameters of the demo fit: `free` (default :data:`FREE`) from `start`, :data:`FIXED` and the rest held."""
    from hte.fitting import default_parameters

    parameters = default_parameters(lab.curves, energy_unit=lab.energy_unit, convention=lab.convention)
    for name, value in {**start, **FIXED}.items():
        parameters[name].value = value
    for name in free:
        parameters[name].free = True
    return parameters


def run_demo(out_dir, *, order: int | None = None, use_table: bool = True, data_dir: Path = DEMO_DIR,
             files=None, free=FREE, start=None, progress: bool | None = None, log=print) -> dict:
    """Run the whole demo, writing figures, CSV and JSON into `out_dir`; return the comparison table as a dict.

    Steps: lattice summary and drawing; series; Curie–Weiss on χ at 0.1 T; zero-field curves with bands at
    the Curie–Weiss start values; the joint fit of the data sets; recovered against true parameters.
    `files` (names from :data:`DATA_FILES`, the first a χ file), `free` and `start` (extra start values)
    shorten the job, e.g. for tests.
    """
    from hte.fit_report import write_outputs
    from hte.cli.lattice import _draw_atomically, summarise
    from hte.curie_weiss import fit_curie_weiss, plot_curie_weiss
    from hte.fitting import entropy_check, fit, start_from_curie_weiss
    from hte.plotting import plot_curves

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    progress = sys.stderr.isatty() if progress is None else progress
    started = time.perf_counter()
    log(f"== {COMPOUND['name']}\n")
    lab, source = load_demo_model(order, use_table=use_table, progress=progress)
    log(summarise(lab.curves.lattice))
    _draw_atomically(lab.curves.lattice, out / "lattice.png")
    log(f"\n== {source}")
    measurements = read_demo_data(data_dir, files)
    truth = read_true_parameters(data_dir)

    log("\n== Curie-Weiss analysis of chi at 0.1 T")
    curie_weiss = fit_curie_weiss(measurements[0])
    log(curie_weiss.report())
    plot_curie_weiss(curie_weiss, measurements[0], out / "curie_weiss.png")
    start = {"Jd/J1": 0.0, "chi0": 0.0, "theta_D": 300.0, **(start or {})}
    parameters = demo_parameters(lab, start, free)
    start.update(start_from_curie_weiss(lab, curie_weiss, parameters))
    parameters = demo_parameters(lab, start, free)
    log("start values: " + ", ".join(f"{k} = {v:.4g}" for k, v in start.items()))

    log("\n== curves with bands at the start values (units of J1)")
    import numpy as np

    values = {name: p.value for name, p in parameters.items()}
    curve_set = lab.curves.curves(lab.symbol_values(values), np.geomspace(0.3, 10.0, 120))
    curve_set.label = "kagome-layered at the Curie-Weiss start values"
    plot_curves(curve_set, out / "curves.png", title="demokagomite (invented): reduced curves per kagome site")
    curve_set.to_csv(out / "curves.csv")
    log(f"T_conv: chi {curve_set.T_conv['chi']:.3g} J1, C {curve_set.T_conv['C']:.3g} J1")

    log("\n== joint fit of " + ", ".join(Path(m.source).name for m in measurements))
    result = fit(lab, measurements, parameters, progress=progress)
    result.extra["entropy"] = entropy_check(result)
    result.extra["curie_weiss"] = {"theta_K": curie_weiss.theta, "C_emu_K_per_mol": curie_weiss.curie,
                                   "window_K": [curie_weiss.t_min, curie_weiss.t_max]}
    result.extra["demo"] = {"compound": COMPOUND, "series_source": source, "true_parameters": truth}
    report = result.report()
    write_outputs(result, report, json_path=out / "fit.json", png_path=out / "fit.png", csv_path=out / "fit.csv")
    comparison = compare(result, truth)
    from hte.cli.fit import summary

    log(summary(result))
    log("\n== recovered against true parameters")
    log(format_comparison(comparison))
    log(f"\nfiles in {out}: lattice.png, curie_weiss.png, curves.png, curves.csv, fit.png, fit.csv, fit.json"
        f"\ndone in {time.perf_counter() - started:.0f} s")
    return comparison


def compare(result, truth: dict) -> dict:
    """{name: {"true", "fitted", "stderr", "deviation_in_sigma"}} for the free parameters."""
    out = {}
    for name in result.free:
        p = result.parameters[name]
        true = truth["parameters"][name]
        deviation = (p.value - true) / p.stderr if p.stderr and p.stderr != float("inf") else None
        out[name] = {"true": true, "fitted": p.value, "stderr": p.stderr, "unit": p.unit,
                     "deviation_in_sigma": deviation}
    return out


def format_comparison(comparison: dict) -> str:
    """The comparison as a readable table."""
    lines = [f"  {'parameter':>14}  {'true':>12}  {'fitted':>12}  {'stderr':>10}  {'(fit-true)/stderr':>18}"]
    for name, row in comparison.items():
        deviation = "-" if row["deviation_in_sigma"] is None else f"{row['deviation_in_sigma']:+.2f}"
        lines.append(f"  {name:>14}  {row['true']:>12.6g}  {row['fitted']:>12.6g}  {row['stderr']:>10.3g}  "
                     f"{deviation:>18}  {row['unit']}")
    return "\n".join(lines)
