"""Figures of low-temperature curves: χ*, 1/χ*, C, C/T and S against T, with bands and T_conv marked.

One or several :class:`hte.curves.CurveSet` objects are drawn on the same panels (for comparing methods or
parameter scans), each in its own colour with a legend entry; the band is shaded, T_conv of each quantity is a
dashed vertical line in the set's colour, and the estimate is solid above T_conv and dotted below it.
Temperatures are in units of the reference coupling J, χ* = χ J/(N g² μ_B²) per site, C and S per site with
k_B = 1.
"""

from __future__ import annotations

import os

import numpy as np

from hte.atomic import write_atomically
from hte.errors import ParameterError

FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

# (panel title, quantity used, transform of (estimate, lower, upper) and T)
_PANELS = (
    ("χ*", "chi", lambda t, e, lo, hi: (e, lo, hi)),
    ("1/χ*", "chi", lambda t, e, lo, hi: (1.0 / e, 1.0 / hi, 1.0 / lo)),
    ("C", "C", lambda t, e, lo, hi: (e, lo, hi)),
    ("C/T", "C", lambda t, e, lo, hi: (e / t, lo / t, hi / t)),
    ("S", "S", lambda t, e, lo, hi: (e, lo, hi)),
    ("E", "E", lambda t, e, lo, hi: (e, lo, hi)),
)


def _legend_label(curveset, index: int) -> str:
    label = getattr(curveset, "label", None)
    if label:
        return label
    text = curveset.method
    if curveset.fallback:
        text += " (raw series: " + ", ".join(curveset.fallback) + ")"
    return text if index == 0 else f"{text} #{index + 1}"


def plot_curves(curvesets, path, *, title: str | None = None) -> None:
    """Draw one CurveSet or a list of them and write the figure to `path` (.png, .svg or .pdf).

    The file is written atomically: to a temporary file in the same folder, then renamed.

    Raises
    ------
    ParameterError
        If the suffix of `path` is not .png, .svg or .pdf, or no CurveSet is given.
    """
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    sets = list(curvesets) if isinstance(curvesets, (list, tuple)) else [curvesets]
    if not sets:
        raise ParameterError("plot_curves: nothing to draw; pass a CurveSet or a non-empty list of them")
    suffix = os.path.splitext(os.fspath(path))[1].lower()
    if suffix not in FORMATS:
        raise ParameterError(f"figure file {os.fspath(path)!r}: unknown suffix {suffix!r}; use .png, .svg or .pdf")
    figure = Figure(figsize=(12, 7.5), layout="constrained")
    axes = figure.subplots(2, 3).ravel()
    colours = [f"C{i % 10}" for i in range(len(sets))]
    for ax, (name, quantity, transform) in zip(axes, _PANELS):
        ax.set_title(name)
        ax.set_xlabel("T / J")
        drawn = False
        for index, (curveset, colour) in enumerate(zip(sets, colours)):
            band = curveset.curves.get(quantity)
            if band is None:
                continue
            t = np.asarray(curveset.temperatures, dtype=float)
            with np.errstate(divide="ignore", invalid="ignore"):
                estimate, lower, upper = transform(t, band.estimate, band.lower, band.upper)
            ax.fill_between(t, lower, upper, color=colour, alpha=0.25, linewidth=0)
            t_conv = curveset.T_conv.get(quantity)
            converged = t >= (t_conv if t_conv is not None else np.inf)
            ax.plot(t, np.where(converged, estimate, np.nan), color=colour)
            ax.plot(t, estimate, color=colour, linestyle=":", linewidth=0.8)     # also below T_conv, faint
            if t_conv is not None:
                ax.axvline(t_conv, color=colour, linestyle="--", linewidth=1)
            drawn = True
        if not drawn:
            ax.text(0.5, 0.5, "not given by this method", transform=ax.transAxes, ha="center", va="center",
                    color="0.5")
        else:
            _limit_to_converged_range(ax, sets, quantity, transform)
    handles = [Line2D([], [], color=colour, label=_legend_label(curveset, index))
               for index, (curveset, colour) in enumerate(zip(sets, colours))]
    figure.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 4), fontsize="small",
                  title="shaded: band; dashed line: T_conv (band narrower than the tolerance above it); "
                        "dotted: below T_conv",
                  title_fontsize="small")
    if title:
        figure.suptitle(title)
    _save_atomically(figure, os.fspath(path), FORMATS[suffix])


def _limit_to_converged_range(ax, sets, quantity, transform) -> None:
    """Set the y range from the estimates at T >= T_conv, so that diverging approximants below T_conv do not
    flatten the converged part of the plot (all points when T_conv is undefined)."""
    values = []
    for curveset in sets:
        band = curveset.curves.get(quantity)
        if band is None:
            continue
        t = np.asarray(curveset.temperatures, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            estimate = transform(t, band.estimate, band.lower, band.upper)[0]
        t_conv = curveset.T_conv.get(quantity)
        keep = np.isfinite(estimate) & (t >= (t_conv if t_conv is not None else -np.inf))
        values.append(estimate[keep])
    values = np.concatenate(values) if values else np.zeros(0)
    if values.size:
        low, high = float(values.min()), float(values.max())
        pad = 0.1 * (high - low) if high > low else max(abs(high), 1.0) * 0.1
        ax.set_ylim(low - pad, high + pad)


def _save_atomically(figure, path: str, fmt: str) -> None:
    write_atomically(path, lambda temporary: figure.savefig(temporary, format=fmt, dpi=120))
