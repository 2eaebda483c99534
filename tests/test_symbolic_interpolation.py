"""Symbolic weights rebuilt from few numeric evaluations (hte.expansion.plan_class, hte.polynomial).

The independent check is the numeric engine itself: a symbolic series with random rational values substituted
must equal, coefficient by coefficient and exactly, the numeric run at those values (which evaluates every
cluster at the given couplings and interpolates nothing).
"""

from __future__ import annotations

import random
from fractions import Fraction

import pytest
import sympy

from hte.errors import ParameterError
from hte.expansion import plan_class
from hte.polynomial import interpolate, interpolation_points, lattice_size, simplex_points
from hte.series import compute_series

QUANTITIES = ("lnZ", "chiT", "M4")


def _random_rational(rng: random.Random) -> Fraction:
    return Fraction(rng.choice([-1, 1]) * rng.randint(1, 9), rng.randint(1, 7))


def _assert_substitution_equals_numeric(symbolic, numeric, values: dict) -> None:
    subs = {sympy.Symbol(name): sympy.Rational(v.numerator, v.denominator) for name, v in values.items()}
    for name in QUANTITIES:
        for n in range(1, len(numeric.coefficients[name])):
            value = sympy.sympify(symbolic.coefficients[name][n]).subs(subs)
            assert Fraction(str(value)) == numeric.coefficients[name][n], (name, n, values)


# ------------------------------------------------------------------------------------- interpolation on lattices


@pytest.mark.parametrize("n_vars, degree", [(1, 6), (2, 5), (3, 3)])
def test_moved_lattice_interpolation_recovers_a_random_polynomial(n_vars, degree):
    rng = random.Random(n_vars * 100 + degree)
    poly = {m: _random_rational(rng) for m in simplex_points(n_vars, degree) if rng.random() < 0.7}

    def evaluate(point):
        total = Fraction(0)
        for mono, c in poly.items():
            term = c
            for x, k in zip(point, mono):
                term *= Fraction(x) ** k
            total += term
        return total

    points = interpolation_points(n_vars, degree, offset=1)
    assert len(points) == lattice_size(n_vars, degree)
    assert all(min(p) >= 1 for p in points)  # moved: no coordinate is zero
    assert interpolate(n_vars, degree, [evaluate(p) for p in points], offset=1) == poly


def test_lower_degree_lattices_are_prefixes_of_higher_ones():
    # The expansion interpolates beta^n with degree n - E from the first points of the degree-(order - E) lattice.
    for offset in (0, 1):
        full = interpolation_points(2, 6, offset)
        for d in range(6):
            assert interpolation_points(2, d, offset) == full[: lattice_size(2, d)]


def test_a_cubic_is_recovered_from_the_prefix_of_a_larger_lattice():
    rng = random.Random(7)
    poly = {m: _random_rational(rng) for m in simplex_points(2, 3)}
    points = interpolation_points(2, 5, offset=1)
    values = [sum((c * Fraction(p[0]) ** m[0] * Fraction(p[1]) ** m[1] for m, c in poly.items()), Fraction(0))
              for p in points]
    assert interpolate(2, 3, values, offset=1) == poly


def test_too_few_values_are_refused():
    with pytest.raises(ValueError, match="3 values for 6 interpolation points"):
        interpolate(2, 2, [1, 2, 3], offset=1)


# ------------------------------------------------------------------------------------- evaluation plans


def _plans(lattice_name, order, **options):
    from hte.clusters import enumerate_clusters
    from hte.lattice_file import load_lattice
    from hte.models import build_model

    spec = load_lattice(lattice_name)
    model = build_model(spec, symbolic=True, **options)
    spec = spec.without_labels([l for l, c in model.couplings.items() if c.is_zero])
    census = enumerate_clusters(spec, order)
    labels, classes = list(spec.labels), list(spec.site_classes)
    return [plan_class(gc, [model.couplings[labels[col]] for _, _, col in gc.graph.edges],
                       [(model.spin[classes[c]], model.anisotropy[classes[c]]) for c in gc.graph.vertex_colours], order)
            for gc in census.classes]


def test_a_class_with_order_bonds_needs_one_evaluation():
    # Square J1-J2, both symbolic: homogeneous weights, one free ratio; a class of E bonds needs order - E + 1
    # evaluations (the moved lattice of degree order - E in one variable), where the general scheme needs order + 1.
    order = 5
    plans = _plans("square", order)
    mixed = [p for p in plans if len(p.free) == 1]
    assert mixed
    for plan in mixed:
        assert plan.bond_powers is not None
        assert len(plan.evaluations) == order - plan.graph_class.n_bonds + 1
    assert any(len(p.evaluations) == 1 and p.graph_class.n_bonds == order for p in mixed)


def test_xxz_with_two_symbols_on_a_bond_uses_the_general_scheme():
    plans = _plans("chain", 4, kind="xxz")
    assert all(p.bond_powers is None for p in plans)
    assert all(len(p.evaluations) == 4 + 1 for p in plans)  # principal lattice of degree 4 in J1_z / J1_xy


def test_a_nonlinear_symbolic_coupling_is_refused():
    from hte.expansion import expand_lattice
    from hte.lattice_file import load_lattice
    from hte.models import Coupling, SpinModel

    spec = load_lattice("chain")
    j = sympy.Symbol("J")
    model = SpinModel("heisenberg", {"magnetic": Fraction(1, 2)}, {"J1": Coupling(j**2, j**2)},
                      {"magnetic": Fraction(0)}, {"magnetic": Fraction(1)}, True)
    with pytest.raises(ParameterError, match=r"coupling J1.xy = J\*\*2: a symbolic coupling must be a symbol"):
        expand_lattice(spec, model, 3)


# ------------------------------------------------------------------------------------- symbolic = numeric


def test_square_j1_j2_symbolic_series_equals_numeric_runs():
    symbolic = compute_series("square", order=6, symbolic=True)
    rng = random.Random(1)
    for _ in range(3):
        values = {"J1": _random_rational(rng), "J2": _random_rational(rng)}
        numeric = compute_series("square", order=6, couplings={k: str(v) for k, v in values.items()})
        _assert_substitution_equals_numeric(symbolic, numeric, values)


def test_layered_kagome_with_symbolic_jd_and_interlayer_occupation_equals_numeric_runs():
    # J1 = 1 is numeric, so the weights are not homogeneous in Jd: every symbol is free.
    fixed = {"J1": "1", "Jperp": "0", "J2": "0"}
    symbolic = compute_series("kagome-layered", order=5, couplings=fixed, occupation={"interlayer": "p"},
                              symbolic=True)
    rng = random.Random(2)
    for _ in range(3):
        jd, p = _random_rational(rng), Fraction(rng.randint(1, 9), 10)
        numeric = compute_series("kagome-layered", order=5, couplings={**fixed, "Jd": str(jd)},
                                 occupation={"interlayer": str(p)})
        _assert_substitution_equals_numeric(symbolic, numeric, {"Jd": jd, "p": p})


def test_ladder_with_symbolic_legs_and_rungs_equals_numeric_runs():
    symbolic = compute_series("ladder", order=7, symbolic=True)
    rng = random.Random(3)
    for _ in range(3):
        values = {"J1": _random_rational(rng), "Jrung": _random_rational(rng)}
        numeric = compute_series("ladder", order=7, couplings={k: str(v) for k, v in values.items()})
        _assert_substitution_equals_numeric(symbolic, numeric, values)


def test_spin_one_chain_with_numeric_anisotropy_equals_numeric_runs():
    # D = 1/3 is a numeric energy: the weights are polynomials in J1 of degree <= n - E, not homogeneous.
    symbolic = compute_series("chain", order=5, spin="1", anisotropy={"magnetic": "1/3"}, symbolic=True)
    rng = random.Random(4)
    for _ in range(3):
        j1 = _random_rational(rng)
        numeric = compute_series("chain", order=5, spin="1", anisotropy={"magnetic": "1/3"},
                                 couplings={"J1": str(j1)})
        _assert_substitution_equals_numeric(symbolic, numeric, {"J1": j1})


@pytest.mark.parametrize("couplings, symbols", [
    ({}, ("J1_xy", "J1_z")),                  # two symbols on one bond: the general scheme
    ({"J1.xy": "1"}, ("J1_z",)),              # a symbol next to a number on one bond: the general scheme
    ({"J1.xy": "0"}, ("J1_z",)),              # Ising-like: Jz alone, proportional to its symbol
])
def test_xxz_chain_symbolic_series_equals_numeric_runs(couplings, symbols):
    symbolic = compute_series("chain", order=6, model="xxz", couplings=couplings, symbolic=True)
    rng = random.Random(5)
    for _ in range(3):
        values = {name: _random_rational(rng) for name in symbols}
        numeric_couplings = {**couplings, **{f"J1.{name.split('_')[1]}": str(v) for name, v in values.items()}}
        numeric = compute_series("chain", order=6, model="xxz", couplings=numeric_couplings)
        _assert_substitution_equals_numeric(symbolic, numeric, values)


def test_xxz_square_with_j2_equals_numeric_runs():
    # Jxy and Jz of J1 as separate symbols (general scheme) next to a Heisenberg J2 symbol on other bonds.
    symbolic = compute_series("square", order=4, model="xxz", couplings={"J2": "J2"}, symbolic=True)
    rng = random.Random(6)
    for _ in range(2):
        values = {"J1_xy": _random_rational(rng), "J1_z": _random_rational(rng), "J2": _random_rational(rng)}
        numeric = compute_series("square", order=4, model="xxz", couplings={
            "J1.xy": str(values["J1_xy"]), "J1.z": str(values["J1_z"]), "J2": str(values["J2"])})
        _assert_substitution_equals_numeric(symbolic, numeric, values)


def test_three_label_ladder_equals_numeric_runs_and_the_plain_ladder():
    # Three symbols, no numeric energy: homogeneous weights with two free ratios (two-dimensional moved lattices).
    symbolic = compute_series("ladder-unequal-legs", order=6, symbolic=True)
    rng = random.Random(8)
    for _ in range(2):
        values = {name: _random_rational(rng) for name in ("J1", "Jleg", "Jrung")}
        numeric = compute_series("ladder-unequal-legs", order=6, couplings={k: str(v) for k, v in values.items()})
        _assert_substitution_equals_numeric(symbolic, numeric, values)
    # equal legs: the ladder of lattices/ladder.toml (a separate lattice file)
    j1, jrung = _random_rational(rng), _random_rational(rng)
    plain = compute_series("ladder", order=6, couplings={"J1": str(j1), "Jrung": str(jrung)})
    _assert_substitution_equals_numeric(symbolic, plain, {"J1": j1, "Jleg": j1, "Jrung": jrung})
