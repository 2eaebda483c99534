r"""Rooted cluster series: the joint cumulants of one site's S^z with M, exactly, beside the cluster's own series.

Convention as in :mod:`hte.exact`: H = H0 - h M, H0 conserves M = sum_i S^z_i, k_B = g mu_B = 1.  For a site a
of the cluster, the magnetisation of that site in a field is an odd series in x = beta h,

.. math:: \langle S^z_a\rangle_h = \sum_{k\ \mathrm{odd}} \frac{x^k}{k!}\,u_k(a),\qquad
          u_1(a) = \langle M S^z_a\rangle,\quad
          u_3(a) = \langle M^3 S^z_a\rangle - 3\langle M^2\rangle\langle M S^z_a\rangle,

with averages at h = 0 (functions of beta): since [H0, M] = 0 and [S^z_a, M] = 0,
:math:`\langle S^z_a\rangle_h = \mathrm{Tr}(S^z_a e^{xM} e^{-\beta H_0}) / \mathrm{Tr}(e^{xM} e^{-\beta H_0})`,
whose x-derivatives at 0 are the joint cumulants of one S^z_a with k copies of M (the odd moments
<M>, <S^z_a>, <M^2 S^z_a> vanish by the global spin flip).  u_1 summed over all sites is <M^2> = T chi.

Method of :func:`rooted_cluster_series`: S^z_a is diagonal in the product basis, so
:math:`\mathrm{Tr}_m(S^z_a A^k) = \sum_b m_a(b)\,(A^k)_{bb}` needs only the diagonal elements of the powers
of the integer sector matrix A = scale * H0 (integer gauge, :mod:`hte.spin_matrices`), which
:func:`hte.modular.power_diagonals_mod` gives modulo primes in the same propagation that yields the trace.
Sector -m contributes what sector m does to the odd moments (m -> -m, S^z_a -> -S^z_a), and sector 0 nothing.
As in the plain kernel, one unit vector per orbit of the cluster's symmetries is propagated
(:mod:`hte.cluster_symmetry`): (A^k)_bb is constant on an orbit, so a site's sum is the representative's
diagonal times the orbit sum of m_a(b).  The cluster's own series (ln Z, <M^2>, <M^4>_c) come out of the same
traces and equal :func:`hte.exact.cluster_cumulants` exactly.

When only a few roots are wanted and the cluster is isotropic, each root may instead be traced over the
total-spin blocks with that site coupled last (:func:`hte.total_spin.rooted_power_sums`), when the cost model
:func:`hte.exact.total_spin_pays` says that one block pass per root is cheaper than the sectors.  Same integers.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from math import comb, factorial

import numpy as np

from hte import total_spin
from hte.cluster_symmetry import site_automorphisms, state_orbit_labels
from hte.exact import (
    SYMMETRY_MIN_DIM,
    ClusterCumulants,
    ClusterHamiltonian,
    check_order,
    cumulants_from_integer_moments,
    propagation_block,
    total_spin_pays,
)
from hte.modular import (
    crt_signed,
    power_diagonals_mod,
    prime_bits_for,
    primes_exceeding,
    symmetric_residues,
)
from hte.spin_matrices import gauge_weights_mod, integer_couplings, integer_sector_matrix, spin_sectors


@dataclass(frozen=True)
class RootedSeries:
    """Coefficients of beta^n, n = 0..order, of u_1(a) and u_3(a) (module docstring) for sites a.

    ``u1[a]`` and ``u3[a]`` are lists of Fractions, for every site computed (a dict keyed by the site numbers of
    the ClusterHamiltonian).
    """

    u1: dict
    u3: dict


def rooted_cluster_series(ham: ClusterHamiltonian, order: int,
                          roots=None) -> tuple[ClusterCumulants, RootedSeries]:
    """The cluster's own series and the rooted series of the sites ``roots`` (default: every site), exact to
    beta^order.

    Returns
    -------
    (ClusterCumulants, RootedSeries)
        The first equals :func:`hte.exact.cluster_cumulants` (ham, order).  The second holds at least the sites
        asked for; the S^z route gives every site at no extra cost, and then returns them all.

    Notes
    -----
    The S^z route costs about what :func:`hte.exact.cluster_cumulants` costs in the sectors (the same
    propagation, one unit vector per orbit of the cluster's symmetries); the diagonals kept take
    (orbits) * (order + 1) int64 per sector and prime.  The total-spin route costs one block pass per root.
    """
    order = check_order(order)
    wanted = list(range(ham.n_sites)) if roots is None else sorted(set(roots))
    if wanted and total_spin_pays(ham, roots=wanted):
        return _rooted_by_total_spin(ham, order, wanted)
    return _rooted_by_sectors(ham, order)


def _rooted_by_total_spin(ham: ClusterHamiltonian, order: int, roots: list[int]):
    """One total-spin pass per root (:func:`hte.total_spin.rooted_power_sums`)."""
    u1, u3, cumulants = {}, {}, None
    for root in roots:
        scale, sums, rooted = total_spin.rooted_power_sums(ham, root, order)
        if cumulants is None:
            cumulants = cumulants_from_integer_moments(sums, scale, order)
        (u1[root],), (u3[root],) = _joint_cumulants(sums[0], sums[2], [rooted[1]], [rooted[3]], scale, order)
    return cumulants, RootedSeries(u1, u3)


def _rooted_by_sectors(ham: ClusterHamiltonian, order: int) -> tuple[ClusterCumulants, RootedSeries]:
    """Every site at once from the diagonals of the S^z-sector powers (module docstring)."""
    couplings = integer_couplings(ham)
    sectors = spin_sectors(ham.twice_spins, nonnegative_only=True)
    matrices = [integer_sector_matrix(sector, couplings) for sector in sectors]
    largest = max(sector.dim for sector in sectors)
    bits = prime_bits_for(max(m.max_row_length for m in matrices), max(m.max_abs_entry for m in matrices), largest)
    # |Tr_m(2 S^z_a A^k)| <= 2 S_a * dim * R^k, R >= scale * ||H0|| (see hte.exact._integer_power_traces)
    primes = primes_exceeding(bits, max(ham.twice_spins) * largest * max(couplings.spectral_bound, 1) ** order)
    use_symmetry = largest >= SYMMETRY_MIN_DIM
    automorphisms = site_automorphisms(ham) if use_symmetry else []
    traces, rooted = {}, {}
    for sector, matrix in zip(sectors, matrices):
        labels = state_orbit_labels(sector, ham.twice_spins, automorphisms) if use_symmetry else np.arange(sector.dim)
        columns = np.nonzero(labels == np.arange(sector.dim))[0]
        orbit = np.searchsorted(columns, labels)  # orbit number of every state
        orbit_sizes = np.bincount(orbit, minlength=columns.size)
        # orbit sums of 2 m_a: sum over the orbit of <b|2 S^z_a|b> (A^k)_bb = (A^k)_rr * orbit_weights[a, r]
        twice_m = 2 * sector.local_states - np.array(ham.twice_spins, dtype=np.int64)
        orbit_weights = np.zeros((ham.n_sites, columns.size), dtype=np.int64)
        np.add.at(orbit_weights.T, orbit, twice_m)
        block = propagation_block(sector.dim)
        total_residues, site_residues = [], []
        for prime in primes:
            row_weight, column_weight = gauge_weights_mod(sector, ham.twice_spins, prime)
            diagonals = power_diagonals_mod(matrix.indptr, matrix.indices, symmetric_residues(matrix.values, prime),
                                            row_weight.astype(np.float64), columns.astype(np.int64),
                                            column_weight[columns].astype(np.float64), order, prime, block)
            # diagonals < p, dim * p < 2**52 (prime_bits_for), sum_r orbit_sizes[r] = dim and
            # sum_r |orbit_weights[a, r]| <= 2 S_a dim: the int64 sums stay below 2**63
            total_residues.append((orbit_sizes % prime) @ diagonals % prime)
            if sector.twice_magnetization:  # sector 0 adds nothing to the odd moments
                site_residues.append(orbit_weights @ diagonals % prime)
        traces[sector.twice_magnetization] = [crt_signed([int(r[k]) for r in total_residues], primes)
                                              for k in range(order + 1)]
        if sector.twice_magnetization:
            rooted[sector.twice_magnetization] = [
                [crt_signed([int(r[a, k]) for r in site_residues], primes) for k in range(order + 1)]
                for a in range(ham.n_sites)]
    multiplicity = {twice_m: 1 if twice_m == 0 else 2 for twice_m in traces}  # sectors m and -m
    sums = {q: [sum(multiplicity[tm] * tm**q * t[k] for tm, t in traces.items()) for k in range(order + 1)]
            for q in (0, 2, 4)}
    cumulants = cumulants_from_integer_moments(sums, couplings.scale, order)
    # r_q[a][k] = sum_m (2m)^q Tr_m(2 S^z_a A^k) over all m: sectors m and -m give equal terms for odd q
    site_sums = {q: [[2 * sum(tm**q * t[a][k] for tm, t in rooted.items()) for k in range(order + 1)]
                     for a in range(ham.n_sites)] for q in (1, 3)}
    u1, u3 = _joint_cumulants(sums[0], sums[2], site_sums[1], site_sums[3], couplings.scale, order)
    return cumulants, RootedSeries(dict(enumerate(u1)), dict(enumerate(u3)))


def _joint_cumulants(s0, s2, r1, r3, scale: int, order: int) -> tuple[list, list]:
    r"""u_1(a), u_3(a) series from the integers s_q[k] = sum_m (2m)^q Tr_m A^k and r_q[a][k] (see above).

    As in :func:`hte.exact.cumulants_from_integer_moments`, with x = -beta/scale every ratio
    Tr(X e^{-beta H0}) / Tr(e^{-beta H0}) is an exponential generating function whose coefficient of x^n/n! is
    P_X[n] / d^(n+1) with integer P_X[n] = sum_k C(n,k) s_X[k] R_(n-k) d^k (d = s_0[0], R the integers of 1/Z).
    Then u_1 = P_r1 / (4 d^(n+1)) and u_3 = (d P_r3[n] - 3 sum_k C(n,k) P_s2[k] P_r1[n-k]) / (16 d^(n+2)),
    since (2M)(2 S^z_a) = 4 M S^z_a and (2M)^3 (2 S^z_a) = 16 M^3 S^z_a.
    """
    d = s0[0]
    binomial = [[comb(n, k) for k in range(n + 1)] for n in range(order + 1)]
    reciprocal = [1]
    for n in range(1, order + 1):
        reciprocal.append(-sum(binomial[n][k] * s0[k] * d ** (k - 1) * reciprocal[n - k] for k in range(1, n + 1)))

    def ratio(s):
        return [sum(binomial[n][k] * s[k] * reciprocal[n - k] * d**k for k in range(n + 1)) for n in range(order + 1)]

    second = ratio(s2)
    u1, u3 = [], []
    for r1_site, r3_site in zip(r1, r3):
        first, third = ratio(r1_site), ratio(r3_site)
        u1_site, u3_site = [], []
        for n in range(order + 1):
            sign_denominator = (-1) ** n * factorial(n) * scale**n  # beta^n from x^n / n!, x = -beta/scale
            product = sum(binomial[n][k] * second[k] * first[n - k] for k in range(n + 1))
            u1_site.append(Fraction(first[n], 4 * sign_denominator * d ** (n + 1)))
            u3_site.append(Fraction(d * third[n] - 3 * product, 16 * sign_denominator * d ** (n + 2)))
        u1.append(u1_site)
        u3.append(u3_site)
    return u1, u3
