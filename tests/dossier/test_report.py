"""`limitcase report`: the dossier's pages, pictures and index, self-contained and offline."""

from __future__ import annotations

import base64
import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from limitcase.cli import main

HERE = Path(__file__).resolve().parent
FORMULAS = HERE / "formula_products.py"
ROOT = HERE.parents[1]
PNG = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def dossier(tmp_path_factory):
    out = tmp_path_factory.mktemp("dossier")
    json_path = out / "run.json"
    r = CliRunner().invoke(main, ["report", str(FORMULAS), "-o", str(out), "--paths", "4096", "--points", "4",
                                  "--no-audits", "--json", str(json_path), "--select", "WithFormula"])
    return out, r, json.loads(json_path.read_text())


def test_writes_a_page_and_a_twin_per_product_and_an_index(dossier):
    out, r, doc = dossier
    assert r.exit_code == 0, r.output
    names = ["CallWithFormula", "PutWithFormula", "AsianWithFormula", "KnockOutWithFormula"]
    for n in names:
        assert (out / f"{n}.html").is_file() and (out / f"{n}.md").is_file()
    assert (out / "index.html").is_file() and (out / "index.md").is_file()
    assert "CashDigitalAtStrikeBug" not in r.output  # --select kept the four


def test_pages_are_self_contained(dossier):
    out, _, _ = dossier
    for page in out.glob("*.html"):
        text = page.read_text()
        assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", text), page
        assert "<script" not in text and "@import" not in text
        for src in re.findall(r'<img[^>]*src="([^"]+)"', text):
            assert src.startswith("data:image/png;base64,"), (page, src[:40])
            assert base64.b64decode(src.split(",", 1)[1])[:8] == PNG


def test_index_has_a_row_per_case_of_the_run(dossier):
    out, _, doc = dossier
    index = (out / "index.html").read_text()
    rows = re.findall(r"<tr><td>(?:<a [^>]*>[^<]*</a>)?</td><td><a href=", index)
    assert len(rows) == len(doc["cases"]) > 0
    for c in doc["cases"]:
        assert f">{c['case']}</a>" in index


def test_product_page_shows_formula_parameters_sweep_and_verdicts(dossier):
    out, _, doc = dossier
    page = (out / "KnockOutWithFormula.html").read_text()
    for text in ("What it pays", "Parameters", "Limits", "barrier_to_infinity", "Convergence",
                 "(0, inf]", "Code against formula", "agree on", "recognised", "sweep values"):
        assert text in page, text
    # one sweep picture per reduction that moves a parameter, one convergence picture, formulas
    assert page.count('alt="sweep of barrier_to_infinity"') == 1
    assert page.count('alt="convergence in paths"') == 1
    assert 'alt="payoff formula"' in page
    asian = (out / "AsianWithFormula.html").read_text()
    assert "recognised" in asian and "one_fixing" in asian


def test_markdown_twins_link_pictures_that_exist(dossier):
    out, _, _ = dossier
    for md in out.glob("*.md"):
        for link in re.findall(r"!\[[^\]]*\]\(([^)]+)\)", md.read_text()):
            assert (out / link).is_file(), (md, link)
            assert (out / link).read_bytes()[:8] == PNG


def test_verdicts_match_check_with_the_same_settings(dossier, tmp_path):
    _, _, doc = dossier
    json_path = tmp_path / "check.json"
    # the classes --select kept, by name (check's --select works on product/case)
    # the dossier shows the declared checks, not check's interior points
    r = CliRunner().invoke(main, ["check", str(FORMULAS), "--paths", "4096", "--json", str(json_path),
                                  "--select", "WithFormula/", "--inner-points", "0"])
    cases = [c for c in json.loads(json_path.read_text())["cases"] if c["kind"] != "audit"]  # check's model audits
    assert [(c["product"], c["case"], c["verdict"], c["value"]) for c in cases] == \
        [(c["product"], c["case"], c["verdict"], c["value"]) for c in doc["cases"]], r.output


def test_a_formula_that_disagrees_with_the_code_fails_the_report(tmp_path):
    r = CliRunner().invoke(main, ["report", str(FORMULAS), "-o", str(tmp_path), "--paths", "1024",
                                  "--no-audits", "--select", "CashDigitalAtStrikeBug"])
    assert r.exit_code == 1, r.output
    assert "DISAGREE CashDigitalAtStrikeBug code against its formula" in r.output
    page = (tmp_path / "CashDigitalAtStrikeBug.html").read_text()
    assert 'class="badge fail"' in page


def test_failing_case_is_in_the_index_and_exit_is_one(tmp_path):
    r = CliRunner().invoke(main, ["report", str(ROOT / "examples" / "buggy_asian.py"), "-o", str(tmp_path),
                                  "--paths", "2048", "--no-audits"])
    assert r.exit_code == 1, r.output
    assert "FAIL AsianCallWithSpotFixing/one_fixing" in r.output
    index = (tmp_path / "index.html").read_text()
    assert "badge fail" in index


def test_audits_of_the_scenario_model_are_shown(tmp_path):
    pytest.importorskip("limitcase.audits")
    r = CliRunner().invoke(main, ["report", str(FORMULAS), "-o", str(tmp_path), "--paths", "1024",
                                  "--audit-paths", "20000", "--select", "CallWithFormula"])
    page = (tmp_path / "CallWithFormula.html").read_text()
    assert "martingale" in page, r.output
    assert "BlackScholes(spot=100" in (tmp_path / "index.html").read_text()


@pytest.mark.parametrize("args,match", [
    (["no/such/file.py"], "no such file"),
    ([str(FORMULAS), "--select", "Nothing"], "no product matches"),
    ([str(FORMULAS), "--points", "1"], "points"),
])
def test_bad_input_exits_two(tmp_path, args, match):
    r = CliRunner().invoke(main, ["report", *args, "-o", str(tmp_path)])
    assert r.exit_code == 2
    assert match in r.output


def test_products_that_cannot_be_built_or_stated_are_errors_and_the_rest_goes_on(tmp_path):
    src = tmp_path / "awkward.py"
    src.write_text(
        "import numpy as np\n"
        "from limitcase import Param, Product\n"
        "class NoDefaults(Product):\n"
        "    strike = Param(100.0, low=0.0)\n"
        "    def _check(self):\n"
        "        raise ValueError('no value of strike works')\n"
        "    def dates(self):\n        return np.array([1.0])\n"
        "class FormulaRaises(Product):\n"
        "    strike = Param(100.0, low=0.0)\n"
        "    def dates(self):\n        return np.array([1.0])\n"
        "    def payoff(self, obs):\n        return np.maximum(obs.s[:, -1] - self.strike, 0.0)\n"
        "    def formula(self):\n        raise RuntimeError('half-written formula')\n"
    )
    out = tmp_path / "d"
    r = CliRunner().invoke(main, ["report", str(src), "-o", str(out), "--paths", "2048", "--no-audits"])
    assert r.exit_code == 1, r.output
    assert "ERROR NoDefaults: NoDefaults cannot be built at its defaults" in r.output
    assert "ERROR FormulaRaises: FormulaRaises.formula() raised RuntimeError: half-written formula" in r.output
    assert "no value of strike works" in (out / "index.html").read_text()
    assert (out / "FormulaRaises.html").is_file() and (out / "img" / "FormulaRaises-convergence.png").is_file()


def test_a_discretised_scenario_gets_a_time_step_picture(tmp_path):
    pytest.importorskip("limitcase.models.heston")
    src = tmp_path / "on_heston.py"
    src.write_text(
        "import numpy as np\n"
        "from limitcase import Param, Product\n"
        "from limitcase.models.heston import Heston\n"
        "class CallOnHeston(Product):\n"
        "    strike = Param(100.0, low=0.0)\n"
        "    def dates(self):\n        return np.array([0.5, 1.0])\n"
        "    def payoff(self, obs):\n        return np.maximum(obs.s[:, -1] - self.strike, 0.0)\n"
        "    def scenario(self):\n        return Heston()\n"
    )
    out = tmp_path / "d"
    r = CliRunner().invoke(main, ["report", str(src), "-o", str(out), "--paths", "2048", "--no-audits"])
    page = (out / "CallOnHeston.html").read_text()
    assert 'alt="convergence in the time step"' in page, r.output
    assert (out / "img" / "CallOnHeston-steps.png").read_bytes()[:8] == PNG
