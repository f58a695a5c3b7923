"""Score arithmetic: (caught + error) / (caught + error + survived), equivalent mutants not
counted; per product, per family and overall; the JSON document and reading it back."""

from __future__ import annotations

import json

import pytest

from limitcase.errors import InputError
from limitcase.mutate import MutantResult, MutationReport, product_scores, score_of, scores_from_json


def _result(k: int, product: str, family: str, status: str) -> MutantResult:
    return MutantResult(
        id=f"{product}#{k}", product=product, module=f"pkg.{family}", family=family, operator="sign",
        description="`-` -> `+`", function=f"{product}.payoff", location=f"{family}.py:{k}", line=k, diff="",
        status=status,
    )


def _report() -> MutationReport:
    statuses = {
        ("A", "one"): ["caught"] * 6 + ["error"] * 2 + ["survived"] * 2 + ["equivalent"] * 3,
        ("B", "one"): ["caught"] * 3 + ["equivalent"],
        ("C", "two"): ["equivalent"] * 2,
    }
    results = [_result(k, p, f, s) for (p, f), ss in statuses.items() for k, s in enumerate(ss, 1)]
    return MutationReport(
        results=results, discarded=[], originals={}, settings={"paths": 100},
        false_alarms=[{"product": "B", "family": "one", "case": "x", "verdict": "fail", "message": "", "paths": 100}],
        runtime=1.0, products=[("A", "pkg.one", "one"), ("B", "pkg.one", "one"), ("C", "pkg.two", "two")],
    )


def test_score_of():
    assert score_of(6, 2, 2) == pytest.approx(0.8)
    assert score_of(0, 0, 3) == 0.0
    assert score_of(3, 0, 0) == 1.0
    assert score_of(0, 0, 0) is None  # nothing counted (all equivalent): no score


def test_report_counts_and_scores():
    r = _report()
    assert r.counts() == {"caught": 9, "error": 2, "survived": 2, "equivalent": 6, "total": 19}
    assert r.score == pytest.approx(11 / 13)
    per = product_scores(r)
    assert list(per) == ["A", "B", "C"]
    assert per["A"].score == pytest.approx(0.8) and per["A"].equivalent == 3 and per["A"].mutants == 13
    assert per["B"].score == 1.0 and per["B"].false_alarm
    assert per["C"].score is None and per["C"].equivalent == 2
    fam = r.families()
    assert fam["one"].score == pytest.approx(11 / 13) and fam["one"].false_alarm
    assert fam["two"].score is None
    assert [m.id for m in r.survivors()] == ["A#9", "A#10"]


def test_json_document_and_reading_scores_back(tmp_path):
    r = _report()
    doc = r.to_dict()
    assert doc["command"] == "mutate" and doc["score"] == pytest.approx(11 / 13)
    assert doc["counts"]["discarded"] == 0
    for m in doc["mutants"]:
        assert {"product", "operator", "location", "diff", "status", "suggestion"} <= set(m)
    path = tmp_path / "mut.json"
    path.write_text(json.dumps(doc, allow_nan=False))
    back = scores_from_json(path)
    assert back == product_scores(r)


def test_reading_something_else_is_bad_input(tmp_path):
    path = tmp_path / "other.json"
    path.write_text(json.dumps({"command": "check", "cases": []}))
    with pytest.raises(InputError, match="not a 'limitcase mutate --json' file"):
        scores_from_json(path)
    with pytest.raises(InputError, match="cannot read"):
        scores_from_json(tmp_path / "missing.json")
