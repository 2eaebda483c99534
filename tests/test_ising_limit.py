"""Ising limit (XXZ with Jxy = 0, spin 1/2) against the exact two-dimensional solutions.

Our Ising Hamiltonian is H = Jz sum S^z_i S^z_j = (Jz/4) sum s_i s_j with s = +-1, so the Boltzmann weight is
exp(K sum s_i s_j) with K = -beta Jz / 4 (the textbooks' H = -J sum s s, K = beta J, has J = -Jz/4).  With
Jz = -1 (ferromagnet) K = beta/4.  The expansions of the published closed forms are done here, in exact
rational arithmetic, independently of hte.
"""

from __future__ import annotations

from fractions import Fraction
from math import comb

import pytest

from hte.series import compute_series

# ------------------------------------------------------------------------------- exact power series helpers


def _fact(n):
    out = 1
    for k in range(2, n + 1):
        out *= k
    return out


def _mul(a, b, n):
    out = [Fraction(0)] * (n + 1)
    for i in range(n + 1):
        if a[i]:
            for j in range(n + 1 - i):
                out[i + j] += a[i] * b[j]
    return out


def _inv(a, n):
    out = [Fraction(0)] * (n + 1)
    out[0] = 1 / a[0]
    for m in range(1, n + 1):
        out[m] = -sum(a[k] * out[m - k] for k in range(1, m + 1)) / a[0]
    return out


def _log(a, n):
    d = [k * a[k] for k in range(1, n + 1)] + [Fraction(0)]
    q = _mul(d, _inv(a, n), n)
    return [Fraction(0)] + [q[m - 1] / m for m in range(1, n + 1)]


def _cosh(c, n):
    """cosh(c x) as a series in x."""
    return [Fraction(c) ** k / _fact(k) if k % 2 == 0 else Fraction(0) for k in range(n + 1)]


def _sinh(c, n):
    return [Fraction(c) ** k / _fact(k) if k % 2 == 1 else Fraction(0) for k in range(n + 1)]


def _tanh(c, n):
    return _mul(_sinh(c, n), _inv(_cosh(c, n), n), n)


def _power(a, k, n):
    out = [Fraction(1)] + [Fraction(0)] * n
    for _ in range(k):
        out = _mul(out, a, n)
    return out


def _scale(a, c):
    return [c * x for x in a]


def _add(*series):
    return [sum(xs, Fraction(0)) for xs in zip(*series)]


def _angle_average_square(m):
    """<(cos a + cos b)^m> over the torus: sum_j C(m, j) <cos^j><cos^(m-j)>, <cos^2r> = C(2r, r)/4^r."""

    def cos_moment(j):
        return Fraction(comb(j, j // 2), 4 ** (j // 2)) if j % 2 == 0 else Fraction(0)

    return sum(comb(m, j) * cos_moment(j) * cos_moment(m - j) for j in range(m + 1))


def _angle_average_triangular(m):
    """<(cos a + cos b + cos(a + b))^m>: constant term of ((x + 1/x + y + 1/y + xy + 1/(xy))/2)^m."""
    terms = {(1, 0): 1, (-1, 0): 1, (0, 1): 1, (0, -1): 1, (1, 1): 1, (-1, -1): 1}
    power = {(0, 0): 1}
    for _ in range(m):
        nxt = {}
        for (a, b), c in power.items():
            for (da, db), d in terms.items():
                key = (a + da, b + db)
                nxt[key] = nxt.get(key, 0) + c * d
        power = nxt
    return Fraction(power.get((0, 0), 0), 2**m)


def _lnz_from_kernel_formula(big_a, s, average, n):
    """ln Z/N - ln 2 = (1/2) < ln(A(K) - s(K) C) > = (1/2)[ln A - sum_m <C^m> (s/A)^m / m], series in K."""
    ratio = _mul(s, _inv(big_a, n), n)
    out = _log(big_a, n)
    for m in range(1, n + 1):
        out = _add(out, _scale(_power(ratio, m, n), -average(m) / m))
    return _scale(out, Fraction(1, 2))


def onsager_lnz(n):
    # L. Onsager, Phys. Rev. 65, 117 (1944): ln Z/N = ln 2 + (1/2pi^2) int_0^pi int_0^pi
    #   ln[cosh^2 2K - sinh 2K (cos a + cos b)] da db, i.e. (1/2) < ln(...) > over the torus.
    return _lnz_from_kernel_formula(_power(_cosh(2, n), 2, n), _sinh(2, n), _angle_average_square, n)


def houtappel_lnz(n):
    # R. M. F. Houtappel, Physica 16, 425 (1950); G. H. Wannier, Phys. Rev. 79, 357 (1950):
    # ln Z/N = ln 2 + (1/8pi^2) int int ln[cosh^3 2K + sinh^3 2K - sinh 2K (cos a + cos b + cos(a+b))] da db.
    big_a = _add(_power(_cosh(2, n), 3, n), _power(_sinh(2, n), 3, n))
    return _lnz_from_kernel_formula(big_a, _sinh(2, n), _angle_average_triangular, n)


def in_beta(series_in_k, factor):
    """Substitute K = factor * beta."""
    return [c * Fraction(factor) ** k for k, c in enumerate(series_in_k)]


ISING_FERRO = {"J1.xy": "0", "J1.z": "-1"}


def test_expanded_onsager_formula_has_the_free_bond_start():
    # Sanity check of the expansion itself: ln Z/N = ln 2 + 2 ln cosh K + O(K^4) ... = K^2 + O(K^4) (2 bonds/site).
    series = onsager_lnz(4)
    assert series[:3] == [0, 0, 1]


@pytest.mark.parametrize("order", [10])
def test_square_ising_free_energy_matches_onsager(order):
    ours = compute_series("square", order=order, model="xxz", couplings=ISING_FERRO)
    exact = in_beta(onsager_lnz(order), Fraction(1, 4))
    assert ours.coefficients["lnZ"][1:] == exact[1:]


@pytest.mark.parametrize("order", [16, pytest.param(20, marks=pytest.mark.slow)])
def test_square_ising_free_energy_matches_onsager_to_high_order(order):
    # ln Z alone of spin-1/2 Ising bonds: only biconnected clusters are enumerated (star graphs; hte.expansion.
    # star_graphs_suffice).  Measured on 2 cores: order 16 in 3 s, order 20 in 245 s.
    ours = compute_series("square", order=order, model="xxz", couplings=ISING_FERRO, lnz_only=True, workers=2)
    exact = in_beta(onsager_lnz(order), Fraction(1, 4))
    assert ours.coefficients["lnZ"][1:] == exact[1:]


@pytest.mark.parametrize("jz,order", [("-1", 7), ("1", 7)])
def test_triangular_ising_free_energy_matches_houtappel(jz, order):
    # The triangular lattice is not bipartite: ferro (K > 0) and antiferro (K < 0) series differ.  All clusters.
    ours = compute_series("triangular", order=order, model="xxz", couplings={"J1.xy": "0", "J1.z": jz})
    exact = in_beta(houtappel_lnz(order), Fraction(-int(jz), 4))
    assert ours.coefficients["lnZ"][1:] == exact[1:]


@pytest.mark.parametrize("jz,order", [("-1", 13), ("1", 12), pytest.param("-1", 14, marks=pytest.mark.slow),
                                      pytest.param("1", 14, marks=pytest.mark.slow)])
def test_triangular_ising_free_energy_matches_houtappel_to_high_order(jz, order):
    # Star graphs only, as above.  Measured on 2 cores: order 14 in 91-106 s, 13 in 19 s, 12 in 4 s.
    ours = compute_series("triangular", order=order, model="xxz", couplings={"J1.xy": "0", "J1.z": jz},
                          lnz_only=True, workers=2)
    exact = in_beta(houtappel_lnz(order), Fraction(-int(jz), 4))
    assert ours.coefficients["lnZ"][1:] == exact[1:]


# Square-lattice Ising susceptibility chi = sum_j <s_0 s_j> = sum_n a_n v^n, v = tanh K:
# M. F. Sykes, D. S. Gaunt, P. D. Roberts and J. A. Wyles, J. Phys. A 5, 624 (1972) (from memory).
SQUARE_ISING_CHI_IN_V = [1, 4, 12, 36, 100, 276, 740, 1972, 5172, 13492, 34876]


def test_square_ising_susceptibility_matches_published_coefficients():
    order = 10
    ours = compute_series("square", order=order, model="xxz", couplings=ISING_FERRO)
    # Our T chi/N = <M^2>/N with M = sum S^z = sum s/2, so T chi/N = chi_Ising / 4.  v = tanh(beta/4).
    v = _tanh(Fraction(1, 4), order)
    published = [Fraction(0)] * (order + 1)
    for n, a in enumerate(SQUARE_ISING_CHI_IN_V[: order + 1]):
        published = _add(published, _scale(_power(v, n, order), Fraction(a, 4)))
    assert ours.coefficients["chiT"] == published
