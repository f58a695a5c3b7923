"""A reference is computed from the contract's terms, never from the product's own schedule
or payoff code (a bug shared by the product and its reference would move both legs of a
check together and pass). Parsed from the catalogue's source: every ``reference`` and
``reference_source`` method, and every function or method of the same module it calls,
directly or through others, must not call the product's own ``dates``, ``exercise_dates``,
``validated_dates``, ``payoff`` or ``exercise_value``, nor the catalogue's own schedule
helpers."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

CATALOGUE = Path(__file__).resolve().parents[2] / "payoffs"
FORBIDDEN_METHODS = {"dates", "exercise_dates", "validated_dates", "payoff", "exercise_value"}
FORBIDDEN_HELPERS = {"even_dates", "period_starts"}
ROOTS = {"reference", "reference_source"}


def _called_names(fn: ast.AST) -> tuple[set[str], set[str]]:
    """(attribute names called on anything, plain names called) inside ``fn``."""
    attrs, names = set(), set()
    for node in ast.walk(fn):
        if isinstance(node, ast.Call):
            if isinstance(node.func, ast.Attribute):
                attrs.add(node.func.attr)
            elif isinstance(node.func, ast.Name):
                names.add(node.func.id)
    return attrs, names


def _violations(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    functions: dict[str, ast.AST] = {}  # module-level functions by name
    methods: dict[str, dict[str, ast.AST]] = {}  # class -> method name -> node
    bases: dict[str, list[str]] = {}
    for node in tree.body:
        if isinstance(node, ast.FunctionDef):
            functions[node.name] = node
        elif isinstance(node, ast.ClassDef):
            methods[node.name] = {n.name: n for n in node.body if isinstance(n, ast.FunctionDef)}
            bases[node.name] = [b.id for b in node.bases if isinstance(b, ast.Name)]

    def lookup(cls: str, name: str) -> ast.AST | None:
        seen = [cls]
        while seen:
            c = seen.pop(0)
            if name in methods.get(c, {}):
                return methods[c][name]
            seen.extend(bases.get(c, []))
        return None

    out = []
    for cls, own in methods.items():
        for root in ROOTS & set(own):
            stack, visited = [own[root]], set()
            while stack:
                fn = stack.pop()
                if id(fn) in visited:
                    continue
                visited.add(id(fn))
                attrs, names = _called_names(fn)
                bad = (attrs & FORBIDDEN_METHODS) | (names & FORBIDDEN_HELPERS)
                if bad:
                    out.append(f"{path.name}:{cls}.{root} reaches {getattr(fn, 'name', '?')}, which calls "
                               f"{', '.join(sorted(bad))}")
                for a in attrs:  # self.<method>() and helpers of the same class family
                    m = lookup(cls, a)
                    if m is not None and getattr(m, "name", "") not in FORBIDDEN_METHODS:
                        stack.append(m)
                for n in names:
                    if n in functions:
                        stack.append(functions[n])
    return out


def test_the_check_finds_a_reference_built_from_dates(tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text(
        "class P:\n"
        "    def dates(self):\n        return [1.0]\n"
        "    def reference(self, model):\n        return helper(self)\n"
        "def helper(p):\n    return sum(p.dates())\n"
    )
    assert _violations(bad) and "P.reference" in _violations(bad)[0]


PENDING: dict[str, str] = {}


@pytest.mark.parametrize("module", [
    pytest.param(name, marks=pytest.mark.xfail(strict=True, reason=PENDING[name])) if name in PENDING else name
    for name in sorted(p.name for p in CATALOGUE.glob("*.py") if not p.name.startswith("_"))
])
def test_catalogue_references_read_the_terms_only(module):
    assert _violations(CATALOGUE / module) == []
