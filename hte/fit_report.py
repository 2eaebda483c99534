"""Outputs of a fit: the JSON report, the CSV of model and residuals, and the figure; written atomically.

The figure shows each data set with the model and its band (heat capacity with the fitted lattice part taken
off), the normalised residuals below, and the correlation matrix of the free parameters.  All files are
written to temporary files first and renamed only when every one of them succeeded.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path


def write_outputs(result, report: dict, *, json_path=None, png_path=None, csv_path=None) -> None:
    """Write the report, figure and table to temporary files, then rename them all; nothing on failure."""
    import json

    jobs = []
    if json_path:
        jobs.append((json_path, lambda path: Path(path).write_text(json.dumps(report, indent=1, default=_json_default)
                                                                   + "\n")))
    if csv_path:
        jobs.append((csv_path, lambda path: write_csv(result, path)))
    if png_path:
        jobs.append((png_path, lambda path: plot_fit(result, path)))
    temporaries = []
    try:
        for target, write in jobs:
            folder = os.path.dirname(os.path.abspath(target))
            handle, temporary = tempfile.mkstemp(dir=folder, prefix=".tmp-", suffix=Path(target).suffix)
            os.close(handle)
            temporaries.append((temporary, target))
            write(temporary)
        for temporary, target in temporaries:
            os.replace(temporary, target)
            print(f"# wrote {target}", file=sys.stderr)
    finally:
        for temporary, _ in temporaries:
            if os.path.exists(temporary):
                os.remove(temporary)


def _json_default(value):
    import numpy as np

    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def write_csv(result, path) -> None:
    """One row per data point: file, line, quantity, T, B, data, sigma, model with band, residual, used."""
    import csv

    import numpy as np

    header = ["file", "line", "quantity", "T_K", "B_T", "data", "sigma", "model", "model_lower", "model_upper",
              "normalised_residual", "used"]
    rows = []
    for d in result.datasets:
        m = d.measurement
        model, lower, upper = result.model_band(m.quantity, m.temperature, d.fields)
        residual = (m.value - model) / d.sigma
        used = d.used if d.used is not None else np.zeros(len(m), dtype=bool)
        for i in range(len(m)):
            rows.append([m.source, int(m.lines[i]), m.quantity, repr(float(m.temperature[i])), repr(float(d.fields[i])),
                         repr(float(m.value[i])), repr(float(d.sigma[i])), repr(float(model[i])),
                         repr(float(lower[i])), repr(float(upper[i])), repr(float(residual[i])), int(used[i])])
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)


_LABELS = {"chi": ("chi (emu/mol)", "T (K)"), "C": ("C - C_lattice (fitted), J/(mol K)", "T (K)"),
           "M": ("M (mu_B/f.u.)", None)}


def plot_fit(result, path) -> None:
    """Data with the model and its band (above), normalised residuals (below), one column per quantity, and the
    correlation matrix of the free parameters.  Fitted points are filled, the others open; the model is solid
    inside the window and dashed below it.  Heat capacity is drawn with the fitted lattice part subtracted from
    data and model alike, so that the magnetic part (and impurity Schottky) can be seen."""
    import numpy as np
    from matplotlib.figure import Figure

    quantities = [q for q in ("chi", "C", "M") if any(d.quantity == q for d in result.datasets)]
    columns = len(quantities) + 1
    figure = Figure(figsize=(4.6 * columns, 7.5), layout="constrained")
    grid = figure.add_gridspec(2, columns, height_ratios=(3, 1.3))
    for column, quantity in enumerate(quantities):
        top = figure.add_subplot(grid[0, column])
        bottom = figure.add_subplot(grid[1, column], sharex=top)
        for index, d in enumerate([d for d in result.datasets if d.quantity == quantity]):
            _plot_dataset(result, d, top, bottom, f"C{index % 10}")
        ylabel, xlabel = _LABELS[quantity]
        top.set_ylabel(ylabel)
        bottom.set_ylabel("(data - model)/sigma")
        bottom.set_xlabel(xlabel or ("B (T)" if _is_field_sweep(result.datasets) else "T (K)"))
        bottom.axhline(0.0, color="k", lw=0.6)
        top.legend(fontsize=7)
    axes = figure.add_subplot(grid[:, -1])
    correlation = result.correlations()
    image = axes.imshow(np.nan_to_num(correlation), vmin=-1, vmax=1, cmap="RdBu_r")
    axes.set_xticks(range(len(result.free)), result.free, rotation=60, fontsize=7)
    axes.set_yticks(range(len(result.free)), result.free, fontsize=7)
    for i in range(len(result.free)):
        for j in range(len(result.free)):
            axes.text(j, i, f"{correlation[i, j]:+.2f}", ha="center", va="center", fontsize=6)
    axes.set_title("correlations of the free parameters", fontsize=9)
    figure.colorbar(image, ax=axes, shrink=0.6)
    report = result.report()
    figure.suptitle(f"{report['lattice']}: reduced chi^2 = {report['reduced_chi2']:.3g}, "
                    f"{report['points_used']} points at T >= {report['T_min_used']:.3g} K; band: spread of the "
                    "Padé approximants", fontsize=10)
    suffix = Path(path).suffix.lower().lstrip(".") or "png"
    figure.savefig(path, format=suffix, dpi=110)


def _is_field_sweep(datasets) -> bool:
    import numpy as np

    return any(d.quantity == "M" and np.ptp(d.measurement.temperature) == 0 for d in datasets) if datasets else False


def _plot_dataset(result, d, top, bottom, colour) -> None:
    import numpy as np

    m = d.measurement
    sweep = m.quantity == "M" and np.ptp(m.temperature) == 0
    x = d.fields if sweep else m.temperature
    used = d.used if d.used is not None else np.zeros(len(m), dtype=bool)
    fields = sorted({float(b) for b in d.fields})
    label = f"{Path(m.source).name}" + (f" ({fields[0]:g} T)" if len(fields) == 1 else "")
    if sweep:
        grid_x = np.linspace(x.min(), x.max(), 200)
        temperatures, grid_fields = np.full_like(grid_x, m.temperature[0]), grid_x
    else:
        grid_x = np.geomspace(max(x.min(), 1e-3), x.max(), 200)
        temperatures, grid_fields = grid_x, np.full_like(grid_x, float(np.median(d.fields)))
    model, lower, upper = result.model_band(m.quantity, temperatures, grid_fields)
    values = m.value
    if m.quantity == "C":
        lattice = result.lab.lattice_heat_capacity(temperatures, result.values())
        model, lower, upper = model - lattice, lower - lattice, upper - lattice
        values = m.value - result.lab.lattice_heat_capacity(m.temperature, result.values())
    top.plot(x[used], values[used], "o", ms=3, color=colour, label=label)
    top.plot(x[~used], values[~used], "o", ms=3, mfc="none", color=colour, alpha=0.6)
    inside = temperatures >= d.t_min if not sweep else np.ones_like(grid_x, dtype=bool)
    with np.errstate(invalid="ignore"):
        top.fill_between(grid_x[inside], lower[inside], upper[inside], color=colour, alpha=0.2, lw=0)
    top.plot(grid_x[inside], model[inside], "-", color=colour, lw=1.2)
    top.plot(grid_x[~inside], model[~inside], "--", color=colour, lw=0.8)
    if not sweep and np.isfinite(d.t_min):
        top.axvline(d.t_min, color=colour, ls=":", lw=0.8)
    fitted = result.lab.evaluate(m.quantity, m.temperature, d.fields, result.values())
    residual = (m.value - fitted) / d.sigma
    bottom.plot(x[used], residual[used], "o", ms=2.5, color=colour)
    bottom.plot(x[~used], residual[~used], "o", ms=2.5, mfc="none", color=colour, alpha=0.5)
    limit = max(5.0, float(np.nanmax(np.abs(residual[used]))) * 1.2) if used.any() else 5.0
    bottom.set_ylim(-limit, limit)
