"""The two options on the command line: their cases appear under their own names, a failing
one prints a reproduce line that carries the option, and they are off by default."""

from __future__ import annotations

import json

from click.testing import CliRunner

from limitcase.cli import main
from limitcase.settings import END_CHECKS, SECOND_MODEL, reproduce_command


def _check(tmp_path, *args):
    out = tmp_path / "run.json"
    run = CliRunner().invoke(main, ["check", "payoffs/vanilla.py", "--paths", "8192", "--workers", "1",
                                    "--json", str(out), *args])
    return run, json.loads(out.read_text()) if out.exists() else None


def test_second_model_cases_are_named_with_the_suffix(tmp_path):
    run, doc = _check(tmp_path, "--second-model", "--select", "EuropeanCall/put_call_parity")
    assert run.exit_code == 0, run.output
    cases = {c["case"] for c in doc["cases"] if c["kind"] != "audit"}
    # at the defaults and at the interior point, each again under the second model
    assert cases == {"put_call_parity", "put_call_parity~heston", "put_call_parity@p1", "put_call_parity@p1~heston"}


def test_end_cases_run_and_are_off_by_default(tmp_path):
    assert END_CHECKS is False and SECOND_MODEL is False
    run, doc = _check(tmp_path, "--ends", "--select", "EuropeanPut/end:")
    assert run.exit_code == 0, run.output
    cases = {c["case"] for c in doc["cases"] if c["kind"] == "end"}
    assert "end:strike.high" in cases and "end:strike.high:sign" in cases
    run, doc = _check(tmp_path, "--select", "EuropeanPut/")
    assert not [c for c in doc["cases"] if c["kind"] == "end" or c["case"].endswith("~heston")]


def test_reproduce_line_carries_the_options():
    line = reproduce_command("check", ("x.py",), seed=1, paths=2, ends=True, second_model=True)
    assert "--ends" in line and "--second-model" in line
    assert "--ends" not in reproduce_command("check", ("x.py",), seed=1, paths=2)
