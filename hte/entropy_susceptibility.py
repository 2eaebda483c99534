r"""Susceptibility from the entropy method: χ(T) down to T → 0 through the microcanonical entropy s(e, m).

In a uniform field h along z (coupled as −h M, g μ_B = 1) the series of ln Z per site is

    ln Z(β, h)/N = ln Z(β, 0)/N + (βh)²/2 · c(β) + O(h⁴),   c(β) = ⟨M²⟩/N = T χ/N  (the ``chiT`` series).

Its Legendre transform in both β and h is the microcanonical entropy per site at energy e and magnetisation m.
With h = m/(βc) and the energy relation shifted only at O(m²) (which changes s at O(m⁴), because s is
stationary in β), one finds

    s(e, m) = s(e) − m² / (2 c(e)) + O(m⁴),

where c(e) is T χ/N at the temperature whose energy is e.  So the field-dependent series adds one function of
the energy to the entropy method (the extension of Bernu and Lhuillier [1] to the entropy method of Bernu and
Misguich [2]; the construction below is our own): c(e) is known as a series around e_∞ by composing the c(β)
series with β(e) (the reversion of the energy series), and it is interpolated on [e0, e_∞] with its
low-temperature behaviour built in, c(e) = (1 + x)^ν K(x) with x = (e − e_∞)/(e_∞ − e0) ∈ [−1, 0] and K a
Padé approximant, finite and positive at x = −1:

* gapless, C ∝ T^α and χ ∝ T^κ (``power:KAPPA``, κ = 0 by default: a finite χ(T = 0)): e − e0 ∝ T^(1+α) and
  c = Tχ ∝ T^(1+κ), so ν = (1 + κ)/(1 + α);
* gapped with gap Δ (energy) and spin gap Δ_s (``gapped:DELTA_S``, Δ_s = Δ by default): e − e0 ∝ e^(−Δ/T) and
  c ∝ e^(−Δ_s/T), so ν = Δ_s/Δ.

The construction assumes a ground state without spontaneous moment (c → 0 as T → 0): antiferromagnets,
spin liquids, singlet magnets; not ferromagnets.  Every accepted entropy interpolation s(e) gives E(T); every
accepted approximant K gives c(E(T)); χ* = c/T per site in units of 1/J (the ``chi`` quantity of
:mod:`hte.curves`).  The band spans all pairs, stretched to contain the median of the ensemble of the series
shortened by two orders.

References
----------
.. [1] B. Bernu and C. Lhuillier, "Spin susceptibility of quantum magnets from high to low temperatures",
   Phys. Rev. Lett. 114, 057201 (2015).
.. [2] B. Bernu and G. Misguich, Phys. Rev. B 63, 134409 (2001).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from hte.entropy_method import (EntropyInterpolation, EntropySeries, LowTemperatureClass, entropy_series,
                                interpolation_ensemble, power_series, validated_inputs)
from hte.errors import ParameterError
from hte.pade import (Band, EnsembleMember, PadeApproximant, band_from_samples, compose_series,
                      convergence_temperature, find_defects, multiply_series, pade, screened_ensemble,
                      widen_with_lower_order)

#: Points of x in [−1, 0] where an approximant K must be positive (dense near both ends).
_POSITIVITY_GRID = np.concatenate([np.logspace(-12, 0, 400) - 1.0, -np.logspace(-1, -10, 200), [0.0]])


@dataclass(frozen=True)
class SusceptibilityLowT:
    """Assumed low-temperature law of χ: "power" (value κ, χ ∝ T^κ) or "gapped" (value Δ_s, the spin gap in J).

    ``None`` as value means the default: κ = 0 (finite χ at T = 0) or Δ_s equal to the energy gap Δ.
    """

    kind: str
    value: float | None = None

    @classmethod
    def parse(cls, text: str | None, energy_class: LowTemperatureClass) -> "SusceptibilityLowT":
        """Read the --chi-low-t option ("power:KAPPA" or "gapped:DELTA_S"; None = the default of the class)."""
        if text is None:
            return cls(energy_class.kind)
        kind, sep, value = str(text).partition(":")
        kind = kind.strip()
        try:
            number = float(value) if sep else None
        except ValueError:
            number = float("nan")
        if kind != energy_class.kind:
            example = "power:0 (finite chi at T = 0)" if energy_class.kind == "power" else "gapped:0.5 (spin gap)"
            raise ParameterError(f"--chi-low-t {text!r} must be of the same kind as --low-t {energy_class} "
                                 f"(a gapless spectrum has no spin gap and vice versa); e.g. {example}")
        return cls(kind, number)

    def exponent(self, energy_class: LowTemperatureClass) -> float:
        """ν in T χ ∝ (e − e0)^ν (see the module doc)."""
        if self.kind == "power":
            kappa = 0.0 if self.value is None else self.value
            if not (np.isfinite(kappa) and kappa >= -1.0):
                raise ParameterError(f"--chi-low-t power:{self.value}: the exponent KAPPA of chi ~ T^KAPPA must be "
                                     ">= -1 (0 for a finite chi at T = 0, 1 for chi ~ T)")
            return (1.0 + kappa) / (1.0 + energy_class.value)
        spin_gap = energy_class.value if self.value is None else self.value
        if not (np.isfinite(spin_gap) and spin_gap > 0):
            raise ParameterError(f"--chi-low-t gapped:{self.value}: the spin gap must be a positive number (units "
                                 "of J), e.g. gapped:0.5")
        return spin_gap / energy_class.value

    def describe(self, energy_class: LowTemperatureClass) -> str:
        if self.kind == "power":
            return f"chi ~ T^{0.0 if self.value is None else self.value:g}"
        return f"spin gap {energy_class.value if self.value is None else self.value:g}"


def energy_series_of_chi_t(data: EntropySeries, chi_t: Sequence) -> list:
    """c = T χ/N as a series in δ = e − e_∞, through δ^min(len(chi_t) − 1, order of s − 1)."""
    order = min(len(chi_t) - 1, data.order - 1)
    beta_of_delta = [0.0] + [(j + 1) * data.entropy[j + 1] for j in range(1, order + 1)]   # β = ds/dδ
    return compose_series([float(c) for c in chi_t], beta_of_delta, order)


def auxiliary_chi_series(data: EntropySeries, chi_t: Sequence, e0: float, nu: float) -> list:
    """Series of K(x) = c / (1 + x)^ν in x = (e − e_∞)/(e_∞ − e0)."""
    width = data.e_inf - e0
    c_delta = energy_series_of_chi_t(data, chi_t)
    order = len(c_delta) - 1
    c_x = [c * width ** k for k, c in enumerate(c_delta)]
    return multiply_series(c_x, power_series([1.0, 1.0], -nu, order), order)


def chi_defects(approximant: PadeApproximant) -> list[str]:
    """Poles or Froissart doublets near x ∈ [−1, 0], or K <= 0 there (χ would be negative or infinite).

    Poles beyond x = −1 (energies below e0) are allowed: there K may be genuinely non-analytic (e.g. the
    logarithmic corrections of the Heisenberg chain), and approximants put poles there to mimic it; the values
    on [−1, 0] are checked instead.
    """
    reasons = find_defects(approximant, (-1.0, 0.0), singular_end=-1.0)
    if not reasons:
        values = approximant(_POSITIVITY_GRID)
        if not np.all(np.isfinite(values)) or np.any(values <= 0):
            reasons.append("K(x) <= 0 or not finite on [e0, e_inf] (chi would be negative or infinite)")
    return reasons


def terminating_degree(series: Sequence, rtol: float = 1e-10, zeros: int = 3) -> int | None:
    """Degree d when the last `zeros` or more coefficients are below rtol·max|c| (a polynomial up to rounding).

    A Padé [L/M ≥ 1] of a polynomial is degenerate (a pole cancelled by a zero, or a singular system), so such a
    series is used as it stands; its neglected tail is below rtol·max|c| per order on |x| <= 1.
    """
    values = np.abs(np.asarray(series, dtype=float))
    significant = np.flatnonzero(values > rtol * values.max())
    degree = int(significant[-1]) if significant.size else 0
    return degree if len(values) - 1 - degree >= zeros else None


def chi_ensemble(data: EntropySeries, chi_t: Sequence, e0: float, nu: float, *, depth: int = 3,
                 max_offset: int = 2) -> tuple[list[EnsembleMember], list[PadeApproximant]]:
    """All near-diagonal Padé approximants of K, each checked with :func:`chi_defects`."""
    k_series = auxiliary_chi_series(data, chi_t, e0, nu)
    degree = terminating_degree(k_series)
    if degree is not None:                      # K is a polynomial: it is its own (only) approximant
        approximant = pade(k_series, degree, 0)
        defects = chi_defects(approximant)
        return [EnsembleMember(degree, 0, approximant, defects)], [] if defects else [approximant]
    return screened_ensemble(k_series, lambda approximant: (chi_defects(approximant), approximant), depth=depth,
                             max_offset=max_offset)


def chi_samples(interpolations: list[EntropyInterpolation], approximants: list[PadeApproximant], nu: float,
                temperatures) -> list[np.ndarray]:
    """χ* = (1 + x)^ν K(x) / T at x = (E(T) − e_∞)/(e_∞ − e0), for every (s(e), K) pair."""
    temperatures = np.asarray(temperatures, dtype=float)
    samples = []
    for interpolation in interpolations:
        y = interpolation.gap_fraction_at(temperatures)
        for approximant in approximants:
            samples.append(y ** nu * approximant(y - 1.0) / temperatures)
    return samples


@dataclass
class EntropySusceptibility:
    """χ*(T) = χ J/(N g² μ_B²) per site from the entropy method, with its band (temperatures in units of J).

    exponent : ν in T χ ∝ (e − e0)^ν; members : every [L/M] of K tried, with its defects; pairs : number of
    (s(e), K) combinations in the band.
    """

    temperatures: np.ndarray
    band: Band
    T_conv: float | None
    exponent: float
    low_t: SusceptibilityLowT
    members: list[EnsembleMember]
    pairs: int
    warnings: list[str] = field(default_factory=list)


def entropy_susceptibility(lnZ: Sequence, chi_t: Sequence, e0: float, low_t: LowTemperatureClass | str,
                           temperatures, *, chi_low_t: str | SusceptibilityLowT | None = None,
                           tolerance: float = 0.01, depth: int = 3, chi_depth: int = 5, max_offset: int = 2,
                           estimate: str = "median", spread: str = "minmax") -> EntropySusceptibility:
    """χ*(T) per site from the ln Z and T χ series by the entropy method (see the module doc).

    Parameters
    ----------
    lnZ, chi_t : sequence
        Coefficients of ln Z/N and T χ/N in powers of β = J/T (same normalisation), ln Z through order >= 4.
    e0 : float
        Ground-state energy per site (units of J).
    low_t : LowTemperatureClass or str
        "gapped:DELTA" or "power:ALPHA", as for :func:`hte.entropy_method.entropy_method`.
    temperatures : array_like
        Temperatures > 0 (units of J).
    chi_low_t : str, optional
        "power:KAPPA" (χ ∝ T^KAPPA, default 0) or "gapped:DELTA_S" (spin gap, default the gap of `low_t`).
    depth, chi_depth, max_offset : int
        Ensembles of s(e) and of K: [L/M] with L + M in the last `depth` (`chi_depth`) orders, |L − M| <=
        max_offset.  K is given two more orders by default: many of its approximants carry a pole or doublet on
        [−1, 0] (K is rarely analytic at e0), and on the Heisenberg chain at orders 12-16 depth 3 left 0-3
        survivors where depth 5 leaves 1-6 (measured).

    Raises
    ------
    ParameterError
        The entropy method's own input errors, a T χ series shorter than order 2, a bad `chi_low_t`, or no
        pair of approximants free of defects (the message says what to change).
    """
    data, low_t = validated_inputs(lnZ, e0, low_t)
    if not isinstance(chi_low_t, SusceptibilityLowT):
        chi_low_t = SusceptibilityLowT.parse(chi_low_t, low_t)
    nu = chi_low_t.exponent(low_t)
    if len(chi_t) < 3:
        raise ParameterError(f"entropy method: the chiT series stops at order {len(chi_t) - 1}; the "
                             "susceptibility needs order 2 at least (and works well from about 8 on)")
    temperatures = np.asarray(temperatures, dtype=float)
    _, interpolations = interpolation_ensemble(data, e0, low_t, depth=depth, max_offset=max_offset)
    members, approximants = chi_ensemble(data, chi_t, e0, nu, depth=chi_depth, max_offset=max_offset)
    if not interpolations or not approximants:
        which = "s(e)" if not interpolations else f"K(x) = T chi / (1 + x)^{nu:.4g}"
        raise ParameterError(f"entropy method: no Padé approximant of {which} is free of defects for e0 = {e0:.6g}, "
                             f"{low_t} and {chi_low_t.describe(low_t)}; try another e0, low-temperature class or "
                             "--chi-low-t, or a longer series")
    samples = chi_samples(interpolations, approximants, nu, temperatures)
    band = band_from_samples(np.array(samples), estimate=estimate, spread=spread)
    warnings = []
    if len(samples) == 1:
        warnings.append("chi (entropy method): a single pair of approximants survived; the band has no width "
                        "except for the comparison with the shorter series")
    shorter_order = min(data.order, len(chi_t) - 1) - 2
    if shorter_order >= 4:
        shorter = entropy_series(data.lnZ[:-2])
        _, shorter_interpolations = interpolation_ensemble(shorter, e0, low_t, depth=depth, max_offset=max_offset)
        _, shorter_approximants = chi_ensemble(shorter, chi_t[:-2], e0, nu, depth=chi_depth,
                                               max_offset=max_offset)
        if shorter_interpolations and shorter_approximants:
            band = widen_with_lower_order(band, chi_samples(shorter_interpolations, shorter_approximants, nu,
                                                            temperatures))
        else:
            warnings.append("chi (entropy method): no approximant of the series shortened by two orders is free "
                            "of defects; the band does not include the comparison with lower orders")
    t_conv = convergence_temperature(temperatures, band, tolerance)
    return EntropySusceptibility(temperatures, band, t_conv, nu, chi_low_t, members, len(samples), warnings)
