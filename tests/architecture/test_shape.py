"""The shape of the package, held by tests: data flows one way.

- no import cycle among the package's modules, lazy (function-level) imports included;
- ``references/`` imports nothing of the engine or of the catalogue (every module of it);
- ``report/`` imports nothing that prices, directly or through what it imports;
- no module outside ``references/`` is over about 600 lines;
- run defaults are defined once, in :mod:`limitcase.settings`.

Where a test fails only because of work in progress on another part of the package, it is
marked ``xfail(strict=False, reason="pending: ...")``, to be removed when that work lands.
"""

from __future__ import annotations

import ast
import re

import pytest

from .imports import ROOT, chain, closure, cycles, graph, imports_of, modules

PKG = "limitcase"


def _under(prefix: str) -> list[str]:
    return sorted(m for m in modules() if m == prefix or m.startswith(prefix + "."))


def _pending(reason: str) -> pytest.MarkDecorator:
    return pytest.mark.xfail(strict=False, reason=f"pending: {reason}")


# ----------------------------------------------------------------------------------------
# the graph reader itself


def test_the_reader_sees_lazy_relative_and_absolute_imports(tmp_path, monkeypatch):
    from . import imports as reader

    pkg = tmp_path / "src" / "demo"
    (pkg / "sub").mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "a.py").write_text("from .b import thing\n")
    (pkg / "b.py").write_text("def f():\n    from demo.a import other\n    return other\nthing = 1\n")
    (pkg / "sub" / "__init__.py").write_text("")
    (pkg / "sub" / "c.py").write_text(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from ..a import thing\nfrom .. import b\n")
    (pkg / "d.py").write_text("from .sub.c import b\n")
    monkeypatch.setattr(reader, "SRC", tmp_path / "src")
    monkeypatch.setattr(reader, "ROOT", pkg)
    for fn in (reader.modules, reader.imports_of, reader.graph):
        fn.cache_clear()
    try:
        g = reader.graph()
        assert g["demo.a"] == {"demo.b"} and g["demo.b"] == {"demo.a"}  # the lazy import counts
        assert g["demo.sub.c"] == {"demo.b"}  # TYPE_CHECKING imports do not
        assert g["demo.d"] == {"demo.sub.c", "demo.sub"}  # importing sub.c runs sub/__init__.py
        assert reader.cycles(g) == [["demo.a", "demo.b"]]
    finally:
        for fn in (reader.modules, reader.imports_of, reader.graph):
            fn.cache_clear()


# ----------------------------------------------------------------------------------------
# no cycles


def test_no_import_cycle_counting_lazy_imports():
    found = cycles(graph())
    details = []
    for comp in found:
        edges = []
        for m in comp:
            for ref in imports_of(m):
                target = f"{ref.module}.{ref.name}" if f"{ref.module}.{ref.name}" in comp else ref.module
                if target in comp and target != m:
                    edges.append(f"{m}:{ref.line} imports {target}{' (lazy)' if ref.lazy else ''}")
        details.append("; ".join(sorted(set(edges))))
    assert not found, "import cycles: " + " | ".join(details)


# ----------------------------------------------------------------------------------------
# references/ stands alone


@pytest.mark.parametrize("module", _under(f"{PKG}.references"))
def test_references_import_nothing_of_the_engine_or_the_catalogue(module):
    g = graph()
    reach = closure(module, g)
    allowed = {f"{PKG}.errors"}
    outside = sorted(m for m in reach if m not in allowed and not m.startswith(f"{PKG}.references"))
    assert not outside, f"{module} reaches " + ", ".join(chain(module, m, reach) for m in outside)
    catalogue = [r for r in imports_of(module) if r.module.split(".")[0] == "limitcase_payoffs"
                 or (r.module == PKG and r.name not in (None, "errors", "references"))]
    assert not catalogue, f"{module} imports {[(r.module, r.name, r.line) for r in catalogue]}"


# ----------------------------------------------------------------------------------------
# report/ renders only

PRICING = {
    "engine", "case", "legs", "controls", "sampling", "moments", "suite", "exercise", "references",
    "models", "calibrate", "audits", "mutate", "sweep", "symbolic", "reduce", "workers", "quotes",
    "loader", "testing", "document.build", "workers",
}
"""Modules (or packages) that price, simulate, fit, load products, build checks or run
them in worker processes (``document.build`` builds the dossier's records by pricing;
``document.records`` only holds them). The library builds what report/ renders; report/
never reaches these, not even through a package's ``__init__`` (``limitcase/__init__.py``
imports the engine)."""


def _prices(module: str) -> bool:
    if module == PKG:
        return True  # limitcase/__init__.py imports the engine
    rest = module.removeprefix(PKG + ".")
    return any(rest == p or rest.startswith(p + ".") for p in PRICING)


_REPORT_PENDING: dict[str, str] = {}


@pytest.mark.parametrize(
    "module",
    [pytest.param(m, marks=_pending(_REPORT_PENDING[m])) if m in _REPORT_PENDING else m
     for m in _under(f"{PKG}.report")],
)
def test_report_imports_nothing_that_prices(module):
    reach = closure(module, graph())
    bad = sorted(m for m in reach if _prices(m))
    assert not bad, f"{module} reaches what prices: " + "; ".join(chain(module, m, reach) for m in bad[:5])


# ----------------------------------------------------------------------------------------
# module size

MAX_LINES = 600

_SIZE_PENDING: dict[str, str] = {}


def _size_params() -> list:
    out = []
    for m in modules():
        if m.startswith(f"{PKG}.references"):
            continue
        out.append(pytest.param(m, marks=_pending(_SIZE_PENDING[m])) if m in _SIZE_PENDING else m)
    return out


@pytest.mark.parametrize("module", _size_params())
def test_no_module_outside_references_is_over_600_lines(module):
    lines = modules()[module].read_text(encoding="utf-8").count("\n")
    assert lines <= MAX_LINES, f"{module} has {lines} lines (at most about {MAX_LINES}): split it by concern"


# ----------------------------------------------------------------------------------------
# defaults live in settings

_DEFAULT_NAME = re.compile(r"^(?!ROLE_)(DEFAULT_[A-Z0-9_]+|[A-Z0-9_]*_(PATHS|SEED|ALPHA|POINTS|WORKERS|METHOD))$")

_DEFAULTS_PENDING: dict[str, str] = {}


def _literal_defaults(module: str) -> list[str]:
    """Module-level constants named like a run default and assigned a literal (or an
    arithmetic of literals and other names: ``4 * BLOCK``)."""
    tree = ast.parse(modules()[module].read_text(encoding="utf-8"))
    found = []
    for node in tree.body:
        if not isinstance(node, (ast.Assign, ast.AnnAssign)) or node.value is None:
            continue
        targets = node.targets if isinstance(node, ast.Assign) else [node.target]
        names = [t.id for t in targets if isinstance(t, ast.Name) and _DEFAULT_NAME.match(t.id)]
        if names and not isinstance(node.value, (ast.Name, ast.Attribute)):
            found += [f"{n} (line {node.lineno})" for n in names]
    return found


def _defaults_params() -> list:
    out = []
    for m in modules():
        if m == f"{PKG}.settings" or m.startswith(f"{PKG}.references"):
            continue  # references/ hold numerical settings of their own methods (lattice steps)
        out.append(pytest.param(m, marks=_pending(_DEFAULTS_PENDING[m])) if m in _DEFAULTS_PENDING else m)
    return out


@pytest.mark.parametrize("module", _defaults_params())
def test_run_defaults_are_defined_only_in_settings(module):
    found = _literal_defaults(module)
    assert not found, f"{module} defines defaults of its own: {', '.join(found)}; put them in limitcase.settings"


def test_copies_not_yet_moved_agree_with_settings():
    """Until every module reads limitcase.settings, the copies elsewhere carry its values."""
    import importlib

    from limitcase import settings

    pairs = [("limitcase.report.dossier", "REPORT_PATHS", "REPORT_PATHS"),
             ("limitcase.sweep", "DEFAULT_POINTS", "REPORT_POINTS"),
             ("limitcase.mutate", "QUICK_PATHS", "MUTATE_QUICK_PATHS"),
             ("limitcase.mutate", "EQUIVALENCE_PATHS", "MUTATE_EQUIVALENCE_PATHS"),
             ("limitcase.mutate", "EQUIVALENCE_REGRESSION_PATHS", "MUTATE_EQUIVALENCE_REGRESSION_PATHS"),
             ("limitcase.calibrate", "DEFAULT_STARTS", "REPRICE_STARTS"),
             ("limitcase.calibrate", "DEFAULT_STEPS_PER_YEAR", "REPRICE_STEPS_PER_YEAR"),
             ("limitcase.calibrate", "DEFAULT_TOLERANCE_VOL", "REPRICE_TOLERANCE_VOL")]
    for module, name, setting in pairs:
        try:
            mod = importlib.import_module(module)
        except ImportError:  # moved into a package that reads settings
            continue
        if hasattr(mod, name):
            assert getattr(mod, name) == getattr(settings, setting), f"{module}.{name} != settings.{setting}"


def test_settings_is_a_bottom_layer():
    """settings (read by the CLI, the plugin and the renderers) imports only errors and streams."""
    reach = closure(f"{PKG}.settings", graph())
    assert set(reach) <= {f"{PKG}.errors", f"{PKG}.streams"}, sorted(reach)
    assert set(closure(f"{PKG}.streams", graph())) <= {f"{PKG}.errors"}


def test_reduce_does_not_import_the_engine():
    reach = closure(f"{PKG}.reduce", graph())
    engine_side = {"engine", "case", "legs", "controls", "sampling", "estimates", "suite", "exercise"}
    bad = sorted(m for m in reach if m.split(".")[1] in engine_side)
    assert not bad, "; ".join(chain(f"{PKG}.reduce", m, reach) for m in bad)


def test_the_package_root_is_where_the_tests_expect():
    assert (ROOT / "__init__.py").is_file()
