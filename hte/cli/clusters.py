"""Connected-cluster statistics of a lattice: clusters per site, graph classes and lattice constants.

Prints a table (n, clusters per site, graph classes, largest site count, time); --json FILE writes the
document of CONVENTIONS.md with every graph class, its lattice constant per site and per cell, its
occupation monomial and (with --subgraphs) the embedding counts of its connected subgraph classes.
"""

from __future__ import annotations

import sys
from fractions import Fraction


def add_arguments(parser) -> None:
    parser.add_argument("lattice", metavar="LATTICE", help="built-in lattice name or path to a lattice file")
    parser.add_argument("--max-bonds", type=int, required=True, help="largest cluster size in bonds")
    parser.add_argument("--couplings", default=None,
                        help="LABEL=VALUE,... ; labels set to 0 are dropped before enumeration")
    parser.add_argument("--occupation", default=None, help="CLASS=P,... ; classes with P = 0 are dropped")
    parser.add_argument("--workers", type=int, default=None, help="processes (default: all cores)")
    parser.add_argument("--subgraphs", action="store_true",
                        help="also list the connected subgraph classes of each class in the JSON")
    parser.add_argument("--json", metavar="FILE", default=None, help="write the census as JSON (atomically)")


def _as_json_number(value: Fraction):
    return int(value) if value.denominator == 1 else str(value)


def run(args) -> int:
    from hte.cli.series import parse_assignments
    from hte.clusters import default_workers, enumerate_clusters, subgraph_counts
    from hte.errors import ParameterError
    from hte.lattice_file import load_lattice
    from hte.models import parse_exact
    from hte.series import write_json_atomic

    spec = load_lattice(args.lattice)
    couplings = parse_assignments(args.couplings, "--couplings")
    for label in couplings:
        if label not in spec.labels:
            raise ParameterError(f"--couplings: unknown label {label!r}; the lattice has {', '.join(spec.labels)}")
    values = {l: parse_exact(couplings.get(l, spec.couplings.get(l, 0)), f"coupling {l}") for l in spec.labels}
    spec = spec.without_labels([l for l, v in values.items() if v == 0])
    occupation = parse_assignments(args.occupation, "--occupation")
    for c in occupation:
        if c not in spec.site_classes:
            raise ParameterError(f"--occupation: unknown site class {c!r}; the lattice has {', '.join(spec.site_classes)}")
    dropped = [c for c in spec.site_classes
               if parse_exact(occupation.get(c, spec.occupation.get(c, 1)), f"occupation {c}") == 0]
    spec = spec.without_classes(dropped)
    workers = args.workers or default_workers()

    def show(message):
        if sys.stderr.isatty():
            print(f"\r  enumerating {spec.name} to {args.max_bonds} bonds: {message} ", end="", file=sys.stderr,
                  flush=True)

    census = enumerate_clusters(spec, args.max_bonds, workers=workers, progress=show)
    if sys.stderr.isatty():
        print(file=sys.stderr)
    print(f"# {spec.name}: {spec.n_sites} sites per cell; labels {', '.join(spec.labels)}; "
          f"{census.seconds:.2f} s with {workers} worker(s)")
    print(f"{'n':>3} {'clusters/site':>18} {'graph classes':>14} {'max sites':>10}")
    per_site = []
    for n in range(1, args.max_bonds + 1):
        value = census.per_site(census.clusters_per_cell[n])
        per_site.append(_as_json_number(value))
        classes = census.classes_with_bonds(n)
        largest = max((c.n_sites for c in classes), default=0)
        print(f"{n:>3} {str(value):>18} {len(classes):>14} {largest:>10}")
    if args.json:
        doc = {
            "lattice": spec.name,
            "max_bonds": args.max_bonds,
            "sites_per_cell": spec.n_sites,
            "site_classes": list(spec.site_classes),
            "labels": list(spec.labels),
            "bond_clusters_per_site": per_site,
            "graph_classes": len(census.classes),
            "classes": [],
        }
        for gc in census.classes:
            entry = {
                "key": gc.key,
                "bonds": gc.n_bonds,
                "sites": gc.n_sites,
                "per_cell": gc.per_cell,
                "per_site": _as_json_number(census.per_site(gc.per_cell)),
                "occupation_monomial": census.occupation_monomial(gc),
            }
            if args.subgraphs:
                entry["subgraphs"] = subgraph_counts(gc.graph)
            doc["classes"].append(entry)
        write_json_atomic(doc, args.json)
        print(f"# wrote {args.json}", file=sys.stderr)
    return 0
