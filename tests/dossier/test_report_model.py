"""``limitcase report --model``: the dossier of products under a model of the user's choice
(issue: every command that checks products takes a model)."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main

ROOT = Path(__file__).resolve().parents[2]


def test_report_runs_the_products_under_the_given_model(tmp_path):
    out = tmp_path / "dossier"
    r = CliRunner().invoke(main, ["report", str(ROOT / "payoffs" / "vanilla.py"), "--model", "heston:vol_of_vol=0.3",
                                  "--paths", "4096", "--points", "3", "--no-audits", "-o", str(out),
                                  "--select", "EuropeanCall"])
    assert r.exit_code == 0, r.output
    page = (out / "EuropeanCall.html").read_text(encoding="utf-8")
    assert "Heston(" in page and "vol_of_vol=0.3" in page and "report --model" in page


def test_report_lists_a_product_the_model_cannot_run(tmp_path):
    out = tmp_path / "dossier"
    r = CliRunner().invoke(main, ["report", str(ROOT / "payoffs" / "multi_asset.py"), "--model", "blackscholes",
                                  "--paths", "4096", "--points", "3", "--no-audits", "-o", str(out),
                                  "--select", "SpreadCall"])
    page = (out / "SpreadCall.html").read_text(encoding="utf-8")
    assert "skipped under the model" in page and "simulates 1" in page
    assert r.exit_code == 1, r.output  # a product that could not run is not a pass
