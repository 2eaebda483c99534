r"""The entropy method: low-temperature thermodynamics from the high-temperature series of ln Z and e0.

Per site, the microcanonical entropy s(e) is interpolated between the ground-state energy e0 (where s = 0) and
the infinite-temperature energy e_∞ = −d(ln Z/N)/dβ at β = 0 (where s = ln Z(0)/N, e.g. ln 2 for S = 1/2, and
ds/de = β = 0).  Around e_∞ the series of s(e) follows from the high-temperature series: with δ = e − e_∞,
β(δ) is the reversion of the energy series e(β) − e_∞ and s(e) = ln Z(0)/N + ∫_0^δ β(u) du.  An auxiliary
function G(e), finite and non-zero at e0 for the assumed low-temperature class, is expanded around e_∞ and
replaced by Padé approximants in x = (e − e_∞)/(e_∞ − e0) ∈ [−1, 0]; s(e) is recovered from G, and then
T = 1/s'(e), C = −s'(e)²/s''(e), E = e and S = s(e) on any temperature grid down to T → 0.

Low-temperature classes (ε = e − e0):

* gapless, C ∝ T^α (``power:ALPHA``): E − e0 ∝ T^(α+1) and S ∝ T^α, so s ∝ ε^a with a = α/(1 + α).
  Auxiliary function G = s^(1/a) / (ε/D) with D = e_∞ − e0; then s = ((1 + x) G)^a.
* gapped with gap Δ (``gapped:DELTA``): a dilute gas of excitations of energy Δ has, with n = ε/Δ,
  s = n (1 − ln n) + O(n²) (up to a constant times n), so s/n + ln n is analytic at n = 0.  Our auxiliary
  function is G = s/n + ln n, n = ε/Δ; then s = n (G − ln n), which vanishes at e0 with
  s'(e) ≈ ln(1/n)/Δ → ∞, i.e. E − e0 ∝ exp(−Δ/T).  (This form is our own derivation; it is exact for
  independent two-level excitations, e.g. the Ising chain's domain walls.)

Energies and temperatures are per site in units of the reference coupling J, k_B = 1.

References
----------
.. [1] B. Bernu and G. Misguich, "Specific heat and high-temperature series of lattice models: interpolation
   scheme and examples on quantum spin systems in one and two dimensions", Phys. Rev. B 63, 134409 (2001).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numpy as np
from scipy.integrate import simpson

from hte.errors import ParameterError
from hte.pade import (Band, EnsembleMember, PadeApproximant, band_from_samples, convergence_temperature,
                      find_defects, multiply_series, screened_ensemble, widen_with_lower_order)

#: Smallest 1 + x = (e − e0)/(e_∞ − e0) used when solving for the energy at a temperature.
_SMALLEST_GAP_FRACTION = 1e-300
_BISECTION_STEPS = 64   # brackets ln(1 + x) in [ln 1e-300, 0] to 690 / 2**64 = 4e-17


@dataclass(frozen=True)
class LowTemperatureClass:
    """Assumed low-temperature behaviour: "gapped" (value = gap Δ, units of J) or "power" (value = α, C ∝ T^α)."""

    kind: str
    value: float

    def __post_init__(self):
        if self.kind not in ("gapped", "power"):
            raise ParameterError(f"low-temperature class {self.kind!r} is unknown; use 'gapped:DELTA' (gap in "
                                 "units of J) or 'power:ALPHA' (C proportional to T^ALPHA)")
        if not (np.isfinite(self.value) and self.value > 0):
            name = "gap DELTA" if self.kind == "gapped" else "exponent ALPHA"
            raise ParameterError(f"low-temperature class {self.kind}: the {name} must be a positive number, got "
                                 f"{self.value}; e.g. 'power:1' for C ~ T, 'power:2' for C ~ T^2, 'gapped:0.5'")

    @classmethod
    def parse(cls, text: str) -> "LowTemperatureClass":
        """Read "gapped:DELTA" or "power:ALPHA" (the --low-t option)."""
        kind, sep, value = str(text).partition(":")
        try:
            number = float(value)
        except ValueError:
            number = None
        if not sep or number is None:
            raise ParameterError(f"--low-t {text!r}: expected 'gapped:DELTA' or 'power:ALPHA' with a number, "
                                 "e.g. 'power:1' or 'gapped:0.4'")
        return cls(kind.strip(), number)

    def __str__(self) -> str:
        return f"{self.kind}:{self.value:g}"


# --- series of s(e) around e_inf -----------------------------------------------------------------------------

def _reversion(series: list, order: int) -> list:
    """Coefficients b_1..b_order (b_0 = 0) of the inverse of y = sum_{n>=1} a_n x^n, a_1 != 0."""
    a1 = series[1]
    inverse = [0.0, 1.0 / a1] + [0.0] * (order - 1)
    for _ in range(order):
        composed = [0.0] * (order + 1)
        power = [1.0] + [0.0] * order
        for n in range(1, order + 1):
            power = multiply_series(power, inverse, order)
            if n >= 2 and n < len(series):
                composed = [c + series[n] * p for c, p in zip(composed, power)]
        # x = (y - sum_{n>=2} a_n x^n) / a_1
        inverse = [0.0] + [((1.0 if k == 1 else 0.0) - composed[k]) / a1 for k in range(1, order + 1)]
    return inverse


def power_series(series: list, exponent: float, order: int) -> list:
    """Coefficients of series(x)^exponent (series[0] > 0) by the J. C. P. Miller recurrence."""
    f0 = series[0]
    out = [f0 ** exponent] + [0.0] * order
    for n in range(1, order + 1):
        total = sum(((exponent + 1) * k - n) * series[k] * out[n - k] for k in range(1, min(n, len(series) - 1) + 1))
        out[n] = total / (n * f0)
    return out


@dataclass(frozen=True)
class EntropySeries:
    """High-temperature data of the entropy method, per site.

    e_inf = e_∞ (units of J); s_inf = ln Z(0)/N; `entropy` = coefficients of s(e) in δ = e − e_∞ through
    the order of the ln Z series (entropy[0] = s_inf, entropy[1] = 0).
    """

    e_inf: float
    s_inf: float
    entropy: list
    lnZ: list

    @property
    def order(self) -> int:
        return len(self.entropy) - 1

    def energy_bound(self) -> float:
        """An energy the truncated series itself certifies to lie above e0: E(β*) where the last two terms of the
        energy series are still below 1e-3 of |E − e_∞| for all β <= β*."""
        n = len(self.lnZ) - 1
        beta = np.linspace(1e-3, 10.0, 2000)
        terms = np.array([-(k + 1) * float(self.lnZ[k + 1]) * beta ** k for k in range(n)])
        shift = terms[1:].sum(axis=0)
        last_terms = np.maximum(np.abs(terms[-1]), np.abs(terms[-2]))    # an even series may end on a zero
        trusted = last_terms <= 1e-3 * np.abs(shift)
        last = np.argmin(trusted) if not trusted.all() else len(beta)
        if last == 0:
            return self.e_inf
        return float(self.e_inf + shift[last - 1])


def entropy_series(lnZ: Sequence) -> EntropySeries:
    """s(e) as a series in δ = e − e_∞ from the series of ln Z/N in β (coefficients l_0..l_N).

    Raises
    ------
    ParameterError
        If the series is shorter than order 4 or its β² coefficient (half the energy variance) is not > 0.
    """
    coefficients = [float(c) for c in lnZ]
    order = len(coefficients) - 1
    if order < 4:
        raise ParameterError(f"entropy method: the lnZ series stops at order {order}; it needs order 4 at least "
                             "(and works well from about 8 on); compute a longer series")
    if not coefficients[2] > 0:
        raise ParameterError(f"entropy method: the beta^2 coefficient of lnZ is {coefficients[2]}, but it is half "
                             "the energy variance at infinite temperature and must be > 0; check the series")
    energy = [-(n + 1) * coefficients[n + 1] for n in range(order)]      # e(β) = sum energy[n] β^n
    beta_of_delta = _reversion([0.0] + energy[1:], order - 1)
    entropy = [coefficients[0], 0.0] + [beta_of_delta[k - 1] / k for k in range(2, order + 1)]
    return EntropySeries(energy[0], coefficients[0], entropy, coefficients)


def auxiliary_series(data: EntropySeries, e0: float, low_t: LowTemperatureClass) -> list:
    """Series of the auxiliary function G in x = (e − e_∞)/(e_∞ − e0), through the order of s (see module doc)."""
    width = data.e_inf - e0
    order = data.order
    s_x = [c * width ** k for k, c in enumerate(data.entropy)]
    one_over = [(-1.0) ** k for k in range(order + 1)]                  # 1/(1 + x)
    if low_t.kind == "power":
        a = low_t.value / (1.0 + low_t.value)
        return multiply_series(power_series(s_x, 1.0 / a, order), one_over, order)
    ratio = width / low_t.value                                           # n = ratio (1 + x)
    g = [c / ratio for c in multiply_series(s_x, one_over, order)]
    g[0] += np.log(ratio)
    for k in range(1, order + 1):
        g[k] += (-1.0) ** (k + 1) / k                                     # ln(1 + x)
    return g


# --- one interpolation ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class EntropyInterpolation:
    """s(e) on [e0, e_∞] built from one Padé approximant of the auxiliary function (units of J, per site)."""

    auxiliary: PadeApproximant
    e0: float
    e_inf: float
    low_t: LowTemperatureClass

    @property
    def width(self) -> float:
        return self.e_inf - self.e0

    def entropy(self, gap_fraction):
        """(s, ds/de, d²s/de²) at e = e0 + gap_fraction·(e_∞ − e0), gap_fraction = 1 + x in (0, 1]."""
        y = np.asarray(gap_fraction, dtype=float)
        g, g1, g2 = self.auxiliary.derivatives(y - 1.0)
        if self.low_t.kind == "power":
            a = self.low_t.value / (1.0 + self.low_t.value)
            u = y * g
            u1 = g + y * g1
            u2 = 2.0 * g1 + y * g2
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                s = u ** a
                s1 = a * u ** (a - 1.0) * u1
                s2 = a * (a - 1.0) * u ** (a - 2.0) * u1 ** 2 + a * u ** (a - 1.0) * u2
        else:
            r = self.width / self.low_t.value
            n = r * y
            log_n = np.log(n)
            s = n * (g - log_n)
            s1 = r * (g - log_n - 1.0) + n * g1
            s2 = 2.0 * r * g1 - r / y + n * g2
        return s, s1 / self.width, s2 / self.width ** 2

    def defects(self, pole_margin: float = 0.02, doublet_tolerance: float = 1e-3) -> list[str]:
        """Poles/doublets near x ∈ [−1, 0], and places where T <= 0, C <= 0 or (gapless) G <= 0."""
        reasons = find_defects(self.auxiliary, (-1.0, 0.0), pole_margin=pole_margin,
                               doublet_tolerance=doublet_tolerance)
        if reasons:
            return reasons
        y = np.concatenate([np.logspace(-14, 0, 600)[:-1], 1.0 - np.logspace(-1, -8, 300)])
        if self.low_t.kind == "power" and np.any(self.auxiliary(y - 1.0) <= 0):
            reasons.append("auxiliary function G <= 0 on [e0, e_inf] (s^(1/a) would be negative)")
        s, s1, s2 = self.entropy(y)
        if not np.all(np.isfinite(s) & np.isfinite(s1) & np.isfinite(s2)):
            reasons.append("s(e) not finite on [e0, e_inf]")
        elif np.any(s1 <= 0):
            reasons.append(f"ds/de <= 0 (negative temperature) at e = {self.e0 + self.width * y[s1 <= 0][0]:.6g}")
        elif np.any(s2 >= 0):
            reasons.append(f"d2s/de2 >= 0 (negative heat capacity) at e = {self.e0 + self.width * y[s2 >= 0][0]:.6g}")
        return reasons

    def gap_fraction_at(self, temperatures) -> np.ndarray:
        """1 + x = (E(T) − e0)/(e_∞ − e0) solving ds/de = 1/T, by bisection in ln(1 + x)."""
        target = 1.0 / np.asarray(temperatures, dtype=float)
        low = np.full_like(target, np.log(_SMALLEST_GAP_FRACTION))
        high = np.zeros_like(target)
        for _ in range(_BISECTION_STEPS):
            middle = 0.5 * (low + high)
            _, slope, _ = self.entropy(np.exp(middle))
            too_cold = slope > target                                     # still below E(T): move up
            low = np.where(too_cold, middle, low)
            high = np.where(too_cold, high, middle)
        return np.exp(0.5 * (low + high))

    def thermodynamics(self, temperatures) -> dict[str, np.ndarray]:
        """E (J per site), S (per site, k_B = 1) and C (per site, k_B = 1) at the given temperatures (J)."""
        y = self.gap_fraction_at(temperatures)
        s, s1, s2 = self.entropy(y)
        return {"E": self.e0 + self.width * y, "S": s, "C": -s1 ** 2 / s2}


@dataclass(frozen=True)
class SumRuleCheck:
    """Numerical integrals of the constructed C(T) against their exact values (per site, units of J).

    entropy_integral ≈ ∫_0^∞ C/T dT, expected ln Z(0)/N; energy_integral ≈ ∫_0^∞ C dT, expected e_∞ − e0.
    """

    entropy_integral: float
    entropy_expected: float
    energy_integral: float
    energy_expected: float

    @property
    def worst_deviation(self) -> float:
        return max(abs(self.entropy_integral - self.entropy_expected),
                   abs(self.energy_integral - self.energy_expected))


def check_sum_rules(interpolation: EntropyInterpolation, data: EntropySeries, points: int = 4001) -> SumRuleCheck:
    """Integrate C(T) and C(T)/T of one interpolation numerically (Simpson in ln T).

    The range runs from T_low, where (E − e0)/(e_∞ − e0) = 1e-30, to T_high, where the last two terms of the
    high-temperature energy series are below 1e-13; the part above T_high is taken from the truncated high-temperature
    series of E and S, the part below T_low from the interpolation itself (s(E(T_low)) and E(T_low) − e0).
    """
    beta_grid = np.logspace(0, -6, 300)
    n = len(data.lnZ) - 1
    last = np.maximum(abs(data.lnZ[-1]) * n * beta_grid ** (n - 1),
                      abs(data.lnZ[-2]) * (n - 1) * beta_grid ** (n - 2))
    beta_high = float(beta_grid[np.argmax(last < 1e-13)])
    _, slope_low, _ = interpolation.entropy(1e-30)
    t_low, t_high = 1.0 / float(slope_low), 1.0 / beta_high
    temperatures = np.exp(np.linspace(np.log(t_low), np.log(t_high), points))
    values = interpolation.thermodynamics(temperatures)
    heat = values["C"]
    log_t = np.log(temperatures)
    entropy_integral = simpson(heat, x=log_t)
    energy_integral = simpson(heat * temperatures, x=log_t)
    powers = beta_high ** np.arange(n + 1)
    lnz = np.dot(data.lnZ, powers)
    energy_high = -np.dot(np.arange(n + 1) * np.asarray(data.lnZ), powers) / beta_high
    entropy_high = lnz + beta_high * energy_high
    entropy_integral += (data.s_inf - entropy_high) + values["S"][0]
    energy_integral += (data.e_inf - energy_high) + (values["E"][0] - interpolation.e0)
    return SumRuleCheck(float(entropy_integral), data.s_inf, float(energy_integral), data.e_inf - interpolation.e0)


# --- ensembles -----------------------------------------------------------------------------------------------

@dataclass
class EntropyMethodResult:
    """Entropy-method curves on a temperature grid (ascending, units of J) with bands over the Padé ensemble.

    curves : {"C", "S", "E"} -> Band, per site, k_B = 1 (E in units of J).
    T_conv : lowest temperature above which each band's relative half-width stays below the tolerance
        (None if it never does).
    members : every [L/M] tried with its defects; `interpolations` the accepted ones, in the same order as
        `sum_rules`.
    """

    temperatures: np.ndarray
    e0: float
    low_t: LowTemperatureClass
    curves: dict[str, Band]
    T_conv: dict[str, float | None]
    members: list[EnsembleMember]
    interpolations: list[EntropyInterpolation]
    sum_rules: list[SumRuleCheck]
    warnings: list[str] = field(default_factory=list)


def validated_inputs(lnZ, e0, low_t) -> tuple[EntropySeries, LowTemperatureClass]:
    """The series of s(e) and the parsed low-temperature class; ParameterError for a bad class, series or e0."""
    if isinstance(low_t, str):
        low_t = LowTemperatureClass.parse(low_t)
    if not isinstance(low_t, LowTemperatureClass):
        raise ParameterError("entropy method: low_t must be 'gapped:DELTA', 'power:ALPHA' or a "
                             "LowTemperatureClass")
    data = entropy_series(lnZ)
    if e0 is None or not np.isfinite(e0):
        raise ParameterError("entropy method: the ground-state energy per site e0 is required (--e0 E, units of "
                             "the reference coupling)")
    bound = data.energy_bound()
    if not e0 < bound:
        raise ParameterError(f"entropy method: e0 = {e0:.6g} lies above the energy {bound:.6g} that the series "
                             f"itself reaches at moderate temperature (e_inf = {data.e_inf:.6g}); the ground state "
                             "must lie lower: give a smaller (more negative) e0")
    return data, low_t


def interpolation_ensemble(data: EntropySeries, e0: float, low_t: LowTemperatureClass, *, depth: int = 3,
                           max_offset: int = 2) -> tuple[list[EnsembleMember], list[EntropyInterpolation]]:
    """All near-diagonal Padé approximants of G, each checked with :meth:`EntropyInterpolation.defects`."""
    def screen(approximant):
        interpolation = EntropyInterpolation(approximant, float(e0), data.e_inf, low_t)
        return interpolation.defects(), interpolation

    return screened_ensemble(auxiliary_series(data, e0, low_t), screen, depth=depth, max_offset=max_offset)


def _curve_samples(interpolations: list[EntropyInterpolation], temperatures) -> dict[str, list]:
    samples = {name: [] for name in ("C", "S", "E")}
    for interpolation in interpolations:
        for name, values in interpolation.thermodynamics(temperatures).items():
            samples[name].append(values)
    return samples


def entropy_method(lnZ: Sequence, e0: float, low_t: LowTemperatureClass | str, temperatures, *,
                   tolerance: float = 0.01, depth: int = 3, max_offset: int = 2, estimate: str = "median",
                   spread: str = "minmax") -> EntropyMethodResult:
    """C(T), S(T), E(T) per site from the entropy method, with bands over the accepted Padé approximants.

    Estimate = median of the accepted interpolations; band = their min/max, stretched to contain the median of
    the ensemble built from the lnZ series shortened by two orders (see :func:`hte.pade.widen_with_lower_order`).

    Parameters
    ----------
    lnZ : sequence
        Coefficients of ln Z/N in powers of β = J/T, l_0 = ln(2S+1) × occupation, through order N >= 4.
    e0 : float
        Ground-state energy per site (units of J).
    low_t : LowTemperatureClass or str
        "gapped:DELTA" or "power:ALPHA".
    temperatures : array_like
        Temperatures > 0 (units of J).

    Raises
    ------
    ParameterError
        Bad e0 (above what the series itself reaches), α or Δ <= 0, a series shorter than order 4, or no
        approximant free of defects (the message suggests what to change).
    """
    data, low_t = validated_inputs(lnZ, e0, low_t)
    temperatures = np.asarray(temperatures, dtype=float)
    members, accepted = interpolation_ensemble(data, e0, low_t, depth=depth, max_offset=max_offset)
    if not accepted:
        raise ParameterError(f"entropy method: none of the {len(members)} Padé approximants of the auxiliary "
                             f"function is free of defects for e0 = {e0:.6g} and {low_t}; try other e0 or "
                             "low-temperature class (see entropy_scan) or a longer series")
    samples = _curve_samples(accepted, temperatures)
    curves = {name: band_from_samples(np.array(v), estimate=estimate, spread=spread) for name, v in samples.items()}
    warnings = []
    if len(accepted) == 1:
        warnings.append(f"entropy method: only {accepted[0].auxiliary.label} survived; the band has no width "
                        "except for the comparison with the shorter series")
    if data.order - 2 >= 4:
        shorter = entropy_series(data.lnZ[:-2])
        _, accepted_shorter = interpolation_ensemble(shorter, e0, low_t, depth=depth, max_offset=max_offset)
        if accepted_shorter:
            lower_order = _curve_samples(accepted_shorter, temperatures)
            curves = {name: widen_with_lower_order(band, lower_order[name]) for name, band in curves.items()}
        else:
            warnings.append(f"entropy method: no approximant of the series shortened to order {shorter.order} is "
                            "free of defects; the band does not include the comparison with lower orders")
    t_conv = {name: convergence_temperature(temperatures, band, tolerance) for name, band in curves.items()}
    sum_rules = [check_sum_rules(interpolation, data) for interpolation in accepted]
    return EntropyMethodResult(temperatures, float(e0), low_t, curves, t_conv, members, accepted, sum_rules,
                               warnings)


@dataclass(frozen=True)
class ScanPoint:
    """One (e0, low-temperature class) of a scan: how many approximants survive and how far they disagree.

    spread_C = largest relative half-width of the C band (min/max of the accepted approximants) over the
    temperature grid, and T_conv_C the lowest temperature above which it stays below the tolerance; both None
    with fewer than 2 survivors.
    """

    e0: float
    low_t: LowTemperatureClass
    accepted: int
    total: int
    spread_C: float | None
    T_conv_C: float | None

    def to_json_dict(self) -> dict:
        return {"e0": self.e0, "low_t": str(self.low_t), "accepted": self.accepted, "total": self.total,
                "spread_C": self.spread_C, "T_conv_C": self.T_conv_C}


def entropy_scan(lnZ: Sequence, e0_values: Sequence[float], low_t_values: Sequence, temperatures, *,
                 tolerance: float = 0.01, depth: int = 3, max_offset: int = 2) -> list[ScanPoint]:
    """Scan e0 and the low-temperature class; consistent choices keep many approximants with a small spread.

    Choices that are impossible (e0 above the series' energy bound, α or Δ <= 0) raise ParameterError, as in
    :func:`entropy_method`.
    """
    temperatures = np.asarray(temperatures, dtype=float)
    points = []
    for e0 in e0_values:
        for low_t in low_t_values:
            data, low_t = validated_inputs(lnZ, e0, low_t)
            members, accepted = interpolation_ensemble(data, e0, low_t, depth=depth, max_offset=max_offset)
            spread = t_conv = None
            if len(accepted) >= 2:
                band = band_from_samples(np.array(_curve_samples(accepted, temperatures)["C"]))
                spread = float(np.max(band.relative_half_width()))
                t_conv = convergence_temperature(temperatures, band, tolerance)
            points.append(ScanPoint(float(e0), low_t, len(accepted), len(members), spread, t_conv))
    return points
