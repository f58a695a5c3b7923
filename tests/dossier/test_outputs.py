"""JUnit XML beside the JSON record: both parse, and they hold the same cases."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]


@pytest.fixture(scope="module")
def skeleton(tmp_path_factory) -> Path:
    """An unfinished product from `limitcase new`: its case is an error."""
    out = tmp_path_factory.mktemp("skeleton")
    r = CliRunner().invoke(main, ["new", "HalfDone", "-o", str(out)])
    assert r.exit_code == 0, r.output
    return out / "HalfDone.py"


def _junit_cases(path: Path) -> list[ET.Element]:
    root = ET.parse(path).getroot()  # raises if the XML does not parse
    assert root.tag == "testsuites"
    return list(root.iter("testcase"))


@pytest.mark.parametrize("command", ["check", "report"])
def test_junit_has_one_testcase_per_json_case(tmp_path, skeleton, command):
    files = [str(HERE / "formula_products.py"), str(ROOT / "examples" / "buggy_asian.py"), str(skeleton)]
    extra = (["-o", str(tmp_path / "dossier"), "--no-audits", "--points", "3", "--select", "Spot",
              "--select", "HalfDone", "--select", "CallWithFormula"] if command == "report" else [])
    j, x = tmp_path / "run.json", tmp_path / "run.xml"
    r = CliRunner().invoke(main, [command, *files, "--paths", "2048", "--json", str(j), "--junit", str(x), *extra])
    assert r.exit_code == 1, r.output  # the buggy Asian fails and the skeleton errors
    doc = json.loads(j.read_text())
    cases = _junit_cases(x)
    assert len(cases) == len(doc["cases"]) == doc["summary"]["total"] > 0
    assert [(c.get("classname"), c.get("name")) for c in cases] == \
        [(f"{o['kind']}.{o['product']}", o["case"]) for o in doc["cases"]]
    failures = sum(1 for c in cases if c.find("failure") is not None)
    errors = sum(1 for c in cases if c.find("error") is not None)
    assert failures == doc["summary"]["fail"] >= 1
    assert errors == doc["summary"]["error"] >= 1
    suite = ET.parse(x).getroot().find("testsuite")
    assert int(suite.get("tests")) == len(cases)
    assert int(suite.get("failures")) == failures and int(suite.get("errors")) == errors
