"""Curie–Weiss fits (hte/curie_weiss.py): round trips, uncertainty coverage, automatic window, plot."""

import math

import numpy as np
import pytest

from hte.curie_weiss import fit_curie_weiss, plot_curie_weiss
from hte.errors import DataFileError, ParameterError
from hte.measured import Measurement

CURIE, THETA, CHI0 = 0.45, -12.0, 3e-4          # emu K/mol, K, emu/mol


def curie_weiss(temps):
    return CURIE / (temps - THETA) + CHI0


def synthetic(seed, temps, relative=None, absolute=None, keep_sigma=True):
    rng = np.random.default_rng(seed)
    clean = curie_weiss(temps)
    sigma = relative * clean if relative is not None else np.full_like(temps, absolute)
    return Measurement("chi", temps, clean + sigma * rng.standard_normal(temps.size),
                       sigma=sigma if keep_sigma else None, source="synthetic.dat")


def coverage(weighted):
    temps = np.linspace(40.0, 300.0, 60)
    inside = np.zeros(3)
    seeds = 300
    for seed in range(seeds):
        m = synthetic(seed, temps, relative=0.003, keep_sigma=True) if weighted else \
            synthetic(seed, temps, absolute=2e-5, keep_sigma=False)
        r = fit_curie_weiss(m, t_min=40.0)
        inside += [abs(r.curie - CURIE) <= r.curie_err, abs(r.theta - THETA) <= r.theta_err,
                   abs(r.chi0 - CHI0) <= r.chi0_err]
    return inside / seeds


@pytest.mark.parametrize("weighted", [True, False])
def test_one_sigma_intervals_cover_the_true_values_68_percent_of_the_time(weighted):
    # Gaussian noise, correct model: a 1-sigma interval holds the truth with probability 0.683; over 300
    # seeds the binomial standard deviation is 0.027, so [0.60, 0.77] is a 3-sigma band.
    for fraction in coverage(weighted):
        assert 0.60 <= fraction <= 0.77


@pytest.mark.parametrize("seed", range(4))
def test_automatic_window_recovers_parameters_within_three_sigma(seed):
    m = synthetic(seed, np.geomspace(2.0, 300.0, 120), relative=0.002)
    r = fit_curie_weiss(m)
    assert r.window == "auto"
    assert r.t_min >= 2 * abs(r.theta)                      # Curie-Weiss only where T >= 2|theta|
    assert abs(r.curie - CURIE) <= 3 * r.curie_err
    assert abs(r.theta - THETA) <= 3 * r.theta_err
    assert abs(r.chi0 - CHI0) <= 3 * r.chi0_err
    assert r.reduced_chi2 == pytest.approx(1.0, abs=0.4)


def test_dimer_susceptibility_has_curie_weiss_asymptote():
    # Bleaney-Bowers: chi = (N g^2 mu_B^2 / k_B T) / (3 + exp(J/T)) per spin for H = J S1.S2 (B. Bleaney and
    # K. D. Bowers, Proc. R. Soc. Lond. A 214, 451 (1952), who write H = -2J' S1.S2, J' = -J/2).  Its
    # high-temperature expansion is C/(T + J/4): theta = -S(S+1) J/3 with one neighbour.  A fit over a finite
    # window sees the next order too, so theta comes out somewhat more negative than -J/4 (~ -3.2 K here
    # with chi0 free, ~ -2.9 K with chi0 = 0); the automatic window must keep out T < 2J, where the dimer
    # is far from Curie-Weiss, and the Curie constant must be that of S = 1/2, g = 2: 0.3751 (handbook).
    coupling = 10.0
    temps = np.geomspace(2.0, 300.0, 150)
    clean = 4 * 0.3751 / temps / (3 + np.exp(coupling / temps))
    rng = np.random.default_rng(7)
    sigma = 0.002 * clean
    m = Measurement("chi", temps, clean + sigma * rng.standard_normal(temps.size), sigma=sigma)
    for fit_chi0, tolerance in ((True, 0.35), (False, 0.20)):
        r = fit_curie_weiss(m, fit_chi0=fit_chi0)
        assert r.t_min > 2 * coupling
        assert r.theta == pytest.approx(-coupling / 4, rel=tolerance)
        assert r.curie == pytest.approx(0.3751, rel=0.015)
        exchange, _ = r.exchange(spin=0.5, coupling_sum=1)
        assert exchange == pytest.approx(coupling, rel=tolerance)


def test_derived_quantities_and_their_uncertainties():
    m = synthetic(3, np.linspace(40.0, 300.0, 60), relative=0.003)
    r = fit_curie_weiss(m, t_min=40.0)
    # g from C = 0.12505 g^2 S(S+1) (handbook constant, from memory); mu_eff = g sqrt(S(S+1)).
    g, g_err = r.g_factor(spin=0.5)
    assert g == pytest.approx(math.sqrt(r.curie / (0.12505 * 0.75)), rel=1e-4)
    assert g_err == pytest.approx(g * r.curie_err / (2 * r.curie))
    moment, _ = r.effective_moment()
    assert moment == pytest.approx(g * math.sqrt(0.75), rel=1e-9)
    # Square lattice, S = 1/2, z = 4: theta = -S(S+1) z J / 3 = -J.
    exchange, exchange_err = r.exchange(spin=0.5, coupling_sum=4)
    assert exchange == pytest.approx(-r.theta)
    assert exchange_err == pytest.approx(r.theta_err)
    # Other units and conventions: 1 meV = 11.604518 K (CODATA); H = -2J' sum S.S means J' = -J/2.
    in_mev, _ = r.exchange(spin=0.5, coupling_sum=4, energy_unit="meV")
    assert in_mev == pytest.approx(-r.theta / 11.604518, rel=1e-7)
    other, other_err = r.exchange(spin=0.5, coupling_sum=4, convention="-2J")
    assert other == pytest.approx(r.theta / 2) and other_err == pytest.approx(r.theta_err / 2)
    correlation = r.correlation()
    assert np.allclose(np.diag(correlation), 1.0)
    assert correlation[0, 1] < 0                  # C and theta trade off against each other


def test_fixed_chi0_fits_two_parameters():
    m = synthetic(1, np.linspace(40.0, 300.0, 60), relative=0.003)
    r = fit_curie_weiss(m, t_min=40.0, fit_chi0=False, chi0=CHI0)
    assert r.parameter_names == ("C", "theta") and r.chi0 == CHI0 and r.chi0_err == 0.0
    assert abs(r.theta - THETA) <= 4 * r.theta_err


def test_report_states_the_sign_convention():
    r = fit_curie_weiss(synthetic(0, np.linspace(40.0, 300.0, 60), relative=0.003), t_min=40.0)
    text = r.report()
    assert "theta < 0: net antiferromagnetic" in text
    assert "(antiferromagnetic sign)" in text
    assert "40-300 K (user), 60 points" in text


def test_too_few_points_in_the_window():
    m = synthetic(0, np.linspace(40.0, 300.0, 60), relative=0.003)
    with pytest.raises(DataFileError, match="synthetic.dat: the window T >= 280 K holds 5 points; a Curie-Weiss "
                                            "fit needs at least 8. Widen the window."):
        fit_curie_weiss(m, t_min=280.0)
    with pytest.raises(DataFileError, match="the window 100-120 K holds 5 points"):
        fit_curie_weiss(m, t_min=100.0, t_max=120.0)


def test_data_that_never_follow_curie_weiss_are_refused():
    temps = np.linspace(10.0, 300.0, 50)
    chi = np.exp(-temps / 50.0) + 0.01
    m = Measurement("chi", temps, chi, sigma=1e-4 * chi, source="gapped.dat")
    with pytest.raises(DataFileError, match="gapped.dat: no window of >= 8 points .* give t_min explicitly"):
        fit_curie_weiss(m)


def test_wrong_quantity_is_refused():
    m = Measurement("C", np.linspace(1, 10, 10), np.ones(10))
    with pytest.raises(ParameterError, match="Curie-Weiss analysis needs chi"):
        fit_curie_weiss(m)


def test_plot_is_written_atomically(tmp_path):
    m = synthetic(0, np.geomspace(2.0, 300.0, 80), relative=0.003)
    r = fit_curie_weiss(m)
    target = tmp_path / "cw.png"
    assert plot_curie_weiss(r, m, target) == target
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == ["cw.png"]          # no temporary file left behind
