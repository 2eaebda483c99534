r"""Padé approximants of truncated power series, their defects, and ensembles of them.

A [L/M] Padé approximant of f(x) = sum_n c_n x^n is the rational function P(x)/Q(x), deg P = L, deg Q = M,
Q(0) = 1, whose Taylor series agrees with f through x^(L+M).  With exact rational coefficients
(:class:`fractions.Fraction`) the linear system is solved exactly; with floats it is solved in double precision
and rejected when its condition number exceeds a limit.

The series variable is β = J/T (k_B = 1, energies in units of the reference coupling J) or a user-chosen
transformed variable x(β) (:class:`VariableTransform`) that maps the physical half-line β ∈ [0, ∞) to a
bounded interval, which often moves unphysical singularities away from the physical segment.

A single approximant can be spoiled by a pole on the physical segment β ∈ (0, β_max] or by a Froissart doublet
(a pole and a zero that almost cancel, an artefact of the finite series).  :func:`pade_ensemble` builds all
near-diagonal approximants that use the last few orders of a series and screens each for these defects; the
accepted members give an estimate (median or mean) and a band (min/max or a quantile range) via
:func:`band_from_samples`, and :func:`convergence_temperature` reads off the lowest temperature above which
the band stays narrower than a tolerance.

References
----------
.. [1] G. A. Baker Jr. and P. Graves-Morris, *Padé Approximants*, 2nd ed. (Cambridge University Press, 1996),
   ch. 1-2 (definition, existence, Froissart doublets).
.. [2] J. Oitmaa, C. Hamer and W. Zheng, *Series Expansion Methods for Strongly Interacting Lattice Models*
   (Cambridge University Press, 2006), ch. 2 (Padé and ensembles of approximants for thermodynamic series).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Sequence

import numpy as np

from hte.errors import ParameterError
from hte.exact_algebra import SingularMatrixError, gauss_jordan

#: Condition number above which a floating-point Padé system is treated as singular.
MAX_CONDITION = 1e12


class SingularPadeError(ArithmeticError):
    """The [L/M] Padé system is singular (or, in floating point, too ill-conditioned to trust)."""


def is_exact(coefficients) -> bool:
    """True when every coefficient is an int or a Fraction, so the Padé system can be solved exactly."""
    return all(isinstance(c, (int, Fraction)) and not isinstance(c, bool) for c in coefficients)


def is_even(coefficients) -> bool:
    """True when every odd-power coefficient is exactly zero."""
    return all(c == 0 for c in list(coefficients)[1::2])


def as_coefficients(coefficients) -> list:
    """The coefficients as Fractions when all are exact rationals, else as floats."""
    coefficients = list(coefficients)
    if is_exact(coefficients):
        return [Fraction(c) for c in coefficients]
    return [float(c) for c in coefficients]


# --- truncated power series -------------------------------------------------------------------------------

def multiply_series(a, b, order: int) -> list:
    """Coefficients of a(x)·b(x) through x^order (a, b: coefficient lists, exact or float)."""
    zero = a[0] * 0 if len(a) else 0
    out = [zero] * (order + 1)
    for i, ai in enumerate(a[: order + 1]):
        if ai == 0:
            continue
        for j, bj in enumerate(b[: order + 1 - i]):
            out[i + j] += ai * bj
    return out


def compose_series(outer, inner, order: int) -> list:
    """Coefficients of outer(inner(x)) through x^order; `inner` must have no constant term."""
    if len(inner) and inner[0] != 0:
        raise ValueError("compose_series: the inner series must vanish at x = 0")
    zero = outer[0] * 0
    result = [zero] * (order + 1)
    power = [zero] * (order + 1)
    power[0] = zero + 1
    for n, c in enumerate(outer[: order + 1]):
        if n > 0:
            power = multiply_series(power, inner, order)
        if c != 0:
            result = [r + c * p for r, p in zip(result, power)]
    return result


# --- variables --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class VariableTransform:
    r"""A change of series variable x = x(β), monotonic on β ≥ 0 with x(0) = 0 and x'(0) = 1 (times a).

    kind = "beta": x = β (no transformation).
    kind = "euler": x = β/(1 + aβ), a > 0, so β ∈ [0, ∞) maps to x ∈ [0, 1/a); β = x/(1 − a x).
    kind = "exp": x = 1 − exp(−aβ), a > 0, so β ∈ [0, ∞) maps to x ∈ [0, 1); β = −ln(1 − x)/a.
    kind = "square": x = β², for even series f(β) = F(β²) only (F's series is every second coefficient);
        Padé approximants of F in x avoid the degenerate 2×2 blocks of the Padé table of an even series.

    `a` is in units of 1/J (the same unit as T); a Fraction keeps exact series exact.
    """

    kind: str = "beta"
    a: float | Fraction = 1

    def __post_init__(self):
        if self.kind not in ("beta", "euler", "exp", "square"):
            raise ParameterError(f"variable transform kind {self.kind!r} is unknown; use 'beta', 'euler', 'exp' "
                                 "or 'square'")
        if self.kind in ("euler", "exp") and not self.a > 0:
            raise ParameterError(f"variable transform {self.kind!r} needs a > 0 (got a = {self.a}); "
                                 "choose a of the order of 1/T at the lowest temperature of interest")

    def forward(self, beta):
        """x(β) for an array of β (in units of 1/J)."""
        beta = np.asarray(beta, dtype=float)
        a = float(self.a)
        if self.kind == "euler":
            return beta / (1.0 + a * beta)
        if self.kind == "exp":
            return -np.expm1(-a * beta)
        if self.kind == "square":
            return beta * beta
        return beta

    def derivatives(self, beta):
        """(dx/dβ, d²x/dβ²) for an array of β."""
        beta = np.asarray(beta, dtype=float)
        a = float(self.a)
        if self.kind == "euler":
            return 1.0 / (1.0 + a * beta) ** 2, -2.0 * a / (1.0 + a * beta) ** 3
        if self.kind == "exp":
            return a * np.exp(-a * beta), -a * a * np.exp(-a * beta)
        if self.kind == "square":
            return 2.0 * beta, np.full_like(beta, 2.0)
        return np.ones_like(beta), np.zeros_like(beta)

    def beta_series(self, order: int, exact: bool) -> list:
        """Coefficients of β as a power series in x, through x^order (not for kind "square")."""
        a = Fraction(self.a) if exact else float(self.a)
        one = Fraction(1) if exact else 1.0
        coefficients = [one * 0] * (order + 1)
        for k in range(1, order + 1):
            if self.kind == "euler":
                coefficients[k] = a ** (k - 1)
            elif self.kind == "exp":
                coefficients[k] = one / (k * a)
            elif k == 1:
                coefficients[k] = one
        return coefficients

    def transform_series(self, coefficients) -> list:
        """Re-expand f(β) = sum c_n β^n as a series in x through the same order."""
        coefficients = as_coefficients(coefficients)
        if self.kind == "beta":
            return coefficients
        if self.kind == "square":
            if not is_even(coefficients):
                raise ParameterError("variable 'square' (x = beta^2) needs an even series; this one has odd "
                                     "powers: use 'beta', 'euler' or 'exp'")
            return coefficients[::2]
        exact = is_exact(coefficients) and isinstance(self.a, (int, Fraction))
        if not exact:
            coefficients = [float(c) for c in coefficients]
        order = len(coefficients) - 1
        return compose_series(coefficients, self.beta_series(order, exact), order)


# --- one approximant --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class PadeApproximant:
    """The rational function P(x)/Q(x); `numerator` = p_0..p_L, `denominator` = q_0 = 1, q_1..q_M.

    Coefficients are Fractions when `exact`, else floats.  Evaluation is in double precision.
    """

    numerator: tuple
    denominator: tuple
    exact: bool

    @property
    def L(self) -> int:
        """Degree of the numerator."""
        return len(self.numerator) - 1

    @property
    def M(self) -> int:
        """Degree of the denominator."""
        return len(self.denominator) - 1

    @property
    def label(self) -> str:
        """The usual name, e.g. "[4/5]"."""
        return f"[{self.L}/{self.M}]"

    def _float_polynomials(self):
        p = np.polynomial.Polynomial([float(c) for c in self.numerator])
        q = np.polynomial.Polynomial([float(c) for c in self.denominator])
        return p, q

    def __call__(self, x):
        """P(x)/Q(x) for real or complex x (array-like)."""
        p, q = self._float_polynomials()
        x = np.asarray(x)
        return p(x) / q(x)

    def derivatives(self, x):
        """(f, f', f'') at x for f = P/Q, from exact differentiation of the polynomials."""
        p, q = self._float_polynomials()
        x = np.asarray(x, dtype=float)
        pv, p1, p2 = p(x), p.deriv(1)(x), p.deriv(2)(x)
        qv, q1, q2 = q(x), q.deriv(1)(x), q.deriv(2)(x)
        f = pv / qv
        f1 = (p1 - f * q1) / qv
        f2 = (p2 - 2.0 * f1 * q1 - f * q2) / qv
        return f, f1, f2

    def poles(self) -> np.ndarray:
        """Complex roots of Q (the denominator's actual degree may be below M)."""
        return _roots(self.denominator)

    def zeros(self) -> np.ndarray:
        """Complex roots of P."""
        return _roots(self.numerator)

    def residue(self, pole: complex) -> complex:
        """Residue P(p)/Q'(p) at a simple pole p."""
        p, q = self._float_polynomials()
        return complex(p(pole) / q.deriv(1)(pole))


def _roots(coefficients) -> np.ndarray:
    values = [float(c) for c in coefficients]
    while len(values) > 1 and values[-1] == 0.0:
        values.pop()
    if len(values) <= 1:
        return np.zeros(0, dtype=complex)
    return np.asarray(np.polynomial.polynomial.polyroots(values), dtype=complex)


def pade(coefficients: Sequence, numerator_degree: int, denominator_degree: int) -> PadeApproximant:
    """The [L/M] Padé approximant of sum_n c_n x^n (needs c_0..c_{L+M}).

    Parameters
    ----------
    coefficients : sequence of Fraction, int or float
        Series coefficients c_0, c_1, ...; exact rationals give an exactly solved approximant.
    numerator_degree, denominator_degree : int
        L >= 0 and M >= 0 with L + M + 1 <= len(coefficients).

    Raises
    ------
    ParameterError
        If the series is too short for [L/M].
    SingularPadeError
        If the linear system for the denominator is singular (exact) or its condition number exceeds
        :data:`MAX_CONDITION` (floating point): this [L/M] does not exist in normalised form.
    """
    L, M = int(numerator_degree), int(denominator_degree)
    c = as_coefficients(coefficients)
    if L < 0 or M < 0:
        raise ParameterError(f"Padé degrees must be >= 0 (got [{L}/{M}])")
    if L + M + 1 > len(c):
        raise ParameterError(f"Padé [{L}/{M}] needs the series through order {L + M}, but it stops at order "
                             f"{len(c) - 1}; lower L + M or supply a longer series")
    try:
        return _normalised_pade(c, L, M)
    except SingularPadeError:
        # Inside a square block of the Padé table (e.g. the series of a rational function of lower degree) the
        # [L/M] system is singular, yet [L/M] exists and equals a lower [L-k/M-k] that matches through L+M.
        for k in range(1, min(L, M) + 1):
            try:
                reduced = _normalised_pade(c, L - k, M - k)
            except SingularPadeError:
                continue
            if _matches_through(reduced, c, L + M):
                return reduced
        raise


def _matches_through(approximant: PadeApproximant, c: list, order: int) -> bool:
    """True when Q·f − P vanishes through x^order (exactly, or to 1e-10 relative in floating point)."""
    q, p = approximant.denominator, approximant.numerator
    for k in range(order + 1):
        terms = [q[j] * c[k - j] for j in range(min(k, len(q) - 1) + 1)]
        residual = sum(terms) - (p[k] if k < len(p) else 0)
        if approximant.exact:
            if residual != 0:
                return False
        elif abs(residual) > 1e-10 * max(1e-300, sum(abs(t) for t in terms)):
            return False
    return True


def _normalised_pade(c: list, L: int, M: int) -> PadeApproximant:
    """[L/M] with Q(0) = 1 from the linear system; SingularPadeError when that system is singular."""
    exact = is_exact(c)

    def coef(k):
        return c[k] if k >= 0 else c[0] * 0

    rows = [[coef(k - j) for j in range(1, M + 1)] for k in range(L + 1, L + M + 1)]
    rhs = [-coef(k) for k in range(L + 1, L + M + 1)]
    if M == 0:
        q_tail = []
    elif exact:
        q_tail = _solve_exact(rows, rhs)
    else:
        matrix = np.array(rows, dtype=float)
        if not np.all(np.isfinite(matrix)) or np.linalg.cond(matrix) > MAX_CONDITION:
            raise SingularPadeError(f"[{L}/{M}]: ill-conditioned denominator system")
        q_tail = [float(v) for v in np.linalg.solve(matrix, np.array(rhs, dtype=float))]
    one = Fraction(1) if exact else 1.0
    q = [one] + list(q_tail)
    p = [sum((q[j] * c[k - j] for j in range(0, min(k, M) + 1)), one * 0) for k in range(L + 1)]
    return PadeApproximant(tuple(p), tuple(q), exact)


def _solve_exact(rows, rhs) -> list:
    """Gauss-Jordan elimination in Fractions; raises SingularPadeError on a singular matrix."""
    n = len(rows)
    augmented = [list(map(Fraction, row)) + [Fraction(b)] for row, b in zip(rows, rhs)]
    try:
        reduced = gauss_jordan(augmented, n)
    except SingularMatrixError:
        raise SingularPadeError("singular denominator system") from None
    return [reduced[r][n] for r in range(n)]


# --- defects ----------------------------------------------------------------------------------------------

def _near_segment(points: np.ndarray, low: float, high: float, fraction: float) -> np.ndarray:
    """Mask of points whose distance to [low, high] is at most `fraction` times their distance to x = 0.

    x = 0 is the expansion point (an end of the physical segment in every use), so the test is scale-free: a
    pole counts as near when it is close to the segment compared with how far out it lies.
    """
    nearest = np.clip(points.real, low, high)
    return np.abs(points - nearest) <= fraction * np.abs(points)


def find_defects(approximant: PadeApproximant, segment: tuple[float, float], *, pole_margin: float = 0.02,
                 doublet_tolerance: float = 1e-3, doublet_region: float = 0.5,
                 singular_end: float | None = None) -> list[str]:
    """Reasons why `approximant` is unusable on the real interval `segment` = (low, high); [] if none.

    `segment` contains the expansion point x = 0 as one of its ends.  A pole p is a defect when its distance to
    the segment is at most ``pole_margin * |p|`` (on the segment, or within an angle of about pole_margin
    radians of it).  A Froissart doublet is a pole p and a zero z with |p − z| <= doublet_tolerance · max(1, |p|);
    it is a defect when its distance to the segment is at most ``doublet_region * |p|`` ("near the positive
    real axis" for segment (0, x_max)).  `singular_end`, the far end of the segment where the function itself
    may be non-analytic, exempts poles and doublets whose real part lies beyond it (approximants put poles
    there to mimic a branch point); the caller then checks the values on the segment itself.
    """
    low, high = float(segment[0]), float(segment[1])
    poles = _not_beyond(approximant.poles(), singular_end)
    near = poles[_near_segment(poles, low, high, pole_margin)]
    defects = [f"pole at x = {_format_complex(p)} on or next to the physical segment [{low:.4g}, {high:.4g}]"
               for p in near]
    return defects + froissart_doublets(approximant, segment, tolerance=doublet_tolerance, region=doublet_region,
                                        singular_end=singular_end)


def _not_beyond(points: np.ndarray, singular_end: float | None) -> np.ndarray:
    """The points whose real part does not lie beyond `singular_end` (seen from x = 0); all if it is None."""
    if singular_end is None:
        return points
    return points[(points.real - singular_end) * np.sign(singular_end) <= 0]


def froissart_doublets(approximant: PadeApproximant, segment: tuple[float, float], *, tolerance: float = 1e-3,
                       region: float = 0.5, singular_end: float | None = None) -> list[str]:
    """Pole-zero pairs with |p − z| <= tolerance · max(1, |p|) whose pole p lies within region·|p| of `segment`
    (and not beyond `singular_end`, see :func:`find_defects`)."""
    low, high = float(segment[0]), float(segment[1])
    poles, zeros = _not_beyond(approximant.poles(), singular_end), approximant.zeros()
    if not poles.size or not zeros.size:
        return []
    doublets = []
    for p in poles[_near_segment(poles, low, high, region)]:
        gap = np.min(np.abs(zeros - p))
        if gap <= tolerance * max(1.0, abs(p)):
            doublets.append(f"Froissart doublet (pole-zero distance {gap:.2g}) at x = {_format_complex(p)}")
    return doublets


def _format_complex(z: complex) -> str:
    z = complex(z)
    if abs(z.imag) <= 1e-12 * max(1.0, abs(z.real)):
        return f"{z.real:.5g}"
    return f"{z.real:.5g}{z.imag:+.3g}i"


# --- ensembles --------------------------------------------------------------------------------------------

@dataclass
class EnsembleMember:
    """One [L/M] of an ensemble: the approximant (None if singular) and the reasons it was rejected."""

    L: int
    M: int
    approximant: PadeApproximant | None
    defects: list[str] = field(default_factory=list)

    @property
    def label(self) -> str:
        return f"[{self.L}/{self.M}]"

    @property
    def accepted(self) -> bool:
        return self.approximant is not None and not self.defects


def near_diagonal_orders(order: int, *, depth: int = 3, max_offset: int = 2) -> list[tuple[int, int]]:
    """All (L, M) with M >= 1, |L − M| <= max_offset and order − depth < L + M <= order, by L + M then L."""
    pairs = []
    for total in range(max(1, order - depth + 1), order + 1):
        for M in range(1, total + 1):
            L = total - M
            if abs(L - M) <= max_offset:
                pairs.append((L, M))
    return pairs


def pade_or_singular(coefficients, L: int, M: int):
    """(approximant, None), or (None, the rejected EnsembleMember) when the [L/M] system is singular."""
    try:
        return pade(coefficients, L, M), None
    except SingularPadeError as exc:
        return None, EnsembleMember(L, M, None, [f"singular: {exc}"])


def screened_ensemble(coefficients, screen, *, depth: int = 3, max_offset: int = 2) -> tuple[list[EnsembleMember], list]:
    """Near-diagonal [L/M] of a series, each screened by the caller.

    ``screen(approximant)`` returns (defects, kept): the reasons for rejection ([] to accept) and the object to
    keep for an accepted approximant (the approximant itself or something built on it).  Returns every member
    (singular systems included, with their reason) and the kept objects of the accepted ones, in table order.
    """
    members, accepted = [], []
    for L, M in near_diagonal_orders(len(coefficients) - 1, depth=depth, max_offset=max_offset):
        approximant, singular = pade_or_singular(coefficients, L, M)
        if singular:
            members.append(singular)
            continue
        defects, kept = screen(approximant)
        members.append(EnsembleMember(L, M, approximant, defects))
        if not defects:
            accepted.append(kept)
    return members, accepted


def pade_ensemble(coefficients: Sequence, segment: tuple[float, float], *, depth: int = 3,
                  max_offset: int = 2, pole_margin: float = 0.02, doublet_tolerance: float = 1e-3,
                  quantity: str = "series") -> list[EnsembleMember]:
    """All near-diagonal Padé approximants of a series, each screened for defects on `segment`.

    Defects are those of :func:`find_defects` (poles on or next to the segment, Froissart doublets near it), a
    singular system, or being the same rational function as an earlier member (inside a block of the Padé
    table), which would otherwise fake agreement.

    Parameters
    ----------
    coefficients : sequence
        c_0..c_N of the series in the chosen variable x.
    segment : (low, high)
        The physical interval of x (for x = β and temperatures T >= T_min: (0, 1/T_min)).
    depth : int
        Use L + M within the last `depth` orders, N − depth < L + M <= N.
    max_offset : int
        Largest |L − M| admitted.
    quantity : str
        Name used in error messages.

    Raises
    ------
    ParameterError
        If no [L/M] with M >= 1 satisfies the constraints (series too short).
    """
    c = as_coefficients(coefficients)
    order = len(c) - 1
    pairs = near_diagonal_orders(order, depth=depth, max_offset=max_offset)
    if order < 2 or not pairs:
        raise ParameterError(f"the {quantity} series stops at order {order}, too short for Padé approximants "
                             f"with |L - M| <= {max_offset} in the last {depth} orders; supply a longer series "
                             "(at least order 2) or raise max_offset/depth")
    members = []
    for L, M in pairs:
        approximant, singular = pade_or_singular(c, L, M)
        if singular:
            members.append(singular)
            continue
        twin = next((m for m in members if m.approximant is not None and same_function(m.approximant, approximant)),
                    None)
        if twin is not None:
            members.append(EnsembleMember(L, M, approximant, [f"same rational function as {twin.label}"]))
            continue
        defects = find_defects(approximant, segment, pole_margin=pole_margin,
                               doublet_tolerance=doublet_tolerance)
        members.append(EnsembleMember(L, M, approximant, defects))
    return members


def same_function(first: PadeApproximant, second: PadeApproximant, rtol: float = 1e-9) -> bool:
    """True when two approximants are the same rational function (equal coefficients after trimming zeros).

    Inside a block of the Padé table several [L/M] coincide; counting them twice would fake agreement.
    """
    def trimmed(values):
        values = list(values)
        while len(values) > 1 and values[-1] == 0:
            values.pop()
        return values

    pairs = [(trimmed(first.numerator), trimmed(second.numerator)),
             (trimmed(first.denominator), trimmed(second.denominator))]
    for a, b in pairs:
        if len(a) != len(b):
            return False
        if first.exact and second.exact:
            if a != b:
                return False
        elif not np.allclose(np.array(a, dtype=float), np.array(b, dtype=float), rtol=rtol, atol=0.0):
            return False
    return True


@dataclass(frozen=True)
class Band:
    """A curve with its uncertainty band, on a temperature grid (same units as the quantity)."""

    estimate: np.ndarray
    lower: np.ndarray
    upper: np.ndarray

    def relative_half_width(self) -> np.ndarray:
        """(upper − lower) / (2 |estimate|), +inf where the estimate is 0 and the band is not."""
        half = 0.5 * (self.upper - self.lower)
        scale = np.abs(self.estimate)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(scale > 0, half / np.where(scale > 0, scale, 1.0), np.where(half > 0, np.inf, 0.0))
        return ratio


def band_from_samples(samples: np.ndarray, *, estimate: str = "median", spread: str = "minmax") -> Band:
    """Estimate and band from an array of curves, shape (members, points); NaN marks a member not valid at a point.

    estimate : "median" or "mean" of the valid members at each point.
    spread : "minmax" (full range) or "quantile" (10 % to 90 % quantiles, robust against one outlier).
    Every point needs at least one valid member.
    """
    samples = np.atleast_2d(np.asarray(samples, dtype=float))
    if estimate == "median":
        centre = np.nanmedian(samples, axis=0)
    elif estimate == "mean":
        centre = np.nanmean(samples, axis=0)
    else:
        raise ParameterError(f"estimate {estimate!r} is unknown; use 'median' or 'mean'")
    if spread == "minmax":
        lower, upper = np.nanmin(samples, axis=0), np.nanmax(samples, axis=0)
    elif spread == "quantile":
        lower, upper = np.nanquantile(samples, 0.1, axis=0), np.nanquantile(samples, 0.9, axis=0)
    else:
        raise ParameterError(f"spread {spread!r} is unknown; use 'minmax' or 'quantile'")
    return Band(centre, np.minimum(lower, centre), np.maximum(upper, centre))


def widen_with_lower_order(band: Band, lower_order_samples: list) -> Band:
    """The band stretched to contain the median of the ensemble built from a shorter series (where it is valid).

    Near-diagonal approximants of one order are strongly correlated and can agree on a wrong value where all of
    them fail; comparing with the previous orders makes the band (and so T_conv) measure stability against the
    order as well.
    """
    if not lower_order_samples:
        return band
    stack = np.array(lower_order_samples)
    usable = np.isfinite(stack).any(axis=0)
    median = np.full(stack.shape[1], np.nan)
    median[usable] = np.nanmedian(stack[:, usable], axis=0)
    lower = np.where(usable, np.fmin(band.lower, median), band.lower)
    upper = np.where(usable, np.fmax(band.upper, median), band.upper)
    return Band(band.estimate, lower, upper)


def convergence_temperature(temperatures: np.ndarray, band: Band, tolerance: float) -> float | None:
    """Lowest grid temperature above which (inclusive) the relative half-width stays <= `tolerance`.

    Returns None when the band exceeds the tolerance already at the highest grid temperature.
    """
    temperatures = np.asarray(temperatures, dtype=float)
    order = np.argsort(temperatures)[::-1]
    ok = band.relative_half_width()[order] <= tolerance
    if not ok[0]:
        return None
    first_bad = np.argmin(ok) if not ok.all() else len(ok)
    return float(temperatures[order][first_bad - 1])
