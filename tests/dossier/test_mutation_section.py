"""The dossier shows each product's mutation score and survivors from a saved
``limitcase mutate --json`` run; a file that is not one is refused with its path named."""

import json

import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.errors import InputError
from limitcase.document import load_mutations


def _mutate_json(path):
    doc = {
        "tool": "limitcase",
        "command": "mutate",
        "score": 0.75,
        "products": [
            {"product": "EuropeanCall", "module": "limitcase_payoffs.vanilla", "family": "vanilla", "mutants": 5,
             "caught": 2, "error": 1, "survived": 1, "equivalent": 1, "discarded": 0, "score": 0.75,
             "false_alarm": False}
        ],
        "mutants": [
            {"product": "EuropeanCall", "status": "survived", "operator": "compare_strict",
             "location": "payoffs/vanilla.py:42", "diff": "-    a < b\n+    a <= b", "suggestion": "pin a path on the strike"},
            {"product": "EuropeanCall", "status": "caught", "operator": "sign", "location": "payoffs/vanilla.py:42",
             "diff": "", "suggestion": ""},
        ],
    }
    path.write_text(json.dumps(doc))
    return path


def test_scores_and_survivors_are_read(tmp_path):
    m = load_mutations(_mutate_json(tmp_path / "m.json"))
    assert m.scores["EuropeanCall"].score == 0.75
    assert [s["operator"] for s in m.survivors["EuropeanCall"]] == ["compare_strict"]


def test_not_a_mutation_file_is_refused(tmp_path):
    bad = tmp_path / "check.json"
    bad.write_text(json.dumps({"command": "check", "cases": []}))
    with pytest.raises(InputError, match="check.json: not a 'limitcase mutate --json' file"):
        load_mutations(bad)


def test_report_pages_show_the_score(tmp_path):
    out = tmp_path / "dossier"
    r = CliRunner().invoke(main, ["report", "--select", "EuropeanCall", "--paths", "2048", "--points", "2",
                                  "--no-audits", "-o", str(out), "--mutations", str(_mutate_json(tmp_path / "m.json"))])
    assert r.exit_code == 0, r.output
    page = (out / "EuropeanCall.html").read_text()
    assert "Mutation testing" in page and "75.0%: 2 caught, 1 by an error, 1 survived of 4" in page
    assert "pin a path on the strike" in page
    assert "mutation score" in (out / "index.html").read_text()
    assert "## Mutation testing" in (out / "EuropeanCall.md").read_text()
