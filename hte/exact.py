r"""Exact-diagonalisation kernel: the high-temperature series of one finite cluster, exactly.

Convention (CONVENTIONS.md): H = H0 - h M with
:math:`H_0 = \sum_b [J^{xy}_b (S^x_u S^x_v + S^y_u S^y_v) + J^z_b S^z_u S^z_v] + \sum_i D_i (S^z_i)^2`,
:math:`M = \sum_i S^z_i`, k_B = 1, g mu_B = 1, J > 0 antiferromagnetic.  Energies are in the unit of the
couplings and beta = 1/T in the inverse unit.  Because [H0, M] = 0,

.. math:: Z(\beta, h) = \sum_m e^{\beta h m}\,\mathrm{Tr}_m e^{-\beta H_0},
          \quad \ln Z(\beta,h) = \ln Z(\beta,0) + \frac{(\beta h)^2}{2!}\kappa_2(\beta)
          + \frac{(\beta h)^4}{4!}\kappa_4(\beta) + \dots

with :math:`\kappa_2 = \langle M^2\rangle = T\chi` and :math:`\kappa_4 = \langle M^4\rangle - 3\langle M^2\rangle^2`
at h = 0 (odd terms vanish: H0 is invariant under the global spin flip, so sector m and -m have equal traces).

Method of :func:`cluster_cumulants`: the moments :math:`t_{m,k} = \mathrm{Tr}_m H_0^k` are computed exactly for
each sector m >= 0 as traces of powers of an integer matrix (a diagonal similarity transform of 4 L H0, see
:mod:`hte.spin_matrices`), modulo primes below 2^26 with a numba kernel and Chinese remaindering
(:mod:`hte.modular`); then the moments are turned into the three cumulant series with exact rationals.  Isotropic
clusters (every bond Jxy = Jz, no anisotropy, any spins) of TOTAL_SPIN_MIN_STATES states or more are traced instead
over the highest-weight states of each total spin S, weighted by their multiplets (:mod:`hte.total_spin`), when
that is cheaper; the moments are the same integers.

References (cited from memory)
------------------------------
.. [1] G. S. Rushbrooke and P. J. Wood, Mol. Phys. 1, 257 (1958): high-temperature series from traces of
       powers of the Hamiltonian.
.. [2] M. P. Gelfand, R. R. P. Singh and D. A. Huse, J. Stat. Phys. 59, 1093 (1990): linked-cluster expansions
       built from exact cluster properties.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from functools import cached_property
from fractions import Fraction
from math import comb, factorial, prod

import numpy as np

from hte import total_spin
from hte.cluster_symmetry import site_automorphisms, state_orbits
from hte.errors import ParameterError, ResourceLimitError
from hte.modular import crt_signed, power_traces_mod, prime_bits_for, primes_exceeding, symmetric_residues
from hte.spin_matrices import (
    float_sector_matrix,
    gauge_weights_mod,
    integer_couplings,
    integer_sector_matrix,
    spin_sectors,
)

_BLOCK_ENTRIES = 2**20  # unit vectors propagated together: dim * block <= this (3 float64 buffers, 24 MiB)
_BLOCK_MAX = 64
SYMMETRY_MIN_DIM = 64  # sectors this large use the cluster's symmetries; below, the search costs more than it saves
# Isotropic clusters with this many states or more may be traced over total-spin blocks (hte.total_spin), when
# the cost model of total_spin_pays favours them.  Measured on kagome, path and random clusters: below 2^13
# states (13 spins 1/2, 9 spins 1) the S^z sectors with orbit reduction are as fast or faster; spin-1/2 paths of
# 16 and 17 sites ran x4 and x6.5 faster in blocks, spin-1 paths of 10 sites x7.
TOTAL_SPIN_MIN_STATES = 2**13
_DENSE_MAX_STATES = 2**13  # the dense reference refuses larger clusters (a 2**13 matrix takes 512 MiB)


def _rational(value, where: str) -> Fraction:
    """``value`` (int, Fraction or a string such as "3/2") as a Fraction, else ParameterError naming ``where``."""
    if isinstance(value, str):
        try:
            return Fraction(value)
        except ValueError:
            pass
    elif isinstance(value, numbers.Rational) and not isinstance(value, bool):
        return Fraction(value)
    raise ParameterError(
        f"ClusterHamiltonian {where} = {value!r}: expected an exact rational (int, fractions.Fraction or a "
        f'string such as "3/2"); floats are not accepted, write Fraction("0.2") instead of 0.2'
    )


@dataclass(frozen=True)
class ClusterHamiltonian:
    """H0 of one finite cluster: spins on vertices, XXZ couplings on edges, single-ion anisotropy.

    Attributes
    ----------
    spins : tuple of Fraction
        Spin S_i of vertex i, a positive multiple of 1/2.
    bonds : tuple of (u, v, Jxy, Jz)
        Each bond once, u != v, couplings in the energy unit; a pair listed twice adds its couplings.
    anisotropy : tuple of Fraction
        D_i per vertex (term D_i (S^z_i)^2); empty means all zero.

    Values are normalised to Fraction on construction (ints and strings such as "3/2" are accepted);
    malformed input raises :class:`hte.errors.ParameterError`.
    """

    spins: tuple[Fraction, ...]
    bonds: tuple[tuple[int, int, Fraction, Fraction], ...]
    anisotropy: tuple[Fraction, ...] = ()

    def __post_init__(self):
        spins = tuple(_rational(s, f"spins[{i}]") for i, s in enumerate(self.spins))
        if not spins:
            raise ParameterError("ClusterHamiltonian spins is empty: a cluster needs at least one vertex")
        for i, s in enumerate(spins):
            if s <= 0 or (2 * s).denominator != 1:
                raise ParameterError(
                    f"ClusterHamiltonian spins[{i}] = {s}: a spin must be a positive multiple of 1/2 "
                    "(1/2, 1, 3/2, ...); fix the spin of this vertex"
                )
        bonds = []
        for b, bond in enumerate(self.bonds):
            if len(bond) != 4:
                raise ParameterError(
                    f"ClusterHamiltonian bonds[{b}] = {bond!r}: expected a tuple (u, v, Jxy, Jz)"
                )
            u, v = bond[0], bond[1]
            for end in (u, v):
                if not isinstance(end, numbers.Integral) or isinstance(end, bool) or not 0 <= end < len(spins):
                    raise ParameterError(
                        f"ClusterHamiltonian bonds[{b}] = {bond!r}: vertex {end!r} is not one of 0..{len(spins) - 1}"
                    )
            if u == v:
                raise ParameterError(
                    f"ClusterHamiltonian bonds[{b}] = {bond!r}: a bond joins two different vertices; "
                    "put on-site terms into anisotropy"
                )
            bonds.append((int(u), int(v), _rational(bond[2], f"bonds[{b}] Jxy"), _rational(bond[3], f"bonds[{b}] Jz")))
        anisotropy = tuple(_rational(d, f"anisotropy[{i}]") for i, d in enumerate(self.anisotropy))
        if anisotropy and len(anisotropy) != len(spins):
            raise ParameterError(
                f"ClusterHamiltonian anisotropy has {len(anisotropy)} entries for {len(spins)} vertices: "
                "give one D per vertex, or an empty tuple for none"
            )
        object.__setattr__(self, "spins", spins)
        object.__setattr__(self, "bonds", tuple(bonds))
        object.__setattr__(self, "anisotropy", anisotropy)

    @property
    def n_sites(self) -> int:
        return len(self.spins)

    @cached_property
    def twice_spins(self) -> tuple[int, ...]:
        """2 S_i per vertex, as ints."""
        return tuple(int(2 * s) for s in self.spins)


@dataclass(frozen=True)
class ClusterCumulants:
    """Coefficients of beta^n, n = 0..order, of the cluster's own series (k_B = 1, g mu_B = 1).

    Attributes
    ----------
    lnz : list
        ln Z(beta, 0) - sum_i ln(2 S_i + 1); lnz[0] = 0.
    m2 : list
        kappa_2(beta) = <M^2> = T chi at h = 0.
    m4 : list
        kappa_4(beta) = <M^4> - 3 <M^2>^2 at h = 0.

    Entries are Fractions from :func:`cluster_cumulants` and floats from :func:`dense_cumulants_float`.
    """

    lnz: list
    m2: list
    m4: list


QUANTITIES = ("lnz", "m2", "m4")  # the fields of ClusterCumulants: the additive quantities of a cluster series


def propagation_block(dimension: int) -> int:
    """How many unit vectors the kernels propagate together in a sector of `dimension` states: at most
    _BLOCK_MAX, at least 1, and dimension * block <= _BLOCK_ENTRIES (3 float64 buffers of at most 24 MiB)."""
    return max(1, min(_BLOCK_MAX, _BLOCK_ENTRIES // dimension))


def check_order(order) -> int:
    """The series order as an int; ParameterError unless it is an integer >= 0 (bool is refused)."""
    if not isinstance(order, numbers.Integral) or isinstance(order, bool) or order < 0:
        raise ParameterError(f"order = {order!r}: the series order must be an integer >= 0")
    return int(order)


def cluster_cumulants(ham: ClusterHamiltonian, order: int) -> ClusterCumulants:
    """Exact high-temperature series (coefficients of beta^n, n = 0..order) of one cluster.

    Parameters
    ----------
    ham : ClusterHamiltonian
        The cluster; couplings and anisotropies in the energy unit (beta is in its inverse).
    order : int
        Highest power of beta, >= 0.

    Returns
    -------
    ClusterCumulants
        lnz, m2, m4 as lists of ``fractions.Fraction`` of length order + 1.

    Notes
    -----
    Exact for every spin and rational couplings.  Cost: for each sector m >= 0 of dimension d and each prime,
    about (order/2) * nnz * d multiply-adds, nnz the number of nonzeros of H0 in the sector.
    """
    order = check_order(order)
    if total_spin_pays(ham):
        scale, sums = total_spin.total_spin_power_sums(ham, order)
        return cumulants_from_integer_moments(sums, scale, order)
    scale, traces = _integer_power_traces(ham, order)
    multiplicity = {twice_m: 1 if twice_m == 0 else 2 for twice_m in traces}  # sectors m and -m
    sums = {
        q: [sum(multiplicity[tm] * tm**q * t[k] for tm, t in traces.items()) for k in range(order + 1)]
        for q in (0, 2, 4)
    }
    return cumulants_from_integer_moments(sums, scale, order)


def total_spin_pays(ham: ClusterHamiltonian, roots=None) -> bool:
    """True when the total-spin blocks (:mod:`hte.total_spin`) should be cheaper than the S^z sectors, for
    isotropic clusters of TOTAL_SPIN_MIN_STATES states or more, by a cost model: one block pass for the cluster's
    series, or with ``roots`` one rooted pass per root (:func:`hte.total_spin.rooted_power_sums`) against the
    sectors that give every root at once (:mod:`hte.rooted_series`).

    Per pair of powers and per prime, a sector costs about dim^2 (1 + F) / |G| multiply-adds: a row holds the
    diagonal and F flips, F = sum_b 2 (2S_u)(2S_v) / ((2S_u + 1)(2S_v + 1)) on average (E/2 for E bonds between
    spins 1/2), and G is the symmetry group of the cluster, twice as large at S^z = 0 with the spin flip.  A block
    costs its dimension times its nonzeros (:func:`hte.total_spin.estimated_cost`).  The orbit reduction is taken
    as perfect, which favours the sectors for very symmetric clusters.  Checked on spin-1/2 clusters of 14-16
    sites and on paths, rings, trees and ladders of spins 1 to 5/2 (README, scripts/bench_total_spin.py): the
    choice was right or within a factor 2.5 of the better route.
    """
    if prod(t + 1 for t in ham.twice_spins) < TOTAL_SPIN_MIN_STATES or not total_spin.applies(ham):
        return False
    group = len(site_automorphisms(ham)) + 1
    twice = ham.twice_spins
    flips = sum(2 * twice[u] * twice[v] / ((twice[u] + 1) * (twice[v] + 1)) for u, v, _, _ in ham.bonds)
    sectors = spin_sectors(twice, nonnegative_only=True)
    sector_cost = sum(sector.dim**2 * (1 + flips) / (group * (2 if sector.twice_magnetization == 0 else 1))
                      for sector in sectors)
    if roots is None:
        return total_spin.estimated_cost(ham) < sector_cost
    return sum(total_spin.estimated_cost(ham, root) for root in roots) < sector_cost


def _integer_power_traces(
    ham: ClusterHamiltonian, order: int, use_symmetry: bool | None = None
) -> tuple[int, dict[int, list[int]]]:
    """scale and {2m: [Tr_m(A^k) for k = 0..order]} for m >= 0, A = scale * H0 in the integer gauge.

    The primes' product exceeds 2 d R^order >= 2 |Tr_m A^k| (A is similar to a real symmetric matrix with
    spectral radius <= R, :attr:`hte.spin_matrices.IntegerCouplings.spectral_bound`), so Chinese remaindering
    is exact.  With ``use_symmetry`` (default: when some sector has at least SYMMETRY_MIN_DIM states) only
    one unit vector per orbit of the cluster's symmetries is propagated (:mod:`hte.cluster_symmetry`); the
    result is identical.  A sector whose matrix is diagonal (Ising bonds, Jxy = 0) is summed directly.
    """
    couplings = integer_couplings(ham)
    sectors = spin_sectors(ham.twice_spins, nonnegative_only=True)
    largest = max(sector.dim for sector in sectors)
    if use_symmetry is None:
        use_symmetry = largest >= SYMMETRY_MIN_DIM
    automorphisms = site_automorphisms(ham) if use_symmetry else []
    matrices = [integer_sector_matrix(sector, couplings) for sector in sectors]
    bits = prime_bits_for(
        max(m.max_row_length for m in matrices), max(m.max_abs_entry for m in matrices), largest
    )
    primes = primes_exceeding(bits, largest * max(couplings.spectral_bound, 1) ** order)
    traces = {}
    for sector, matrix in zip(sectors, matrices):
        diagonal = _diagonal_entries(matrix)
        if diagonal is not None:
            traces[sector.twice_magnetization] = _diagonal_power_traces(diagonal, order)
            continue
        if use_symmetry:
            columns, orbit_sizes = state_orbits(sector, ham.twice_spins, automorphisms)
        else:
            columns, orbit_sizes = np.arange(sector.dim), np.ones(sector.dim, dtype=np.int64)
        block = propagation_block(sector.dim)
        residues = []
        for prime in primes:
            row_weight, column_weight = gauge_weights_mod(sector, ham.twice_spins, prime)
            column_weight = column_weight[columns] * (orbit_sizes % prime) % prime
            residues.append(
                power_traces_mod(
                    matrix.indptr,
                    matrix.indices,
                    symmetric_residues(matrix.values, prime),
                    row_weight.astype(np.float64),
                    columns.astype(np.int64),
                    column_weight.astype(np.float64),
                    order,
                    prime,
                    block,
                )
            )
        traces[sector.twice_magnetization] = [
            crt_signed([int(r[k]) for r in residues], primes) for k in range(order + 1)
        ]
    return couplings.scale, traces


def _diagonal_entries(matrix) -> np.ndarray | None:
    """The diagonal of a sector matrix that has no off-diagonal entry (every bond with Jxy = 0), else None."""
    rows = np.repeat(np.arange(matrix.indptr.size - 1), np.diff(matrix.indptr))
    if not np.array_equal(rows, matrix.indices):
        return None
    diagonal = np.zeros(matrix.indptr.size - 1, dtype=matrix.values.dtype)
    diagonal[rows] = matrix.values
    return diagonal


def _diagonal_power_traces(diagonal: np.ndarray, order: int) -> list[int]:
    """[sum_a diagonal[a]^k for k = 0..order] as exact Python ints, from the histogram of the entries (a diagonal
    H0 has a handful of distinct energies, so this costs O(dim + distinct * order))."""
    values, counts = np.unique(diagonal, return_counts=True)
    return [sum(int(c) * int(v) ** k for v, c in zip(values, counts)) for k in range(order + 1)]


def cumulants_from_integer_moments(sums: dict[int, list[int]], scale: int, order: int) -> ClusterCumulants:
    r"""Exact lnz, kappa_2, kappa_4 from the integers s_q[k] = sum_m (2m)^q Tr_m(A^k), A = scale * H0.

    With x = -beta/scale, Z_q(beta) = Tr(M^q e^{-beta H0}) = 2^{-q} sum_k s_q[k] x^k / k!, an exponential
    generating function (EGF) with integer coefficients.  EGF algebra (products are binomial convolutions)
    keeps every intermediate an integer over a known power of the dimension d = s_0[0]:

    * 1/Z_0 has EGF coefficients R_n / d^{n+1}, R_0 = 1, R_n = -sum_{k=1}^n C(n,k) s_0[k] d^{k-1} R_{n-k};
    * Z_q/Z_0 has P_q[n] / d^{n+1}, P_q[n] = sum_k C(n,k) s_q[k] R_{n-k} d^k;
    * ln(Z_0/d) has F_n / d^n, from Z_0 (ln Z_0)' = Z_0':
      F_{n+1} = d^n s_0[n+1] - sum_{k=0}^{n-1} C(n,k) F_{k+1} s_0[n-k] d^{n-k-1}.

    The EGF coefficient e_n of x^n/n! is the coefficient (-1)^n e_n / (n! scale^n) of beta^n.  Only the final
    3 (order + 1) Fractions are reduced, which is much faster than Fraction arithmetic throughout.
    """
    s0, s2, s4 = sums[0], sums[2], sums[4]
    d = s0[0]
    binomial = [[comb(n, k) for k in range(n + 1)] for n in range(order + 1)]
    reciprocal = [1]
    for n in range(1, order + 1):
        reciprocal.append(-sum(binomial[n][k] * s0[k] * d ** (k - 1) * reciprocal[n - k] for k in range(1, n + 1)))
    ratio = {
        q: [sum(binomial[n][k] * s[k] * reciprocal[n - k] * d**k for k in range(n + 1)) for n in range(order + 1)]
        for q, s in ((2, s2), (4, s4))
    }
    logarithm = [0]
    for n in range(order):
        logarithm.append(
            d**n * s0[n + 1]
            - sum(binomial[n][k] * logarithm[k + 1] * s0[n - k] * d ** (n - k - 1) for k in range(n))
        )
    lnz, m2, m4 = [], [], []
    for n in range(order + 1):
        sign_denominator = (-1) ** n * factorial(n) * scale**n  # beta^n from (x^n / n!), x = -beta/scale
        square = sum(binomial[n][k] * ratio[2][k] * ratio[2][n - k] for k in range(n + 1))
        lnz.append(Fraction(logarithm[n], sign_denominator * d**n))
        m2.append(Fraction(ratio[2][n], 4 * sign_denominator * d ** (n + 1)))
        m4.append(Fraction(d * ratio[4][n] - 3 * square, 16 * sign_denominator * d ** (n + 2)))
    return ClusterCumulants(lnz=lnz, m2=m2, m4=m4)


def _cumulants_from_moments(moments: dict[int, list], order: int) -> ClusterCumulants:
    """lnz, kappa_2, kappa_4 series from mu_q[k] = sum_m m^q Tr_m(H0^k), q = 0, 2, 4, by ordinary power series.

    Used by the float reference (the exact kernel uses :func:`cumulants_from_integer_moments`).

    Z_q(beta) = sum_k (-beta)^k mu_q[k] / k! = Tr(M^q e^{-beta H0}); ln(Z_0 / Z_0(0)), <M^2> = Z_2 / Z_0 and
    <M^4> - 3 <M^2>^2 = Z_4 / Z_0 - 3 (Z_2 / Z_0)^2, truncated at beta^order.
    """
    z = {q: [(-1) ** k * mu[k] / factorial(k) for k in range(order + 1)] for q, mu in moments.items()}
    reciprocal = _series_reciprocal(z[0])
    m2 = _series_product(z[2], reciprocal)
    fourth_moment = _series_product(z[4], reciprocal)
    m2_squared = _series_product(m2, m2)
    m4 = [a - 3 * b for a, b in zip(fourth_moment, m2_squared)]
    lnz = _series_log([c / z[0][0] for c in z[0]])
    return ClusterCumulants(lnz=lnz, m2=m2, m4=m4)


def _series_product(a: list, b: list) -> list:
    return [sum(a[k] * b[n - k] for k in range(n + 1)) for n in range(len(a))]


def _series_reciprocal(a: list) -> list:
    """1/a as a truncated power series; a[0] != 0."""
    result = [1 / a[0]]
    for n in range(1, len(a)):
        result.append(-sum(a[k] * result[n - k] for k in range(1, n + 1)) / a[0])
    return result


def _series_log(g: list) -> list:
    """ln g as a truncated power series, g[0] = 1: from g f' = g', n f_n = n g_n - sum_{k<n} k f_k g_{n-k}."""
    zero = g[0] - g[0]
    result = [zero]
    for n in range(1, len(g)):
        result.append(g[n] - sum((k * result[k] * g[n - k] for k in range(1, n)), zero) / n)
    return result


def cluster_spectrum(ham: ClusterHamiltonian) -> dict[Fraction, np.ndarray]:
    """Eigenvalues of H0 (float64, ascending, unit of the couplings) in every S^z_total sector m.

    Keys are the magnetizations m (Fractions), ascending; sector -m has the spectrum of sector m (global spin
    flip), so only m >= 0 is diagonalised (numpy.linalg.eigvalsh on the dense real symmetric sector matrix).
    """
    spectrum = {}
    for sector in spin_sectors(ham.twice_spins, nonnegative_only=True):
        energies = np.linalg.eigvalsh(float_sector_matrix(sector, ham))
        spectrum[sector.magnetization] = energies
        spectrum[-sector.magnetization] = energies.copy()
    return dict(sorted(spectrum.items()))


def dense_cumulants_float(ham: ClusterHamiltonian, order: int) -> ClusterCumulants:
    """Plain float reference for :func:`cluster_cumulants`: full Hilbert space, no symmetry, no exact arithmetic.

    Builds H0 and M on all prod_i (2S_i+1) states with numpy Kronecker products, diagonalises H0 fully and
    forms Tr(M^q H0^k) = sum_n E_n^k <n|M^q|n>, then the same moment-to-cumulant conversion in float64.
    Meant for tests and for measuring the speed-up of the exact kernel.

    Raises
    ------
    ResourceLimitError
        If the cluster has more than 2**13 states.
    """
    order = check_order(order)
    n_states = prod(t + 1 for t in ham.twice_spins)
    if n_states > _DENSE_MAX_STATES:
        raise ResourceLimitError(
            f"dense_cumulants_float: the cluster has {n_states} states, above the {_DENSE_MAX_STATES} this "
            f"reference diagonalises ({n_states**2 * 8 / 2**30:.1f} GiB per matrix); use cluster_cumulants"
        )
    raising = [np.diag(np.sqrt([(t - k) * (k + 1) for k in range(t)]), -1) for t in ham.twice_spins]
    spin_z = [np.diag(np.arange(t + 1) - t / 2) for t in ham.twice_spins]

    def embedded(factors: dict[int, np.ndarray]) -> np.ndarray:
        result = np.ones((1, 1))
        for site, t in enumerate(ham.twice_spins):
            result = np.kron(result, factors.get(site, np.eye(t + 1)))
        return result

    hamiltonian = np.zeros((n_states, n_states))
    for u, v, jxy, jz in ham.bonds:
        hamiltonian += float(jz) * embedded({u: spin_z[u], v: spin_z[v]})
        hamiltonian += float(jxy) / 2 * embedded({u: raising[u], v: raising[v].T})
        hamiltonian += float(jxy) / 2 * embedded({u: raising[u].T, v: raising[v]})
    for site, d in enumerate(ham.anisotropy):
        hamiltonian += float(d) * embedded({site: spin_z[site] @ spin_z[site]})
    magnetization = sum(np.diag(embedded({site: spin_z[site]})) for site in range(ham.n_sites))
    energies, vectors = np.linalg.eigh(hamiltonian)
    probabilities = vectors**2
    moments = {}
    for q in (0, 2, 4):
        expectation = probabilities.T @ magnetization**q
        moments[q] = [float(np.sum(energies**k * expectation)) for k in range(order + 1)]
    return _cumulants_from_moments(moments, order)
