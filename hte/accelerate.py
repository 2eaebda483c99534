r"""Acceleration of slowly converging sequences of partial sums: Wynn's epsilon algorithm and Euler's transformation.

Both act on sequences S_0, S_1, ..., S_{m-1} (for example the partial sums of a numerical linked-cluster
expansion over cluster-size orders) and are vectorised: axis 0 of the input runs over the sequence, any further
axes (typically a temperature grid) are independent sequences treated in one call.

References
----------
.. [1] P. Wynn, "On a device for computing the e_m(S_n) transformation", Math. Tables Aids Comput. 10, 91 (1956).
.. [2] C. M. Bender and S. A. Orszag, *Advanced Mathematical Methods for Scientists and Engineers*
   (McGraw-Hill, 1978), sec. 8.1 (Euler transformation) and 8.3 (Shanks transformation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from hte.errors import ParameterError


@dataclass(frozen=True)
class AcceleratedLimit:
    """Estimated limit of a sequence and an error estimate (same shape and units as one sequence element).

    `error` is the absolute difference between the two best estimates the transformation produced; it is a
    heuristic size of the remaining error, not a bound.
    """

    estimate: np.ndarray
    error: np.ndarray


def _as_sequences(partial_sums, minimum: int, name: str) -> np.ndarray:
    values = np.asarray(partial_sums, dtype=float)
    if values.ndim == 0 or values.shape[0] < minimum:
        length = 0 if values.ndim == 0 else values.shape[0]
        raise ParameterError(f"{name} needs at least {minimum} partial sums along axis 0, got {length}; "
                             "supply more orders of the sequence")
    if not np.all(np.isfinite(values)):
        raise ParameterError(f"{name}: the partial sums contain NaN or infinite values; remove the orders "
                             "where the sequence is undefined")
    return values


def wynn_epsilon(partial_sums) -> AcceleratedLimit:
    r"""Limit of each sequence S_0..S_{m-1} by Wynn's epsilon algorithm (equivalent to the Shanks transformation).

    ε_{-1}^{(n)} = 0, ε_0^{(n)} = S_n, ε_{k+1}^{(n)} = ε_{k-1}^{(n+1)} + 1/(ε_k^{(n+1)} − ε_k^{(n)}); the
    even columns ε_{2k} are the estimates.  The estimate is the entry of the highest even column that is
    finite (a column breaks down where two entries coincide, i.e. where the sequence has already converged;
    the last finite estimate is then kept), and the error is its distance to the previous even-column estimate
    built from the same last terms.

    Parameters
    ----------
    partial_sums : array_like, shape (m, ...)
        m >= 3 partial sums along axis 0; further axes are independent sequences.
    """
    values = _as_sequences(partial_sums, 3, "wynn_epsilon")
    previous = np.zeros((values.shape[0] + 1,) + values.shape[1:])  # column k-1 (here k = 0: ε_{-1} = 0)
    current = values.copy()               # column k
    best = values[-1].copy()
    best_error = np.abs(values[-1] - values[-2])
    last_even = values[-1].copy()
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for k in range(1, values.shape[0]):
            diff = current[1:] - current[:-1]
            following = previous[1: 1 + diff.shape[0]] + 1.0 / diff
            previous, current = current, following
            if k % 2 == 0:
                candidate = current[-1]
                usable = np.isfinite(candidate) & np.isfinite(best)
                best_error = np.where(usable, np.abs(candidate - last_even), best_error)
                best = np.where(usable, candidate, best)
                last_even = np.where(usable, candidate, last_even)
    return AcceleratedLimit(best, best_error)


def euler_transform(partial_sums, start: int = 0) -> AcceleratedLimit:
    r"""Limit of each sequence by the Euler transformation of its terms from index `start` on.

    With terms u_n = S_n − S_{n−1} (u_0 = S_0) and w_k = (−1)^k u_{start+k}, the tail is summed as
    sum_k (−1)^k w_k = sum_j (−1)^j Δ^j w_0 / 2^(j+1) (Δ the forward difference), which converges fast
    when the terms alternate in sign with slowly varying magnitude.  The limit is
    S_{start−1} + that sum, truncated after the last available difference; the error is the magnitude of
    the last term kept.

    Parameters
    ----------
    partial_sums : array_like, shape (m, ...)
        m >= start + 2 partial sums along axis 0; further axes are independent sequences.
    start : int
        Index of the first term that enters the transformation; earlier terms are summed directly.
    """
    values = _as_sequences(partial_sums, max(2, start + 2), "euler_transform")
    if start < 0:
        raise ParameterError(f"euler_transform: start must be >= 0, got {start}")
    terms = np.diff(values, axis=0, prepend=np.zeros_like(values[:1]))
    head = values[start - 1] if start > 0 else np.zeros_like(values[0])
    tail = terms[start:]
    signs = (-1.0) ** np.arange(tail.shape[0]).reshape((-1,) + (1,) * (tail.ndim - 1))
    differences = signs * tail
    total = np.zeros_like(values[0])
    last = np.zeros_like(values[0])
    for j in range(tail.shape[0]):
        last = (-1.0) ** j * differences[0] / 2.0 ** (j + 1)
        total = total + last
        differences = np.diff(differences, axis=0)
    return AcceleratedLimit(head + total, np.abs(last))
