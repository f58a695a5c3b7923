"""The ``limitcase audit`` command: exit codes 0 / 1 / 2, the table, JSON and JUnit files."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

from click.testing import CliRunner

from limitcase.cli import main


def _run(*args):
    return CliRunner().invoke(main, ["audit", *args])


def test_one_model_passes_and_the_table_shows_every_audit():
    r = _run("BlackScholes", "--paths", "20000")
    assert r.exit_code == 0, r.output
    for case in ("martingale", "paths", "seeds", "steps_flat", "steps_limit"):
        assert f"BlackScholes  {case}" in r.output
    assert "0 fail, 0 error" in r.output and "seconds: BlackScholes" in r.output


def test_unknown_model_is_bad_input_listing_the_known_ones():
    r = _run("Bates")
    assert r.exit_code == 2
    assert "unknown model 'Bates'; the models are: BlackScholes, MultiBlackScholes, Heston, Merton" in r.output


def test_names_are_case_insensitive_and_only_selects_audits(tmp_path):
    out, xml = tmp_path / "audit.json", tmp_path / "audit.xml"
    r = _run("heston", "merton", "--only", "martingale", "--drift-correction", "--paths", "20000",
             "--json", str(out), "--junit", str(xml))
    assert r.exit_code == 0, r.output
    doc = json.loads(out.read_text())
    assert doc["command"] == "audit"
    assert [(c["product"], c["case"]) for c in doc["cases"]] == [
        ("Heston", "martingale"), ("Heston", "martingale_corrected"),
        ("Merton", "martingale"), ("Merton", "martingale_corrected")]
    assert all(c["kind"] == "audit" and c["verdict"] == "pass" for c in doc["cases"])
    assert set(doc["settings"]["timings"]) == {"Heston", "Merton"}
    suite = ET.parse(xml).getroot().find("testsuite")
    assert suite.get("name") == "limitcase audit" and suite.get("tests") == "4" and suite.get("failures") == "0"


def test_select_keeps_one_outcome():
    r = _run("Merton", "--select", "Merton/degenerations:intensity", "--paths", "20000")
    assert r.exit_code == 0, r.output
    assert "1 check: 1 pass" in r.output and "intensity_to_zero" in r.output and "jump_sizes" not in r.output


def test_an_audit_that_cannot_run_fails_the_command():
    r = _run("BlackScholes", "--only", "paths", "--paths", "5000")
    assert r.exit_code == 1, r.output
    assert "ERROR BlackScholes/paths: paths=5000 is too few for the paths audit" in r.output


def test_bad_option_values_are_usage_errors():
    assert _run("--paths", "10").exit_code == 2
    assert _run("--only", "drift").exit_code == 2


def test_the_audit_table_has_a_legend_for_rows_that_are_not_prices():
    # the paths row holds a slope, the seeds row Cochran's Q, steps_flat a price difference:
    # the legend says so; a martingale-only run (prices) needs none
    r = _run("BlackScholes", "--paths", "20000", "--only", "paths", "--only", "seeds", "--only", "martingale")
    assert r.exit_code == 0, r.output
    assert "rows that are not prices:" in r.output
    legend = r.output.split("rows that are not prices:")[1]
    assert "paths" in legend and "slope of log(standard error)" in legend and "reference -0.5" in legend
    assert "seeds" in legend and "Cochran's Q" in legend and "K - 1" in legend
    assert "steps_flat" not in legend
    r = _run("BlackScholes", "--paths", "20000", "--only", "martingale")
    assert r.exit_code == 0 and "rows that are not prices" not in r.output
