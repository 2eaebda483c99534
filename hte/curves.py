r"""Low-temperature curves with uncertainty bands from high-temperature series: the `hte curves` workhorse.

:func:`curves_from_series` takes the ``series`` block of the `hte series` JSON (CONVENTIONS.md) and returns a
:class:`CurveSet`: χ*, C, S and E per site on a temperature grid, each with an estimate and a band, the
temperature T_conv above which each band is narrower than the tolerance, and, for Dlog-Padé, the critical point.

Quantities, per site, k_B = 1, temperatures and energies in units of the reference coupling J, β = J/T:

* χ* = χ J/(N g² μ_B²) = β·(Tχ/N), from the ``chiT`` series;
* E = −d(ln Z/N)/dβ, C = β² d²(ln Z/N)/dβ² = −β² dE/dβ, S = ln Z/N + βE, from the ``lnZ`` series.

Methods:

* ``pade``: near-diagonal Padé ensembles (:mod:`hte.pade`) of Tχ, of (E − e_∞)/β, of C/β² (or of E, see
  below) and of (S − S(∞))/β², in β or, for an even series, in β²; screened for poles and Froissart doublets on
  the physical segment β ∈ (0, 1/T_min] and for unphysical values (χ < 0, C < 0, S outside [0, ln Z(0)/N], E
  above e_∞), where an approximant that turns unphysical below some temperature is used only above it.
  Estimate = median of the valid approximants at each T, band = their min/max, stretched to contain the median
  of the ensemble of the series shortened by two orders of the Padé variable (one for β²), so that T_conv also
  measures stability against the order (:func:`hte.pade.widen_with_lower_order`).  Where only one approximant is valid
  the band spans it and the truncated series; where none is, the truncated series itself is returned with the
  band between its last two partial sums, the quantity is listed in ``fallback`` and a warning says below
  which T.
  C is taken from the derivative of Padé approximants of E, C = −β² dE/dβ (``heat_capacity_route="energy"``,
  the default), or from Padé approximants of C/β² directly (``"direct"``).  We tried both on the Ising chain,
  the Heisenberg dimer and the XX chain at order 14 (tests/test_curves.py): both stay within the 1 % tolerance
  above their T_conv, and the energy route reaches the lower T_conv on all three (0.13, 0.19, 0.35 against
  0.22, 0.28, 0.38).  The energy series keeps one more coefficient than C/β² (E is known through β^(N−1), C/β²
  only through β^(N−2)), and C then stays consistent with the E curve of the same approximants.
* ``dlog``: Dlog-Padé of Tχ (:mod:`hte.dlog`): χ* above the highest accepted T_c, and the critical block.
* ``entropy``: the entropy method (:mod:`hte.entropy_method`): C, S, E down to T → 0; needs e0 and low_t.
  With a ``chiT`` series also χ*, through the microcanonical s(e, m) (:mod:`hte.entropy_susceptibility`);
  where no approximant pair survives, χ* is the raw truncated series, listed in ``fallback``.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from hte.atomic import write_text_atomically
from hte.dlog import dlog_curve, dlog_pade
from hte.entropy_method import LowTemperatureClass, entropy_method
from hte.entropy_susceptibility import entropy_susceptibility
from hte.errors import ParameterError
from hte.pade import (Band, PadeApproximant, VariableTransform, band_from_samples, convergence_temperature,
                      is_even, pade, pade_ensemble, widen_with_lower_order)

QUANTITIES = ("chi", "C", "S", "E")
METHODS = ("pade", "dlog", "entropy")


@dataclass
class CurveSet:
    """Curves on an ascending temperature grid (units of J), per site, k_B = 1.

    Attributes
    ----------
    temperatures : ndarray
        T grid.
    method : str
        "pade", "dlog" or "entropy".
    curves : dict
        Quantity name ("chi", "C", "S", "E") -> :class:`hte.pade.Band`; a quantity the method cannot give is
        absent.
    T_conv : dict
        Quantity -> lowest T above which the relative band half-width stays below `tolerance` (None: nowhere).
    tolerance : float
        The relative half-width used for T_conv.
    critical : dict or None
        Dlog-Padé: {"T_c", "T_c_err", "gamma", "gamma_err", ...}.
    approximants : dict
        Quantity -> {"accepted": [labels], "rejected": {label: reasons}}.
    fallback : list of str
        Quantities returned as the raw truncated series because no approximant survived.
    metadata : dict
        "lattice", "per" and further keys copied from the series document.
    label : str or None
        Legend text for plots.
    """

    temperatures: np.ndarray
    method: str
    curves: dict[str, Band]
    T_conv: dict[str, float | None]
    tolerance: float
    critical: dict | None = None
    approximants: dict = field(default_factory=dict)
    fallback: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    metadata: dict = field(default_factory=dict)
    label: str | None = None

    def to_json_dict(self) -> dict:
        """The `hte curves` JSON document (CONVENTIONS.md), plus "approximants", "fallback" and "warnings"."""
        out = {key: self.metadata[key] for key in ("lattice", "model", "spin", "couplings", "per")
               if key in self.metadata}
        out["method"] = self.method
        out["T"] = [float(t) for t in self.temperatures]
        out["curves"] = {name: {"estimate": band.estimate.tolist(), "lower": band.lower.tolist(),
                                "upper": band.upper.tolist()} for name, band in self.curves.items()}
        out["T_conv"] = dict(self.T_conv)
        out["tolerance"] = self.tolerance
        if self.critical is not None:
            out["critical"] = dict(self.critical)
        out["approximants"] = self.approximants
        out["fallback"] = list(self.fallback)
        out["warnings"] = list(self.warnings)
        for key in ("e0", "low_t", "chi_low_t", "sum_rule_max_deviation"):
            if key in self.metadata:
                out[key] = self.metadata[key]
        return out

    def to_csv(self, path) -> None:
        """Write T and, per quantity, estimate/lower/upper columns; atomically (temporary file, then rename)."""
        names = list(self.curves)
        header = ["T"] + [f"{name}{suffix}" for name in names for suffix in ("", "_lower", "_upper")]
        rows = []
        for i, t in enumerate(self.temperatures):
            row = [repr(float(t))]
            for name in names:
                band = self.curves[name]
                row += [repr(float(band.estimate[i])), repr(float(band.lower[i])), repr(float(band.upper[i]))]
            rows.append(row)
        write_text_atomically(path, lambda handle: csv.writer(handle).writerows([header] + rows))


# --- input ---------------------------------------------------------------------------------------------------

def read_series(series: dict) -> tuple[dict[str, list], dict]:
    """Coefficient lists (Fractions; the β^0 term of lnZ a float) and metadata from a series document or block."""
    if not isinstance(series, dict):
        raise ParameterError("series must be a dict: the `hte series` JSON document or its 'series' block")
    block = series.get("series", series)
    metadata = {k: v for k, v in series.items() if k != "series"} if "series" in series else {}
    coefficients = {}
    for key in ("lnZ", "chiT", "M4"):
        if key not in block:
            continue
        values = []
        for index, value in enumerate(block[key]):
            try:
                number = float(value) if isinstance(value, float) else Fraction(value)
            except (TypeError, ValueError, ZeroDivisionError):
                raise ParameterError(f"series[{key!r}][{index}] = {value!r} is not a number (a fraction 'p/q' or a "
                                     "decimal); curves need numeric coefficients: rerun `hte series` without "
                                     "--symbolic or with numeric couplings") from None
            values.append(number)
        if key == "lnZ" and values:
            values[0] = float(values[0])
        coefficients[key] = values
    if not coefficients:
        raise ParameterError("the series has none of the keys 'lnZ', 'chiT'; pass the `hte series` JSON or its "
                             "'series' block")
    return coefficients, metadata


def _temperature_grid(temperatures) -> np.ndarray:
    grid = np.asarray(temperatures, dtype=float).ravel()
    if grid.size == 0:
        raise ParameterError("temperatures: the grid is empty; give at least one T > 0 (e.g. --tmin/--tmax/--points)")
    if not np.all(np.isfinite(grid)) or np.any(grid <= 0):
        bad = grid[~(np.isfinite(grid) & (grid > 0))][0]
        raise ParameterError(f"temperatures: T = {bad} is not a positive finite number; every T must be > 0 "
                             "(units of the reference coupling)")
    return np.unique(grid)


# --- derived series ------------------------------------------------------------------------------------------

def energy_series(lnZ: list) -> list:
    """E(β) per site: coefficients −(n+1) l_{n+1}, n = 0..N−1."""
    return [-(n + 1) * lnZ[n + 1] for n in range(len(lnZ) - 1)]


def _reduced_series(name: str, coefficients: dict, route: str) -> tuple[list, str]:
    """Series R and how the quantity follows from it (see _quantity_values)."""
    if name == "chi":
        return coefficients["chiT"], "beta*R"
    lnZ = coefficients["lnZ"]
    if name == "E" or (name == "C" and route == "energy"):       # E = e_inf + beta R
        return energy_series(lnZ)[1:], "E0+beta*R" if name == "E" else "-beta^2*(R+beta*dR)"
    if name == "C":
        return [(n + 2) * (n + 1) * lnZ[n + 2] for n in range(len(lnZ) - 2)], "beta^2*R"
    return [-(n + 1) * lnZ[n + 2] for n in range(len(lnZ) - 2)], "S0+beta^2*R"


def _quantity_values(form: str, approximant: PadeApproximant, beta: np.ndarray, transform: VariableTransform,
                     coefficients: dict) -> np.ndarray:
    x = transform.forward(beta)
    if form == "-beta^2*(R+beta*dR)":
        values, derivative, _ = approximant.derivatives(x)
        slope, _ = transform.derivatives(beta)
        return -beta ** 2 * (values + beta * derivative * slope)
    values = np.real(approximant(x))
    if form == "beta*R":
        return beta * values
    if form == "beta^2*R":
        return beta ** 2 * values
    if form == "S0+beta^2*R":
        return float(coefficients["lnZ"][0]) + beta ** 2 * values
    return -float(coefficients["lnZ"][1]) + beta * values                   # "E0+beta*R"


def _physical(name: str, values: np.ndarray, coefficients: dict) -> np.ndarray:
    """Mask of grid points where a curve is finite and physical (χ, C >= 0; 0 <= S <= S(∞); E <= e_∞)."""
    ok = np.isfinite(values)
    scale = max(1.0, float(np.max(np.abs(values[ok])))) if ok.any() else 1.0
    if name in ("chi", "C"):
        ok &= values >= -1e-12 * scale
    elif name == "S":
        ok &= (values >= -1e-9) & (values <= float(coefficients["lnZ"][0]) + 1e-9)
    else:
        e_inf = -float(coefficients["lnZ"][1])
        ok &= values <= e_inf + 1e-9 * max(1.0, abs(e_inf))
    return ok


# --- methods -------------------------------------------------------------------------------------------------

def _screened_samples(name, form, series_x, segment, beta, variable, coefficients, depth, max_offset):
    """Pole/doublet-screened ensemble members and their curves on the grid (ascending T), NaN where invalid.

    A member is valid at T when its curve is physical at T and at every higher grid temperature: an approximant
    that turns unphysical below some temperature still counts above it.
    """
    members = pade_ensemble(series_x, segment, depth=depth, max_offset=max_offset, quantity=name)
    samples, valid_above = [], {}
    for member in members:
        if not member.accepted:
            continue
        values = _quantity_values(form, member.approximant, beta, variable, coefficients)
        valid = np.logical_and.accumulate(_physical(name, values, coefficients)[::-1])[::-1]
        if not valid.any():
            member.defects.append(f"unphysical {name} at every temperature of the grid")
            continue
        if not valid.all():
            valid_above[member.label] = float(1.0 / beta[valid].max())
        samples.append(np.where(valid, values, np.nan))
    return members, samples, valid_above


def _pade_curves(coefficients, temperatures, *, tolerance, depth, max_offset, transform, heat_capacity_route,
                 estimate, spread):
    beta = 1.0 / temperatures
    available = [q for q in QUANTITIES if ("chiT" if q == "chi" else "lnZ") in coefficients]
    curves, t_conv, approximants, fallback, warnings = {}, {}, {}, [], []
    for name in available:
        reduced, form = _reduced_series(name, coefficients, heat_capacity_route)
        variable = transform
        if transform.kind == "beta" and is_even(reduced):
            variable = VariableTransform("square")
        series_x = variable.transform_series(reduced)
        segment = (0.0, float(variable.forward(beta.max())))
        members, samples, valid_above = _screened_samples(name, form, series_x, segment, beta, variable,
                                                          coefficients, depth, max_offset)
        approximants[name] = {"accepted": [m.label for m in members if m.accepted],
                              "rejected": {m.label: m.defects for m in members if not m.accepted},
                              "valid_above_T": valid_above}
        order = len(series_x) - 1
        raw = _quantity_values(form, pade(series_x, order, 0), beta, variable, coefficients)
        previous = _quantity_values(form, pade(series_x, order - 1, 0), beta, variable, coefficients)
        stack = np.array(samples) if samples else np.full((1, beta.size), np.nan)
        count = np.isfinite(stack).sum(axis=0)
        band = band_from_samples(np.vstack([stack, np.where(count == 0, raw, np.nan)]), estimate=estimate,
                                 spread=spread)
        single = count == 1                      # one member: band spans it and the truncated series
        lower = np.where(single, np.fmin(band.estimate, raw), band.lower)
        upper = np.where(single, np.fmax(band.estimate, raw), band.upper)
        none = count == 0                        # no member: raw series, band = its last two partial sums
        lower = np.where(none, np.minimum(raw, previous), lower)
        upper = np.where(none, np.maximum(raw, previous), upper)
        band = Band(band.estimate, lower, upper)
        if none.all():
            fallback.append(name)
            warnings.append(f"{name}: no Padé approximant survived the screening; returning the raw truncated "
                            "series (band = its last two partial sums)")
        elif none.any():
            fallback.append(name)
            warnings.append(f"{name}: below T = {temperatures[~none].min():.4g} no Padé approximant is physical; "
                            "the raw truncated series is returned there (band = its last two partial sums)")
        if single.any():
            warnings.append(f"{name}: at {int(single.sum())} temperatures only one Padé approximant is valid; the "
                            "band there spans it and the truncated series")
        if samples:
            shorter = series_x[: len(series_x) - (1 if variable.kind == "square" else 2)]
            try:
                lower_order = _screened_samples(name, form, shorter, segment, beta, variable, coefficients, depth,
                                                max_offset)[1]
            except ParameterError:
                lower_order = []
            band = widen_with_lower_order(band, lower_order)
        curves[name] = band
        t_conv[name] = convergence_temperature(temperatures, band, tolerance)
    return curves, t_conv, approximants, fallback, warnings


def _dlog_curves(coefficients, temperatures, *, depth, max_offset, estimate, spread):
    if "chiT" not in coefficients:
        raise ParameterError("method dlog analyses the susceptibility; the series has no 'chiT' key")
    chi_t = coefficients["chiT"]
    critical = dlog_pade(chi_t, depth=depth, max_offset=max_offset)
    approximants, warnings, fallback = {}, [], []
    if critical is None:
        warnings.append("dlog: no Padé approximant of d ln(T chi)/d beta has a usable pole on the positive axis; "
                        "no critical point; chi is the raw truncated series")
        beta = 1.0 / temperatures
        order = len(chi_t) - 1
        raw = beta * pade(chi_t, order, 0)(beta)
        previous = beta * pade(chi_t, order - 1, 0)(beta)
        band = Band(raw, np.minimum(raw, previous), np.maximum(raw, previous))
        return temperatures, {"chi": band}, None, {}, ["chi"], warnings
    approximants["chi"] = {"accepted": [m.label for m in critical.members if m.accepted],
                           "rejected": {m.label: m.defects for m in critical.members if not m.accepted}}
    highest_tc = max(1.0 / a.beta_c for a in critical.accepted)
    kept = temperatures[temperatures > highest_tc * (1.0 + 1e-6)]
    if kept.size < temperatures.size:
        warnings.append(f"dlog: {temperatures.size - kept.size} temperatures at or below the highest accepted "
                        f"T_c = {highest_tc:.6g} dropped; chi diverges there")
    if kept.size == 0:
        raise ParameterError(f"dlog: every requested temperature lies at or below T_c = {highest_tc:.6g}; "
                             "request temperatures above T_c")
    beta = 1.0 / kept
    samples = [beta * dlog_curve(a.approximant, float(chi_t[0]), beta, a.beta_c, a.gamma)
               for a in critical.accepted]
    band = band_from_samples(np.array(samples), estimate=estimate, spread=spread)
    if len(samples) == 1:
        warnings.append(f"dlog: only {critical.accepted[0].label} is free of defects; chi has no spread to show")
    return kept, {"chi": band}, critical.to_json_dict(), approximants, fallback, warnings


def curves_from_series(series: dict, method: str, *, temperatures, e0: float | None = None,
                       low_t: LowTemperatureClass | str | None = None, chi_low_t: str | None = None,
                       tolerance: float = 0.01, depth: int = 3,
                       max_offset: int = 2, transform: VariableTransform | None = None,
                       heat_capacity_route: str = "energy", estimate: str = "median", spread: str = "minmax",
                       label: str | None = None) -> CurveSet:
    """Curves of χ*, C, S, E per site with bands, from a high-temperature series.

    Parameters
    ----------
    series : dict
        The `hte series` JSON document or its ``series`` block: coefficient lists (strings accepted by
        Fraction, Fractions or floats) of β^n for "lnZ" and/or "chiT".
    method : {"pade", "dlog", "entropy"}
    temperatures : array_like
        Temperatures > 0 in units of the reference coupling; sorted and de-duplicated.
    e0, low_t :
        Entropy method only: ground-state energy per site, and "gapped:DELTA" or "power:ALPHA".
    chi_low_t : str, optional
        Entropy method with a ``chiT`` series: low-temperature law of χ, "power:KAPPA" (χ ∝ T^KAPPA, default 0)
        or "gapped:DELTA_S" (spin gap, default the gap of `low_t`); see :mod:`hte.entropy_susceptibility`.
    tolerance : float
        Relative band half-width defining T_conv (default 1 %).
    depth, max_offset : int
        Approximants [L/M] with L + M in the last `depth` orders and |L − M| <= max_offset.
    transform : VariableTransform, optional
        Padé variable for method "pade" (default β itself).
    heat_capacity_route : {"energy", "direct"}
        Derivative of Padé of E (default) or Padé of C/β² (method "pade").
    estimate, spread : str
        "median"/"mean" and "minmax"/"quantile" (see :func:`hte.pade.band_from_samples`).

    Raises
    ------
    ParameterError
        Unknown method, T <= 0, a series too short for the requested approximants, missing e0/low_t for the
        entropy method, and the entropy method's own input errors.
    """
    if method not in METHODS:
        raise ParameterError(f"method {method!r} is unknown; use one of {', '.join(METHODS)}")
    if heat_capacity_route not in ("direct", "energy"):
        raise ParameterError(f"heat_capacity_route {heat_capacity_route!r} is unknown; use 'direct' or 'energy'")
    if not tolerance > 0:
        raise ParameterError(f"tolerance must be > 0 (relative band half-width), got {tolerance}")
    grid = _temperature_grid(temperatures)
    coefficients, metadata = read_series(series)
    critical = None
    if method == "pade":
        curves, t_conv, approximants, fallback, warnings = _pade_curves(
            coefficients, grid, tolerance=tolerance, depth=depth, max_offset=max_offset,
            transform=transform or VariableTransform(), heat_capacity_route=heat_capacity_route,
            estimate=estimate, spread=spread)
    elif method == "dlog":
        grid, curves, critical, approximants, fallback, warnings = _dlog_curves(
            coefficients, grid, depth=depth, max_offset=max_offset, estimate=estimate, spread=spread)
        t_conv = {name: convergence_temperature(grid, band, tolerance) for name, band in curves.items()}
    else:
        if "lnZ" not in coefficients:
            raise ParameterError("method entropy needs the 'lnZ' series")
        if e0 is None or low_t is None:
            raise ParameterError("method entropy needs the ground-state energy per site (--e0 E) and the "
                                 "low-temperature class (--low-t gapped:DELTA or --low-t power:ALPHA)")
        result = entropy_method(coefficients["lnZ"], float(e0), low_t, grid, tolerance=tolerance, depth=depth,
                                max_offset=max_offset, estimate=estimate, spread=spread)
        curves, t_conv, fallback, warnings = dict(result.curves), dict(result.T_conv), [], list(result.warnings)
        approximants = {name: _member_summary(result.members) for name in curves}
        metadata = dict(metadata, e0=float(e0), low_t=str(result.low_t),
                        sum_rule_max_deviation=max(check.worst_deviation for check in result.sum_rules))
        if "chiT" in coefficients:
            _entropy_chi(coefficients, float(e0), result.low_t, chi_low_t, grid, tolerance, depth, max_offset,
                         estimate, spread, curves, t_conv, approximants, fallback, warnings, metadata)
    return CurveSet(grid, method, curves, t_conv, tolerance, critical, approximants, fallback, warnings,
                    metadata, label)


def _member_summary(members) -> dict:
    return {"accepted": [m.label for m in members if m.accepted],
            "rejected": {m.label: m.defects for m in members if not m.accepted}}


def _entropy_chi(coefficients, e0, low_t, chi_low_t, grid, tolerance, depth, max_offset, estimate, spread, curves,
                 t_conv, approximants, fallback, warnings, metadata) -> None:
    """Add χ* of the entropy method (:mod:`hte.entropy_susceptibility`), or the raw series where it fails."""
    try:
        chi = entropy_susceptibility(coefficients["lnZ"], coefficients["chiT"], e0, low_t, grid,
                                     chi_low_t=chi_low_t, tolerance=tolerance, depth=depth, chi_depth=depth + 2,
                                     max_offset=max_offset, estimate=estimate, spread=spread)
    except ParameterError as exc:
        if "defects" not in str(exc):
            raise
        beta = 1.0 / grid
        chi_t = np.asarray(coefficients["chiT"], dtype=float)
        raw = beta * np.polyval(chi_t[::-1], beta)                 # χ* = β · (T χ series)
        previous = beta * np.polyval(chi_t[-2::-1], beta)          # one order less
        curves["chi"] = Band(raw, np.minimum(raw, previous), np.maximum(raw, previous))
        t_conv["chi"] = convergence_temperature(grid, curves["chi"], tolerance)
        fallback.append("chi")
        warnings.append(f"chi: {exc}; returning the raw truncated series (band = its last two partial sums)")
        return
    curves["chi"], t_conv["chi"] = chi.band, chi.T_conv
    approximants["chi"] = _member_summary(chi.members)
    warnings.extend(chi.warnings)
    metadata["chi_low_t"] = chi.low_t.describe(low_t)
