"""curves_from_series and plot_curves on exactly solvable models: Ising chain, Heisenberg dimer, free spins."""

import csv
import json
import math
import os
from fractions import Fraction
from functools import lru_cache

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad

from hte.curves import curves_from_series
from hte.errors import ParameterError
from hte.pade import VariableTransform
from hte.plotting import plot_curves

b = sp.Symbol("beta")
TEMPERATURES = np.geomspace(0.05, 5.0, 60)


def taylor(expr, order):
    """Exact coefficients n = 1..order of expr as strings (the JSON form of CONVENTIONS.md)."""
    series = sp.series(expr - expr.subs(b, 0), b, 0, order + 1).removeO()
    return [str(sp.Rational(series.coeff(b, n))) for n in range(1, order + 1)]


@lru_cache
def ising_chain(order=14):
    # H = J sum S^z_i S^z_{i+1}, S = 1/2, J = 1.  Baxter, Exactly Solved Models (1982) ch. 2, writes
    # H = -J_B sum s_i s_{i+1}, s = +-1, with ln Z/N = ln(2 cosh(beta J_B)) and kT chi/N = e^{2 beta J_B} for unit
    # moments.  Here S^z = s/2, so J_B = -J/4 and the moment is 1/2: ln Z/N = ln 2 + ln cosh(beta/4),
    # T chi/N = e^{-beta/2}/4.
    return {"lnZ": [repr(math.log(2))] + taylor(sp.log(sp.cosh(b / 4)), order),
            "chiT": ["1/4"] + taylor(sp.exp(-b / 2) / 4, order)}


def ising_chain_exact(t):
    x = 1 / (4 * t)
    return {"chi": np.exp(-2 * x) / (4 * t), "C": x ** 2 / np.cosh(x) ** 2,
            "S": np.log(2 * np.cosh(x)) - x * np.tanh(x), "E": -np.tanh(x) / 4}


@lru_cache
def heisenberg_dimer(order=12):
    # H = J S1.S2: singlet -3J/4, triplet +J/4.  Bleaney-Bowers: chi per dimer = 2 beta/(3 + e^{beta J}) with
    # g muB = 1 (B. Bleaney and K. D. Bowers, Proc. R. Soc. Lond. A 214, 451 (1952), who write H = -2J' S1.S2,
    # so J' = -J/2 here).  Per site: T chi/N = 1/(3 + e^beta), ln Z/N = ln(e^{3 beta/4} + 3 e^{-beta/4})/2.
    return {"lnZ": [repr(math.log(2))] + taylor(sp.log(sp.exp(3 * b / 4) + 3 * sp.exp(-b / 4)) / 2, order),
            "chiT": ["1/4"] + taylor(1 / (3 + sp.exp(b)), order)}


def dimer_exact(t):
    beta = 1 / t
    z = 1 + 3 * np.exp(-beta)                              # energies shifted by +3/4
    mean = (-0.75 + 0.75 * np.exp(-beta)) / z              # (-3/4 * 1 + 1/4 * 3 e^{-beta}) / z
    square = (0.5625 + 0.1875 * np.exp(-beta)) / z
    return {"chi": beta / (3 + np.exp(beta)), "C": 0.5 * beta ** 2 * (square - mean ** 2),
            "E": mean / 2, "S": 0.5 * (np.log(z) + 0.75 * beta + beta * mean)}


@lru_cache
def spin_one_in_field(order=12):
    # free spins S = 1 in a field h = 1 (Schottky anomaly; levels -1, 0, +1): ln Z/N = ln(1 + 2 cosh beta)
    return {"lnZ": [repr(math.log(3))] + taylor(sp.log(1 + 2 * sp.cosh(b)), order)}


def spin_one_exact(t):
    beta = 1 / t
    z = 1 + 2 * np.cosh(beta)
    mean = -2 * np.sinh(beta) / z
    square = 2 * np.cosh(beta) / z
    return {"C": beta ** 2 * (square - mean ** 2), "E": mean, "S": np.log(z) + beta * mean}


@lru_cache
def xx_chain(order=14):
    # free fermions, e_k = cos k (E. Lieb, T. Schultz and D. Mattis, Ann. Phys. 16, 407 (1961));
    # ln Z/N = (1/2pi) int ln(1 + e^{-beta cos k}) dk, term by term with <cos^n k> = C(n, n/2)/2^n (n even)
    series = [Fraction(c) for c in taylor(sp.log(1 + sp.exp(-b)), order)]
    return {"lnZ": [repr(math.log(2))] + [str(c * Fraction(math.comb(n, n // 2), 2 ** n)) if n % 2 == 0 else "0"
                                         for n, c in enumerate(series, start=1)]}


def xx_chain_heat_capacity(t):
    integrand = lambda k: (np.cos(k) / t) ** 2 / (4 * np.cosh(np.cos(k) / (2 * t)) ** 2)
    return quad(integrand, 0, np.pi, limit=200)[0] / np.pi


def assert_within_tolerance_above_t_conv(curves, exact, quantities):
    for name in quantities:
        t_conv = curves.T_conv[name]
        assert t_conv is not None, name
        above = curves.temperatures >= t_conv
        error = np.abs(curves.curves[name].estimate[above] / exact[name][above] - 1)
        assert error.max() <= curves.tolerance, (name, t_conv, error.max())


def test_ising_chain_pade_curves_are_accurate_above_t_conv():
    curves = curves_from_series(ising_chain(), "pade", temperatures=TEMPERATURES)
    exact = ising_chain_exact(curves.temperatures)
    assert_within_tolerance_above_t_conv(curves, exact, ("chi", "C", "S", "E"))
    # measured at order 14: T_conv(chi) = 0.086, T_conv(C) = 0.128, T_conv(S) = 0.161, T_conv(E) = 0.074
    assert curves.T_conv["chi"] < 0.1 and curves.T_conv["C"] < 0.15
    assert curves.fallback == []


def test_heisenberg_dimer_pade_curves_match_bleaney_bowers_above_t_conv():
    curves = curves_from_series(heisenberg_dimer(), "pade", temperatures=TEMPERATURES)
    exact = dimer_exact(curves.temperatures)
    assert_within_tolerance_above_t_conv(curves, exact, ("chi", "C", "S", "E"))
    assert max(curves.T_conv.values()) < 0.35                # the chi maximum sits at T = 0.62


def test_free_spins_in_a_field_schottky_anomaly_is_reproduced():
    curves = curves_from_series(spin_one_in_field(), "pade", temperatures=TEMPERATURES)
    exact = spin_one_exact(curves.temperatures)
    assert "chi" not in curves.curves                       # no chiT series given: absent, not NaN
    assert_within_tolerance_above_t_conv(curves, exact, ("C", "S", "E"))
    # measured at order 12: T_conv(C) = 0.56, just above the Schottky maximum at T = 0.52; the series itself
    # converges only for beta < 2 pi/3 (poles of ln(1 + 2 cosh beta) at cosh beta = -1/2), i.e. T > 0.48
    assert curves.T_conv["C"] < 0.6


def test_bands_widen_towards_low_temperature_and_t_conv_falls_with_order():
    low_order = curves_from_series(ising_chain(8), "pade", temperatures=TEMPERATURES)
    high_order = curves_from_series(ising_chain(14), "pade", temperatures=TEMPERATURES)
    for curves in (low_order, high_order):
        width = curves.curves["C"].relative_half_width()
        t = curves.temperatures
        assert width[t < 0.1].min() > width[t > 1.0].max()
    for name in ("chi", "C", "E"):
        assert high_order.T_conv[name] < low_order.T_conv[name]


def test_energy_route_for_heat_capacity_reaches_lower_t_conv_than_direct_pade_of_c():
    # The documented choice in hte/curves.py: both routes are within tolerance above their T_conv, and the
    # derivative of the energy approximants converges further down on all three exactly solved models.
    models = [(ising_chain(), lambda t: ising_chain_exact(t)["C"]),
              (heisenberg_dimer(), lambda t: dimer_exact(t)["C"]),
              (xx_chain(), lambda t: np.array([xx_chain_heat_capacity(x) for x in t]))]
    grid = np.geomspace(0.05, 5.0, 40)
    for series, exact_heat in models:
        t_conv = {}
        for route in ("energy", "direct"):
            curves = curves_from_series(series, "pade", temperatures=grid, heat_capacity_route=route)
            assert_within_tolerance_above_t_conv(curves, {"C": exact_heat(curves.temperatures)}, ("C",))
            t_conv[route] = curves.T_conv["C"]
        assert t_conv["energy"] <= t_conv["direct"]


def test_euler_variable_gives_the_same_curve_where_both_converge():
    grid = np.geomspace(0.2, 5.0, 30)
    plain = curves_from_series(heisenberg_dimer(), "pade", temperatures=grid)
    euler = curves_from_series(heisenberg_dimer(), "pade", temperatures=grid,
                               transform=VariableTransform("euler", Fraction(1, 2)))
    exact = dimer_exact(euler.temperatures)
    assert_within_tolerance_above_t_conv(euler, exact, ("chi", "C"))
    both = grid >= max(plain.T_conv["chi"], euler.T_conv["chi"])
    np.testing.assert_allclose(euler.curves["chi"].estimate[both], plain.curves["chi"].estimate[both], rtol=0.01)


def test_no_surviving_approximant_falls_back_to_the_flagged_raw_series():
    # T chi = 1/(1 - beta): a ferromagnet-like pole at T = 1; below it every approximant has a pole on the segment
    series = {"chiT": ["1"] * 11}
    curves = curves_from_series(series, "pade", temperatures=np.linspace(0.5, 3.0, 11))
    assert curves.fallback == ["chi"]
    assert any("no Padé approximant survived" in w for w in curves.warnings)
    band = curves.curves["chi"]
    beta = 1 / curves.temperatures
    np.testing.assert_allclose(band.estimate, beta * sum(beta ** n for n in range(11)))   # raw truncated series
    assert np.all(np.isfinite(band.lower)) and np.all(np.isfinite(band.upper))


def test_dlog_method_gives_critical_point_and_susceptibility_above_it():
    # T chi = (1 - beta/beta_c)^(-gamma) (1 + beta/5), beta_c = 2 (T_c = 0.5), gamma = 1.4
    order, beta_c, gamma = 14, Fraction(2), Fraction(7, 5)
    power = [Fraction(1)]
    for n in range(1, order + 1):
        power.append(power[-1] * (gamma + n - 1) / n / beta_c)
    chi_t = [power[n] + (power[n - 1] / 5 if n else 0) for n in range(order + 1)]
    curves = curves_from_series({"chiT": [str(c) for c in chi_t]}, "dlog", temperatures=np.linspace(0.3, 3.0, 28))
    assert curves.critical["T_c"] == pytest.approx(0.5, abs=1e-9)
    assert curves.critical["gamma"] == pytest.approx(1.4, abs=1e-9)
    assert curves.temperatures.min() > 0.5 and list(curves.curves) == ["chi"]
    beta = 1 / curves.temperatures
    exact = beta * (1 - beta / 2) ** -1.4 * (1 + beta / 5)
    np.testing.assert_allclose(curves.curves["chi"].estimate, exact, rtol=1e-9)
    assert any("dropped" in w for w in curves.warnings)
    document = curves.to_json_dict()
    assert set(document["critical"]) >= {"T_c", "T_c_err", "gamma", "gamma_err"}


def test_entropy_method_curves_include_chi_and_pass_the_sum_rules():
    # chi from s(e, m) (hte.entropy_susceptibility): for the dimer T chi = (2/3)(e - e0) exactly (see
    # heisenberg_dimer), so the spin gap equals the gap (the default of chi_low_t).
    document = {"lattice": "dimer", "per": "site", "series": heisenberg_dimer()}
    curves = curves_from_series(document, "entropy", temperatures=TEMPERATURES, e0=-0.375, low_t="gapped:1")
    assert set(curves.curves) == {"chi", "C", "S", "E"}
    exact = dimer_exact(curves.temperatures)
    np.testing.assert_allclose(curves.curves["C"].estimate, exact["C"], rtol=1e-3)
    np.testing.assert_allclose(curves.curves["chi"].estimate, exact["chi"], rtol=1e-3)
    data = curves.to_json_dict()
    assert data["lattice"] == "dimer" and data["method"] == "entropy"
    assert data["sum_rule_max_deviation"] < 1e-6 and data["chi_low_t"] == "spin gap 1"
    without_chi = {"lattice": "dimer", "per": "site", "series": {"lnZ": heisenberg_dimer()["lnZ"]}}
    assert "chi" not in curves_from_series(without_chi, "entropy", temperatures=TEMPERATURES, e0=-0.375,
                                           low_t="gapped:1").curves


def test_json_document_follows_the_conventions(tmp_path):
    curves = curves_from_series({"lattice": "chain", "per": "site", "series": ising_chain()}, "pade",
                                temperatures=[2.0, 0.5, 1.0, 1.0])
    document = json.loads(json.dumps(curves.to_json_dict()))     # plain JSON types only
    assert document["T"] == [0.5, 1.0, 2.0]                      # sorted, duplicates removed
    assert document["lattice"] == "chain" and document["per"] == "site" and document["method"] == "pade"
    assert set(document["curves"]) == {"chi", "C", "S", "E"}
    for band in document["curves"].values():
        assert set(band) == {"estimate", "lower", "upper"}
        assert len(band["estimate"]) == 3
        assert all(lo <= est <= up for lo, est, up in zip(band["lower"], band["estimate"], band["upper"]))
    assert set(document["T_conv"]) == {"chi", "C", "S", "E"}
    assert "critical" not in document
    np.testing.assert_allclose(document["curves"]["chi"]["estimate"], ising_chain_exact(np.array([0.5, 1, 2]))["chi"],
                               rtol=1e-6)


def test_csv_has_one_column_per_quantity_and_bound(tmp_path):
    curves = curves_from_series(ising_chain(), "pade", temperatures=[0.5, 1.0, 2.0])
    path = tmp_path / "curves.csv"
    curves.to_csv(path)
    with open(path, newline="") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][:4] == ["T", "chi", "chi_lower", "chi_upper"]
    assert len(rows) == 4 and all(len(row) == 13 for row in rows)
    assert float(rows[2][rows[0].index("C")]) == curves.curves["C"].estimate[1]
    assert os.listdir(tmp_path) == ["curves.csv"]                # no temporary file left behind


def test_bad_input_is_a_parameter_error_with_a_hint():
    with pytest.raises(ParameterError, match="T = 0.0 is not a positive"):
        curves_from_series(ising_chain(), "pade", temperatures=[0.0, 1.0])
    with pytest.raises(ParameterError, match="T = -1.0 is not a positive"):
        curves_from_series(ising_chain(), "pade", temperatures=[-1.0])
    with pytest.raises(ParameterError, match="method 'nlc' is unknown"):
        curves_from_series(ising_chain(), "nlc", temperatures=[1.0])
    with pytest.raises(ParameterError, match="needs the ground-state energy"):
        curves_from_series(ising_chain(), "entropy", temperatures=[1.0])
    with pytest.raises(ParameterError, match="too short"):
        curves_from_series({"lnZ": ["0.69", "0", "1/32"]}, "pade", temperatures=[1.0])
    with pytest.raises(ParameterError, match=r"series\['chiT'\]\[1\] = 'J1/4' is not a number"):
        curves_from_series({"chiT": ["1/4", "J1/4", "0"]}, "pade", temperatures=[1.0])


def test_plot_writes_png_svg_pdf_atomically_and_overlays_methods(tmp_path):
    grid = np.geomspace(0.05, 5.0, 40)
    pade_curves = curves_from_series(heisenberg_dimer(), "pade", temperatures=grid, label="Padé")
    entropy_curves = curves_from_series(heisenberg_dimer(), "entropy", temperatures=grid, e0=-0.375,
                                        low_t="gapped:1", label="entropy method")
    signatures = {"png": b"\x89PNG", "svg": b"<?xml", "pdf": b"%PDF"}
    for suffix, signature in signatures.items():
        path = tmp_path / f"curves.{suffix}"
        plot_curves([pade_curves, entropy_curves], path, title="Heisenberg dimer")
        assert path.read_bytes().startswith(signature)
    text = (tmp_path / "curves.svg").read_text()
    assert "entropy method" in text and "Padé" in text             # legend entries of the overlay
    plot_curves(pade_curves, tmp_path / "curves.png")              # a single set, replacing the old file
    assert sorted(os.listdir(tmp_path)) == ["curves.pdf", "curves.png", "curves.svg"]
    with pytest.raises(ParameterError, match="unknown suffix '.jpg'"):
        plot_curves(pade_curves, tmp_path / "curves.jpg")
