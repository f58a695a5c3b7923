"""--precision: paths are added until each check's detectable bias reaches the target, or
its budget is spent (and the output says so); bad targets are refused clearly."""

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase import BLOCK, ParamError
from limitcase.cli import main
from limitcase.suite import Precision, parse_precision, run_checks

from .conftest import CALL_REFERENCE, call_check

ROOT = Path(__file__).resolve().parents[2]
FILES = [str(ROOT / "payoffs" / "vanilla.py"), str(ROOT / "payoffs" / "bermudan.py")]


def test_absolute_target_is_reached():
    r = run_checks([call_check(), call_check(case="twin")], paths=BLOCK, seed=2, method="plain", precision=0.3,
                   max_paths=200 * BLOCK)
    for o in r.outcomes[:-1]:  # the last is the run's audit of the model (its own path count)
        assert o.precision_status == "reached" and o.detectable_bias <= 0.3 and o.precision == 0.3
        assert o.paths % BLOCK == 0 and o.paths > BLOCK


def test_relative_target_uses_the_reference():
    r = run_checks([call_check()], paths=BLOCK, seed=2, method="antithetic", precision="2%", max_paths=200 * BLOCK)
    o = r.outcomes[0]
    assert o.precision == pytest.approx(0.02 * CALL_REFERENCE)
    assert o.detectable_relative <= 0.02 and o.precision_status == "reached"
    assert r.extra["precision"] == "2%"


def test_budget_spent_is_reported():
    r = run_checks([call_check()], paths=BLOCK, seed=2, method="plain", precision=0.001, max_paths=3 * BLOCK)
    o = r.outcomes[0]
    assert o.precision_status == "budget" and o.paths == 3 * BLOCK
    assert "not reached within the budget of 12288 paths" in o.message
    assert o.verdict == "pass"  # spending the budget is not a failure of the product


def test_allowance_larger_than_target():
    from dataclasses import replace

    c = replace(call_check(), allowance=0.5, allowance_reason="test allowance")
    o = run_checks([c], paths=BLOCK, seed=2, precision=0.1).outcomes[0]
    assert o.precision_status == "allowance" and o.paths == BLOCK
    assert "allowance 0.5 alone is larger" in o.message


def test_broken_identity_stops_at_once():
    from limitcase.engine import PathRule
    from limitcase.reduce import Check
    from limitcase_payoffs.vanilla import EuropeanCall

    from .conftest import MODEL

    c = Check(product="EuropeanCall", case="strikes_differ", kind="relation",
              legs=(EuropeanCall(strike=100.0), EuropeanCall(strike=101.0)), model=MODEL, weights=(1.0, -1.0),
              target=0.0, rules=(PathRule((1.0, -1.0), "=="),))
    o = run_checks([c], paths=BLOCK, seed=1, precision=1e-6).outcomes[0]
    assert o.precision_status == "identity broken" and o.paths == BLOCK and o.verdict == "fail"


@pytest.mark.parametrize("bad", ["0", "-1", "abc", "1%%", "nan", "inf"])
def test_bad_precision_is_refused(bad):
    with pytest.raises(ParamError, match="is not a positive number"):
        parse_precision(bad)


def test_parse_precision():
    assert parse_precision("0.5%") == Precision(0.005, True)
    assert parse_precision(0.01) == Precision(0.01, False)


def test_cli_precision_and_method(tmp_path):
    out = tmp_path / "run.json"
    r = CliRunner().invoke(main, ["check", *FILES, "--select", "EuropeanCall/zero_strike", "--select", "BermudanPut/one_ex",
                                  "--select", "BermudanCall/no_dividend",
                                  "--paths", str(BLOCK), "--precision", "1%", "--max-paths", str(8 * BLOCK),
                                  "--workers", "1", "--json", str(out)])
    assert r.exit_code == 0, r.output
    assert "smallest bias each check detects with 90% power" in r.output
    assert "control+" in r.output and "reached" in r.output
    doc = json.loads(out.read_text())
    zero = next(c for c in doc["cases"] if c["case"] == "zero_strike")  # pays S(T): no tautological control
    assert zero["controls"] == [] and "not applied" in zero["message"]
    assert doc["settings"]["precision"] == "1%" and doc["settings"]["method"] == "auto"
    for case in (c for c in doc["cases"] if c["kind"] != "audit"):
        assert case["precision_status"] in ("reached", "budget")
        assert case["p_value"] is not None and case["p_adjusted"] is not None and case["detectable_bias"] is not None


def test_cli_budget_message_and_bad_input():
    r = CliRunner().invoke(main, ["check", *FILES, "--select", "BermudanPut/one_ex", "--paths", str(BLOCK), "--precision",
                                  "0.0001", "--max-paths", str(2 * BLOCK), "--workers", "1", "--method", "plain"])
    assert r.exit_code == 0, r.output
    assert "BUDGET SPENT" in r.output and "spent the budget of 8192 paths" in r.output
    bad = CliRunner().invoke(main, ["check", "--precision", "often"])
    assert bad.exit_code == 2 and "precision='often' is not a positive number" in bad.output
