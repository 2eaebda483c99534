"""Fits of measured data: round trips with known noise, an independent diagonalisation route, Curie–Weiss on
every built-in lattice, exchange conventions and energy units, warnings, non-convergence, entropy."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from hte.curie_weiss import fit_curie_weiss
from hte.errors import DataFileError, InputError
from hte.fitting import FitDidNotConvergeError, LabModel, default_parameters, entropy_check, fit
from hte.lattice_file import builtin_lattices, load_lattice
from hte.measured import Measurement
from hte.model_curves import ModelCurves
from ring_reference import ring_spectrum

# N_A mu_B^2 / k_B in emu K/mol (cgs): 0.375 / (g^2 S(S+1)/3) with the handbook Curie constant 0.12505 g^2 S(S+1)
# per mole of spins -> N_A mu_B^2/k_B = 3 x 0.12505 = 0.37515 emu K/mol; here from CODATA via scipy.
NA_MUB2_OVER_KB = sc.N_A * (sc.physical_constants["Bohr magneton"][0] * 1e3) ** 2 / (sc.k * 1e7)


def ring_thermodynamics(spectrum, temperatures):
    """Per site chi* = var(S^z)/T, C = var(E)/T^2 and S = ln Z + <E>/T of a spectrum at temperatures (J = 1)."""
    energies, sz = spectrum
    length = round(np.log2(len(energies)))
    out = {"chi": [], "C": [], "S": []}
    for t in temperatures:
        weights = np.exp(-(energies - energies.min()) / t)
        z = weights.sum()
        mean_e = (weights * energies).sum() / z
        out["chi"].append((weights * sz ** 2).sum() / z / t / length)
        out["C"].append(((weights * energies ** 2).sum() / z - mean_e ** 2) / t ** 2 / length)
        out["S"].append((np.log(z) - energies.min() / t + mean_e / t) / length)
    return {k: np.array(v) for k, v in out.items()}


@pytest.fixture(scope="module")
def chain_model():
    return LabModel(ModelCurves.build("chain", order=12))


@pytest.fixture(scope="module")
def ring12():
    return ring_spectrum(12)


def synthetic(lab, quantity, temperatures, truth, *, field=0.0, noise=0.005, seed=0, source="synthetic"):
    """Data from the model itself with Gaussian noise of relative size `noise` (sigma given with the data)."""
    temperatures = np.asarray(temperatures, dtype=float)
    fields = np.full_like(temperatures, field)
    clean = lab.evaluate(quantity, temperatures, fields, truth)
    sigma = noise * np.abs(clean)
    values = clean + np.random.default_rng(seed).normal(0.0, sigma)
    return Measurement(quantity, temperatures, values, sigma=sigma, field=fields if field else None, source=source)


def parameters_for(lab, free, **values):
    parameters = default_parameters(lab.curves, energy_unit=lab.energy_unit, convention=lab.convention)
    for name, value in values.items():
        parameters[name].value = value
    for name in free:
        parameters[name].free = True
    return parameters


def truth_of(lab, **values):
    truth = {name: p.value for name, p in default_parameters(lab.curves).items()}
    truth.update(values)
    return truth


# ------------------------------------------------------------------------------------------------ round trips


def test_round_trips_recover_parameters_with_68_percent_coverage(chain_model):
    # 50 data sets from the model with known parameters and 0.5 % Gaussian noise (known sigma): each fitted
    # value lies within its 1-sigma error in ~68.3 % of the cases (Gaussian statistics); with 100 intervals the
    # binomial standard deviation is 4.7 %, so [0.54, 0.82] is a 3-sigma acceptance band.
    truth = truth_of(chain_model, J1=50.0, g=2.1)
    inside, reduced = [], []
    for seed in range(50):
        data = synthetic(chain_model, "chi", np.linspace(30, 300, 40), truth, seed=seed)
        result = fit(chain_model, [data], parameters_for(chain_model, ["J1", "g"], J1=45.0, g=2.0), progress=False)
        for name in ("J1", "g"):
            p = result.parameters[name]
            inside.append(abs(p.value - truth[name]) <= p.stderr)
        reduced.append(result.reduced_chi2)
    coverage = float(np.mean(inside))
    assert 0.54 <= coverage <= 0.82, coverage
    # the mean reduced chi^2 of 50 fits with 38 degrees of freedom: 1 +- sqrt(2/38)/sqrt(50) = 1 +- 0.03
    assert abs(np.mean(reduced) - 1.0) < 0.1


def test_fit_to_ring_diagonalisation_recovers_j_and_g(ring12, chain_model):
    # Independent route: chi of a 12-site periodic ring by exact diagonalisation (numpy, in this file), equal to
    # the infinite chain at T >= 0.8 J to ~1e-5 (tests/test_model_curves.py), turned into emu/mol with
    # J = 100 K, g = 2.05: chi_mol = chi* N_A g^2 mu_B^2 / (k_B J).
    chain = chain_model
    reduced_t = np.geomspace(0.8, 6.0, 40)
    chi = ring_thermodynamics(ring12, reduced_t)["chi"] * NA_MUB2_OVER_KB * 2.05 ** 2 / 100.0
    data = Measurement("chi", reduced_t * 100.0, chi, sigma=1e-4 * chi, source="ring12")
    result = fit(chain, [data], parameters_for(chain, ["J1", "g"], J1=80.0, g=2.0), progress=False)
    assert result.parameters["J1"].value == pytest.approx(100.0, rel=0.01)
    assert result.parameters["g"].value == pytest.approx(2.05, rel=0.01)
    assert result.points_used == 40


def test_magnetisation_curve_from_ring_diagonalisation_recovers_j_and_g(ring12, chain_model):
    # M(B) at T = J = 20 K from the 12-site ring in a field (exact, numpy): m = <S^z>/N with Zeeman term
    # -h S^z, h = g mu_B B / k_B (mu_B/k_B = 0.67171 K/T, CODATA via scipy); M = g m mu_B per formula unit.
    energies, sz = ring12
    g, coupling, temperature = 2.0, 20.0, 20.0
    fields = np.linspace(0.5, 6.0, 23)
    moments = []
    for b in fields:
        h = g * sc.physical_constants["Bohr magneton"][0] / sc.k * b / coupling      # units of J
        levels = energies - h * sz
        weights = np.exp(-(levels - levels.min()) * coupling / temperature)
        moments.append(g * (weights * sz).sum() / weights.sum() / 12)
    moments = np.array(moments)
    data = Measurement("M", np.full(fields.size, temperature), moments, sigma=2e-4 * moments, field=fields,
                       source="ring12M")
    chain = chain_model
    result = fit(chain, [data], parameters_for(chain, ["J1", "g"], J1=15.0, g=2.2), progress=False)
    assert result.parameters["J1"].value == pytest.approx(coupling, rel=0.01)
    assert result.parameters["g"].value == pytest.approx(g, rel=0.01)


# ------------------------------------------------------------------------------------------------ Curie–Weiss


def _theta_from_geometry(spec):
    """theta = -S(S+1)/3 sum_j J_ij for a host site (CONVENTIONS.md), from the lattice's default couplings and
    its coordination numbers (counted from the bond list, not from any series)."""
    coordination = spec.coordination()
    spin = float(eval(str(spec.spin["magnetic"])))      # "1/2" -> 0.5  # noqa: S307 - lattice-file text
    total = sum(float(coordination.get(("magnetic", label), 0)) * float(spec.couplings.get(label, 0))
                for label in spec.labels)
    return -spin * (spin + 1) * total / 3.0, spin


@pytest.mark.parametrize("name", builtin_lattices())
def test_curie_weiss_on_the_series_recovers_theta(name):
    # chi(T) of the lattice's default model (order 4 is plenty at T >= 200 |theta|) in emu/mol with J1 = 10 K,
    # g = 2; a Curie–Weiss fit over 200-2000 |theta| must give theta = -S(S+1) z J / 3 (CONVENTIONS.md): the
    # next term of chi T/C = 1 + theta/T + a2/T^2 biases theta by about (a2 - theta^2)/(200 theta), < 1 % (the
    # chain, a2 = 0, theta = -J/2: 0.5 %).
    spec = load_lattice(name)
    theta_reduced, spin = _theta_from_geometry(spec)
    lab = LabModel(ModelCurves.build(spec, order=4), spin=spin)
    truth = truth_of(lab, J1=10.0, g=2.0)
    theta = theta_reduced * 10.0
    temperatures = np.geomspace(200, 2000, 60) * abs(theta)
    chi = lab.evaluate("chi", temperatures, 0.0, truth)
    result = fit_curie_weiss(Measurement("chi", temperatures, chi, sigma=1e-7 * chi), t_min=temperatures[0],
                             fit_chi0=False)
    assert result.theta == pytest.approx(theta, rel=0.01)
    curie = 0.12505 * 4 * spin * (spin + 1)      # handbook Curie constant 0.12505 g^2 S(S+1) emu K/mol, g = 2
    assert result.curie == pytest.approx(curie, rel=2e-3)


# ------------------------------------------------------------------------------------------------ conventions


def test_conventions_and_energy_units_give_the_same_physics(chain_model):
    # J in K (ours, H = J sum S.S) = 2 J' for H = 2J' sum S.S, = -2 J'' for H = -2J'' sum S.S.
    # 1 meV / k_B = 11.604518 K and 1 cm^-1 = h c / k_B = 1.4387769 K (CODATA 2018; exact since the 2019 SI).
    truth = truth_of(chain_model, J1=50.0, g=2.1)
    data = synthetic(chain_model, "chi", np.linspace(30, 300, 50), truth, seed=3)
    ours = fit(chain_model, [data], parameters_for(chain_model, ["J1", "g"], J1=45.0, g=2.0), progress=False)
    j_kelvin, j_err = ours.parameters["J1"].value, ours.parameters["J1"].stderr
    for unit, convention, kelvin_per_unit, factor in (("meV", "2J", 11.604518, 2.0),
                                                     ("cm-1", "-2J", 1.4387769, -2.0)):
        lab = LabModel(chain_model.curves, energy_unit=unit, convention=convention)
        start = 45.0 / factor / kelvin_per_unit
        result = fit(lab, [data], parameters_for(lab, ["J1", "g"], J1=start, g=2.0), progress=False)
        expected = j_kelvin / factor / kelvin_per_unit
        assert result.parameters["J1"].value == pytest.approx(expected, rel=1e-5)
        assert result.parameters["J1"].stderr == pytest.approx(j_err / abs(factor) / kelvin_per_unit, rel=1e-3)
        assert result.parameters["g"].value == pytest.approx(ours.parameters["g"].value, rel=1e-6)
        report = result.report()
        assert report["energy_unit"] == unit
        assert report["convention"].startswith(f"H = {convention} sum")
        assert report["derived"]["J1 (K, convention J)"]["value"] == pytest.approx(j_kelvin, rel=1e-5)


# ------------------------------------------------------------------------------------------------ joint fits


def test_joint_fit_of_chi_at_two_fields_and_heat_capacity(chain_model):
    # chi = M/H at 0.1 T and 7 T (the (beta h)^2 term matters at 7 T) and C at 0 and 9 T with a Debye lattice
    # part and 1 % free impurity spins (Schottky in 9 T), all sharing J1, g, chi0, imp_fraction, theta_D.
    truth = truth_of(chain_model, J1=20.0, g=2.1, chi0=2e-4, imp_fraction=0.01, theta_D=250.0, debye_atoms=5.0)
    data = [synthetic(chain_model, "chi", np.linspace(12, 300, 50), truth, field=0.1, seed=11, source="chi_0.1T"),
            synthetic(chain_model, "chi", np.linspace(12, 300, 50), truth, field=7.0, seed=12, source="chi_7T"),
            synthetic(chain_model, "C", np.linspace(15, 60, 30), truth, seed=13, noise=0.003, source="C_0T"),
            synthetic(chain_model, "C", np.linspace(15, 60, 30), truth, field=9.0, seed=14, noise=0.003,
                      source="C_9T")]
    free = ["J1", "g", "chi0", "imp_fraction", "theta_D"]
    start = dict(J1=17.0, g=2.0, chi0=0.0, imp_fraction=0.0, theta_D=200.0, debye_atoms=5.0)
    result = fit(chain_model, data, parameters_for(chain_model, free, **start), progress=False)
    for name in free:
        p = result.parameters[name]
        assert abs(p.value - truth[name]) < 4 * p.stderr, (name, p.value, p.stderr)
    report = result.report()
    assert {d["file"] for d in report["datasets"]} == {"chi_0.1T", "chi_7T", "C_0T", "C_9T"}
    assert report["points_used"] == sum(d["points_used"] for d in report["datasets"])


def test_high_field_susceptibility_differs_from_linear_response(chain_model):
    # M/H at 7 T lies below chi(B -> 0) by the (beta h)^2 M4 term; a model without it would be biased.
    truth = truth_of(chain_model, J1=20.0, g=2.1)
    low = chain_model.evaluate("chi", np.array([25.0]), np.array([0.0]), truth)
    high = chain_model.evaluate("chi", np.array([25.0]), np.array([7.0]), truth)
    assert 1e-3 < (low - high)[0] / low[0] < 3e-2


# ------------------------------------------------------------------------------------------------ report


def test_report_has_the_conventions_keys_and_flags_correlated_and_loose_parameters(chain_model):
    truth = truth_of(chain_model, J1=50.0, g=2.1, chi0=1e-4)
    data = synthetic(chain_model, "chi", np.linspace(150, 300, 30), truth, seed=5)
    result = fit(chain_model, [data], parameters_for(chain_model, ["J1", "g", "chi0", "imp_g"], J1=45.0, g=2.0),
                 progress=False)
    report = result.report()
    for key in ("lattice", "convention", "energy_unit", "parameters", "reduced_chi2", "points_used", "T_min_used",
                "correlations", "warnings"):
        assert key in report
    assert report["parameters"]["J1"] == {"value": result.parameters["J1"].value,
                                          "stderr": result.parameters["J1"].stderr, "unit": "K", "free": True}
    assert any("strongly correlated" in w for w in report["warnings"])
    assert any(w.startswith("imp_g is not constrained") for w in report["warnings"])   # no impurities at all
    assert report["correlations"]["g"]["g"] == pytest.approx(1.0)


def test_outliers_are_reported_not_dropped(chain_model):
    truth = truth_of(chain_model, J1=50.0, g=2.1)
    data = synthetic(chain_model, "chi", np.linspace(30, 300, 60), truth, seed=8, noise=0.002)
    spiked = data.value.copy()
    spiked[30] *= 1.05
    data = Measurement("chi", data.temperature, spiked, sigma=data.sigma, source="spiked.csv")
    result = fit(chain_model, [data], parameters_for(chain_model, ["J1", "g"], J1=45.0, g=2.0), progress=False)
    report = result.report()
    assert report["points_used"] == 58 or report["points_used"] == int(result.datasets[0].used.sum())
    assert result.datasets[0].used[30]
    assert any("line 31" in text for text in report["datasets"][0]["outliers"])
    assert any("possible outliers" in w for w in report["warnings"])


def test_non_convergence_raises_an_input_error(chain_model):
    truth = truth_of(chain_model, J1=50.0, g=2.1)
    data = synthetic(chain_model, "chi", np.linspace(30, 300, 40), truth)
    with pytest.raises(FitDidNotConvergeError, match="did not converge within 2 model evaluations") as info:
        fit(chain_model, [data], parameters_for(chain_model, ["J1", "g"], J1=20.0, g=1.5), max_evaluations=2,
            progress=False)
    assert isinstance(info.value, InputError)


def test_window_with_too_few_points_names_the_file(chain_model):
    truth = truth_of(chain_model, J1=50.0, g=2.1)
    data = synthetic(chain_model, "chi", np.linspace(5, 22, 20), truth, source="cold.csv")
    with pytest.raises(DataFileError, match=r"cold.csv: only 0 of 20 points lie above"):
        fit(chain_model, [data], parameters_for(chain_model, ["J1", "g"], J1=50.0, g=2.0), progress=False)


def test_magnetic_entropy_from_ring_heat_capacity(ring12, chain_model):
    # C(T) of the 12-site ring (J = 20 K) from 0.05 J to 20 J: the integral of C/T plus the series' entropy
    # above 20 J must give R ln 2 - S(T_0), with S(T_0) the ring's own entropy at 0.05 J (exact identity
    # S(T_1) - S(T_0) = int C/T dT; R ln 2 is the entropy of a free spin 1/2 per mole).
    chain = chain_model
    reduced_t = np.geomspace(0.05, 20.0, 400)
    thermo = ring_thermodynamics(ring12, reduced_t)
    gas = sc.R
    data = Measurement("C", reduced_t * 20.0, thermo["C"] * gas, sigma=1e-4 * thermo["C"] * gas, source="ring12C")
    result = fit(chain, [data], parameters_for(chain, ["J1"], J1=18.0), progress=False)
    assert result.parameters["J1"].value == pytest.approx(20.0, rel=1e-3)
    (check,) = entropy_check(result)
    expected = gas * (math.log(2) - thermo["S"][0])
    assert check["S_measured"] + check["S_above_T_to_from_series"] == pytest.approx(expected, rel=1e-3)
    assert check["n_R_ln_2S_plus_1"] == pytest.approx(gas * math.log(2), rel=1e-12)
