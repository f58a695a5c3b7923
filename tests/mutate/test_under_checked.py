"""``limitcase mutate examples/under_checked.py``: a knock-out that declares only the barrier
at infinity. Its unmutated checks pass (no false alarm), the mutants the lone reduction can
see are caught, and the survivors name the checks that are missing: a relation in + out =
vanilla or a reduction with the barrier near the spot for the barrier test, a check where
the rebate is paid, a path sitting exactly on the barrier for ``<`` against ``<=``."""

from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "under_checked.py"


def test_under_checked_example_lists_survivors_naming_the_missing_checks(tmp_path):
    out = tmp_path / "mut.json"
    r = CliRunner().invoke(main, [
        "mutate", str(EXAMPLE), "--paths", "20000", "--quick-paths", "5000", "--equivalence-paths", "4096",
        "--workers", "2", "--json", str(out), "--min-score", "0.95",
    ])
    assert r.exit_code == 1, r.output  # the score is below --min-score
    assert "FALSE ALARM" not in r.output
    assert "SURVIVED" in r.output
    doc = json.loads(out.read_text())
    assert doc["false_alarms"] == []
    assert all(o["verdict"] == "pass" for o in doc["originals"]["ThinlyCheckedUpAndOut"])
    by = {(m["operator"], m["description"]): m for m in doc["mutants"]}
    survivors = {k: m for k, m in by.items() if m["status"] == "survived"}

    # the barrier tested only at maturity survives: the advice names in + out = vanilla
    # and a reduction with the barrier near the spot
    late = survivors[("at_maturity", "`all` over the dates -> the last date only")]
    assert "in + out = vanilla" in late["suggestion"] and "barrier near the spot" in late["suggestion"]
    assert late["location"].endswith("under_checked.py:53") and late["paths"] == 20000
    assert "-        alive = np.all(obs.s < self.barrier, axis=1)" in late["diff"]

    # the rebate dropped survives: the advice is a check where the rebate is paid
    rebate = survivors[("rebate", "rebate term `self.rebate` -> `0.0`")]
    assert "barrier at the spot" in rebate["suggestion"]

    # < made <= differs only on a path exactly on the barrier: flagged, with the advice
    strict = survivors[("compare_strict", "`<` -> `<=`")]
    assert strict["edge_only"] and "zero-volatility" in strict["suggestion"]
    assert "Tie('barrier', 'above')" in strict["suggestion"] and "tie_at_barrier" in strict["suggestion"]

    # what the reduction to the European call sees is caught
    assert by[("compare_side", "`<` -> `>`")]["status"] == "caught"
    assert by[("index_shift", "index `-1` -> `-2`")]["status"] == "caught"
    assert by[("max_min", "`.maximum` -> `.minimum`")]["status"] in ("caught", "error")

    # strike and spot swapped is invisible at the declared check points (strike = spot = 100
    # in every declared check); the interior point, drawn away from the defaults, catches it
    swap = by[("strike_spot", "strike `self.strike` -> spot `obs.s0`")]
    assert swap["status"] == "caught" and any("@p" in case for case in swap["detected_by"]), swap

    counted = [m for m in doc["mutants"] if m["status"] != "equivalent"]
    detected = [m for m in counted if m["status"] in ("caught", "error")]
    assert doc["score"] == len(detected) / len(counted) < 0.95
    assert doc["products"][0]["product"] == "ThinlyCheckedUpAndOut"


def test_bad_operator_is_bad_input():
    r = CliRunner().invoke(main, ["mutate", str(EXAMPLE), "--operator", "nope"])
    assert r.exit_code == 2 and "not a mutation operator" in r.output
