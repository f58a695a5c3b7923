"""The closed-form references share no code with the Monte Carlo side (design invariant 5):
their modules import only numpy, scipy, math, typing helpers, limitcase.errors and each other.
The Fourier module is among them: it takes a model's characteristic function as a callable
and imports nothing of the models."""

from __future__ import annotations

import ast
import inspect

import pytest

import limitcase.references as refs
from limitcase.references import asians, barriers, blackscholes, digitals, exotics, fourier, lookbacks

CLOSED_FORM_MODULES = [blackscholes, digitals, barriers, asians, lookbacks, exotics, fourier]
ALLOWED_ROOTS = {"numpy", "scipy", "math", "typing", "__future__"}
ALLOWED_LIMITCASE = {"limitcase.errors"} | {m.__name__ for m in CLOSED_FORM_MODULES}


@pytest.mark.parametrize("module", CLOSED_FORM_MODULES, ids=lambda m: m.__name__)
def test_closed_form_imports(module):
    tree = ast.parse(inspect.getsource(module))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{module.__name__}: relative import"
            names = [node.module]
        else:
            continue
        for name in names:
            root = name.split(".")[0]
            if root == "limitcase":
                assert name in ALLOWED_LIMITCASE, f"{module.__name__} imports {name}"
            else:
                assert root in ALLOWED_ROOTS, f"{module.__name__} imports {name}"


def test_public_names_documented():
    closed_form_names = [n for m in CLOSED_FORM_MODULES for n in m.__all__]
    for name in closed_form_names:
        assert name in refs.__all__, name
        obj = getattr(refs, name)
        if callable(obj):
            doc = inspect.getdoc(obj) or ""
            assert "References" in doc and "Returns" in doc, f"{name} lacks a numpydoc References/Returns section"
