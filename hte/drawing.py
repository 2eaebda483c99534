"""Drawing of a lattice patch: sites coloured by site class, bonds coloured by coupling label.

Two-dimensional positions are drawn as they are; one-dimensional ones on a line; three-dimensional ones in a
cabinet oblique projection (x to the right, z up, y receding at 60 degrees with half length).  Bonds whose
default coupling is 0 are dashed; sites whose default occupation is 0 are hollow.  The home cell is outlined.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np

from hte.errors import ParameterError
from hte.lattice import LatticeSpec

DRAWING_FORMATS = ("png", "svg", "pdf")
DEFAULT_CELLS = {1: (6,), 2: (3, 3), 3: (2, 2, 2)}
"""Cells drawn along each primitive vector when the caller does not say."""

_SITE_COLOURS = ("black", "tab:purple", "tab:brown", "tab:pink", "tab:olive", "tab:cyan")
_BOND_COLOURS = ("tab:blue", "tab:orange", "tab:green", "tab:red", "tab:cyan", "tab:olive", "tab:gray",
                 "tab:pink")
_RECEDING_ANGLE = np.radians(60.0)
_RECEDING_SCALE = 0.5


def project(points) -> np.ndarray:
    """Map Cartesian points of 1, 2 or 3 components to the drawing plane (cabinet projection for 3D)."""
    points = np.atleast_2d(np.asarray(points, dtype=float))
    if points.shape[1] == 1:
        return np.column_stack([points[:, 0], np.zeros(len(points))])
    if points.shape[1] == 2:
        return points
    x, y, z = points.T
    return np.column_stack([x + _RECEDING_SCALE * np.cos(_RECEDING_ANGLE) * y,
                            z + _RECEDING_SCALE * np.sin(_RECEDING_ANGLE) * y])


def drawing_format(path: Path) -> str:
    """The file format ("png", "svg" or "pdf") named by the suffix of `path`; ParameterError otherwise."""
    suffix = path.suffix.lower().lstrip(".")
    if suffix not in DRAWING_FORMATS:
        raise ParameterError(f"{path}: cannot tell the drawing format from the suffix "
                             f'"{path.suffix}"; use a file name ending in .png, .svg or .pdf')
    return suffix


def _cell_counts(spec: LatticeSpec, cells) -> tuple[int, ...]:
    if cells is None:
        return DEFAULT_CELLS[spec.dimension]
    counts = (cells,) * spec.dimension if isinstance(cells, int) else tuple(cells)
    if len(counts) != spec.dimension or any(isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= 12
                                            for n in counts):
        raise ParameterError(f"cells = {cells!r}: give one integer between 1 and 12, or {spec.dimension} of them "
                             f"(cells along each primitive vector)")
    return counts


def draw_lattice(spec: LatticeSpec, path, cells=None) -> Path:
    """Draw a patch of `spec` into the file `path`: PNG, SVG or PDF according to its suffix.

    Parameters
    ----------
    spec : LatticeSpec
        The lattice; positions in the length unit of its file.
    path : str or os.PathLike
        Output file, written directly (callers wanting an atomic write draw into a temporary file).
    cells : int or sequence of int, optional
        Number of unit cells along each primitive vector (default: 6 for chains, 3 x 3 in 2D, 2 x 2 x 2 in 3D).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    ParameterError
        If the suffix is not .png, .svg or .pdf, or `cells` is not 1..12 cells per direction.
    """
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    path = Path(path)
    file_format = drawing_format(path)
    counts = _cell_counts(spec, cells)
    patch = list(itertools.product(*(range(n) for n in counts)))
    in_patch = set(patch)

    figure = Figure(figsize=(7.0, 6.0), layout="constrained")
    axes = figure.add_subplot()
    axes.set_aspect("equal")
    axes.set_axis_off()
    axes.set_title(f"{spec.name} ({' x '.join(map(str, counts))} cells)")
    _outline_home_cell(axes, spec)

    legend = []
    for k, label in enumerate(spec.labels):
        colour = _BOND_COLOURS[k % len(_BOND_COLOURS)]
        style = "--" if spec.couplings.get(label, 1) == 0 else "-"
        segments = [
            project([spec.cartesian(b.source, cell), spec.cartesian(b.target, np.add(cell, b.offset))])
            for b in spec.bonds if b.label == label
            for cell in patch if tuple(np.add(cell, b.offset)) in in_patch
        ]
        for segment in segments:
            axes.plot(segment[:, 0], segment[:, 1], style, color=colour, linewidth=1.8, zorder=1)
        legend.append(Line2D([], [], color=colour, linestyle=style, linewidth=1.8,
                             label=f"{label} = {spec.couplings.get(label, '')}"))

    for k, site_class in enumerate(spec.site_classes):
        colour = _SITE_COLOURS[k % len(_SITE_COLOURS)]
        hollow = spec.occupation.get(site_class, 1) == 0
        points = project([spec.cartesian(i, cell) for i in spec.sites_of_class(site_class) for cell in patch])
        axes.scatter(points[:, 0], points[:, 1], s=42, zorder=2, edgecolors=colour, linewidths=1.5,
                     facecolors="white" if hollow else colour)
        legend.append(Line2D([], [], marker="o", linestyle="", markeredgecolor=colour, markersize=7,
                             markerfacecolor="white" if hollow else colour,
                             label=f"{site_class} (occupation {spec.occupation.get(site_class, 1)})"))
    axes.legend(handles=legend, loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False)
    figure.savefig(path, format=file_format, dpi=120, bbox_inches="tight")
    return path


def _outline_home_cell(axes, spec: LatticeSpec):
    """Thin grey edges of the unit cell at the origin."""
    vectors = np.asarray(spec.vectors, dtype=float)
    corners = list(itertools.product((0, 1), repeat=spec.dimension))
    for a, b in itertools.combinations(corners, 2):
        if sum(x != y for x, y in zip(a, b)) == 1:
            ends = project([np.asarray(a) @ vectors, np.asarray(b) @ vectors])
            axes.plot(ends[:, 0], ends[:, 1], color="0.8", linewidth=0.8, zorder=0)
