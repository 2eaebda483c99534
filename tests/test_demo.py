"""The demo on the invented compound: its data reader, its shipped series against closed forms, a shortened run,
and (slow) the full `hte demo`."""

from __future__ import annotations

import json
from fractions import Fraction

import numpy as np
import pytest
import sympy

from hte.cli import main
from hte.demo import (COMPOUND, DATA_FILES, demo_series_path, load_demo_model, read_demo_data,
                      read_true_parameters, run_demo)
from hte.errors import ParameterError, TableMismatchError
from hte.lattice_file import load_lattice


def test_demo_data_reader_gives_five_curves_in_canonical_units():
    measurements = read_demo_data()
    assert [m.quantity for m in measurements] == [quantity for _, quantity, _ in DATA_FILES]
    for measurement, (name, _, field) in zip(measurements, DATA_FILES):
        assert measurement.source.endswith(name)
        assert np.all(measurement.field == field)
        assert measurement.sigma is not None and np.all(measurement.sigma > 0)
        assert measurement.n_magnetic == COMPOUND["n_magnetic"]
        assert np.all(np.diff(measurement.temperature) > 0)
    # chi = M/H per mole of formula units (3 spins 1/2 + p): the Curie constant 0.375 g^2/4 x 3 sets the scale
    chi = measurements[0]
    assert 0.5 < chi.value[-1] * chi.temperature[-1] < 2.0
    truth = read_true_parameters()
    assert truth["parameters"]["J1"] > 0 and "invented" in truth["compound"]["name"]


def test_demo_data_reader_refuses_unknown_files():
    with pytest.raises(ParameterError, match="chi_3T.csv do not exist"):
        read_demo_data(files=["chi_3T.csv"])


def test_shipped_series_matches_closed_forms():
    # Spin-1/2 Heisenberg per site of the undiluted cell (3 kagome + 1 interlayer site, the latter occupied
    # with probability p): T chi/N = [sum_i p_i S(S+1)/3 - 2 beta [S(S+1)/3]^2 sum_<ij> p_i p_j J_ij + ...]/N,
    # the first two terms of the moment expansion of <M^2> (common practice).  Per cell: 6 J1 bonds
    # (p = 1) and 6 Jd bonds to interlayer sites (p), S(S+1)/3 = 1/4.
    document = json.loads(demo_series_path().read_text())
    assert document["provenance"]["lattice_sha256"] == load_lattice("kagome-layered").sha256
    assert "make_demo_series.py" in document["provenance"]["command"]
    jd, p = sympy.symbols("Jd p_interlayer")
    chit = [sympy.sympify(c) for c in document["series"]["chiT"]]
    assert sympy.expand(chit[0] - (3 + p) / 4 / 4) == 0
    assert sympy.expand(chit[1] - (-2 * Fraction(1, 16) * (6 + 6 * p * jd) / 4)) == 0
    # ln Z at beta^0: sum_c p_c n_c ln 2 / 4
    assert float(sympy.sympify(document["series"]["lnZ"][0]).subs(p, 0.5)) == pytest.approx(3.5 * np.log(2) / 4)


def test_order_above_the_shipped_one_is_refused():
    with pytest.raises(TableMismatchError, match="exceeds the 7 orders stored"):
        load_demo_model(order=9)


def test_shortened_demo_run_recovers_the_main_parameters(tmp_path):
    # order 6, the two chi files, J1, g and chi0 free (Jd/J1 held at its true value, "known from elsewhere")
    truth = read_true_parameters()["parameters"]
    lines = []
    comparison = run_demo(tmp_path, order=6, files=["chi_0.1T.csv", "chi_7T.csv"], free=("J1", "g", "chi0"),
                          start={"Jd/J1": truth["Jd/J1"]}, progress=False, log=lines.append)
    for name in ("J1", "g", "chi0"):
        assert abs(comparison[name]["deviation_in_sigma"]) < 3, (name, comparison[name])
    assert comparison["J1"]["fitted"] == pytest.approx(truth["J1"], rel=0.03)
    report = json.loads((tmp_path / "fit.json").read_text())
    assert report["lattice"] == "kagome-layered" and report["demo"]["true_parameters"]["parameters"] == truth
    for name in ("lattice.png", "curie_weiss.png", "curves.png", "curves.csv", "fit.png", "fit.csv"):
        assert (tmp_path / name).stat().st_size > 0
    assert any("recovered against true parameters" in line for line in lines)


@pytest.mark.slow
def test_full_demo_command(tmp_path, capsys):
    # the whole job as `scripts/demo` runs it: all five files, order 7, J1, Jd/J1, g, chi0, theta_D free
    assert main(["demo", "--out", str(tmp_path)]) == 0
    report = json.loads((tmp_path / "fit.json").read_text())
    truth = read_true_parameters()["parameters"]
    for name in ("J1", "g", "chi0", "theta_D"):
        p = report["parameters"][name]
        assert abs(p["value"] - truth[name]) < 3 * p["stderr"], (name, p)
    assert "recovered against true parameters" in capsys.readouterr().out
