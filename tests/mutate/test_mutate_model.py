"""``limitcase mutate --model``: every product and mutant is checked, and compared with its
original, under the chosen model instead of its scenario."""

from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main
from limitcase.models import Heston
from limitcase.mutate.equivalence import check_points, probe_point
from limitcase.reduce import checks_for
from limitcase_payoffs.vanilla import EuropeanCall

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "capped_call.py"


def test_the_points_of_the_equivalence_comparison_are_under_the_model():
    model = Heston()
    points = check_points(EuropeanCall, model=model)
    assert points and all(isinstance(p.model, Heston) for p in points)
    assert all(isinstance(c.model, Heston) for c in checks_for(EuropeanCall, model) if c.model is not None)
    assert isinstance(probe_point(EuropeanCall, model).model, Heston)
    # without a model: the product's own scenario, as before
    assert not any(isinstance(p.model, Heston) for p in check_points(EuropeanCall))


def test_mutate_runs_under_the_model_and_records_it(tmp_path):
    out = tmp_path / "m.json"
    r = CliRunner().invoke(main, [
        "mutate", str(EXAMPLE), "--model", "heston:kappa=2", "--operator", "sign", "--paths", "1000",
        "--quick-paths", "500", "--equivalence-paths", "500", "--workers", "1", "--json", str(out)])
    assert r.exit_code in (0, 1), r.output
    assert "Traceback" not in r.output
    doc = json.loads(out.read_text())
    assert doc["settings"]["model"].startswith("Heston(") and "kappa=2" in doc["settings"]["model"]


def test_products_of_another_asset_count_are_skipped_with_the_reason(tmp_path):
    r = CliRunner().invoke(main, ["mutate", str(EXAMPLE), "--model", "MultiBlackScholes", "--workers", "1"])
    assert r.exit_code == 2, r.output
    assert "skipped CappedCall" in r.output and "simulates" in r.output
