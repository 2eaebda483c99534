r"""Dlog-Padé analysis of a series with a power-law singularity f(β) ≈ A (1 − β/β_c)^(−γ).

The logarithmic derivative g = d ln f/dβ = f'/f ≈ γ/(β_c − β) has a simple pole at β_c with residue −γ, which
Padé approximants of g represent well.  :func:`dlog_pade` forms near-diagonal approximants of g, takes for each
the smallest positive real pole as β_c and −(its residue) as γ, rejects defective approximants, and returns
the median with half the min-max range as the error.  :func:`biased_exponent` estimates γ at a given β_c from
Padé approximants of (β_c − β) g(β) evaluated at β_c.  :func:`dlog_curve` integrates an approximant back to
f(β) = f(0) exp(∫_0^β g) below β_c.

β is the series variable (for thermodynamic series β = J/T with k_B = 1, so T_c = 1/β_c in units of J); any
other variable (such as v = tanh(J/T) for Ising models) works the same way, and `T_c` then has no meaning.

References
----------
.. [1] G. A. Baker Jr., "Application of the Padé approximant method to the investigation of some magnetic
   properties of the Ising model", Phys. Rev. 124, 768 (1961).
.. [2] A. J. Guttmann, "Asymptotic analysis of power-series expansions", in *Phase Transitions and Critical
   Phenomena*, vol. 13, ed. C. Domb and J. L. Lebowitz (Academic Press, 1989).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Sequence

import numpy as np

from hte.errors import ParameterError
from hte.pade import (EnsembleMember, PadeApproximant, SingularPadeError, as_coefficients,
                      froissart_doublets, multiply_series, near_diagonal_orders, pade, pade_or_singular)

#: Poles with |Im p| below this fraction of |p| count as real.
REAL_AXIS_TOLERANCE = 1e-7


def log_derivative_series(coefficients: Sequence) -> list:
    """Coefficients of d ln f/dβ = f'/f through order N − 1, from f's c_0..c_N (c_0 != 0)."""
    c = as_coefficients(coefficients)
    if c[0] == 0:
        raise ParameterError("Dlog-Padé needs a series with a non-zero constant term f(0); divide out the leading "
                             "power of β first")
    order = len(c) - 1
    derivative = [(n + 1) * c[n + 1] for n in range(order)]
    reciprocal = [1 / c[0]] + [c[0] * 0] * (order - 1)
    for n in range(1, order):
        reciprocal[n] = -sum(c[k] * reciprocal[n - k] for k in range(1, n + 1)) / c[0]
    return multiply_series(derivative, reciprocal, order - 1)


@dataclass(frozen=True)
class SingularityEstimate:
    """What one approximant [L/M] (`label`, as requested) says: location β_c of the singularity (units of the
    series variable) and γ."""

    label: str
    beta_c: float
    gamma: float
    approximant: PadeApproximant = field(repr=False, compare=False)


@dataclass
class CriticalEstimate:
    """Ensemble estimate of a power-law singularity f ≈ A (1 − β/β_c)^(−γ).

    `beta_c` and `gamma` are medians over the accepted approximants; the errors are half their min-max
    range (0 when only one approximant is accepted, see `members`).  `T_c` = 1/β_c and
    `T_c_err` = β_c_err/β_c² are in units of J when the series variable is β = J/T.
    """

    beta_c: float
    beta_c_err: float
    gamma: float
    gamma_err: float
    accepted: list[SingularityEstimate]
    members: list[EnsembleMember] = field(repr=False)

    @property
    def T_c(self) -> float:
        return 1.0 / self.beta_c

    @property
    def T_c_err(self) -> float:
        return self.beta_c_err / self.beta_c ** 2

    def to_json_dict(self) -> dict:
        """The "critical" block of the curves JSON (CONVENTIONS.md)."""
        return {"T_c": self.T_c, "T_c_err": self.T_c_err, "gamma": self.gamma, "gamma_err": self.gamma_err,
                "beta_c": self.beta_c, "beta_c_err": self.beta_c_err, "approximants": len(self.accepted)}


def _singularity(label: str, approximant: PadeApproximant, pole_margin: float, doublet_tolerance: float
                 ) -> tuple[SingularityEstimate | None, list[str]]:
    poles = approximant.poles()
    real_positive = sorted(p.real for p in poles
                           if p.real > 0 and abs(p.imag) <= REAL_AXIS_TOLERANCE * abs(p))
    if not real_positive:
        return None, ["no pole on the positive real axis"]
    beta_c = real_positive[0]
    gamma = -approximant.residue(beta_c).real
    defects = []
    if not gamma > 0:
        defects.append(f"residue at beta = {beta_c:.5g} gives gamma = {gamma:.4g} <= 0")
    others = poles[np.abs(poles - beta_c) > REAL_AXIS_TOLERANCE * beta_c]
    distance = np.abs(others - np.clip(others.real, 0.0, beta_c))
    for p in others[distance <= pole_margin * beta_c]:
        defects.append(f"second pole at beta = {complex(p):.5g} within {pole_margin:g} beta_c of [0, beta_c]")
    defects.extend(froissart_doublets(approximant, (0.0, beta_c), tolerance=doublet_tolerance,
                                      region=pole_margin))
    return SingularityEstimate(label, float(beta_c), float(gamma), approximant), defects


def dlog_pade(coefficients: Sequence, *, depth: int = 3, max_offset: int = 2, pole_margin: float = 0.02,
              doublet_tolerance: float = 1e-3) -> CriticalEstimate | None:
    """Estimate β_c and γ from near-diagonal Padé approximants of d ln f/dβ.

    Parameters
    ----------
    coefficients : sequence
        c_0..c_N of f in powers of β (c_0 != 0); Fractions keep the approximants exact.
    depth, max_offset : int
        Approximants [L/M] of the log-derivative (known through order N − 1) with N − 1 − depth < L + M <=
        N − 1 and |L − M| <= max_offset.
    pole_margin, doublet_tolerance : float
        An approximant is rejected when another pole, or a Froissart doublet (pole-zero distance below
        doublet_tolerance·max(1, |p|)), lies within pole_margin·β_c of [0, β_c].

    Returns
    -------
    CriticalEstimate, or None when no approximant has a usable singularity on the positive axis.

    Raises
    ------
    ParameterError
        If the series is too short (fewer than 4 coefficients) or f(0) = 0.
    """
    c = as_coefficients(coefficients)
    if len(c) < 4:
        raise ParameterError(f"Dlog-Padé needs the series through order 3 at least, got order {len(c) - 1}; "
                             "supply a longer series")
    g = log_derivative_series(c)
    members = []
    accepted = []
    for L, M in near_diagonal_orders(len(g) - 1, depth=depth, max_offset=max_offset):
        approximant, singular = pade_or_singular(g, L, M)
        if singular:
            members.append(singular)
            continue
        estimate, defects = _singularity(f"[{L}/{M}]", approximant, pole_margin, doublet_tolerance)
        members.append(EnsembleMember(L, M, approximant, defects))
        if estimate is not None and not defects:
            accepted.append(estimate)
    if not accepted:
        return None
    beta = np.array([a.beta_c for a in accepted])
    gamma = np.array([a.gamma for a in accepted])
    return CriticalEstimate(float(np.median(beta)), float(np.ptp(beta) / 2), float(np.median(gamma)),
                            float(np.ptp(gamma) / 2), accepted, members)


@dataclass(frozen=True)
class BiasedExponent:
    """γ at a fixed β_c: median over accepted approximants, error = half the min-max range."""

    beta_c: float
    gamma: float
    gamma_err: float
    values: dict[str, float]


def _spoils_value_at(approximant: PadeApproximant, beta_c: float, pole_margin: float,
                     doublet_tolerance: float) -> bool:
    """True when a pole lies within pole_margin·β_c of β_c, or a pole that is not half of a Froissart doublet
    lies within pole_margin·β_c of [0, β_c].  Doublets away from β_c do not change the value there."""
    poles, zeros = approximant.poles(), approximant.zeros()
    for p in poles:
        if abs(p - beta_c) <= pole_margin * beta_c:
            return True
        is_doublet = zeros.size and np.min(np.abs(zeros - p)) <= doublet_tolerance * max(1.0, abs(p))
        if not is_doublet and abs(p - np.clip(p.real, 0.0, beta_c)) <= pole_margin * beta_c:
            return True
    return False


def biased_exponent(coefficients: Sequence, beta_c: float | Fraction, *, depth: int = 3, max_offset: int = 2,
                    pole_margin: float = 0.02, doublet_tolerance: float = 1e-3) -> BiasedExponent:
    """γ from Padé approximants of (β_c − β)·d ln f/dβ evaluated at the given β_c.

    Only the value at β_c is used, so an approximant is discarded when a pole lies near β_c or a genuine pole
    (not half of a Froissart doublet) lies on [0, β_c]; see :func:`_spoils_value_at`.

    Raises
    ------
    ParameterError
        If β_c <= 0, the series is too short, or no approximant is free of defects on [0, β_c].
    """
    if not beta_c > 0:
        raise ParameterError(f"biased exponent: beta_c must be > 0, got {beta_c}")
    c = as_coefficients(coefficients)
    if len(c) < 4:
        raise ParameterError(f"biased exponent needs the series through order 3 at least, got order {len(c) - 1}")
    g = log_derivative_series(c)
    bc = Fraction(beta_c) if isinstance(g[0], Fraction) and isinstance(beta_c, (int, Fraction)) else float(beta_c)
    if not isinstance(bc, Fraction):
        g = [float(v) for v in g]
    h = multiply_series([bc, -1 + 0 * bc], g, len(g) - 1)
    values = {}
    for L, M in near_diagonal_orders(len(h) - 1, depth=depth, max_offset=max_offset):
        try:
            approximant = pade(h, L, M)
        except SingularPadeError:
            continue
        if _spoils_value_at(approximant, float(bc), pole_margin, doublet_tolerance):
            continue
        values[f"[{L}/{M}]"] = float(approximant(float(bc)))
    if not values:
        raise ParameterError(f"biased exponent at beta_c = {float(bc):.6g}: every Padé approximant has a pole near "
                             "beta_c or on [0, beta_c]; try another beta_c or a longer series")
    gammas = np.array(list(values.values()))
    return BiasedExponent(float(bc), float(np.median(gammas)), float(np.ptp(gammas) / 2), values)


def dlog_curve(approximant: PadeApproximant, f0: float, beta: np.ndarray, beta_c: float, gamma: float,
               nodes: int = 48) -> np.ndarray:
    """f(β) = f0 · exp(∫_0^β g) for 0 <= β < β_c from one accepted approximant g of d ln f/dβ.

    The pole term γ/(β_c − β) is integrated analytically, −γ ln(1 − β/β_c); the smooth remainder by
    Gauss-Legendre quadrature with `nodes` points.
    """
    beta = np.asarray(beta, dtype=float)
    t, w = np.polynomial.legendre.leggauss(nodes)
    u = 0.5 * (t + 1.0)[None, :] * beta[:, None]
    remainder = approximant(u) - gamma / (beta_c - u)
    integral = 0.5 * beta * np.sum(w[None, :] * remainder, axis=1)
    return f0 * np.exp(integral - gamma * np.log1p(-beta / beta_c))
