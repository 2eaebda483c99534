r"""A lattice model's reduced curves, built once from its series and evaluated fast for many parameter values.

:class:`ModelCurves` holds the high-temperature series of one lattice model whose coefficients are polynomials
in a few free parameters (coupling ratios such as Jd/J1, occupations of site classes), compiled to float
matrices: substituting numbers is one matrix product.  For given parameter values it returns

* the reduced susceptibility χ* = χ |J1| / (N g² μ_B²) (from M/h, so in a field it includes the (βh)² term),
* the heat capacity C per site (k_B = 1) at fixed field h,
* the magnetisation m = ⟨S^z⟩ per site (in units of g μ_B) at fixed temperature,

each from Padé approximants rebuilt for every parameter value, and, through :func:`hte.curves.curves_from_series`,
the full bands and convergence temperatures T_conv.

Units and conventions (CONVENTIONS.md): H = Σ J_ij S_i·S_j − h Σ S_i^z, J > 0 antiferromagnetic, k_B = 1,
h = g μ_B B.  Temperatures and fields are in units of |J1| (the lattice's reference coupling); J1 may be
antiferromagnetic (sign +1) or ferromagnetic (sign −1).  Because the β^n coefficient of a Heisenberg or XXZ
model without single-ion anisotropy is homogeneous of degree n in the couplings, the series in β|J1| of the model with J1 = sign·|J1| and ratios r has
coefficients sign^n P_n(1, r): a ferromagnetic reference coupling needs no second series.

Field dependence (per site, β = 1/T):

    ln Z(β, h) = lnZ(β) + (βh)²/2 · chiT(β) + (βh)⁴/24 · M4(β) + O((βh)⁶)

so  m = βh chiT + (βh)³ M4 / 6,   M/h = β chiT + β³h² M4 / 6,
    C(β, h) = C(β, 0) + β² h² d²[β² chiT]/dβ² / 2 + β² h⁴ d²[β⁴ M4]/dβ² / 24.

The first omitted term is estimated as (last term)²/(first term) and reported as the truncation error; a field
correction is trusted only while that ratio stays small (see :data:`FIELD_LIMIT`).

Normalisation ``per``: "site" and "cell" and "magnetic" as in CONVENTIONS.md, and "host" = per site of class
``magnetic`` of the undiluted lattice (for a lattice with one site class the same as "site"): the natural unit
for a formula unit with a fixed number of host ions and a variable number of defect spins.

References
----------
.. [1] J. Oitmaa, C. Hamer and W. Zheng, *Series Expansion Methods for Strongly Interacting Lattice Models*
   (Cambridge University Press, 2006), ch. 2-3 (field derivatives of ln Z, Padé analysis of thermodynamics).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np
import sympy

from hte.curves import CurveSet, curves_from_series, energy_series
from hte.errors import ParameterError
from hte.pade import SingularPadeError, VariableTransform, find_defects, near_diagonal_orders, pade

PER_CHOICES = ("site", "cell", "magnetic", "host")
HOST_CLASS = "magnetic"
#: A field correction is used while |next term / first term| stays below this (else the point is flagged).
FIELD_LIMIT = 0.05
#: Lowest temperature (units of |J1|) at which a convergence temperature is looked for.
CONVERGENCE_GRID_FLOOR = 0.05


@dataclass(frozen=True)
class _CompiledSeries:
    """Coefficient lists as float polynomials in the free parameters: c_n = coefficients[n] @ monomials(x)."""

    exponents: np.ndarray        # (K, P) integer exponents of the K monomials in the P parameters
    coefficients: np.ndarray     # (N + 1, K) float
    odd_vanish: bool             # every odd-power coefficient is identically zero

    def __call__(self, monomials: np.ndarray) -> np.ndarray:
        return self.coefficients @ monomials


def _compile(values: list, names: tuple[str, ...]) -> _CompiledSeries:
    symbols = [sympy.Symbol(n) for n in names]
    polynomials = []
    for value in values:
        expr = sympy.sympify(str(value)) if isinstance(value, (str, Fraction)) else sympy.sympify(value)
        unknown = {str(s) for s in expr.free_symbols} - set(names)
        if unknown:
            raise ParameterError(f"series coefficient {value!r} has symbols {', '.join(sorted(unknown))} that are "
                                 f"not model parameters ({', '.join(names) or 'none'})")
        polynomials.append(sympy.Poly(expr, *symbols).as_dict() if symbols else {(): float(expr)})
    monomials = sorted({m for poly in polynomials for m in poly})
    if not monomials:
        monomials = [tuple(0 for _ in names)]
    index = {m: k for k, m in enumerate(monomials)}
    matrix = np.zeros((len(values), len(monomials)))
    for n, poly in enumerate(polynomials):
        for mono, c in poly.items():
            matrix[n, index[mono]] = float(c)
    exponents = np.array(monomials, dtype=int).reshape(len(monomials), len(names))
    odd_vanish = bool(np.all(matrix[1::2] == 0.0))
    return _CompiledSeries(exponents, matrix, odd_vanish)


@dataclass(frozen=True)
class ReducedValues:
    """Estimates of one quantity on a grid, with the truncation error of the field expansion.

    Attributes
    ----------
    estimate : ndarray
        Mean of the approximants of the fixed ensemble (see :meth:`ModelCurves.evaluate`).
    field_error : ndarray
        Estimated size of the first omitted term of the expansion in (βh)², same unit (0 at h = 0).
    field_ratio : ndarray
        |(βh)⁴ term / (βh)² term| (for χ* and m: |(βh)² correction / leading term|), the expansion
        parameter of the field series; above :data:`FIELD_LIMIT` the field expansion is not trusted.
    """

    estimate: np.ndarray
    field_error: np.ndarray
    field_ratio: np.ndarray


class ModelCurves:
    """Reduced χ*, C and m of one lattice model as fast functions of its free parameters.

    Parameters
    ----------
    series : dict or HTSeries
        The `hte series` document (CONVENTIONS.md; symbolic mode for free parameters) or an HTSeries.  Its
        coefficients may contain only the symbols in `parameters`; the reference coupling must be 1.
    lattice : LatticeSpec
        The lattice the series belongs to (for the normalisation).
    parameters : sequence of str
        Names of the free symbols, e.g. ``("Jd", "p_interlayer")``; coupling symbols are ratios to J1.
    per : {"host", "site", "cell", "magnetic"}
        Normalisation of the returned quantities (module docstring).

    Examples
    --------
    >>> model = ModelCurves.build("chain", order=8)                       # doctest: +SKIP
    >>> model.chi([1.0, 2.0], {})                                          # doctest: +SKIP
    """

    def __init__(self, series, lattice, parameters=(), per: str = "host"):
        if per not in PER_CHOICES:
            raise ParameterError(f"per={per!r}: use one of {', '.join(PER_CHOICES)}")
        doc = series.to_json_dict() if hasattr(series, "to_json_dict") else series
        if "series" not in doc:
            raise ParameterError("series: expected the `hte series` JSON document (with a 'series' block)")
        if doc.get("per", "site") != "site":
            raise ParameterError(f"series stored per {doc.get('per')!r}; ModelCurves needs a series per site "
                                 "(rerun `hte series` with --per site)")
        self.lattice = lattice
        self.document = doc
        self.parameters = tuple(parameters)
        self.per = per
        block = doc["series"]
        missing = [k for k in ("lnZ", "chiT", "M4") if k not in block]
        if missing:
            raise ParameterError(f"series lacks {', '.join(missing)}; recompute it with this version of hte")
        self.order = len(block["chiT"]) - 1
        self._lnz = _compile(block["lnZ"][1:], self.parameters)          # lnZ[0] is the entropy, kept apart
        self._lnz0 = _compile(block["lnZ"][:1], self.parameters)
        self._chit = _compile(block["chiT"], self.parameters)
        self._m4 = _compile(block["M4"], self.parameters)
        self._site_scale = self._normalisation()
        self._ensembles: dict = {}
        self._t_conv: dict = {}

    # ------------------------------------------------------------------ construction
    @classmethod
    def build(cls, lattice, *, order: int, spin="1/2", couplings: dict | None = None,
              occupation: dict | None = None, per: str = "host", cache: bool = True, progress: bool = False
              ) -> "ModelCurves":
        """Compute the series (symbolic in the free parameters) and compile it.

        Parameters
        ----------
        lattice : str or LatticeSpec
        order : int
            Highest power of β.
        spin : str or dict
            Spin of every site class, or {class: spin}.
        couplings : dict, optional
            {label: ratio to the reference coupling, or None for a free parameter named after the label}.
            The reference (first) label is always 1.  Labels not mentioned keep the lattice file's default.
        occupation : dict, optional
            {site class: probability, or None for a free parameter named ``p_<class>``}.
        cache : bool
            Keep cluster series in the persistent weight cache (:class:`hte.cache.WeightCache`).
        """
        from hte.lattice import LatticeSpec
        from hte.lattice_file import load_lattice
        from hte.series import compute_series

        spec = lattice if isinstance(lattice, LatticeSpec) else load_lattice(lattice)
        reference = spec.labels[0]
        values, free = {reference: "1"}, []
        for label, ratio in (couplings or {}).items():
            if label not in spec.labels:
                raise ParameterError(f"coupling {label!r} is not a label of lattice {spec.name}; it has "
                                     f"{', '.join(spec.labels)}")
            if label == reference:
                if ratio is not None and float(ratio) != 1.0:
                    raise ParameterError(f"{reference} is the energy unit of the series; its ratio is 1")
                continue
            if ratio is None:
                free.append(label)
            else:
                values[label] = str(Fraction(str(ratio)))
        for label in spec.labels:                               # default couplings of the file, made explicit
            if label not in values and label not in free:
                values[label] = str(spec.couplings.get(label, 0))
        occupations = {}
        for site_class, p in (occupation or {}).items():
            if site_class not in spec.site_classes:
                raise ParameterError(f"occupation: site class {site_class!r} is not in lattice {spec.name}; it has "
                                     f"{', '.join(spec.site_classes)}")
            if p is None:
                occupations[site_class] = f"p_{site_class}"
                free.append(f"p_{site_class}")
            else:
                occupations[site_class] = str(Fraction(str(p)))
        symbolic = bool(free)
        weight_cache = None
        if cache:
            from hte.cache import WeightCache

            weight_cache = WeightCache()
        try:
            series = compute_series(spec, order=order, spin=spin, couplings=values, occupation=occupations,
                                    symbolic=symbolic, per="site", cache=weight_cache, progress=progress)
        finally:
            if weight_cache is not None:
                weight_cache.close()
        return cls(series, spec, parameters=tuple(free), per=per)

    def _normalisation(self):
        """Per-site quantities times this (a compiled polynomial in the parameters, or a float) give `per`."""
        n_sites = self.lattice.n_sites
        if self.per == "site":
            return 1.0
        if self.per == "cell":
            return float(n_sites)
        if self.per == "host":
            hosts = len(self.lattice.sites_of_class(HOST_CLASS))
            if not hosts:
                raise ParameterError(f"per='host' counts sites of class {HOST_CLASS!r}; lattice "
                                     f"{self.lattice.name} has none (use per='site')")
            return n_sites / hosts
        occupied = []
        for site_class, p in self.document.get("occupation", {}).items():
            occupied.append(f"({len(self.lattice.sites_of_class(site_class))})*({p})")
        return _compile(["+".join(occupied) or "0"], self.parameters)

    # ------------------------------------------------------------------ coefficients
    def _point(self, values: dict) -> np.ndarray:
        missing = [n for n in self.parameters if n not in values]
        if missing:
            raise ParameterError(f"model parameters {', '.join(missing)} have no value; the model has "
                                 f"{', '.join(self.parameters)}")
        return np.array([float(values[n]) for n in self.parameters])

    def _monomials(self, compiled: _CompiledSeries, point: np.ndarray) -> np.ndarray:
        if not len(point):
            return np.ones(compiled.exponents.shape[0])
        return np.prod(point[None, :] ** compiled.exponents, axis=1)

    def _scale(self, point) -> float:
        if isinstance(self._site_scale, float):
            return self._site_scale
        occupied = float(self._site_scale(self._monomials(self._site_scale, point))[0])
        if occupied <= 0:
            raise ParameterError("per='magnetic': no occupied sites at these parameter values")
        return self.lattice.n_sites / occupied

    def coefficients(self, values: dict, sign: int = 1) -> dict:
        """Float coefficients of β^n of lnZ, chiT and M4 in the normalisation `per` at parameter `values`.

        `sign` is the sign of the reference coupling J1: −1 multiplies the β^n coefficient by (−1)^n, turning
        the series into one in β|J1| (module docstring).  lnZ[0] is the infinite-temperature entropy.
        """
        point = self._point(values)
        scale = self._scale(point)
        signs = float(sign) ** np.arange(self.order + 1)
        out = {}
        for name, compiled in (("chiT", self._chit), ("M4", self._m4)):
            out[name] = scale * signs * compiled(self._monomials(compiled, point))
        tail = self._lnz(self._monomials(self._lnz, point))
        head = self._lnz0(self._monomials(self._lnz0, point))
        out["lnZ"] = scale * signs * np.concatenate([head, tail])
        return out

    # ------------------------------------------------------------------ bands and T_conv
    def curves(self, values: dict, temperatures, *, sign: int = 1, tolerance: float = 0.01) -> CurveSet:
        """Zero-field χ*, C, S, E with bands and T_conv (temperatures in units of |J1|), Padé method."""
        coefficients = self.coefficients(values, sign)
        doc = {"lattice": self.lattice.name, "per": self.per,
               "series": {k: [float(c) for c in v] for k, v in coefficients.items()}}
        return curves_from_series(doc, "pade", temperatures=temperatures, tolerance=tolerance)

    def convergence_temperatures(self, values: dict, *, sign: int = 1, tolerance: float = 0.01) -> dict:
        """Self-consistent T_conv of χ* and C (units of |J1|) at parameter `values`; None where there is none.

        T_conv of a band depends on the lowest temperature asked for, because approximants are screened for
        poles on the whole segment β ∈ (0, 1/T_lowest].  Scanning T_lowest down from 10 by factors of 1.25,
        each quantity gets the lowest T_conv that is at or above the T_lowest it was computed with (a band
        judged with approximants screened down to where it is used) over the whole scan down to
        :data:`CONVERGENCE_GRID_FLOOR`.  Remembered per (values, sign, tolerance): in a fit that varies only
        J1, g and backgrounds it does not change.
        """
        key = (tuple(float(values[n]) for n in self.parameters), int(sign), float(tolerance))
        if key not in self._t_conv:
            best: dict = {"chi": None, "C": None}
            lowest = 10.0
            while lowest > CONVERGENCE_GRID_FLOOR:
                grid = np.geomspace(lowest, max(50.0, 20.0 * lowest), 121)
                found = self.curves(values, grid, sign=sign, tolerance=tolerance).T_conv
                for name in best:
                    t = found.get(name)
                    if t is not None and t >= lowest and (best[name] is None or t < best[name]):
                        best[name] = t
                lowest /= 1.25
            self._t_conv[key] = best
        return dict(self._t_conv[key])

    # ------------------------------------------------------------------ fast estimates
    def evaluate(self, quantity: str, temperatures, values: dict, *, field=0.0, sign: int = 1) -> ReducedValues:
        """χ* (quantity "chi", M/h), C ("C") or m = ⟨S^z⟩ ("m") per normalisation unit at (T, h).

        The estimate is the mean of a fixed ensemble of near-diagonal Padé approximants (the ones free of
        defects on the segment β ∈ (0, 1/min T] when first asked for), rebuilt from the coefficients at
        `values`; a member that develops a defect at some parameter value is left out there.  A fixed
        ensemble makes the estimate a smooth function of the parameters, as least squares needs.

        Parameters
        ----------
        quantity : {"chi", "C", "m"}
        temperatures, field : array_like
            T and h = g μ_B B in units of |J1|, broadcast against each other; T > 0.
        values : dict
            Free parameter values.
        sign : {1, -1}
            Sign of J1 (1 antiferromagnetic).
        """
        if quantity not in ("chi", "C", "m"):
            raise ParameterError(f"quantity {quantity!r}: use 'chi', 'C' or 'm'")
        temperatures, field = np.broadcast_arrays(np.asarray(temperatures, float), np.asarray(field, float))
        if np.any(~(temperatures > 0)):
            raise ParameterError("temperatures must be > 0 (units of |J1|)")
        beta = 1.0 / temperatures
        c = self.coefficients(values, sign)
        bh2 = (beta * field) ** 2
        in_field = bool(np.any(bh2 != 0))
        zero = np.zeros_like(beta)
        if quantity == "C":
            energy = self._approximants("E", energy_series(list(c["lnZ"]))[1:], beta)
            base = self._estimate(energy, beta, derivative="C")
            first, second = zero, zero
            if in_field:
                chit = self._approximants("chiT", c["chiT"], beta)
                m4 = self._approximants("M4", c["M4"], beta)
                first = field ** 2 * self._second_derivative(chit, beta, power=2) / 2.0
                second = field ** 4 * self._second_derivative(m4, beta, power=4) / 24.0
            estimate = base + first + second
        else:
            first = beta * self._estimate(self._approximants("chiT", c["chiT"], beta), beta)
            second = zero
            if in_field:
                second = beta * bh2 * self._estimate(self._approximants("M4", c["M4"], beta), beta) / 6.0
            if quantity == "m":
                first, second = first * field, second * field
            estimate = first + second
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(second != 0, np.abs(second / np.where(first != 0, first, np.inf)), 0.0)
        error = np.abs(second) * ratio
        return ReducedValues(estimate, error, ratio)

    def chi(self, temperatures, values: dict, *, field=0.0, sign: int = 1) -> np.ndarray:
        """χ* = M/h per normalisation unit (units of g² μ_B² / |J1|); see :meth:`evaluate`."""
        return self.evaluate("chi", temperatures, values, field=field, sign=sign).estimate

    def heat_capacity(self, temperatures, values: dict, *, field=0.0, sign: int = 1) -> np.ndarray:
        """C per normalisation unit (k_B = 1) at fixed field; see :meth:`evaluate`."""
        return self.evaluate("C", temperatures, values, field=field, sign=sign).estimate

    def magnetization(self, fields, temperature, values: dict, *, sign: int = 1) -> np.ndarray:
        """m = ⟨S^z⟩ per normalisation unit (units of g μ_B) at fields h and temperature T (units of |J1|)."""
        return self.evaluate("m", temperature, values, field=fields, sign=sign).estimate

    def entropy_infinite(self, values: dict) -> float:
        """S(T = ∞) per normalisation unit: Σ_c p_c n_c ln(2S_c + 1) over the normalisation count."""
        return float(self.coefficients(values)["lnZ"][0])

    # ------------------------------------------------------------------ ensembles
    def reset_ensembles(self) -> None:
        """Forget the fixed Padé ensembles; the next evaluation chooses them anew for its parameters and grid."""
        self._ensembles.clear()

    def _variable(self, name: str) -> VariableTransform:
        compiled = {"chiT": self._chit, "M4": self._m4}.get(name)
        even = compiled.odd_vanish if compiled is not None else bool(np.all(self._lnz.coefficients[2::2] == 0))
        return VariableTransform("square") if even else VariableTransform("beta")

    def _members(self, name: str, series_x: list, segment_high: float):
        """The fixed ensemble of (L, M) for series `name`, chosen on first use for the segment (0, segment_high]."""
        if name not in self._ensembles:
            order = len(series_x) - 1
            pairs = near_diagonal_orders(order, depth=3, max_offset=2)
            good = []
            for L, M in pairs:
                try:
                    approximant = pade(series_x, L, M)
                except SingularPadeError:
                    continue
                if not find_defects(approximant, (0.0, segment_high)):
                    good.append((L, M))
            self._ensembles[name] = good or [(order, 0)]
        return self._ensembles[name]

    def _approximants(self, name: str, series, beta: np.ndarray):
        """The variable and the (P, Q) float coefficient pairs of the fixed ensemble for these coefficients."""
        variable = self._variable(name)
        series_x = variable.transform_series([float(c) for c in series])
        high = float(variable.forward(beta.max()))
        found = []
        for L, M in self._members(name, series_x, high):
            pair = _float_pade(np.asarray(series_x, dtype=float), L, M)
            if pair is not None and (M == 0 or not _pole_on_segment(pair[1], high)):
                found.append(pair)
        if not found:
            found.append((np.asarray(series_x, dtype=float), np.ones(1)))
        return variable, found

    def _estimate(self, approximants, beta: np.ndarray, derivative: str | None = None) -> np.ndarray:
        """Mean over the ensemble of R(β) (or, with derivative="C", of −β²(R + β R'))."""
        variable, pairs = approximants
        x = variable.forward(beta)
        slope, _ = variable.derivatives(beta)
        samples = []
        for p, q in pairs:
            if derivative == "C":
                values, first, _ = _rational_derivatives(p, q, x)
                samples.append(-beta ** 2 * (values + beta * first * slope))
            else:
                samples.append(_polyval(p, x) / _polyval(q, x))
        return np.mean(samples, axis=0)

    def _second_derivative(self, approximants, beta: np.ndarray, power: int) -> np.ndarray:
        """β² d²[β^power R(β)]/dβ², averaged over the ensemble of R."""
        variable, pairs = approximants
        x = variable.forward(beta)
        slope, curvature = variable.derivatives(beta)
        k = power
        samples = []
        for p, q in pairs:
            f, fx, fxx = _rational_derivatives(p, q, x)
            d1 = fx * slope
            d2 = fxx * slope ** 2 + fx * curvature
            second = k * (k - 1) * beta ** (k - 2) * f + 2 * k * beta ** (k - 1) * d1 + beta ** k * d2
            samples.append(beta ** 2 * second)
        return np.mean(samples, axis=0)


def _float_pade(c: np.ndarray, L: int, M: int):
    """[L/M] Padé coefficients (P, Q with Q(0) = 1) in double precision; None when the system is singular."""
    if M == 0:
        return c[: L + 1].copy(), np.ones(1)
    rows = np.array([[c[k - j] if k - j >= 0 else 0.0 for j in range(1, M + 1)] for k in range(L + 1, L + M + 1)])
    rhs = -c[L + 1: L + M + 1]
    try:
        tail = np.linalg.solve(rows, rhs)
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.isfinite(tail)):
        return None
    q = np.concatenate([[1.0], tail])
    p = np.array([sum(q[j] * c[k - j] for j in range(0, min(k, M) + 1)) for k in range(L + 1)])
    return p, q


def _pole_on_segment(q: np.ndarray, high: float, margin: float = 0.02) -> bool:
    """True when Q has a root within `margin`·|root| of the real segment [0, high] (as :func:`hte.pade.find_defects`)."""
    trimmed = np.trim_zeros(q, "b")
    if trimmed.size <= 1:
        return False
    roots = np.roots(trimmed[::-1])
    nearest = np.clip(roots.real, 0.0, high)
    return bool(np.any(np.abs(roots - nearest) <= margin * np.abs(roots)))


def _polyval(coefficients: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Σ_k a_k x^k by Horner's rule."""
    result = np.zeros_like(x) + coefficients[-1]
    for a in coefficients[-2::-1]:
        result = result * x + a
    return result


def _rational_derivatives(p: np.ndarray, q: np.ndarray, x: np.ndarray):
    """(f, f', f'') of f = P/Q at x."""
    def derivative(a):
        return a[1:] * np.arange(1, a.size) if a.size > 1 else np.zeros(1)

    p1, q1 = derivative(p), derivative(q)
    p2, q2 = derivative(p1), derivative(q1)
    qv = _polyval(q, x)
    f = _polyval(p, x) / qv
    q1v = _polyval(q1, x)
    f1 = (_polyval(p1, x) - f * q1v) / qv
    f2 = (_polyval(p2, x) - 2.0 * f1 * q1v - f * _polyval(q2, x)) / qv
    return f, f1, f2


def curie_weiss_temperature(model: ModelCurves, values: dict, sign: int = 1) -> float:
    """θ_CW in units of |J1| from the first two chiT coefficients: χ ≈ c0/(T − θ) with θ = c1/c0.

    For a Heisenberg model θ = −S(S+1) Σ_j J_ij / 3 (CONVENTIONS.md), negative for antiferromagnets.
    """
    c = model.coefficients(values, sign)["chiT"]
    if c[0] == 0:
        raise ParameterError("the susceptibility series vanishes at infinite temperature (no occupied spins)")
    return float(c[1] / c[0])


def curie_constant_reduced(model: ModelCurves, values: dict) -> float:
    """c0 = T χ* at T → ∞ per normalisation unit: Σ_c p_c n_c S_c(S_c+1)/3 over the normalisation count."""
    return float(model.coefficients(values)["chiT"][0])
