"""The contract between modules is their ``__all__``: every name one module of the package
imports from another (``from limitcase.x import name`` or ``from .x import name``, lazy
imports included) is listed in ``x.__all__``, and every listed name exists.

One exception, kept narrow: inside ``references/`` the modules share private input checks
and a type alias (underscore names, ``ArrayLike``). Those are the package's own
plumbing, not a contract with the rest of the house; listing them in ``__all__`` would
make them public reference functions (``limitcase.references.__all__`` is the documented
API, tested apart)."""

from __future__ import annotations

import importlib

import pytest

from .imports import declared_all, imports_of, modules

PKG = "limitcase"


def _imported_names() -> dict[str, dict[str, list[str]]]:
    """For each module of ours imported from: name -> the importers (``module:line``)."""
    ours = modules()
    out: dict[str, dict[str, list[str]]] = {}
    for importer in ours:
        for ref in imports_of(importer):
            if ref.module not in ours or ref.name is None or ref.name == "*":
                continue
            if f"{ref.module}.{ref.name}" in ours:  # a submodule, not a name
                continue
            if ref.name.startswith("__") and ref.name.endswith("__"):  # __version__
                continue
            if _package_internal(importer, ref.module, ref.name):
                continue
            out.setdefault(ref.module, {}).setdefault(ref.name, []).append(f"{importer}:{ref.line}")
    return out


_INTERNAL_PACKAGES = (f"{PKG}.references",)


def _package_internal(importer: str, module: str, name: str) -> bool:
    """A private helper (or the ``ArrayLike`` alias) one module of ``references/`` takes
    from another: plumbing inside the package, not part of its contract."""
    inside = any(importer.startswith(p + ".") and module.startswith(p + ".") for p in _INTERNAL_PACKAGES)
    return inside and (name.startswith("_") or name == "ArrayLike")


_PENDING: dict[str, str] = {}

_USED = _imported_names()


@pytest.mark.parametrize(
    "module",
    [pytest.param(m, marks=pytest.mark.xfail(strict=False, reason=f"pending: {_PENDING[m]}")) if m in _PENDING
     else m for m in sorted(_USED)],
)
def test_every_imported_name_is_in_the_modules_all(module):
    listed = declared_all(module)
    assert listed is not None, f"{module} has no literal __all__ but others import {sorted(_USED[module])} from it"
    missing = {name: where for name, where in _USED[module].items() if name not in listed}
    assert not missing, f"{module}.__all__ lacks " + "; ".join(
        f"{name} (imported at {', '.join(where)})" for name, where in sorted(missing.items()))


@pytest.mark.parametrize("module", sorted(m for m in modules() if declared_all(m) is not None))
def test_every_name_in_all_exists(module):
    mod = importlib.import_module(module)
    absent = [name for name in declared_all(module) or () if not hasattr(mod, name)]
    assert not absent, f"{module}.__all__ names what it does not define: {absent}"


def test_modules_others_import_from_declare_all():
    """Every module another one imports names from has an ``__all__`` (the check above
    then ties it to what is used)."""
    without = sorted(m for m in _USED if declared_all(m) is None)
    assert not without, f"modules imported from without __all__: {without}"
