"""Statements of docs/product-api.md and docs/model-api.md about the command line "at this
version" stay true: when the command line changes, these fail and point at the sentence to
update."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from limitcase.cli import main

DOCS = Path(__file__).resolve().parents[2] / "docs"


def test_commands_that_check_products_have_no_model_option_as_documented() -> None:
    text = (DOCS / "product-api.md").read_text(encoding="utf-8")
    claim = "(they have no model option yet)"
    with_model = [name for name in ("check", "report", "mutate")
                  if any(p.name == "model" or "--model" in getattr(p, "opts", ()) for p in main.commands[name].params)]
    if claim in text:
        assert not with_model, (f"docs/product-api.md says {claim!r} but {with_model} now take --model: "
                                "update the scenario section")


def test_audit_accepts_only_shipped_model_names_as_documented(tmp_path: Path) -> None:
    text = (DOCS / "model-api.md").read_text(encoding="utf-8")
    claim = "At this version `limitcase audit` accepts only the shipped models' names"
    model_file = tmp_path / "my_model.py"
    model_file.write_text(
        "import numpy as np\n"
        "from limitcase import BlackScholes\n"
        "class MyCopy(BlackScholes):\n"
        "    pass\n"
    )
    result = CliRunner().invoke(main, ["audit", str(model_file), "--paths", "8192", "--only", "martingale"])
    if claim in text:
        assert result.exit_code == 2 and "unknown model" in result.output, (
            f"docs/model-api.md says {claim!r} but `limitcase audit FILE.py` now gives exit "
            f"{result.exit_code}: {result.output[:300]}; update the last section of model-api.md"
        )
