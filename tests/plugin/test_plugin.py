"""The pytest plugin on a sample project (tests/plugin/sample_project): a team's own
products become test items with the verdicts of `limitcase check`, and nothing is
collected unless the project asks for it.

The expectations are the plugin's contract, checked against `limitcase check` itself run
on the same files with the same settings (same values to the last digit, same verdicts).
"""

from __future__ import annotations

import concurrent.futures.process  # noqa: F401  (see below)
import json
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.pytest_plugin import LimitcaseItem

pytest_plugins = ["pytester"]

SAMPLE = Path(__file__).resolve().parent / "sample_project"
GOOD = ["payoffs/team_asian.py::TeamAsianCall::one_fixing", "payoffs/team_asian.py::TeamAsianCall::decreasing_in_strike"]
BROKEN = "payoffs/team_broken.py::TeamBrokenAsianCall::one_fixing"


# concurrent.futures.process is imported here, before pytester snapshots sys.modules: an inner
# run that imported it first (a process pool) would have it dropped afterwards, and a later
# pool in this process would fail to pickle its work items ("not the same object").

# The inner runs leave out hypothesis' pytest plugin: pytester restores sys.modules after each
# run, and that plugin would re-import hypothesis every time (seconds per run, nothing tested).
QUIET = ("-p", "no:hypothesispytest")


def _run(project: pytest.Pytester, *args: str) -> pytest.RunResult:
    return project.runpytest(*QUIET, *args)


def _ini(project: pytest.Pytester, text: str) -> None:
    """Replace the sample project's pytest.ini (makeini would write a tox.ini beside it)."""
    (project.path / "pytest.ini").write_text(text)


@pytest.fixture
def project(pytester: pytest.Pytester) -> pytest.Pytester:
    shutil.copytree(SAMPLE, pytester.path, dirs_exist_ok=True)
    return pytester


def test_this_projects_own_run_collects_no_limitcase_items(request: pytest.FixtureRequest) -> None:
    # this project's ini does not set limitcase_payoffs: the plugin must add nothing
    assert request.config.getini("limitcase_payoffs") == []
    assert not any(isinstance(i, LimitcaseItem) for i in request.session.items)


def test_sample_project_run_collects_items_fails_the_broken_one_and_matches_check(project: pytest.Pytester) -> None:
    xml = project.path / "out.xml"
    result = _run(project, "-rA", f"--junitxml={xml}")
    # collected like any other test: counted, reported, each with its own verdict
    result.stdout.fnmatch_lines(["collected 4 items"])
    result.assert_outcomes(passed=3, failed=1)
    out = result.stdout.str()
    for nodeid in GOOD:
        assert f"PASSED {nodeid}" in out
    assert "PASSED tests/check_team.py::test_ordinary" in out
    assert f"FAILED {BROKEN}" in out
    assert "path-by-path identity broken" in out
    assert "reproduce: limitcase check" in out and "--select 'TeamBrokenAsianCall/one_fixing'" in out
    assert "Holm over the 3 limitcase item(s)" in out

    props: dict[str, dict[str, str]] = {}
    for case in ET.parse(xml).getroot().iter("testcase"):
        got = {p.get("name"): p.get("value") for p in case.iter("property")}
        if "limitcase_value" in got:
            product = case.get("classname").rsplit(".", 1)[-1]
            props[f"{product}::{case.get('name')}"] = got
    assert set(props) == {"TeamAsianCall::one_fixing", "TeamAsianCall::decreasing_in_strike",
                          "TeamBrokenAsianCall::one_fixing"}
    # the same cases through `limitcase check`, same paths and seed: one run, Holm over the 3
    json_path = project.path / "check.json"
    # the plugin runs the declared checks: check without its interior points is the same family
    r = CliRunner().invoke(main, ["check", str(project.path / "payoffs"), "--paths", "8192",
                                  "--json", str(json_path), "--inner-points", "0"])
    assert r.exit_code == 1, r.output
    everything = json.loads(json_path.read_text())["cases"]
    cases = [c for c in everything if c["kind"] != "audit"]  # the run's model audit: in both families
    assert len(cases) == 3 and len(everything) == 4
    for c in cases:
        mine = props[f"{c['product']}::{c['case']}"]
        assert mine["limitcase_verdict"] == c["verdict"]
        assert float(mine["limitcase_value"]) == c["value"]
        assert float(mine["limitcase_p_adjusted"]) == c["p_adjusted"]


def test_nothing_collected_without_the_ini_option(project: pytest.Pytester) -> None:
    _ini(project, "[pytest]\ntestpaths = tests\npython_files = check_*.py\n")
    result = _run(project, "--collect-only", "-q")
    out = result.stdout.str()
    assert "payoffs/" not in out
    result.stdout.fnmatch_lines(["*1 test collected*"])
    # the plugin is there all the same (installed through the pytest11 entry point)
    assert project.parseconfig().pluginmanager.has_plugin("limitcase")


def test_command_line_option_collects_without_ini(project: pytest.Pytester) -> None:
    _ini(project, "[pytest]\ntestpaths = tests\npython_files = check_*.py\nlimitcase_paths = 8192\n")
    result = _run(project, "--limitcase-payoffs", "payoffs/team_asian.py")
    result.assert_outcomes(passed=3)


def test_arguments_choose_which_payoff_files_are_collected(project: pytest.Pytester) -> None:
    result = _run(project, "tests/check_team.py", "payoffs/team_broken.py", "--collect-only", "-q")
    out = result.stdout.str()
    assert BROKEN in out and "tests/check_team.py::test_ordinary" in out
    assert "team_asian" not in out


def test_marker_deselects_limitcase_items(project: pytest.Pytester) -> None:
    result = _run(project, "-m", "not limitcase")
    result.assert_outcomes(passed=1, deselected=3)


def test_bad_ini_value_is_a_usage_error(project: pytest.Pytester) -> None:
    _ini(project, "[pytest]\ntestpaths = tests\npython_files = check_*.py\nlimitcase_payoffs = payoffs\nlimitcase_paths = many\n")
    result = _run(project)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*limitcase_paths = 'many'*not a whole number*"])


def test_file_that_does_not_import_fails_one_item(project: pytest.Pytester) -> None:
    (project.path / "payoffs" / "typo.py").write_text("import numpy as np\nthis is not python\n")
    result = _run(project)
    result.assert_outcomes(passed=3, failed=2)
    assert "payoffs/typo.py::import" in result.stdout.str()


CALM_MODEL = """
from limitcase.models import BlackScholes


class Calm(BlackScholes):
    '''The team's own model: Black-Scholes under another name.'''
"""


def test_ini_model_runs_every_product_under_the_teams_model(project: pytest.Pytester) -> None:
    (project.path / "models").mkdir()
    (project.path / "models" / "calm.py").write_text(CALM_MODEL)
    _ini(project, "[pytest]\ntestpaths = tests\npython_files = check_*.py\nlimitcase_payoffs = payoffs\n"
                  "limitcase_paths = 8192\nlimitcase_model = models/calm.py:Calm:vol=0.3\n")
    result = _run(project, "-rA")
    result.assert_outcomes(passed=3, failed=1)
    out = result.stdout.str()
    assert "--model " in out and "models/calm.py:Calm:vol=0.3" in out  # in the reproduce line


def test_model_of_another_asset_count_skips_with_the_reason(project: pytest.Pytester) -> None:
    result = _run(project, "-rs", "--limitcase-model", "multiblackscholes")
    result.assert_outcomes(passed=1, skipped=2)
    assert "reads 1 asset; the model MultiBlackScholes simulates 2" in result.stdout.str()


def test_bad_model_spec_fails_one_item_per_file(project: pytest.Pytester) -> None:
    result = _run(project, "--limitcase-model", "heston:kapa=2")
    result.assert_outcomes(passed=1, failed=2)
    assert "Heston has no parameter 'kapa'" in result.stdout.str()
