"""Find Product and Model classes in files, folders and the shipped catalogue.

A file is imported as a module of its own; a class defined in it is collected when it is
defined in that file (imported base classes are not collected twice) and is not marked
``abstract = True``. Files inside the shipped catalogue are imported under the catalogue's
package name, so that they and an installed copy are one and the same.

``PATH.py:ClassName`` picks one class of a file. A folder is searched recursively for
``.py`` files, skipping what is not the user's product or model code: hidden folders,
``__pycache__``, virtual environments (a folder holding ``pyvenv.cfg``), ``site-packages``,
``setup.py``, ``conftest.py``, test files (``test_*.py``, ``*_test.py``) and files whose
name starts with ``_``.

The folder of each file is put on ``sys.path`` (at its end) before the file is imported, as
it is for a script, so a file may import a helper module kept beside it.

A file that does not import (it raises, or even calls ``sys.exit`` at import) never ends
the run: it becomes a :class:`LoadFailure` naming the file and line, and the other files
are still loaded (when the caller passes ``failures=``; otherwise the first one is raised as
:class:`~limitcase.errors.InputError`).
"""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import inspect
import os
import pkgutil
import sys
import traceback
from dataclasses import dataclass
from pathlib import Path
from types import ModuleType
from typing import Iterable, Sequence, TypeVar

from .errors import InputError
from .product import Product

__all__ = [
    "catalogue_dir",
    "load_products",
    "load_models",
    "products_in_module",
    "classes_in_module",
    "LoadFailure",
    "split_selector",
    "qualified_names",
    "folder_files",
]

CATALOGUE_PACKAGE = "limitcase_payoffs"

SKIPPED_FOLDERS = frozenset({"__pycache__", "site-packages", "node_modules"})
"""Folders never searched (besides hidden ones and virtual environments)."""

SKIPPED_FILES = frozenset({"setup.py", "conftest.py"})

T = TypeVar("T", bound=type)


@dataclass(frozen=True)
class LoadFailure:
    """A file found in a folder that could not be imported; ``message`` names the file and
    line and says what went wrong."""

    path: Path
    message: str


def catalogue_dir() -> Path:
    """Folder of the shipped catalogue (the top-level ``payoffs/`` of the project)."""
    pkg = importlib.import_module(CATALOGUE_PACKAGE)
    return Path(next(iter(pkg.__path__))).resolve()


def classes_in_module(module: ModuleType, base: type[T]) -> list[T]:
    """Subclasses of ``base`` defined in ``module`` (not imported into it), not abstract,
    in source order."""
    found = []
    for _, obj in inspect.getmembers(module, inspect.isclass):
        if (issubclass(obj, base) and obj is not base and obj.__module__ == module.__name__
                and not getattr(obj, "abstract", False)):
            found.append(obj)
    found.sort(key=_source_line)
    return found


def products_in_module(module: ModuleType) -> list[type[Product]]:
    """Product classes defined in ``module`` (not imported into it), in source order."""
    return classes_in_module(module, Product)


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
        except KeyboardInterrupt:
            raise
        except BaseException as exc:  # SystemExit too: a file must not end the run
            raise InputError(_import_message(path, exc)) from exc
    root = _package_root(path)
    if root is not None:
        return _import_in_package(path, root)
    digest = hashlib.sha1(str(path).encode()).hexdigest()[:8]
    name = f"limitcase_user_{path.stem}_{digest}"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, path)
    if spec is None or spec.loader is None:
        raise InputError(f"{path}: cannot be imported as a Python module")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    folder = str(path.parent)
    if folder not in sys.path:  # as for a script: modules beside the file can be imported
        sys.path.append(folder)
    try:
        spec.loader.exec_module(module)
    except KeyboardInterrupt:
        del sys.modules[name]
        raise
    except BaseException as exc:  # SystemExit too: a file must not end the run
        del sys.modules[name]
        raise InputError(_import_message(path, exc)) from exc
    return module


def _package_root(path: Path) -> Path | None:
    """The top folder of the package ``path`` belongs to (the highest folder above it whose
    chain down to the file holds ``__init__.py`` files), or None for a loose file."""
    root, d = None, path.parent
    while (d / "__init__.py").is_file():
        root, d = d, d.parent
    return root


def _import_in_package(path: Path, root: Path) -> ModuleType:
    """Import a file of the user's package as a submodule, so that its relative imports
    (``from .common import ...``) work as they do in the user's own code. The package is
    registered under a name of its own (the folder's name and a digest of its path), so two
    packages of the same name in different places do not collide."""
    digest = hashlib.sha1(str(root).encode()).hexdigest()[:8]
    stem = "".join(c if c.isalnum() or c == "_" else "_" for c in root.name)
    top = f"limitcase_user_pkg_{stem}_{digest}"
    try:
        if top not in sys.modules:
            spec = importlib.util.spec_from_file_location(top, root / "__init__.py",
                                                          submodule_search_locations=[str(root)])
            if spec is None or spec.loader is None:
                raise InputError(f"{root / '__init__.py'}: cannot be imported as a Python package")
            package = importlib.util.module_from_spec(spec)
            sys.modules[top] = package
            try:
                spec.loader.exec_module(package)
            except BaseException:
                del sys.modules[top]
                raise
        parts = path.relative_to(root).with_suffix("").parts
        return importlib.import_module(".".join((top, *parts)))
    except KeyboardInterrupt:
        raise
    except InputError:
        raise
    except BaseException as exc:  # SystemExit too: a file must not end the run
        failed = path if path.exists() else root / "__init__.py"
        raise InputError(_import_message(failed, exc)) from exc


def _import_message(path: Path, exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    line = next((f.lineno for f in reversed(tb) if Path(f.filename).resolve() == path), None)
    if line is None and isinstance(exc, SyntaxError) and exc.lineno:
        line = exc.lineno
    where = f"{path}:{line}" if line else str(path)
    if str(exc).startswith(f"{path}:"):  # a declaration error that already names the file and line
        return f"{exc} (so the file does not import)"
    if isinstance(exc, SystemExit):
        return (f"{where}: the file does not import: it calls sys.exit({exc.code!r}) at import; "
                "put script code under if __name__ == \"__main__\":")
    return f"{where}: the file does not import: {type(exc).__name__}: {exc}"


def split_selector(text: str | Path) -> tuple[Path, str | None]:
    """``"path.py:ClassName"`` -> ``(Path("path.py"), "ClassName")``; a plain path -> ``(path, None)``."""
    s = str(text)
    head, sep, tail = s.rpartition(":")
    if sep and head.endswith(".py") and tail and "/" not in tail and "\\" not in tail:
        return Path(head), tail
    return Path(s), None


def _skipped_folder(d: Path) -> bool:
    return d.name.startswith(".") or d.name in SKIPPED_FOLDERS or (d / "pyvenv.cfg").exists()


def _skipped_file(f: Path) -> bool:
    n = f.name
    return (n.startswith(("_", ".")) or n in SKIPPED_FILES or n.startswith("test_")
            or n.endswith("_test.py"))


def folder_files(root: Path) -> list[Path]:
    """The ``.py`` files of a folder and its subfolders that are searched for classes (not
    hidden folders, virtual environments, site-packages, setup, conftest or test files)."""
    out: list[Path] = []
    for here, dirs, files in os.walk(root):
        d = Path(here)
        dirs[:] = sorted(x for x in dirs if not _skipped_folder(d / x))
        out.extend(d / f for f in sorted(files) if f.endswith(".py") and not _skipped_file(d / f))
    return sorted(out)


def _files(paths: Iterable[Path]) -> list[tuple[Path, str | None, bool]]:
    """``(file, class name or None, named explicitly)`` for each file to import."""
    files: list[tuple[Path, str | None, bool]] = []
    for raw in paths:
        p, cls = split_selector(raw)
        if not p.exists():
            raise InputError(f"{p}: no such file or folder")
        if p.is_dir():
            if cls:
                raise InputError(f"{raw}: a class can be picked from a file (file.py:Class), not a folder")
            files.extend((f.resolve(), None, False) for f in folder_files(p))
        elif p.suffix == ".py":
            files.append((p.resolve(), cls, True))
        else:
            raise InputError(f"{p}: not a Python file (.py) or a folder of them")
    return files


def _load(paths: Sequence[str | Path], base: type[T], failures: list[LoadFailure] | None) -> list[T]:
    modules: list[tuple[ModuleType, str | None, Path]] = []
    for f, cls, explicit in _files(paths):
        try:
            modules.append((_import_file(f), cls, f))
        except InputError as exc:
            if failures is None or explicit:
                raise
            failures.append(LoadFailure(f, str(exc)))
    seen: set[type] = set()
    out: list[T] = []
    what = base.__name__
    for m, cls, f in modules:
        found = classes_in_module(m, base)
        if cls is not None:
            picked = [c for c in found if c.__name__ == cls]
            if not picked:
                names = ", ".join(c.__name__ for c in found) or "none"
                raise InputError(f"{f}: no {what} class {cls!r} defined there; its {what} classes: {names}")
            found = picked
        for c in found:
            if c not in seen:
                seen.add(c)
                out.append(c)
    return out


def load_products(paths: Sequence[str | Path] = (), failures: list[LoadFailure] | None = None
                  ) -> list[type[Product]]:
    """Product classes from the given files/folders (``file.py:Class`` picks one), or the
    shipped catalogue if none.

    Raises :class:`InputError` naming the path (and line) for a missing path or a file that
    does not import; with ``failures`` given, a file found in a folder that does not import is
    appended there instead and the other files are still loaded.
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
        seen: set[type] = set()
        out: list[type[Product]] = []
        for m in modules:
            for cls in products_in_module(m):
                if cls not in seen:
                    seen.add(cls)
                    out.append(cls)
        return out
    return _load(paths, Product, failures)


def load_models(paths: Sequence[str | Path], failures: list[LoadFailure] | None = None) -> list[type]:
    """Model classes (subclasses of :class:`limitcase.models.Model`) from files/folders,
    found the way :func:`load_products` finds products (``file.py:Class`` picks one)."""
    from .models.base import Model

    return _load(paths, Model, failures)


def qualified_names(classes: Sequence[type]) -> dict[type, str]:
    """A name per class: the class name, or ``file.py::Class`` where two classes of the same
    name come from different files (the file relative to the working folder when inside it)."""
    by_name: dict[str, list[type]] = {}
    for c in classes:
        by_name.setdefault(c.__name__, []).append(c)
    out: dict[type, str] = {}
    for name, group in by_name.items():
        for c in group:
            out[c] = name if len(group) == 1 else f"{_short_file(c)}::{name}"
    return out


def _short_file(c: type) -> str:
    f = getattr(sys.modules.get(c.__module__), "__file__", None)
    if not f:
        return c.__module__
    p = Path(f).resolve()
    try:
        return str(p.relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(p)
