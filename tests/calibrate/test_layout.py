"""The shape of the calibration and repricing code: the calibration does not depend on the
shipped catalogue, its renderers import nothing that prices, and its Heston pricer is the
reference library's."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import limitcase

SRC = Path(limitcase.__file__).parent
PRICING = {"engine", "sampling", "models", "suite", "references", "calibrate", "audits", "exercise", "reduce",
           "mutate", "quotes", "verdict", "sweep", "symbolic"}


def _imports(path: Path) -> set[str]:
    """Every module a file imports (top level or inside functions), relative ones resolved
    against the ``limitcase`` package."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    pkg = path.relative_to(SRC.parent).with_suffix("").parts[:-1]
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            base = list(pkg[: len(pkg) - node.level + 1]) if node.level else []
            mod = ".".join(base + ([node.module] if node.module else []))
            out.add(mod)
            if node.module is None:
                out |= {f"{mod}.{a.name}" for a in node.names}
    return out


def test_calibrate_does_not_import_the_shipped_catalogue():
    code = ("import sys, limitcase.calibrate, limitcase.commands.reprice; "
            "print(any(m.startswith('limitcase_payoffs') for m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"
    for f in (SRC / "calibrate").glob("*.py"):
        assert not any(m.startswith("limitcase_payoffs") for m in _imports(f)), f


def test_reprice_and_audit_renderers_import_nothing_that_prices():
    for name in ("reprice.py", "audit.py"):
        mods = _imports(SRC / "report" / name)
        bad = {m for m in mods if m.startswith("limitcase.") and m.split(".")[1] in PRICING}
        assert not bad, (name, bad)


def test_no_module_of_the_calibration_audits_or_quotes_is_over_600_lines():
    files = [*(SRC / "calibrate").glob("*.py"), *(SRC / "audits").glob("*.py"), *(SRC / "quotes").glob("*.py"),
             SRC / "commands" / "reprice.py", SRC / "commands" / "audit.py", SRC / "report" / "reprice.py",
             SRC / "report" / "audit.py"]
    long = {f.name: n for f in files if (n := len(f.read_text(encoding="utf-8").splitlines())) > 600}
    assert not long


def test_one_heston_characteristic_function():
    from limitcase import calibrate
    from limitcase.references import heston

    assert calibrate.heston_log_cf is heston.heston_log_cf
    assert calibrate.heston_lewis_prices is heston.heston_lewis_prices
    for f in (SRC / "calibrate").glob("*.py"):
        text = f.read_text(encoding="utf-8")
        assert "def heston_log_cf" not in text and "np.sqrt(a * a" not in text, f
