"""ModelCurves against independent routes: ring diagonalisation, Curie's law, numeric series, homogeneity."""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest

from hte.errors import ParameterError
from hte.model_curves import ModelCurves, curie_weiss_temperature
from hte.series import compute_series
from ring_reference import ring_spectrum

# ------------------------------------------------------------------------------------------------ reference


@lru_cache(maxsize=None)
def ring_thermodynamics(length: int, temperature: float, field: float = 0.0) -> dict:
    """Per site: m = <S^z>, chi = M/h (or d<S^z>/dh at h = 0) and C = beta^2 var(E - h S^z), g mu_B = k_B = 1."""
    energies, sz = ring_spectrum(length)
    levels = energies - field * sz
    weights = np.exp(-(levels - levels.min()) / temperature)
    z = weights.sum()
    mean = lambda x: float((weights * x).sum() / z)   # noqa: E731
    m = mean(sz)
    out = {"m": m / length,
           "C": (mean(levels ** 2) - mean(levels) ** 2) / temperature ** 2 / length,
           "chi": (m / field if field else (mean(sz ** 2) - m ** 2) / temperature) / length}
    return out


@pytest.fixture(scope="module")
def chain():
    return ModelCurves.build("chain", order=12)


# ------------------------------------------------------------------------------------------------ tests


def test_ring_of_twelve_equals_the_infinite_chain_where_used():
    # A ring of N sites differs from the infinite chain first in the beta^N term of the series (the first
    # cluster that wraps around has N bonds), and the difference shrinks fast with N: N = 10 and N = 12 agree at
    # T >= 0.8 J to 3e-5 (chi), so the 12-site ring stands for the infinite chain at the 1e-4 level used below.
    for t in (0.8, 1.5, 3.0):
        a, b = ring_thermodynamics(10, t), ring_thermodynamics(12, t)
        assert abs(a["chi"] / b["chi"] - 1) < 1e-4
        assert abs(a["C"] / b["C"] - 1) < 1e-3


@pytest.mark.parametrize("temperature", [0.8, 1.0, 2.0, 5.0])
def test_chain_chi_and_c_match_ring_diagonalisation(chain, temperature):
    # Reference: exact diagonalisation of a 12-site periodic ring (above), equal to the infinite chain there.
    exact = ring_thermodynamics(12, temperature)
    assert chain.chi([temperature], {})[0] == pytest.approx(exact["chi"], rel=2e-4)
    assert chain.heat_capacity([temperature], {})[0] == pytest.approx(exact["C"], rel=2e-3)


@pytest.mark.parametrize("temperature,field", [(1.0, 0.2), (2.0, 0.5), (4.0, 1.0)])
def test_field_terms_match_ring_diagonalisation_within_their_error(chain, temperature, field):
    # m(h), M/h and C(h) from ln Z = lnZ + (beta h)^2/2 chiT + (beta h)^4/24 M4 against the ring in a field.
    exact = ring_thermodynamics(12, temperature, field)
    zero = ring_thermodynamics(12, temperature)
    for quantity, key in (("m", "m"), ("chi", "chi"), ("C", "C")):
        values = chain.evaluate(quantity, [temperature], {}, field=field)
        padé_error = 2e-4 * abs(values.estimate[0])
        assert abs(values.estimate[0] - exact[key]) <= 3 * values.field_error[0] + padé_error + 1e-9
        # the field term is really there: the field changes the value by more than the agreement above
    assert abs(exact["chi"] - zero["chi"]) > 3 * abs(chain.chi([temperature], {}, field=field)[0] - exact["chi"])


def test_free_interlayer_spins_add_curie_law():
    # With Jd = 0 the interlayer spins are free: Curie's law chi = S(S+1)/(3T) = 1/(4T) per spin (S = 1/2),
    # p of them per cell of 3 host sites, so T chi*(p) - T chi*(0) = p/12 per host site at every order.
    model = ModelCurves.build("kagome-layered", order=4, couplings={"Jd": None}, occupation={"interlayer": None})
    assert set(model.parameters) == {"Jd", "p_interlayer"}
    with_spins = model.coefficients({"Jd": 0.0, "p_interlayer": 0.3})["chiT"]
    without = model.coefficients({"Jd": 0.0, "p_interlayer": 0.0})["chiT"]
    assert with_spins - without == pytest.approx([0.3 / 12, 0, 0, 0, 0], abs=1e-15)
    temperature = np.array([20.0])       # far above T_conv the curves add as well
    difference = model.chi(temperature, {"Jd": 0.0, "p_interlayer": 0.3}) - model.chi(temperature, {"Jd": 0.0,
                                                                                               "p_interlayer": 0.0})
    assert difference == pytest.approx(0.3 / (12 * temperature), rel=1e-4)


def test_symbolic_substitution_equals_the_numeric_series():
    # The compiled polynomials evaluated at Jd = 1/2, p = 1/5 against a numeric series computed at those values.
    model = ModelCurves.build("kagome-layered", order=4, couplings={"Jd": None}, occupation={"interlayer": None},
                              per="site")
    numeric = compute_series("kagome-layered", order=4, couplings={"J1": "1", "Jd": "1/2"},
                             occupation={"interlayer": "1/5"})
    coefficients = model.coefficients({"Jd": 0.5, "p_interlayer": 0.2})
    for name in ("chiT", "M4"):
        assert coefficients[name] == pytest.approx([float(c) for c in numeric.coefficients[name]], rel=1e-12)
    assert coefficients["lnZ"][1:] == pytest.approx([float(c) for c in numeric.coefficients["lnZ"][1:]], rel=1e-12)
    assert coefficients["lnZ"][0] == pytest.approx(numeric.lnz0, rel=1e-12)


def test_ferromagnetic_reference_coupling_by_homogeneity():
    # The beta^n term is homogeneous of degree n in the couplings: the series for J1 = -1 computed directly
    # must equal the J1 = +1 series with (-1)^n, which is what sign=-1 does.
    model = ModelCurves.build("square", order=6)
    direct = compute_series("square", order=6, couplings={"J1": "-1"})
    flipped = model.coefficients({}, sign=-1)
    assert flipped["chiT"] == pytest.approx([float(c) for c in direct.coefficients["chiT"]], rel=1e-12)


def test_curie_weiss_temperature_is_minus_z_j_s_s_plus_1_over_3():
    # theta = -z J S(S+1)/3 (CONVENTIONS.md): square lattice z = 4, S = 1/2 -> -1 (units of J1).
    model = ModelCurves.build("square", order=3)
    assert curie_weiss_temperature(model, {}) == pytest.approx(-1.0, rel=1e-12)
    assert curie_weiss_temperature(model, {}, sign=-1) == pytest.approx(1.0, rel=1e-12)


def test_per_magnetic_normalisation_divides_by_occupied_sites():
    # per occupied site: (per cell) / (3 + p); Curie constant per occupied site = S(S+1)/3 = 1/4 at any p.
    model = ModelCurves.build("kagome-layered", order=3, couplings={"Jd": None}, occupation={"interlayer": None},
                              per="magnetic")
    assert model.coefficients({"Jd": 0.7, "p_interlayer": 0.4})["chiT"][0] == pytest.approx(0.25, rel=1e-12)


def test_band_and_t_conv_come_with_the_curves(chain):
    curve_set = chain.curves({}, np.geomspace(0.2, 10, 60))
    band = curve_set.curves["chi"]
    assert np.all(band.lower <= band.estimate) and np.all(band.estimate <= band.upper)
    assert 0.2 < curve_set.T_conv["chi"] < 2.0
    assert chain.convergence_temperatures({})["chi"] == pytest.approx(curve_set.T_conv["chi"], rel=0.05)


def test_missing_parameter_value_is_refused():
    model = ModelCurves.build("kagome-layered", order=2, couplings={"Jd": None})
    with pytest.raises(ParameterError, match="Jd have no value"):
        model.chi([1.0], {})


def test_unknown_coupling_label_is_refused():
    with pytest.raises(ParameterError, match="'Jx' is not a label of lattice chain"):
        ModelCurves.build("chain", order=2, couplings={"Jx": None})
