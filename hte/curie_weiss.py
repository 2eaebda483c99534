r"""Curie–Weiss analysis of a measured susceptibility.

Model: chi(T) = C / (T - theta) + chi0, chi in emu/mol per formula unit, T in K.  Sign convention as
laboratories write it: theta < 0 means a net antiferromagnetic interaction, theta > 0 a ferromagnetic one.
With our Hamiltonian H = J sum_<ij> S_i.S_j (J > 0 antiferromagnetic) the mean-field (high-temperature)
relation is theta = -S(S+1) sum_j J_ij / 3, sum over the neighbours j of one magnetic ion [1]_.

Uncertainties: with per-point uncertainties sigma the fit is weighted and the parameter covariance is
(J^T J)^-1 of the weighted residuals, taken as absolute; without them all points weigh the same and the
covariance is scaled by the residual variance (reduced chi^2).  Derived quantities (mu_eff, g, J) are
propagated to first order.

References
----------
.. [1] J. S. Smart, Effective Field Theories of Magnetism (Saunders, 1966), ch. 2 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares
from scipy.stats import chi2 as chi2_distribution

from hte import units as lab_units
from hte.atomic import write_atomically
from hte.errors import DataFileError, ParameterError
from hte.measured import Measurement, local_scatter

SIGN_CONVENTION = "chi = C/(T - theta) + chi0; theta < 0: net antiferromagnetic, theta > 0: net ferromagnetic"


@dataclass(frozen=True)
class CurieWeissResult:
    """Fitted Curie–Weiss parameters with standard errors.

    Attributes
    ----------
    curie, curie_err : float
        Curie constant C and its standard error, emu K/mol per formula unit.
    theta, theta_err : float
        Weiss temperature in K; theta < 0 antiferromagnetic, theta > 0 ferromagnetic.
    chi0, chi0_err : float
        Temperature-independent term in emu/mol (chi0_err = 0 when chi0 was fixed).
    covariance : numpy.ndarray
        Covariance of the free parameters in the order of `parameter_names`.
    parameter_names : tuple of str
        ``("C", "theta", "chi0")`` or ``("C", "theta")`` when chi0 was fixed.
    t_min, t_max : float
        Temperature window used, K.
    points : int
        Number of points in the window.
    reduced_chi2 : float or None
        Sum of squared weighted residuals over the degrees of freedom; None for an unweighted fit.
    rms_residual : float
        Root-mean-square of chi_data - chi_fit in the window, emu/mol.
    weighted : bool
        Whether per-point uncertainties were used.
    window : str
        ``"user"`` or ``"auto"`` (see :func:`fit_curie_weiss`).
    n_magnetic : float
        Magnetic ions per formula unit, for per-ion quantities.
    warnings : tuple of str
        Things the reader of the result should know.
    """

    curie: float
    curie_err: float
    theta: float
    theta_err: float
    chi0: float
    chi0_err: float
    covariance: np.ndarray
    parameter_names: tuple
    t_min: float
    t_max: float
    points: int
    reduced_chi2: float | None
    rms_residual: float
    weighted: bool
    window: str
    n_magnetic: float = 1
    warnings: tuple = ()

    def correlation(self) -> np.ndarray:
        """Correlation matrix of the free parameters (order of `parameter_names`)."""
        scale = np.sqrt(np.diag(self.covariance))
        return self.covariance / np.outer(scale, scale)

    def effective_moment(self) -> tuple[float, float]:
        """mu_eff = sqrt(3 k_B C / (n N_A mu_B^2)) in mu_B per magnetic ion, and its standard error."""
        moment = lab_units.effective_moment(self.curie, self.n_magnetic)
        return moment, moment * self.curie_err / (2.0 * self.curie)

    def g_factor(self, spin: float) -> tuple[float, float]:
        """Landé g implied by C for spin S (C = n N_A g^2 mu_B^2 S(S+1)/(3 k_B)), and its standard error."""
        if spin <= 0:
            raise ParameterError(f"spin = {spin}; give S > 0 (e.g. 0.5).")
        g = math.sqrt(self.curie / lab_units.curie_constant(1.0, spin, self.n_magnetic))
        return g, g * self.curie_err / (2.0 * self.curie)

    def exchange(self, spin: float, coupling_sum: float, energy_unit: str = "K",
                 convention: str = "J") -> tuple[float, float]:
        """Exchange constant implied by theta = -S(S+1) sum_j J_ij / 3, and its standard error.

        Parameters
        ----------
        spin : float
            Spin S of the magnetic ions.
        coupling_sum : float
            sum_j J_ij / J over the neighbours of one ion, e.g. z = 4 on the square lattice, or
            z1 + z2 J2/J1 with further neighbours.
        energy_unit : str
            ``"K"``, ``"meV"``, ``"cm-1"`` or ``"J"``.
        convention : str
            Hamiltonian convention of the returned value (see :func:`hte.units.convert_coupling`); ours is
            ``"J"``: H = J sum S_i.S_j, J > 0 antiferromagnetic.
        """
        if spin <= 0 or coupling_sum == 0:
            raise ParameterError(f"spin = {spin}, coupling_sum = {coupling_sum}: need S > 0 and a nonzero sum.")
        factor = -3.0 / (spin * (spin + 1) * coupling_sum)
        scale = lab_units.convert_coupling(lab_units.convert_energy(1.0, "K", energy_unit), "J", convention)
        return factor * self.theta * scale, abs(factor * scale) * self.theta_err

    def report(self) -> str:
        """Human-readable summary stating the sign convention."""
        moment, moment_err = self.effective_moment()
        lines = [
            f"Curie-Weiss fit: {SIGN_CONVENTION}",
            f"  window {self.t_min:g}-{self.t_max:g} K ({self.window}), {self.points} points, "
            f"{'weighted, reduced chi^2 = %.3g' % self.reduced_chi2 if self.weighted else 'unweighted'}, "
            f"rms residual {self.rms_residual:.3g} emu/mol",
            f"  C     = {self.curie:.6g} +- {self.curie_err:.2g} emu K/mol",
            f"  theta = {self.theta:.6g} +- {self.theta_err:.2g} K "
            f"({'antiferromagnetic' if self.theta < 0 else 'ferromagnetic'} sign)",
            f"  chi0  = {self.chi0:.6g} +- {self.chi0_err:.2g} emu/mol" + ("" if "chi0" in self.parameter_names
                                                                       else " (fixed)"),
            f"  mu_eff = {moment:.4g} +- {moment_err:.2g} mu_B per magnetic ion (n = {self.n_magnetic:g})",
        ]
        correlation = self.correlation()
        names = self.parameter_names
        lines.append("  correlations: " + ", ".join(f"{names[i]}-{names[j]} {correlation[i, j]:+.3f}"
                                                     for i in range(len(names)) for j in range(i + 1, len(names))))
        lines += [f"  warning: {text}" for text in self.warnings]
        return "\n".join(lines)


def fit_curie_weiss(measurement: Measurement, t_min: float | None = None, t_max: float | None = None, *,
                    fit_chi0: bool = True, chi0: float = 0.0, min_points: int = 8,
                    min_t_over_theta: float = 2.0, significance: float = 1e-3,
                    next_order_limit: float = 3.0) -> CurieWeissResult:
    r"""Fit chi = C/(T - theta) + chi0 over a temperature window (theta < 0: antiferromagnetic).

    Window: with `t_min` and/or `t_max` given, the points with t_min <= T <= t_max.  Otherwise it is chosen
    automatically among the windows [T_k, T_max] that reach down from the highest temperature: the one
    reaching lowest among those that

    (a) hold at least `min_points` points;
    (b) pass a lack-of-fit test: the chi^2 of the fit against the noise (the data's uncertainties, or else
        the local scatter of the data, :func:`hte.measured.local_scatter`) has a p-value above `significance`;
    (c) start at T_k >= min_t_over_theta * |theta| with theta < T_k (Curie–Weiss is a high-temperature form;
        fitting at T >~ 2|theta| is common practice);
    (d) show no next-order term: the high-temperature expansion chi = (C/T)(1 + theta/T + a_2/T^2 + ...)
        departs from C/(T - theta) first at order 1/T^3, so the fit is repeated with an extra D/T^3 and the
        window is refused when |D| exceeds `next_order_limit` standard errors.

    Parameters
    ----------
    measurement : Measurement
        Susceptibility (quantity ``"chi"``) in emu/mol.
    t_min, t_max : float, optional
        User window in K.
    fit_chi0 : bool
        Fit chi0; if False it is held at `chi0` (emu/mol).
    min_points : int
        Fewest points in a window.
    min_t_over_theta, significance, next_order_limit : float
        Settings of tests (c), (b) and (d) of the automatic window.

    Raises
    ------
    DataFileError
        Too few points in the window, or no automatic window passes the tests.
    ParameterError
        Wrong quantity or impossible option.
    """
    if measurement.quantity != "chi":
        raise ParameterError(f"{measurement.source}: Curie-Weiss analysis needs chi(T), got {measurement.quantity!r};"
                             f" turn M(T) into chi with hte.measured.susceptibility_from_magnetization.")
    if min_points < 5:
        raise ParameterError(f"min_points = {min_points}: a Curie-Weiss window needs at least 5 points.")
    temps = measurement.temperature
    lower = -np.inf if t_min is None else t_min
    upper = np.inf if t_max is None else t_max
    selected = np.flatnonzero((temps >= lower) & (temps <= upper))
    if selected.size < min_points:
        span = (f"{t_min:g}-{t_max:g} K" if t_min is not None and t_max is not None
                else f"T >= {t_min:g} K" if t_min is not None else f"T <= {upper:g} K")
        raise DataFileError(f"{measurement.source}: the window {span} holds {selected.size} "
                            f"points; a Curie-Weiss fit needs at least {min_points}. Widen the window.")
    if t_min is not None:
        return _result(measurement, selected, fit_chi0, chi0, "user", min_t_over_theta)
    sigma = measurement.sigma
    noise = sigma if sigma is not None else local_scatter(measurement)
    step = max(1, selected.size // 200)          # at most ~200 trial windows
    accepted = None
    for start in range(selected.size - min_points, -1, -step):
        window = selected[start:]
        values = measurement.value[window]
        weights = None if sigma is None else sigma[window]
        parameters, residual, _ = _fit(temps[window], values, weights, fit_chi0, chi0)
        statistic = float(np.sum(residual**2 if sigma is not None else (residual / noise[window]) ** 2))
        fits = chi2_distribution.sf(statistic, window.size - len(parameters)) > significance
        theta = parameters[1]
        high_enough = theta < temps[window[0]] and temps[window[0]] >= min_t_over_theta * abs(theta)
        if fits and high_enough:
            extended, _, covariance = _fit(temps[window], values, weights, fit_chi0, chi0, next_order=True)
            if abs(extended[-1]) <= next_order_limit * np.sqrt(covariance[-1, -1]):
                accepted = window
    if accepted is None:
        raise DataFileError(f"{measurement.source}: no window of >= {min_points} points reaching up to "
                            f"{temps[selected[-1]]:g} K follows Curie-Weiss within the noise at T >= "
                            f"{min_t_over_theta:g}|theta|; give t_min explicitly to choose the window yourself.")
    return _result(measurement, accepted, fit_chi0, chi0, "auto", min_t_over_theta)


def _result(measurement, window, fit_chi0, chi0, how, min_t_over_theta) -> CurieWeissResult:
    temps = measurement.temperature[window]
    sigma = None if measurement.sigma is None else measurement.sigma[window]
    parameters, residual, covariance = _fit(temps, measurement.value[window], sigma, fit_chi0, chi0)
    misfit = residual if sigma is None else residual * sigma
    errors = np.sqrt(np.diag(covariance))
    curie, theta = parameters[0], parameters[1]
    warnings = []
    if theta >= temps.min():
        warnings.append(f"theta = {theta:g} K lies inside the window (T >= {temps.min():g} K): the fit is not "
                        f"meaningful there; use a window at higher temperature.")
    elif temps.min() < min_t_over_theta * abs(theta):
        warnings.append(f"the window starts at {temps.min():g} K < {min_t_over_theta:g}|theta| = "
                        f"{min_t_over_theta * abs(theta):g} K, where Curie-Weiss is not expected to hold.")
    if curie <= 0:
        warnings.append(f"C = {curie:g} emu K/mol is not positive: the data do not look paramagnetic here.")
    return CurieWeissResult(
        curie=float(curie), curie_err=float(errors[0]), theta=float(theta), theta_err=float(errors[1]),
        chi0=float(parameters[2]) if fit_chi0 else float(chi0), chi0_err=float(errors[2]) if fit_chi0 else 0.0,
        covariance=covariance, parameter_names=("C", "theta", "chi0") if fit_chi0 else ("C", "theta"),
        t_min=float(temps.min()), t_max=float(temps.max()), points=int(window.size),
        reduced_chi2=float(np.mean(residual**2) * window.size / (window.size - len(parameters)))
        if sigma is not None else None,
        rms_residual=float(np.sqrt(np.mean(misfit**2))),
        weighted=sigma is not None, window=how, n_magnetic=measurement.n_magnetic, warnings=tuple(warnings))


def _fit(temps, chi, sigma, fit_chi0, chi0, next_order=False):
    """Least squares for C, theta (, chi0) (, D of an extra D/T^3 term).

    Returns the parameters, the residuals (divided by sigma when given) and the covariance: (J^T J)^-1 of the
    weighted problem, absolute with sigma, else scaled by the residual variance.
    """
    weight = np.ones_like(temps) if sigma is None else 1.0 / sigma
    start = _linear_start(temps, chi, fit_chi0, chi0)
    if next_order:
        start = np.append(start, 0.0)

    def residuals(p):
        model = p[0] / (temps - p[1]) + (p[2] if fit_chi0 else chi0) + (p[-1] / temps**3 if next_order else 0.0)
        return (model - chi) * weight

    def jacobian(p):
        inverse = 1.0 / (temps - p[1])
        columns = [inverse, p[0] * inverse**2]
        columns += [np.ones_like(temps)] if fit_chi0 else []
        columns += [temps**-3.0] if next_order else []
        return np.column_stack(columns) * weight[:, None]

    solution = least_squares(residuals, start, jac=jacobian, x_scale="jac", method="lm")
    matrix = jacobian(solution.x)
    norms = np.linalg.norm(matrix, axis=0)          # unit-norm columns: C, theta, chi0 differ by decades
    scaled = matrix / norms
    covariance = np.linalg.pinv(scaled.T @ scaled) / np.outer(norms, norms)
    if sigma is None:
        covariance *= np.sum(solution.fun**2) / (temps.size - len(start))
    return solution.x, solution.fun, covariance


def _linear_start(temps, chi, fit_chi0, chi0):
    """Starting values from the linearised form chi T = (C - chi0 theta) + theta chi + chi0 T."""
    if fit_chi0:
        design = np.column_stack([np.ones_like(temps), chi, temps])
        (a, theta, offset), *_ = np.linalg.lstsq(design, chi * temps, rcond=None)
        return np.array([a + offset * theta, theta, offset])
    shifted = chi - chi0
    (curie, theta), *_ = np.linalg.lstsq(np.column_stack([np.ones_like(temps), shifted]), shifted * temps, rcond=None)
    return np.array([curie, theta])


def plot_curie_weiss(result: CurieWeissResult, measurement: Measurement, path) -> Path:
    """Draw 1/(chi - chi0) against T with the fitted line (T - theta)/C; write `path` atomically.

    The format follows the file suffix (``.png``, ``.pdf``, ``.svg``).  Points with chi - chi0 <= 0 cannot be
    drawn on this axis and are left out (the legend says how many).
    """
    from matplotlib.figure import Figure

    path = Path(path)
    shifted = measurement.value - result.chi0
    drawable = shifted > 0
    in_window = (measurement.temperature >= result.t_min) & (measurement.temperature <= result.t_max)
    figure = Figure(figsize=(6.0, 4.5), layout="constrained")
    axes = figure.add_subplot()
    outside = drawable & ~in_window
    axes.plot(measurement.temperature[outside], 1.0 / shifted[outside], "o", ms=3, color="0.6",
              label="data outside the window")
    axes.plot(measurement.temperature[drawable & in_window], 1.0 / shifted[drawable & in_window], "o", ms=3,
              color="C0", label=f"fit window {result.t_min:g}-{result.t_max:g} K")
    line_t = np.linspace(min(result.theta, 0.0), measurement.temperature.max(), 200)
    axes.plot(line_t, (line_t - result.theta) / result.curie, "-", color="C3",
              label=f"C = {result.curie:.4g} emu K/mol, theta = {result.theta:.4g} K")
    axes.axhline(0.0, color="k", lw=0.5)
    axes.axvline(0.0, color="k", lw=0.5)
    axes.set_xlabel("T (K)")
    axes.set_ylabel("1/(chi - chi0) (mol/emu)")
    hidden = int(np.count_nonzero(~drawable))
    note = f"; {hidden} points with chi <= chi0 not shown" if hidden else ""
    axes.set_title(f"Curie-Weiss: theta < 0 antiferromagnetic; chi0 = {result.chi0:.3g} emu/mol{note}",
                   fontsize=9)
    axes.legend(fontsize=8)
    write_atomically(path, figure.savefig)
    return path
