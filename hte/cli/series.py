"""Exact high-temperature series of ln Z, T*chi, M4, E, C and S for a spin model on a lattice.

Prints a readable table; --json FILE writes the CONVENTIONS.md document atomically.  Answers from a shipped
table in tables/ when one covers the request (--no-tables to compute afresh); cluster series are kept in the
weight cache ($HTE_CACHE_DIR or the user cache folder) so an interrupted run resumes.
"""

from __future__ import annotations

import os
import sys


def parse_assignments(text: str | None, option: str) -> dict:
    """Parse "A=1,B=0.2" into {"A": "1", "B": "0.2"}; ParameterError on malformed items."""
    from hte.errors import ParameterError

    if not text:
        return {}
    out = {}
    for item in text.split(","):
        name, sep, value = item.partition("=")
        if not sep or not name.strip() or not value.strip():
            raise ParameterError(f"{option} {text!r}: item {item!r} is not NAME=VALUE (example: {option} J1=1,J2=0.2)")
        out[name.strip()] = value.strip()
    return out


def add_series_arguments(parser) -> None:
    """Options shared by ``hte series`` and ``hte curves`` (model and lattice choice)."""
    parser.add_argument("lattice", metavar="LATTICE", help="built-in lattice name or path to a lattice file")
    parser.add_argument("--order", type=int, default=None, help="highest power of beta = 1/T")
    parser.add_argument("--spin", default=None,
                        help="spin for every site class (1/2, 1, 3/2, 2, 5/2) or CLASS=S,... (default: the file's)")
    parser.add_argument("--couplings", default=None,
                        help="LABEL=VALUE,... ; with --model xxz also LABEL.xy=..,LABEL.z=.. ; symbols in --symbolic")
    parser.add_argument("--occupation", default=None, help="site occupation probabilities CLASS=P,... (dilution)")
    parser.add_argument("--anisotropy", default=None, help="single-ion D per site class CLASS=D,... (S >= 1)")
    parser.add_argument("--model", default="heisenberg", choices=("heisenberg", "xxz"))
    parser.add_argument("--per", default="site", choices=("site", "cell", "magnetic"),
                        help="normalisation: per lattice site (default), per unit cell, per occupied site")
    parser.add_argument("--symbolic", action="store_true",
                        help="keep couplings (and symbolic occupations) as symbols: polynomial coefficients")
    parser.add_argument("--workers", type=int, default=None, help="processes to use (default: all cores)")
    parser.add_argument("--scheduler", default=None, metavar="ADDRESS",
                        help="run the cluster series on a Dask distributed scheduler (e.g. tcp://head:8786)")
    parser.add_argument("--lnz-only", action="store_true",
                        help="compute ln Z (and E, C, S) only: graphs whose bridges make them vanish are skipped, "
                             "much faster at high order")
    parser.add_argument("--no-m4", action="store_true",
                        help="compute ln Z and T*chi (and E, C, S) but not M4 (the h^4 term): graphs whose bridges "
                             "make both vanish are skipped, faster at high order")
    parser.add_argument("--no-tables", action="store_true", help="ignore the shipped tables in tables/")
    parser.add_argument("--no-cache", action="store_true", help="do not read or write the weight cache")
    parser.add_argument("--force", action="store_true",
                        help="run even when the estimate says it will not fit in memory")


def add_arguments(parser) -> None:
    add_series_arguments(parser)
    parser.add_argument("--json", metavar="FILE", default=None, help="write the series as JSON (atomically)")


def series_from_args(args, *, default_order: int | None = None):
    """Build the HTSeries an argparse namespace asks for (from a table when possible)."""
    from hte.clusters import default_workers
    from hte.errors import ParameterError
    from hte.lattice_file import load_lattice
    from hte.models import build_model
    from hte.series import HTSeries, normalise, quantities_for
    from hte.tables import find_table

    order = args.order if args.order is not None else default_order
    if order is None:
        raise ParameterError("--order is required (the highest power of beta, e.g. --order 10)")
    if order < 1:
        raise ParameterError(f"--order {order}: the order must be at least 1")
    spec = load_lattice(args.lattice)
    spin = args.spin
    if spin and "=" in spin:
        spin = parse_assignments(spin, "--spin")
    model = build_model(spec, kind=args.model, spin=spin, couplings=parse_assignments(args.couplings, "--couplings"),
                        anisotropy=parse_assignments(args.anisotropy, "--anisotropy"),
                        occupation=parse_assignments(args.occupation, "--occupation"), symbolic=args.symbolic)
    if not args.no_tables:
        found = find_table(spec, model, order)
        if found is not None:
            doc, path = found
            print(f"# from table {os.path.relpath(path)} (order {doc['order']})", file=sys.stderr)
            return HTSeries.from_table(doc, order, lattice=spec, model=model, per=args.per)
    workers = args.workers or default_workers()
    if workers < 1:
        raise ParameterError(f"--workers {workers}: use at least 1")
    quantities = quantities_for(lnz_only=args.lnz_only, m4=not args.no_m4)
    if _worth_estimating(model, order):
        from hte.estimate import check_memory, estimate_run

        from hte.expansion import star_graphs_suffice

        active = spec.without_labels([l for l, c in model.couplings.items() if c.is_zero])
        active = active.without_classes([c for c, p in model.occupation.items() if p == 0])
        estimate = estimate_run(active, model, order, workers, quantities=quantities,
                                biconnected_only=star_graphs_suffice(active, model, quantities))
        print(f"# {estimate.describe()}", file=sys.stderr)
        if not args.force:
            check_memory(estimate, workers)
    cache = None
    if not args.no_cache:
        from hte.cache import WeightCache

        cache = WeightCache()
    from hte.expansion import expand_lattice

    try:
        ls = expand_lattice(spec, model, order, cache=cache, workers=workers, progress=sys.stderr.isatty(),
                            scheduler=args.scheduler, quantities=quantities)
    finally:
        if cache is not None:
            cache.close()
    return normalise(ls, lattice=spec, model=model, per=args.per)


def _worth_estimating(model, order: int) -> bool:
    """Long runs get a time and memory estimate first (it costs a few seconds itself)."""
    biggest = max(model.spin.values())
    return order >= 11 or (biggest >= 1 and order >= 8) or (biggest >= 2 and order >= 6)


def run(args) -> int:
    from hte.series import write_json_atomic

    series = series_from_args(args)
    print(series.table())
    if args.json:
        write_json_atomic(series.to_json_dict(), args.json)
        print(f"# wrote {args.json}", file=sys.stderr)
    return 0
