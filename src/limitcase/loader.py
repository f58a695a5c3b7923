"""Find Product classes in files, folders and the shipped catalogue.

A file is imported as a module of its own; a product defined in it is collected when its
class is defined in that file (imported base products are not collected twice) and is not
marked ``abstract = True``. Files inside the shipped catalogue are imported under the
catalogue's package name, so that they and an installed copy are one and the same.
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import inspect
import pkgutil
import sys
import traceback
from pathlib import Path
from types import ModuleType
from typing import Iterable, Sequence

from .errors import InputError
from .product import Product

__all__ = ["catalogue_dir", "load_products", "products_in_module"]

CATALOGUE_PACKAGE = "limitcase_payoffs"


def catalogue_dir() -> Path:
    """Folder of the shipped catalogue (the top-level ``payoffs/`` of the project)."""
    pkg = importlib.import_module(CATALOGUE_PACKAGE)
    return Path(next(iter(pkg.__path__))).resolve()


def products_in_module(module: ModuleType) -> list[type[Product]]:
    """Product classes defined in ``module`` (not imported into it), in source order."""
    found = []
    for _, obj in inspect.getmembers(module, inspect.isclass):
        if issubclass(obj, Product) and obj.__module__ == module.__name__ and not obj.abstract:
            found.append(obj)
    found.sort(key=_source_line)
    return found


def _source_line(c: type) -> int:
    """Line where ``c`` is defined (0 when its source cannot be found), for source order."""
    try:
        return inspect.getsourcelines(c)[1]
    except (OSError, TypeError):
        return 0


def _import_file(path: Path) -> ModuleType:
    cat = catalogue_dir()
    if path.parent == cat:
        name = f"{CATALOGUE_PACKAGE}.{path.stem}"
        try:
            return importlib.import_module(name)
        except Exception as exc:
            raise InputError(_import_message(path, exc)) from exc
    digest = hashlib.sha1(str(path).encode()).hexdigest()[:8]
    name = f"limitcase_user_{path.stem}_{digest}"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, path)
    if spec is None or spec.loader is None:
        raise InputError(f"{path}: cannot be imported as a Python module")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    try:
        spec.loader.exec_module(module)
    except Exception as exc:
        del sys.modules[name]
        raise InputError(_import_message(path, exc)) from exc
    return module


def _import_message(path: Path, exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    line = next((f.lineno for f in reversed(tb) if Path(f.filename).resolve() == path), None)
    where = f"{path}:{line}" if line else str(path)
    return f"{where}: the file does not import: {type(exc).__name__}: {exc}"


def _files(paths: Iterable[Path]) -> list[Path]:
    files: list[Path] = []
    for p in paths:
        if not p.exists():
            raise InputError(f"{p}: no such file or folder")
        if p.is_dir():
            files.extend(sorted(f for f in p.rglob("*.py") if not f.name.startswith("_")))
        elif p.suffix == ".py":
            files.append(p)
        else:
            raise InputError(f"{p}: not a Python file (.py) or a folder of them")
    return [f.resolve() for f in files]


def load_products(paths: Sequence[str | Path] = ()) -> list[type[Product]]:
    """Product classes from the given files/folders, or the shipped catalogue if none.

    Raises :class:`InputError` naming the path (and line) for a missing path or a file that
    does not import.
    """
    if not paths:
        pkg = importlib.import_module(CATALOGUE_PACKAGE)
        modules = []
        for info in sorted(pkgutil.iter_modules(pkg.__path__), key=lambda i: i.name):
            if info.name.startswith("_"):
                continue
            full = f"{CATALOGUE_PACKAGE}.{info.name}"
            try:
                modules.append(importlib.import_module(full))
            except Exception as exc:
                raise InputError(_import_message(catalogue_dir() / f"{info.name}.py", exc)) from exc
    else:
        modules = [_import_file(f) for f in _files(Path(p) for p in paths)]
    seen: set[type] = set()
    out: list[type[Product]] = []
    for m in modules:
        for cls in products_in_module(m):
            if cls not in seen:
                seen.add(cls)
                out.append(cls)
    return out
