"""Low-temperature curves (chi*, 1/chi*, C, C/T, S, E) with error bands from the series, and what-if scans.

Input is a series JSON file (from `hte series --json`) or a lattice with the series options.  Methods: pade
(Padé ensembles), dlog (Dlog-Padé: critical point and exponent), entropy (the entropy method; needs --e0 and
--low-t; ranges such as --e0 -0.45:-0.40:6 scan them; chi too, shaped by --chi-low-t, unless --lnz-only),
nlce (numerical linked clusters; lattice input) and compare (overlay of the routes, flags where they disagree).  --scan NAME=VALUES varies one coupling or
site-class occupation (e.g. --scan J2=0,0.1,0.2 or --scan interlayer=0:0.2:5) from one symbolic series, or
the single-ion anisotropy of a class (--scan D:magnetic=0:1:3, one series per value).
Temperatures are in units of the reference coupling; below T_conv curves are estimates, not predictions.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

METHODS = ("pade", "dlog", "entropy", "nlce", "compare")


def add_arguments(parser) -> None:
    from hte.cli.series import add_series_arguments

    add_series_arguments(parser)
    parser.add_argument("--method", default="pade", choices=METHODS)
    parser.add_argument("--e0", default=None,
                        help="entropy method: ground-state energy per site (or a scan range A:B:N)")
    parser.add_argument("--low-t", default=None,
                        help="entropy method: gapped:DELTA or power:ALPHA (C ~ T^ALPHA); ranges power:A:B:N scan")
    parser.add_argument("--chi-low-t", default=None, metavar="KIND:VALUE",
                        help="entropy method, chi: power:KAPPA (chi ~ T^KAPPA at low T; default 0, a finite chi(0)) "
                             "or gapped:DELTA_S (spin gap; default the --low-t gap)")
    parser.add_argument("--tmin", type=float, default=0.05, help="lowest temperature (units of the coupling)")
    parser.add_argument("--tmax", type=float, default=10.0, help="highest temperature")
    parser.add_argument("--points", type=int, default=200, help="number of temperatures (geometric grid)")
    parser.add_argument("--tolerance", type=float, default=0.01,
                        help="relative band half-width that defines T_conv (default 0.01)")
    parser.add_argument("--variable", default="beta", metavar="KIND[:A]",
                        help="pade: series variable beta (default), euler:A (beta/(1+A beta)), exp:A "
                             "(1-exp(-A beta)) or square (beta^2, even series)")
    parser.add_argument("--max-bonds", type=int, default=None, help="nlce: largest cluster in bonds (default 8)")
    parser.add_argument("--scan", default=None, metavar="NAME=VALUES",
                        help="vary one coupling label, site-class occupation or D:CLASS anisotropy: v1,v2,... or "
                             "start:stop:count")
    parser.add_argument("--json", metavar="FILE", default=None, help="write the curves as JSON (atomically)")
    parser.add_argument("--csv", metavar="FILE", default=None, help="write the curves as CSV (atomically)")
    parser.add_argument("--png", metavar="FILE", default=None, help="figure (.png, .svg or .pdf)")


# ------------------------------------------------------------------------------------------------ parsing
def parse_values(text: str, option: str) -> list[float]:
    """"a,b,c" or "start:stop:count" -> list of floats; ParameterError with an example otherwise."""
    from hte.errors import ParameterError

    try:
        if ":" in text:
            start, stop, count = text.split(":")
            n = int(count)
            if n < 1:
                raise ValueError
            if n == 1:
                return [float(start)]
            a, b = float(start), float(stop)
            return [a + (b - a) * k / (n - 1) for k in range(n)]
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise ParameterError(f"{option} {text!r}: write a list like 0,0.1,0.2 or a range start:stop:count "
                             "like 0:0.4:5") from None


def temperature_grid(args):
    import numpy as np

    from hte.errors import ParameterError

    if not (args.tmin > 0 and args.tmax > args.tmin):
        raise ParameterError(f"--tmin {args.tmin} --tmax {args.tmax}: temperatures must satisfy 0 < tmin < tmax")
    if args.points < 2:
        raise ParameterError(f"--points {args.points}: use at least 2 temperatures")
    return np.geomspace(args.tmin, args.tmax, args.points)


def _is_series_file(text: str) -> bool:
    return text.endswith(".json") and Path(text).is_file()


def load_series_document(path: str) -> dict:
    from hte.errors import InputError

    try:
        doc = json.loads(Path(path).read_text())
    except (OSError, json.JSONDecodeError) as exc:
        raise InputError(f"{path}: cannot read the series JSON ({exc}); write one with `hte series ... --json FILE`") from None
    if not isinstance(doc, dict) or "series" not in doc:
        raise InputError(f"{path}: no \"series\" block; is this the output of `hte series --json`?")
    return doc


# ------------------------------------------------------------------------------------------------ routes
def _series_document(args) -> dict:
    if _is_series_file(args.lattice):
        return load_series_document(args.lattice)
    from hte.cli.series import series_from_args

    return series_from_args(args, default_order=12).to_json_dict()


def _entropy_options(args):
    """(list of e0, list of low-T class strings) — scans when a range is given."""
    from hte.errors import ParameterError

    if args.e0 is None or args.low_t is None:
        raise ParameterError("the entropy method needs --e0 E (ground-state energy per site) and --low-t "
                             "gapped:DELTA or power:ALPHA")
    e0_values = parse_values(args.e0, "--e0") if ":" in args.e0 else [float(args.e0)]
    kind, _, rest = args.low_t.partition(":")
    if kind not in ("gapped", "power") or not rest:
        raise ParameterError(f"--low-t {args.low_t!r}: write gapped:DELTA (gap in units of J) or power:ALPHA "
                             "(C ~ T^ALPHA, ALPHA > 0)")
    values = parse_values(rest, "--low-t") if ":" in rest else [float(rest)]
    return e0_values, [f"{kind}:{v:g}" for v in values]


def _one_route(method, doc, args, grid, label=None):
    from hte.curves import curves_from_series

    if method == "nlce":
        return _nlce_route(args, grid, label)
    if method == "entropy":
        e0_values, classes = _entropy_options(args)
        return curves_from_series(doc, "entropy", temperatures=grid, e0=e0_values[0], low_t=classes[0],
                                  chi_low_t=args.chi_low_t, tolerance=args.tolerance,
                                  label=label or f"entropy e0={e0_values[0]:g} {classes[0]}")
    transform = _transform(args) if method == "pade" else None
    return curves_from_series(doc, method, temperatures=grid, tolerance=args.tolerance, transform=transform,
                              label=label or method)


def _transform(args):
    """The Padé variable asked for with --variable (hte.pade.VariableTransform)."""
    from fractions import Fraction

    from hte.errors import ParameterError
    from hte.pade import VariableTransform

    kind, _, a = args.variable.partition(":")
    try:
        return VariableTransform(kind, Fraction(a) if a else 1)
    except (ValueError, ZeroDivisionError):
        raise ParameterError(f"--variable {args.variable!r}: write beta, euler:A, exp:A or square, A > 0 "
                             "(e.g. --variable euler:0.5)") from None


def _nlce_route(args, grid, label=None):
    from hte.clusters import default_workers
    from hte.errors import ParameterError
    from hte.lattice_file import load_lattice
    from hte.models import build_model
    from hte.cli.series import parse_assignments
    from hte.nlce import nlce_curves

    if _is_series_file(args.lattice):
        raise ParameterError("--method nlce needs a lattice (it diagonalises the clusters), not a series file")
    spec = load_lattice(args.lattice)
    spin = parse_assignments(args.spin, "--spin") if args.spin and "=" in args.spin else args.spin
    model = build_model(spec, kind=args.model, spin=spin, couplings=parse_assignments(args.couplings, "--couplings"),
                        anisotropy=parse_assignments(args.anisotropy, "--anisotropy"),
                        occupation=parse_assignments(args.occupation, "--occupation"))
    result = nlce_curves(spec, model, args.max_bonds or 8, grid, per=args.per,
                         workers=args.workers or default_workers(), tolerance=args.tolerance)
    curveset = result.to_curve_set()
    curveset.label = label or "nlce"
    curveset.metadata["nlce_candidates"] = {
        name: {kind: [float(v) for v in values] for kind, values in candidates.items()}
        for name, candidates in result.estimates.items()}
    return curveset


def _disagreements(curvesets) -> list[str]:
    """Temperature ranges where two routes' bands do not overlap (both above their T_conv)."""
    import numpy as np

    notes = []
    for i in range(len(curvesets)):
        for j in range(i + 1, len(curvesets)):
            a, b = curvesets[i], curvesets[j]
            for name in set(a.curves) & set(b.curves):
                ba, bb = a.curves[name], b.curves[name]
                t = a.temperatures
                if len(t) != len(b.temperatures) or not np.allclose(t, b.temperatures):
                    continue
                low = max(a.T_conv.get(name) or np.inf, b.T_conv.get(name) or np.inf)
                apart = (ba.lower > bb.upper) | (bb.lower > ba.upper)
                flagged = apart & (t >= low)
                if flagged.any():
                    notes.append(f"{name}: {a.label} and {b.label} disagree beyond their bands at "
                                 f"T = {t[flagged].min():.3g} .. {t[flagged].max():.3g}")
                below = apart & (t < low)
                if below.any():
                    notes.append(f"{name}: {a.label} and {b.label} differ below their convergence range "
                                 f"(T < {low:.3g}); these are estimates")
    return notes


# ------------------------------------------------------------------------------------------------ scans
def _scan(args, grid):
    """One symbolic series, curves for every value of the scanned parameter."""
    import sympy

    from hte.cli.series import parse_assignments, series_from_args
    from hte.curves import curves_from_series
    from hte.errors import ParameterError
    from hte.lattice_file import load_lattice

    if _is_series_file(args.lattice):
        raise ParameterError("--scan needs a lattice (it builds one symbolic series), not a series file")
    name, sep, values_text = args.scan.partition("=")
    name = name.strip()
    if not sep:
        raise ParameterError(f"--scan {args.scan!r}: write NAME=VALUES, e.g. --scan J2=0,0.1,0.2")
    values = parse_values(values_text, "--scan")
    spec = load_lattice(args.lattice)
    if name.startswith("D:"):
        return _anisotropy_scan(args, grid, spec, name[2:], values)
    couplings = parse_assignments(args.couplings, "--couplings")
    occupation = parse_assignments(args.occupation, "--occupation")
    symbol = sympy.Symbol(f"scan_{name}")
    if name in spec.labels:
        couplings[name] = str(symbol)
        for label in spec.labels:
            couplings.setdefault(label, str(spec.couplings.get(label, 0)))
    elif name in spec.site_classes:
        occupation[name] = str(symbol)
        for label in spec.labels:
            couplings.setdefault(label, str(spec.couplings.get(label, 0)))
    else:
        raise ParameterError(f"--scan {name}: not a coupling label ({', '.join(spec.labels)}) nor a site class "
                             f"({', '.join(spec.site_classes)}) of {spec.name}")
    args.couplings = ",".join(f"{k}={v}" for k, v in couplings.items())
    args.occupation = ",".join(f"{k}={v}" for k, v in occupation.items()) or None
    args.symbolic = True
    series = series_from_args(args, default_order=10)
    results = []
    for value in values:
        exact = sympy.Rational(str(value))
        numeric = {}
        for key, coefs in series.coefficients.items():
            numeric[key] = [str(sympy.nsimplify(sympy.sympify(c).subs(symbol, exact))) for c in coefs]
        lnz0 = sympy.sympify(series.lnz0).subs(symbol, exact)
        for key in ("lnZ", "S"):
            numeric[key][0] = repr(float(lnz0))
        doc = {"lattice": spec.name, "per": args.per, "series": numeric}
        method = "pade" if args.method in ("compare", "nlce") else args.method
        if method == "entropy":
            e0_values, classes = _entropy_options(args)
            cs = curves_from_series(doc, "entropy", temperatures=grid, e0=e0_values[0], low_t=classes[0],
                                    chi_low_t=args.chi_low_t, tolerance=args.tolerance, label=f"{name} = {value:g}")
        else:
            cs = curves_from_series(doc, method, temperatures=grid, tolerance=args.tolerance,
                                    label=f"{name} = {value:g}")
        cs.metadata["scan"] = {name: value}
        results.append(cs)
    return results


def _anisotropy_scan(args, grid, spec, site_class, values):
    """Scan the single-ion anisotropy D of one site class: one numeric series per value (D is not symbolic)."""
    from hte.cli.series import parse_assignments, series_from_args
    from hte.errors import ParameterError

    if site_class not in spec.site_classes:
        raise ParameterError(f"--scan D:{site_class}: unknown site class; the lattice has {', '.join(spec.site_classes)}")
    base = parse_assignments(args.anisotropy, "--anisotropy")
    results = []
    for value in values:
        args.anisotropy = ",".join(f"{k}={v}" for k, v in dict(base, **{site_class: repr(value)}).items())
        doc = series_from_args(args, default_order=10).to_json_dict()
        cs = _one_route("pade" if args.method in ("compare", "nlce") else args.method, doc, args, grid,
                        label=f"D({site_class}) = {value:g}")
        cs.metadata["scan"] = {f"D:{site_class}": value}
        results.append(cs)
    return results


def _entropy_scan_table(doc, args, grid) -> int:
    from hte.curves import read_series
    from hte.entropy_method import entropy_scan

    e0_values, classes = _entropy_options(args)
    coefficients, _ = read_series(doc)
    points = entropy_scan(coefficients["lnZ"], e0_values, classes, grid, tolerance=args.tolerance)
    print("# entropy-method scan: accepted approximants and their spread for each (e0, low-T class)")
    for p in points:
        print("  " + "  ".join(f"{k}={v}" for k, v in p.to_json_dict().items()) if hasattr(p, "to_json_dict")
              else f"  {p}")
    if args.json:
        from hte.series import write_json_atomic

        write_json_atomic({"lattice": doc.get("lattice"), "method": "entropy-scan",
                           "scan": [p.to_json_dict() if hasattr(p, "to_json_dict") else str(p) for p in points]},
                          args.json)
    return 0


# ------------------------------------------------------------------------------------------------ output
def _write_outputs(curvesets, args, notes) -> None:
    from hte.plotting import plot_curves
    from hte.series import write_json_atomic

    if args.json:
        if len(curvesets) == 1:
            doc = curvesets[0].to_json_dict()
        else:
            doc = {"method": args.method, "sets": [dict(cs.to_json_dict(), label=cs.label,
                                                        **({"scan": cs.metadata["scan"]} if "scan" in cs.metadata else {}))
                                                   for cs in curvesets]}
        if notes:
            doc["disagreements"] = notes
        for cs in curvesets:
            if "nlce_candidates" in cs.metadata:
                target = doc if len(curvesets) == 1 else next(d for d in doc["sets"] if d["label"] == cs.label)
                target["nlce_candidates"] = cs.metadata["nlce_candidates"]
        write_json_atomic(doc, args.json)
    if args.csv:
        if len(curvesets) == 1:
            curvesets[0].to_csv(args.csv)
        else:
            _write_family_csv(curvesets, args.csv)
    if args.png:
        plot_curves(curvesets, args.png)


def _write_family_csv(curvesets, path) -> None:
    import csv

    from hte.atomic import write_text_atomically

    header = ["T"]
    columns = []
    for cs in curvesets:
        tag = (cs.label or cs.method).replace(" ", "")
        for name, band in cs.curves.items():
            for suffix, values in (("", band.estimate), ("_lower", band.lower), ("_upper", band.upper)):
                header.append(f"{name}{suffix}[{tag}]")
                columns.append(values)
    rows = [[repr(float(t))] + [repr(float(c[i])) for c in columns] for i, t in enumerate(curvesets[0].temperatures)]
    write_text_atomically(path, lambda handle: csv.writer(handle).writerows([header] + rows))


def _summary(curvesets) -> None:
    for cs in curvesets:
        conv = ", ".join(f"{k} {v:.3g}" if v is not None else f"{k} none" for k, v in cs.T_conv.items())
        print(f"# {cs.label or cs.method}: T_conv ({cs.tolerance:.0%} band): {conv}")
        if cs.critical:
            c = cs.critical
            print(f"#   critical point: T_c = {c.get('T_c'):.5g} ± {c.get('T_c_err'):.2g}, "
                  f"gamma = {c.get('gamma'):.4g} ± {c.get('gamma_err'):.2g}")
        for w in cs.warnings:
            print(f"#   warning: {w}")
        if cs.fallback:
            print(f"#   no approximant survived for {', '.join(cs.fallback)}: the raw truncated series is shown")
        if "nlce_candidates" in cs.metadata:
            t = cs.temperatures
            picks = sorted({0, len(t) // 4, len(t) // 2, len(t) - 1})
            for name, candidates in cs.metadata["nlce_candidates"].items():
                for kind, values in candidates.items():
                    shown = ", ".join(f"T={t[i]:.3g}: {values[i]:.6g}" for i in picks)
                    print(f"#   nlce {name} {kind:>13}: {shown}")
    first = curvesets[0]
    names = [n for n in ("chi", "C", "S") if n in first.curves]
    print(f"{'T':>10} " + " ".join(f"{n + ' [' + (cs.label or cs.method) + ']':>28}" for cs in curvesets
                                  for n in names if n in cs.curves))
    step = max(1, len(first.temperatures) // 12)
    for i in range(0, len(first.temperatures), step):
        cells = []
        for cs in curvesets:
            for n in names:
                if n in cs.curves:
                    b = cs.curves[n]
                    cells.append(f"{b.estimate[i]:>12.5g} [{b.lower[i]:.4g},{b.upper[i]:.4g}]".rjust(28))
        print(f"{first.temperatures[i]:>10.4g} " + " ".join(cells))


def run(args) -> int:
    grid = temperature_grid(args)
    notes: list[str] = []
    if args.scan:
        curvesets = _scan(args, grid)
    else:
        doc = None if args.method == "nlce" else _series_document(args)
        if args.method == "entropy" and (":" in (args.e0 or "") or (args.low_t or "").count(":") > 1):
            return _entropy_scan_table(doc, args, grid)
        if args.method == "compare":
            curvesets = [_one_route("pade", doc, args, grid)]
            if args.e0 is not None and args.low_t is not None:
                curvesets.append(_one_route("entropy", doc, args, grid))
            if not _is_series_file(args.lattice):
                curvesets.append(_one_route("nlce", doc, args, grid))
            notes = _disagreements(curvesets)
        else:
            curvesets = [_one_route(args.method, doc, args, grid)]
    _summary(curvesets)
    for note in notes:
        print(f"# {note}")
    _write_outputs(curvesets, args, notes)
    for path in (args.json, args.csv, args.png):
        if path:
            print(f"# wrote {path}", file=sys.stderr)
    return 0
