"""The numerical references added for discrete barriers, arithmetic Asians, double barriers,
touch and binary barriers, compound options and the complex chooser share no code with the
Monte Carlo side or the catalogue: they import only numpy, scipy, math, typing helpers and
limitcase.errors, and their public functions carry numpydoc References and Returns."""

from __future__ import annotations

import ast
import importlib
import inspect

import pytest

NEW_MODULES = [
    "limitcase.references.discrete_barriers",
    "limitcase.references.arithmetic_asians",
    "limitcase.references.barrier_series",
    "limitcase.references.compound",
    "limitcase.references.corridor",
    "limitcase.references.multi_asset",
]
ALLOWED_ROOTS = {"numpy", "scipy", "math", "typing", "__future__"}
SIBLINGS = {"limitcase.references.multi_asset": {"limitcase.references.compound"}}
"""Reference modules one of them may reuse (the bivariate normal distribution function)."""
SHARED = {"limitcase.references._inputs"}
"""The package's one input check and broadcasting loop, itself held to the same imports."""


@pytest.mark.parametrize("name", [*NEW_MODULES, *sorted(SHARED)])
def test_imports_only_numerics(name):
    module = importlib.import_module(name)
    tree = ast.parse(inspect.getsource(module))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{name}: relative import"
            names = [node.module]
        else:
            continue
        for imported in names:
            root = imported.split(".")[0]
            if root == "limitcase":
                assert imported == "limitcase.errors" or imported in SHARED or imported in SIBLINGS.get(name, ()), f"{name} imports {imported}"
            else:
                assert root in ALLOWED_ROOTS, f"{name} imports {imported}"


@pytest.mark.parametrize("name", NEW_MODULES)
def test_public_functions_documented_and_exported(name):
    import limitcase.references as refs

    module = importlib.import_module(name)
    for public in module.__all__:
        assert public in refs.__all__, public
        obj = getattr(module, public)
        if callable(obj):
            doc = inspect.getdoc(obj) or ""
            assert "References" in doc and "Returns" in doc, f"{public} lacks References/Returns"
            # the terms come in as parameters: no reference function takes a product
            assert "product" not in inspect.signature(obj).parameters, public
