"""Summarise a lattice (sites, bonds, coordination, defaults) and optionally draw a patch of it.

LATTICE is a built-in name (such as chain, square, kagome or pyrochlore) or the path of a lattice file.  The summary lists the sites per
unit cell by site class, the bonds per cell by coupling label with their lengths (in the length unit of the
file), the coordination number of each site class for each label, and the default couplings (the first label
is the energy unit), occupations and spins.
"""

from __future__ import annotations

from pathlib import Path


def add_arguments(parser):
    parser.add_argument("lattice", metavar="LATTICE",
                        help="built-in lattice name (chain, square, kagome, ...; a wrong name lists them all) or "
                             "path to a lattice file")
    parser.add_argument("--png", metavar="FILE",
                        help="also draw a patch of the lattice into FILE (.png, .svg or .pdf)")


def run(args) -> int:
    from hte.drawing import drawing_format
    from hte.lattice_file import load_lattice

    if args.png:
        drawing_format(Path(args.png))
    spec = load_lattice(args.lattice)
    print(summarise(spec))
    if args.png:
        path = _draw_atomically(spec, Path(args.png))
        print(f"\ndrawing written to {path}")
    return 0


def summarise(spec) -> str:
    """The text printed by ``hte lattice``: geometry, bonds, coordination and defaults of a LatticeSpec."""
    import textwrap

    import numpy as np

    summary = textwrap.fill(spec.summary, width=100, initial_indent=" " * 12, subsequent_indent=" " * 12)
    lines = [
        f"lattice     {spec.name}",
        f"file        {spec.path}",
        f"sha256      {spec.sha256}",
        f"dimension   {spec.dimension}",
        f"summary     {summary.strip()}",
        f"source      {spec.source or '-'}",
        "",
        f"sites per cell: {spec.n_sites}",
        _table(["class", "sites", "names", "spin", "occupation"],
               [[c, len(spec.sites_of_class(c)), " ".join(spec.sites[i].name for i in spec.sites_of_class(c)),
                 spec.spin[c], spec.occupation[c]] for c in spec.site_classes]),
        "",
        f"bonds per cell: {len(spec.bonds)}  (first label = reference coupling, the energy unit)",
    ]
    counts = spec.bonds_per_cell()
    rows = []
    for label in spec.labels:
        lengths = sorted({round(float(np.linalg.norm(spec.bond_vector(b))), 9) for b in spec.bonds if b.label == label})
        rows.append([label, counts[label], ", ".join(f"{x:.6g}" for x in lengths), spec.couplings[label]])
    lines.append(_table(["label", "bonds", "length", "default coupling"], rows))
    lines += ["", "coordination (bonds of each label per site; a range where sites of a class differ)"]
    per_site = spec.site_coordination()
    rows = []
    for site_class in spec.site_classes:
        row = [site_class]
        for label in spec.labels:
            values = sorted({per_site[i].get(label, 0) for i in spec.sites_of_class(site_class)})
            row.append(str(values[0]) if len(values) == 1 else f"{values[0]}-{values[-1]}")
        rows.append(row)
    lines.append(_table(["class", *spec.labels], rows))
    return "\n".join(lines)


def _table(header, rows) -> str:
    cells = [[str(x) for x in header]] + [[str(x) for x in row] for row in rows]
    widths = [max(len(row[k]) for row in cells) for k in range(len(header))]
    return "\n".join("  " + "  ".join(x.ljust(w) for x, w in zip(row, widths)).rstrip() for row in cells)


def _draw_atomically(spec, path: Path) -> Path:
    """Draw into a temporary file in the target folder, then rename it onto `path`."""
    from hte.atomic import write_atomically
    from hte.drawing import draw_lattice
    from hte.errors import ParameterError

    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise ParameterError(f"--png {path}: the folder {folder} does not exist; create it or choose another path")
    write_atomically(path, lambda temporary: draw_lattice(spec, temporary))
    return path
