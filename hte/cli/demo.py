"""Run the whole job on the invented demo compound: lattice, series, Curie-Weiss, curves, joint fit, report.

The compound ("demokagomite", a layered kagome magnet) is invented; its data in data/demo/ are synthetic,
made by scripts/make_demo_data.py from stated true parameters plus noise.  Figures, CSV tables and the JSON
report go to DIR; the recovered parameters are printed beside the true ones.
"""

from __future__ import annotations


def add_arguments(parser) -> None:
    parser.add_argument("--out", metavar="DIR", default="demo-output", help="output folder (default demo-output)")
    parser.add_argument("--order", type=int, default=None,
                        help="series order (default: all orders of the shipped series, 7); lower is faster")
    parser.add_argument("--no-tables", action="store_true",
                        help="compute the series instead of loading the shipped one (minutes; uses the weight cache)")


def run(args) -> int:
    from hte.demo import run_demo
    from hte.errors import ParameterError

    if args.order is not None and args.order < 3:
        raise ParameterError(f"--order {args.order}: the demo needs at least order 3 for Padé approximants")
    run_demo(args.out, order=args.order, use_table=not args.no_tables)
    return 0
