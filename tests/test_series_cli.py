"""The `hte series` command: JSON contract, tables, bad input and the pre-run estimate."""

from __future__ import annotations

import json
from fractions import Fraction

import pytest

from hte.cli import main


def test_series_json_follows_the_conventions_contract(tmp_path, capsys):
    out = tmp_path / "chain.json"
    assert main(["series", "chain", "--order", "6", "--no-tables", "--json", str(out)]) == 0
    doc = json.loads(out.read_text())
    assert doc["lattice"] == "chain" and doc["model"] == "heisenberg" and doc["per"] == "site"
    assert doc["variable"] == "beta" and doc["exact"] is True and doc["order"] == 6
    assert doc["spin"] == {"magnetic": "1/2"}
    for key in ("lnZ", "chiT", "M4"):
        assert len(doc["series"][key]) == 7
        for text in doc["series"][key]:
            Fraction(text)  # every coefficient is a string Fraction accepts
    # the beta^0 term of ln Z is ln 2 (a decimal), the chi T series starts at S(S+1)/3
    assert float(doc["series"]["lnZ"][0]) == pytest.approx(0.6931471805599453)
    assert doc["series"]["chiT"][:2] == ["1/4", "-1/8"]
    assert not list(tmp_path.glob(".tmp-*"))


def test_series_answers_from_a_shipped_table_like_a_fresh_computation(capsys):
    assert main(["series", "chain", "--order", "8", "--json", "/dev/null"]) == 0
    from_table = capsys.readouterr()
    assert "from table" in from_table.err
    assert main(["series", "chain", "--order", "8", "--no-tables"]) == 0
    computed = capsys.readouterr()
    assert computed.out == from_table.out


@pytest.mark.parametrize("argv, message", [
    (["series", "chain", "--order", "0"], "order must be at least 1"),
    (["series", "chain", "--order", "4", "--spin", "7/2x"], "not a number"),
    (["series", "chain", "--order", "4", "--spin", "11/2"], "not supported"),
    (["series", "chain", "--order", "4", "--couplings", "J9=1"], "unknown coupling label 'J9'"),
    (["series", "chain", "--order", "4", "--couplings", "J1=abc"], "is not a number"),
    (["series", "chain", "--order", "4", "--couplings", "J1"], "is not NAME=VALUE"),
    (["series", "chain", "--order", "4", "--occupation", "magnetic=1.5"], "between 0 and 1"),
    (["series", "chain", "--order", "4", "--occupation", "spins=0.5"], "unknown site class 'spins'"),
    (["series", "chain", "--order", "4", "--couplings", "J1.z=1"], "need --model xxz"),
    (["series", "no-such-lattice", "--order", "4"], "no-such-lattice"),
])
def test_bad_series_requests_exit_2_with_a_clear_message(argv, message, capsys):
    assert main(argv + ["--no-tables"]) == 2
    err = capsys.readouterr().err
    assert message in err
    assert "Traceback" not in err


def test_hopeless_request_is_refused_with_its_estimate(capsys):
    # spin 5/2 on the square lattice to order 10 diagonalises 10-site clusters with S^z sectors of 4.4e6 states
    assert main(["series", "square", "--spin", "5/2", "--order", "10", "--no-tables", "--no-cache"]) == 2
    err = capsys.readouterr().err
    assert "estimate for order 10" in err and "--force" in err


def test_ising_ln_z_run_estimates_and_enumerates_star_graphs_only(tmp_path, capsys):
    # Order 12 asks for the pre-run estimate; ln Z of spin-1/2 Ising bonds counts biconnected clusters only.
    # Square-lattice Ising free energy to K^12 (K = beta/4 here) from the Onsager expansion in test_ising_limit.
    from test_ising_limit import in_beta, onsager_lnz

    out = tmp_path / "ising.json"
    argv = ["series", "square", "--order", "12", "--model", "xxz", "--couplings", "J1.xy=0,J1.z=-1,J2=0",
            "--lnz-only", "--no-tables", "--no-cache", "--workers", "1", "--json", str(out)]
    assert main(argv) == 0
    assert "# estimate for order 12" in capsys.readouterr().err
    doc = json.loads(out.read_text())
    exact = in_beta(onsager_lnz(12), Fraction(1, 4))
    assert [Fraction(x) for x in doc["series"]["lnZ"][1:]] == exact[1:]
