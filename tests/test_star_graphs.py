"""ln Z of spin-1/2 Ising models from biconnected clusters alone (star-graph expansion).

For spin 1/2, Jxy = 0 and h = 0, Z of a graph that splits at a cut vertex is the product of the blocks' Z over 2
(flipping every spin of one block maps its two boundary states onto each other), so linked ln Z weights of
graphs with a cut vertex vanish (common practice in lattice statistics; derivation in
hte.weight_book.WeightBook.ising_half).  Each check compares the star-graph run (``lnz_only=True``) with the run
over all connected clusters (``lnz_only=False``), which does not use the rule at all.
"""

from __future__ import annotations

from fractions import Fraction

import pytest
import sympy

from hte.expansion import star_graphs_suffice
from hte.lattice_file import load_lattice
from hte.models import build_model
from hte.series import compute_series


def both_runs(lattice, order, **model):
    stars = compute_series(lattice, order=order, model="xxz", lnz_only=True, **model)
    everything = compute_series(lattice, order=order, model="xxz", **model)
    return stars.coefficients["lnZ"], everything.coefficients["lnZ"]


@pytest.mark.parametrize("lattice, order, couplings, extra", [
    ("kagome", 9, {"J1.xy": "0", "J1.z": "1"}, {}),
    ("square", 6, {"J1.xy": "0", "J1.z": "1", "J2.xy": "0", "J2.z": "-1/2"}, {}),
    ("cubic", 6, {"J1.xy": "0", "J1.z": "-1"}, {}),
    ("kagome-layered", 5, {"J1.xy": "0", "J1.z": "1", "Jd.xy": "0", "Jd.z": "2/3"},
     {"occupation": {"interlayer": "1/3"}}),
])
def test_star_graphs_give_the_ln_z_of_all_clusters(lattice, order, couplings, extra):
    stars, everything = both_runs(lattice, order, couplings=couplings, **extra)
    assert stars == everything


def test_symbolic_ising_couplings_use_star_graphs_too():
    stars = compute_series("square", order=6, model="xxz", symbolic=True, lnz_only=True,
                           couplings={"J1.xy": "0", "J1.z": "J", "J2.xy": "0", "J2.z": "K"})
    numeric = compute_series("square", order=6, model="xxz",
                             couplings={"J1.xy": "0", "J1.z": "1", "J2.xy": "0", "J2.z": "-2/3"})
    j, k = sympy.symbols("J K")
    for n, expr in enumerate(stars.coefficients["lnZ"]):
        value = sympy.sympify(expr).subs({j: 1, k: sympy.Rational(-2, 3)})
        assert Fraction(str(value)) == numeric.coefficients["lnZ"][n], n


def test_spin_one_ising_does_not_use_star_graphs():
    # For S = 1 a boundary site's state 0 differs from +-1, so cut-vertex graphs keep their weights.
    lattice = load_lattice("square").without_labels(["J2"])
    ising = {"J1.xy": "0", "J1.z": "1"}
    spin_one = build_model(lattice, kind="xxz", spin={"magnetic": "1"}, couplings=ising)
    assert not star_graphs_suffice(lattice, spin_one, ("lnz",))
    stars, everything = both_runs(lattice, 6, spin={"magnetic": "1"}, couplings=ising)
    assert stars == everything


def test_star_graphs_only_for_ln_z_of_spin_half_ising_bonds():
    lattice = load_lattice("square").without_labels(["J2"])
    ising = build_model(lattice, kind="xxz", couplings={"J1.xy": "0", "J1.z": "1"})
    xxz = build_model(lattice, kind="xxz", couplings={"J1.xy": "1/10", "J1.z": "1"})
    symbolic_xy = build_model(lattice, kind="xxz", couplings={"J1.xy": "J", "J1.z": "1"}, symbolic=True)
    assert star_graphs_suffice(lattice, ising, ("lnz",))
    assert not star_graphs_suffice(lattice, ising, ("lnz", "m2", "m4"))
    assert not star_graphs_suffice(lattice, xxz, ("lnz",))
    assert not star_graphs_suffice(lattice, symbolic_xy, ("lnz",))
