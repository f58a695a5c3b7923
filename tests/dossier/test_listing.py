"""`limitcase list`: products, parameters with ranges, reductions and relations."""

from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main
from limitcase.loader import load_products

HERE = Path(__file__).resolve().parent
FORMULAS = HERE / "formula_products.py"


def test_text_listing_of_a_file():
    r = CliRunner().invoke(main, ["list", str(FORMULAS)])
    assert r.exit_code == 0, r.output
    assert "KnockOutWithFormula" in r.output
    assert "barrier" in r.output and "(0, inf]" in r.output
    assert "barrier_to_infinity: barrier=inf, rebate=3 -> CallWithFormula (path by path)" in r.output
    n = len(load_products([FORMULAS]))
    assert f"{n} products" in r.output


def test_json_listing_round_trips_every_declaration():
    r = CliRunner().invoke(main, ["list", str(FORMULAS), "--json"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.output)
    assert doc["command"] == "list" and doc["format"] == 1
    by_name = {p["name"]: p for p in doc["products"]}
    classes = load_products([FORMULAS])
    assert set(by_name) == {c.__name__ for c in classes}
    for cls in classes:
        rec = by_name[cls.__name__]
        assert [p["name"] for p in rec["params"]] == list(cls.param_specs())
        assert [x["name"] for x in rec["reductions"]] == [red.name for red in cls.reductions]
    ko = {p["name"]: p for p in by_name["KnockOutWithFormula"]["params"]}
    assert ko["barrier"]["high"] == 1e308 and ko["barrier"]["low_open"] is True
    assert ko["monitoring"]["integer"] is True and ko["monitoring"]["range"] == "[1, 10000] integer"
    red = by_name["KnockOutWithFormula"]["reductions"][0]
    assert red["changes"] == {"barrier": 1e308, "rebate": 3.0} and red["becomes"] == "CallWithFormula"


def test_catalogue_lists_and_errors_are_per_product(tmp_path):
    bad = tmp_path / "bad_defaults.py"
    bad.write_text(
        "import numpy as np\nfrom limitcase import Param, Product\n"
        "class BadDefaults(Product):\n"
        "    strike = Param(100.0, low=0.0)\n"
        "    def _check(self):\n"
        "        raise ValueError('no defaults work')\n"
        "    def dates(self):\n        return np.array([1.0])\n"
    )
    r = CliRunner().invoke(main, ["list", str(bad), str(FORMULAS)])
    assert r.exit_code == 0, r.output
    assert "BadDefaults" in r.output and "ERROR cannot be built at its defaults" in r.output
    assert "CallWithFormula" in r.output


def test_missing_path_exits_two():
    r = CliRunner().invoke(main, ["list", "no/such/folder"])
    assert r.exit_code == 2 and "no such file" in r.output
