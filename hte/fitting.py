r"""Fit measured χ(T), C(T) and M(H) with a lattice model's series plus the backgrounds of real samples.

Model (laboratory units, per mole of formula units with ``n_magnetic`` host ions, see :mod:`hte.model_curves`
for the reduced quantities χ*, C*, m* per host site; T and h = g μ_B B in units of |J1|):

    χ_mol(T, B) = χ*(T, h) · n N_A g² μ_B² / (k_B |J1|)  +  χ_imp(T, B)  +  χ0                 [emu/mol]
    C_mol(T, B) = n R C*(T, h)  +  C_Schottky,imp(T, B)  +  C_lattice(T)                       [J/(mol K)]
    M_mol(T, B) = n g m*(T, h)  +  M_imp(T, B)  +  χ0 H                                        [μ_B/f.u.]

χ* in a field is M/h, so χ measured as M/H at several fields is fitted at each field.  Impurities are
``imp_fraction`` free spins ``impurity_spin`` per formula unit with factor ``imp_g`` and a small Weiss
temperature ``imp_theta``: Curie–Weiss f C(g, S)/(T − θ) in zero field, the Brillouin form at T − θ (a
mean-field form, common practice) in a field, and their Zeeman-multiplet Schottky heat capacity in the field
of each point.  The lattice heat capacity is a Debye term (``theta_D``, ``debye_atoms`` atoms per formula unit,
included when debye_atoms > 0) plus ``lattice_beta`` T³ + ``lattice_delta`` T⁵.

Couplings: the reference coupling (the lattice's first label, e.g. ``J1``) is given in the user's energy unit
(K, meV, cm⁻¹) and Hamiltonian convention (J, 2J, −2J, ...), converted with :mod:`hte.units` on input and
output, never guessed; further couplings are the ratios ``<label>/J1`` (the same in every such convention),
and occupations are ``p_<class>``.

Each data set is fitted only above the model's convergence temperature (T_conv of the Padé band, at the
current parameters) times ``margin``, and only where the field expansion holds; least squares
(:func:`scipy.optimize.least_squares`) weighted by the data's uncertainties, or by their local scatter
(:func:`hte.measured.local_scatter`) when a file gives none.  The window is re-derived at the fitted values
and the fit repeated until the window is stable.  Standard errors come from the Jacobian, (JᵀJ)⁻¹.

References
----------
.. [1] W. H. Press et al., *Numerical Recipes*, 3rd ed. (Cambridge University Press, 2007), §15.4-15.6
   (weighted least squares, covariance from the Jacobian, reduced χ²).
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass, field, replace

import numpy as np

from hte import units as lab_units
from hte.errors import DataFileError, ParameterError
from hte.measured import Measurement, find_outliers, local_scatter
from hte.model_curves import FIELD_LIMIT, ModelCurves, curie_constant_reduced, curie_weiss_temperature

R = lab_units.GAS_CONSTANT
STRONG_CORRELATION = 0.95


class FitDidNotConvergeError(ParameterError):
    """The least-squares fit stopped without converging, or the model could not be evaluated."""


@dataclass
class Parameter:
    """One fit parameter: value in `unit`, free or fixed, bounds; `stderr` after a fit (None: not fitted)."""

    name: str
    value: float
    free: bool = False
    lower: float = -math.inf
    upper: float = math.inf
    unit: str = ""
    description: str = ""
    stderr: float | None = None


# name: (default value, lower, upper, unit, typical scale, description)
_BACKGROUND_PARAMETERS = {
    "g": (2.0, 0.0, math.inf, "", 1.0, "Landé factor of the lattice spins"),
    "chi0": (0.0, -math.inf, math.inf, "emu/mol", 1e-4, "temperature-independent susceptibility"),
    "imp_fraction": (0.0, 0.0, math.inf, "per f.u.", 1e-3, "free impurity spins per formula unit"),
    "imp_g": (2.0, 0.0, math.inf, "", 1.0, "Landé factor of the impurity spins"),
    "imp_theta": (0.0, -math.inf, math.inf, "K", 1.0, "Weiss temperature of the impurity spins"),
    "theta_D": (300.0, 1.0, math.inf, "K", 100.0, "Debye temperature"),
    "debye_atoms": (0.0, 0.0, math.inf, "per f.u.", 1.0, "atoms per formula unit in the Debye term (0: none)"),
    "lattice_beta": (0.0, -math.inf, math.inf, "J/(mol K^4)", 1e-4, "T^3 lattice heat capacity coefficient"),
    "lattice_delta": (0.0, -math.inf, math.inf, "J/(mol K^6)", 1e-8, "T^5 lattice heat capacity coefficient"),
}


def default_parameters(model: ModelCurves, *, energy_unit: str = "K", convention: str = "J") -> dict:
    """All parameters of a fit with `model`, every one fixed at its default (free ones are chosen by the caller).

    The reference coupling is named after the lattice's first label and is in `energy_unit` and `convention`
    (default 10 K until a start value is given); ratios ``<label>/<reference>`` and occupations ``p_<class>``
    come from the model's free symbols.
    """
    lab_units.describe_convention(convention)
    lab_units.convert_energy(1.0, energy_unit, "K")
    reference = model.lattice.labels[0]
    parameters = {reference: Parameter(reference, 10.0, unit=energy_unit,
                                       description=f"reference coupling, {lab_units.describe_convention(convention)}")}
    for symbol in model.parameters:
        if symbol.startswith("p_"):
            parameters[symbol] = Parameter(symbol, 0.0, lower=0.0, upper=1.0,
                                           description=f"occupation of site class {symbol[2:]!r}")
        else:
            name = f"{symbol}/{reference}"
            parameters[name] = Parameter(name, 0.0, description=f"coupling ratio {symbol}/{reference}")
    for name, (value, lower, upper, unit, _, description) in _BACKGROUND_PARAMETERS.items():
        parameters[name] = Parameter(name, value, lower=lower, upper=upper, unit=unit, description=description)
    return parameters


def _typical_scale(name: str) -> float:
    if name in _BACKGROUND_PARAMETERS:
        return _BACKGROUND_PARAMETERS[name][4]
    return 0.01 if name.startswith("p_") else (0.1 if "/" in name else 1.0)


# ---------------------------------------------------------------------------------------------------
# The laboratory model
# ---------------------------------------------------------------------------------------------------

@dataclass
class LabModel:
    """A :class:`ModelCurves` in laboratory units: parameter values in, χ, C or M of a measurement out.

    Attributes
    ----------
    curves : ModelCurves
        Reduced curves per host site (``per="host"``).
    spin : float
        Spin of the host ions (for the entropy check).
    n_magnetic : float
        Host magnetic ions per formula unit.
    energy_unit, convention : str
        How the reference coupling is written (see :mod:`hte.units`).
    impurity_spin : float
        Spin of the free impurity spins.
    """

    curves: ModelCurves
    spin: float = 0.5
    n_magnetic: float = 1.0
    energy_unit: str = "K"
    convention: str = "J"
    impurity_spin: float = 0.5

    @property
    def reference(self) -> str:
        return self.curves.lattice.labels[0]

    def coupling_kelvin(self, values: dict) -> float:
        """The reference coupling in K in our convention (H = J Σ S_i·S_j, J > 0 antiferromagnetic)."""
        return float(lab_units.convert_coupling(lab_units.convert_energy(values[self.reference], self.energy_unit, "K"),
                                                self.convention, "J"))

    def symbol_values(self, values: dict) -> dict:
        """Values of the series symbols (ratios to J1 and occupations) from the parameter values."""
        out = {}
        for symbol in self.curves.parameters:
            out[symbol] = values[symbol] if symbol.startswith("p_") else values[f"{symbol}/{self.reference}"]
        return out

    def _reduced(self, values: dict, temperature, field_tesla):
        coupling = self.coupling_kelvin(values)
        if coupling == 0:
            raise FitDidNotConvergeError(f"{self.reference} = 0: the model needs a nonzero reference coupling; "
                                         f"start from a nonzero value or bound {self.reference} away from 0")
        scale = abs(coupling)
        h = values["g"] * lab_units.BOHR_MAGNETON_OVER_BOLTZMANN * field_tesla / scale
        return np.asarray(temperature) / scale, h, scale, (1 if coupling > 0 else -1)

    def evaluate(self, quantity: str, temperature, field_tesla, values: dict, *, with_error: bool = False):
        """χ (emu/mol), C (J/(mol K)) or M (μ_B/f.u.) at temperatures (K) and fields B (T), per formula unit.

        With ``with_error`` also return the magnetic part's field-expansion truncation error (same unit) and
        the field-expansion parameter of each point (see :class:`hte.model_curves.ReducedValues`).
        """
        temperature = np.asarray(temperature, dtype=float)
        field_tesla = np.broadcast_to(np.asarray(field_tesla, dtype=float), temperature.shape)
        t, h, scale, sign = self._reduced(values, temperature, field_tesla)
        symbols = self.symbol_values(values)
        n = self.n_magnetic
        if quantity == "chi":
            reduced = self.curves.evaluate("chi", t, symbols, field=h, sign=sign)
            factor = lab_units.reduced_susceptibility_factor(scale, values["g"], n)
            total = reduced.estimate * factor + self.impurity_chi(temperature, field_tesla, values) + values["chi0"]
        elif quantity == "C":
            reduced = self.curves.evaluate("C", t, symbols, field=h, sign=sign)
            factor = n * R
            total = reduced.estimate * factor + self.background_heat_capacity(temperature, field_tesla, values)
        elif quantity == "M":
            reduced = self.curves.evaluate("m", t, symbols, field=h, sign=sign)
            factor = n * values["g"]
            chi0_moment = lab_units.to_canonical(values["chi0"] * field_tesla * 1e4, "M", "emu/mol")
            total = reduced.estimate * factor + self.impurity_moment(temperature, field_tesla, values) + chi0_moment
        else:
            raise ParameterError(f"quantity {quantity!r}: use 'chi', 'C' or 'M'")
        if with_error:
            return total, reduced.field_error * abs(factor), reduced.field_ratio
        return total

    def impurity_chi(self, temperature, field_tesla, values) -> np.ndarray:
        """χ of the impurity spins in emu/mol: Curie–Weiss at B = 0, M/H of the Brillouin form at T − θ else."""
        from hte.backgrounds import impurity_magnetization, impurity_susceptibility

        if values["imp_fraction"] == 0:
            return np.zeros_like(temperature)
        shifted = self._shifted(temperature, values)
        zero = field_tesla == 0
        safe = np.where(zero, 1.0, field_tesla)
        moment = impurity_magnetization(safe, shifted, values["imp_fraction"], values["imp_g"], self.impurity_spin)
        in_field = lab_units.susceptibility_from_magnetization(moment, safe)
        linear = impurity_susceptibility(shifted, values["imp_fraction"], values["imp_g"], self.impurity_spin)
        return np.where(zero, linear, in_field)

    def impurity_moment(self, temperature, field_tesla, values) -> np.ndarray:
        """Magnetisation of the impurity spins in μ_B per formula unit (Brillouin form at T − θ)."""
        from hte.backgrounds import impurity_magnetization

        if values["imp_fraction"] == 0:
            return np.zeros_like(temperature)
        return impurity_magnetization(field_tesla, self._shifted(temperature, values), values["imp_fraction"],
                                      values["imp_g"], self.impurity_spin)

    def _shifted(self, temperature, values):
        shifted = temperature - values["imp_theta"]
        if np.any(shifted <= 0):
            raise FitDidNotConvergeError(f"imp_theta = {values['imp_theta']:g} K reaches the data "
                                         f"(T = {temperature.min():g} K): bound imp_theta below the lowest "
                                         "fitted temperature or fix it")
        return shifted

    def lattice_heat_capacity(self, temperature, values) -> np.ndarray:
        """Lattice (phonon) part: Debye term (if debye_atoms > 0) + lattice_beta T^3 + lattice_delta T^5, J/(mol K)."""
        from hte.backgrounds import debye_heat_capacity

        total = values["lattice_beta"] * temperature ** 3 + values["lattice_delta"] * temperature ** 5
        if values["debye_atoms"] > 0:
            total = total + debye_heat_capacity(temperature, values["theta_D"], values["debye_atoms"])
        return np.asarray(total, dtype=float)

    def background_heat_capacity(self, temperature, field_tesla, values) -> np.ndarray:
        """Impurity Schottky (Zeeman multiplet in each point's field) plus the lattice part, J/(mol K)."""
        from hte.backgrounds import zeeman_schottky

        total = self.lattice_heat_capacity(temperature, values).copy()
        if values["imp_fraction"] != 0:
            for b in np.unique(field_tesla):
                if b != 0:
                    at = field_tesla == b
                    total[at] += zeeman_schottky(temperature[at], b, values["imp_g"], self.impurity_spin,
                                                 values["imp_fraction"])
        return total

    def reduced_temperature(self, values: dict) -> float:
        """|J1| in K: multiply temperatures in units of |J1| by this to get kelvin."""
        return abs(self.coupling_kelvin(values))


# ---------------------------------------------------------------------------------------------------
# Data sets and windows
# ---------------------------------------------------------------------------------------------------

@dataclass
class DataSet:
    """A measurement prepared for fitting: weights, window and outlier flags."""

    measurement: Measurement
    sigma: np.ndarray
    weights: str
    outliers: list = field(default_factory=list)
    used: np.ndarray | None = None
    t_min: float = math.nan
    t_conv_kelvin: float | None = None
    excluded_by_field: int = 0
    notes: list = field(default_factory=list)

    @property
    def quantity(self) -> str:
        return self.measurement.quantity

    @property
    def fields(self) -> np.ndarray:
        m = self.measurement
        return np.zeros(len(m)) if m.field is None else m.field


def prepare(measurement: Measurement) -> DataSet:
    """Uncertainties (the file's, else the local scatter) and outlier flags of one measurement."""
    notes = []
    if measurement.sigma is not None:
        sigma, weights = measurement.sigma.copy(), "uncertainties from the file"
    else:
        try:
            sigma, weights = local_scatter(measurement), "local scatter of the data (the file gives no uncertainties)"
        except DataFileError:
            sigma = 0.01 * np.abs(measurement.value)
            weights = "1 % of the value (too few points to judge the scatter; errors scaled by reduced chi^2)"
    floor = 1e-9 * np.abs(measurement.value).max()
    sigma = np.maximum(sigma, floor if floor > 0 else np.finfo(float).tiny)
    try:
        outliers = [o.describe(measurement) for o in find_outliers(measurement)]
    except DataFileError as exc:
        outliers = []
        notes.append(str(exc))
    return DataSet(measurement, sigma, weights, outliers, notes=notes)


def _window(lab: LabModel, dataset: DataSet, values: dict, margin: float, tolerance: float) -> None:
    """Select the points at T >= margin · T_conv (at `values`) where the field expansion holds."""
    m = dataset.measurement
    scale = lab.reduced_temperature(values)
    sign = 1 if lab.coupling_kelvin(values) > 0 else -1
    t_conv = lab.curves.convergence_temperatures(lab.symbol_values(values), sign=sign,
                                                 tolerance=tolerance)["C" if dataset.quantity == "C" else "chi"]
    if t_conv is None:
        raise DataFileError(f"{m.source}: the model's {dataset.quantity} band is wider than {tolerance:.0%} at "
                            f"every temperature up to {50 * scale:.4g} K; there is no converged range to fit "
                            "(raise the order or the tolerance)")
    dataset.t_conv_kelvin = float(t_conv * scale)
    dataset.t_min = margin * dataset.t_conv_kelvin
    above = m.temperature >= dataset.t_min
    _, _, ratio = lab.evaluate(dataset.quantity, m.temperature, dataset.fields, values, with_error=True)
    in_field = ratio <= FIELD_LIMIT
    dataset.excluded_by_field = int(np.count_nonzero(above & ~in_field))
    dataset.used = above & in_field


def _check_window(dataset: DataSet, minimum: int) -> None:
    m = dataset.measurement
    count = int(np.count_nonzero(dataset.used))
    if count < minimum:
        lines = m.lines[dataset.used]
        where = f" (lines {', '.join(str(x) for x in lines)})" if count else ""
        raise DataFileError(
            f"{m.source}: only {count} of {len(m)} points{where} lie above the fit window's lower end "
            f"T_min = {dataset.t_min:.4g} K (margin x model convergence temperature {dataset.t_conv_kelvin:.4g} K)"
            f"{' where the field expansion holds' if dataset.excluded_by_field else ''}; at least {minimum} are "
            "needed. Measure to higher temperature, lower --margin, or raise the series order.")


# ---------------------------------------------------------------------------------------------------
# Result
# ---------------------------------------------------------------------------------------------------

@dataclass
class FitResult:
    """Outcome of :func:`fit`: parameters with standard errors, covariance, goodness of fit, warnings."""

    lab: LabModel
    parameters: dict
    free: list
    covariance: np.ndarray
    datasets: list
    reduced_chi2: float
    chi2: float
    points_used: int
    evaluations: int
    warnings: list
    rounds: int
    extra: dict = field(default_factory=dict)

    def values(self) -> dict:
        """Parameter values by name (the user's units)."""
        return {name: p.value for name, p in self.parameters.items()}

    def correlations(self) -> np.ndarray:
        """Correlation matrix of the free parameters (order of :attr:`free`)."""
        d = np.sqrt(np.diag(self.covariance))
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.covariance / np.outer(d, d)

    def derived(self) -> dict:
        """Absolute couplings from the ratios, θ_CW of the model, the reference coupling in K and our convention."""
        lab, values = self.lab, self.values()
        reference = lab.reference
        out = {}
        unit_factor = lab.coupling_kelvin(values) / values[reference]
        j_err = self.parameters[reference].stderr or 0.0
        out[f"{reference} (K, convention J)"] = {"value": lab.coupling_kelvin(values),
                                                 "stderr": abs(unit_factor) * j_err, "unit": "K"}
        for name, p in self.parameters.items():
            if "/" in name and name.endswith(f"/{reference}"):
                label = name.split("/")[0]
                value = p.value * values[reference]
                variance = (p.value * j_err) ** 2 + (values[reference] * (p.stderr or 0.0)) ** 2
                if name in self.free and reference in self.free:
                    i, j = self.free.index(name), self.free.index(reference)
                    variance += 2 * p.value * values[reference] * self.covariance[i, j]
                out[label] = {"value": value, "stderr": math.sqrt(max(variance, 0.0)),
                              "unit": lab.energy_unit, "convention": lab.convention}
        sign = 1 if lab.coupling_kelvin(values) > 0 else -1
        theta = curie_weiss_temperature(lab.curves, lab.symbol_values(values), sign) * lab.reduced_temperature(values)
        out["theta_CW (model)"] = {"value": theta, "unit": "K",
                                   "note": "theta = c1/c0 of the chiT series at the fitted values; < 0 antiferromagnetic"}
        return out

    def report(self) -> dict:
        """The JSON report of `hte fit` (CONVENTIONS.md keys first, then details)."""
        lab = self.lab
        correlations = self.correlations()
        used = [d for d in self.datasets if d.used is not None and d.used.any()]
        doc = {
            "lattice": lab.curves.lattice.name,
            "convention": lab_units.describe_convention(lab.convention),
            "energy_unit": lab.energy_unit,
            "parameters": {name: {"value": p.value, "stderr": p.stderr, "unit": p.unit, "free": p.free}
                           for name, p in self.parameters.items()},
            "reduced_chi2": self.reduced_chi2,
            "points_used": self.points_used,
            "T_min_used": min(float(d.measurement.temperature[d.used].min()) for d in used) if used else None,
            "correlations": {a: {b: _finite(correlations[i, j]) for j, b in enumerate(self.free)}
                             for i, a in enumerate(self.free)},
            "warnings": list(self.warnings),
            "derived": self.derived(),
            "chi2": self.chi2,
            "degrees_of_freedom": self.points_used - len(self.free),
            "series": {"order": lab.curves.order, "spin": lab.spin, "normalisation": "per host site (class "
                       "'magnetic') of the undiluted lattice", "n_magnetic": lab.n_magnetic,
                       "symbols": list(lab.curves.parameters)},
            "datasets": [self._dataset_report(d) for d in self.datasets],
            "model_evaluations": self.evaluations,
            "window_rounds": self.rounds,
            "unit_conversion": f"{lab.reference} [K, H = J sum S_i.S_j] = {lab.coupling_kelvin(self.values()) / self.values()[lab.reference]:.10g}"
                               f" x {lab.reference} [{lab.energy_unit}, {lab.convention}]",
        }
        doc.update(self.extra)
        return doc

    def model_band(self, quantity: str, temperature, field_tesla) -> tuple:
        """Model estimate, lower and upper edge at (T, B) in laboratory units, at the fitted values.

        The band is the Padé band of the zero-field magnetic part (relative width), applied to the magnetic
        part at the field, widened by the field-expansion truncation error; backgrounds are added unchanged.
        """
        lab, values = self.lab, self.values()
        temperature = np.asarray(temperature, dtype=float)
        field_tesla = np.broadcast_to(np.asarray(field_tesla, dtype=float), temperature.shape)
        total, field_error, _ = lab.evaluate(quantity, temperature, field_tesla, values, with_error=True)
        background = {"chi": lambda: lab.impurity_chi(temperature, field_tesla, values) + values["chi0"],
                      "C": lambda: lab.background_heat_capacity(temperature, field_tesla, values),
                      "M": lambda: lab.impurity_moment(temperature, field_tesla, values)
                      + lab_units.to_canonical(values["chi0"] * field_tesla * 1e4, "M", "emu/mol")}[quantity]()
        magnetic = total - background
        scale = lab.reduced_temperature(values)
        sign = 1 if lab.coupling_kelvin(values) > 0 else -1
        curve = lab.curves.curves(lab.symbol_values(values), temperature / scale, sign=sign)
        band = curve.curves["C" if quantity == "C" else "chi"]
        grid = curve.temperatures * scale
        with np.errstate(divide="ignore", invalid="ignore"):
            relative = np.interp(temperature, grid, (band.upper - band.lower) / (2 * np.abs(band.estimate)))
        half = np.abs(magnetic) * np.nan_to_num(relative, nan=np.inf) + field_error
        return total, total - half, total + half

    def _dataset_report(self, d: DataSet) -> dict:
        m = d.measurement
        used = d.used if d.used is not None else np.zeros(len(m), dtype=bool)
        out = {"file": m.source, "quantity": m.quantity, "points": len(m), "points_used": int(used.sum()),
               "T_min_used": float(m.temperature[used].min()) if used.any() else None,
               "T_conv_model_K": d.t_conv_kelvin, "weights": d.weights, "outliers": d.outliers,
               "excluded_by_field_expansion": d.excluded_by_field, "notes": list(d.notes)}
        fields = sorted({float(b) for b in d.fields})
        out["fields_T"] = fields
        if used.any():
            model = self.lab.evaluate(m.quantity, m.temperature[used], d.fields[used], self.values())
            out["chi2"] = float(np.sum(((model - m.value[used]) / d.sigma[used]) ** 2))
        return out


def _finite(x) -> float | None:
    return float(x) if np.isfinite(x) else None


# ---------------------------------------------------------------------------------------------------
# The fit
# ---------------------------------------------------------------------------------------------------

def fit(lab: LabModel, measurements, parameters: dict, *, margin: float = 1.1, tolerance: float = 0.01,
        max_evaluations: int = 3000, max_rounds: int = 4, progress: bool | None = None) -> FitResult:
    """Weighted least-squares fit of one or several measurements sharing `parameters`.

    Parameters
    ----------
    lab : LabModel
    measurements : list of Measurement
        χ (emu/mol), C (J/(mol K)) and/or M (μ_B/f.u.) per formula unit, each with the field of its points
        (``field``; None means zero field, i.e. linear response for χ).
    parameters : dict of Parameter
        From :func:`default_parameters`, with the caller's start values, free flags and bounds.
    margin : float
        Fit only T >= margin · T_conv (T_conv: where the Padé band of the quantity is narrower than
        `tolerance`, at the current parameters).
    max_evaluations : int
        Model evaluations allowed per round before the fit counts as not converged.
    progress : bool, optional
        Print progress to stderr (default: when stderr is a terminal).

    Raises
    ------
    DataFileError
        A data set with fewer than 3 points in its window.
    FitDidNotConvergeError
        The optimiser ran out of evaluations, or the model cannot be evaluated at the parameters it reached.
    ParameterError
        No free parameter, unknown parameter, start value outside the bounds, fewer points than parameters.
    """
    if not measurements:
        raise ParameterError("nothing to fit: give at least one data set (chi, heat capacity or magnetisation)")
    if not margin > 0:
        raise ParameterError(f"--margin {margin}: the margin multiplies T_conv and must be > 0 (e.g. 1.1)")
    parameters = {name: replace(p) for name, p in parameters.items()}
    free = [name for name, p in parameters.items() if p.free]
    if not free:
        raise ParameterError("no free parameter: vary at least one (e.g. --vary J1,g)")
    for name in free:
        p = parameters[name]
        if not p.lower <= p.value <= p.upper:
            raise ParameterError(f"start value {name} = {p.value:g} lies outside its bounds [{p.lower:g}, {p.upper:g}]"
                                 "; give a start value inside (--start) or wider bounds (--bounds)")
    reference = lab.reference
    if reference in free:       # the sign of J1 is kept: the model is singular at J1 = 0
        p = parameters[reference]
        if p.value == 0:
            raise ParameterError(f"start value {reference} = 0: the model needs a nonzero reference coupling; give "
                                 f"--start {reference}=VALUE with the sign you expect (> 0 antiferromagnetic)")
        edge = 1e-3 * abs(p.value)
        p.lower, p.upper = (max(p.lower, edge), p.upper) if p.value > 0 else (p.lower, min(p.upper, -edge))
    datasets = [prepare(m) for m in measurements]
    progress = sys.stderr.isatty() if progress is None else progress
    warnings: list[str] = []
    rounds, evaluations = 0, 0
    previous_windows = None
    while True:
        rounds += 1
        values = {name: p.value for name, p in parameters.items()}
        for d in datasets:
            _window(lab, d, values, margin, tolerance)
            _check_window(d, 3)
        windows = [d.used.copy() for d in datasets]
        if previous_windows is not None and all(np.array_equal(a, b) for a, b in zip(windows, previous_windows)):
            break
        if rounds > max_rounds:
            warnings.append(f"the fit window still moved after {max_rounds} rounds; the window of the last fit "
                            "is kept")
            for d, used in zip(datasets, previous_windows):
                d.used = used
            break
        lab.curves.reset_ensembles()
        solution, count = _least_squares(lab, datasets, parameters, free, max_evaluations, progress)
        evaluations += count
        for name, x, scale in zip(free, solution.x, solution.scales):
            parameters[name].value = float(x * scale)
        previous_windows = windows
    return _result(lab, datasets, parameters, free, solution, evaluations, warnings, rounds - 1)


def _least_squares(lab, datasets, parameters, free, max_evaluations, progress):
    from scipy.optimize import least_squares

    scales = {name: max(abs(parameters[name].value), _typical_scale(name)) for name in free}
    x0 = np.array([parameters[n].value / scales[n] for n in free])
    lower = np.array([parameters[n].lower / scales[n] for n in free])
    upper = np.array([parameters[n].upper / scales[n] for n in free])
    x0 = np.clip(x0, lower, upper)
    base = {name: p.value for name, p in parameters.items()}
    counter = {"n": 0, "last": time.monotonic(), "start": time.monotonic()}

    def residuals(x):
        values = dict(base)
        values.update({n: float(v * scales[n]) for n, v in zip(free, x)})
        try:
            parts = [(lab.evaluate(d.quantity, d.measurement.temperature[d.used], d.fields[d.used], values)
                      - d.measurement.value[d.used]) / d.sigma[d.used] for d in datasets]
        except ParameterError as exc:
            raise FitDidNotConvergeError(f"the model cannot be evaluated at {_describe(values, free)}: {exc}") from None
        result = np.concatenate(parts)
        counter["n"] += 1
        if not np.all(np.isfinite(result)):
            raise FitDidNotConvergeError(f"the model is not finite at {_describe(values, free)}; fix or bound the "
                                         "parameters that ran away, or start closer to the data")
        now = time.monotonic()
        if progress and now - counter["last"] > 2.0:
            print(f"fit: {counter['n']} model evaluations, chi^2 = {float(result @ result):.6g}, "
                  f"{now - counter['start']:.0f} s", file=sys.stderr, flush=True)
            counter["last"] = now
        return result

    points = sum(int(d.used.sum()) for d in datasets)
    if points <= len(free):
        raise ParameterError(f"{points} points in the fit window for {len(free)} free parameters; fix some "
                             "parameters or supply more data above T_min")
    for i, name in enumerate(free):     # a start exactly on a bound can leave the optimiser stuck there
        nudge = 0.1 * _typical_scale(name) / scales[name]
        if x0[i] == lower[i]:
            x0[i] = min(lower[i] + nudge, 0.5 * (lower[i] + upper[i]) if np.isfinite(upper[i]) else np.inf)
        elif x0[i] == upper[i]:
            x0[i] = max(upper[i] - nudge, 0.5 * (lower[i] + upper[i]) if np.isfinite(lower[i]) else -np.inf)
    solution = least_squares(residuals, x0, bounds=(lower, upper), x_scale="jac", diff_step=1e-6,
                             max_nfev=max_evaluations, method="trf")
    if solution.status == 0:
        raise FitDidNotConvergeError(
            f"the fit did not converge within {max_evaluations} model evaluations (last values: "
            f"{_describe(dict(base, **{n: float(v * scales[n]) for n, v in zip(free, solution.x)}), free)}); "
            "give better start values (--start), fix poorly determined parameters (--fix), or narrow --bounds")
    if solution.status < 0:
        raise FitDidNotConvergeError(f"the optimiser failed: {solution.message}")
    solution.jac, solution.rough = _jacobian(residuals, solution.x, solution.fun, lower, upper)
    solution.scales = np.array([scales[n] for n in free])
    return solution, counter["n"]


def _jacobian(residuals, x, f0, lower, upper):
    """Central-difference Jacobian at the solution (one-sided at a bound), and the columns where it is not smooth.

    The optimiser's own Jacobian has zero columns for parameters on an active bound, so it is recomputed here.
    A column whose forward and backward differences disagree by more than 10 % marks a parameter at which the
    model jumps (a Padé approximant of the fixed ensemble drops out there): its error is then not reliable.
    """
    columns, rough = [], []
    for i in range(x.size):
        step = 1e-6 * max(1.0, abs(x[i]))
        ahead, behind = x.copy(), x.copy()
        ahead[i] = min(x[i] + step, upper[i])
        behind[i] = max(x[i] - step, lower[i])
        forward = (residuals(ahead) - f0) / (ahead[i] - x[i]) if ahead[i] > x[i] else None
        backward = (f0 - residuals(behind)) / (x[i] - behind[i]) if behind[i] < x[i] else None
        if forward is not None and backward is not None:
            columns.append(0.5 * (forward + backward))
            scale = np.linalg.norm(forward) + np.linalg.norm(backward)
            rough.append(bool(np.linalg.norm(forward - backward) > 0.1 * scale + 1e-300))
        else:
            columns.append(forward if forward is not None else backward)
            rough.append(False)
    return np.column_stack(columns), rough


def _describe(values: dict, names) -> str:
    return ", ".join(f"{n} = {values[n]:.6g}" for n in names)


def _result(lab, datasets, parameters, free, solution, evaluations, warnings, rounds) -> FitResult:
    scales = solution.scales
    jac = solution.jac * 1.0
    residual = solution.fun
    chi2 = float(residual @ residual)
    points = residual.size
    dof = max(points - len(free), 1)
    reduced = chi2 / dof
    # covariance of the scaled parameters from the SVD of J; directions the data do not fix are flagged
    _, singular, vt = np.linalg.svd(jac, full_matrices=False)
    threshold = singular.max() * 1e-8 if singular.size else 0.0
    keep = singular > threshold
    covariance_x = (vt[keep].T / singular[keep] ** 2) @ vt[keep]
    covariance = covariance_x * np.outer(scales, scales)
    loose = set()
    for k in np.flatnonzero(~keep):
        loose |= {free[i] for i in np.flatnonzero(np.abs(vt[k]) > 0.1)}
    scaled_errors = any(d.weights.startswith("1 %") for d in datasets)
    if scaled_errors:
        covariance = covariance * reduced
    for i, name in enumerate(free):
        p = parameters[name]
        p.stderr = math.inf if name in loose else float(math.sqrt(max(covariance[i, i], 0.0)))
        if solution.rough[i]:
            warnings.append(f"the model is not smooth in {name} at the solution (a Padé approximant drops out or "
                            f"enters there); the error of {name} = {p.stderr:.3g} and the fit near it are not "
                            "reliable: fix it, narrow its bounds, or change the series order")
        if name in loose:
            warnings.append(f"{name} is not constrained by the data in the fit window (the model barely depends "
                            "on it there); fix it with --fix")
        span = p.upper - p.lower
        if math.isfinite(p.lower) and abs(p.value - p.lower) <= 1e-6 * max(abs(p.lower), _typical_scale(name), span if math.isfinite(span) else 0):
            warnings.append(f"{name} = {p.value:.6g} sits at its lower bound; its error is not meaningful")
        if math.isfinite(p.upper) and abs(p.upper - p.value) <= 1e-6 * max(abs(p.upper), _typical_scale(name), span if math.isfinite(span) else 0):
            warnings.append(f"{name} = {p.value:.6g} sits at its upper bound; its error is not meaningful")
    d = np.sqrt(np.diag(covariance))
    with np.errstate(divide="ignore", invalid="ignore"):
        correlation = covariance / np.outer(d, d)
    for i in range(len(free)):
        for j in range(i + 1, len(free)):
            if abs(correlation[i, j]) > STRONG_CORRELATION:
                warnings.append(f"{free[i]} and {free[j]} are strongly correlated (r = {correlation[i, j]:+.3f}); "
                                "the data constrain a combination of them: fix one or add data that separates them")
    if reduced > 2.0:
        warnings.append(f"reduced chi^2 = {reduced:.3g} > 2: the model does not describe the data within their "
                        "uncertainties (or the uncertainties are too small); standard errors are then too small")
    for dataset in datasets:
        if dataset.outliers:
            warnings.append(f"{dataset.measurement.source}: {len(dataset.outliers)} possible outliers flagged "
                            "(kept in the fit; see datasets[].outliers)")
    return FitResult(lab, parameters, free, covariance, datasets, reduced, chi2, points, evaluations, warnings,
                     rounds)


# ---------------------------------------------------------------------------------------------------
# Starting values and the entropy check
# ---------------------------------------------------------------------------------------------------

def start_from_curie_weiss(lab: LabModel, curie_weiss, parameters: dict) -> dict:
    """Start values of the reference coupling and g from a Curie–Weiss result (θ and C of the data).

    θ_CW = (c1/c0) |J1| and C = c0 · n N_A g² μ_B² / k_B (c0, c1: first chiT coefficients at the current
    ratios and occupations), so J1 = θ / (c1/c0) and g = sqrt(C / (c0 n N_A μ_B²/k_B)).  Returns the new values
    in the user's unit and convention (only those that are meaningful).
    """
    values = {name: p.value for name, p in parameters.items()}
    symbols = lab.symbol_values(values)
    ratio = curie_weiss_temperature(lab.curves, symbols, 1)
    out = {}
    if ratio != 0 and curie_weiss.theta != 0:
        coupling_kelvin = curie_weiss.theta / ratio          # our convention, K; the sign follows theta
        out[lab.reference] = float(lab_units.convert_energy(lab_units.convert_coupling(coupling_kelvin, "J",
                                                                                     lab.convention), "K",
                                                            lab.energy_unit))
    c0 = curie_constant_reduced(lab.curves, symbols)
    per_g2 = lab_units.reduced_susceptibility_factor(1.0, 1.0, lab.n_magnetic) * c0      # C / g^2, emu K/mol
    if curie_weiss.curie > 0 and per_g2 > 0:
        out["g"] = math.sqrt(curie_weiss.curie / per_g2)
    return out


def entropy_check(result: FitResult) -> list[dict]:
    """Magnetic entropy of each heat-capacity data set against the full n R Σ p ln(2S+1).

    C_mag = C − (lattice + impurity Schottky, fitted) is integrated as ∫ C_mag/T dT over the measured points;
    the part above the highest point is taken from the model's entropy curve, S(∞) − S(T_max).
    """
    from hte.backgrounds import magnetic_entropy

    lab, values = result.lab, result.values()
    out = []
    scale = lab.reduced_temperature(values)
    symbols = lab.symbol_values(values)
    full = lab.n_magnetic * R * lab.curves.entropy_infinite(symbols)
    for d in result.datasets:
        if d.quantity != "C":
            continue
        m = d.measurement
        magnetic = m.value - lab.background_heat_capacity(m.temperature, d.fields, values)
        try:
            entropy = magnetic_entropy(m.temperature, magnetic)
        except ParameterError as exc:
            out.append({"file": m.source, "note": f"entropy not integrated: {exc}"})
            continue
        t_max = float(m.temperature.max())
        sign = 1 if lab.coupling_kelvin(values) > 0 else -1
        curve = lab.curves.curves(symbols, np.array([t_max / scale]), sign=sign)
        above = full - lab.n_magnetic * R * float(curve.curves["S"].estimate[0])
        measured = float(entropy.entropy[-1])
        out.append({"file": m.source, "fields_T": sorted({float(b) for b in d.fields}),
                    "T_from": float(m.temperature.min()), "T_to": t_max,
                    "S_measured": measured, "S_above_T_to_from_series": above,
                    "S_full": full, "n_R_ln_2S_plus_1": lab.n_magnetic * R * math.log(2 * lab.spin + 1),
                    "fraction_recovered": (measured + above) / full if full else None,
                    "unit": "J/(mol K)",
                    "note": "the missing fraction lies below T_from (not measured) or in the backgrounds"})
    return out
