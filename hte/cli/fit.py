"""Fit measured chi(T), C(T) and M(H) with a lattice model's series: exchange constants with errors.

Data files are CSV/TSV/whitespace text with a header (see `hte.measured`); columns T, chi (or C, M, B) by
default, T in K, chi in emu/mol, C in J/(mol K).  Give the field of a file as FILE@FIELD (e.g.
chi_7T.csv@7T or m.csv@1000Oe) or a B column; a chi file without a field is treated as linear response.
Parameters: the reference coupling (the lattice's first label, alias J) in --energy-unit and --convention,
ratios LABEL/J1 and occupations p_CLASS (symbols of the series when free), g, chi0, imp_fraction, imp_g,
imp_theta, theta_D, debye_atoms, lattice_beta, lattice_delta.  Only points above margin x the model's
convergence temperature are fitted.  Outputs (--json, --png, --csv) are written atomically and only when
the whole job succeeded.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

DEFAULT_SYMBOLIC_ORDER = 6
DEFAULT_NUMERIC_ORDER = 10


def add_arguments(parser) -> None:
    parser.add_argument("lattice", metavar="LATTICE", help="built-in lattice name or path to a lattice file")
    parser.add_argument("--chi", action="append", default=[], metavar="FILE[@FIELD]",
                        help="susceptibility data (M/H); repeat for several fields")
    parser.add_argument("--heat-capacity", action="append", default=[], metavar="FILE[@FIELD]",
                        help="heat capacity data; repeat for several fields")
    parser.add_argument("--magnetization", action="append", default=[], metavar="FILE[@FIELD]",
                        help="magnetisation data: M(B) with a B column and T given by --m-temperature or a T "
                             "column, or M(T) at FIELD")
    parser.add_argument("--units", default=None, help="column units, e.g. T=K,chi=emu/mol,C=J/(mol K),M=muB,B=T")
    parser.add_argument("--columns", default=None,
                        help="column names or 1-based positions, e.g. T=Temp,chi=X,sigma=dX (sigma: uncertainties)")
    parser.add_argument("--m-temperature", default=None, metavar="T",
                        help="temperature of M(B) files without a T column, e.g. '5 K'")
    parser.add_argument("--spin", default="1/2", help="spin of the magnetic ions (default 1/2)")
    parser.add_argument("--vary", default=None,
                        help="free parameters, e.g. J,g,chi0 (default: J and g; J only for heat capacity alone)")
    parser.add_argument("--fix", default=None, help="fixed parameter values NAME=VALUE,... (user units)")
    parser.add_argument("--start", default=None, help="start values NAME=VALUE,... (default J and g from Curie-Weiss)")
    parser.add_argument("--bounds", default=None, help="bounds NAME=LOW:HIGH,... (either side may be empty)")
    parser.add_argument("--energy-unit", default="K", choices=("K", "meV", "cm-1"),
                        help="unit of the couplings on input and output (default K)")
    parser.add_argument("--convention", default="J", choices=("J", "-J", "2J", "-2J", "sigma"),
                        help="Hamiltonian convention of the couplings: J: H = J sum S.S (ours, default); "
                             "2J: H = 2J sum S.S; -2J: H = -2J sum S.S; -J; sigma: H = J sum sigma.sigma. "
                             "Write a leading minus with '=': --convention=-2J")
    parser.add_argument("--n-magnetic", type=float, default=1.0,
                        help="host magnetic ions (sites of class 'magnetic') per formula unit (default 1)")
    parser.add_argument("--molar-mass", type=float, default=None, help="g per mole of formula units (per-mass units)")
    parser.add_argument("--diamagnetic", type=float, default=None, metavar="CHI_DIA",
                        help="core diamagnetism in emu/mol (negative) subtracted from the chi data")
    parser.add_argument("--impurity-spin", default=None, help="spin of the free impurity spins (default: --spin)")
    parser.add_argument("--phonon-reference", default=None, metavar="FILE",
                        help="lattice heat capacity (columns T, C) subtracted from the heat-capacity data")
    parser.add_argument("--curie-weiss", default=None, metavar="auto|TMIN:TMAX",
                        help="Curie-Weiss analysis of the first chi file (window in K, or auto)")
    parser.add_argument("--order", type=int, default=None,
                        help=f"series order (default: a shipped table's, else {DEFAULT_NUMERIC_ORDER}; "
                             f"{DEFAULT_SYMBOLIC_ORDER} with free ratios or occupations)")
    parser.add_argument("--series", default=None, metavar="SERIES.json",
                        help="use this `hte series` document (symbolic in the free ratios/occupations)")
    parser.add_argument("--no-tables", action="store_true", help="ignore the shipped tables in tables/")
    parser.add_argument("--margin", type=float, default=1.1,
                        help="fit only T >= MARGIN x the model's convergence temperature (default 1.1)")
    parser.add_argument("--tolerance", type=float, default=0.01,
                        help="relative band half-width defining the convergence temperature (default 0.01)")
    parser.add_argument("--max-evaluations", type=int, default=3000,
                        help="model evaluations allowed per fit round before the fit counts as not converged")
    parser.add_argument("--json", metavar="REPORT", default=None, help="write the JSON report")
    parser.add_argument("--png", metavar="FIGURE", default=None, help="figure: data, model and band, residuals, "
                        "correlations (.png, .svg or .pdf)")
    parser.add_argument("--csv", metavar="FILE", default=None, help="per-point model, band and residuals")


# ---------------------------------------------------------------------------------------------------
# Options
# ---------------------------------------------------------------------------------------------------

def _assignments(text, option):
    from hte.cli.series import parse_assignments

    return parse_assignments(text, option)


def _float(text: str, option: str, name: str) -> float:
    from hte.errors import ParameterError

    try:
        return float(text)
    except ValueError:
        raise ParameterError(f"{option} {name}={text!r}: not a number; write e.g. {option} {name}=1.5") from None


def _split_field(spec: str, option: str):
    """'file.csv@7T' -> ('file.csv', 7.0); 'file.csv' -> ('file.csv', None)."""
    from hte import units
    from hte.errors import ParameterError

    path, sep, text = spec.rpartition("@")
    if not sep:
        return spec, None
    text = text.strip()
    split = len(text) - len(text.lstrip("0123456789.+-eE"))
    number, unit = text[:split], text[split:].strip() or "T"
    try:
        return path, units.to_canonical(float(number), "B", unit)
    except ValueError:
        raise ParameterError(f"{option} {spec}: the field after '@' must be a number with a unit, e.g. "
                             f"{path}@7T or {path}@1000Oe") from None


def read_data(args) -> list:
    """Read every data file the options name, in canonical units, with its field."""
    from hte.errors import ParameterError
    from hte.measured import read_measurement

    columns = _assignments(args.columns, "--columns")
    for key, value in list(columns.items()):
        if value.isdigit():
            columns[key] = int(value)
    sigma_column = columns.pop("sigma", None)
    units = _assignments(args.units, "--units")
    measurements = []
    for option, quantity, specs in (("--chi", "chi", args.chi), ("--heat-capacity", "C", args.heat_capacity),
                                    ("--magnetization", "M", args.magnetization)):
        for spec in specs:
            path, field = _split_field(spec, option)
            if not Path(path).is_file():
                raise ParameterError(f"{option} {path}: no such file")
            keys = {"T", quantity, "B"}
            cols = {k: v for k, v in columns.items() if k in keys}
            unit = {k: v for k, v in units.items() if k in keys}
            temperature = None
            if quantity == "M" and field is None:
                temperature = args.m_temperature
                if temperature is not None and "T" in cols:
                    raise ParameterError("--m-temperature and a T column (--columns T=...) exclude each other")
            measurement = read_measurement(path, quantity, cols or None, unit or None, molar_mass=args.molar_mass,
                                           n_magnetic=args.n_magnetic, field=field, temperature=temperature,
                                           uncertainty_column=sigma_column,
                                           diamagnetic=args.diamagnetic if quantity == "chi" else None)
            measurements.append(measurement)
    if not measurements:
        raise ParameterError("no data: give --chi FILE, --heat-capacity FILE and/or --magnetization FILE")
    if args.phonon_reference:
        measurements = _subtract_reference(measurements, args.phonon_reference, units, args.molar_mass)
    return measurements


def _subtract_reference(measurements, path, units, molar_mass):
    from hte.backgrounds import subtract_phonon_reference
    from hte.measured import read_measurement

    reference = read_measurement(path, "C", None, {k: v for k, v in units.items() if k in ("T", "C")} or None,
                                 molar_mass=molar_mass)
    return [subtract_phonon_reference(m, reference.temperature, reference.value) if m.quantity == "C" else m
            for m in measurements]


def _free_symbols(names, reference, lattice):
    """Which coupling labels and occupation classes the series must keep as symbols."""
    from hte.errors import ParameterError

    couplings, occupations = {}, {}
    for name in names:
        if name.startswith("p_"):
            site_class = name[2:]
            if site_class not in lattice.site_classes:
                raise ParameterError(f"parameter {name}: lattice {lattice.name} has no site class {site_class!r}; "
                                     f"occupations are p_{', p_'.join(lattice.site_classes)}")
            occupations[site_class] = None
        elif "/" in name:
            label, _, denominator = name.partition("/")
            if denominator != reference or label not in lattice.labels or label == reference:
                others = [f"{l}/{reference}" for l in lattice.labels if l != reference]
                raise ParameterError(f"parameter {name}: coupling ratios of lattice {lattice.name} are "
                                     f"{', '.join(others) or '(none: it has one coupling)'}")
            couplings[label] = None
    return couplings, occupations


def _canonical_name(name: str, reference: str, lattice) -> str:
    from hte.errors import ParameterError

    if name in ("J", reference):
        return reference
    if name in lattice.labels:
        raise ParameterError(f"parameter {name}: couplings other than {reference} are fitted as ratios; write "
                             f"{name}/{reference}")
    return name


def build_model(args, lattice, names_fixed: dict, names_free: set):
    """The ModelCurves for the request: fixed ratios/occupations numeric, free ones symbolic."""
    from hte.model_curves import ModelCurves

    reference = lattice.labels[0]
    free_couplings, free_occupations = _free_symbols(names_free, reference, lattice)
    couplings = dict(free_couplings)
    occupations = dict(free_occupations)
    for name, value in names_fixed.items():
        if name.startswith("p_") and name not in names_free:
            occupations[name[2:]] = value
        elif "/" in name and name not in names_free:
            couplings[name.partition("/")[0]] = value
    _free_symbols(names_fixed, reference, lattice)          # check the names
    if args.series:
        return _model_from_document(args.series, lattice, free_couplings, free_occupations)
    symbolic = bool(free_couplings or free_occupations)
    if not symbolic and not args.no_tables:
        found = _table_model(lattice, args, couplings, occupations)
        if found is not None:
            return found
    order = args.order or (DEFAULT_SYMBOLIC_ORDER if symbolic else DEFAULT_NUMERIC_ORDER)
    print(f"# computing the {'symbolic ' if symbolic else ''}series of {lattice.name} to order {order} "
          "(cluster series kept in the weight cache)", file=sys.stderr)
    return ModelCurves.build(lattice, order=order, spin=args.spin, couplings=couplings, occupation=occupations,
                             progress=sys.stderr.isatty())


def _table_model(lattice, args, couplings, occupations):
    from hte.model_curves import ModelCurves
    from hte.models import build_model as build_spin_model
    from hte.series import HTSeries
    from hte.tables import find_table

    spin_model = build_spin_model(lattice, spin=args.spin, couplings={k: str(v) for k, v in couplings.items()},
                                  occupation={k: str(v) for k, v in occupations.items()})
    found = find_table(lattice, spin_model, args.order or 1)
    if found is None:
        return None
    doc, path = found
    order = args.order or doc["order"]
    print(f"# series from table {os.path.relpath(path)} (order {order})", file=sys.stderr)
    series = HTSeries.from_table(doc, order, lattice=lattice, model=spin_model, per="site")
    return ModelCurves(series, lattice)


def _model_from_document(path, lattice, free_couplings, free_occupations):
    """A ModelCurves from a stored `hte series` document; every symbol in it becomes a model parameter."""
    import json
    from fractions import Fraction

    from hte.errors import ParameterError
    from hte.model_curves import ModelCurves

    try:
        doc = json.loads(Path(path).read_text())
    except (OSError, json.JSONDecodeError) as exc:
        raise ParameterError(f"--series {path}: cannot read the series document ({exc})") from None
    if doc.get("lattice") != lattice.name:
        raise ParameterError(f"--series {path}: the series is for lattice {doc.get('lattice')!r}, not {lattice.name!r}")

    def numeric(text) -> bool:
        try:
            Fraction(str(text))
            return True
        except (ValueError, ZeroDivisionError):
            return False

    symbols = []
    for label, value in doc.get("couplings", {}).items():
        if not numeric(value):
            if value != label:
                raise ParameterError(f"--series {path}: coupling {label} is the expression {value!r}; hte fit reads "
                                     f"series whose free couplings are the bare label symbols")
            symbols.append(label)
    for site_class, value in doc.get("occupation", {}).items():
        if not numeric(value):
            if value != f"p_{site_class}":
                raise ParameterError(f"--series {path}: occupation of {site_class} is {value!r}; hte fit needs the "
                                     f"symbol p_{site_class}")
            symbols.append(value)
    missing = [n for n in list(free_couplings) + [f"p_{c}" for c in free_occupations] if n not in symbols]
    if missing:
        raise ParameterError(f"--series {path}: {', '.join(missing)} cannot vary: the series holds "
                             f"{', '.join(symbols) or 'no symbols'} (compute one with `hte series --symbolic`)")
    return ModelCurves(doc, lattice, parameters=tuple(symbols))


def configure_parameters(lab, fixed, starts, bounds, vary):
    """Default parameters with the user's fixed values, start values, bounds and free flags (user units)."""
    from hte.errors import ParameterError
    from hte.fitting import Parameter, default_parameters

    parameters = default_parameters(lab.curves, energy_unit=lab.energy_unit, convention=lab.convention)
    baked = [n for n in {**starts, **fixed} if (n.startswith("p_") or "/" in n) and n not in vary]
    for option, table in (("--fix", fixed), ("--start", starts), ("--bounds", bounds), ("--vary", dict.fromkeys(vary))):
        for name in table:
            if name not in parameters and name not in baked:
                raise ParameterError(f"{option} {name}: unknown parameter; this fit has {', '.join(parameters)} "
                                     "(the reference coupling also as J)")
    for name, value in {**starts, **fixed}.items():
        if name not in parameters:        # a fixed ratio or occupation, built into a numeric series
            parameters[name] = Parameter(name, value, description="fixed in the series")
        parameters[name].value = value
    for name, (low, high) in bounds.items():
        parameters[name].lower, parameters[name].upper = low, high
    for name in vary:
        if name in fixed:
            raise ParameterError(f"{name} is both in --vary and --fix; choose one")
        parameters[name].free = True
    return parameters


def _parse_bounds(text, reference, lattice):
    from hte.errors import ParameterError

    out = {}
    for name, value in _assignments(text, "--bounds").items():
        low, sep, high = value.partition(":")
        if not sep:
            raise ParameterError(f"--bounds {name}={value}: write LOW:HIGH, e.g. {name}=0:1 (either side may be empty)")
        out[_canonical_name(name, reference, lattice)] = (
            _float(low, "--bounds", name) if low.strip() else -float("inf"),
            _float(high, "--bounds", name) if high.strip() else float("inf"))
    return out


# ---------------------------------------------------------------------------------------------------
# Run
# ---------------------------------------------------------------------------------------------------

def run(args) -> int:
    from hte.curie_weiss import fit_curie_weiss
    from hte.errors import DataFileError, ParameterError
    from hte.fitting import LabModel, entropy_check, fit, start_from_curie_weiss
    from hte.lattice_file import load_lattice
    from hte.models import parse_spin

    outputs = [p for p in (args.json, args.png, args.csv) if p]
    for path in outputs:
        folder = Path(path).parent
        if not folder.is_dir():
            raise ParameterError(f"output {path}: the folder {folder} does not exist")
    if args.png and Path(args.png).suffix.lower() not in (".png", ".svg", ".pdf"):
        raise ParameterError(f"--png {args.png}: use a .png, .svg or .pdf file name")
    lattice = load_lattice(args.lattice)
    reference = lattice.labels[0]
    spin = float(parse_spin(args.spin))
    impurity_spin = float(parse_spin(args.impurity_spin)) if args.impurity_spin else spin
    fixed = {_canonical_name(k, reference, lattice): _float(v, "--fix", k)
             for k, v in _assignments(args.fix, "--fix").items()}
    starts = {_canonical_name(k, reference, lattice): _float(v, "--start", k)
              for k, v in _assignments(args.start, "--start").items()}
    bounds = _parse_bounds(args.bounds, reference, lattice)
    measurements = read_data(args)
    quantities = {m.quantity for m in measurements}
    if args.vary:
        vary = [_canonical_name(n.strip(), reference, lattice) for n in args.vary.split(",") if n.strip()]
    else:
        vary = [reference] + (["g"] if quantities & {"chi", "M"} else [])
    model = build_model(args, lattice, {**starts, **fixed}, set(vary))
    lab = LabModel(model, spin=spin, n_magnetic=args.n_magnetic, energy_unit=args.energy_unit,
                   convention=args.convention, impurity_spin=impurity_spin)
    parameters = configure_parameters(lab, fixed, starts, bounds, vary)

    extra, notes = {}, []
    chi_files = [m for m in measurements if m.quantity == "chi"]
    if chi_files:
        first = min(chi_files, key=lambda m: 0.0 if m.field is None else float(m.field.max()))
        window = (None, None)
        if args.curie_weiss and args.curie_weiss != "auto":
            low, sep, high = args.curie_weiss.partition(":")
            if not sep:
                raise ParameterError(f"--curie-weiss {args.curie_weiss}: write auto or TMIN:TMAX in K, e.g. 150:300")
            window = (_float(low, "--curie-weiss", "TMIN") if low else None,
                      _float(high, "--curie-weiss", "TMAX") if high else None)
        try:
            curie_weiss = fit_curie_weiss(first, *window)
        except DataFileError as exc:
            if args.curie_weiss:
                raise
            curie_weiss = None
            notes.append(f"no Curie-Weiss start values ({exc}); starting from the defaults")
        if curie_weiss is not None:
            suggested = start_from_curie_weiss(lab, curie_weiss, parameters)
            for name, value in suggested.items():
                if name not in starts and name not in fixed and parameters[name].free:
                    parameters[name].value = value
            if args.curie_weiss:
                extra["curie_weiss"] = curie_weiss_block(curie_weiss, first, spin, suggested, lab)
                print(curie_weiss.report(), file=sys.stderr)
    elif reference not in starts and reference not in fixed:
        raise ParameterError(f"without susceptibility data the start value of {reference} cannot be estimated; "
                             f"give --start {reference}=VALUE ({args.energy_unit}, convention {args.convention})")

    result = fit(lab, measurements, parameters, margin=args.margin, tolerance=args.tolerance,
                 max_evaluations=args.max_evaluations)
    result.warnings.extend(notes)
    entropy = entropy_check(result) if "C" in quantities else []
    if entropy:
        result.extra["entropy"] = entropy
    result.extra.update(extra)
    report = result.report()
    print(summary(result))
    from hte.fit_report import write_outputs

    write_outputs(result, report, json_path=args.json, png_path=args.png, csv_path=args.csv)
    return 0


def curie_weiss_block(curie_weiss, measurement, spin, suggested, lab) -> dict:
    """The Curie-Weiss part of the report: C, theta, mu_eff, g and the coupling implied by theta."""
    moment, moment_err = curie_weiss.effective_moment()
    g, g_err = curie_weiss.g_factor(spin)
    return {"file": measurement.source, "window_K": [curie_weiss.t_min, curie_weiss.t_max],
            "window": curie_weiss.window, "points": curie_weiss.points,
            "C": {"value": curie_weiss.curie, "stderr": curie_weiss.curie_err, "unit": "emu K/mol"},
            "theta": {"value": curie_weiss.theta, "stderr": curie_weiss.theta_err, "unit": "K"},
            "chi0": {"value": curie_weiss.chi0, "stderr": curie_weiss.chi0_err, "unit": "emu/mol"},
            "mu_eff": {"value": moment, "stderr": moment_err, "unit": "mu_B per magnetic ion"},
            "g_from_C": {"value": g, "stderr": g_err, "note": f"C = n N_A g^2 mu_B^2 S(S+1)/(3 k_B), S = {spin:g}"},
            "coupling_from_theta": {"value": suggested.get(lab.reference), "unit": lab.energy_unit,
                                    "convention": lab.convention,
                                    "note": "theta = (c1/c0) |J1| with the series' first two chiT coefficients"},
            "warnings": list(curie_weiss.warnings)}


def summary(result) -> str:
    """The readable table printed by `hte fit`."""
    report = result.report()
    lines = [f"fit of {report['lattice']} ({report['convention']}; couplings in {report['energy_unit']})",
             f"  {report['points_used']} points at T >= {report['T_min_used']:.4g} K, reduced chi^2 = "
             f"{report['reduced_chi2']:.4g}"]
    for name, p in report["parameters"].items():
        if p["free"]:
            error = "unconstrained" if p["stderr"] == float("inf") else f"+- {p['stderr']:.3g}"
            lines.append(f"  {name:>14} = {p['value']:<12.6g} {error:<16} {p['unit']}")
        elif p["value"] != 0 or name in ("g", "imp_g", "theta_D"):
            lines.append(f"  {name:>14} = {p['value']:<12.6g} {'(fixed)':<16} {p['unit']}")
    for text in report["warnings"]:
        lines.append(f"  warning: {text}")
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------------
# Outputs
